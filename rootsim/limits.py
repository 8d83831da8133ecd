"""Size limits that turn absurd specs, options and input files into clear errors instead of exhausted memory.

Every limit is a named constant here, so an error can name it and the README can state it.
"""

from __future__ import annotations

import math

from .errors import RootsimError

__all__ = ["MAX_CELLS", "MAX_STEPS", "MAX_PLANTS", "MAX_EMERGING_ROOTS_PER_PLANT", "MAX_SEGMENT_BUDGET",
           "MAX_EXTENT_CM", "MAX_COORDINATE_CM", "MAX_TOML_BYTES", "MAX_TOML_NESTING", "MAX_TOML_KEY_PARTS",
           "MAX_TOML_NUMBER_DIGITS", "check_cell_count", "check_growable", "check_magnitude", "require_finite"]

#: Most layers, cells, increments, windows or voxels one request may create.
MAX_CELLS = 10_000_000
#: Most growth time steps one run may take.
MAX_STEPS = 2_000_000
#: Most plants in one stand.
MAX_PLANTS = 100_000
#: Most roots that may emerge from one plant (seed, shoot and basal roots over all emergence events).
MAX_EMERGING_ROOTS_PER_PLANT = 100_000
#: Largest segment budget (``run.max_segments``) a run may ask for (at ~200 bytes per segment, ~40 GB).
MAX_SEGMENT_BUDGET = 200_000_000
#: Largest size of a stand, a container or a soil layer depth, cm (10 km).
MAX_EXTENT_CM = 1.0e6
#: Largest absolute coordinate, length, radius or day accepted in a segment table (100 km, or 27,000 years).
MAX_COORDINATE_CM = 1.0e7
#: Largest parameter file, bytes.
MAX_TOML_BYTES = 1 << 20
#: Deepest nesting of arrays and inline tables in a parameter file.
MAX_TOML_NESTING = 32
#: Most parts of one dotted key (``a.b.c`` has three) per line of a parameter file.
MAX_TOML_KEY_PARTS = 64
#: Most digits of one number in a parameter file.
MAX_TOML_NUMBER_DIGITS = 40


def check_cell_count(count: float, *, what: str, noun: str = "cells") -> int:
    """Return ``count`` as an int, or raise a one-line :class:`RootsimError` if it exceeds :data:`MAX_CELLS`.

    Parameters
    ----------
    count : float
        Number of cells the request implies (may be huge or not finite).
    what : str
        What is counted and which option sets it, e.g. ``"depth layers (--layer-cm 1e-09)"``.
    noun : str
        What the count is of, in the message (default ``"cells"``; e.g. ``"increments"``).
    """
    if not math.isfinite(count) or count > MAX_CELLS:
        shown = f"{count:.3g}" if math.isfinite(count) else "infinitely many"
        raise RootsimError(f"{what} gives {shown} {noun} (allowed: at most {MAX_CELLS:,}); use a coarser size")
    return int(count)


def _events_before(em, duration_days: float) -> int:
    """Number of an emergence's events that happen before the run ends."""
    if em.first_day >= duration_days:
        return 0
    if em.interval_days <= 0:
        return int(em.event_count)
    return int(min(em.event_count, math.floor((duration_days - em.first_day) / em.interval_days - 1e-12) + 1))


