"""Development over a season: the unbranched apical zone as a time, and elongation rates that change with the
plant's age (rootsim.growth.plant_age), checked against analytic results.

The test plant is one straight vertical root (no tropisms, no random turning) with horizontal laterals of a
constant rate, so a branch point's position along the parent is its depth below the seed and a lateral's birth
time follows from its length: ``birth = T - length / rate`` (linear law, far from its maximum length).
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.integrate import quad
from scipy.optimize import brentq

import rootsim
from rootsim.cli import main
from rootsim.errors import SpecError
from rootsim.growth.plant_age import multiplier_integral
from rootsim.spec import parse_spec

SOWING_CM = 2.0
EMERGE_DAY = 0.3  # not on the step grid: the first step carries a fraction of a step
DURATION = 12.0
LATERAL_RATE = 0.5
# a piecewise-linear multiplier: slow establishment, full rate, then deepening stops
ROWS = [(0.0, 0.2), (4.0, 1.0), (8.0, 1.0), (10.0, 0.0)]
TABLE = [{"plant_age_days": a, "multiplier": m} for a, m in ROWS]


def _spec(step_days, *, rate=2.0, apical=None, table=None, law="linear", max_length_cm=500.0, interbranch=0.7):
    primary = {"elongation_rate_cm_per_day": rate, "max_length_cm": max_length_cm, "elongation_law": law,
               "random_turning_deg_per_sqrt_cm": 0.0, "basal_zone_cm": 1.0, "interbranch_distance_cm": interbranch,
               "branches": [{"root_class": "lateral"}], **(apical or {"apical_zone_days": 3.0})}
    if table is not None:
        primary["elongation_rate_multiplier_by_plant_age"] = table
    return parse_spec({
        "run": {"duration_days": DURATION, "time_step_days": step_days},
        "stand": {"sowing_depth_cm": SOWING_CM},
        "emergence": [{"root_class": "primary", "first_day": EMERGE_DAY}],
        "root_classes": {"primary": primary,
                         "lateral": {"insertion_angle_deg": 90.0, "elongation_rate_cm_per_day": LATERAL_RATE,
                                     "max_length_cm": 100.0, "random_turning_deg_per_sqrt_cm": 0.0}},
    }, source="<development test>")


def _laterals(system):
    """Branch position along the parent (cm) and birth time (days) of every lateral."""
    df = system.to_dataframe()
    groups = df[df.order == 1].groupby("root_id")
    position = -groups.z0.first().to_numpy() - SOWING_CM
    birth = DURATION - groups.length_cm.sum().to_numpy() / LATERAL_RATE
    return position, birth


def _reference_integral(t):
    """M(t) = integral of the multiplier from 0 to t, by scipy quadrature of numpy.interp (independent of the
    closed form in rootsim.growth.plant_age)."""
    ages = np.array([a for a, _ in ROWS])
    values = np.array([m for _, m in ROWS])
    return quad(lambda s: np.interp(s, ages, values), 0.0, t, points=ages[ages < t] if t > 0 else None)[0]


@pytest.mark.parametrize("step_days", [0.5, 0.13])
def test_laterals_emerge_exactly_the_set_time_after_the_tip_passed(step_days):
    # Analytic: at constant rate r the tip passes position p at t_e + p / r; with apical_zone_days = 3 the lateral
    # is born 3 days later, whatever the step (emergence time carried within the step).
    system = rootsim.grow(_spec(step_days), progress=False)
    position, birth = _laterals(system)
    assert len(position) == 24  # branch points 1 + 0.7 k <= r (T - t_e - 3) = 17.4 cm: k = 0..23
    np.testing.assert_allclose(birth - (EMERGE_DAY + position / 2.0), 3.0, atol=1e-9)


@pytest.mark.parametrize("rate", [1.0, 3.0])
def test_apical_zone_length_is_rate_times_time(rate):
    # Analytic: the unbranched zone behind the tip is r x 3 days long, up to one interbranch distance (0.7 cm).
    system = rootsim.grow(_spec(0.5, rate=rate), progress=False)
    position, _ = _laterals(system)
    df = system.to_dataframe()
    tip = -df[df.order == 0].z1.min() - SOWING_CM
    assert tip == pytest.approx(rate * (DURATION - EMERGE_DAY), rel=1e-12)
    zone = tip - position.max()
    assert rate * 3.0 - 1e-9 <= zone <= rate * 3.0 + 0.7 + 1e-9  # a point exactly on the edge may wait


def test_multiplier_integral_matches_quadrature():
    ages = np.array([a for a, _ in ROWS])
    values = np.array([m for _, m in ROWS])
    t = np.array([0.0, 0.3, 2.5, 4.0, 7.0, 9.1, 10.0, 13.0])
    expected = [_reference_integral(x) for x in t]
    np.testing.assert_allclose(multiplier_integral(ages, values, t), expected, rtol=1e-12, atol=1e-12)


@pytest.mark.parametrize("law", ["linear", "negative_exponential"])
@pytest.mark.parametrize("step_days", [0.5, 0.13])
def test_root_length_is_the_integral_of_the_rate(law, step_days):
    # Analytic: dL/dt = r m(t) gives L(t) = r (M(t) - M(t_e)); dL/dt = r m(t) (1 - L / L_max) gives
    # L(t) = L_max (1 - exp(-r (M(t) - M(t_e)) / L_max)). M from quadrature of the piecewise-linear m.
    max_length = 40.0 if law == "negative_exponential" else 500.0
    system = rootsim.grow(_spec(step_days, table=TABLE, law=law, max_length_cm=max_length), progress=False)
    df = system.to_dataframe()
    primary = df[df.order == 0]
    step_end = np.minimum(np.ceil(primary.birth_day.to_numpy() / step_days - 1e-9) * step_days, DURATION)
    grown = 2.0 * np.array([_reference_integral(t) - _reference_integral(EMERGE_DAY) for t in step_end])
    expected = grown if law == "linear" else max_length * (1.0 - np.exp(-grown / max_length))
    np.testing.assert_allclose(-primary.z1.to_numpy() - SOWING_CM, expected, atol=1e-9)
    # deepening stops where the multiplier reaches 0 (age 10 days)
    stopped = -primary.z1.min() - SOWING_CM
    assert stopped == pytest.approx(expected.max(), abs=1e-9)
    assert (primary.birth_day < 10.0).all()


@pytest.mark.parametrize("apical", [{"apical_zone_days": 3.0}, {"apical_zone_cm": 6.0}])
@pytest.mark.parametrize("step_days", [0.5, 0.13])
def test_emergence_under_a_multiplier_is_exact(apical, step_days):
    # The tip passes p when 2 (M(t) - M(t_e)) = p (brentq on the quadrature); a lateral is born 3 days later
    # (zone as a time) or when the tip has passed p + 6 cm (zone as a length), at both step sizes.
    system = rootsim.grow(_spec(step_days, apical=apical, table=TABLE), progress=False)
    position, birth = _laterals(system)
    assert len(position) > 5
    offset_cm = apical.get("apical_zone_cm", 0.0)
    passed = np.array([brentq(lambda t: 2.0 * (_reference_integral(t) - _reference_integral(EMERGE_DAY)) - p - offset_cm,
                              EMERGE_DAY, 10.0, xtol=1e-13) for p in position])
    np.testing.assert_allclose(birth, passed + apical.get("apical_zone_days", 0.0), atol=1e-8)


def _error(data) -> SpecError:
    with pytest.raises(SpecError) as info:
        parse_spec(data, source="variant.toml")
    return info.value


def _data(**primary):
    return {"run": {"duration_days": 5}, "emergence": [{"root_class": "primary"}],
            "root_classes": {"primary": primary}}


def test_bad_development_parameters_are_one_line_errors():
    both = str(_error(_data(apical_zone_cm=2.0, apical_zone_days=1.0)))
    assert "variant.toml" in both and "root_classes.primary.apical_zone_days" in both and "exactly one" in both
    rows = [{"plant_age_days": 0.0, "multiplier": 1.0}, {"plant_age_days": 20.0, "multiplier": 1.0},
            {"plant_age_days": 10.0, "multiplier": 0.0}]
    unsorted = str(_error(_data(elongation_rate_multiplier_by_plant_age=rows)))
    assert "root_classes.primary.elongation_rate_multiplier_by_plant_age[2].plant_age_days" in unsorted
    assert "sorted" in unsorted
    negative = str(_error(_data(elongation_rate_multiplier_by_plant_age=[{"plant_age_days": 0.0,
                                                                          "multiplier": -0.5}])))
    assert "elongation_rate_multiplier_by_plant_age[0].multiplier" in negative and ">= 0" in negative
    assert "\n" not in both + unsorted + negative
    assert "elongation_rate_multiplier_by_plant_age" in str(_error(_data(elongation_rate_multiplier_by_plant_age=[])))


def test_cli_refuses_unsorted_age_table(tmp_path, capsys):
    path = tmp_path / "bad.toml"
    path.write_text('[run]\nduration_days = 5\n[[emergence]]\nroot_class = "primary"\n[root_classes.primary]\n'
                    'elongation_rate_multiplier_by_plant_age = [{ plant_age_days = 5.0, multiplier = 1.0 }, '
                    '{ plant_age_days = 5.0, multiplier = 0.5 }]\n')
    out = tmp_path / "run"
    assert main(["grow", str(path), "--out", str(out), "--quiet"]) == 2
    err = capsys.readouterr().err.strip()
    assert err.startswith("error:") and "bad.toml" in err and "[1].plant_age_days" in err and "\n" not in err
    assert not out.exists()
