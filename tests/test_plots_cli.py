"""``rootsim plot``: figures written (read back with PIL / file signatures), variant labels, error paths."""

from __future__ import annotations

import numpy as np
import pytest

from rootsim.cli.plot import variant_labels
from rootsim.rootsystem import RootSystem, empty_columns

from test_plots_figures import vertical_root_with_lateral
from test_render_cli import run_cli


def grown(path, *, depth_cm=20.0, spec_name=None):
    meta = {"stand": {"n_plants": 1, "ground_area_cm2": 100.0}, "container": {"kind": "field"}}
    if spec_name:
        meta["spec_name"] = spec_name
    vertical_root_with_lateral(depth_cm=depth_cm, metadata=meta).write(path / "segments.parquet")
    return path


def needs_layer_profile():
    analysis = pytest.importorskip("rootsim.analysis")
    if not hasattr(analysis, "layer_profile"):
        pytest.skip("rootsim.analysis.layer_profile not available yet")


def test_plot_writes_profile_and_projection(tmp_path, capsys):
    from PIL import Image  # independent PNG reader

    needs_layer_profile()
    run_dir = grown(tmp_path / "early_sown")
    code, out, err = run_cli(["plot", run_dir, "--layer-cm", "10"], capsys)
    assert code == 0, err
    written = out.split()
    assert [p.rsplit("/", 1)[-1] for p in written] == ["rld_profile.png", "projection.png"]
    for path in written:
        with Image.open(path) as im:
            assert im.format == "PNG" and im.size[0] > 100 and np.asarray(im.convert("L")).std() > 5
    assert sorted(p.name for p in run_dir.iterdir()) == ["projection.png", "rld_profile.png", "segments.parquet"]


@pytest.mark.parametrize("fmt,magic", [("svg", b"<?xml"), ("pdf", b"%PDF")])
def test_plot_compare_writes_one_projection_per_variant(tmp_path, capsys, fmt, magic):
    needs_layer_profile()
    a, b = grown(tmp_path / "early_sown"), grown(tmp_path / "late_sown", depth_cm=30.0)
    out_dir = tmp_path / "figures"
    code, out, err = run_cli(["plot", a, "--compare", b, "--out-dir", out_dir, "--format", fmt], capsys)
    assert code == 0, err
    names = sorted(p.name for p in out_dir.iterdir())
    assert names == sorted([f"rld_profile.{fmt}", f"projection_early_sown.{fmt}", f"projection_late_sown.{fmt}"])
    for name in names:  # file signatures from the SVG (XML) and PDF specifications
        assert (out_dir / name).read_bytes().startswith(magic)


def test_variant_labels_fall_back_to_spec_name_then_path(tmp_path):
    one = RootSystem(empty_columns(), {"spec_name": "narrow_rows"})
    two = RootSystem(empty_columns(), {"spec_file": "/x/params/wide_rows.toml"})
    assert variant_labels(["runs/a", "runs/b"], [one, two]) == ["a", "b"]
    assert variant_labels(["x/run", "y/run"], [one, two]) == ["narrow_rows", "wide_rows"]
    assert variant_labels(["x/run", "y/run"], [one, one]) == ["x/run", "y/run"]
    assert variant_labels(["x/run/segments.parquet"], [one]) == ["run"]


@pytest.mark.parametrize("extra,words", [
    (["--layer-cm", "0"], "--layer-cm must be a positive thickness"),
    (["--layer-cm", "-5"], "--layer-cm must be a positive thickness"),
    (["--layer-cm", "five"], "invalid float value"),
    (["--format", "bmp"], "invalid choice"),
    (["--width-scale", "0"], "--width-scale must be > 0"),
])
def test_plot_bad_options_exit_2(tmp_path, capsys, extra, words):
    run_dir = grown(tmp_path)
    code, _, err = run_cli(["plot", run_dir, *extra], capsys)
    assert code == 2
    assert err.startswith("error:") and words in err and err.count("\n") == 1 and "Traceback" not in err
    assert sorted(p.name for p in run_dir.iterdir()) == ["segments.parquet"]  # nothing written


def test_plot_missing_dirs_exit_2(tmp_path, capsys):
    code, _, err = run_cli(["plot", tmp_path / "nothing"], capsys)
    assert code == 2 and err.startswith("error:") and "no such file" in err
    code, _, err = run_cli(["plot", grown(tmp_path), "--compare", tmp_path / "nothing"], capsys)
    assert code == 2 and err.startswith("error:") and "nothing" in err


def test_plot_unwritable_out_dir_exit_2(tmp_path, capsys):
    blocker = tmp_path / "a_file"
    blocker.write_text("not a directory")
    code, _, err = run_cli(["plot", grown(tmp_path), "--out-dir", blocker / "figures"], capsys)
    assert code == 2 and err.startswith("error:") and "cannot create output directory" in err


def test_plot_without_stand_needs_area_or_box(tmp_path, capsys):
    needs_layer_profile()
    vertical_root_with_lateral(metadata={}).write(tmp_path / "segments.parquet")  # imported data: no stand
    code, _, err = run_cli(["plot", tmp_path], capsys)
    assert code == 2 and err.startswith("error:") and "ground area" in err
    code, _, err = run_cli(["plot", tmp_path, "--area-cm2", "100", "--out-dir", tmp_path / "a"], capsys)
    assert code == 0, err
    code, _, err = run_cli(["plot", tmp_path, "--box", "-10,10,-5,5", "--out-dir", tmp_path / "b"], capsys)
    assert code == 0, err  # negative box corners are values, not options
    assert (tmp_path / "b" / "rld_profile.png").exists()


@pytest.mark.parametrize("extra,words", [
    (["--box", "-10,10,-5"], "give four numbers"),
    (["--box", "10,-10,-5,5"], "XMIN < XMAX"),
    (["--box", "-1,1,-1,1", "--area-cm2", "5"], "not both"),
    (["--area-cm2", "0"], "--area-cm2 must be a ground area > 0"),
])
def test_plot_bad_area_or_box_exit_2(tmp_path, capsys, extra, words):
    code, _, err = run_cli(["plot", grown(tmp_path), *extra], capsys)
    assert code == 2 and err.startswith("error:") and words in err and err.count("\n") == 1
