"""Exports written a chunk of roots at a time: the same bytes as one pass over the whole system.

The chunked paths exist to bound memory (README, "Speed": bytes per segment of each command); these
tests check that chunking changes nothing in the files, against the whole-system arrays of
:func:`rootsim.formats.mesh.tube_mesh_arrays` and against the files written in a single chunk.
"""

from __future__ import annotations

import numpy as np
import pytest

from rootsim.formats.mesh import tube_mesh_arrays, write_mesh
from rootsim.rootsystem import RootSystem

from test_formats_helpers import random_root_system


def interleaved(system: RootSystem) -> RootSystem:
    """The same roots with their rows interleaved as the growth engine writes them (not grouped by root):
    rows sorted by their number of segments from the plant, parents still before children."""
    parent = np.asarray(system["parent_id"])
    depth = np.zeros(len(parent), dtype=np.int64)
    for i, p in enumerate(parent.tolist()):  # small test systems: a plain loop is clear
        depth[i] = depth[p] + 1 if p >= 0 else 0
    order = np.argsort(depth, kind="stable")
    new_id = np.empty_like(order)
    new_id[order] = np.arange(len(order))
    columns = {name: np.asarray(system[name])[order] for name in system.columns}
    columns["segment_id"] = np.arange(len(order))
    columns["parent_id"] = np.where(parent[order] >= 0, new_id[np.maximum(parent[order], 0)], -1)
    return RootSystem(columns, system.metadata)


@pytest.fixture(scope="module")
def systems():
    grouped = random_root_system(rng=11, n_plants=3, laterals=(25, 40), turn=1.5)
    shuffled = interleaved(grouped)
    assert not np.all(np.diff(shuffled["root_id"]) >= 0)  # really interleaved
    return {"grouped": grouped, "interleaved": shuffled}


@pytest.mark.parametrize("suffix", [".ply", ".stl", ".obj", ".glb"])
@pytest.mark.parametrize("kind", ["grouped", "interleaved"])
def test_chunked_mesh_file_equals_the_single_chunk_file(systems, tmp_path, suffix, kind):
    system = systems[kind]
    options = {"sides": 5, "merge_short_cm": 0.7}
    whole = write_mesh(system, tmp_path / f"whole{suffix}", chunk_segments=10**9, **options).read_bytes()
    for chunk in (1, 7, 60):
        chunked = write_mesh(system, tmp_path / f"c{chunk}{suffix}", chunk_segments=chunk, **options).read_bytes()
        assert chunked == whole, (suffix, kind, chunk)
    assert sorted(p.name for p in tmp_path.iterdir()) == sorted(
        [f"whole{suffix}"] + [f"c{c}{suffix}" for c in (1, 7, 60)])  # no temporary section files left


@pytest.mark.parametrize("kind", ["grouped", "interleaved"])
def test_chunked_ply_holds_the_whole_system_arrays(systems, tmp_path, kind):
    # The PLY written in chunks of 9 segments holds exactly the vertices (as float32) and faces of the
    # whole-system mesh arrays, read back with trimesh (an independent reader).
    import trimesh

    system = systems[kind]
    arrays = tube_mesh_arrays(system, sides=6, merge_short_cm=0.5)
    path = write_mesh(system, tmp_path / "m.ply", sides=6, merge_short_cm=0.5, chunk_segments=9)
    loaded = trimesh.load(path, force="mesh", process=False)
    np.testing.assert_array_equal(np.asarray(loaded.vertices, dtype=np.float32), arrays.vertices.astype(np.float32))
    np.testing.assert_array_equal(np.asarray(loaded.faces), arrays.faces)


@pytest.mark.parametrize("kind", ["grouped", "interleaved"])
def test_polyline_points_of_any_polylines_are_the_whole_system_points(systems, kind):
    # RSML batches gather their points from the table: the same numbers as the whole-system polylines.
    from rootsim.formats.polylines import polyline_points, polyline_segments, polylines_from_segments

    system = systems[kind]
    whole = polylines_from_segments(system)
    order, offsets = polyline_segments(system)
    np.testing.assert_array_equal(order, whole.segment_order)
    picked = np.random.default_rng(2).permutation(whole.n_polylines)[:25]
    points, point_segment = polyline_points(system, order, offsets, picked)
    rows = np.concatenate([np.arange(whole.point_offsets[p], whole.point_offsets[p + 1]) for p in picked])
    np.testing.assert_array_equal(points, whole.points[rows])
    np.testing.assert_array_equal(point_segment, whole.point_segment[rows])
