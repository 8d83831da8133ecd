"""Profile and traits of very large root systems within a bounded memory per segment.

:func:`layer_profile` and :func:`root_traits` work on whole columns at once, which needs a few
hundred bytes of temporary arrays per segment: tens of millions of segments need many GB. The
functions here give the same results (same definitions, same exact clipping) while holding the
temporaries of one chunk of segments or of one plant at a time:

* stand-level sums (profile layers, root length by order, maximum depth, the Gale & Grigal
  layers) are added up over chunks of ``chunk_segments`` rows;
* D50/D95 use the two passes of :func:`rootsim.analysis.depth_distribution.quantile_depths`
  (thin-layer lengths, then only the segments reaching into the layer holding the quantile),
  each pass chunked;
* topology, tips, width and convex hull are per plant (a plant's segments never have parents in
  another plant), so they are computed one plant at a time.

The root system's own columns are the only whole-table arrays, plus one int64 index (8 bytes
per segment) that groups segments by plant.
"""

from __future__ import annotations

from typing import Any, Callable

import numpy as np

from .inputs import float_column, ground_area_from_metadata, int_column, positive_number, system_metadata
from .profile import depth_layer_lengths, layer_profile, profile_area

__all__ = ["chunked_layer_profile", "chunked_root_traits", "DEFAULT_CHUNK_SEGMENTS"]

#: Rows per chunk: about 60 MB of temporaries per chunk for the profile.
DEFAULT_CHUNK_SEGMENTS = 500_000

_PROFILE_COLUMNS = ("x0", "y0", "z0", "x1", "y1", "z1", "length_cm", "order")


def _chunks(n: int, size: int | None):
    """(start, stop) of consecutive chunks of ``size`` rows (default :data:`DEFAULT_CHUNK_SEGMENTS`)."""
    size = max(int(DEFAULT_CHUNK_SEGMENTS if size is None else size), 1)
    for start in range(0, n, size):
        yield start, min(start + size, n)


def _slice(system: Any, names, start: int, stop: int) -> dict:
    return {name: np.asarray(system[name])[start:stop] for name in names}


def chunked_layer_profile(system: Any, *, layer_cm: float = 5.0, area_cm2: float | None = None, box=None,
                          max_depth_cm: float | None = None, chunk_segments: int | None = None,
                          on_chunk: Callable[[int], None] | None = None):
    """Same result as :func:`rootsim.analysis.layer_profile`, computed chunk by chunk.

    Parameters
    ----------
    system : RootSystem, DataFrame or mapping
        Segment table (metadata for the ground area as in :func:`layer_profile`).
    layer_cm, area_cm2, box, max_depth_cm
        As for :func:`layer_profile`.
    chunk_segments : int, optional
        Rows per chunk (default :data:`DEFAULT_CHUNK_SEGMENTS`).
    on_chunk : callable, optional
        Called with the number of rows of each finished chunk (for progress bars).

    Returns
    -------
    pandas.DataFrame
        The profile with the same columns and ``attrs`` as :func:`layer_profile`'s.
    """
    import pandas as pd

    area = profile_area(system, area_cm2=area_cm2, box=box)
    options = {"layer_cm": layer_cm, "max_depth_cm": max_depth_cm}
    options.update({"box": box} if box is not None else {"area_cm2": area})
    n = len(np.asarray(system["z0"]))
    parts = []
    for start, stop in _chunks(n, chunk_segments):
        parts.append(layer_profile(_slice(system, _PROFILE_COLUMNS, start, stop), **options))
        if on_chunk is not None:
            on_chunk(stop - start)
    if not parts:
        return layer_profile(_slice(system, _PROFILE_COLUMNS, 0, 0), **options)
    # layers start at the surface with one thickness: shorter chunk profiles (shallower roots) are
    # the top of the longer ones; missing layers and orders hold no root length
    longest = max(parts, key=len)
    order_columns = sorted({c for p in parts for c in p.columns if c.startswith("root_length_order_")},
                           key=lambda c: int(c.split("_")[3]))
    sums = {c: np.zeros(len(longest)) for c in ["root_length_cm"] + order_columns}
    for part in parts:
        for c in sums:
            if c in part:
                sums[c][: len(part)] += part[c].to_numpy()
    tops = longest["depth_top_cm"].to_numpy()
    bottoms = longest["depth_bottom_cm"].to_numpy()
    data = {"depth_top_cm": tops, "depth_bottom_cm": bottoms, "root_length_cm": sums["root_length_cm"],
            "rld_cm_per_cm3": sums["root_length_cm"] / ((bottoms - tops) * area)}
    for c in order_columns:
        data[c] = sums[c]
    frame = pd.DataFrame(data)
    counted = float(sum(p.attrs["root_length_counted_cm"] for p in parts))
    frame.attrs.update({
        "ground_area_cm2": area,
        "layer_cm": longest.attrs["layer_cm"],
        "box": longest.attrs["box"],
        "root_length_counted_cm": counted,
        "root_length_outside_profile_cm": max(counted - float(sums["root_length_cm"].sum()), 0.0),
    })
    return frame


