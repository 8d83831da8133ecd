"""One-dimensional Richards equation on a layered soil column: implicit, mass-conservative, adaptive steps.

Mixed form (Celia, Bouloutas & Zarba 1990, doi:10.1029/WR026i007p01483) on cell-centred finite volumes of
equal thickness ``cell_cm`` (depth positive downward, cell k spans ``[k, k + 1) * cell_cm``)::

    (theta_k^{t+dt} - theta_k^t) dz / dt = q_{k-1/2} - q_{k+1/2} - S_k dz
    q_{k+1/2} = K_{k+1/2} (1 - (h_{k+1} - h_k) / dz)          (downward Darcy flux, cm/day)

solved by backward Euler with the modified Picard iteration of Celia et al. (1990): theta^{m+1} is linearised
as theta^m + C^m (h^{m+1} - h^m), conductivities are lagged, each iteration is one tridiagonal solve.
Interface conductivity: arithmetic mean of the two cells (common practice). The step is accepted when the head
update and the water-content residual are below tolerance; the reported fluxes are those of the last linear
system, so the column balance (storage change = infiltration - drainage - uptake) closes to the residual
tolerance (1e-9 cm per step, far below a millimetre per day).

Top boundary (stated rule): rain and irrigation enter as a flux; if that would raise the surface head above
zero, the step is solved again with the surface held at h = 0 (ponded but without storage) and the water that
could not enter runs off at once. Bottom boundary: free drainage (unit gradient, q = K(h) of the bottom cell)
or a water table (h = 0 at the bottom face). Steps adapt within each interval: halved when the iteration fails
or water content changes by more than ``max_water_content_change`` in a step, grown by 1.3 after easy steps.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np
from scipy.linalg import solve_banded

from .errors import CaptureError

__all__ = ["BOTTOM_CONDITIONS", "WaterStep", "water_step", "advance_water", "IntervalTotals"]

BOTTOM_CONDITIONS = ("free_drainage", "water_table")
_MIN_HEAD_CM = -1e7
_CAPACITY_FLOOR_PER_CM = 1e-8


@dataclass
class WaterStep:
    """Result of one accepted time step (depths in cm of water per unit area, times in days)."""

    head_cm: np.ndarray            # (n,) pressure head at the end
    water_content: np.ndarray      # (n,) theta at the end
    face_flux_cm_per_day: np.ndarray  # (n + 1,) downward flux at faces 0 (surface) .. n (bottom)
    sink_per_day: np.ndarray       # (n,) uptake, cm³ water / cm³ soil / day
    runoff_cm_per_day: float
    iterations: int
    converged: bool


def _solve(head, theta_old, dt, soil, dz, supply, sink, bottom, surface_fixed, *, tolerance, max_iterations):
    """Modified Picard iterations for one backward-Euler step; returns (h, theta, faces, iterations, ok)."""
    n = head.size
    h = head.copy()
    storage = dz / dt
    k_saturated = soil.conductivity(np.zeros(n))
    for it in range(1, max_iterations + 1):
        theta_m = soil.water_content(h)
        # Any positive capacity leaves the converged (mixed-form) solution unchanged; a floor keeps the
        # iteration from oscillating where cells pass saturation (C -> 0).
        cap = np.maximum(soil.capacity(h), _CAPACITY_FLOOR_PER_CM)
        k = soil.conductivity(h)
        k_face = 0.5 * (k[:-1] + k[1:])           # interior faces 1 .. n-1
        coupling = k_face / dz
        diag = cap * storage
        rhs = diag * h - (theta_m - theta_old) * storage - sink * dz
        diag[1:] += coupling
        diag[:-1] += coupling
        rhs[1:] += k_face
        rhs[:-1] -= k_face
        if surface_fixed:                           # h = 0 at the surface face, half a cell above node 0
            k_top = 0.5 * (k_saturated[0] + k[0])
            diag[0] += 2.0 * k_top / dz
            rhs[0] += k_top
        else:
            k_top = 0.0
            rhs[0] += supply
        if bottom == "water_table":                 # h = 0 at the bottom face
            k_bottom = 0.5 * (k_saturated[-1] + k[-1])
            diag[-1] += 2.0 * k_bottom / dz
            rhs[-1] -= k_bottom
        else:                                       # free drainage: unit gradient
            k_bottom = k[-1]
            rhs[-1] -= k_bottom
        bands = np.zeros((3, n))
        bands[0, 1:] = -coupling
        bands[1] = diag
        bands[2, :-1] = -coupling
        try:
            new = solve_banded((1, 1), bands, rhs, check_finite=False)
        except np.linalg.LinAlgError:
            break
        if not np.isfinite(new).all():
            break
        if it > 12:  # under-relax a slowly oscillating iteration (steep K near saturation for n < 2)
            new = h + 0.5 * (new - h)
        np.maximum(new, _MIN_HEAD_CM, out=new)
        change = float((np.abs(new - h) / (1.0 + 1e-2 * np.abs(new))).max())  # relative where dry
        h = new
        theta_new = soil.water_content(h)
        faces = _face_flux(h, k_face, dz, supply, surface_fixed, k_top, bottom, k_bottom)
        balance = (theta_new - theta_old) * storage - (faces[:-1] - faces[1:]) + sink * dz
        mass_residual = float(np.abs(balance).max()) * dt
        if change < tolerance[0] and mass_residual < tolerance[1]:
            return h, theta_new, faces, it, True
    return h, None, None, max_iterations, False


def _face_flux(h, k_face, dz, supply, surface_fixed, k_top, bottom, k_bottom):
    """Downward fluxes at the n + 1 faces (cm/day) with the conductivities of the last linear system."""
    n = h.size
    faces = np.empty(n + 1)
    faces[1:-1] = k_face * (1.0 - (h[1:] - h[:-1]) / dz)
    faces[0] = k_top * (1.0 - h[0] / (0.5 * dz)) if surface_fixed else supply
    faces[-1] = k_bottom * (1.0 + h[-1] / (0.5 * dz)) if bottom == "water_table" else k_bottom
    return faces


def water_step(head_cm: np.ndarray, dt_days: float, *, soil, cell_cm: float, supply_cm_per_day: float,
               sink_per_day: np.ndarray, bottom: str = "free_drainage", head_tolerance_cm: float = 1e-3,
               water_tolerance_cm: float = 1e-9, max_iterations: int = 40, ponded_first: bool = False
               ) -> WaterStep:
    """Advance the column by one backward-Euler step of ``dt_days`` (ponding rule of the module docstring).

    Parameters
    ----------
    head_cm : ndarray, shape (n,)
        Pressure head at the start, cm.
    dt_days : float
        Step, days.
    soil : VanGenuchtenMualem or GardnerSoil
        Hydraulic functions per cell (``water_content``, ``capacity``, ``conductivity``).
    cell_cm : float
        Cell thickness, cm.
    supply_cm_per_day : float
        Rain + irrigation reaching the surface, cm/day (>= 0).
    sink_per_day : ndarray, shape (n,)
        Root water uptake, cm³ water / cm³ soil / day, held over the step.
    bottom : {"free_drainage", "water_table"}
        Bottom condition.

    Returns
    -------
    WaterStep
        ``converged`` is False when the Picard iteration did not converge (the caller shortens the step).
    """
    theta_old = soil.water_content(head_cm)
    tolerance = (head_tolerance_cm, water_tolerance_cm)
    supply = float(supply_cm_per_day)
    args = (theta_old, dt_days, soil, float(cell_cm), supply, sink_per_day, bottom)

    def attempt(surface_fixed):
        return _solve(head_cm, *args, surface_fixed, tolerance=tolerance, max_iterations=max_iterations)

    def flux_ok(result):  # the flux condition holds: converged and the surface head stays <= 0
        h, _, _, _, ok = result
        if not ok or supply <= 0.0:
            return ok
        k0 = float(soil.conductivity(h)[0])
        return h[0] + (supply / max(k0, 1e-300) - 1.0) * 0.5 * cell_cm <= 0.0

    def ponded_ok(result):  # the ponded condition holds: converged and infiltration <= supply
        return result[4] and result[2][0] <= supply

    order = (True, False) if (ponded_first and supply > 0.0) else (False, True)
    result, surface_fixed, iterations, fallback = None, False, 0, None
    for fixed in order if supply > 0.0 else (False,):
        trial = attempt(fixed)
        iterations = trial[3]
        if (ponded_ok if fixed else flux_ok)(trial):
            result, surface_fixed = trial, fixed
            break
        if not fixed and trial[4]:
            fallback = trial
    if result is None:
        if fallback is None:
            n = head_cm.size
            return WaterStep(head_cm, theta_old, np.zeros(n + 1), sink_per_day, 0.0, iterations, False)
        result = fallback  # flux solution although the surface would pond slightly: keep it (no runoff)
    h, theta, faces, _, ok = result
    runoff = supply - float(faces[0]) if surface_fixed else 0.0
    return WaterStep(head_cm=h, water_content=theta, face_flux_cm_per_day=faces, sink_per_day=sink_per_day,
                     runoff_cm_per_day=runoff, iterations=iterations, converged=ok)


@dataclass
class IntervalTotals:
    """Water (cm) moved during an interval; ``balance_error_cm`` = change in storage - (in - out)."""

    infiltration_cm: float = 0.0
    runoff_cm: float = 0.0
    drainage_cm: float = 0.0
    uptake_cm: float = 0.0
    balance_error_cm: float = 0.0
    steps: int = 0


def advance_water(head_cm: np.ndarray, duration_days: float, *, soil, cell_cm: float, supply_cm_per_day: float,
                  sink: Callable[[np.ndarray], np.ndarray], bottom: str = "free_drainage", dt_days: float = 0.05,
                  min_dt_days: float = 1e-7, max_dt_days: float = 0.25, max_water_content_change: float = 0.02,
                  on_step: Callable[[float, np.ndarray, WaterStep], None] | None = None,
                  sink_floor_head_cm: float | None = None) -> tuple[np.ndarray, IntervalTotals, float, np.ndarray]:
    """Advance the column over ``duration_days`` with constant supply, in adaptive implicit steps.

    Parameters
    ----------
    sink : callable
        ``sink(head_cm) -> ndarray (n,)`` uptake in 1/day, evaluated with the head at the start of each step.
    sink_floor_head_cm : float, optional
        Uptake in a step never takes a cell below the water content at this head (e.g. the wilting head).
    on_step : callable, optional
        ``on_step(dt_days, water_content_before, step)`` after each accepted step (used by solute transport).

    Returns
    -------
    head_cm : ndarray, shape (n,)
    totals : IntervalTotals
    dt_days : float
        Step to start the next interval with.
    uptake_cm : ndarray, shape (n,)
        Water taken up from each cell over the interval, cm.
    """
    if bottom not in BOTTOM_CONDITIONS:
        raise CaptureError(f"bottom condition {bottom!r} is unknown (allowed: {', '.join(BOTTOM_CONDITIONS)})")
    totals = IntervalTotals()
    uptake = np.zeros(head_cm.size)
    elapsed = 0.0
    dt = min(max(dt_days, min_dt_days), max_dt_days)
    h = np.asarray(head_cm, dtype=np.float64).copy()
    theta = soil.water_content(h)
    floor = None if sink_floor_head_cm is None else soil.water_content(np.full(h.size, float(sink_floor_head_cm)))
    ponded = False
    while elapsed < duration_days * (1.0 - 1e-12):
        step_dt = min(dt, duration_days - elapsed)
        s = np.asarray(sink(h), dtype=np.float64)
        if floor is not None:
            s = np.minimum(s, np.maximum(theta - floor, 0.0) * (0.5 / step_dt))
        step = water_step(h, step_dt, soil=soil, cell_cm=cell_cm, supply_cm_per_day=supply_cm_per_day,
                          sink_per_day=s, bottom=bottom, ponded_first=ponded)
        if not step.converged or np.abs(step.water_content - theta).max() > max_water_content_change:
            if step_dt <= min_dt_days:
                raise CaptureError(f"soil water: the solver cannot advance (step {step_dt:.3g} days); check the "
                                   "hydraulic parameters and inputs (allowed: physically plausible soils)")
            dt = max(step_dt * 0.5, min_dt_days)
            continue
        faces = step.face_flux_cm_per_day
        storage_change = float((step.water_content - theta).sum()) * cell_cm
        step_uptake = s * cell_cm * step_dt
        totals.infiltration_cm += float(faces[0]) * step_dt
        totals.runoff_cm += step.runoff_cm_per_day * step_dt
        totals.drainage_cm += float(faces[-1]) * step_dt
        totals.uptake_cm += float(step_uptake.sum())
        totals.balance_error_cm += storage_change - (faces[0] - faces[-1]) * step_dt + float(step_uptake.sum())
        totals.steps += 1
        uptake += step_uptake
        if on_step is not None:
            on_step(step_dt, theta, step)
        h, theta = step.head_cm, step.water_content
        ponded = step.runoff_cm_per_day > 0.0
        elapsed += step_dt
        if step_dt >= dt * (1.0 - 1e-9):   # a full step (not the interval end): maybe grow
            dt = min(dt * 1.3, max_dt_days) if step.iterations <= 6 else dt
    return h, totals, dt, uptake
