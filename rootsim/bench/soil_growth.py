"""Bench stage ``soil_growth``: growth in a 3D gridded soil with biopores and a field tropism against growth
in a layered soil of the same stand.

The stand is the growth stage's bench stand (:data:`rootsim.bench.growth.BENCH_SPEC`, two rows of four
plants, 40 days). The 3D soil holds the same two resistance layers as a ``.npy`` grid of 5 cm nodes with a
gentle variation across the rows, a water-content grid (a drier topsoil, wetter down to 60 cm, varying across
the rows) that every class turns toward (``field_tropism``), and biopores at 200 per m² through 20-100 cm. Floor: the layered stand's time scaled to
the 3D run's segment count (the two soils grow slightly different systems), so the ratio is the cost per
segment of the 3D look-ups, taken as the median over pairs of runs; the aim is at most 1.5.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from . import make_entry

NAME = "soil_growth"
ORDER = 12


def soil_specs(workdir) -> tuple:
    """(layered spec, 3D spec) of the bench stand; the grids are written to ``workdir``."""
    from ..spec import parse_spec
    from .growth import BENCH_SPEC

    workdir = Path(workdir)
    layered = parse_spec(BENCH_SPEC, source="<bench>")
    x = np.arange(-100.0, 100.01, 5.0)
    y = np.arange(-60.0, 60.01, 5.0)
    depth = np.arange(0.0, 220.01, 5.0)
    gx, _, gd = np.meshgrid(x, y, depth, indexing="ij")
    resistance = np.where(gd < 30, 0.4, 0.7) * (1.0 + 0.1 * np.cos(2 * np.pi * gx / 75.0))
    water = 0.15 + 0.15 * np.minimum(gd / 60.0, 1.0) + 0.02 * np.cos(2 * np.pi * gx / 75.0)
    np.save(workdir / "bench_resistance.npy", resistance)
    np.save(workdir / "bench_water.npy", water)
    grid = {"origin_cm": [float(x[0]), float(y[0]), 0.0], "spacing_cm": [5.0, 5.0, 5.0]}
    soil = {"elongation_halving_resistance_mpa": 2.0,
            "fields": {"penetration_resistance_mpa": {"grid": {"file": str(workdir / "bench_resistance.npy"),
                                                               **grid}},
                       "volumetric_water_content": {"grid": {"file": str(workdir / "bench_water.npy"), **grid}}},
            "biopores": {"density_per_m2": 200.0, "radius_cm": {"low": 0.1, "high": 0.3}, "depth_top_cm": 20.0,
                         "depth_bottom_cm": 100.0}}
    tropism = {"field": "volumetric_water_content", "strength_per_cm": 0.01}
    classes = {name: {**c, "field_tropism": tropism} for name, c in BENCH_SPEC["root_classes"].items()}
    gridded = parse_spec({**BENCH_SPEC, "soil": soil, "root_classes": classes}, source="<bench>")
    return layered, gridded


PAIRS = 9


def run(system, *, workdir) -> dict[str, dict]:
    """Time the bench stand in the layered and in the 3D soil: :data:`PAIRS` pairs of runs (a layered run, then
    a 3D run), CPU time. The ratio is the median over the pairs of the 3D run's time per segment over the layered
    run's (the two runs of a pair share the machine's phase, so a slow phase falls on both); ``seconds`` is the
    median 3D run and the floor that time divided by the ratio."""
    import statistics
    import time

    from ..growth import grow

    layered, gridded = soil_specs(workdir)
    for spec in (layered, gridded):  # first calls load compiled code
        grow(spec, progress=False)
    layered_times, gridded_times, ratios = [], [], []
    n_layered = n = in_pores = 0
    for _ in range(PAIRS):
        start = time.process_time()
        result = grow(layered, progress=False)
        layered_times.append(time.process_time() - start)
        n_layered = len(result)
        del result
        start = time.process_time()
        result = grow(gridded, progress=False)
        gridded_times.append(time.process_time() - start)
        n, in_pores = len(result), int(np.count_nonzero(result["in_biopore"]))
        del result
        ratios.append((gridded_times[-1] / n) / (layered_times[-1] / n_layered))
    seconds = statistics.median(gridded_times)
    return {"growth_3d_soil": make_entry(
        segments=n, seconds=seconds, floor_seconds=seconds / statistics.median(ratios),
        floor="growth of the same stand in a layered soil, scaled to the same segment count (median ratio of "
              f"{PAIRS} pairs of runs)",
        layered_segments=n_layered, layered_seconds=statistics.median(layered_times),
        pair_ratio_low=min(ratios), pair_ratio_high=max(ratios), segments_in_biopores=in_pores)}
