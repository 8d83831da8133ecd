"""The rows of each plant of a segment table, without sorting when the table is already grouped.

The engine writes a stand plant by plant, so ``plant_id`` is usually non-decreasing: each plant's
rows are then one slice (a view of the columns, no copy). Otherwise a stable ``argsort`` groups them
(rows of a plant stay in table order; a radix sort when the plant ids span fewer than 32768 values).
"""

from __future__ import annotations

import numpy as np

__all__ = ["plant_rows"]


def plant_rows(plant: np.ndarray) -> list[tuple[int, slice | np.ndarray]]:
    """``[(plant_id, rows), ...]`` in increasing plant id; ``rows`` is a slice or an int64 index array.

    Parameters
    ----------
    plant : ndarray of int, shape (n,)
        Plant of each segment.
    """
    plant = np.asarray(plant)
    if plant.size == 0:
        return []
    steps = np.diff(plant)
    if (steps >= 0).all():
        starts = np.r_[0, np.flatnonzero(steps) + 1]
        ends = np.r_[starts[1:], plant.size]
        return [(int(plant[a]), slice(int(a), int(b))) for a, b in zip(starts, ends)]
    low, high = int(plant.min()), int(plant.max())
    if high - low < 32768:  # a stable sort of 16-bit keys is a radix sort, O(n)
        by_plant = np.argsort((plant - low).astype(np.int16), kind="stable")
    else:
        by_plant = np.argsort(plant, kind="stable")
    ids, starts = np.unique(plant[by_plant], return_index=True)
    ends = np.r_[starts[1:], plant.size]
    return [(int(p), by_plant[a:b]) for p, a, b in zip(ids, starts, ends)]
