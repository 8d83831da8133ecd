"""Estimate ÷ truth by depth for each sampling method, with its spread: the bias and noise of a protocol.

The truth is the stand RLD of the same depth range: the exact root length between the two
depths over the stand's ground area (periodic field stands hold their whole length in their
cell, so this is also the RLD of the footprint). The units whose spread is reported are the
cores of a placement, the cells of a wall row, and the windows of tubes in a depth band.

Columns of :func:`bias_table`: ``method`` (``core_washed``, ``core_break``, ``wall``,
``tube_image``), ``group`` (a core placement or ``all``), ``depth_top_cm``,
``depth_bottom_cm``, ``units`` (cores, cells or windows), ``rld_estimate_mean_cm_per_cm3``,
``rld_estimate_standard_deviation_cm_per_cm3``, ``rld_stand_cm_per_cm3``, ``ratio_mean`` and
``ratio_standard_deviation``
(estimate ÷ stand RLD, mean and standard deviation over the units).
"""

from __future__ import annotations

from typing import Any

import numpy as np

from .columns import point_columns, segment_endpoints

__all__ = ["stand_rld", "bias_table", "BIAS_COLUMNS", "DEFAULT_TUBE_BAND_CM"]

DEFAULT_TUBE_BAND_CM = 10.0
_BLOCK = 1 << 16  # segments whose lengths are computed at a time
BIAS_COLUMNS = ("method", "group", "depth_top_cm", "depth_bottom_cm", "units", "rld_estimate_mean_cm_per_cm3",
                "rld_estimate_standard_deviation_cm_per_cm3", "rld_stand_cm_per_cm3", "ratio_mean",
                "ratio_standard_deviation")


def stand_rld(system: Any, tops: np.ndarray, bottoms: np.ndarray) -> np.ndarray:
    """True stand RLD between each pair of depths, cm cm⁻³ (exact clipping; NaN without a ground area).

    Parameters
    ----------
    system : RootSystem or DataFrame
    tops, bottoms : ndarray, shape (k,)
        Depth ranges, cm (positive downward).
    """
    from ..analysis.profile import profile_area
    from ..errors import RootsimError
    from .cylinder import interval_length, linear_parameters

    try:
        area = profile_area(system)
    except RootsimError:
        return np.full(len(tops), np.nan)
    cols = point_columns(system)
    s0, ds = -cols["z0"], cols["z0"] - cols["z1"]
    length = np.empty(len(s0))
    for start in range(0, len(s0), _BLOCK):  # the end points stacked a block at a time, not the whole table
        p0, p1 = segment_endpoints({name: values[start:start + _BLOCK] for name, values in cols.items()})
        length[start:start + _BLOCK] = np.linalg.norm(p1 - p0, axis=1)
        del p0, p1
    out = np.empty(len(tops))
    inside = np.empty(len(s0))
    for i, (top, bottom) in enumerate(zip(tops, bottoms)):
        for start in range(0, len(s0), _BLOCK):  # clipped a block at a time, summed over the whole array
            block = slice(start, start + _BLOCK)
            t_in, t_out = linear_parameters(s0[block], ds[block], float(top), float(bottom))
            inside[block] = interval_length(t_in, t_out, length[block])
        out[i] = inside.sum() / (area * (float(bottom) - float(top)))
    return out


def _rows(method: str, group: str, keys, estimate, truth_of) -> list[dict]:
    import pandas as pd

    frame = pd.DataFrame({"top": keys[0], "bottom": keys[1], "est": estimate})
    out = []
    for (top, bottom), part in frame.groupby(["top", "bottom"], sort=True):
        truth = float(truth_of(top, bottom))
        values = part["est"].to_numpy(dtype=np.float64)
        ratio = values / truth if truth > 0 else np.full(values.size, np.nan)
        out.append({"method": method, "group": group, "depth_top_cm": float(top), "depth_bottom_cm": float(bottom),
                    "units": int(values.size), "rld_estimate_mean_cm_per_cm3": float(values.mean()),
                    "rld_estimate_standard_deviation_cm_per_cm3":
                        float(values.std(ddof=1)) if values.size > 1 else float("nan"),
                    "rld_stand_cm_per_cm3": truth, "ratio_mean": float(np.mean(ratio)),
                    "ratio_standard_deviation": float(np.std(ratio, ddof=1)) if values.size > 1 else float("nan")})
    return out


def bias_table(system: Any, *, cores=None, wall=None, tube=None, tube_band_cm: float = DEFAULT_TUBE_BAND_CM):
    """Per-method table of estimate ÷ stand RLD by depth with its spread (module docstring).

    Parameters
    ----------
    system : RootSystem or DataFrame
        The sampled root system (for the stand RLD).
    cores, wall, tube : pandas.DataFrame, optional
        Outputs of :func:`sample_cores`, :func:`sample_wall`, :func:`sample_tube`.
    tube_band_cm : float
        Depth bands the tube windows are grouped into (by the depth of the window centre), cm.

    Returns
    -------
    pandas.DataFrame
        Columns :data:`BIAS_COLUMNS`.
    """
    import pandas as pd

    cache: dict[tuple[float, float], float] = {}

    def truth(top: float, bottom: float) -> float:
        key = (float(top), float(bottom))
        if key not in cache:
            cache[key] = float(stand_rld(system, np.array([top]), np.array([bottom]))[0])
        return cache[key]

    rows: list[dict] = []
    if cores is not None and len(cores):
        keys = (cores["depth_top_cm"].to_numpy(), cores["depth_bottom_cm"].to_numpy())
        for method, column in (("core_washed", "rld_washed_cm_per_cm3"), ("core_break", "rld_core_break_cm_per_cm3")):
            if column not in cores:
                continue
            for group in sorted(cores["placement"].unique()):
                sel = (cores["placement"] == group).to_numpy()
                rows += _rows(method, str(group), (keys[0][sel], keys[1][sel]), cores[column].to_numpy()[sel], truth)
            if cores["placement"].nunique() > 1:
                rows += _rows(method, "all", keys, cores[column].to_numpy(), truth)
    if wall is not None and len(wall):
        rows += _rows("wall", "all", (wall["depth_top_cm"].to_numpy(), wall["depth_bottom_cm"].to_numpy()),
                      wall["rld_estimate_cm_per_cm3"].to_numpy(), truth)
    if tube is not None and len(tube):
        centre = 0.5 * (tube["depth_top_cm"].to_numpy() + tube["depth_bottom_cm"].to_numpy())
        top = np.floor(centre / tube_band_cm) * tube_band_cm
        rows += _rows("tube_image", "all", (top, top + tube_band_cm), tube["rld_image_cm_per_cm3"].to_numpy(), truth)
    return pd.DataFrame(rows, columns=list(BIAS_COLUMNS))
