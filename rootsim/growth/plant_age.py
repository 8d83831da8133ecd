"""Development with plant age: elongation-rate multipliers by plant age and the apical zone as a time.

A root class may carry ``elongation_rate_multiplier_by_plant_age``: rows ``(a_i, m_i)`` of plant age (time since
sowing on the run's clock: days, effective days or degree-days, see :mod:`rootsim.soil.thermal`) and a multiplier
of the elongation rate, linear between rows and constant (the first or last value) outside them. The growth step
integrates the elongation laws exactly over the multiplier: with ``M(t) = ∫_0^t m(s) ds`` (piecewise quadratic,
computed from the rows) a root of rate ``r`` grows over ``[t_a, t_b]`` as it would over ``M(t_b) - M(t_a)`` days
at the plain rate, since both laws are autonomous in time (``dL/dt = r m(t)`` for the linear law;
``dL/dt = r m(t) (1 - L / L_max)`` for the negative exponential). The step therefore works in *growth time*
``M(t)`` and maps times back with :func:`time_at_growth_time` (the earliest time at which ``M`` reaches a value).

A class with ``apical_zone_days`` instead of ``apical_zone_cm`` lets a branch point become a lateral once the
tip has grown that long past it (a time behind the tip rather than a length), so at a constant rate ``r`` the
unbranched apical zone is ``r × apical_zone_days`` long and it shrinks or grows with the rate.
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np
from numba import njit

from .tropisms import JIT_INLINE

__all__ = ["DevelopmentTables", "development_tables", "growth_time", "time_at_growth_time",
           "multiplier_integral"]


class DevelopmentTables(NamedTuple):
    """Per-class development inputs of the compiled growth step (index = class code)."""

    apical_by_time: np.ndarray  # bool (n_classes,): apical zone given in days (apical_zone_days)
    age_rows: np.ndarray  # int64 (n_classes,): rows of the multiplier table (0: none, multiplier 1)
    age_days: np.ndarray  # float64 (n_classes, k): plant ages of the rows, increasing
    multiplier: np.ndarray  # float64 (n_classes, k): multipliers of the rows
    cumulative: np.ndarray  # float64 (n_classes, k): M at each row's age (integral from age 0)


def development_tables(root_classes) -> DevelopmentTables:
    """:class:`DevelopmentTables` of a list of :class:`rootsim.spec.RootClass` (in class-code order)."""
    n = len(root_classes)
    k = max([len(c.elongation_rate_multiplier_by_plant_age or ()) for c in root_classes] + [1])
    rows = np.zeros(n, dtype=np.int64)
    ages = np.zeros((n, k))
    mult = np.ones((n, k))
    cum = np.zeros((n, k))
    for c, rc in enumerate(root_classes):
        table = rc.elongation_rate_multiplier_by_plant_age or []
        if not table:
            continue
        a = np.array([row.plant_age_days for row in table], dtype=np.float64)
        m = np.array([row.multiplier for row in table], dtype=np.float64)
        rows[c] = a.size
        ages[c, : a.size] = a
        mult[c, : a.size] = m
        cum[c, : a.size] = multiplier_integral(a, m, a)
    apical = np.array([rc.apical_zone_days is not None for rc in root_classes], dtype=np.bool_)
    return DevelopmentTables(apical, rows, ages, mult, cum)


def multiplier_integral(age_days, multiplier, t) -> np.ndarray:
    """``M(t) = ∫_0^t m(s) ds`` of the piecewise-linear multiplier (numpy, any shape of ``t``; for checks and
    tables). ``m`` is the first row's value before the first age and the last row's after the last."""
    a = np.asarray(age_days, float)
    m = np.asarray(multiplier, float)
    t = np.asarray(t, float)
    nodes = m[0] * a[0] + np.concatenate([[0.0], np.cumsum(0.5 * (m[1:] + m[:-1]) * np.diff(a))])
    out = np.where(t < a[0], m[0] * t, nodes[-1] + m[-1] * (t - a[-1]))
    if a.size > 1:
        i = np.clip(np.searchsorted(a, t, side="right") - 1, 0, a.size - 2)
        s = t - a[i]
        slope = (m[i + 1] - m[i]) / (a[i + 1] - a[i])
        inside = (t >= a[0]) & (t < a[-1])
        out = np.where(inside, nodes[i] + s * (m[i] + 0.5 * slope * s), out)
    return out


@njit(**JIT_INLINE)
def growth_time(dev, cls, t):
    """``M(t)`` of class ``cls`` (``t`` itself when the class has no multiplier table)."""
    n = dev.age_rows[cls]
    if n == 0:
        return t
    ages = dev.age_days
    mult = dev.multiplier
    if t <= ages[cls, 0]:
        return mult[cls, 0] * t
    i = 0
    while i + 1 < n and ages[cls, i + 1] <= t:
        i += 1
    s = t - ages[cls, i]
    if i + 1 >= n:
        return dev.cumulative[cls, i] + mult[cls, i] * s
    slope = (mult[cls, i + 1] - mult[cls, i]) / (ages[cls, i + 1] - ages[cls, i])
    return dev.cumulative[cls, i] + s * (mult[cls, i] + 0.5 * slope * s)


@njit(**JIT_INLINE)
def time_at_growth_time(dev, cls, g):
    """The earliest time ``t`` with ``M(t) = g`` for class ``cls`` (inverse of :func:`growth_time`; ``g`` itself
    without a table). Where ``M`` is flat (multiplier 0) the start of the flat stretch is returned; beyond the
    table with a last multiplier of 0, the last row's age."""
    n = dev.age_rows[cls]
    if n == 0:
        return g
    ages = dev.age_days
    mult = dev.multiplier
    cum = dev.cumulative
    if g <= cum[cls, 0]:
        return g / mult[cls, 0] if mult[cls, 0] > 0 else 0.0
    i = 0
    while i + 1 < n and cum[cls, i + 1] < g:
        i += 1
    w = g - cum[cls, i]
    m0 = mult[cls, i]
    if i + 1 >= n:
        return ages[cls, i] + (w / m0 if m0 > 0 else 0.0)
    h = ages[cls, i + 1] - ages[cls, i]
    k = (mult[cls, i + 1] - m0) / h
    # m0 s + k s^2 / 2 = w, the root in [0, h] written without cancellation
    disc = max(m0 * m0 + 2.0 * k * w, 0.0)
    denominator = m0 + np.sqrt(disc)
    s = 2.0 * w / denominator if denominator > 0 else 0.0
    return ages[cls, i] + min(max(s, 0.0), h)
