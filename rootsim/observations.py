"""Checks on observed RLD profiles before they are compared with simulated ones.

An observed profile (``depth_top_cm``, ``depth_bottom_cm``, ``rld_cm_per_cm3`` per row) is compared
interval by interval with the simulated profile. Replicate cores cut at the same depths are
averaged, but intervals that overlap without being equal (a file mixing 10 cm and 15 cm
increments) count the same soil twice and weight it unevenly, so they are refused.
"""

from __future__ import annotations

import numpy as np

from .errors import RootsimError

__all__ = ["check_depth_intervals"]


def check_depth_intervals(table, *, source: str) -> None:
    """Raise :class:`RootsimError` if two different depth intervals of ``table`` overlap.

    Parameters
    ----------
    table : pandas.DataFrame or mapping
        Columns ``depth_top_cm`` and ``depth_bottom_cm`` (cm, depth positive downward), shape (n,)
        each; identical intervals (replicate cores) are allowed.
    source : str
        File name shown in the message.

    Raises
    ------
    RootsimError
        One line naming the first two overlapping intervals and what is allowed.
    """
    top = np.asarray(table["depth_top_cm"], dtype=np.float64)
    bottom = np.asarray(table["depth_bottom_cm"], dtype=np.float64)
    if top.size < 2:
        return
    pairs = np.unique(np.column_stack([top, bottom]), axis=0)  # sorted by top, then bottom
    overlap = np.flatnonzero(pairs[1:, 0] < pairs[:-1, 1])
    if overlap.size:
        (t0, b0), (t1, b1) = pairs[overlap[0]], pairs[overlap[0] + 1]
        raise RootsimError(
            f"{source}: depth intervals {t0:g}-{b0:g} cm and {t1:g}-{b1:g} cm overlap (allowed: one set of "
            "non-overlapping depth increments, e.g. every core cut at 0-10, 10-20, ... cm; rows with the same "
            "interval are averaged as replicate cores)")
