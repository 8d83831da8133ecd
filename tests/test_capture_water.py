"""Soil hydraulics and the Richards solver against analytic solutions and independent integration."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import integrate
from scipy.special import erfc

from rootsim.capture.errors import CaptureError
from rootsim.capture.hydraulics import TEXTURE_CLASSES, GardnerSoil, VanGenuchtenMualem, check_van_genuchten
from rootsim.capture.richards import advance_water


def _loam(n=1):
    return VanGenuchtenMualem.texture("loam", n)


def test_van_genuchten_retention_points():
    # van Genuchten (1980): Se = (1 + (alpha|h|)^n)^-m; at |h| = 1/alpha, Se = 2^-m exactly.
    soil = _loam()
    h = -1.0 / soil.alpha
    assert soil.effective_saturation(h)[0] == pytest.approx(2.0 ** -soil.m[0], rel=1e-12)
    assert soil.water_content(np.array([0.0]))[0] == pytest.approx(0.43)    # theta_s at saturation
    assert soil.water_content(np.array([-1e12]))[0] == pytest.approx(0.078, abs=1e-5)  # theta_r when very dry
    theta = soil.water_content(np.array([-330.0]))
    assert soil.head_from_water_content(theta)[0] == pytest.approx(-330.0, rel=1e-10)


def test_mualem_conductivity_matches_numerical_integral():
    # Mualem (1976): K/Ks = Se^l [int_0^Se dx/h(x) / int_0^1 dx/h(x)]^2, integrated here with scipy (independent).
    soil = VanGenuchtenMualem.texture("sandy_loam", 1)
    alpha, n, m = soil.alpha[0], soil.n[0], soil.m[0]
    inv_head = lambda se: alpha / ((se ** (-1.0 / m) - 1.0) ** (1.0 / n))  # 1/|h(Se)|  # noqa: E731
    total = integrate.quad(inv_head, 0.0, 1.0, limit=200)[0]
    for head in (-10.0, -100.0, -1000.0):
        se = soil.effective_saturation(np.array([head]))[0]
        part = integrate.quad(inv_head, 0.0, se, limit=200)[0]
        expected = soil.ks[0] * se ** 0.5 * (part / total) ** 2
        assert soil.conductivity(np.array([head]))[0] == pytest.approx(expected, rel=1e-5)
    assert soil.conductivity(np.array([0.0]))[0] == pytest.approx(soil.ks[0])


def test_capacity_is_the_derivative_of_water_content():
    soil = VanGenuchtenMualem.texture("silt_loam", 5)
    h = np.array([-1.0, -20.0, -150.0, -1500.0, -15000.0])
    step = 1e-4 * np.abs(h)
    numeric = (soil.water_content(h + step) - soil.water_content(h - step)) / (2 * step)
    np.testing.assert_allclose(soil.capacity(h), numeric, rtol=1e-6)


def test_texture_classes_from_carsel_parrish_are_valid():
    for name, values in TEXTURE_CLASSES.items():
        check_van_genuchten(**values, where=name)
    assert TEXTURE_CLASSES["sand"]["ks"] > TEXTURE_CLASSES["loam"]["ks"] > TEXTURE_CLASSES["silty_clay"]["ks"]


@pytest.mark.parametrize("bad", [dict(n=0.9), dict(saturated=0.05), dict(alpha=-0.1), dict(ks=0.0)])
def test_out_of_range_hydraulic_parameters_raise_one_line(bad):
    values = dict(TEXTURE_CLASSES["loam"]) | bad
    with pytest.raises(CaptureError) as info:
        check_van_genuchten(**values, where="horizons[0]")
    assert "\n" not in str(info.value) and "allowed" in str(info.value)


def _ogata_banks_conductivity(x, t, *, alpha, ks, delta_theta, k_initial):
    """Richards for a Gardner soil is linear in K: dK/dt = D K_xx - v K_x, D = Ks/(alpha dtheta), v = Ks/dtheta
    (Srivastava & Yeh 1991, doi:10.1029/90WR02772). With K = Ks at the surface (ponded) and K_i below it, the
    semi-infinite solution is Ogata & Banks (1961, USGS Prof. Paper 411-A)."""
    diffusion = ks / (alpha * delta_theta)
    velocity = ks / delta_theta
    root = 2.0 * np.sqrt(diffusion * t)
    return k_initial + 0.5 * (ks - k_initial) * (erfc((x - velocity * t) / root)
                                                 + np.exp(velocity * x / diffusion) * erfc((x + velocity * t) / root))


def test_ponded_infiltration_matches_the_analytic_gardner_solution_and_converges():
    alpha, ks, residual, saturated, h_initial, days, depth = 0.05, 10.0, 0.05, 0.45, -100.0, 1.0, 200.0
    k_initial = ks * np.exp(alpha * h_initial)
    errors, infiltration = [], []
    for cell_cm, max_dt in ((4.0, 0.004), (2.0, 0.001)):
        n = int(depth / cell_cm)
        soil = GardnerSoil(*(np.full(n, v) for v in (residual, saturated, alpha, ks)))
        head, totals, _, _ = advance_water(np.full(n, h_initial), days, soil=soil, cell_cm=cell_cm,
                                           supply_cm_per_day=500.0, sink=lambda h: np.zeros(h.size),
                                           max_dt_days=max_dt)
        x = (np.arange(n) + 0.5) * cell_cm
        reference = _ogata_banks_conductivity(x, days, alpha=alpha, ks=ks, delta_theta=saturated - residual,
                                              k_initial=k_initial)
        errors.append(np.abs(soil.conductivity(head) - reference).max() / ks)
        infiltration.append(totals.infiltration_cm)
        assert abs(totals.balance_error_cm) < 1e-6
        assert totals.runoff_cm == pytest.approx(500.0 - totals.infiltration_cm, abs=1e-9)  # ponding rule
    # cumulative infiltration = water added to the profile + free drainage at the initial K (analytic profile)
    added = integrate.quad(lambda x: _ogata_banks_conductivity(x, days, alpha=alpha, ks=ks, delta_theta=0.4,
                                                               k_initial=k_initial) - k_initial, 0, depth)[0]
    expected = (saturated - residual) / ks * added + k_initial * days
    assert errors[1] < 1e-3 and errors[1] < errors[0] / 2.0           # converging with refinement
    assert abs(infiltration[1] - expected) < abs(infiltration[0] - expected) + 1e-12
    assert infiltration[1] == pytest.approx(expected, rel=3e-3)


def test_water_table_gives_hydrostatic_equilibrium():
    # No flow at equilibrium: h = -(height above the water table) (analytic, common practice).
    n, cell = 50, 2.0
    soil = VanGenuchtenMualem.texture("silt_loam", n)
    depth_of_centres = (np.arange(n) + 0.5) * cell
    head, totals, _, _ = advance_water(np.full(n, -200.0), 400.0, soil=soil, cell_cm=cell, supply_cm_per_day=0.0,
                                       sink=lambda h: np.zeros(n), bottom="water_table", max_dt_days=5.0)
    np.testing.assert_allclose(head, -(n * cell - depth_of_centres), atol=0.05)
    assert abs(totals.balance_error_cm) < 1e-8


def test_layered_column_with_rain_and_uptake_closes_the_balance_every_day():
    n, cell = 60, 2.5
    soil = VanGenuchtenMualem(*(np.where(np.arange(n) < 12, TEXTURE_CLASSES["sandy_loam"][k],
                                         TEXTURE_CLASSES["clay_loam"][k]) for k in
                                ("residual", "saturated", "alpha", "n", "ks")), np.full(n, 0.5), -2.0)
    sink_profile = np.where(np.arange(n) < 20, 0.004, 0.0)
    head = np.full(n, -150.0)
    rng = np.random.default_rng(3)
    dt = 0.05
    for day in range(20):
        supply = float(rng.choice([0.0, 0.0, 1.5, 6.0]))       # cm/day
        before = soil.water_content(head).sum() * cell
        head, totals, dt, uptake = advance_water(head, 1.0, soil=soil, cell_cm=cell, supply_cm_per_day=supply,
                                                 sink=lambda h: sink_profile, dt_days=dt)
        after = soil.water_content(head).sum() * cell
        closure = (after - before) - (totals.infiltration_cm - totals.drainage_cm - totals.uptake_cm)
        assert abs(closure) < 1e-6, day  # cm; the solver's residual tolerance is 1e-9 cm per step
        assert totals.infiltration_cm + totals.runoff_cm == pytest.approx(supply, abs=1e-12)
        assert uptake[20:].sum() == 0.0


def test_air_entry_modification_is_continuous_at_the_air_entry_head():
    # Vogel, van Genuchten & Cislerova (2001): theta = theta_s and K = Ks at h_s, the original curve shape below.
    soil = VanGenuchtenMualem.texture("clay_loam", 1, air_entry=-2.0)
    plain = VanGenuchtenMualem.texture("clay_loam", 1)
    assert soil.water_content(np.array([-2.0]))[0] == pytest.approx(0.41, rel=1e-12)
    assert soil.conductivity(np.array([-2.0 - 1e-9]))[0] == pytest.approx(soil.ks[0], rel=1e-6)
    # the scaled curve keeps the van Genuchten shape: theta - theta_r proportional to the original
    ratio = (soil.water_content(np.array([-50.0, -500.0])) - 0.095) / (plain.water_content(np.array([-50.0, -500.0])) - 0.095)
    assert ratio[0] == pytest.approx(ratio[1], rel=1e-12) and ratio[0] > 1.0
