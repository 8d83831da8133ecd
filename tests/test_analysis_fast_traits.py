"""The pieces that make traits cheap give the results of the plain methods they replace.

Hull prefilter (Akl & Toussaint 1978, doi:10.1016/0020-0190(78)90003-0) against Qhull and trimesh on the
full point set and a brute-force diameter; the compiled chain walk against networkx distances along the
chains; plant grouping of interleaved tables against traits of each plant alone.
"""

import networkx as nx
import numpy as np
import pytest

from rootsim.analysis import root_traits
from rootsim.analysis.chain_walk import dense_rank
from rootsim.analysis.chunked import chunked_root_traits
from rootsim.analysis.hull_prefilter import hull_candidates
from rootsim.analysis.plant_rows import plant_rows
from rootsim.analysis.topology import root_chains
from rootsim.analysis.traits import horizontal_diameter, hull_volume
from rootsim.errors import SegmentTableError
from rootsim.rootsystem import RootSystem
from test_analysis_support import branched_system


def _clouds():
    rng = np.random.default_rng(8)
    ball = rng.normal(size=(3000, 3))
    ball /= np.linalg.norm(ball, axis=1, keepdims=True)
    ball *= rng.uniform(0, 1, (3000, 1)) ** (1 / 3)
    cube = rng.uniform(-2, 7, (2500, 3))
    walk = np.cumsum(rng.normal(size=(4000, 3)), axis=0)
    spiky = rng.standard_cauchy(size=(2000, 3))  # heavy tails: a few far points dominate the hull
    return {"ball": ball, "cube": cube, "walk": walk, "spiky": spiky}


@pytest.mark.parametrize("name", ["ball", "cube", "walk", "spiky"])
def test_hull_candidates_keep_the_hull_volume_vertices_and_diameter(name):
    import trimesh
    from scipy.spatial import ConvexHull
    from scipy.spatial.distance import pdist

    points = _clouds()[name]
    keep = hull_candidates(points[:, 0], points[:, 1], points[:, 2])
    assert keep.size < len(points)  # the filter drops interior points
    # independent libraries on the full set: Qhull's hull vertices are all kept, trimesh's volume is unchanged
    assert set(ConvexHull(points).vertices) <= set(keep.tolist())
    assert hull_volume(points[keep]) == pytest.approx(trimesh.convex.convex_hull(points).volume, rel=1e-12)
    # horizontal diameter: brute force over all pairs of the full set (scipy pdist)
    assert horizontal_diameter(points[keep][:, :2]) == pytest.approx(pdist(points[:, :2]).max(), rel=1e-12)


def test_hull_candidates_of_flat_and_small_sets_keep_everything():
    # a vertical plane (x = 1) spans no volume: nothing is strictly inside, all points are kept
    rng = np.random.default_rng(3)
    y, z = rng.uniform(0, 5, 500), rng.uniform(-5, 0, 500)
    keep = hull_candidates(np.ones(500), y, z)
    np.testing.assert_array_equal(keep, np.arange(500))
    keep = hull_candidates(np.zeros(10), np.zeros(10), np.zeros(10))
    np.testing.assert_array_equal(keep, np.arange(10))


@pytest.mark.parametrize("ids", [[5, 5, 2, 9, 2, 0], [-4, 10**12, 7, -4, 3], []])
def test_dense_rank_matches_numpy_unique(ids):
    ids = np.asarray(ids, dtype=np.int64)
    rank, count = dense_rank(ids)
    uniques, inverse = np.unique(ids, return_inverse=True)
    np.testing.assert_array_equal(rank, inverse.reshape(-1))
    assert count == uniques.size


def _interleaved_stand(seed: int) -> RootSystem:
    # three plants whose roots alternate in the table (as the engine writes rows), each with laterals
    rng = np.random.default_rng(seed)
    roots = []
    for k in range(4):
        for plant in range(3):
            top = np.array([40.0 * plant, 0.0, 0.0])
            steps = np.cumsum(rng.normal(size=(12, 3)) * [1, 1, 0.3] - [0, 0, 1], axis=0)
            roots.append({"points": np.vstack([top, top + steps]), "plant": plant, "order": 0})
    axes = len(roots)
    for r in range(axes):
        pts = np.asarray(roots[r]["points"])
        for seg in (2, 7):
            start = 0.5 * (pts[seg] + pts[seg + 1])
            lateral = start + np.cumsum(rng.normal(size=(4, 3)), axis=0)
            roots.append({"points": np.vstack([start, lateral]), "parent": r, "on_segment": seg, "order": 1,
                          "plant": roots[r]["plant"]})
    rows = branched_system(roots, {"stand": {"n_plants": 3, "ground_area_cm2": 3000.0}})
    return rows


def test_chain_walk_distances_match_networkx():
    # networkx: distance from each root's base along the chain graph (edges weighted by segment length)
    system = _interleaved_stand(1)
    chains = root_chains(system)
    parent, root, length = system["parent_id"], system["root_id"], system["length_cm"]
    graph = nx.DiGraph()
    for i in range(len(parent)):
        if parent[i] >= 0 and root[parent[i]] == root[i]:
            graph.add_edge(int(parent[i]), i, weight=float(length[parent[i]]))
        else:
            graph.add_node(i)
    for first in chains.first_segment:
        distances = nx.single_source_dijkstra_path_length(graph, int(first))
        rows = np.array(sorted(distances))
        np.testing.assert_allclose(chains.arc_start_cm[rows], [distances[r] for r in rows], rtol=1e-12, atol=1e-12)
    np.testing.assert_allclose(chains.root_length_cm, np.bincount(chains.root_index, weights=length), rtol=1e-12)


