"""Growth engine: stochastic branching rules under tropisms and soil impedance."""

from .engine import grow, plant_positions

__all__ = ["grow", "plant_positions"]
