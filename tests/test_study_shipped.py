"""The shipped invented study: it validates, its layers resolve, and the API demo runs end to end (short)."""

from __future__ import annotations

import importlib.util
from pathlib import Path

import pandas as pd

from rootsim.spec import load_spec
from rootsim.study import plan_study

ROOT = Path(__file__).resolve().parents[1]


def test_shipped_study_plans_four_variants_in_a_pan_soil():
    plan = plan_study(ROOT / "params" / "studies" / "eastmoor_pan_trial.toml")
    assert plan.variants == ["shallow_dense", "shallow_sparse", "steep_dense", "steep_sparse"]
    assert len(plan.tasks) == 16 and len({t.seed for t in plan.tasks}) == 16
    soil = load_spec(ROOT / "params" / "soil_compacted_pan.toml")
    pan = [l for l in soil.soil.layers if l.penetration_resistance_mpa >= soil.soil.deflection_threshold_mpa]
    assert [(l.depth_top_cm, l.depth_bottom_cm) for l in pan] == [(25.0, 35.0)]
    steep = next(t for t in plan.tasks if t.variant == "steep_sparse").spec
    assert steep.root_classes["nodal"].initial_angle_from_vertical_deg.mean == 30.0
    assert steep.root_classes["nodal"].interbranch_distance_cm.mean == 1.2
    assert steep.root_classes["primary"] == soil.root_classes["primary"]


def test_study_demo_runs(tmp_path, capsys):
    spec = importlib.util.spec_from_file_location("study_pan_trial", ROOT / "demos" / "study_pan_trial.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    assert module.main(["--replicates", "2", "--days", "8", "--out", str(tmp_path / "s")]) == 0
    runs = pd.read_parquet(tmp_path / "s" / "runs.parquet")
    assert len(runs) == 8 and (runs.status == "ok").all()
    assert (tmp_path / "s" / "compare" / "report.html").is_file()
    assert "cores per variant" in capsys.readouterr().out
