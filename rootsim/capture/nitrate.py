"""Nitrate: advection-dispersion with the soil-water flux, Michaelis-Menten uptake per unit root length, leaching.

Backward Euler on the cells of the water solver, in lockstep with each accepted water step::

    (theta' c' - theta c) dz / dt = F_{k-1/2} - F_{k+1/2} - U_k
    F_{k+1/2} = q+ c_k - q- c_{k+1} - D_{k+1/2} (c_{k+1} - c_k) / dz       (upwind advection, cm/day x mg/cm³)
    D = dispersivity |q| + theta D_water tau,  tau = theta^(7/3) / theta_s^2  (Millington & Quirk 1961,
        doi:10.1039/TF9615701200)
    U_k = I_max L_k / A x c'_k / (K_m + c_k)                               (Michaelis-Menten per cm of root,
        Michaelis & Menten 1913; the saturation term lagged one step, so uptake never exceeds what is there)

c is the nitrate-N concentration of the soil solution (mg N / cm³ water), L_k the root length in the cell over the
ground area A. Rain enters without nitrate; at the bottom the outflow carries c of the last cell (leaching;
inflow from a water table carries none). Fertilizer (kg N/ha) is added to the top cell at the start of its day.
The scheme is linear in c', so the nitrate balance (storage change = fertilizer - uptake - leaching) closes to
round-off. Uptake is not limited by diffusion to the root surface (bulk concentration; a stated simplification).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.linalg import solve_banded

__all__ = ["NitrateParameters", "nitrate_step", "KG_PER_HA_TO_MG_PER_CM2"]

#: 1 kg/ha = 1e6 mg / 1e8 cm².
KG_PER_HA_TO_MG_PER_CM2 = 0.01


@dataclass(frozen=True)
class NitrateParameters:
    """Transport and uptake parameters (illustrative defaults; values from memory, common practice)."""

    initial_nitrate_n_mg_per_l: float = 10.0
    dispersivity_cm: float = 5.0
    diffusion_in_water_cm2_per_day: float = 1.6
    max_uptake_mg_n_per_cm_root_per_day: float = 5e-4
    half_saturation_mg_n_per_l: float = 0.35


def nitrate_step(mass_mg_per_cm2: np.ndarray, dt_days: float, *, theta_old: np.ndarray, theta_new: np.ndarray,
                 face_flux_cm_per_day: np.ndarray, saturated: np.ndarray, cell_cm: float,
                 root_length_cm: np.ndarray, ground_area_cm2: float, parameters: NitrateParameters):
    """Advance nitrate-N (mg N per cm² of ground in each cell) by one step.

    Returns
    -------
    mass : ndarray, shape (n,)
    uptake_mg_per_cm2 : ndarray, shape (n,)
    leached_mg_per_cm2 : float
        Net nitrate-N leaving across the bottom during the step.
    """
    n, dz, dt = mass_mg_per_cm2.size, float(cell_cm), float(dt_days)
    c_old = mass_mg_per_cm2 / (theta_old * dz)
    q = face_flux_cm_per_day
    theta_face = 0.5 * (theta_new[:-1] + theta_new[1:])
    tau = theta_face ** (7.0 / 3.0) / (0.5 * (saturated[:-1] + saturated[1:])) ** 2
    disp = (parameters.dispersivity_cm * np.abs(q[1:-1]) + theta_face * parameters.diffusion_in_water_cm2_per_day
            * tau) / dz
    down, up = np.maximum(q[1:-1], 0.0), np.maximum(-q[1:-1], 0.0)
    km = parameters.half_saturation_mg_n_per_l * 1e-3
    uptake_rate = parameters.max_uptake_mg_n_per_cm_root_per_day * root_length_cm / ground_area_cm2 / (km + c_old)
    diag = theta_new * dz / dt + uptake_rate
    upper = np.zeros(n)
    lower = np.zeros(n)
    # face k+1/2 between k and k+1: out of k, into k+1
    diag[:-1] += down + disp
    upper[1:] = -(up + disp)          # coefficient of c_{k+1} in row k
    diag[1:] += up + disp
    lower[:-1] = -(down + disp)       # coefficient of c_k in row k+1
    bottom_out = max(float(q[-1]), 0.0)
    diag[-1] += bottom_out
    rhs = mass_mg_per_cm2 / dt
    bands = np.vstack([upper, diag, lower])
    c_new = solve_banded((1, 1), bands, rhs, check_finite=False)
    mass = c_new * theta_new * dz
    uptake = uptake_rate * c_new * dt
    leached = bottom_out * c_new[-1] * dt
    return mass, uptake, leached
