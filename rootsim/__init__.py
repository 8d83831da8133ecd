"""rootsim: grow 3D root systems from parameter files and measure them as root scientists do.

Main entry points
-----------------
load_spec(path)              parse and validate a TOML parameter file
grow(spec, *, seed=None)     grow a root system (returns a :class:`RootSystem`)
RootSystem.read(path)        load a ``segments.parquet``
"""

from __future__ import annotations

__version__ = "0.1.0"

from .errors import (  # noqa: E402
    FormatError,
    RootsimError,
    SamplingError,
    SegmentBudgetError,
    SegmentTableError,
    SpecError,
)
from .rootsystem import RootSystem  # noqa: E402


def __getattr__(name):  # lazy: keep ``import rootsim`` light
    if name in ("load_spec", "parse_spec"):
        from . import spec

        return getattr(spec, name)
    if name == "grow":
        from .soil.thermal import grow_for_spec

        return grow_for_spec
    raise AttributeError(f"module 'rootsim' has no attribute {name!r}")


__all__ = [
    "__version__",
    "RootSystem",
    "RootsimError",
    "SpecError",
    "SegmentTableError",
    "SegmentBudgetError",
    "FormatError",
    "SamplingError",
    "load_spec",
    "parse_spec",
    "grow",
]
