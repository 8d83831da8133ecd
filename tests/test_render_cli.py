"""``rootsim render``: PNG written at the asked size (read back with PIL), and its error paths (exit 2, ``error:``)."""

from __future__ import annotations

import numpy as np
import pytest

from rootsim.cli import main
from rootsim.rootsystem import RootSystem, empty_columns

from test_render_images import random_walk_system


@pytest.fixture(scope="module")
def results_dir(tmp_path_factory):
    out = tmp_path_factory.mktemp("grown")
    random_walk_system(roots_per_plant=3, segments_per_root=15).write(out / "segments.parquet")
    return out


def run_cli(argv, capsys):
    """Exit code, stdout, stderr of ``rootsim ARGV`` (argparse rejections raise SystemExit: caught)."""
    try:
        code = main([str(a) for a in argv])
    except SystemExit as exc:
        code = exc.code
    captured = capsys.readouterr()
    return code, captured.out, captured.err


def test_render_writes_png_of_requested_size(results_dir, tmp_path, capsys):
    from PIL import Image  # independent PNG reader

    target = tmp_path / "pictures" / "roots.png"
    code, out, err = run_cli(["render", results_dir, "--png", target, "--size", "200x150", "--view", "side",
                              "--color-by", "age", "--title", "Invented trial B"], capsys)
    assert code == 0, err
    assert out.strip() == str(target)
    with Image.open(target) as im:
        assert im.format == "PNG" and im.size == (200, 150)  # PIL size is (width, height)
        assert np.asarray(im.convert("RGB")).std() > 10
    assert [p.name for p in target.parent.iterdir()] == ["roots.png"]  # no temporary files left


def test_render_empty_system_warns_and_draws_the_scene(tmp_path, capsys):
    RootSystem(empty_columns(), {}).write(tmp_path / "segments.parquet")
    code, _, err = run_cli(["render", tmp_path, "--png", tmp_path / "empty.png", "--size", "64x48"], capsys)
    assert code == 0 and err.startswith("warning:") and "no segments" in err
    assert (tmp_path / "empty.png").stat().st_size > 0


@pytest.mark.parametrize("extra,words", [
    (["--color-by", "colour"], "invalid choice"),
    (["--view", "front"], "invalid choice"),
    (["--size", "12x"], "image size '12x' not understood"),
    (["--size", "1200*900"], "WIDTHxHEIGHT"),
    (["--size", "10x10"], "16..8192"),
])
def test_render_bad_options_exit_2(results_dir, tmp_path, capsys, extra, words):
    target = tmp_path / "x.png"
    code, _, err = run_cli(["render", results_dir, "--png", target, *extra], capsys)
    assert code == 2
    assert err.startswith("error:") and words in err and err.count("\n") == 1 and "Traceback" not in err
    assert not target.exists()


def test_render_missing_dir_exit_2(tmp_path, capsys):
    code, _, err = run_cli(["render", tmp_path / "nothing_here", "--png", tmp_path / "x.png"], capsys)
    assert code == 2 and err.startswith("error:") and "no such file" in err


def test_render_unwritable_target_exit_2(results_dir, tmp_path, capsys):
    blocker = tmp_path / "a_file"
    blocker.write_text("not a directory")
    code, _, err = run_cli(["render", results_dir, "--png", blocker / "x.png", "--size", "64x48"], capsys)
    assert code == 2 and err.startswith("error:") and "cannot write" in err
    assert blocker.read_text() == "not a directory"


def test_render_wrong_suffix_exit_2(results_dir, tmp_path, capsys):
    code, _, err = run_cli(["render", results_dir, "--png", tmp_path / "x.jpg"], capsys)
    assert code == 2 and err.startswith("error:") and ".png" in err


def test_render_tubes_and_bad_tube_scale(results_dir, tmp_path, capsys):
    target = tmp_path / "tubes.png"
    code, _, err = run_cli(["render", results_dir, "--png", target, "--size", "96x72", "--style", "tubes",
                            "--tube-scale", "4"], capsys)
    assert code == 0, err
    assert target.exists()
    code, _, err = run_cli(["render", results_dir, "--png", tmp_path / "y.png", "--style", "tubes",
                            "--tube-scale", "-1"], capsys)
    assert code == 2 and err.startswith("error:") and "tube scale" in err
