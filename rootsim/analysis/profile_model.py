"""Fitted models of the vertical root distribution.

Gale & Grigal (1987), "Vertical root distributions of northern tree species in relation to
successional status", Can. J. For. Res. 17:829-834, doi:10.1139/x87-131: the cumulative
fraction of roots above depth d (cm) is ``Y = 1 - beta**d``; beta near 1 means deep rooting.
Jackson et al. (1996), Oecologia 108:389-411, doi:10.1007/BF00333714, give beta by biome
(crops about 0.961, from memory).
"""

from __future__ import annotations

import numpy as np

from ..errors import RootsimError

__all__ = ["fit_gale_grigal", "gale_grigal_fraction"]


def gale_grigal_fraction(depth_cm, beta: float) -> np.ndarray:
    """Cumulative root fraction ``1 - beta**depth_cm`` above each depth (Gale & Grigal 1987)."""
    return 1.0 - np.power(float(beta), np.asarray(depth_cm, dtype=np.float64))


def fit_gale_grigal(depth_cm, cumulative_fraction) -> tuple[float, float]:
    """Least-squares fit of beta in ``Y = 1 - beta**d`` to a cumulative root profile.

    Parameters
    ----------
    depth_cm : array_like, shape (k,)
        Depths (cm, > 0), typically the bottoms of sampled layers.
    cumulative_fraction : array_like, shape (k,)
        Fraction of the root length above each depth (0-1).

    Returns
    -------
    beta : float
        Fitted extinction coefficient, in (0, 1); NaN if there are no usable points.
    rms : float
        Root-mean-square residual of the fitted fractions.

    Notes
    -----
    Fitted with :func:`scipy.optimize.least_squares` (bounded trust region), started from
    the median of the single-point solutions ``(1 - Y) ** (1 / d)``.
    """
    from scipy.optimize import least_squares

    d = np.asarray(depth_cm, dtype=np.float64)
    y = np.asarray(cumulative_fraction, dtype=np.float64)
    if d.shape != y.shape:
        raise RootsimError(f"Gale & Grigal fit: {d.size} depths but {y.size} fractions")
    ok = np.isfinite(d) & np.isfinite(y) & (d > 0)
    d, y = d[ok], y[ok]
    if not d.size:
        return float("nan"), float("nan")
    lo, hi = 1e-12, 1.0 - 1e-15
    interior = (y > 0) & (y < 1)
    start = np.median((1.0 - y[interior]) ** (1.0 / d[interior])) if interior.any() else 0.5
    start = float(np.clip(start, lo * 10, 1.0 - 1e-9))
    result = least_squares(lambda b: 1.0 - np.power(b[0], d) - y, x0=[start], bounds=([lo], [hi]),
                           xtol=1e-15, ftol=1e-15, gtol=1e-15, method="trf")
    beta = float(result.x[0])
    rms = float(np.sqrt(np.mean(result.fun ** 2)))
    return beta, rms
