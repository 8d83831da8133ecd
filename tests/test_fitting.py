"""Fitting parameters to an observed RLD profile: recovering known parameters, outputs, bad input."""

from __future__ import annotations

import json
import tomllib

import numpy as np
import pandas as pd
import pytest

from rootsim.cli import main
from rootsim.distributions import Fixed, Normal
from rootsim.errors import RootsimError, SpecError
from rootsim.fitting import (FitParameter, fit_profile, interval_rld, parse_fit_parameter, read_observed_profile,
                             with_parameter)
from rootsim.growth import grow
from rootsim.spec import parse_spec

SPEC = {
    "name": "fit_trial",
    "run": {"duration_days": 12, "time_step_days": 0.5, "seed": 3},
    "stand": {"rows": 1, "plants_per_row": 3, "row_spacing_cm": 50.0, "plant_spacing_cm": 20.0,
              "sowing_depth_cm": 2.0},
    "emergence": [{"root_class": "axis", "roots_per_event": 3, "first_day": 0.5}],
    "root_classes": {
        "axis": {"initial_angle_from_vertical_deg": {"mean": 30.0, "standard_deviation": 5.0},
                 "elongation_rate_cm_per_day": 2.0, "max_length_cm": 100.0, "gravitropism_per_cm": 0.05,
                 "random_turning_deg_per_sqrt_cm": 5.0, "interbranch_distance_cm": 1.0, "apical_zone_cm": 3.0,
                 "branches": [{"root_class": "lateral"}]},
        "lateral": {"elongation_rate_cm_per_day": 0.6, "max_length_cm": 4.0, "random_turning_deg_per_sqrt_cm": 10.0},
    },
}


def observed_profile(spec, seeds):
    top = np.arange(0.0, 30.0, 3.0)
    rld = np.mean([interval_rld(grow(spec, seed=s), top, top + 3.0, area_cm2=3000.0) for s in seeds], axis=0)
    return pd.DataFrame({"depth_top_cm": top, "depth_bottom_cm": top + 3.0, "rld_cm_per_cm3": rld})


def test_interval_rld_of_a_vertical_root_is_analytic():
    # A vertical root from 0 to 10 cm holds 1 cm of root per cm of depth: RLD = 1 / area in every interval
    # inside it and the overlap share in a straddling one (definition of RLD).
    cols = {"z0": np.array([0.0, -4.0]), "z1": np.array([-4.0, -10.0]), "length_cm": np.array([4.0, 6.0])}
    rld = interval_rld(cols, np.array([0.0, 2.0, 8.0]), np.array([2.0, 8.0, 12.0]), area_cm2=5.0)
    np.testing.assert_allclose(rld, [1 / 5, 1 / 5, (2 / 4) / 5])


def test_with_parameter_sets_fixed_values_and_means():
    spec = parse_spec(SPEC)
    s = with_parameter(spec, "root_classes.axis.elongation_rate_cm_per_day", 3.5)
    assert s.root_classes["axis"].elongation_rate_cm_per_day == Fixed(3.5)
    s = with_parameter(spec, "root_classes.axis.initial_angle_from_vertical_deg", 50.0)
    assert s.root_classes["axis"].initial_angle_from_vertical_deg == Normal(50.0, 5.0)
    with pytest.raises(SpecError):
        with_parameter(spec, "root_classes.axis.radius_cm", -1.0)  # out of the valid range
    with pytest.raises(SpecError):
        with_parameter(spec, "root_classes.axes.radius_cm", 0.1)  # unknown class


def test_fit_recovers_a_known_elongation_rate():
    # Identifiability check: the "observed" profile is the mean of 6 replicate stands grown with a known
    # rate (2.0 cm/day); the fit, with other seeds, must find it again. The profile's depth scales with the rate
    # (rooting depth ~ rate x time), so a 10 % error would move the front by more than a layer.
    truth = parse_spec(SPEC)
    observed = observed_profile(truth, seeds=range(100, 106))
    start = with_parameter(truth, "root_classes.axis.elongation_rate_cm_per_day", 1.0)
    result = fit_profile(start, observed, [FitParameter("root_classes.axis.elongation_rate_cm_per_day", 0.5, 4.0)],
                         replicates=3, max_evaluations=25, area_cm2=3000.0, progress=False)
    assert result.values["root_classes.axis.elongation_rate_cm_per_day"] == pytest.approx(2.0, rel=0.1)
    assert list(result.profile.columns) == ["depth_top_cm", "depth_bottom_cm", "rld_observed_cm_per_cm3",
                                            "rld_fitted_cm_per_cm3"]


