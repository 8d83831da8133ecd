"""Soil strength: penetration resistance from soil physics, and how it slows root elongation.

Pure functions over arrays (numpy) plus numba scalar kernels the growth engine can call per tip.

* :func:`busscher_penetration_resistance_mpa`: Busscher's power-law pedotransfer function
  ``Q = a * theta**b * rho**c`` (Busscher, W. J. 1990. Adjustment of flat-tipped penetrometer resistance data to
  a common water content. Transactions of the ASAE 33(2): 519-524), with the coefficients as inputs: a soil that
  dries (smaller ``theta``, ``b < 0``) or is compacted (larger ``rho``, ``c > 0``) gets stronger.
* :func:`busscher_adjust_to_water_content`: the same paper's use of the power law, bringing resistances measured
  at different water contents to a common one, ``Q2 = Q1 * (theta2 / theta1)**b``.
* :func:`exponential_elongation_factor`: the exponential decline used by the growth engine today,
  ``2**(-R / R_half)`` (common practice; Bengough et al. 2011, J. Exp. Bot. 62: 59-68, doi:10.1093/jxb/erq350).
* :func:`limiting_elongation_factor`: a linear decline that stops growth at a limiting resistance,
  ``max(0, 1 - R / R_limit)``. Elongation falling about linearly with penetrometer resistance to near zero was
  measured for cotton and peanut seedlings by Taylor & Ratliff (1969, Soil Science 108: 113-119; from memory),
  and 2 MPa is the limiting resistance of the least limiting water range (da Silva, Kay & Perfect 1994, Soil Sci.
  Soc. Am. J. 58: 1775-1781; from memory); 2-3 MPa is the usual reading (Bengough et al. 2011).
* :func:`resistance_felt_by_class`: per-class sensitivity. Thicker roots penetrate strong soil better
  (Materechera, Dexter & Alston 1991, Plant and Soil 135: 31-41, from memory; Bengough et al. 2011): a root of
  radius ``r`` feels ``R * (r_ref / r)**k``, so with ``k > 0`` a thick nodal root is slowed less than a thin
  lateral in the same soil. ``k = 0`` (the default) gives every class the same response.
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit

__all__ = ["busscher_penetration_resistance_mpa", "busscher_adjust_to_water_content",
           "exponential_elongation_factor", "limiting_elongation_factor", "resistance_felt_by_class",
           "elongation_factor", "elongation_factor_kernel", "EXPONENTIAL", "LINEAR_TO_LIMIT"]

#: Response codes for :func:`elongation_factor_kernel`.
EXPONENTIAL, LINEAR_TO_LIMIT = 0, 1

#: ln 2, for 2**x = exp(x ln 2).
_LN2 = math.log(2.0)


def busscher_penetration_resistance_mpa(volumetric_water_content, bulk_density_g_per_cm3, *,
                                        coefficient_mpa: float, water_content_exponent: float,
                                        bulk_density_exponent: float) -> np.ndarray:
    """Penetration resistance (MPa) from water content and bulk density, Busscher (1990) power law.

    ``Q = coefficient_mpa * theta**water_content_exponent * rho**bulk_density_exponent``.

    Parameters
    ----------
    volumetric_water_content : array_like
        ``theta`` (m³/m³, > 0).
    bulk_density_g_per_cm3 : array_like
        ``rho`` (g/cm³, > 0); broadcast with ``theta``.
    coefficient_mpa, water_content_exponent, bulk_density_exponent : float, keyword-only
        ``a``, ``b`` (usually negative) and ``c`` (usually positive), fitted per soil.

    Returns
    -------
    ndarray
        Resistance in MPa, the broadcast shape.
    """
    theta = np.asarray(volumetric_water_content, dtype=float)
    rho = np.asarray(bulk_density_g_per_cm3, dtype=float)
    return coefficient_mpa * theta ** water_content_exponent * rho ** bulk_density_exponent


def busscher_adjust_to_water_content(resistance_mpa, volumetric_water_content, common_water_content, *,
                                     water_content_exponent: float) -> np.ndarray:
    """Resistance at a common water content from one measured at another (Busscher 1990).

    ``Q_common = Q * (theta_common / theta)**b``: the power law's ratio at fixed bulk density.
    """
    q = np.asarray(resistance_mpa, dtype=float)
    return q * (np.asarray(common_water_content, float) / np.asarray(volumetric_water_content, float)) \
        ** water_content_exponent


def exponential_elongation_factor(resistance_mpa, *, halving_resistance_mpa: float) -> np.ndarray:
    """``2**(-R / R_half)``: elongation halves with every ``halving_resistance_mpa`` of resistance."""
    return np.exp2(-np.asarray(resistance_mpa, float) / halving_resistance_mpa)


def limiting_elongation_factor(resistance_mpa, *, limiting_resistance_mpa: float) -> np.ndarray:
    """``max(0, 1 - R / R_limit)``: a linear decline that stops elongation at ``limiting_resistance_mpa``."""
    return np.clip(1.0 - np.asarray(resistance_mpa, float) / limiting_resistance_mpa, 0.0, 1.0)


def resistance_felt_by_class(resistance_mpa, radius_cm, *, reference_radius_cm: float = 0.05,
                             radius_exponent: float = 0.0) -> np.ndarray:
    """Resistance a root of ``radius_cm`` responds to: ``R * (reference_radius_cm / radius_cm)**radius_exponent``."""
    return np.asarray(resistance_mpa, float) * (reference_radius_cm / np.asarray(radius_cm, float)) \
        ** radius_exponent


def elongation_factor(resistance_mpa, *, response: str = "exponential", halving_resistance_mpa: float = 1.0,
                      limiting_resistance_mpa: float = 2.5, radius_cm=None, reference_radius_cm: float = 0.05,
                      radius_exponent: float = 0.0) -> np.ndarray:
    """Multiplier of elongation (0..1) at resistance ``resistance_mpa`` for roots of ``radius_cm``.

    ``response`` is ``"exponential"`` (:func:`exponential_elongation_factor`) or ``"linear_to_limit"``
    (:func:`limiting_elongation_factor`); the resistance is first scaled per class by
    :func:`resistance_felt_by_class` when ``radius_cm`` is given.
    """
    felt = np.asarray(resistance_mpa, float)
    if radius_cm is not None:
        felt = resistance_felt_by_class(felt, radius_cm, reference_radius_cm=reference_radius_cm,
                                        radius_exponent=radius_exponent)
    if response == "exponential":
        return exponential_elongation_factor(felt, halving_resistance_mpa=halving_resistance_mpa)
    if response == "linear_to_limit":
        return limiting_elongation_factor(felt, limiting_resistance_mpa=limiting_resistance_mpa)
    raise ValueError(f"unknown elongation response {response!r} (allowed: exponential, linear_to_limit)")


@njit(cache=True, inline="always")
def elongation_factor_kernel(resistance_mpa, response_code, response_parameter_mpa, class_scale):
    """Scalar kernel of :func:`elongation_factor` for the compiled growth step.

    Parameters
    ----------
    resistance_mpa : float
    response_code : int
        :data:`EXPONENTIAL` (parameter = halving resistance) or :data:`LINEAR_TO_LIMIT` (parameter = limiting
        resistance).
    response_parameter_mpa : float
    class_scale : float
        ``(reference_radius_cm / radius_cm)**radius_exponent`` of the tip's class (1.0: no per-class effect).
    """
    felt = resistance_mpa * class_scale
    if response_code == LINEAR_TO_LIMIT:
        f = 1.0 - felt / response_parameter_mpa
        return min(max(f, 0.0), 1.0)
    return math.exp(felt * (-_LN2 / response_parameter_mpa))  # 2**(-felt / parameter); exp is cheaper than pow
