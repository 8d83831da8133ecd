"""Growth benchmark: a stand of at least one million segments against a random-walk floor.

Besides CPU time, the entry reports memory per segment two ways: ``bytes_per_segment`` is the peak of
the memory traced by :mod:`tracemalloc` while growing (numpy's and the compiled step's arrays, counted
when allocated) and ``peak_resident_bytes_per_segment`` the peak resident memory added (pages touched);
and ``first_call_seconds``, what a fresh process pays on its first growth (numba's cache load).
"""

from __future__ import annotations

import numpy as np

from . import make_entry, timed

NAME = "growth"

#: A cereal-like stand used only for benchmarking (illustrative values).
BENCH_SPEC = {
    "name": "bench_stand",
    "run": {"duration_days": 40, "time_step_days": 0.5, "seed": 1},
    "stand": {"rows": 2, "plants_per_row": 4, "row_spacing_cm": 75.0, "plant_spacing_cm": 20.0, "sowing_depth_cm": 5.0},
    "soil": {"layers": [{"depth_top_cm": 0, "depth_bottom_cm": 30, "penetration_resistance_mpa": 0.4},
                        {"depth_top_cm": 30, "depth_bottom_cm": 200, "penetration_resistance_mpa": 0.7}],
             "elongation_halving_resistance_mpa": 2.0},
    "emergence": [{"root_class": "primary", "first_day": 1},
                  {"root_class": "seminal", "first_day": 3, "roots_per_event": 4},
                  {"root_class": "nodal", "first_day": 12, "event_count": 6, "interval_days": 5, "roots_per_event": 8}],
    "root_classes": {
        "primary": {"radius_cm": 0.05, "elongation_rate_cm_per_day": 3.3, "max_length_cm": 220, "gravitropism_per_cm": 0.08,
                    "random_turning_deg_per_sqrt_cm": 6, "basal_zone_cm": 2, "apical_zone_cm": 10,
                    "interbranch_distance_cm": 0.6, "branches": [{"root_class": "lateral_first"}]},
        "seminal": {"radius_cm": 0.04, "initial_angle_from_vertical_deg": {"mean": 45, "standard_deviation": 10},
                    "elongation_rate_cm_per_day": 2.8, "max_length_cm": 180, "gravitropism_per_cm": 0.03,
                    "interbranch_distance_cm": 0.7, "apical_zone_cm": 10, "branches": [{"root_class": "lateral_first"}]},
        "nodal": {"radius_cm": 0.08, "initial_angle_from_vertical_deg": {"mean": 65, "standard_deviation": 8},
                  "elongation_rate_cm_per_day": 3.0, "max_length_cm": 200, "gravitropism_per_cm": 0.025,
                  "interbranch_distance_cm": 0.5, "apical_zone_cm": 10, "branches": [{"root_class": "lateral_first"}]},
        "lateral_first": {"radius_cm": 0.02, "elongation_law": "negative_exponential",
                          "elongation_rate_cm_per_day": {"mean": 1.0, "standard_deviation": 0.25},
                          "max_length_cm": {"mean": 15, "standard_deviation": 5}, "random_turning_deg_per_sqrt_cm": 15,
                          "interbranch_distance_cm": 0.8, "branches": [{"root_class": "lateral_second", "probability": 0.6}]},
        "lateral_second": {"radius_cm": 0.01, "elongation_rate_cm_per_day": 0.4, "max_length_cm": 2.0,
                           "random_turning_deg_per_sqrt_cm": 20, "basal_zone_cm": 0.2, "apical_zone_cm": 0.5},
    },
}


def random_walk_floor(n: int, *, seed: int = 0) -> None:
    """Draw ``n`` random unit steps with numpy and accumulate them into positions (the growth floor)."""
    rng = np.random.default_rng(seed)
    steps = rng.standard_normal((n, 3))
    steps /= np.sqrt(np.einsum("ij,ij->i", steps, steps))[:, None]
    np.cumsum(steps, axis=0)


