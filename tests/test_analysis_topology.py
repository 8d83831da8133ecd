"""Branching topology: Fitter's indices, interbranch distance and insertion angle on hand-built systems."""

import numpy as np
import pytest

from rootsim.analysis.topology import (branch_points, fitter_indices, insertion_angles_deg,
                                       interbranch_distances, root_chains)
from rootsim.analysis import root_traits
from rootsim.errors import SegmentTableError
from rootsim.rootsystem import RootSystem
from test_analysis_support import branched_system, dichotomous_system


def herringbone(n_laterals: int, *, spacing_cm: float = 1.5):
    # A vertical axis of unit segments with one lateral per branch point, placed mid-segment.
    n_seg = int(np.ceil((n_laterals + 1) * spacing_cm)) + 1
    axis = {"points": [[0, 0, -i] for i in range(n_seg + 1)]}
    laterals = []
    for k in range(1, n_laterals + 1):
        depth = k * spacing_cm
        seg = int(np.floor(depth))
        if depth == seg:
            seg -= 1  # on the end of the segment above
        laterals.append({"points": [[0, 0, -depth], [2, 0, -depth - 1]], "parent": 0, "on_segment": seg, "order": 1})
    return branched_system([axis] + laterals)


@pytest.mark.parametrize("n_laterals", [1, 3, 10])
def test_herringbone_has_topological_index_one(n_laterals):
    # Fitter 1987: a herringbone system (laterals on one axis only) has altitude = magnitude, so
    # log(a) / log(mu) = 1; mu = laterals + axis tip; Pe = sum over tips of links from the base
    # (axis tip: n+1; lateral i: i+1).
    result = fitter_indices(herringbone(n_laterals))[0]
    assert result["magnitude"] == n_laterals + 1
    assert result["altitude"] == n_laterals + 1
    assert result["topological_index"] == pytest.approx(1.0)
    assert result["external_path_length"] == (n_laterals + 1) + sum(i + 1 for i in range(1, n_laterals + 1))


@pytest.mark.parametrize("levels", [1, 2, 3, 5])
def test_dichotomous_tree_magnitude_and_altitude(levels):
    # Fitter 1987: a perfectly dichotomous tree with k branching levels has mu = 2^k exterior links and
    # altitude a = log2(mu) + 1 (the base link plus one link per level); every tip is a links from the base.
    system = dichotomous_system(levels)
    result = fitter_indices(system)[0]
    mu = 2 ** levels
    assert result["magnitude"] == mu
    assert result["altitude"] == np.log2(mu) + 1
    assert result["external_path_length"] == mu * (levels + 1)
    assert result["topological_index"] == pytest.approx(np.log(levels + 1) / np.log(mu))


def random_tree(rng, n_plants=2):
    roots = []
    for plant in range(n_plants):
        for _ in range(rng.integers(1, 4)):
            pending = [(None, None, 0, np.array([plant * 50.0, 0.0, 0.0]))]
            while pending:
                parent, seg, order, start = pending.pop(0)
                n_seg = int(rng.integers(1, 6))
                steps = rng.normal(size=(n_seg, 3))
                points = np.vstack([start, start + np.cumsum(steps, axis=0)])
                index = len(roots)
                root = {"points": points, "order": order, "plant": plant}
                if parent is not None:
                    root.update(parent=parent, on_segment=seg)
                roots.append(root)
                if order < 3:
                    for s in range(n_seg):
                        for _ in range(rng.poisson(0.4)):  # 0, 1 or more laterals at this segment's end
                            pending.append((index, s, order + 1, points[s + 1]))
    return branched_system(roots)


def networkx_fitter(system: RootSystem):
    """Independent reference (networkx): in these trees laterals leave at segment ends, so on the
    segment graph a branch point is a segment with two or more children; links to a tip = 1 + the
    branch points passed."""
    import networkx as nx

    g = system.to_networkx()
    out = {}
    for source in (n for n in g if g.in_degree(n) == 0):
        links = {source: 1}
        for parent, child in nx.bfs_edges(g, source):
            links[child] = links[parent] + (1 if g.out_degree(parent) >= 2 else 0)
        plant = g.nodes[source]["plant_id"]
        tips = [links[n] for n in links if g.out_degree(n) == 0]
        entry = out.setdefault(plant, [])
        entry.extend(tips)
    return {p: {"magnitude": len(t), "altitude": max(t), "external_path_length": sum(t)} for p, t in out.items()}


@pytest.mark.parametrize("seed", range(6))
def test_fitter_indices_match_networkx_on_random_trees(seed):
    system = random_tree(np.random.default_rng(seed))
    ours = fitter_indices(system)
    reference = networkx_fitter(system)
    assert set(ours) == set(reference)
    for plant, ref in reference.items():
        for key, value in ref.items():
            assert ours[plant][key] == value, (plant, key)


