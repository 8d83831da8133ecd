"""Bench stage ``traits``: root traits of the bench stand, whole-table and chunked (as ``rootsim analyze``).

Times are CPU times (``time.process_time``), the median of 3 repeats, so that other work on a
shared machine inflates them less than wall time would.

Floor, measured in the same run on the same arrays: one ``numpy.bincount`` pass over the segments
(total root length per plant, weighted by segment length) – the least any per-segment trait needs:
reading every segment once and adding it to its plant.
"""

from __future__ import annotations

import time

import numpy as np

from . import make_entry

NAME = "traits"
ORDER = 35

REPEATS = 3
FLOOR = "one numpy.bincount pass over the segments (root length per plant)"


def cpu_median(fn, *args, repeat: int = REPEATS, **kwargs):
    """Median CPU seconds of ``repeat`` calls of ``fn`` and the last result."""
    seconds = []
    result = None
    for _ in range(max(1, repeat)):
        start = time.process_time()
        result = fn(*args, **kwargs)
        seconds.append(time.process_time() - start)
    return float(np.median(seconds)), result


def _length_per_plant(plant: np.ndarray, length: np.ndarray) -> np.ndarray:
    return np.bincount(plant, weights=length)


def run(system, *, workdir) -> dict[str, dict]:
    """Time :func:`rootsim.analysis.root_traits` and :func:`rootsim.analysis.chunked.chunked_root_traits`."""
    from ..analysis import root_traits
    from ..analysis.chunked import chunked_root_traits

    n = len(system["x0"])
    plant, length = np.asarray(system["plant_id"]), np.asarray(system["length_cm"])
    root_traits(system)  # the first call loads the compiled kernels (cached on disk after the first run)
    floor_seconds, per_plant = cpu_median(_length_per_plant, plant, length)
    results = {}
    for name, fn in (("traits", root_traits), ("traits_chunked", chunked_root_traits)):
        seconds, traits = cpu_median(fn, system)
        results[name] = make_entry(
            segments=n, seconds=seconds, floor_seconds=floor_seconds, floor=FLOOR,
            timing="CPU time (time.process_time), median of 3",
            microseconds_per_segment=seconds / max(n, 1) * 1e6,
            plants=len(traits["plants"]),
            total_length_cm=float(traits["total_length_cm"]),
            floor_total_length_cm=float(per_plant.sum()),
        )
    return results
