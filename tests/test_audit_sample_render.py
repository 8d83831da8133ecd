"""Audit of ``rootsim sample`` (periodic stands, replicate cores) and ``rootsim render --soil-field`` as a new user
would try them: one ``error:`` line, exit code 2, no traceback, nothing written."""

from __future__ import annotations

from pathlib import Path

import numpy as np

from rootsim.cli import main
from rootsim.sampling.synthetic import lines_system

ROOT = Path(__file__).resolve().parents[1]


def _one_error_line(capsys) -> str:
    err = capsys.readouterr().err.strip()
    assert "Traceback" not in err
    lines = [line for line in err.splitlines() if line.startswith("error: ") or "Error" in line]
    assert len(lines) == 1 and lines[0].startswith("error: "), err
    return lines[0]


def _field_run(tmp_path: Path, *, spec_file: str | None = None) -> Path:
    top = np.arange(0.0, 30.0)
    p0 = np.column_stack([np.zeros_like(top), np.zeros_like(top), -top])
    metadata = {"stand": {"ground_area_cm2": 1500.0, "n_plants": 2}}
    if spec_file is not None:
        metadata["spec_file"] = spec_file
    system = lines_system(p0, p0 - np.array([0.0, 0.0, 1.0]), metadata=metadata)
    system.write(tmp_path / "run" / "segments.parquet")
    return tmp_path / "run"


def test_negative_seed_for_replicate_cores_is_one_line(tmp_path, capsys):
    # `sample --core-grid ... --core-replicates 2 --seed -1` ended in numpy's traceback
    # ("ValueError: expected non-negative integer"), exit code 1.
    run = _field_run(tmp_path)
    code = main(["sample", str(run), "--core-grid", "5,30", "--core-replicates", "2", "--seed", "-1",
                 "--out-dir", str(tmp_path / "out")])
    line = _one_error_line(capsys)
    assert code == 2 and "--seed -1" in line and "allowed" in line
    assert not (tmp_path / "out").exists()


def test_render_soil_field_of_a_run_whose_parameter_file_moved_says_so(tmp_path, capsys):
    # The recorded parameter file is gone (moved, or recorded relative to another folder): the message used to be
    # the spec loader's "no such file (allowed: a path to a .toml parameter file)", with no word of where the path
    # came from or of --soil-spec.
    run = _field_run(tmp_path, spec_file=str(tmp_path / "moved_away.toml"))
    code = main(["render", str(run), "--png", str(tmp_path / "r.png"), "--soil-field", "nitrate_mg_per_kg"])
    line = _one_error_line(capsys)
    assert code == 2 and "moved_away.toml" in line and "--soil-spec" in line and "allowed" in line
    assert not (tmp_path / "r.png").exists()


def test_render_option_errors_name_the_option_and_come_before_reading(tmp_path, capsys):
    # "tube scale -1.0 not allowed (need a number > 0)" and "soil field '...': a vertical slice cannot be seen from
    # the top (allowed views: side, iso)" named no option; a PNG under a file failed only after drawing.
    run = _field_run(tmp_path)
    blocker = tmp_path / "afile"
    blocker.write_text("x")
    cases = [(["--tube-scale", "-1", "--style", "tubes"], "--tube-scale"),
             (["--tube-scale", "nan", "--style", "tubes"], "--tube-scale"),
             (["--soil-field", "nitrate_mg_per_kg", "--view", "top"], "--view"),
             (["--png", str(blocker / "r.png")], "not a folder")]
    for extra, must_say in cases:
        png = ["--png", str(tmp_path / "r.png")] if "--png" not in extra else []
        code = main(["render", str(run), *png, *extra])
        line = _one_error_line(capsys)
        assert code == 2 and must_say in line and "allowed" in line, line
    assert not (tmp_path / "r.png").exists()


def test_core_replicates_without_stand_placed_cores_is_refused(tmp_path, capsys):
    # `--core 0,0,5,30 --core-replicates 2` sampled one core and said nothing of the replicates asked for.
    run = _field_run(tmp_path)
    code = main(["sample", str(run), "--core", "0,0,5,30", "--core-replicates", "2",
                 "--out-dir", str(tmp_path / "out")])
    line = _one_error_line(capsys)
    assert code == 2 and "--core-replicates 2" in line and "--core-grid" in line and "allowed" in line
    assert not (tmp_path / "out").exists()
