"""Growth engine: stochastic branching rules under tropisms and soil impedance (numba-compiled step)."""

from .compile_cache import drop_stale_compiled_code, ensure_writable_cache

ensure_writable_cache()  # before any compiled function is declared
drop_stale_compiled_code()  # numba checks only a function's own file

from .engine import grow, plant_positions  # noqa: E402

__all__ = ["grow", "plant_positions"]
