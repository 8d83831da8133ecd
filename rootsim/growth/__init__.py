"""Growth engine: stochastic branching rules under tropisms and soil impedance (numba-compiled step)."""

from .compile_cache import ensure_writable_cache

ensure_writable_cache()  # before any compiled function is declared

from .engine import grow, plant_positions  # noqa: E402

__all__ = ["grow", "plant_positions"]
