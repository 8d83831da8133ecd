"""``rootsim render --soil-field``: a translucent slice of a soil field behind the roots, read back from the PNG."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from rootsim.cli import main
from rootsim.render import ruler_ticks
from rootsim.rootsystem import RootSystem

from test_render_images import random_walk_system

PAN_SPEC = Path(__file__).resolve().parents[1] / "params" / "field_plough_pan.toml"
WIDTH, HEIGHT = 600, 450


def run_cli(argv, capsys):
    try:
        code = main([str(a) for a in argv])
    except SystemExit as exc:
        code = exc.code
    captured = capsys.readouterr()
    return code, captured.out, captured.err


@pytest.fixture(scope="module")
def deep_roots():
    """Two plants of random-walk roots reaching below the pan (deepest root past 35 cm)."""
    system = random_walk_system(roots_per_plant=3, segments_per_root=50)
    assert -min(np.min(system["z0"]), np.min(system["z1"])) > 45.0
    return system


def _blend(value_mpa: float, low: float, high: float) -> np.ndarray:
    """Expected pixel of the slice: matplotlib's cividis colour of the value (independent library) drawn
    at opacity 0.55 over the white background ("over" compositing, Porter & Duff 1984,
    doi:10.1145/964965.808606)."""
    from matplotlib import colormaps

    rgb = np.asarray(colormaps["cividis"]((value_mpa - low) / (high - low))[:3]) * 255.0
    return 0.55 * rgb + 0.45 * 255.0


def test_side_render_shows_the_plough_pan_at_its_ruler_depth(deep_roots, tmp_path, capsys):
    from PIL import Image  # independent PNG reader

    deep_roots.write(tmp_path / "run" / "segments.parquet")
    target = tmp_path / "run" / "pan.png"
    code, _, err = run_cli(["render", tmp_path / "run", "--png", target, "--view", "side", "--size",
                            f"{WIDTH}x{HEIGHT}", "--soil-field", "penetration_resistance_mpa",
                            "--soil-spec", PAN_SPEC], capsys)
    assert code == 0, err
    image = np.asarray(Image.open(target).convert("RGB")).astype(float)
    # the depth ruler: the longest vertical run of black pixels in the left third of the picture, its
    # labelled ticks short black marks on its left; their rows say where 0, 20, 40, ... cm are
    black = image.max(axis=2) < 60
    column = int(np.argmax(black[:, : WIDTH // 3].sum(axis=0)))
    marked = np.flatnonzero(black[:, column - 2] & black[:, column - 1])
    runs = np.split(marked, np.flatnonzero(np.diff(marked) > 1) + 1)
    tick_rows = np.array([r.mean() for r in runs])
    depth = -min(np.min(deep_roots["z0"]), np.min(deep_roots["z1"]))
    length_cm, labels = ruler_ticks(depth)
    assert length_cm >= 40.0 and len(tick_rows) >= labels, tick_rows
    tick_rows = tick_rows[:labels]  # below the last tick: the ruler's title text
    tick_depths = np.linspace(0.0, length_cm, labels)
    px_per_cm, top = np.polyfit(tick_depths, tick_rows, 1)
    assert np.abs(top + px_per_cm * tick_depths - tick_rows).max() < 1.0  # evenly spaced ticks
    # layer resistances of params/field_plough_pan.toml: 0.6 MPa (0-25 cm), pan 2.8 MPa (25-35 cm), 1.1 MPa below
    layers = {0.6: (0.0, 25.0), 2.8: (25.0, 35.0), 1.1: (35.0, 200.0)}
    expected = {v: _blend(v, 0.6, 2.8) for v in layers}
    for depth_cm in np.arange(1.0, min(length_cm, 60.0), 0.5):
        if any(abs(depth_cm - edge) < 1.0 for edge in (25.0, 35.0)):
            continue  # one pixel row either side of a layer boundary may hold either colour
        row = image[int(round(top + depth_cm * px_per_cm)), column + 3:]
        slice_pixels = row[row.min(axis=1) < 245]  # not the white background beside the slice
        colour = np.median(slice_pixels, axis=0)
        nearest = min(expected, key=lambda v: np.abs(expected[v] - colour).max())
        truth = next(v for v, (a, b) in layers.items() if a <= depth_cm < b)
        assert nearest == truth, (depth_cm, colour)
        assert np.abs(colour - expected[truth]).max() <= 10.0, (depth_cm, colour, expected[truth])


def test_soil_spec_read_from_the_run_metadata(deep_roots, tmp_path, capsys):
    system = RootSystem({name: deep_roots[name] for name in deep_roots.columns},
                        {**deep_roots.metadata, "spec_file": str(PAN_SPEC)})
    system.write(tmp_path / "segments.parquet")
    target = tmp_path / "meta.png"
    code, _, err = run_cli(["render", tmp_path, "--png", target, "--view", "iso", "--size", "160x120",
                            "--soil-field", "bulk_density_g_per_cm3"], capsys)
    assert code == 0, err
    assert target.stat().st_size > 0


@pytest.mark.parametrize("extra,words", [
    (["--soil-field", "nitrate_mg_per_kg", "--soil-spec", PAN_SPEC], "not a soil field of"),
    (["--soil-field", "penetration_resistance_mpa", "--soil-spec", PAN_SPEC, "--view", "top"], "allowed views"),
    (["--soil-spec", PAN_SPEC], "--soil-spec needs --soil-field"),
    (["--soil-field", "penetration_resistance_mpa"], "records no parameter file"),
])
def test_bad_soil_field_is_a_one_line_error_and_writes_nothing(deep_roots, tmp_path, capsys, extra, words):
    deep_roots.write(tmp_path / "segments.parquet")
    before = sorted(p.name for p in tmp_path.iterdir())
    code, out, err = run_cli(["render", tmp_path, "--png", tmp_path / "x.png", "--size", "64x48", *extra], capsys)
    assert code == 2 and out == ""
    assert err.startswith("error:") and words in err and err.strip().count("\n") == 0, err
    assert "Traceback" not in err
    assert sorted(p.name for p in tmp_path.iterdir()) == before


def test_field_labels_name_the_unit():
    from rootsim.soil.slice import field_label

    assert field_label("penetration_resistance_mpa") == "penetration resistance (MPa)"
    assert field_label("bulk_density_g_per_cm3") == "bulk density (g/cm³)"
    assert field_label("volumetric_water_content") == "volumetric water content (cm³/cm³)"
    assert field_label("nitrate_mg_per_kg") == "nitrate (mg/kg)"
    assert field_label("soil_temperature_c") == "soil temperature (°C)"


def test_a_run_grown_from_a_relative_path_renders_its_soil_from_another_folder(tmp_path, capsys, monkeypatch):
    # The run records its parameter file as an absolute path, so `render --soil-field` finds it from any folder
    # (it used to record the path as typed, relative to where `grow` ran).
    work = tmp_path / "work"
    work.mkdir()
    spec = work / "pan.toml"
    spec.write_text(f'based_on = "{PAN_SPEC.as_posix()}"\n[run]\nduration_days = 3\n', encoding="utf-8")
    monkeypatch.chdir(work)
    code, _, err = run_cli(["grow", "pan.toml", "--out", "run", "--quiet"], capsys)
    assert code == 0, err
    monkeypatch.chdir(tmp_path)
    assert RootSystem.read(work / "run").metadata["spec_file"] == str(spec.resolve())
    code, _, err = run_cli(["render", work / "run", "--png", tmp_path / "pan.png", "--view", "side", "--size",
                            "160x120", "--soil-field", "penetration_resistance_mpa"], capsys)
    assert code == 0, err
    assert (tmp_path / "pan.png").stat().st_size > 0
