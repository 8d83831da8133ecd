"""The export bench stage runs on a small stand; sizes it reports follow the file layouts."""

from __future__ import annotations

from rootsim.bench import export

from test_formats_helpers import random_root_system


def test_export_stage_entries(tmp_path):
    system = random_root_system(rng=5)
    results = export.run(system, workdir=tmp_path)
    assert set(results) == {"vtk_export", "mesh_export", "mesh_export_full"}
    for entry in results.values():
        assert entry["segments"] == len(system) and entry["seconds"] > 0 and entry["floor_seconds"] > 0
    stl = results["mesh_export"]
    # Binary STL layout (common practice): 80-byte header + uint32 count + 50 bytes per triangle.
    assert stl["file_bytes"] == 84 + 50 * stl["faces"]
    # Closed tubes: 2 triangles per side per tube segment, plus a fan of `sides` triangles per cap.
    for entry in (stl, results["mesh_export_full"]):
        n = entry["sides"]
        assert entry["faces"] == 2 * n * entry["tube_segments"] + 2 * n * entry["tube_pieces"]
        assert entry["vertices"] == n * (entry["tube_segments"] + entry["tube_pieces"]) + 2 * entry["tube_pieces"]
    # VTK: n segments in p root polylines share points, n + p of them.
    n_roots = len(set(system["root_id"].tolist()))
    assert results["vtk_export"]["points"] == len(system) + n_roots
    assert list(tmp_path.iterdir()) == []  # the stage cleans up its files
