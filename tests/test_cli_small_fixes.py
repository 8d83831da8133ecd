"""Small command-line fixes: defaults in --help, bench stage names, no BrokenPipe traceback, the core depth
named in its limit error, negative coordinates as option values, paired replicates documented."""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import pytest

from rootsim.cli import main

ROOT = Path(__file__).resolve().parents[1]
TAPROOT = ROOT / "params" / "taproot_laterals.toml"


def help_text(command: str, capsys) -> str:
    assert main([command, "--help"]) == 0
    return " ".join(capsys.readouterr().out.split())


def test_fit_help_shows_its_defaults(capsys):
    text = help_text("fit", capsys)
    assert "replicate seeds per evaluation (default: 3)" in text
    assert "evaluation budget (default: 40)" in text
    assert "override run.duration_days (match the sampling date) (default: the parameter file's value)" in text


def test_bench_help_lists_the_stage_names(capsys):
    from rootsim.bench import stage_names

    text = help_text("bench", capsys)
    assert f"one of: {', '.join(stage_names())}" in text


def test_check_into_a_closed_pipe_prints_no_traceback():
    # the reader of the pipe is gone before rootsim writes (as `rootsim check FILE | head -0`)
    read_end, write_end = os.pipe()
    os.close(read_end)
    env = {**os.environ, "PYTHONPATH": os.pathsep.join([str(ROOT), os.environ.get("PYTHONPATH", "")])}
    try:
        result = subprocess.run([sys.executable, "-m", "rootsim", "check", str(TAPROOT)], stdout=write_end,
                                stderr=subprocess.PIPE, env=env, timeout=120)
    finally:
        os.close(write_end)
    err = result.stderr.decode()
    assert "Traceback" not in err and "BrokenPipeError" not in err, err
    assert result.returncode == 0


def test_core_depth_limit_error_names_the_depth(tmp_path, capsys):
    assert main(["grow", str(TAPROOT), "--out", str(tmp_path), "--days", "2", "--quiet"]) == 0
    assert main(["sample", str(tmp_path), "--core", "0,0,5,1e6,0.01"]) == 2
    err = capsys.readouterr().err
    assert err.startswith("error: core depth 1e+06 cm cut in 0.01 cm increments gives 1e+08 increments")
    assert "cells" not in err
    # a depth beyond the coordinate range is refused earlier, still naming the depth
    assert main(["sample", str(tmp_path), "--core", "0,0,5,1e9"]) == 2
    err = capsys.readouterr().err
    assert err.startswith("error: --core '0,0,5,1e9': DEPTH: 1e+09 is out of range") and "cells" not in err


def test_negative_coordinates_are_option_values(tmp_path, capsys):
    assert main(["grow", str(TAPROOT), "--out", str(tmp_path), "--days", "2", "--quiet"]) == 0
    # the first plant of the taproot file stands at (0, -22.5): an in-row core there
    assert main(["sample", str(tmp_path), "--core", "-0,-22.5,4,20,5", "--wall", "-15,-20,20,20,5"]) == 0, \
        capsys.readouterr().err
    assert (tmp_path / "cores.csv").exists() and (tmp_path / "wall.csv").exists()


def test_readme_explains_paired_replicates_and_how_to_make_them_independent():
    text = " ".join((ROOT / "README.md").read_text(encoding="utf-8").split())
    assert "common random numbers" in text
    assert "To make variants independent, give each file its own `run.seed` and leave out `--seed`" in text