def _depths(system: Any, start: int, stop: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    return (-np.asarray(system["z0"][start:stop], dtype=np.float64), -np.asarray(system["z1"][start:stop], dtype=np.float64),
            np.asarray(system["length_cm"][start:stop], dtype=np.float64))


def chunked_quantile_depths(system: Any, fractions, *, n_bins: int = 128,
                            chunk_segments: int | None = None) -> list[float]:
    """Exact D50/D95-style depths (cm) as :func:`rootsim.analysis.depth_distribution.quantile_depths`,
    with both of its passes done chunk by chunk (the segments reaching into the layer holding a
    quantile are few, and only they are gathered)."""
    from .depth_distribution import depth_in_quantile_layer, quantile_layer

    n = len(np.asarray(system["z0"]))
    total, shallowest, deepest = 0.0, np.inf, -np.inf
    for start, stop in _chunks(n, chunk_segments):
        d0, d1, w = _depths(system, start, stop)
        total += float(w.sum())
        shallowest = min(shallowest, float(min(d0.min(), d1.min())))
        deepest = max(deepest, float(max(d0.max(), d1.max())))
    if n == 0 or total <= 0:
        return [float("nan") for _ in fractions]
    span = deepest - shallowest
    if span <= 0:
        return [shallowest for _ in fractions]
    h = span / n_bins
    layers = np.zeros(n_bins)
    for start, stop in _chunks(n, chunk_segments):
        d0, d1, w = _depths(system, start, stop)
        layers += depth_layer_lengths(d0 - shallowest, d1 - shallowest, w, layer_cm=h, n_layers=n_bins,
                                      bottom_cm=span)[:, 0]
    cum = np.cumsum(layers)
    out = []
    for fraction in fractions:
        layer = quantile_layer(cum, fraction, layer_cm=h, span_cm=span)
        pieces = []
        for start, stop in _chunks(n, chunk_segments):
            d0, d1, w = _depths(system, start, stop)
            s0, s1 = d0 - shallowest, d1 - shallowest
            top, base = np.minimum(s0, s1), np.maximum(s0, s1)
            near = np.flatnonzero((top <= layer.bottom_cm) & (base >= layer.top_cm))
            pieces.append((top[near], base[near], w[near]))
        t, u, w = (np.concatenate([p[c] for p in pieces]) for c in range(3))
        out.append(shallowest + depth_in_quantile_layer(t, u, w, layer))
    return out


_PLANT_COLUMNS = ("parent_id", "root_id", "order", "plant_id", "x0", "y0", "z0", "x1", "y1", "z1", "length_cm")


def _plant_tables(system: Any):
    """Yield ``(plant_id, columns)`` for each plant: its rows (in table order) with ``segment_id``
    0..m-1 and ``parent_id`` renumbered to them (parents always belong to the same plant).

    A plant whose rows are one slice of the table (a table written plant by plant) gets views of
    the columns; otherwise its rows are gathered. A 4-byte local row number per segment is the only
    whole-table temporary."""
    from ..rootsystem import RootSystem
    from .inputs import ValidatedColumns
    from .plant_rows import plant_rows

    plant = int_column(system, "plant_id")
    groups = plant_rows(plant)
    parent_all = int_column(system, "parent_id")
    local = None
    trusted = isinstance(system, (RootSystem, ValidatedColumns))
    for pid, rows in groups:
        columns = ValidatedColumns() if trusted else {}
        for name in _PLANT_COLUMNS:
            columns[name] = np.asarray(system[name])[rows]
        parent = parent_all[rows]
        has = parent >= 0
        renumbered = np.full(parent.shape, -1, dtype=np.int64)
        if isinstance(rows, slice):
            renumbered[has] = parent[has] - rows.start
            size = rows.stop - rows.start
        else:
            if local is None:
                local = np.empty(plant.size, dtype=np.int32 if plant.size < 2**31 else np.int64)
            size = rows.size
            local[rows] = np.arange(size, dtype=local.dtype)
            renumbered[has] = local[parent[has]]
        columns["parent_id"] = renumbered
        columns["segment_id"] = np.arange(size, dtype=np.int64)
        yield int(pid), columns


def chunked_root_traits(system: Any, *, layer_cm: float = 5.0, area_cm2: float | None = None, box=None,
                        chunk_segments: int | None = None,
                        on_plant: Callable[[int], None] | None = None) -> dict:
    """Same result as :func:`rootsim.analysis.root_traits`, computed chunk by chunk and plant by plant.

    Parameters
    ----------
    system : RootSystem, DataFrame or mapping
        Segment table.
    layer_cm, area_cm2, box
        As for :func:`root_traits`.
    chunk_segments : int, optional
        Rows per chunk of the stand-level sums (default :data:`DEFAULT_CHUNK_SEGMENTS`).
    on_plant : callable, optional
        Called with the number of segments of each finished plant (for progress bars).

    Returns
    -------
    dict
        The traits of :func:`root_traits`, same keys and values.
    """
    from ..rootsystem import tip_mask
    from .profile_model import fit_gale_grigal
    from .topology import branch_points, fitter_indices, insertion_angles_deg, interbranch_distances, root_chains
    from .traits import plant_hull_measures, plant_trait_record, stand_trait_record

    if area_cm2 is not None or box is not None:
        area = profile_area(system, area_cm2=area_cm2, box=box)
    else:
        area = ground_area_from_metadata(system_metadata(system))
    h = positive_number(layer_cm, "layer thickness")
    n = len(np.asarray(system["z0"]))
    total, max_depth = 0.0, 0.0
    by_order = np.zeros(0)
    for start, stop in _chunks(n, chunk_segments):
        d0, d1, w = _depths(system, start, stop)
        order = int_column({"order": system["order"][start:stop]}, "order")
        total += float(w.sum())
        max_depth = max(max_depth, float(max(d0.max(), d1.max())))
        counts = np.bincount(order, weights=w)
        by_order = np.pad(by_order, (0, max(0, counts.size - by_order.size)))
        by_order[: counts.size] += counts
    d50, d95 = chunked_quantile_depths(system, (0.5, 0.95), chunk_segments=chunk_segments)
    n_layers = max(1, int(np.ceil(max_depth / h))) if max_depth > 0 else 0
    beta, rms = float("nan"), float("nan")
    if total > 0 and n_layers:
        layers = np.zeros(n_layers)
        for start, stop in _chunks(n, chunk_segments):
            d0, d1, w = _depths(system, start, stop)
            layers += depth_layer_lengths(d0, d1, w, layer_cm=h, n_layers=n_layers)[:, 0]
        below = layers.sum() - np.cumsum(layers)
        beta, rms = fit_gale_grigal(np.arange(1, n_layers + 1) * h, 1.0 - below / total)

    plants, n_roots, n_tips = [], 0, 0
    gap_sums, gap_counts, angle_sums, angle_counts = (np.zeros(0) for _ in range(4))

    def add(sums, counts, values, keys):
        ok = np.isfinite(values)
        s = np.bincount(keys[ok], weights=values[ok])
        c = np.bincount(keys[ok]).astype(np.float64)
        size = max(sums.size, s.size)
        sums, counts = np.pad(sums, (0, size - sums.size)), np.pad(counts, (0, size - counts.size))
        sums[: s.size] += s
        counts[: c.size] += c
        return sums, counts

    for pid, table in _plant_tables(system):
        order = table["order"]
        tips = tip_mask(table["parent_id"], table["root_id"])
        chains = root_chains(table)
        branches = branch_points(table, chains)
        gaps, gap_lateral = interbranch_distances(branches)
        gap_sums, gap_counts = add(gap_sums, gap_counts, gaps, order[chains.first_segment[gap_lateral]])
        angle_sums, angle_counts = add(angle_sums, angle_counts, insertion_angles_deg(table, branches),
                                       order[branches.first_segment])
        fitter = fitter_indices(table, chains, branches)
        width, volume = plant_hull_measures(table, slice(None))
        n_roots += int(chains.n_roots)
        n_tips += int(tips.sum())
        plants.append(plant_trait_record(pid, total_length_cm=float(table["length_cm"].sum()), n_tips=int(tips.sum()),
                                         width_cm=width, convex_hull_volume_cm3=volume, fitter=fitter))
        if on_plant is not None:
            on_plant(len(order))

    def means(sums, counts):
        return {str(k): float(sums[k] / counts[k]) for k in np.flatnonzero(counts)}

    return stand_trait_record(
        n_plants=int(system.n_plants) if hasattr(system, "n_plants") else len(plants), n_segments=int(n),
        n_roots=n_roots, ground_area_cm2=area, total_length_cm=total, length_by_order_cm=by_order, n_tips=n_tips,
        max_depth_cm=max_depth, d50_depth_cm=d50, d95_depth_cm=d95,
        mean_interbranch_distance_cm=means(gap_sums, gap_counts),
        mean_insertion_angle_deg=means(angle_sums, angle_counts), gale_grigal_beta=beta, gale_grigal_rms=rms,
        plants=plants)
