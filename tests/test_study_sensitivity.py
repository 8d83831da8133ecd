"""Sensitivity: SALib's Sobol' step reproduces the Ishigami function's analytic indices; a parameter that
cannot change a trait gets a zero index through the whole study runner."""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest

from rootsim.cli import main
from rootsim.study.sensitivity import sensitivity_design, sensitivity_indices
from study_helpers import PARAMS, write_study


def test_sobol_indices_of_the_ishigami_function():
    # Ishigami & Homma (1990), doi:10.1109/ISUMA.1990.151285; analytic indices for a = 7, b = 0.1 as given by
    # Saltelli et al. (2008) "Global Sensitivity Analysis: The Primer": S1 = 0.3139, 0.4424, 0;
    # ST = 0.5576, 0.4424, 0.2437.
    a, b = 7.0, 0.1
    names, bounds = ["x1", "x2", "x3"], [[-math.pi, math.pi]] * 3
    points = sensitivity_design(names, bounds, method="sobol", samples=4096, seed=1)
    x1, x2, x3 = points.T
    y = np.sin(x1) + a * np.sin(x2) ** 2 + b * x3 ** 4 * np.sin(x1)
    table = sensitivity_indices(names, bounds, points, y, method="sobol", seed=1)
    assert table.first_order.to_numpy() == pytest.approx([0.3139, 0.4424, 0.0], abs=0.03)
    assert table.total.to_numpy() == pytest.approx([0.5576, 0.4424, 0.2437], abs=0.03)
    assert (table.first_order_ci95 > 0).all() and (table.first_order_ci95 < 0.1).all()


#: Taproots only (no branching) growing by the linear law: each plant's length is rate x (end - emergence) days
#: exactly (the growth engine integrates the linear law exactly per step), whatever the direction.
STRAIGHT_TAPROOTS = """
name = "straight_taproots"
[run]
duration_days = 8
time_step_days = 0.5
seed = 5
[stand]
rows = 1
plants_per_row = 3
row_spacing_cm = 50.0
plant_spacing_cm = 15.0
sowing_depth_cm = 2.0
[[emergence]]
root_class = "taproot"
first_day = 1.0
[root_classes.taproot]
radius_cm = 0.15
elongation_rate_cm_per_day = 2.0
max_length_cm = 150.0
gravitropism_per_cm = 0.15
random_turning_deg_per_sqrt_cm = 3.0
"""


def test_morris_screening_through_the_study_runner(tmp_path, capsys):
    (tmp_path / "taproots.toml").write_text(STRAIGHT_TAPROOTS)
    study = write_study(tmp_path, '''
name = "screening"
base = "taproots.toml"
master_seed = 5
replicates = 1
[design]
kind = "latin_hypercube"
samples = 4
[[factors]]
name = "taproot_radius"
key = "root_classes.taproot.radius_cm"
range = [0.05, 0.2]
[[factors]]
name = "taproot_rate"
key = "root_classes.taproot.elongation_rate_cm_per_day"
range = [1.0, 3.0]
[measure]
max_depth_cm = 40.0
''')
    out = tmp_path / "sens"
    assert main(["study", "sensitivity", str(study), "--method", "morris", "--trait", "total_length_cm",
                 "--samples", "4", "--out", str(out)]) == 0
    table = pd.read_csv(out / "sensitivity.csv").set_index("factor")
    # radius does not enter elongation, so with common random numbers total length cannot change
    assert table.loc["taproot_radius", "mu_star"] == 0.0
    # Analytic elementary effect (Morris 1991, doi:10.1080/00401706.1991.10484804): total length is linear in
    # the rate, L = plants x rate x (8 - 1) days, so every elementary effect, in SALib's scaling of a step
    # across the whole range, is 3 plants x 7 days x (3 - 1) cm/day = 42 cm, and their spread sigma is zero.
    assert table.loc["taproot_rate", "mu_star"] == pytest.approx(3 * 7.0 * (3.0 - 1.0), rel=1e-9)
    assert table.loc["taproot_rate", "sigma"] == pytest.approx(0.0, abs=1e-9)
    assert (out / "sensitivity.png").stat().st_size > 1000
    runs = pd.read_parquet(out / "runs.parquet")
    assert len(runs) == 4 * 3  # Morris: trajectories x (factors + 1) points
    capsys.readouterr()
    assert main(["study", "sensitivity", str(study), "--method", "morris", "--trait", "nope", "--samples", "4",
                 "--out", str(out), "--resume"]) == 2
    assert "not measured" in capsys.readouterr().err


def test_sobol_through_the_cli_and_its_sample_size_rule(tmp_path, capsys):
    study = write_study(tmp_path, f'''
name = "sobol_smoke"
base = "{PARAMS / 'taproot_laterals.toml'}"
master_seed = 6
[run]
duration_days = 6
[design]
kind = "latin_hypercube"
samples = 2
[[factors]]
name = "taproot_rate"
key = "root_classes.taproot.elongation_rate_cm_per_day"
range = [1.0, 3.0]
[[factors]]
name = "lateral_radius"
key = "root_classes.lateral_first.radius_cm"
range = [0.01, 0.05]
''')
    assert main(["study", "sensitivity", str(study), "--method", "sobol", "--trait", "total_length_cm",
                 "--samples", "3", "--out", str(tmp_path / "bad")]) == 2
    assert "power of 2" in capsys.readouterr().err and not (tmp_path / "bad").exists()
    out = tmp_path / "sobol"
    assert main(["study", "sensitivity", str(study), "--method", "sobol", "--trait", "total_length_cm",
                 "--samples", "4", "--out", str(out)]) == 0
    table = pd.read_csv(out / "sensitivity.csv")
    assert list(table.columns) == ["trait", "factor", "first_order", "first_order_ci95", "total", "total_ci95"]
    assert len(pd.read_parquet(out / "runs.parquet")) == 4 * (2 + 2)  # Saltelli: N (d + 2) points
    radius = table.set_index("factor").loc["lateral_radius"]
    assert radius.total == pytest.approx(0.0, abs=1e-12)  # radius cannot change total length


@pytest.mark.parametrize("method", ["morris", "sobol"])
@pytest.mark.parametrize("samples", ["0", "-2"])
def test_samples_below_one_is_an_error_naming_the_option(tmp_path, capsys, method, samples):
    study = write_study(tmp_path, f'''
name = "samples_check"
base = "{PARAMS / 'taproot_laterals.toml'}"
master_seed = 7
[design]
kind = "latin_hypercube"
samples = 2
[[factors]]
name = "taproot_rate"
key = "root_classes.taproot.elongation_rate_cm_per_day"
range = [1.0, 3.0]
''')
    out = tmp_path / "sens"
    assert main(["study", "sensitivity", str(study), "--method", method, "--trait", "total_length_cm",
                 "--samples", samples, "--out", str(out)]) == 2
    err = capsys.readouterr().err
    assert err.startswith(f"error: --samples {samples}: ") and ">= 1" in err and err.count("\n") == 1, err
    assert "study.toml" not in err and not out.exists()
