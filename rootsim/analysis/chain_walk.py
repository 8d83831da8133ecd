"""One compiled pass over the segment rows that follows every root from base to tip.

A parent always precedes its child in a segment table, so a root's segments in row order are its
chain from base to tip. :func:`walk_chains` reads the rows once and, per root, keeps its last row and
the length so far: each segment's distance from its root's base, each root's first row and length,
without sorting the rows by root. It also tells whether every root is a single chain; the caller
builds the one-line error message when it is not.
"""

from __future__ import annotations

import numpy as np
from numba import njit

__all__ = ["dense_rank", "walk_chains"]


def dense_rank(ids: np.ndarray) -> tuple[np.ndarray, int]:
    """Rank of each id among the sorted distinct ids, shape (n,), and the number of distinct ids.

    Ids in 0 .. 4n (as the engine and the RSML reader write them) are ranked with one ``bincount``
    and one ``cumsum``, O(n); other ids fall back to ``numpy.unique``.
    """
    ids = np.asarray(ids, dtype=np.int64)
    if ids.size and int(ids.min()) >= 0 and int(ids.max()) <= 4 * ids.size + 1024:
        present = np.bincount(ids) > 0
        rank = np.cumsum(present) - 1
        return rank[ids], int(rank[-1]) + 1
    uniques, inverse = np.unique(ids, return_inverse=True)
    return inverse.reshape(-1).astype(np.int64, copy=False), int(uniques.size)


@njit(cache=True)
def _walk(parent, root_index, length, n_roots):  # pragma: no cover - compiled
    n = parent.size
    last = np.full(n_roots, -1, dtype=np.int64)
    first = np.full(n_roots, -1, dtype=np.int64)
    running = np.zeros(n_roots)
    arc = np.empty(n)
    ok = True
    for i in range(n):
        r = root_index[i]
        p = parent[i]
        if last[r] < 0:
            first[r] = i
            arc[i] = 0.0
            if p >= n or (p >= 0 and root_index[p] == r):
                ok = False  # a root's first segment continues its own root
        else:
            if p != last[r]:
                ok = False  # forks, or is not linked to the root's previous segment
            arc[i] = running[r]
        running[r] = arc[i] + length[i]
        last[r] = i
    return arc, first, running, ok


def walk_chains(parent: np.ndarray, root_index: np.ndarray, length: np.ndarray, n_roots: int):
    """Distances along the chains of segments.

    Parameters
    ----------
    parent : ndarray of int64, shape (n,)
        Row of each segment's parent, −1 for none.
    root_index : ndarray of int64, shape (n,)
        Root of each segment, 0 .. n_roots − 1.
    length : ndarray of float64, shape (n,)
        Segment lengths, cm.
    n_roots : int
        Number of roots.

    Returns
    -------
    arc_start_cm : ndarray, shape (n,)
        Distance from the root's base to each segment's start, cm.
    first_segment : ndarray of int64, shape (n_roots,)
        First row of each root.
    root_length_cm : ndarray, shape (n_roots,)
        Length of each root, cm.
    ok : bool
        False if some root is not a single chain (then the other results are meaningless).
    """
    return _walk(np.ascontiguousarray(parent, dtype=np.int64), np.ascontiguousarray(root_index, dtype=np.int64),
                 np.ascontiguousarray(length, dtype=np.float64), int(n_roots))
