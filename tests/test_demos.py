"""The shipped demo scripts keep running (smoke checks; their numbers are checked by the analyzer tests)."""

from __future__ import annotations

import importlib.util
from pathlib import Path

import pandas as pd

DEMOS = Path(__file__).resolve().parents[1] / "demos"


def test_compare_variants_demo_runs(tmp_path):
    spec = importlib.util.spec_from_file_location("compare_variants", DEMOS / "compare_variants.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    assert module.main(["--days", "6", "--replicates", "1", "--out", str(tmp_path)]) == 0
    table = pd.read_csv(tmp_path / "comparison.csv")
    assert sorted(table.variant) == sorted(module.VARIANTS)
    # D50 lies above D95 by definition of the two depth quantiles.
    assert (table.d50_depth_cm <= table.d95_depth_cm).all()
    assert (tmp_path / "rld_profiles.png").stat().st_size > 0