def check_growable(spec) -> None:
    """Refuse a valid spec that cannot be grown on any machine, naming the limit.

    Checks the number of plants, the roots emerging per plant and in the stand (each becomes at least one
    segment, so they must fit the segment budget), the segment budget itself, and the sizes of the stand,
    the container and the soil layers.

    Parameters
    ----------
    spec : rootsim.spec.Spec

    Raises
    ------
    SpecError
        ``FILE: KEY.PATH: problem (allowed: the limit)``.
    """
    from .errors import SpecError

    source = spec.source
    run, stand, container = spec.run, spec.stand, spec.container
    if run.max_segments > MAX_SEGMENT_BUDGET:
        raise SpecError(source, "run.max_segments", f"a budget of {run.max_segments:,} segments cannot be held in memory",
                        f"at most {MAX_SEGMENT_BUDGET:,}")
    n_plants = stand.rows * stand.plants_per_row
    if n_plants > MAX_PLANTS:
        raise SpecError(source, "stand", f"{stand.rows:,} rows x {stand.plants_per_row:,} plants give {n_plants:,} plants",
                        f"at most {MAX_PLANTS:,} plants")
    for key, size in (("stand.row_spacing_cm", stand.rows * stand.row_spacing_cm),
                      ("stand.plant_spacing_cm", stand.plants_per_row * stand.plant_spacing_cm)):
        if size > MAX_EXTENT_CM:
            raise SpecError(source, key, f"the stand would be {size:.3g} cm across", f"at most {MAX_EXTENT_CM:g} cm")
    for key in ("diameter_cm", "depth_cm", "width_cm", "thickness_cm"):
        value = getattr(container, key, None)
        if value is not None and value > MAX_EXTENT_CM:
            raise SpecError(source, f"container.{key}", f"{value:.3g} cm is larger than any soil",
                            f"at most {MAX_EXTENT_CM:g} cm")
    for i, layer in enumerate(spec.soil.layers):
        if layer.depth_bottom_cm > MAX_EXTENT_CM:
            raise SpecError(source, f"soil.layers[{i}].depth_bottom_cm", f"{layer.depth_bottom_cm:.3g} cm",
                            f"at most {MAX_EXTENT_CM:g} cm")
    per_plant = 0
    for i, em in enumerate(spec.emergence):
        roots = em.event_count * em.roots_per_event
        if roots > MAX_EMERGING_ROOTS_PER_PLANT:
            raise SpecError(source, f"emergence[{i}]", f"{em.event_count:,} events x {em.roots_per_event:,} roots give "
                            f"{roots:,} roots per plant", f"at most {MAX_EMERGING_ROOTS_PER_PLANT:,} roots per plant")
        deepest = abs(em.depth_cm or 0.0) + abs(em.depth_step_cm) * em.event_count
        if deepest > MAX_EXTENT_CM:
            raise SpecError(source, f"emergence[{i}].depth_step_cm", f"roots would emerge {deepest:.3g} cm away",
                            f"depths within {MAX_EXTENT_CM:g} cm")
        per_plant += _events_before(em, run.duration_days) * em.roots_per_event
    if per_plant > MAX_EMERGING_ROOTS_PER_PLANT:
        raise SpecError(source, "emergence", f"{per_plant:,} roots emerge per plant",
                        f"at most {MAX_EMERGING_ROOTS_PER_PLANT:,} roots per plant")
    if per_plant * n_plants > run.max_segments:
        raise SpecError(source, "emergence", f"{per_plant:,} roots per plant x {n_plants:,} plants emerge during the run, "
                        f"each at least one segment, more than the segment budget of {run.max_segments:,}",
                        "fewer roots or plants, or a larger run.max_segments")


def check_magnitude(value: float, *, what: str) -> float:
    """Return ``value``, or raise a one-line :class:`RootsimError` if it lies beyond ±:data:`MAX_COORDINATE_CM`.

    Used for every length, position or area given as an option, so no geometry overflows to ``inf``.

    Parameters
    ----------
    value : float
    what : str
        The option and item, e.g. ``"--core '1e300,0,5,30': X"``.
    """
    if not math.isfinite(value) or abs(value) > MAX_COORDINATE_CM:
        raise RootsimError(f"{what}: {value:.3g} is out of range (allowed: finite values within ±{MAX_COORDINATE_CM:g})")
    return value


def require_finite(result, *, what: str) -> None:
    """Refuse to write a result holding infinite numbers (a DataFrame), or NaN or infinite ones (nested dicts).

    The last guard before output: a result computed from extreme but valid inputs is an error, never a file
    with ``inf`` and exit code 0. In tables an empty cell (NaN) stays allowed: it means "not defined", e.g. the
    standard deviation of a single core or a ratio to a true RLD of zero.

    Raises
    ------
    RootsimError
        Naming the output and the column or key.
    """
    import numpy as np

    if hasattr(result, "select_dtypes"):
        numbers = result.select_dtypes(include="number")
        for column in numbers.columns:
            values = numbers[column].to_numpy(dtype=float, na_value=np.nan)
            if np.isinf(values).any():
                raise RootsimError(f"{what}: column {column} would hold non-finite values (an option or the ground "
                                   "area is too extreme; allowed: results that are finite numbers)")
        return
    stack = [("", result)]
    while stack:
        key, item = stack.pop()
        if isinstance(item, dict):
            stack.extend((f"{key}.{k}" if key else str(k), v) for k, v in item.items())
        elif isinstance(item, (list, tuple)):
            stack.extend((f"{key}[{i}]", v) for i, v in enumerate(item))
        elif isinstance(item, float) and not math.isfinite(item):
            raise RootsimError(f"{what}: {key} would be {item} (an option or the ground area is too extreme; "
                               "allowed: results that are finite numbers)")
