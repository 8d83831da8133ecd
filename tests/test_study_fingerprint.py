"""A study's fingerprint counts the input files its specs name by content, not by where they lie."""

from __future__ import annotations

import shutil
from pathlib import Path

from rootsim.study.design import plan_study

ROOT = Path(__file__).resolve().parents[1]


def _copy_params(to: Path) -> Path:
    shutil.copytree(ROOT / "params", to / "params")
    return to / "params" / "studies" / "eastmoor_pan_trial.toml"


def test_moved_project_keeps_the_fingerprint_and_a_changed_weather_table_changes_it(tmp_path):
    # the shipped study's base inherits the cereal file's thermal clock and its weather table: the same files
    # in two folders plan the same study (resuming a moved study folder is allowed) ...
    first = plan_study(_copy_params(tmp_path / "a"))
    second = plan_study(_copy_params(tmp_path / "b"))
    assert first.fingerprint() == second.fingerprint()
    # ... and a weather table with one changed temperature is another study (results depend on it)
    weather = tmp_path / "b" / "params" / "season_2031_weather.csv"
    text = weather.read_text(encoding="utf-8")
    lines = text.splitlines()
    last = lines[-1].split(",")
    last[1] = str(float(last[1]) + 1.0)
    weather.write_text("\n".join(lines[:-1] + [",".join(last)]) + "\n", encoding="utf-8")
    assert plan_study(tmp_path / "b" / "params" / "studies" / "eastmoor_pan_trial.toml").fingerprint() \
        != first.fingerprint()
