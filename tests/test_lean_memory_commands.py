"""Memory per segment of `sample`, `export --mesh`, `export --rsml` and `render` (README, "Speed").

Peaks are traced with tracemalloc around the command (libraries imported and kernels compiled by a first
run), on a grown 35-day cereal stand (thermal clock) of about 100,000 segments, with the chunk sizes scaled to this
table as the defaults are to tables of millions of segments. The bounds are generous for today's code
and below what each command needed before its chunked path (figures beside each bound, measured once
with the code before the change).
"""

from __future__ import annotations

import contextlib
import io
import tracemalloc
from pathlib import Path

import pytest

from rootsim.cli import main

PARAMS = Path(__file__).resolve().parents[1] / "params" / "cereal_fibrous.toml"


@pytest.fixture(scope="module")
def stand(tmp_path_factory):
    folder = tmp_path_factory.mktemp("lean") / "stand"
    with contextlib.redirect_stdout(io.StringIO()):
        assert main(["grow", str(PARAMS), "--out", str(folder), "--days", "35", "--seed", "3"]) == 0
    import json

    n = json.loads((folder / "summary.json").read_text())["n_segments"]
    assert 60_000 < n < 200_000
    return folder, n


@pytest.fixture
def small_chunks(monkeypatch):
    """Chunk sizes scaled to a 100,000-segment table (the defaults are sized for millions)."""
    from rootsim import periodic_stand
    from rootsim.formats import mesh, rsml
    from rootsim.sampling import bias_table, spatial_index

    monkeypatch.setattr(mesh, "MESH_CHUNK_SEGMENTS", 10_000)
    monkeypatch.setattr(periodic_stand, "IMAGE_CHUNK_ROWS", 16_384)
    monkeypatch.setattr(bias_table, "_BLOCK", 8_192)
    monkeypatch.setattr(spatial_index, "_KEY_BLOCK", 16_384)
    monkeypatch.setattr(rsml, "_BATCH_POINTS", 8_192)


def traced_peak(argv) -> int:
    """Peak traced bytes of one run of the command (after a first run that imports and compiles)."""
    with contextlib.redirect_stdout(io.StringIO()):
        assert main(argv) == 0
    tracemalloc.start()
    try:
        with contextlib.redirect_stdout(io.StringIO()):
            assert main(argv) == 0
        return tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()


@pytest.mark.parametrize("command, bytes_per_segment", [
    # (command, bound in bytes per traced segment). Measured once on this stand with these chunk sizes
    # (part of the table is Arrow memory that tracemalloc does not see, so these are below the README's
    # resident figures): before the chunked paths mesh 445, rsml 146, sample 139; with them 82, 110, 82.
    ("mesh", 250),
    ("rsml", 120),
    ("sample", 105),
])
def test_command_peak_memory_per_segment(stand, small_chunks, tmp_path, command, bytes_per_segment):
    folder, n = stand
    argv = {
        "mesh": ["export", str(folder), "--mesh", str(tmp_path / "m.ply"), "--mesh-sides", "6", "--merge-short-cm", "1"],
        "rsml": ["export", str(folder), "--rsml", str(tmp_path / "r.rsml")],
        "sample": ["sample", str(folder), "--core-grid", "4,90,15", "--wall", "in_row_between_plants,90,5",
                   "--tube", "in_row_between_plants,45,120,5.6,0.2", "--out-dir", str(tmp_path)],
    }[command]
    peak = traced_peak(argv)
    assert peak <= bytes_per_segment * n + 1_000_000, (command, peak / n)


def test_a_render_scene_holds_no_column_of_the_table(stand):
    # rootsim render draws from a RootScene and frees the table first: the scene keeps no reference to any
    # column, and the picture is the one rendered from the table itself.
    import gc
    import weakref

    import numpy as np

    from rootsim.render import render_image, root_scene
    from rootsim.rootsystem import RootSystem

    folder, _ = stand
    system = RootSystem.read(folder).select(plant=[0])
    direct = render_image(system, size=(320, 240), view="side", color_by="age")
    refs = [weakref.ref(system[name]) for name in system.columns if isinstance(system[name], np.ndarray)]
    scene = root_scene(system, color_by="age")
    del system
    gc.collect()
    assert refs and all(ref() is None for ref in refs)
    np.testing.assert_array_equal(render_image(scene, size=(320, 240), view="side", color_by="age"), direct)
    with pytest.raises(Exception, match="color_by"):
        render_image(scene, size=(320, 240), color_by="order")


def test_command_memory_bench_stage_reports_every_command(stand, tmp_path, monkeypatch):
    # The bench stage on 3,000 rows of the stand (no fresh processes here: the resident figure is left out).
    from rootsim.bench import command_memory
    from rootsim.rootsystem import RootSystem

    monkeypatch.setattr(command_memory, "_resident_run", lambda warm, argv: None)
    folder, _ = stand
    whole = RootSystem.read(folder)
    system = RootSystem.from_dataframe(whole.to_dataframe().iloc[:3_000], whole.metadata)
    results = command_memory.run(system, workdir=tmp_path, commands=("sample", "export_mesh"))
    assert set(results) == {"memory_sample", "memory_export_mesh"}
    for entry in results.values():
        assert entry["segments"] == len(system) and entry["seconds"] > 0 and entry["floor_seconds"] > 0
        assert entry["bytes_per_segment"] > 0 and entry["peak_resident_bytes_per_segment"] is None
        assert entry["target_bytes_per_segment"] == 250
