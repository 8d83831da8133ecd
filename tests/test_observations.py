"""Observed vs simulated like for like: overlapping observed depth intervals are refused; the demo's
figure shows the stand mean and the cores, each labelled."""

from __future__ import annotations

import importlib.util
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from rootsim.cli import main
from rootsim.errors import RootsimError
from rootsim.observations import check_depth_intervals

ROOT = Path(__file__).resolve().parents[1]


def test_overlapping_intervals_are_refused_with_the_two_intervals_named():
    mixed = pd.DataFrame({"depth_top_cm": [0, 10, 0, 15], "depth_bottom_cm": [10, 20, 15, 30]})
    with pytest.raises(RootsimError, match=r"cores.csv: depth intervals 0-10 cm and 0-15 cm overlap") as info:
        check_depth_intervals(mixed, source="cores.csv")
    assert "\n" not in str(info.value)


def test_replicate_cores_and_touching_intervals_are_fine():
    # two cores cut at the same 0-10, 10-20 cm increments (replicates), plus a deeper one starting at 20 cm
    table = pd.DataFrame({"depth_top_cm": [0, 10, 0, 10, 20], "depth_bottom_cm": [10, 20, 10, 20, 35]})
    check_depth_intervals(table, source="cores.csv")


def test_fit_refuses_a_cores_file_mixing_increments_and_writes_nothing(tmp_path, capsys):
    observed = tmp_path / "cores.csv"
    pd.DataFrame({"depth_top_cm": [0, 10, 0, 15], "depth_bottom_cm": [10, 20, 15, 30],
                  "rld_cm_per_cm3": [1.0, 0.5, 0.9, 0.3]}).to_csv(observed, index=False)
    out = tmp_path / "fit"
    code = main(["fit", str(ROOT / "params" / "taproot_laterals.toml"), "--observed", str(observed),
                 "--param", "root_classes.taproot.elongation_rate_cm_per_day=1:3", "--out", str(out)])
    err = capsys.readouterr().err
    assert code == 2 and err.startswith("error: ") and "overlap" in err and len(err.splitlines()) == 1
    assert not out.exists()


def test_demo_figure_shows_stand_mean_and_cores_as_given():
    spec = importlib.util.spec_from_file_location("compare_variants", ROOT / "demos" / "compare_variants.py")
    demo = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(demo)
    layers = pd.DataFrame({"depth_top_cm": [0.0, 10.0], "depth_bottom_cm": [10.0, 20.0]})
    profiles = {(v, 0): layers.assign(rld_cm_per_cm3=[0.1 * (i + 1), 0.05]) for i, v in enumerate(demo.VARIANTS)}
    cores = {(v, 0): layers.assign(rld_cm_per_cm3=[0.3 * (i + 1), 0.07]) for i, v in enumerate(demo.VARIANTS)}
    fig = demo.stand_mean_and_cores_figure(profiles, cores, days=30, n_cores={v: 11 for v in demo.VARIANTS})
    assert "stand mean" in fig.get_suptitle() and "cores" in fig.get_suptitle()
    for i, ax in enumerate(fig.axes):
        lines = {line.get_gid(): line for line in ax.lines}
        np.testing.assert_allclose(lines["stand_mean"].get_xdata(), [0.1 * (i + 1), 0.05])
        np.testing.assert_allclose(lines["cores"].get_xdata(), [0.3 * (i + 1), 0.07])
        np.testing.assert_allclose(lines["cores"].get_ydata(), [5.0, 15.0])  # layer mid-depths
        labels = [t.get_text() for t in ax.get_legend().get_texts()]
        assert labels == ["stand mean", "cores (mean of 11)"]
