"""Nitrate-N transport and uptake in the 3D voxel soil-water column of pots and rhizoboxes.

The 3D counterpart of :func:`rootsim.capture.nitrate.nitrate_step`: advection-dispersion of dissolved
nitrate on the water flows of :func:`rootsim.capture.richards3d.voxel_water_step`, implicit (backward Euler)
and upwind, with Michaelis-Menten uptake per voxel by its root length (Michaelis & Menten 1913; the
linearised sink ``U_max L c_new / (K_m + c_old)`` of the 1D column). Dispersion per face is
``alpha |q| + theta D_w tau`` with the Millington & Quirk (1961) tortuosity ``tau = theta^(7/3) / theta_s^2``
(DOI 10.1039/tf9615701200), as in 1D. Rain and irrigation carry no nitrate; drainage at the bottom carries the
bottom cells' concentration out. The scheme is conservative by construction: the change in stored mass equals
minus uptake minus leaching up to the round-off of the sparse solve.
"""

from __future__ import annotations

import numpy as np

from .nitrate import NitrateParameters
from .richards3d import VoxelGrid, _faces

__all__ = ["voxel_nitrate_step"]


def voxel_nitrate_step(mass_mg: np.ndarray, dt_days: float, *, grid: VoxelGrid, theta_old: np.ndarray,
                       theta_new: np.ndarray, saturated: np.ndarray, face_flow_cm3_per_day: np.ndarray,
                       drainage_cm3_per_day: np.ndarray, root_length_cm: np.ndarray,
                       parameters: NitrateParameters, _geometry=None):
    """Advance nitrate-N (mg N in each active voxel) by one step.

    Parameters
    ----------
    mass_mg : ndarray, shape (n_active,)
        Nitrate-N per active voxel (C order of the box), mg.
    theta_old, theta_new : ndarray, shape (n_active,)
        Volumetric water content at the start and end of the step.
    saturated : ndarray, shape (n_active,)
        Saturated water content per voxel.
    face_flow_cm3_per_day : ndarray, shape (n_faces,)
        Water flow across each interior face of ``richards3d._faces(grid)``, from its first to its second
        cell, cm³/day (the ``flow`` of the 3D solver's accepted step).
    drainage_cm3_per_day : ndarray, shape (n_bottom,)
        Water leaving each bottom cell across the bottom, cm³/day (>= 0 leaves).
    root_length_cm : ndarray, shape (n_active,)
        Root length in each voxel, cm; voxels without roots take up nothing.

    Returns
    -------
    mass : ndarray, shape (n_active,)
        mg N per voxel after the step.
    uptake_mg : ndarray, shape (n_active,)
        mg N taken up in each voxel during the step.
    leached_mg : float
        mg N leaving across the bottom during the step.
    """
    from scipy.sparse import csc_matrix
    from scipy.sparse.linalg import splu

    faces, _surface, bottom = _geometry if _geometry is not None else _faces(grid)
    n, dt, volume = mass_mg.size, float(dt_days), grid.cell_volume_cm3
    c_old = mass_mg / (theta_old * volume)
    a, b = faces.first, faces.second
    flow = np.asarray(face_flow_cm3_per_day, dtype=np.float64)
    distance = faces.area / faces.area_over_distance
    theta_face = 0.5 * (theta_new[a] + theta_new[b])
    tau = theta_face ** (7.0 / 3.0) / (0.5 * (saturated[a] + saturated[b])) ** 2
    disp = (parameters.dispersivity_cm * np.abs(flow) / faces.area
            + theta_face * parameters.diffusion_in_water_cm2_per_day * tau) * faces.area / distance
    forward, backward = np.maximum(flow, 0.0), np.maximum(-flow, 0.0)
    km = parameters.half_saturation_mg_n_per_l * 1e-3
    uptake_rate = parameters.max_uptake_mg_n_per_cm_root_per_day * root_length_cm / (km + c_old)   # cm³/day
    diag = theta_new * volume / dt + uptake_rate
    np.add.at(diag, a, forward + disp)
    np.add.at(diag, b, backward + disp)
    out = np.maximum(np.asarray(drainage_cm3_per_day, dtype=np.float64), 0.0)
    np.add.at(diag, bottom, out)
    rows = np.concatenate([a, b, np.arange(n)])
    cols = np.concatenate([b, a, np.arange(n)])
    values = np.concatenate([-(backward + disp), -(forward + disp), diag])
    matrix = csc_matrix((values, (rows, cols)), shape=(n, n))
    c_new = splu(matrix).solve(mass_mg / dt)
    mass = c_new * theta_new * volume
    uptake = uptake_rate * c_new * dt
    leached = float((out * c_new[bottom]).sum() * dt)
    return mass, uptake, leached
