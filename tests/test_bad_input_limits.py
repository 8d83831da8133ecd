"""Absurd sizes and unreachable services end in one `error:` line and exit code 2, not exhausted memory."""

from __future__ import annotations

from pathlib import Path

import pytest

from rootsim.cli import main

PARAMS = Path(__file__).resolve().parents[1] / "params"


@pytest.fixture(scope="module")
def grown(tmp_path_factory):
    out = tmp_path_factory.mktemp("limits") / "demo"
    assert main(["grow", str(PARAMS / "taproot_laterals.toml"), "--out", str(out), "--days", "5", "--quiet"]) == 0
    return out


@pytest.mark.parametrize("args", [
    ["analyze", "{dir}", "--layer-cm", "1e-9"],
    ["sample", "{dir}", "--core", "0,0,5,60,1e-9"],
    ["sample", "{dir}", "--core", "0,0,1e300,1e300"],
    ["sample", "{dir}", "--wall", "0,-30,30,60,1e-6"],
    ["sample", "{dir}", "--tube", "0,10,45,120,5.6,0.2", "--tube-window-cm", "1e-9"],
    ["export", "{dir}", "--rld-grid", "{dir}/x.vti", "--voxel-cm", "1e-6"],
    ["bench", "--stage", "nonsense"],
])
def test_absurd_sizes_are_one_line_errors(grown, args, capsys):
    argv = [a.format(dir=grown) for a in args]
    assert main(argv) == 2
    err = capsys.readouterr().err.strip()
    assert err.startswith("error: ") and len(err.splitlines()) == 1


def test_time_step_budget_and_strict_types(tmp_path, capsys):
    spec = PARAMS / "taproot_laterals.toml"
    assert main(["grow", str(spec), "--out", str(tmp_path / "a"), "--step-days", "1e-9"]) == 2
    assert "steps" in capsys.readouterr().err
    text = spec.read_text().replace("duration_days = 45", 'duration_days = "45"').replace("rows = 1", "rows = true")
    bad = tmp_path / "typed.toml"
    bad.write_text(text)
    assert main(["check", str(bad)]) == 2
    assert "run.duration_days" in capsys.readouterr().err
    assert main(["grow", str(spec), "--out", str(tmp_path / "b"), "--days", "nan"]) == 2
    assert "finite" in capsys.readouterr().err


def test_unreachable_dask_scheduler(tmp_path, capsys):
    out = tmp_path / "batch"
    assert main(["batch", str(PARAMS / "taproot_laterals.toml"), "--days", "2", "--scheduler", "tcp://127.0.0.1:1",
                 "--out", str(out)]) == 2
    assert "cannot connect to the Dask scheduler" in capsys.readouterr().err
    assert not out.exists()