def test_fit_two_parameters_moves_toward_the_truth():
    # Two parameters (rate and initial angle): the fitted pair reproduces the observed profile far better than
    # the starting pair and lands near the known values (2.0 cm/day, 30 degrees).
    truth = parse_spec(SPEC)
    observed = observed_profile(truth, seeds=range(200, 206))
    start = with_parameter(with_parameter(truth, "root_classes.axis.elongation_rate_cm_per_day", 3.2),
                           "root_classes.axis.initial_angle_from_vertical_deg", 70.0)
    params = [FitParameter("root_classes.axis.elongation_rate_cm_per_day", 0.5, 4.0),
              FitParameter("root_classes.axis.initial_angle_from_vertical_deg", 0.0, 85.0)]
    result = fit_profile(start, observed, params, replicates=2, max_evaluations=60, area_cm2=3000.0, progress=False)
    assert result.values[params[0].key_path] == pytest.approx(2.0, rel=0.15)
    # The fitted profile reproduces the observed one (made with the true values) to within 15 % of its
    # total RLD, summed over layers; the starting values miss it by far more (rooting front ~60 % too deep).
    fitted = result.profile
    miss = np.abs(fitted["rld_fitted_cm_per_cm3"] - fitted["rld_observed_cm_per_cm3"]).sum()
    assert miss < 0.15 * fitted["rld_observed_cm_per_cm3"].sum()


def test_fit_cli_writes_outputs_and_rejects_bad_input(tmp_path, capsys):
    spec_file = tmp_path / "trial.toml"
    spec_file.write_text(
        "# trial file: comments survive the fit\n"
        'name = "fit_trial"\n[run]\nduration_days = 8\nseed = 1\n'
        "[stand]\nrows = 1\nplants_per_row = 2\n"
        '[[emergence]]\nroot_class = "axis"\nroots_per_event = 2\n'
        "[root_classes.axis]\nelongation_rate_cm_per_day = 1.0\nmax_length_cm = 50.0\ngravitropism_per_cm = 0.1\n"
    )
    # "Observed" cores: the same file grown with a known rate (1.5 cm/day) on other seeds, two cores per depth.
    from rootsim.spec import load_spec

    truth = with_parameter(load_spec(spec_file), "root_classes.axis.elongation_rate_cm_per_day", 1.5)
    top = np.arange(0.0, 16.0, 2.0)
    area = truth.stand.ground_area_cm2
    rld = [interval_rld(grow(truth, seed=s), top, top + 2, area_cm2=area) for s in (50, 51)]
    observed = tmp_path / "cores.csv"
    pd.DataFrame({"core_id": np.repeat([0, 1], top.size), "depth_top_cm": np.tile(top, 2),
                  "depth_bottom_cm": np.tile(top + 2, 2), "rld_cm_per_cm3": np.concatenate(rld)}).to_csv(observed, index=False)
    out = tmp_path / "fit"
    assert main(["fit", str(spec_file), "--observed", str(observed), "--param",
                 "root_classes.axis.elongation_rate_cm_per_day=0.5:3", "--replicates", "2",
                 "--max-evaluations", "12", "--out", str(out)]) == 0
    report = json.loads((out / "fit.json").read_text())
    value = report["values"]["root_classes.axis.elongation_rate_cm_per_day"]
    assert value == pytest.approx(1.5, rel=0.1)  # the known rate of the "observed" cores
    fitted = (out / "fitted_spec.toml").read_text()
    assert fitted.startswith("# trial file: comments survive the fit")
    assert tomllib.loads(fitted)["root_classes"]["axis"]["elongation_rate_cm_per_day"] == pytest.approx(value, abs=1e-6)
    assert len(pd.read_csv(out / "fit_history.csv")) == report["evaluations"]
    for bad in (["--param", "root_classes.axis.elongation_rate_cm_per_day=3:1"],
                ["--param", "root_classes.axis.nope_cm=1:2"],
                ["--param", "root_classes.axis.elongation_rate_cm_per_day"]):
        assert main(["fit", str(spec_file), "--observed", str(observed), *bad, "--out", str(tmp_path / "x")]) == 2
        assert capsys.readouterr().err.startswith("error: ")
    (tmp_path / "bad.csv").write_text("depth_top_cm,rld_cm_per_cm3\n0,1\n")
    assert main(["fit", str(spec_file), "--observed", str(tmp_path / "bad.csv"), "--param",
                 "root_classes.axis.elongation_rate_cm_per_day=0.5:3", "--out", str(tmp_path / "y")]) == 2
    assert "depth_bottom_cm" in capsys.readouterr().err
    assert not (tmp_path / "x").exists() and not (tmp_path / "y").exists()


def test_parse_fit_parameter_and_observed_profile(tmp_path):
    assert parse_fit_parameter("a.b=1:2.5") == FitParameter("a.b", 1.0, 2.5)
    with pytest.raises(RootsimError):
        parse_fit_parameter("a.b=2:1")
    path = tmp_path / "p.csv"
    path.write_text("depth_top_cm,depth_bottom_cm,rld_cm_per_cm3\n0,10,1.0\n0,10,3.0\n10,20,0.5\n")
    table = read_observed_profile(path)
    assert table["rld_cm_per_cm3"].tolist() == [2.0, 0.5]  # replicate cores averaged per interval
