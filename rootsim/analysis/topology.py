"""Branching topology: roots as chains of segments, branch points, and Fitter's indices.

A *root* (one ``root_id``) is a chain of segments, each continuing the previous one; its
first segment either starts at the plant (``parent_id == -1``) or branches from a segment
of the bearing root (a lateral). Because a parent always precedes its child in the table,
a root's segments in row order follow the chain from base to tip.

The *branching topology* has nodes at the plant base, at branch points and at root tips.
A *link* joins two successive nodes: the segments of one root between two branch points
form one link (Fitter 1986, "The topology and geometry of plant root systems: influence of
watering rate on root system topology in Trifolium pratense", Ann. Bot. 58:91-101,
doi:10.1093/oxfordjournals.aob.a087191; Fitter 1987, "An architectural approach to the
comparative ecology of plant root systems", New Phytol. 106 (Suppl.):61-77,
doi:10.1111/j.1469-8137.1987.tb04683.x; references from memory). Several laterals leaving
one point of a root share one node.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from ..errors import SegmentTableError
from .chain_walk import dense_rank, walk_chains
from .inputs import float_column, int_column

__all__ = ["RootChains", "root_chains", "BranchPoints", "branch_points", "fitter_indices",
           "mean_by_key", "interbranch_distances", "insertion_angles_deg"]

#: Branch points closer than this along a root (cm) are one node of the topology.
NODE_TOLERANCE_CM = 1e-9


@dataclass(frozen=True)
class RootChains:
    """Per-segment and per-root facts of the chains of segments.

    Attributes
    ----------
    root_index : ndarray of int, shape (n,)
        Root of each segment as 0 .. n_roots-1 (order of first appearance of ``root_id`` values sorted).
    arc_start_cm : ndarray, shape (n,)
        Distance along its root from the root's base to the segment's start, cm.
    first_segment : ndarray of int, shape (n_roots,)
        Row of each root's first (basal) segment.
    root_length_cm : ndarray, shape (n_roots,)
        Length of each root, cm.
    """

    root_index: np.ndarray
    arc_start_cm: np.ndarray
    first_segment: np.ndarray
    root_length_cm: np.ndarray

    @property
    def n_roots(self) -> int:
        return len(self.first_segment)


def root_chains(system: Any) -> RootChains:
    """Group segments into roots and measure distances along each root.

    Parameters
    ----------
    system : RootSystem, DataFrame or mapping
        Segment table (``parent_id``, ``root_id``, ``length_cm``).

    Raises
    ------
    SegmentTableError
        If a root is not a single chain (it forks, or has segments not linked to the previous one).
    """
    parent = int_column(system, "parent_id")
    root_id = int_column(system, "root_id")
    length = float_column(system, "length_cm")
    root_index, n_roots = dense_rank(root_id)
    arc_start, first, root_length, ok = walk_chains(parent, root_index, length, n_roots)
    if ok:
        return RootChains(root_index=root_index, arc_start_cm=arc_start, first_segment=first,
                          root_length_cm=root_length)
    return _sorted_root_chains(parent, root_id, length)  # raises the one-line error naming the root


def _sorted_root_chains(parent: np.ndarray, root_id: np.ndarray, length: np.ndarray) -> RootChains:
    """:func:`root_chains` by sorting the rows by root; finds the first broken root for the error message."""
    n = len(parent)
    _, root_index = np.unique(root_id, return_inverse=True)
    root_index = root_index.reshape(-1)
    order = np.argsort(root_index, kind="stable")  # by root, then by row (= along the chain)
    r_sorted = root_index[order]
    starts = np.flatnonzero(np.r_[True, r_sorted[1:] != r_sorted[:-1]]) if n else np.zeros(0, dtype=np.int64)
    same_root = np.r_[False, r_sorted[1:] == r_sorted[:-1]] if n else np.zeros(0, dtype=bool)
    # Each non-first segment of a root must continue the previous segment of that root.
    prev = np.r_[-1, order[:-1]] if n else np.zeros(0, dtype=np.int64)
    broken = same_root & (parent[order] != prev)
    if broken.any():
        bad = int(root_id[order[np.flatnonzero(broken)[0]]])
        raise SegmentTableError(
            f"segment table: root {bad} is not a single chain of segments (each segment of a root must "
            "continue the previous one; a branch must start a new root_id)")
    first = order[starts]
    first_parent = parent[first]
    continues_own_root = (first_parent >= 0) & (root_id[np.maximum(first_parent, 0)] == root_id[first])
    if continues_own_root.any():
        bad = int(root_id[first[np.flatnonzero(continues_own_root)[0]]])
        raise SegmentTableError(f"segment table: root {bad} continues itself (its first segment's parent is in the same root)")
    csum = np.cumsum(length[order])
    group_offset = np.repeat(csum[starts] - length[order][starts], np.diff(np.r_[starts, n]))
    arc_start = np.empty(n)
    arc_start[order] = csum - length[order] - group_offset
    root_length = np.add.reduceat(length[order], starts) if n else np.zeros(0)
    return RootChains(root_index=root_index, arc_start_cm=arc_start, first_segment=first, root_length_cm=root_length)


@dataclass(frozen=True)
class BranchPoints:
    """Where each lateral root leaves its bearing root.

    Attributes
    ----------
    lateral_root : ndarray of int, shape (k,)
        Root index (see :class:`RootChains`) of each lateral.
    bearing_root : ndarray of int, shape (k,)
        Root index of the root it branches from.
    position_cm : ndarray, shape (k,)
        Distance along the bearing root from its base to the branch point, cm.
    first_segment, bearing_segment : ndarray of int, shape (k,)
        Row of the lateral's first segment and of the bearing segment it starts on.
    """

    lateral_root: np.ndarray
    bearing_root: np.ndarray
    position_cm: np.ndarray
    first_segment: np.ndarray
    bearing_segment: np.ndarray


def _points(system: Any, end: str, rows: np.ndarray) -> np.ndarray:
    """Start (``end="0"``) or end (``"1"``) points of the segments ``rows``, shape (len(rows), 3), cm."""
    return np.column_stack([float_column(system, f"{axis}{end}")[rows] for axis in "xyz"])


def branch_points(system: Any, chains: RootChains | None = None) -> BranchPoints:
    """Branch points of all laterals, positioned along their bearing roots.

    The position is the bearing root's length up to the start of the bearing segment plus
    the distance along that segment to the lateral's start (its projection, clipped to the segment).
    """
    chains = root_chains(system) if chains is None else chains
    parent = int_column(system, "parent_id")
    length = float_column(system, "length_cm")
    first = chains.first_segment
    lateral = np.flatnonzero(parent[first] >= 0)
    seg = first[lateral]
    bearing = parent[seg]
    a = _points(system, "0", bearing)
    b = _points(system, "1", bearing)
    start = _points(system, "0", seg)
    ab = b - a
    denom = np.einsum("ij,ij->i", ab, ab)
    with np.errstate(divide="ignore", invalid="ignore"):
        t = np.where(denom > 0, np.einsum("ij,ij->i", start - a, ab) / denom, 1.0)
    t = np.clip(t, 0.0, 1.0)
    return BranchPoints(
        lateral_root=lateral,
        bearing_root=chains.root_index[bearing],
        position_cm=chains.arc_start_cm[bearing] + t * length[bearing],
        first_segment=seg,
        bearing_segment=bearing,
    )


def interbranch_distances(branches: BranchPoints) -> tuple[np.ndarray, np.ndarray]:
    """Distances along each bearing root between consecutive branch points, cm.

    Returns
    -------
    distance_cm : ndarray, shape (m,)
        Gap between each lateral and the next one along the same bearing root.
    lateral_root : ndarray of int, shape (m,)
        Root index of the lateral closer to the base (for grouping, e.g. by its order).
    """
    order = np.lexsort((branches.position_cm, branches.bearing_root))
    bearing = branches.bearing_root[order]
    position = branches.position_cm[order]
    same = bearing[1:] == bearing[:-1]
    return (position[1:] - position[:-1])[same], branches.lateral_root[order][:-1][same]


def insertion_angles_deg(system: Any, branches: BranchPoints) -> np.ndarray:
    """Angle between each lateral's first segment and the bearing segment it starts on, degrees (0-180).

    NaN where either segment has zero length.
    """
    u = _points(system, "1", branches.first_segment) - _points(system, "0", branches.first_segment)
    v = _points(system, "1", branches.bearing_segment) - _points(system, "0", branches.bearing_segment)
    norm = np.linalg.norm(u, axis=1) * np.linalg.norm(v, axis=1)
    with np.errstate(divide="ignore", invalid="ignore"):
        cos = np.where(norm > 0, np.einsum("ij,ij->i", u, v) / norm, np.nan)
    return np.degrees(np.arccos(np.clip(cos, -1.0, 1.0)))


def mean_by_key(values: np.ndarray, keys: np.ndarray) -> dict[str, float]:
    """Mean of ``values`` for each integer key, ignoring NaN: ``{str(key): mean}`` in key order."""
    ok = np.isfinite(values)
    values, keys = values[ok], keys[ok]
    if not values.size:
        return {}
    sums = np.bincount(keys, weights=values)
    counts = np.bincount(keys)
    return {str(k): float(sums[k] / counts[k]) for k in np.flatnonzero(counts)}


def fitter_indices(system: Any, chains: RootChains | None = None, branches: BranchPoints | None = None) -> dict[int, dict]:
    """Fitter's topological indices of each plant.

    The plant base is one node from which every root that starts at the plant leaves; each
    distinct branch point is a node; each root tip that is not itself a branch point is an
    exterior node (a root that ends exactly where laterals leave has no exterior link of its own,
    and if only one lateral leaves there, that point is no branch point).

    Returns
    -------
    dict of int to dict
        ``plant_id -> {"magnitude": μ (number of exterior links = tips), "altitude": a (links in
        the longest path from the base to a tip), "external_path_length": Pe (sum over tips of
        the links from the base), "topological_index": log(a) / log(μ) (None if μ < 2)}``.
        A herringbone system has index 1; a dichotomous one log(log2 μ + 1) / log μ
        (Fitter 1987).
    """
    chains = root_chains(system) if chains is None else chains
    branches = branch_points(system, chains) if branches is None else branches
    plant = int_column(system, "plant_id")[chains.first_segment]
    n_roots = chains.n_roots
    tol = NODE_TOLERANCE_CM

    # Node index of each branch point on its bearing root: 0 = the bearing root's base node,
    # 1, 2, ... = distinct branch positions from base to tip.
    order = np.lexsort((branches.position_cm, branches.bearing_root))
    bearing = branches.bearing_root[order]
    position = branches.position_cm[order]
    group_start = np.r_[True, bearing[1:] != bearing[:-1]] if bearing.size else np.zeros(0, dtype=bool)
    new_node = np.where(group_start, position > tol, np.r_[False, np.diff(position) > tol] if bearing.size else False)
    counts = np.cumsum(new_node)
    start_idx = np.flatnonzero(group_start)
    before = np.repeat(counts[start_idx] - new_node[start_idx], np.diff(np.r_[start_idx, bearing.size]))
    node_index = np.empty(bearing.size, dtype=np.int64)
    node_index[order] = counts - before

    n_nodes = np.zeros(n_roots, dtype=np.int64)
    np.maximum.at(n_nodes, branches.bearing_root, node_index)
    last_position = np.full(n_roots, -np.inf)
    np.maximum.at(last_position, branches.bearing_root, branches.position_cm)
    has_tip = ~((n_nodes > 0) & (last_position >= chains.root_length_cm - tol))
    # A root that ends where exactly one lateral leaves is not branched there: that lateral's first
    # link continues the root's last link.
    at_end = ~has_tip[branches.bearing_root] & (node_index == n_nodes[branches.bearing_root])
    n_at_end = np.bincount(branches.bearing_root[at_end], minlength=n_roots)
    node_index = node_index - (at_end & (n_at_end[branches.bearing_root] == 1))

    # Links from the plant base to each root's base node, resolved generation by generation.
    base_links = np.full(n_roots, -1, dtype=np.int64)
    is_lateral = np.zeros(n_roots, dtype=bool)
    is_lateral[branches.lateral_root] = True
    base_links[~is_lateral] = 0
    pending = np.arange(branches.lateral_root.size)
    while pending.size:
        ready = base_links[branches.bearing_root[pending]] >= 0
        if not ready.any():  # pragma: no cover - impossible when parents precede children
            raise SegmentTableError("segment table: branching has a cycle")
        done = pending[ready]
        base_links[branches.lateral_root[done]] = base_links[branches.bearing_root[done]] + node_index[done]
        pending = pending[~ready]

    tip_links = (base_links + n_nodes + 1)[has_tip]
    tip_plant = plant[has_tip]
    # Per-plant sums and maxima in one pass (bincount / maximum.at), then one small dict per plant.
    plants, group = np.unique(plant, return_inverse=True)
    tip_group = group[has_tip]
    magnitude = np.bincount(tip_group, minlength=plants.size)
    path_length = np.bincount(tip_group, weights=tip_links, minlength=plants.size)
    altitude = np.zeros(plants.size, dtype=np.int64)
    np.maximum.at(altitude, tip_group, tip_links.astype(np.int64))
    out = {}
    for k, p in enumerate(plants):
        mu, alt = int(magnitude[k]), int(altitude[k])
        index = float(np.log(alt) / np.log(mu)) if mu >= 2 else None
        out[int(p)] = {"magnitude": mu, "altitude": alt, "external_path_length": int(round(path_length[k])),
                       "topological_index": index}
    return out
