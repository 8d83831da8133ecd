"""Synthetic root systems for the format tests (random walks with laterals), and checks of the generator.

Imported by the other ``tests/test_formats_*.py`` modules.
"""

from __future__ import annotations

import numpy as np

from rootsim.rootsystem import RootSystem


def random_root_system(*, n_plants: int = 2, primaries: int = 3, laterals: tuple[int, ...] = (12, 20),
                       segments_per_root: tuple[int, int] = (3, 12), step_cm: tuple[float, float] = (0.2, 1.0),
                       radius_cm: tuple[float, float] = (0.02, 0.08), turn: float = 0.3,
                       joint_fraction: float = 0.3, rng=None, duration_days: float | None = 30.0) -> RootSystem:
    """A random root system in the segment-table layout.

    Primaries (order 0, parent -1) start at plant positions and walk downwards; each further
    order's laterals branch from a random segment of a random root of the previous order, at a
    random point of that segment (exactly its start or end point with probability ``joint_fraction``).
    Radius is constant per root. Vectorized over roots (one loop step per position in a root).
    """
    rng = np.random.default_rng(rng)
    positions = np.column_stack([np.arange(n_plants) * 15.0, np.zeros(n_plants), np.zeros(n_plants)])
    cols = {k: [] for k in ("parent_id", "plant_id", "root_id", "order", "root_class", "x0", "y0", "z0",
                            "x1", "y1", "z1", "radius_cm", "birth_day")}
    seg_start = []  # global id of each root's first segment
    seg_count = []
    root_plant = []
    n_seg_total = 0
    counts_by_order = (n_plants * primaries,) + tuple(laterals)
    prev_roots = None
    all_start = np.zeros((0, 3))
    all_end = np.zeros((0, 3))
    for order, count in enumerate(counts_by_order):
        k = rng.integers(segments_per_root[0], segments_per_root[1] + 1, size=count)
        first_root = len(seg_count)
        if order == 0:
            plant = np.repeat(np.arange(n_plants), primaries)
            origin = positions[plant]
            parent_seg = np.full(count, -1)
            d = np.column_stack([rng.normal(0, 0.3, count), rng.normal(0, 0.3, count), -np.ones(count)])
            birth0 = rng.uniform(0, 2, count)
        else:
            proots = rng.choice(prev_roots, size=count)
            pick = rng.integers(0, np.asarray(seg_count)[proots])
            parent_seg = np.asarray(seg_start)[proots] + pick
            plant = np.asarray(root_plant)[proots]
            # At a joint: the start (0) or the end (1) of the parent segment, which are shared points.
            frac = np.where(rng.random(count) < joint_fraction, rng.integers(0, 2, count).astype(float),
                            rng.uniform(0.1, 0.9, count))
            origin = all_start[parent_seg] + frac[:, None] * (all_end[parent_seg] - all_start[parent_seg])
            d = rng.normal(size=(count, 3))
            d[:, 2] = -np.abs(d[:, 2]) * 0.5
            birth0 = rng.uniform(5 * order, 5 * order + 10, count)
        d /= np.linalg.norm(d, axis=1, keepdims=True)
        radius = rng.uniform(*radius_cm, count) / (1 + order)
        kmax = int(k.max()) if count else 0
        starts = np.zeros((count, kmax, 3))
        ends = np.zeros((count, kmax, 3))
        p = origin.copy()
        for j in range(kmax):
            d = d + rng.normal(0, turn, size=d.shape)
            d[:, 2] -= 0.2
            d /= np.linalg.norm(d, axis=1, keepdims=True)
            step = rng.uniform(*step_cm, count)
            q = p + d * step[:, None]
            starts[:, j] = p
            ends[:, j] = q
            p = q
        mask = np.arange(kmax)[None, :] < k[:, None]
        s = starts[mask]
        e = ends[mask]
        root_ids = np.repeat(np.arange(first_root, first_root + count), k)
        local = np.concatenate([np.arange(c) for c in k]) if count else np.zeros(0, int)
        first_global = n_seg_total + np.concatenate([[0], np.cumsum(k)[:-1]]) if count else np.zeros(0, int)
        gid = n_seg_total + np.arange(len(s))
        parent = np.where(local == 0, np.repeat(parent_seg, k), gid - 1)
        cols["parent_id"].append(parent)
        cols["plant_id"].append(np.repeat(plant, k))
        cols["root_id"].append(root_ids)
        cols["order"].append(np.full(len(s), order))
        cols["root_class"].append(np.full(len(s), ["primary", "lateral", "fine_lateral", "order_3"][min(order, 3)]))
        for i, c in enumerate("xyz"):
            cols[c + "0"].append(s[:, i])
            cols[c + "1"].append(e[:, i])
        cols["radius_cm"].append(np.repeat(radius, k))
        cols["birth_day"].append(np.repeat(birth0, k) + local * 0.5)
        seg_start.extend(first_global.tolist())
        seg_count.extend(k.tolist())
        root_plant.extend(plant.tolist())
        prev_roots = np.arange(first_root, first_root + count)
        all_start = np.vstack([all_start, s])
        all_end = np.vstack([all_end, e])
        n_seg_total += len(s)
    out = {k: np.concatenate(v) for k, v in cols.items()}
    n = len(out["parent_id"])
    out["segment_id"] = np.arange(n)
    out["length_cm"] = np.linalg.norm(all_end - all_start, axis=1)
    meta = {"stand": {"n_plants": n_plants, "plant_positions_cm": positions.tolist()}}
    if duration_days is not None:
        meta["run"] = {"duration_days": duration_days, "seed": 0}
    return RootSystem(out, meta)


