"""Builders of small hand-made segment tables for the analysis tests (no tests here)."""

import numpy as np

from rootsim.rootsystem import RootSystem


def straight_segments(p0, p1, *, order=None, metadata=None) -> RootSystem:
    """Independent straight segments (each its own root starting at the plant)."""
    p0 = np.atleast_2d(np.asarray(p0, dtype=float))
    p1 = np.atleast_2d(np.asarray(p1, dtype=float))
    orders = np.zeros(len(p0), dtype=int) if order is None else np.asarray(order)
    return branched_system([{"points": [a, b], "order": int(k)} for a, b, k in zip(p0, p1, orders)], metadata)


def branched_system(roots, metadata=None) -> RootSystem:
    """A root system from polylines.

    ``roots`` is a list (parents before their laterals) of dicts with ``points`` (k+1, 3) in cm,
    optional ``parent`` (index of the bearing root in the list), ``on_segment`` (index of the
    bearing root's segment the lateral starts on), ``order`` and ``plant``. A lateral's first
    point must lie on that segment.
    """
    rows = {k: [] for k in ("parent_id", "plant_id", "root_id", "order", "p0", "p1")}
    first_segment = []
    for r, root in enumerate(roots):
        pts = np.asarray(root["points"], dtype=float)
        start = len(rows["p0"])
        first_segment.append(start)
        for k in range(len(pts) - 1):
            if k > 0:
                parent = start + k - 1
            elif root.get("parent") is None:
                parent = -1
            else:
                parent = first_segment[root["parent"]] + root["on_segment"]
            rows["parent_id"].append(parent)
            rows["plant_id"].append(root.get("plant", 0))
            rows["root_id"].append(r)
            rows["order"].append(root.get("order", 0))
            rows["p0"].append(pts[k])
            rows["p1"].append(pts[k + 1])
    p0 = np.array(rows["p0"])
    p1 = np.array(rows["p1"])
    n = len(p0)
    cols = {
        "segment_id": np.arange(n),
        "parent_id": np.array(rows["parent_id"]),
        "plant_id": np.array(rows["plant_id"]),
        "root_id": np.array(rows["root_id"]),
        "order": np.array(rows["order"]),
        "root_class": np.array(["axis"] * n),
        "radius_cm": np.full(n, 0.05),
        "length_cm": np.linalg.norm(p1 - p0, axis=1),
        "birth_day": np.zeros(n),
    }
    for i, name in enumerate(("x0", "y0", "z0")):
        cols[name] = p0[:, i]
    for i, name in enumerate(("x1", "y1", "z1")):
        cols[name] = p1[:, i]
    return RootSystem(cols, metadata)


def random_walk_system(n_roots: int, n_steps: int, *, seed: int, step_cm: float = 1.0) -> RootSystem:
    """Independent downward random-walk roots from the surface (a synthetic, unbranched system)."""
    rng = np.random.default_rng(seed)
    steps = rng.normal(size=(n_roots, n_steps, 3))
    steps[:, :, 2] = -np.abs(steps[:, :, 2]) - 0.5
    steps *= step_cm / np.linalg.norm(steps, axis=2, keepdims=True)
    start = np.column_stack([rng.uniform(-5, 5, n_roots), rng.uniform(-5, 5, n_roots), np.zeros(n_roots)])
    pts = start[:, None, :] + np.concatenate([np.zeros((n_roots, 1, 3)), np.cumsum(steps, axis=1)], axis=1)
    return branched_system([{"points": p} for p in pts])


def dichotomous_system(levels: int, *, link_cm: float = 1.0, plant: int = 0) -> RootSystem:
    """A perfectly dichotomous tree: a base link, then ``levels`` levels of two-way branching.

    Each link is one straight segment; at each branch point the root continues into one child
    link and a new lateral root (starting at the end of the bearing segment) forms the other.
    """
    roots = []
    queue = [(np.zeros(3), np.array([0.0, 0.0, -1.0]), 0, None, None, 0)]  # start, direction, level, parent, seg, order
    while queue:
        start, direction, level, parent, on_segment, order = queue.pop(0)
        index = len(roots)
        points = [start]
        point, d = start, direction
        for depth in range(level, levels + 1):
            point = point + link_cm * d
            points.append(point)
            if depth < levels:
                angle = np.radians(25.0)
                side = np.array([np.sin(angle), 0.0, 0.0]) * (1 if depth % 2 else -1)
                lateral = d + side
                queue.append((point, lateral / np.linalg.norm(lateral), depth + 1, index, len(points) - 2, order + 1))
                d = d - side
                d = d / np.linalg.norm(d)
        root = {"points": points, "order": order, "plant": plant}
        if parent is not None:
            root.update(parent=parent, on_segment=on_segment)
        roots.append(root)
    return branched_system(roots)
