"""Size limits that turn absurd geometry options into clear errors instead of exhausted memory."""

from __future__ import annotations

import math

from .errors import RootsimError

__all__ = ["MAX_CELLS", "MAX_STEPS", "check_cell_count"]

#: Most layers, cells, increments, windows or voxels one request may create.
MAX_CELLS = 10_000_000
#: Most growth time steps one run may take.
MAX_STEPS = 2_000_000


def check_cell_count(count: float, *, what: str, noun: str = "cells") -> int:
    """Return ``count`` as an int, or raise a one-line :class:`RootsimError` if it exceeds :data:`MAX_CELLS`.

    Parameters
    ----------
    count : float
        Number of cells the request implies (may be huge or not finite).
    what : str
        What is counted and which option sets it, e.g. ``"depth layers (--layer-cm 1e-09)"``.
    noun : str
        What the count is of, in the message (default ``"cells"``; e.g. ``"increments"``).
    """
    if not math.isfinite(count) or count > MAX_CELLS:
        shown = f"{count:.3g}" if math.isfinite(count) else "infinitely many"
        raise RootsimError(f"{what} gives {shown} {noun} (allowed: at most {MAX_CELLS:,}); use a coarser size")
    return int(count)