def root_from_points(points, *, radius_cm: float = 0.1, birth_day=None) -> RootSystem:
    """One root (order 0, starting at the plant) along the given points, shape (k + 1, 3)."""
    pts = np.asarray(points, dtype=float)
    n = len(pts) - 1
    cols = {
        "segment_id": np.arange(n), "parent_id": np.arange(n) - 1, "plant_id": np.zeros(n, int),
        "root_id": np.zeros(n, int), "order": np.zeros(n, int), "root_class": np.full(n, "primary"),
        "x0": pts[:-1, 0], "y0": pts[:-1, 1], "z0": pts[:-1, 2], "x1": pts[1:, 0], "y1": pts[1:, 1], "z1": pts[1:, 2],
        "radius_cm": np.full(n, radius_cm), "length_cm": np.linalg.norm(np.diff(pts, axis=0), axis=1),
        "birth_day": np.arange(n, dtype=float) if birth_day is None else np.asarray(birth_day, dtype=float),
    }
    return RootSystem(cols, {"run": {"duration_days": float(n)}})


def straight_root(*, length_cm: float = 10.0, radius_cm: float = 0.5, n_segments: int = 5, direction=(0, 0, -1)) -> RootSystem:
    """One straight root from the origin, split into equal segments."""
    d = np.asarray(direction, dtype=float)
    d /= np.linalg.norm(d)
    return root_from_points(np.linspace(0, length_cm, n_segments + 1)[:, None] * d, radius_cm=radius_cm)


def test_generator_is_a_valid_tree():
    # Checked against the segment-table contract itself (rootsim.segment_table.validate_columns runs in
    # RootSystem) and geometrically: every continuation starts exactly where its parent ends, and every
    # lateral starts on its parent segment (point-to-segment distance, plain vector algebra).
    system = random_root_system(rng=1)
    parent = system["parent_id"]
    s = np.column_stack([system["x0"], system["y0"], system["z0"]])
    e = np.column_stack([system["x1"], system["y1"], system["z1"]])
    cont = system.is_continuation
    idx = np.flatnonzero(cont)
    assert np.allclose(s[idx], e[parent[idx]])
    lat = np.flatnonzero((parent >= 0) & ~cont)
    a, b, p = s[parent[lat]], e[parent[lat]], s[lat]
    t = np.clip(np.einsum("ij,ij->i", p - a, b - a) / np.einsum("ij,ij->i", b - a, b - a), 0, 1)
    assert np.allclose(a + t[:, None] * (b - a), p)
    assert set(np.unique(system["order"])) == {0, 1, 2}
