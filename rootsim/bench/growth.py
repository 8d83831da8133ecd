"""Growth benchmark: a stand of at least one million segments against a random-walk floor."""

from __future__ import annotations

import time
import tracemalloc

import numpy as np

from . import make_entry

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


def random_walk_floor(n: int, *, seed: int = 0) -> float:
    """Seconds numpy needs to draw ``n`` random unit steps and accumulate them into positions."""
    rng = np.random.default_rng(seed)
    t = time.perf_counter()
    steps = rng.standard_normal((n, 3))
    steps /= np.sqrt(np.einsum("ij,ij->i", steps, steps))[:, None]
    positions = np.cumsum(steps, axis=0)
    elapsed = time.perf_counter() - t
    del steps, positions
    return elapsed


def run_growth(*, segments: int = 1_000_000, seed: int = 0):
    """Grow the bench stand (enlarged until it has ``segments``); return ({"growth": entry}, system)."""
    from ..growth import grow
    from ..spec import parse_spec

    data = {**BENCH_SPEC, "run": {**BENCH_SPEC["run"], "seed": seed}}
    plants = data["stand"]["plants_per_row"]
    while True:
        data["stand"] = {**data["stand"], "plants_per_row": plants}
        spec = parse_spec(data, source="<bench>")
        t = time.perf_counter()
        system = grow(spec, progress=False)
        seconds = time.perf_counter() - t
        if len(system) >= segments:
            break
        plants = int(np.ceil(plants * segments / max(len(system), 1) * 1.05))
    n = len(system)
    floor = min(random_walk_floor(n, seed=k) for k in range(3))
    seconds = min(seconds, _timed_grow(spec))
    del system
    tracemalloc.start()
    base = tracemalloc.get_traced_memory()[0]
    system = grow(spec, progress=False)
    peak = tracemalloc.get_traced_memory()[1] - base
    tracemalloc.stop()
    entry = make_entry(segments=n, seconds=seconds, floor_seconds=floor,
                       floor="numpy: draw the same number of random unit steps and cumsum them into positions",
                       bytes_per_segment=peak / n, plants=spec.stand.n_plants, days=spec.run.duration_days,
                       time_step_days=spec.run.time_step_days)
    return {"growth": entry}, system


def _timed_grow(spec) -> float:
    from ..growth import grow

    t = time.perf_counter()
    grow(spec, progress=False)
    return time.perf_counter() - t
