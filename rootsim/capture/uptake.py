"""Root water uptake: Feddes et al. (1978) stress reduction, distributed by the root length in each layer.

Feddes, Kowalik & Zaradny (1978), *Simulation of field water use and crop yield*, Pudoc, Wageningen: the
reduction factor alpha(h) is 0 wetter than h1 (oxygen shortage), rises linearly to 1 at h2, stays 1 down to h3
and falls linearly to 0 at h4 (wilting). h3 depends on the transpiration demand: h3_high at a potential
transpiration of 5 mm/day, h3_low at 1 mm/day, linear in between (as in Feddes et al. 1978).

The potential uptake is spread over the cells in proportion to their root length (uncompensated macroscopic
sink): S_max,k = T_p L_k / (dz sum(L)); the actual sink is alpha(h_k) S_max,k. Cells without roots take up
nothing. Optionally each cm of root takes up at most ``max_uptake_cm3_per_cm_root_per_day`` (a root-length
limit on the sink). Root length per cell and day comes from the grown segment table: a segment counts from its
``birth_day`` on, split exactly at cell boundaries (:func:`rootsim.analysis.profile.depth_layer_lengths`).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..analysis.inputs import float_column
from ..analysis.profile import depth_layer_lengths
from .errors import CaptureError

__all__ = ["FeddesParameters", "feddes_reduction", "root_length_by_day", "uptake_sink"]


@dataclass(frozen=True)
class FeddesParameters:
    """Heads (cm, negative) of the Feddes et al. (1978) reduction; demands in mm/day."""

    anaerobiosis_head_cm: float = -15.0
    optimal_wet_head_cm: float = -30.0
    optimal_dry_head_high_demand_cm: float = -325.0
    optimal_dry_head_low_demand_cm: float = -600.0
    wilting_head_cm: float = -8000.0
    high_demand_mm_per_day: float = 5.0
    low_demand_mm_per_day: float = 1.0
    max_uptake_cm3_per_cm_root_per_day: float | None = None

    def check(self, where: str = "uptake") -> "FeddesParameters":
        """Raise a one-line :class:`CaptureError` unless h1 > h2 > h3_high >= h3_low > h4 and demands ordered."""
        heads = (self.anaerobiosis_head_cm, self.optimal_wet_head_cm, self.optimal_dry_head_high_demand_cm,
                 self.wilting_head_cm)
        if not (0.0 >= heads[0] > heads[1] > heads[2] > heads[3] and heads[2] >= self.optimal_dry_head_low_demand_cm
                > heads[3]):
            raise CaptureError(f"{where}: Feddes heads must satisfy 0 >= anaerobiosis_head_cm > optimal_wet_head_cm > "
                               "optimal_dry_head_high_demand_cm >= optimal_dry_head_low_demand_cm > wilting_head_cm "
                               f"(allowed: heads in cm, negative; got {heads[0]:g}, {heads[1]:g}, {heads[2]:g}, "
                               f"{self.optimal_dry_head_low_demand_cm:g}, {heads[3]:g})")
        if not (0.0 <= self.low_demand_mm_per_day < self.high_demand_mm_per_day):
            raise CaptureError(f"{where}: low_demand_mm_per_day must be below high_demand_mm_per_day "
                               "(allowed: 0 <= low < high, mm/day)")
        cap = self.max_uptake_cm3_per_cm_root_per_day
        if cap is not None and not (cap > 0.0 and np.isfinite(cap)):
            raise CaptureError(f"{where}.max_uptake_cm3_per_cm_root_per_day: {cap!r} (allowed: a number > 0)")
        return self


def feddes_reduction(head_cm: np.ndarray, parameters: FeddesParameters, *,
                     potential_mm_per_day: float) -> np.ndarray:
    """Feddes et al. (1978) reduction factor alpha(h) in [0, 1], shape of ``head_cm``."""
    p = parameters
    fraction = np.clip((potential_mm_per_day - p.low_demand_mm_per_day)
                       / (p.high_demand_mm_per_day - p.low_demand_mm_per_day), 0.0, 1.0)
    h3 = p.optimal_dry_head_low_demand_cm + fraction * (p.optimal_dry_head_high_demand_cm
                                                        - p.optimal_dry_head_low_demand_cm)
    h = np.asarray(head_cm, dtype=np.float64)
    wet = (p.anaerobiosis_head_cm - h) / (p.anaerobiosis_head_cm - p.optimal_wet_head_cm)
    dry = (h - p.wilting_head_cm) / (h3 - p.wilting_head_cm)
    return np.clip(np.minimum(wet, dry), 0.0, 1.0)


def uptake_sink(head_cm: np.ndarray, root_length_cm: np.ndarray, *, parameters: FeddesParameters,
                potential_cm_per_day: float, cell_cm: float, ground_area_cm2: float) -> np.ndarray:
    """Actual root water uptake per cell, cm³ water / cm³ soil / day, shape (n_cells,).

    Parameters
    ----------
    head_cm : ndarray, shape (n_cells,)
    root_length_cm : ndarray, shape (n_cells,)
        Root length in each cell over ``ground_area_cm2``, cm.
    potential_cm_per_day : float
        Potential transpiration, cm/day.
    cell_cm, ground_area_cm2 : float
        Cell thickness (cm) and ground area the roots belong to (cm²).
    """
    total = float(root_length_cm.sum())
    if total <= 0.0 or potential_cm_per_day <= 0.0:
        return np.zeros(head_cm.size)
    potential = potential_cm_per_day * root_length_cm / (total * cell_cm)
    sink = feddes_reduction(head_cm, parameters, potential_mm_per_day=10.0 * potential_cm_per_day) * potential
    cap = parameters.max_uptake_cm3_per_cm_root_per_day
    if cap is not None:
        sink = np.minimum(sink, cap * root_length_cm / (ground_area_cm2 * cell_cm))
    return sink


def root_length_by_day(system, *, cell_cm: float, n_cells: int, first_day: int, n_days: int) -> np.ndarray:
    """Root length per soil cell present on each day, shape (n_days, n_cells), cm.

    Row j holds the segments with ``birth_day <= first_day + j`` (counted from the end of that day's
    growth), split exactly at cell boundaries; one pass over the segments (grouped by day) and a cumulative sum.
    Roots below the column bottom are not counted. With a ``death_day`` column (``rootsim.grow(...,
    keep_dead_roots=True)``) a segment counts only while its root lives: in rows with
    ``first_day + j < death_day`` (a second grouped pass, subtracted from the day of death on).
    """
    birth = float_column(system, "birth_day")
    depth0 = -float_column(system, "z0")
    depth1 = -float_column(system, "z1")
    length = float_column(system, "length_cm")
    if n_days <= 0:
        raise CaptureError("season: no days to run (allowed: at least one day)")
    group = np.clip(np.ceil(birth - 1e-9).astype(np.int64) - first_day, 0, None)
    late = group >= n_days
    group = np.where(late, n_days, group)  # born after the season: an extra group dropped below
    per_day = depth_layer_lengths(depth0, depth1, length, layer_cm=cell_cm, n_layers=n_cells, group=group,
                                  n_groups=n_days + 1)
    present = np.cumsum(per_day[:, :n_days].T, axis=0)
    if _has_column(system, "death_day"):
        death = np.asarray(system["death_day"], dtype=np.float64)   # +inf: alive at the end
        if np.isnan(death).any() or death.shape != birth.shape:
            raise CaptureError("segment table: column death_day must hold a day or +inf for every segment "
                               "(allowed: numbers, +inf for roots alive at the end)")
        died = np.isfinite(death)
        if died.any():
            # gone from the first row whose day is at or after the death (death_day <= first_day + j)
            gone = np.clip(np.ceil(death[died] - 1e-9).astype(np.int64) - first_day, 0, n_days)
            lost = depth_layer_lengths(depth0[died], depth1[died], length[died], layer_cm=cell_cm, n_layers=n_cells,
                                       group=gone, n_groups=n_days + 1)
            present = present - np.cumsum(lost[:, :n_days].T, axis=0)
            np.maximum(present, 0.0, out=present)  # round-off of the subtraction
    return present


def _has_column(system, name: str) -> bool:
    try:
        return name in system.columns if hasattr(system, "columns") else name in system
    except TypeError:
        return False
