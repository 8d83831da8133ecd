"""Parameter values that are fixed or drawn per root from a distribution.

In a parameter file a numeric root-class parameter is either a number or a table:

* ``3.0`` – fixed;
* ``{ mean = 3.0, standard_deviation = 0.5 }`` – normal, truncated to the parameter's valid range;
* ``{ low = 2.0, high = 4.0 }`` – uniform on [low, high].

Draws are made by inverse-CDF transforms of uniforms, so each parameter of each new root
costs one uniform number and truncation is exact (no rejection loop).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.special import ndtr, ndtri

__all__ = ["Fixed", "Normal", "Uniform", "Distribution", "parse_distribution", "ValueRange"]


@dataclass(frozen=True)
class ValueRange:
    """Valid range of a parameter; ``strict`` bounds exclude the end point."""

    low: float = -math.inf
    high: float = math.inf
    low_strict: bool = False
    high_strict: bool = False

    def contains(self, value: float) -> bool:
        ok_low = value > self.low if self.low_strict else value >= self.low
        ok_high = value < self.high if self.high_strict else value <= self.high
        return ok_low and ok_high

    def describe(self) -> str:
        parts = []
        if self.low > -math.inf:
            parts.append(f"{'>' if self.low_strict else '>='} {self.low:g}")
        if self.high < math.inf:
            parts.append(f"{'<' if self.high_strict else '<='} {self.high:g}")
        return " and ".join(parts) or "any number"

    def clip(self, values: np.ndarray) -> np.ndarray:
        low = np.nextafter(self.low, math.inf) if self.low_strict else self.low
        high = np.nextafter(self.high, -math.inf) if self.high_strict else self.high
        return np.clip(values, low, high)


@dataclass(frozen=True)
class Fixed:
    value: float

    @property
    def mean(self) -> float:
        return self.value

    def check(self, valid: ValueRange) -> str | None:
        if not valid.contains(self.value):
            return f"value {self.value:g} is out of range"
        return None

    def from_uniform(self, u: np.ndarray, valid: ValueRange) -> np.ndarray:
        return np.full(u.shape, self.value, dtype=np.float64)


@dataclass(frozen=True)
class Normal:
    mean: float
    standard_deviation: float

    def check(self, valid: ValueRange) -> str | None:
        if not valid.contains(self.mean):
            return f"mean {self.mean:g} is out of range"
        return None

    def from_uniform(self, u: np.ndarray, valid: ValueRange) -> np.ndarray:
        if self.standard_deviation == 0:
            return np.full(u.shape, self.mean, dtype=np.float64)
        lo = ndtr((valid.low - self.mean) / self.standard_deviation) if valid.low > -math.inf else 0.0
        hi = ndtr((valid.high - self.mean) / self.standard_deviation) if valid.high < math.inf else 1.0
        p = np.clip(lo + u * (hi - lo), 1e-300, 1 - 1e-16)
        return valid.clip(self.mean + self.standard_deviation * ndtri(p))


@dataclass(frozen=True)
class Uniform:
    low: float
    high: float

    @property
    def mean(self) -> float:
        return 0.5 * (self.low + self.high)

    def check(self, valid: ValueRange) -> str | None:
        for name, v in (("low", self.low), ("high", self.high)):
            if not valid.contains(v):
                return f"{name} {v:g} is out of range"
        return None

    def from_uniform(self, u: np.ndarray, valid: ValueRange) -> np.ndarray:
        return valid.clip(self.low + u * (self.high - self.low))


Distribution = Fixed | Normal | Uniform

_NORMAL_KEYS = {"mean", "standard_deviation"}
_UNIFORM_KEYS = {"low", "high"}


def _number(value, what: str) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise ValueError(f"{what} must be a number, got {value!r}")
    value = float(value)
    if not math.isfinite(value):
        raise ValueError(f"{what} must be finite, got {value!r}")
    return value


def parse_distribution(value) -> Distribution:
    """Turn a number or a distribution table into a :data:`Distribution`.

    Raises
    ------
    ValueError
        With a message saying what is allowed.
    """
    if isinstance(value, (Fixed, Normal, Uniform)):
        return value
    if isinstance(value, dict):
        keys = set(value) - {"distribution"}
        kind = value.get("distribution")
        if kind is None:
            kind = "normal" if keys == _NORMAL_KEYS else "uniform" if keys == _UNIFORM_KEYS else None
        if kind == "normal" and keys == _NORMAL_KEYS:
            sd = _number(value["standard_deviation"], "standard_deviation")
            if sd < 0:
                raise ValueError("standard_deviation must be >= 0")
            return Normal(_number(value["mean"], "mean"), sd)
        if kind == "uniform" and keys == _UNIFORM_KEYS:
            low, high = _number(value["low"], "low"), _number(value["high"], "high")
            if high < low:
                raise ValueError(f"high ({high:g}) must be >= low ({low:g})")
            return Uniform(low, high)
        raise ValueError(
            "a distribution table must be { mean = ..., standard_deviation = ... } (normal, truncated to the "
            f"valid range) or {{ low = ..., high = ... }} (uniform); got keys {sorted(value)}"
        )
    return Fixed(_number(value, "value"))