@pytest.mark.parametrize("seed", range(3))
def test_networkx_view_gives_same_tips_and_orders(seed):
    # Independent reference (networkx): tips are segments with no continuing child; a segment's order is the
    # number of branch edges on its path from the plant.
    import networkx as nx

    system = random_tree(np.random.default_rng(100 + seed))
    g = system.to_networkx()
    n_tips = sum(1 for n in g if not any(g.edges[n, c]["kind"] == "continuation" for c in g.successors(n)))
    order = {}
    for source in (n for n in g if g.in_degree(n) == 0):
        order[source] = 0
        for parent, child in nx.bfs_edges(g, source):
            order[child] = order[parent] + (g.edges[parent, child]["kind"] == "branch")
    traits = root_traits(system)
    assert traits["n_tips"] == n_tips
    by_order = {}
    for node, k in order.items():
        by_order[str(k)] = by_order.get(str(k), 0.0) + g.nodes[node]["length_cm"]
    assert traits["length_by_order_cm"].keys() == by_order.keys()
    for k, v in by_order.items():
        assert traits["length_by_order_cm"][k] == pytest.approx(v, rel=1e-12)
    assert sum(f["magnitude"] for f in traits["plants"]) == sum(
        1 for n in g if g.out_degree(n) == 0)


def test_interbranch_distance_and_insertion_angle_on_hand_built_system():
    # Hand-built: a vertical axis of 4 cm segments with order-1 laterals at depths 1, 3, 5, 9 cm (mid-segment
    # and on segment ends) leaving at 30, 60, 90 and 120 degrees from the axis direction (straight down);
    # one order-2 lateral on the first lateral at 45 degrees to it. Trigonometry gives the directions.
    axis = {"points": [[0, 0, -4 * i] for i in range(4)]}
    depths = [1.0, 3.0, 5.0, 9.0]
    angles = [30.0, 60.0, 90.0, 120.0]
    roots = [axis]
    for depth, angle in zip(depths, angles):
        a = np.radians(angle)
        start = np.array([0.0, 0.0, -depth])
        direction = np.array([np.sin(a), 0.0, -np.cos(a)])
        roots.append({"points": [start, start + 2 * direction, start + 4 * direction], "parent": 0,
                      "on_segment": int(depth // 4), "order": 1})
    first = roots[1]
    u = (first["points"][1] - first["points"][0]) / 2.0
    v = np.array([u[2], 0.0, -u[0]])  # perpendicular to u in the x-z plane
    start = first["points"][0] + 0.5 * (first["points"][1] - first["points"][0])
    second = start + 3 * (np.cos(np.radians(45)) * u + np.sin(np.radians(45)) * v)
    roots.append({"points": [start, second], "parent": 1, "on_segment": 0, "order": 2})
    system = branched_system(roots)
    branches = branch_points(system)
    np.testing.assert_allclose(branches.position_cm[:4], depths)
    assert branches.position_cm[4] == pytest.approx(1.0)  # half of the lateral's 2 cm first segment
    np.testing.assert_allclose(insertion_angles_deg(system, branches), angles + [45.0], atol=1e-9)
    gaps, _ = interbranch_distances(branches)
    np.testing.assert_allclose(np.sort(gaps), [2.0, 2.0, 4.0])
    traits = root_traits(system)
    assert traits["mean_interbranch_distance_cm"] == {"1": pytest.approx(8.0 / 3.0)}
    assert traits["mean_insertion_angle_deg"]["1"] == pytest.approx(75.0)
    assert traits["mean_insertion_angle_deg"]["2"] == pytest.approx(45.0)


def test_root_ending_at_branch_point_has_no_tip_of_its_own():
    # Topology: an axis ending where two laterals leave has 2 exterior links, altitude 2; with one lateral
    # there the point is no branch point (one link, magnitude 1).
    axis = {"points": [[0, 0, 0], [0, 0, -2]]}
    left = {"points": [[0, 0, -2], [-1, 0, -3]], "parent": 0, "on_segment": 0, "order": 1}
    right = {"points": [[0, 0, -2], [1, 0, -3]], "parent": 0, "on_segment": 0, "order": 1}
    two = fitter_indices(branched_system([axis, left, right]))[0]
    assert (two["magnitude"], two["altitude"], two["external_path_length"]) == (2, 2, 4)
    one = fitter_indices(branched_system([axis, left]))[0]
    assert (one["magnitude"], one["altitude"], one["topological_index"]) == (1, 1, None)


def test_root_chains_measure_along_root_and_reject_forks():
    system = herringbone(2)
    chains = root_chains(system)
    axis_rows = np.flatnonzero(system["root_id"] == 0)
    np.testing.assert_allclose(chains.arc_start_cm[axis_rows], np.arange(axis_rows.size))
    cols = {c: system[c].copy() for c in system.columns}
    cols["root_id"][-1] = 0  # a lateral's segment claiming to be part of the axis: the axis forks
    with pytest.raises(SegmentTableError, match="not a single chain"):
        root_chains(RootSystem(cols))