def test_root_whose_first_segment_continues_itself_is_refused():
    system = branched_system([{"points": [[0, 0, 0], [0, 0, -1], [0, 0, -2]]}])
    cols = {c: np.asarray(system[c]).copy() for c in system.columns}
    cols["parent_id"][:] = [1, 0]  # each segment claims the other as parent
    with pytest.raises(SegmentTableError, match="root 0"):
        root_chains(cols)


def test_interleaved_plants_give_the_traits_of_each_plant_alone():
    system = _interleaved_stand(2)
    groups = plant_rows(system["plant_id"])
    assert [p for p, _ in groups] == [0, 1, 2]
    assert all(not isinstance(rows, slice) for _, rows in groups)  # interleaved: gathered, not sliced
    whole = root_traits(system)
    chunked = chunked_root_traits(system, chunk_segments=50)
    for k in range(3):
        alone = root_traits(system.select(plant=k))["plants"][0]
        for traits in (whole, chunked):
            mine = traits["plants"][k]
            assert mine.keys() == alone.keys()
            assert list(mine.values()) == pytest.approx(list(alone.values()), rel=1e-12)
    # Independent references for both paths, per plant: length summed from the coordinates; the hull of all
    # segment ends (laterals start on their parents' segments, inside it) by trimesh; the width as the largest
    # horizontal distance between two of those points by brute force (scipy pdist). Counted by hand: 4 axes
    # with 2 laterals each are 12 roots, one tip each; Fitter's links (Fitter 1987, New Phytol. 106 (Suppl.):61-77;
    # from memory): magnitude = 12 tips, altitude = 3 links (base to first branch, to the second, to the axis
    # tip), external path length = 4 x (3 + 2 + 3) = 32, topological index = log(altitude) / log(magnitude).
    import trimesh
    from scipy.spatial.distance import pdist

    plant = np.asarray(system["plant_id"])
    p0 = np.column_stack([np.asarray(system[f"{a}0"]) for a in "xyz"])
    p1 = np.column_stack([np.asarray(system[f"{a}1"]) for a in "xyz"])
    for k in range(3):
        points = np.concatenate([p0[plant == k], p1[plant == k]])
        expected = {"plant_id": k, "total_length_cm": np.linalg.norm(p1 - p0, axis=1)[plant == k].sum(), "n_tips": 12,
                    "width_cm": pdist(points[:, :2]).max(),
                    "convex_hull_volume_cm3": trimesh.convex.convex_hull(points).volume,
                    "magnitude": 12, "altitude": 3, "external_path_length": 32,
                    "topological_index": np.log(3) / np.log(12)}
        for traits in (whole, chunked):
            assert traits["plants"][k] == pytest.approx(expected, rel=1e-9)


def test_plant_rows_of_a_grouped_table_are_slices():
    groups = plant_rows(np.array([0, 0, 0, 2, 2, 5]))
    assert groups == [(0, slice(0, 3)), (2, slice(3, 5)), (5, slice(5, 6))]


def test_traits_bench_stage_entries(tmp_path):
    from rootsim.bench import stage_names, traits

    assert "traits" in stage_names()
    system = _interleaved_stand(3)
    results = traits.run(system, workdir=str(tmp_path))
    assert set(results) == {"traits", "traits_chunked"}
    for entry in results.values():
        assert entry["segments"] == len(system) and entry["plants"] == 3
        assert entry["floor"] and "median of 3" in entry["timing"]
        # both the traits and the floor add up every segment's length (common practice: total root length)
        assert entry["total_length_cm"] == pytest.approx(float(np.sum(system["length_cm"])), rel=1e-12)
        assert entry["floor_total_length_cm"] == pytest.approx(float(np.sum(system["length_cm"])), rel=1e-12)


def test_tables_of_many_row_groups_read_column_by_column_as_pandas_reads_them(tmp_path):
    # independent reader: pandas/pyarrow read the same file whole; small row groups force the grouped path
    import pandas as pd
    import pyarrow as pa
    import pyarrow.parquet as pq

    system = _interleaved_stand(4)
    table = pq.read_table(system.write(tmp_path / "one.parquet"))
    many = tmp_path / "many" / "segments.parquet"
    many.parent.mkdir()
    plain = table.set_column(table.column_names.index("root_class"), "root_class",
                             table.column("root_class").cast(pa.string()))  # older files: string classes
    pq.write_table(plain, many, row_group_size=37)
    assert pq.ParquetFile(many).num_row_groups > 3
    back = RootSystem.read(many)
    expected = pd.read_parquet(many)
    for name in expected.columns:
        if name == "root_class":
            assert list(back[name]) == expected[name].tolist()
        else:
            np.testing.assert_array_equal(back[name], expected[name].to_numpy())
            assert np.asarray(back[name]).dtype == expected[name].to_numpy().dtype
    assert root_traits(back) == root_traits(system)


def test_rsml_written_in_small_batches_is_the_same_document(tmp_path, monkeypatch):
    # the batching only bounds memory: the document is the one written in a single batch
    import re

    from rootsim.formats import rsml

    system = _interleaved_stand(5)
    whole = rsml.write_rsml(system, tmp_path / "whole.rsml").read_text()
    monkeypatch.setattr(rsml, "_BATCH_POINTS", 7)
    batched = rsml.write_rsml(system, tmp_path / "whole2.rsml").read_text()

    def strip(text):
        return re.sub(r"<last-modified>.*?</last-modified>|<file-key>.*?</file-key>", "", text)

    assert strip(batched) == strip(whole)
    assert batched.count("<root ") == len(np.unique(system["root_id"]))
