"""Per-root parameter draws inside the compiled step: fixed, truncated normal and uniform values.

A parameter of a root class is a row of :func:`parameter_tables` (kind, two numbers, the normal CDF at
the valid range's ends and the clip bounds); :func:`draw_parameter` turns one U(0, 1) number into a
value by the inverse CDF, so truncation to the valid range is exact (no rejection loop), as in
:mod:`rootsim.distributions`.
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit
from numba.np.random.distributions import random_standard_normal
from numba.np.random.generator_core import next_double
from scipy.special import ndtr

from ..distributions import Fixed, Normal, Uniform
from ..spec import PARAMETER_RANGES
from .tropisms import JIT, JIT_BORROW, JIT_INLINE

__all__ = ["FIXED", "NORMAL", "UNIFORM", "parameter_tables", "draw_parameter", "normal_quantile", "uniform_draw",
           "normal_draw"]

FIXED, NORMAL, UNIFORM = 0, 1, 2
_SQRT2 = math.sqrt(2.0)
_SQRT2PI = math.sqrt(2.0 * math.pi)


def parameter_tables(classes, names) -> tuple[np.ndarray, np.ndarray]:
    """Tables of every (class, parameter) for :func:`draw_parameter`.

    Parameters
    ----------
    classes : list of RootClass
    names : sequence of str
        Parameter names (columns).

    Returns
    -------
    kind : ndarray of int64, shape (n_classes, n_params)
        FIXED, NORMAL (standard deviation > 0) or UNIFORM.
    values : ndarray, shape (n_classes, n_params, 6)
        FIXED: (value, ...); NORMAL: (mean, sd, CDF at low, CDF at high, low, high); UNIFORM: (low, high,
        -, -, clip low, clip high). An absent optional parameter (``lifespan_days``) is FIXED at inf.
    """
    kind = np.zeros((len(classes), len(names)), dtype=np.int64)
    values = np.zeros((len(classes), len(names), 6))
    for c, rc in enumerate(classes):
        for p, name in enumerate(names):
            dist = getattr(rc, name)
            valid = PARAMETER_RANGES[name]
            low = np.nextafter(valid.low, math.inf) if valid.low_strict else valid.low
            high = np.nextafter(valid.high, -math.inf) if valid.high_strict else valid.high
            if dist is None:
                values[c, p, 0] = math.inf
            elif isinstance(dist, Fixed) or (isinstance(dist, Normal) and dist.standard_deviation == 0):
                values[c, p, 0] = dist.value if isinstance(dist, Fixed) else dist.mean
            elif isinstance(dist, Normal):
                kind[c, p] = NORMAL
                sd = dist.standard_deviation
                lo = ndtr((valid.low - dist.mean) / sd) if valid.low > -math.inf else 0.0
                hi = ndtr((valid.high - dist.mean) / sd) if valid.high < math.inf else 1.0
                values[c, p] = (dist.mean, sd, lo, hi, low, high)
            elif isinstance(dist, Uniform):
                kind[c, p] = UNIFORM
                values[c, p] = (dist.low, dist.high, 0.0, 0.0, low, high)
            else:  # pragma: no cover - the spec admits only these
                raise TypeError(f"unknown distribution {dist!r}")
    return kind, values


@njit(**JIT)
def normal_quantile(p):
    """Standard normal quantile Φ⁻¹(p) for 0 < p < 1.

    Start from Abramowitz & Stegun (1964) 26.2.23 (rational approximation, |error| < 4.5e-4) and refine
    by Halley's method on Φ(x) - p, with Φ(x) = erfc(-x/√2)/2 (two iterations: cubic convergence takes an
    error of 4.5e-4 to about 1e-10 and then below double precision).
    """
    q = p if p < 0.5 else 1.0 - p
    t = math.sqrt(-2.0 * math.log(q))
    x = t - (2.515517 + 0.802853 * t + 0.010328 * t * t) / (1.0 + t * (1.432788 + t * (0.189269 + 0.001308 * t)))
    x = -x  # quantile of q < 0.5
    for _ in range(2):
        err = 0.5 * math.erfc(-x / _SQRT2) - q
        u = err * _SQRT2PI * math.exp(0.5 * x * x)
        x = x - u / (1.0 + 0.5 * x * u)
    return x if p < 0.5 else -x


@njit(**JIT_BORROW)
def draw_parameter(kind, values, cls, param, uniform):
    """Value of parameter ``param`` for a root of class ``cls`` from one U(0, 1) number (tables of
    :func:`parameter_tables`)."""
    k = kind[cls, param]
    if k == FIXED:
        return values[cls, param, 0]
    if k == NORMAL:
        p = min(max(values[cls, param, 2] + uniform * (values[cls, param, 3] - values[cls, param, 2]), 1e-300),
                1 - 1e-16)
        v = values[cls, param, 0] + values[cls, param, 1] * normal_quantile(p)
    else:
        v = values[cls, param, 0] + uniform * (values[cls, param, 1] - values[cls, param, 0])
    return min(max(v, values[cls, param, 4]), values[cls, param, 5])


# -- draws from a plant's stream in compiled code ------------------------------------------------------------
# Compiled code draws from ``rng.bit_generator`` (taken once per plant) through numba's own implementations of
# ``Generator.random`` and ``Generator.standard_normal`` (the same functions, so the same numbers in the same
# order): a call on the ``Generator`` itself counts a reference to it on every draw.

@njit(**JIT_INLINE)
def uniform_draw(bits):
    """One U[0, 1) number from the bit generator ``bits`` (``rng.bit_generator``), as ``rng.random()``."""
    return next_double(bits)


@njit(**JIT_INLINE)
def normal_draw(bits):
    """One standard normal number from ``bits`` (``rng.bit_generator``), as ``rng.standard_normal()``
    (numpy's ziggurat, as compiled by numba)."""
    return random_standard_normal(bits)
