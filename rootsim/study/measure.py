"""What one run of a study measures: traits, depth profiles by order (at several dates) and virtual samples."""

from __future__ import annotations

import numpy as np

from .schema import DEFAULT_TRAITS, Measure

__all__ = ["measure_run", "system_at_day", "ALL_ORDERS"]

#: ``order`` value of the rows of ``profiles.parquet`` that hold all root orders together.
ALL_ORDERS = -1


def system_at_day(system, day: float):
    """The root system as it was on ``day``: the segments formed by then.

    Segments are formed in time steps and never change afterwards, so this is exact on the time-step grid
    for roots that are still alive at the end of the run (roots that died by then are not in the table).
    """
    from ..rootsystem import RootSystem

    keep = np.asarray(system["birth_day"]) <= day + 1e-9
    if keep.all():
        return system
    return RootSystem({name: system[name][keep] for name in system.columns}, system.metadata, validate=False)


def _profile_rows(system, measure: Measure, day: float, area: float) -> dict:
    from ..analysis.profile import depth_layer_lengths

    if measure.intervals_cm:
        from ..fitting import interval_rld

        tops = np.array([p[0] for p in measure.intervals_cm], float)
        bottoms = np.array([p[1] for p in measure.intervals_cm], float)
        rld = interval_rld(system, tops, bottoms, area_cm2=area)
        return {"day": np.full(tops.size, day), "order": np.full(tops.size, ALL_ORDERS, dtype=np.int64),
                "depth_top_cm": tops, "depth_bottom_cm": bottoms,
                "root_length_cm": rld * (bottoms - tops) * area, "rld_cm_per_cm3": rld}

    h = measure.layer_cm
    n_layers = int(np.ceil(measure.max_depth_cm / h - 1e-9))
    order = np.asarray(system["order"], dtype=np.int64)
    n_orders = int(order.max()) + 1 if len(order) else 1
    lengths = depth_layer_lengths(-np.asarray(system["z0"]), -np.asarray(system["z1"]), np.asarray(system["length_cm"]),
                                  layer_cm=h, n_layers=n_layers, bottom_cm=measure.max_depth_cm, group=order,
                                  n_groups=n_orders)
    tops = np.arange(n_layers) * h
    bottoms = np.minimum(tops + h, measure.max_depth_cm)
    volume = (bottoms - tops) * area
    blocks = [(ALL_ORDERS, lengths.sum(axis=1))] + [(k, lengths[:, k]) for k in range(n_orders)]
    return {
        "day": np.full(n_layers * len(blocks), day),
        "order": np.repeat([b[0] for b in blocks], n_layers).astype(np.int64),
        "depth_top_cm": np.tile(tops, len(blocks)),
        "depth_bottom_cm": np.tile(bottoms, len(blocks)),
        "root_length_cm": np.concatenate([b[1] for b in blocks]),
        "rld_cm_per_cm3": np.concatenate([b[1] for b in blocks]) / np.tile(volume, len(blocks)),
    }


def _samples(system, measure: Measure, day: float):
    import pandas as pd

    from ..sampling import core_grid, parse_tube, parse_wall, sample_cores, sample_tube, sample_wall

    frames = []
    cores = [dict(c.model_dump()) for c in measure.cores]
    if measure.core_grid is not None:
        cores += core_grid(system, **measure.core_grid.model_dump())
    if cores:
        df = sample_cores(system, cores=cores)
        df.insert(0, "sampler", "core")
        df = df.rename(columns={"core_id": "sampler_id"})
        frames.append(df)
    if measure.walls:
        df = sample_wall(system, walls=[parse_wall(w, option="measure.walls") for w in measure.walls])
        df.insert(0, "sampler", "wall")
        frames.append(df.rename(columns={"wall_id": "sampler_id"}))
    if measure.tubes:
        df = sample_tube(system, tubes=[parse_tube(t, option="measure.tubes") for t in measure.tubes])
        df.insert(0, "sampler", "tube")
        frames.append(df.rename(columns={"tube_id": "sampler_id"}))
    if not frames:
        return None
    out = pd.concat(frames, ignore_index=True, sort=False)
    out.insert(0, "day", day)
    return out


def measure_run(system, measure: Measure, *, final_day: float) -> tuple[dict, "object", "object"]:
    """Traits (dict), profile table and samples table (DataFrames; samples None if no sampler) of one run.

    Parameters
    ----------
    system : RootSystem
        The grown system (at ``final_day``).
    measure : Measure
        The study's ``[measure]`` table.
    final_day : float
        Day the run ended (traits are taken there; profiles and samples also on ``measure.days``).
    """
    import pandas as pd

    from ..analysis import root_traits
    from ..analysis.depth_distribution import cumulative_depth

    area = system.ground_area_cm2
    wanted = list(measure.traits) if measure.traits is not None else list(DEFAULT_TRAITS)
    traits = root_traits(system) if wanted else {}
    row = {}
    for name in wanted:
        value = traits.get(name)
        row[name] = float(value) if isinstance(value, (int, float)) and not isinstance(value, bool) else np.nan
    by_order = np.bincount(np.asarray(system["order"], dtype=np.int64), weights=np.asarray(system["length_cm"]))
    for order, length in enumerate(by_order):
        row[f"length_order_{order}_cm"] = float(length)
    if measure.length_below_cm:
        cum = cumulative_depth(-np.asarray(system["z0"]), -np.asarray(system["z1"]), np.asarray(system["length_cm"]))
        total = float(np.sum(system["length_cm"]))
        for depth in measure.length_below_cm:
            row[f"root_length_below_{depth:g}cm_cm"] = total - float(cum.at(np.array([depth]))[0])
    days = sorted({float(d) for d in measure.days if d < final_day} | {float(final_day)})
    profiles, samples = [], []
    for day in days:
        at = system_at_day(system, day)
        profiles.append(pd.DataFrame(_profile_rows(at, measure, day, area)))
        s = _samples(at, measure, day)
        if s is not None:
            samples.append(s)
    profile = pd.concat(profiles, ignore_index=True)
    sample_table = pd.concat(samples, ignore_index=True) if samples else None
    return row, profile, sample_table
