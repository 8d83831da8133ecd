"""Per-class parameter tables of a spec, as arrays for the compiled growth step."""

from __future__ import annotations

import numpy as np

from ..spec import PARAMETER_RANGES, Spec
from .draws import parameter_tables
from .plant_age import development_tables

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
        # Per-root parameter draws (rootsim.growth.draws): kind and numbers of every (class, parameter).
        self.parameter_kind, self.parameter_values = parameter_tables(classes, PARAM_NAMES)
        # Apical zone as a time and rate multipliers by plant age (rootsim.growth.plant_age).
        self.development = development_tables(classes)
