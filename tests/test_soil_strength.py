"""Soil strength: Busscher's power law, the elongation responses and per-class sensitivity."""

import numpy as np
import pytest

from rootsim.soil.strength import (EXPONENTIAL, LINEAR_TO_LIMIT, busscher_adjust_to_water_content,
                                   busscher_penetration_resistance_mpa, elongation_factor, elongation_factor_kernel,
                                   exponential_elongation_factor, limiting_elongation_factor,
                                   resistance_felt_by_class)


def test_busscher_power_law_hand_computed_values():
    # Busscher 1990, Q = a theta^b rho^c; hand-computed with a = 0.1 MPa, b = -2, c = 3:
    # theta = 0.25, rho = 1.5 -> 0.1 * 16 * 3.375 = 5.4 MPa; theta = 0.5, rho = 1.2 -> 0.1 * 4 * 1.728 = 0.6912 MPa
    q = busscher_penetration_resistance_mpa([0.25, 0.5], [1.5, 1.2], coefficient_mpa=0.1, water_content_exponent=-2.0,
                                            bulk_density_exponent=3.0)
    np.testing.assert_allclose(q, [5.4, 0.6912], rtol=1e-12)


def test_drying_and_compaction_make_soil_stronger():
    # Busscher 1990: b < 0, c > 0 -> resistance rises as water content falls and as bulk density rises
    theta = np.linspace(0.1, 0.4, 7)
    q = busscher_penetration_resistance_mpa(theta, 1.4, coefficient_mpa=0.03, water_content_exponent=-2.5,
                                            bulk_density_exponent=4.0)
    assert np.all(np.diff(q) < 0)
    q_dense = busscher_penetration_resistance_mpa(0.25, [1.2, 1.4, 1.6], coefficient_mpa=0.03,
                                                  water_content_exponent=-2.5, bulk_density_exponent=4.0)
    assert np.all(np.diff(q_dense) > 0)


def test_adjustment_to_a_common_water_content_is_the_power_law_ratio():
    # Busscher 1990's use of the power law: Q at theta_common = Q(theta) * (theta_common / theta)^b.
    # Resistance measured at 0.30 adjusted to 0.20 with b = -2 -> x (2/3)^-2 = x 2.25 (hand-computed)
    assert busscher_adjust_to_water_content(1.2, 0.30, 0.20, water_content_exponent=-2.0) == pytest.approx(2.7)
    kw = dict(coefficient_mpa=0.05, water_content_exponent=-1.7, bulk_density_exponent=3.2)
    measured = busscher_penetration_resistance_mpa(0.31, 1.45, **kw)
    adjusted = busscher_adjust_to_water_content(measured, 0.31, 0.22, water_content_exponent=-1.7)
    assert adjusted == pytest.approx(busscher_penetration_resistance_mpa(0.22, 1.45, **kw), rel=1e-12)


def test_exponential_response_halves_per_halving_resistance():
    # 2^(-R / R_half): 1, 1/2, 1/4 at 0, R_half, 2 R_half (analytic; Bengough et al. 2011 form used by the engine)
    np.testing.assert_allclose(exponential_elongation_factor([0.0, 1.5, 3.0], halving_resistance_mpa=1.5),
                               [1.0, 0.5, 0.25])


def test_limiting_response_stops_growth_at_the_limit():
    # linear decline to zero at the limiting resistance (Taylor & Ratliff 1969; 2 MPa: da Silva et al. 1994)
    np.testing.assert_allclose(limiting_elongation_factor([0.0, 1.0, 2.0, 3.0], limiting_resistance_mpa=2.0),
                               [1.0, 0.5, 0.0, 0.0])


def test_thicker_roots_are_slowed_less():
    # per-class sensitivity: R felt = R (r_ref / r)^k; thicker roots penetrate better (Materechera et al. 1991)
    felt = resistance_felt_by_class(2.0, [0.02, 0.05, 0.1], reference_radius_cm=0.05, radius_exponent=1.0)
    np.testing.assert_allclose(felt, [5.0, 2.0, 1.0])
    f = elongation_factor(1.5, response="linear_to_limit", limiting_resistance_mpa=2.5, radius_cm=[0.02, 0.1],
                          reference_radius_cm=0.05, radius_exponent=0.5)
    assert f[0] < f[1]


@pytest.mark.parametrize("code, response, parameter", [(EXPONENTIAL, "exponential", 1.3),
                                                       (LINEAR_TO_LIMIT, "linear_to_limit", 2.5)])
def test_kernel_matches_the_array_functions(code, response, parameter):
    resistance = np.linspace(0, 4, 9)
    expected = elongation_factor(resistance, response=response, halving_resistance_mpa=parameter,
                                 limiting_resistance_mpa=parameter)
    got = [elongation_factor_kernel(r, code, parameter, 1.0) for r in resistance]
    np.testing.assert_allclose(got, expected, rtol=1e-12)


def test_busscher_law_is_recovered_exactly_by_log_log_regression():
    # Source of the check: no worked numbers of Busscher (1990) are recalled here, so this tests the published
    # equation's defining identity instead. Busscher fitted Q = a theta^b rho^c by linear least squares of ln Q on
    # ln theta and ln rho; for values computed with the equation that regression is exact, so numpy's lstsq
    # (an independent solver) must give back ln a, b and c to round-off over a grid of soils.
    theta, rho = np.meshgrid(np.linspace(0.08, 0.42, 9), np.linspace(1.1, 1.8, 8))
    q = busscher_penetration_resistance_mpa(theta, rho, coefficient_mpa=0.025, water_content_exponent=-2.3,
                                            bulk_density_exponent=4.1)
    design = np.column_stack([np.ones(theta.size), np.log(theta.ravel()), np.log(rho.ravel())])
    fitted, *_ = np.linalg.lstsq(design, np.log(q.ravel()), rcond=None)
    np.testing.assert_allclose(fitted, [np.log(0.025), -2.3, 4.1], atol=1e-10)


def test_busscher_adjustment_collapses_readings_of_one_soil_and_composes():
    # The identity behind Busscher's (1990) adjustment to a common water content: readings of one soil (one bulk
    # density) taken at different water contents, each moved to theta = 0.20 with Q (0.20 / theta)^b, are one value,
    # a theta^b rho^c at 0.20 (computed by hand here); and moving 0.30 -> 0.25 -> 0.20 equals moving 0.30 -> 0.20.
    a, b, c, rho = 0.04, -1.9, 3.5, 1.52
    theta = np.array([0.14, 0.19, 0.26, 0.33])
    readings = busscher_penetration_resistance_mpa(theta, rho, coefficient_mpa=a, water_content_exponent=b,
                                                   bulk_density_exponent=c)
    adjusted = busscher_adjust_to_water_content(readings, theta, 0.20, water_content_exponent=b)
    np.testing.assert_allclose(adjusted, a * 0.20 ** b * rho ** c, rtol=1e-12)
    two_steps = busscher_adjust_to_water_content(
        busscher_adjust_to_water_content(1.7, 0.30, 0.25, water_content_exponent=b), 0.25, 0.20,
        water_content_exponent=b)
    assert two_steps == pytest.approx(busscher_adjust_to_water_content(1.7, 0.30, 0.20, water_content_exponent=b),
                                      rel=1e-12)
