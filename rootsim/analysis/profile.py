"""Root length and root length density (RLD) by depth layer, segments clipped exactly.

A segment crossing layer boundaries contributes to each layer exactly the part of its
length that lies in that layer (its length is spread uniformly along its depth range), so
the layer lengths add up to the root length between the surface and the bottom layer.
RLD of a layer is its root length divided by its soil volume, layer thickness x ground
area (common practice for soil-core and monolith sampling).

Speed: most segments lie inside one layer; those are summed with a single weighted
``numpy.bincount`` on the layer index. Only the few segments that cross a boundary (or
leave the profile) are split, with a difference array for the layers they span entirely.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd

from ..errors import RootsimError
from ..geometry import segment_box_parameters
from .inputs import float_column, ground_area_from_metadata, int_column, positive_number, system_metadata

__all__ = ["layer_profile", "depth_layer_lengths", "profile_area", "check_box"]


def depth_layer_lengths(depth0: np.ndarray, depth1: np.ndarray, length: np.ndarray, *, layer_cm: float,
                        n_layers: int, bottom_cm: float | None = None, group: np.ndarray | None = None,
                        n_groups: int = 1) -> np.ndarray:
    """Root length in each depth layer (and group), segments split exactly at layer boundaries.

    Layers are ``[k * layer_cm, (k + 1) * layer_cm)`` for ``k = 0 .. n_layers - 1``; the last
    layer ends at ``bottom_cm`` (default ``n_layers * layer_cm``; a smaller value makes it thinner).

    Parameters
    ----------
    depth0, depth1 : ndarray, shape (n,)
        Depths of the segment end points, cm (positive downward).
    length : ndarray, shape (n,)
        Segment lengths, cm; spread uniformly over each segment's depth range (a horizontal
        segment's whole length goes to the layer holding it).
    layer_cm : float
        Layer thickness, cm.
    n_layers : int
        Number of layers.
    bottom_cm : float, optional
        Depth of the bottom of the last layer, cm, in ``((n_layers - 1) * layer_cm, n_layers * layer_cm]``.
    group : ndarray of int, shape (n,), optional
        Group of each segment (e.g. root order), ``0 .. n_groups - 1``.
    n_groups : int
        Number of groups.

    Returns
    -------
    ndarray, shape (n_layers, n_groups)
        Root length per layer and group, cm. Length above depth 0 or below ``bottom_cm`` is not counted.
    """
    h = float(layer_cm)
    from ..limits import check_cell_count

    check_cell_count(float(n_layers) * n_groups, what=f"depth layers of {h:g} cm (x {n_groups} groups)")
    n_layers = int(n_layers)
    full_bottom = n_layers * h
    bottom = full_bottom if bottom_cm is None else float(bottom_cm)
    n_full = n_layers if bottom >= full_bottom else n_layers - 1  # layers of full thickness
    if group is None:
        group = np.zeros(len(length), dtype=np.int64)
        n_groups = 1
    size = n_layers * n_groups

    # Fast path: both ends in the same full layer -> the whole length goes there.
    q0 = np.floor(depth0 / h)
    q1 = np.floor(depth1 / h)
    layer = q0.astype(np.int64)
    fast = (q0 == q1) & (layer.view(np.uint64) < n_full)  # negative layers wrap to huge values
    key = layer * n_groups + group if n_groups > 1 else layer
    key = np.where(fast, key, size)
    out = np.bincount(key, weights=length, minlength=size + 1)[:size].astype(np.float64, copy=False)

    slow = np.flatnonzero(~fast)
    if slow.size:
        out += _split_lengths(depth0[slow], depth1[slow], length[slow], group[slow], h=h, n_layers=n_layers,
                              bottom=bottom, n_groups=n_groups)
    return out.reshape(n_layers, n_groups)


def _split_lengths(d0, d1, length, group, *, h, n_layers, bottom, n_groups) -> np.ndarray:
    """Flat (n_layers * n_groups,) lengths of segments that cross layer boundaries or leave the profile."""
    size = n_layers * n_groups
    top = np.minimum(d0, d1)
    base = np.maximum(d0, d1)
    span = base - top
    a = np.clip(top, 0.0, bottom)
    b = np.clip(base, 0.0, bottom)
    last = n_layers - 1
    ia = np.minimum(np.floor(a / h), last).astype(np.int64)
    ib = np.minimum(np.floor(b / h), last).astype(np.int64)
    out = np.zeros(size)

    flat = span <= 0  # horizontal: all length at one depth
    if flat.any():
        inside = flat & (top >= 0.0) & (top <= bottom)
        out += np.bincount(ia[inside] * n_groups + group[inside], weights=length[inside], minlength=size)
    steep = ~flat & (b > a)
    if not steep.any():
        return out
    a, b, ia, ib, g = a[steep], b[steep], ia[steep], ib[steep], group[steep]
    density = length[steep] / span[steep]  # cm root per cm depth
    first_bottom = np.minimum((ia + 1) * h, bottom)
    first = (np.minimum(first_bottom, b) - a) * density
    out += np.bincount(ia * n_groups + g, weights=first, minlength=size)
    crosses = ib > ia
    if crosses.any():
        ib_c = ib[crosses]
        g_c = g[crosses]
        out += np.bincount(ib_c * n_groups + g_c, weights=(b[crosses] - ib_c * h) * density[crosses], minlength=size)
        # Layers strictly between: full thickness h each, via a difference array over layers.
        through = h * density[crosses]
        diff = np.bincount((ia[crosses] + 1) * n_groups + g_c, weights=through, minlength=size + n_groups)
        diff -= np.bincount(ib_c * n_groups + g_c, weights=through, minlength=size + n_groups)
        out += np.cumsum(diff.reshape(n_layers + 1, n_groups), axis=0)[:n_layers].ravel()
    return out


def check_box(box) -> tuple[float, float, float, float]:
    """Validate a sampling box ``(xmin, xmax, ymin, ymax)`` in cm; raise a one-line error if malformed."""
    try:
        values = tuple(float(v) for v in box)
    except (TypeError, ValueError):
        raise RootsimError(f"box {box!r}: give four numbers xmin, xmax, ymin, ymax (cm)") from None
    if len(values) != 4 or not all(np.isfinite(values)):
        raise RootsimError(f"box {box!r}: give four finite numbers xmin, xmax, ymin, ymax (cm)")
    xmin, xmax, ymin, ymax = values
    if not (xmax > xmin and ymax > ymin):
        raise RootsimError(f"box {box!r}: need xmin < xmax and ymin < ymax (cm)")
    return values


def profile_area(system: Any, *, area_cm2=None, box=None) -> float:
    """Ground area (cm²) that RLD refers to: ``area_cm2``, else the box area, else the stand's ground area.

    Raises
    ------
    RootsimError
        If both ``area_cm2`` and ``box`` are given, either is invalid, or no area is known.
    """
    if area_cm2 is not None and box is not None:
        raise RootsimError("give either a ground area (area_cm2= in Python, --area-cm2 on the command line) "
                           "or a sampling box (box=, --box), not both")
    if box is not None:
        xmin, xmax, ymin, ymax = check_box(box)
        return (xmax - xmin) * (ymax - ymin)
    if area_cm2 is not None:
        return positive_number(area_cm2, "ground area", unit="cm²")
    area = ground_area_from_metadata(system_metadata(system))
    if area is None:
        raise RootsimError("no ground area known for this root system (no stand metadata): "
                           "pass area_cm2=A (cm²) or box=(xmin, xmax, ymin, ymax) (cm) in Python, "
                           "--area-cm2 A or --box XMIN,XMAX,YMIN,YMAX on the command line")
    return area


def layer_profile(system: Any, *, layer_cm: float = 5.0, area_cm2: float | None = None, box=None,
                  max_depth_cm: float | None = None) -> pd.DataFrame:
    """Root length and RLD by depth layer, from the surface to the deepest root (or ``max_depth_cm``).

    Parameters
    ----------
    system : RootSystem, DataFrame or mapping
        Segment table (columns ``x0 y0 z0 x1 y1 z1 length_cm order``; ``x``/``y`` only with ``box``).
    layer_cm : float
        Layer thickness, cm (> 0).
    area_cm2 : float, optional
        Ground area the roots belong to, cm². Default: the stand's ``ground_area_cm2``
        (plant spacing x row spacing x plants).
    box : (xmin, xmax, ymin, ymax), optional
        Count only root length inside this vertical column (clipped exactly at its walls,
        Liang-Barsky); the ground area is then the box area. Not together with ``area_cm2``.
    max_depth_cm : float, optional
        Bottom of the profile, cm (> 0). Default: the deepest counted root, rounded up to a
        whole layer. If not a multiple of ``layer_cm``, the last layer is thinner.

    Returns
    -------
    pandas.DataFrame
        One row per layer: ``depth_top_cm``, ``depth_bottom_cm``, ``root_length_cm``,
        ``rld_cm_per_cm3`` (= length / (thickness x area)), then ``root_length_order_0_cm``,
        ``root_length_order_1_cm``, ... up to the highest order in the table.
        ``attrs``: ``ground_area_cm2`` (area used), ``layer_cm``, ``box``,
        ``root_length_counted_cm`` (inside the box, or all) and ``root_length_outside_profile_cm``
        (of that, above the surface or below the bottom).

    Raises
    ------
    RootsimError
        Bad ``layer_cm``, ``max_depth_cm``, ``area_cm2`` or ``box``, both of the last two, or no area known.
    """
    h = positive_number(layer_cm, "layer thickness")
    bottom = None if max_depth_cm is None else positive_number(max_depth_cm, "maximum depth")
    area = profile_area(system, area_cm2=area_cm2, box=box)
    z0 = float_column(system, "z0")
    z1 = float_column(system, "z1")
    length = float_column(system, "length_cm")
    order = int_column(system, "order")
    n_groups = int(order.max()) + 1 if order.size else 1
    if box is not None:
        xmin, xmax, ymin, ymax = check_box(box)
        p0 = np.column_stack([float_column(system, "x0"), float_column(system, "y0"), z0])
        p1 = np.column_stack([float_column(system, "x1"), float_column(system, "y1"), z1])
        t_enter, t_exit = segment_box_parameters(p0, p1, np.array([xmin, ymin, -np.inf]),
                                                 np.array([xmax, ymax, np.inf]))
        keep = np.flatnonzero(t_exit >= t_enter)
        dz = z1[keep] - z0[keep]
        z0, z1 = z0[keep] + t_enter[keep] * dz, z0[keep] + t_exit[keep] * dz
        length = (t_exit[keep] - t_enter[keep]) * length[keep]
        order = order[keep]
    depth0 = -z0
    depth1 = -z1
    if bottom is None:
        deepest = float(max(depth0.max(), depth1.max())) if depth0.size else 0.0
        n_layers = max(1, int(np.ceil(deepest / h)))
        bottom = n_layers * h
    else:
        n_layers = max(1, int(np.ceil(bottom / h - 1e-12)))
        bottom = min(bottom, n_layers * h)
    by_group = depth_layer_lengths(depth0, depth1, length, layer_cm=h, n_layers=n_layers, bottom_cm=bottom,
                                   group=order, n_groups=n_groups)
    tops = np.arange(n_layers) * h
    bottoms = np.minimum(tops + h, bottom)
    total = by_group.sum(axis=1)
    data = {
        "depth_top_cm": tops,
        "depth_bottom_cm": bottoms,
        "root_length_cm": total,
        "rld_cm_per_cm3": total / ((bottoms - tops) * area),
    }
    for k in range(n_groups):
        data[f"root_length_order_{k}_cm"] = by_group[:, k]
    frame = pd.DataFrame(data)
    counted = float(length.sum())
    frame.attrs.update({
        "ground_area_cm2": area,
        "layer_cm": h,
        "box": None if box is None else list(check_box(box)),
        "root_length_counted_cm": counted,
        "root_length_outside_profile_cm": max(counted - float(total.sum()), 0.0),
    })
    return frame
