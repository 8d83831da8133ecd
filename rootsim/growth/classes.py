"""Per-class parameter tables and vectorized per-root draws."""

from __future__ import annotations

import math

import numpy as np

from ..distributions import Fixed
from ..spec import PARAMETER_RANGES, Spec

__all__ = ["ClassTable", "PARAM_NAMES"]

#: Parameters drawn once per root, in this order (columns of the uniform block).
PARAM_NAMES = tuple(PARAMETER_RANGES)


class ClassTable:
    """The root classes of a spec as arrays indexed by class code."""

    def __init__(self, spec: Spec):
        self.names = list(spec.root_classes)
        self.index = {n: i for i, n in enumerate(self.names)}
        classes = [spec.root_classes[n] for n in self.names]
        self.classes = classes
        self.law_negexp = np.array([c.elongation_law == "negative_exponential" for c in classes])
        self.spiral = np.array([c.radial_placement == "spiral" for c in classes])
        self.spiral_divergence_rad = np.radians([c.spiral_divergence_deg for c in classes])
        self.has_lifespan = any(c.lifespan_days is not None for c in classes)
        k = max([len(c.branches) for c in classes] + [1])
        self.branch_cumulative_probability = np.full((len(classes), k), 2.0)
        self.branch_class = np.full((len(classes), k), -1, dtype=np.int64)
        for i, c in enumerate(classes):
            cum = np.cumsum([b.probability for b in c.branches])
            self.branch_cumulative_probability[i, : len(cum)] = cum
            self.branch_class[i, : len(cum)] = [self.index[b.root_class] for b in c.branches]
        self.any_branching = bool((self.branch_class >= 0).any())

    def draw(self, class_code: np.ndarray, uniforms: np.ndarray) -> dict[str, np.ndarray]:
        """Per-root parameter values.

        Parameters
        ----------
        class_code : ndarray of int, shape (n,)
        uniforms : ndarray, shape (n, len(PARAM_NAMES))
            Independent U(0, 1) draws, one column per parameter.

        Returns
        -------
        dict of str to ndarray, shape (n,)
            Values in the units of the parameter names; ``lifespan_days`` is inf where absent.
        """
        n = len(class_code)
        out = {name: np.empty(n) for name in PARAM_NAMES}
        for code in np.unique(class_code):
            mask = class_code == code
            rc = self.classes[code]
            for j, name in enumerate(PARAM_NAMES):
                dist = getattr(rc, name)
                if dist is None:
                    out[name][mask] = math.inf
                elif isinstance(dist, Fixed):
                    out[name][mask] = dist.value
                else:
                    out[name][mask] = dist.from_uniform(uniforms[mask, j], PARAMETER_RANGES[name])
        return out

    def draw_one(self, name: str, class_code: np.ndarray, uniforms: np.ndarray) -> np.ndarray:
        """Values of one parameter, shape (n,), from uniforms of shape (n,)."""
        out = np.empty(len(class_code))
        for code in np.unique(class_code):
            mask = class_code == code
            out[mask] = getattr(self.classes[code], name).from_uniform(uniforms[mask], PARAMETER_RANGES[name])
        return out
