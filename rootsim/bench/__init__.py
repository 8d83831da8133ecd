"""``rootsim bench``: throughputs of each stage next to a simple floor measured in the same run.

Every time is CPU time of this process (:func:`time.process_time`), the median of repeated runs, so
other work sharing the machine slows the wall clock but not the figures. A floor is the best simple
way to do the same job with numpy (named in each entry).

The growth stage (:mod:`rootsim.bench.growth`) grows a stand of at least one million segments.
Every other module in this package that defines ``NAME``, ``ORDER`` and
``run(system, *, workdir) -> dict[str, dict]`` adds entries measured on that stand.
Each entry has the same form, built by :func:`make_entry`.
"""

from __future__ import annotations

import importlib
import pkgutil
import statistics
import tempfile
import time

__all__ = ["make_entry", "run_bench", "stage_names", "timed", "TIMING"]

#: How every time in the bench is measured (stated in each entry).
TIMING = "CPU seconds of this process (time.process_time), median of the repeats"


def make_entry(*, segments: int, seconds: float, floor_seconds: float, floor: str, **extra) -> dict:
    """One benchmark entry: work size, time, the floor's time and their ratio."""
    entry = {
        "timing": TIMING,
        "segments": int(segments),
        "seconds": float(seconds),
        "floor_seconds": float(floor_seconds),
        "ratio_to_floor": float(seconds / floor_seconds) if floor_seconds > 0 else float("inf"),
        "segments_per_second": float(segments / seconds) if seconds > 0 else float("inf"),
        "floor": floor,
    }
    entry.update(extra)
    return entry


def timed(fn, *args, repeat: int = 3, **kwargs):
    """Run ``fn`` ``repeat`` times; return (median CPU seconds, last result).

    CPU time (:func:`time.process_time`) counts this process's work only, whatever else runs on the
    machine; the median of the repeats discards a slow first run (caches, page faults) or an odd one.
    """
    times = []
    result = None
    for _ in range(max(1, repeat)):
        result = None  # release the previous result before the next run
        t = time.process_time()
        result = fn(*args, **kwargs)
        times.append(time.process_time() - t)
    return statistics.median(times), result


def _stage_modules():
    mods = []
    for info in pkgutil.iter_modules(__path__):
        if info.name.startswith("_") or info.name == "growth":
            continue
        mod = importlib.import_module(f"{__name__}.{info.name}")
        if hasattr(mod, "NAME") and hasattr(mod, "run"):
            mods.append(mod)
    return sorted(mods, key=lambda m: (getattr(m, "ORDER", 100), m.NAME))


def stage_names() -> list[str]:
    """Names of the later stages (``--stage`` values)."""
    return [mod.NAME for mod in _stage_modules()]


def run_bench(*, segments: int = 1_000_000, seed: int = 0, stages: list[str] | None = None, report=None) -> dict:
    """Run the benchmark; returns ``{stage_entry_name: entry}``.

    Parameters
    ----------
    segments : int
        Minimum number of segments of the benchmark stand.
    seed : int
        Seed of the stand.
    stages : list of str, optional
        Names of later stages to run (default all); growth always runs.
    report : callable, optional
        Called with a progress message per stage.
    """
    from . import growth

    say = report or (lambda msg: None)
    say("growth")
    results, system = growth.run_growth(segments=segments, seed=seed)
    with tempfile.TemporaryDirectory(prefix="rootsim-bench-") as workdir:
        for mod in _stage_modules():
            if stages is not None and mod.NAME not in stages:
                continue
            say(mod.NAME)
            results.update(mod.run(system, workdir=workdir))
    return results