def _status_bytes(key: str) -> int | None:
    try:
        with open("/proc/self/status") as fh:
            for line in fh:
                if line.startswith(key + ":"):
                    return int(line.split()[1]) * 1024
    except OSError:
        return None
    return None


def peak_resident_bytes(fn, *args, **kwargs):
    """Peak resident memory added while ``fn`` runs (Linux: the high-water mark reset through
    ``/proc/self/clear_refs``), and its result; None where the platform cannot tell."""
    import gc

    gc.collect()
    try:
        with open("/proc/self/clear_refs", "w") as fh:
            fh.write("5")  # reset the peak resident set size to the current one (Linux >= 4.0)
    except OSError:
        return None, fn(*args, **kwargs)
    before = _status_bytes("VmRSS")
    result = fn(*args, **kwargs)
    peak = _status_bytes("VmHWM")
    return (None if before is None or peak is None else peak - before), result


def first_call_seconds() -> float | None:
    """CPU seconds a fresh Python process spends on its first :func:`rootsim.grow` (a one-plant, one-day
    spec) beyond the second call: loading the compiled step from numba's cache (or compiling it)."""
    import subprocess
    import sys

    code = (
        "import time\n"
        "from rootsim.spec import parse_spec\n"
        "from rootsim.growth import grow\n"
        "spec = parse_spec({'run': {'duration_days': 1}, 'emergence': [{'root_class': 'a'}], "
        "'root_classes': {'a': {'branches': [{'root_class': 'b'}]}, 'b': {}}}, source='<bench>')\n"
        "t = time.process_time(); grow(spec, progress=False); first = time.process_time() - t\n"
        "t = time.process_time(); grow(spec, progress=False); second = time.process_time() - t\n"
        "print(first - second)\n"
    )
    try:
        out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=600, check=True)
        return float(out.stdout.strip().splitlines()[-1])
    except (subprocess.SubprocessError, OSError, ValueError, IndexError):
        return None


def run_growth(*, segments: int = 1_000_000, seed: int = 0):
    """Grow the bench stand (enlarged until it has ``segments``); return ({"growth": entry}, system)."""
    import tracemalloc

    from ..growth import grow
    from ..growth.engine import MEMORY_BYTES_PER_BUDGET_SEGMENT
    from ..spec import parse_spec

    first_call = first_call_seconds()  # before this process compiles or loads anything
    data = {**BENCH_SPEC, "run": {**BENCH_SPEC["run"], "seed": seed}}
    plants = data["stand"]["plants_per_row"]
    while True:
        data["stand"] = {**data["stand"], "plants_per_row": plants}
        spec = parse_spec(data, source="<bench>")
        system = grow(spec, progress=False)
        if len(system) >= segments:
            break
        plants = int(np.ceil(plants * segments / max(len(system), 1) * 1.05))
    n = len(system)
    del system
    seconds, _ = timed(grow, spec, progress=False, repeat=3)
    floor, _ = timed(random_walk_floor, n, repeat=5)
    resident, _ = peak_resident_bytes(grow, spec, progress=False)
    tracemalloc.start()
    base = tracemalloc.get_traced_memory()[0]
    system = grow(spec, progress=False)
    traced = tracemalloc.get_traced_memory()[1] - base
    tracemalloc.stop()
    entry = make_entry(segments=n, seconds=seconds, floor_seconds=floor,
                       floor="numpy: draw as many random unit steps and cumsum them into positions",
                       bytes_per_segment=traced / n,
                       peak_resident_bytes_per_segment=None if resident is None else resident / n,
                       budget_bound_bytes_per_segment=MEMORY_BYTES_PER_BUDGET_SEGMENT,
                       first_call_seconds=first_call,
                       plants=spec.stand.n_plants, days=spec.run.duration_days,
                       time_step_days=spec.run.time_step_days)
    return {"growth": entry}, system
