"""2D figures of root systems with matplotlib: RLD profiles by depth and rhizobox-style projections.

Every function returns a :class:`matplotlib.figure.Figure` built on the Agg canvas (no display
needed); :func:`save_figure` writes it atomically, the format picked by the file suffix
(``.png``, ``.svg``, ``.pdf``).

* :func:`plot_rld_profile` – root length density (RLD, cm of root per cm³ of soil) against depth,
  depth increasing downward, for all roots and per root order, for one or several root systems
  (variants of a trial).
* :func:`plot_projection` – the segments projected on the vertical x–z plane, the way the glass
  face of a rhizobox shows them: dark roots on a soil-coloured background, line width from the
  root radius, cm axes, depth downward.
"""

from __future__ import annotations

import os
import re
from pathlib import Path
from typing import Any, Mapping

import numpy as np

from .atomic import atomic_path
from .errors import RootsimError

__all__ = [
    "FIGURE_FORMATS",
    "plot_rld_profile",
    "rld_title",
    "plot_projection",
    "projection_paths",
    "profile_order_rld",
    "save_figure",
]

#: File suffixes :func:`save_figure` accepts, mapped to matplotlib format names.
FIGURE_FORMATS = {".png": "png", ".svg": "svg", ".pdf": "pdf"}

# Colours of the projection: a sandy soil and dark roots (chosen to read like a rhizobox photo).
SOIL_COLOUR = "#d8c3a0"
ROOT_COLOUR = "#2b1a0e"
# Plants, rows and container walls drawn over the projection: Okabe-Ito blue (see rootsim.palette),
# which stands out on both the soil and the roots.
STAND_COLOUR = "#0072b2"
# Thinnest drawn line, points: fine laterals stay visible although thinner than a pixel at true scale.
MIN_LINE_WIDTH_PT = 0.25

_ORDER_COLUMN = re.compile(r"^root_length_order_(\d+)_cm$")


def _new_figure(figsize: tuple[float, float]):
    """A Figure on the Agg canvas, independent of pyplot state (safe in servers and tests)."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    fig = Figure(figsize=figsize, layout="constrained")
    FigureCanvasAgg(fig)
    return fig


def save_figure(fig, path: str | os.PathLike, *, dpi: int = 150) -> Path:
    """Write a Figure atomically; the suffix (``.png``, ``.svg``, ``.pdf``) picks the format.

    Raises
    ------
    RootsimError
        Unknown suffix, or the path cannot be written.
    """
    path = Path(path)
    fmt = FIGURE_FORMATS.get(path.suffix.lower())
    if fmt is None:
        raise RootsimError(f"{path}: unknown figure format {path.suffix or '(no suffix)'!r} (allowed: {', '.join(FIGURE_FORMATS)})")
    with atomic_path(path) as tmp:
        try:
            fig.savefig(tmp, format=fmt, dpi=dpi)
        except OSError as exc:
            raise RootsimError(f"{path}: cannot write ({exc.strerror or exc})") from None
    return path


# --------------------------------------------------------------------------------------------
# RLD profile
# --------------------------------------------------------------------------------------------
def profile_order_rld(profile) -> dict[int, np.ndarray]:
    """RLD of each root order from a layer profile, cm cm⁻³.

    Parameters
    ----------
    profile : pandas.DataFrame
        Output of :func:`rootsim.analysis.layer_profile`: columns ``depth_top_cm``,
        ``depth_bottom_cm``, ``root_length_cm``, ``rld_cm_per_cm3`` and
        ``root_length_order_<k>_cm``; ``attrs["ground_area_cm2"]`` the ground area used.

    Returns
    -------
    dict of int to ndarray, shape (n_layers,)
        ``order -> root_length_order_<k>_cm / (layer thickness x ground area)``. Without a ground
        area in ``attrs`` the soil volume of each layer is recovered as
        ``root_length_cm / rld_cm_per_cm3`` (layers without roots get RLD 0).
    """
    length = np.asarray(profile["root_length_cm"], dtype=float)
    area = profile.attrs.get("ground_area_cm2") if hasattr(profile, "attrs") else None
    if area:
        volume = (np.asarray(profile["depth_bottom_cm"], float) - np.asarray(profile["depth_top_cm"], float)) * float(area)
    else:
        rld = np.asarray(profile["rld_cm_per_cm3"], dtype=float)
        with np.errstate(divide="ignore", invalid="ignore"):
            volume = np.where(rld > 0, length / np.where(rld > 0, rld, 1.0), np.inf)
    out = {}
    for name in profile.columns:
        match = _ORDER_COLUMN.match(str(name))
        if match:
            out[int(match.group(1))] = np.asarray(profile[name], dtype=float) / volume
    return dict(sorted(out.items()))


def _is_item(item) -> bool:
    """A single root system, segment table or profile (not a list of replicates)."""
    return hasattr(item, "columns") or (isinstance(item, Mapping) and "z0" in item) or hasattr(item, "metadata")


def _as_profiles(data, *, layer_cm: float, area_cm2: float | None, box) -> dict[str, list]:
    """Normalise the ``data`` argument of :func:`plot_rld_profile` to ``{label: [profile, ...]}``
    (one profile per replicate; all profiled to the same depth so replicates share their layers)."""
    is_table = hasattr(data, "columns") or (isinstance(data, Mapping) and "segment_id" in data and "z0" in data)
    if isinstance(data, Mapping) and not is_table:
        items = list(data.items())
    elif isinstance(data, (list, tuple)):
        items = [(f"variant {i + 1}", d) for i, d in enumerate(data)]
    else:
        items = [(None, data)]
    if not items:
        raise RootsimError("plot_rld_profile: nothing to plot (give a root system, a profile, or a mapping of them)")
    groups = [(label, [item] if _is_item(item) else list(item)) for label, item in items]
    if any(not members for _, members in groups):
        raise RootsimError("plot_rld_profile: a variant has an empty list of replicates")
    systems = [m for _, members in groups for m in members
               if not (hasattr(m, "columns") and "rld_cm_per_cm3" in getattr(m, "columns", ()))]
    deepest = None
    if systems and sum(len(members) for _, members in groups) > 1:  # a common depth so replicates line up
        from .analysis.inputs import float_column

        depths = [float(-min(float_column(m, "z0").min(), float_column(m, "z1").min())) for m in systems if len(m["z0"])]
        deepest = max(depths) if depths else None
        if deepest is not None:
            deepest = max(layer_cm * np.ceil(deepest / layer_cm - 1e-9), layer_cm)
    out = {}
    for label, members in groups:
        profiles = []
        for item in members:
            if hasattr(item, "columns") and "rld_cm_per_cm3" in getattr(item, "columns", ()):
                profiles.append(item)
            else:
                from .analysis import layer_profile

                profiles.append(layer_profile(item, layer_cm=layer_cm, area_cm2=area_cm2, box=box, max_depth_cm=deepest))
        out[label] = profiles
    return out


def _replicate_stats(profiles: list, values) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Mid-depths, mean and sample standard deviation (0 for one replicate) across replicate profiles.

    ``values(profile)`` gives one array per profile, one value per layer; shorter profiles (fewer
    layers, no roots deeper) are padded with zeros, so layers are matched from the surface down.
    """
    longest = max(profiles, key=len)
    mid = 0.5 * (np.asarray(longest["depth_top_cm"], float) + np.asarray(longest["depth_bottom_cm"], float))
    stack = np.zeros((len(profiles), len(longest)))
    for i, profile in enumerate(profiles):
        v = np.asarray(values(profile), dtype=float)
        stack[i, : len(v)] = v
    spread = stack.std(axis=0, ddof=1) if len(profiles) > 1 else np.zeros(len(longest))
    return mid, stack.mean(axis=0), spread


def plot_rld_profile(
    data,
    *,
    layer_cm: float = 5.0,
    area_cm2: float | None = None,
    box=None,
    by_order: bool = True,
    title: str | None = None,
    figsize: tuple[float, float] | None = None,
):
    """Root length density against depth, depth increasing downward.

    Each layer's RLD is drawn at the layer's mid-depth, points joined by lines (common practice
    for soil-core profiles). Colours come from the one palette (:mod:`rootsim.palette`): all
    roots in black, order k in order k's colour; variants in the palette's colours in turn.

    Parameters
    ----------
    data : RootSystem, pandas.DataFrame, sequence or mapping of them
        A root system or segment table (RootSystem, DataFrame, or dict of columns; profiled with
        :func:`rootsim.analysis.layer_profile`), a profile DataFrame already computed, or several
        of either: a mapping ``{label: item}`` (labels shown in the legend, e.g. variant names)
        or a list (labelled ``variant 1``, ``variant 2``, ...). A mapping value may be a list of
        replicates of that variant: it is drawn as the mean of the replicates (line, legend
        ``"label (n=k)"``) with a band of ± one sample standard deviation.
    layer_cm : float
        Layer thickness, cm, used when profiling root systems.
    area_cm2 : float, optional
        Ground area, cm², passed to the profiler (default: the stand's ground area).
    box : optional
        Sampling box passed to the profiler.
    by_order : bool
        Also draw the RLD of each root order. With one data set all curves share one panel;
        with several, the figure gets one panel for all roots and one per order, one line per
        variant in each (same colour per variant throughout).
    title : str, optional
        Figure title.
    figsize : (float, float), optional
        Inches; default grows with the number of panels.

    Returns
    -------
    matplotlib.figure.Figure
        Lines carry the data: x = RLD, cm cm⁻³ (mean over replicates), y = mid-depth, cm; their
        labels are ``"all roots"`` / ``"order <k>"`` (one data set) or the variant labels
        (several; ``"label (n=k)"`` for k > 1 replicates, whose band is a PolyCollection).
    """
    groups = _as_profiles(data, layer_cm=layer_cm, area_cm2=area_cm2, box=box)
    single = len(groups) == 1 and len(next(iter(groups.values()))) == 1
    orders = sorted({k for ps in groups.values() for p in ps for k in profile_order_rld(p)}) if by_order else []
    panels = ["all roots"] if single else ["all roots"] + [f"order {k}" for k in orders]
    if figsize is None:
        figsize = (4.2 + 2.6 * (len(panels) - 1), 5.0)
    fig = _new_figure(figsize)
    axes = fig.subplots(1, len(panels), sharey=True, squeeze=False)[0]
    colours = _qualitative_colours(max(len(groups), 1))
    for v, (label, profiles) in enumerate(groups.items()):
        if single:
            profile = profiles[0]
            mid = 0.5 * (np.asarray(profile["depth_top_cm"], float) + np.asarray(profile["depth_bottom_cm"], float))
            total = np.asarray(profile["rld_cm_per_cm3"], dtype=float)
            per_order = profile_order_rld(profile) if by_order else {}
            ax = axes[0]
            ax.plot(total, mid, color="black", linewidth=2.0, marker="o", markersize=3.5, label="all roots")
            for k in orders:
                ax.plot(per_order.get(k, np.zeros_like(total)), mid, color=_order_colour(k), linewidth=1.3,
                        marker="o", markersize=2.5, linestyle="--", label=f"order {k}")
            continue
        shown = label if len(profiles) == 1 else f"{label} (n={len(profiles)})"
        series = [(axes[0], lambda p: p["rld_cm_per_cm3"])]
        series += [(axes[i + 1], lambda p, k=k: profile_order_rld(p).get(k, np.zeros(len(p))))
                   for i, k in enumerate(orders)]
        for ax, values in series:
            mid, mean, spread = _replicate_stats(profiles, values)
            ax.plot(mean, mid, color=colours[v], linewidth=1.8, marker="o", markersize=3, label=shown)
            if len(profiles) > 1:
                ax.fill_betweenx(mid, np.maximum(mean - spread, 0.0), mean + spread, color=colours[v], alpha=0.25,
                                 linewidth=0, label=f"_{shown} ± 1 s.d.")
    for ax, name in zip(axes, panels):
        ax.set_xlabel("RLD (cm cm⁻³)")
        ax.xaxis.set_label_position("top")
        ax.xaxis.tick_top()
        ax.set_xlim(left=0)
        ax.grid(True, color="0.88", linewidth=0.6)
        if not single:
            ax.set_title(name, fontsize="medium")
    axes[0].set_ylabel("depth (cm)")
    axes[0].set_ylim(bottom=_profile_bottom(groups), top=0)  # depth increases downward
    if any(ax.lines for ax in axes):
        axes[0].legend(fontsize="small", loc="lower right", frameon=False)
    if any(len(ps) > 1 for ps in groups.values()):
        fig.supxlabel("lines: mean of the replicate stands; bands: ± 1 standard deviation", fontsize="small")
    if title:
        fig.suptitle(title)
    return fig


def rld_title(what: str, *, day: float | None = None, area_cm2: float | None = None) -> str:
    """Title of an RLD figure that says what the RLD is of, when, and over which ground area.

    E.g. ``rld_title("demo", day=45, area_cm2=9000)`` gives
    ``"demo: stand-mean RLD, day 45, ground area 9,000 cm²"``.
    """
    parts = [f"{what}: stand-mean RLD"]
    if day is not None:
        parts.append(f"day {day:g}")
    if area_cm2 is not None:
        parts.append(f"ground area {area_cm2:,.0f} cm²")
    return ", ".join(parts)


def _profile_bottom(groups: Mapping[str, list]) -> float:
    bottoms = [float(np.max(p["depth_bottom_cm"])) for ps in groups.values() for p in ps if len(p)]
    return max(bottoms) if bottoms else 1.0


def _qualitative_colours(n: int) -> list:
    """``n`` colours of the one palette (:mod:`rootsim.palette`, colour-blind safe), RGB in [0, 1]."""
    from .palette import category_colours

    return [tuple(c) for c in category_colours(n)]


def _order_colour(order: int) -> tuple:
    """RGB colour (floats in [0, 1]) of root order ``order`` in the one palette."""
    from .palette import order_colours

    return tuple(order_colours([order])[0] / 255.0)


# --------------------------------------------------------------------------------------------
# Rhizobox-style projection
# --------------------------------------------------------------------------------------------
def _projection_extent(system, margin_fraction: float = 0.04) -> tuple[float, float, float]:
    """(x_min, x_max, depth_max) of the view, cm: the container if known, else the data plus a margin."""
    container = (system.metadata or {}).get("container", {}) if hasattr(system, "metadata") else {}
    kind = container.get("kind")
    half = None
    if kind == "rhizobox" and container.get("width_cm"):
        half = 0.5 * float(container["width_cm"])
    elif kind == "pot" and container.get("diameter_cm"):
        half = 0.5 * float(container["diameter_cm"])
    depth = float(container["depth_cm"]) if kind in ("rhizobox", "pot") and container.get("depth_cm") else None
    x = np.concatenate([np.asarray(system["x0"], float), np.asarray(system["x1"], float)])
    z = np.concatenate([np.asarray(system["z0"], float), np.asarray(system["z1"], float)])
    stand = (system.metadata or {}).get("stand", {}) if hasattr(system, "metadata") else {}
    if stand.get("plant_positions_cm"):  # keep every plant (and so every row) in view
        x = np.concatenate([x, np.asarray(stand["plant_positions_cm"], float).reshape(-1, 3)[:, 0]])
    if half is None:
        if x.size:
            lo, hi = float(x.min()), float(x.max())
            pad = max(margin_fraction * (hi - lo), 1.0)
            x_min, x_max = lo - pad, hi + pad
        else:
            x_min, x_max = -10.0, 10.0
    else:
        x_min, x_max = -half, half
    if depth is None:
        depth = float(-z.min()) * (1 + margin_fraction) + 1.0 if z.size else 20.0
    return x_min, x_max, max(depth, 1e-6)


def projection_paths(system, *, width_ratio: float = 1.1, max_vertices: int = 200_000) -> tuple[list, np.ndarray]:
    """Segments in the x–depth plane as a few long NaN-separated polylines, one radius each.

    Drawing millions of separate two-point lines is slow in matplotlib (one path each), so the
    segments are regrouped: roots as chains of shared points
    (:func:`rootsim.formats.polylines.polylines_from_segments`), cut where the radius moves to
    another bin of relative width ``width_ratio``, and the pieces of one radius bin joined into
    one vertex array with a NaN row between pieces (matplotlib breaks a line at NaN vertices).
    Arrays longer than ``max_vertices`` are split at piece boundaries.

    Parameters
    ----------
    system : RootSystem or pandas.DataFrame
        Columns ``segment_id parent_id root_id x0 y0 z0 x1 y1 z1 radius_cm length_cm``.
    width_ratio : float
        Ratio between consecutive radius bins (> 1).
    max_vertices : int
        Most vertices per array.

    Returns
    -------
    paths : list of ndarray, shape (m_i, 2)
        Vertices (x cm, depth cm), NaN rows between pieces; thinnest bin first.
    radius_cm : ndarray, shape (len(paths),)
        Length-weighted mean radius of the segments in each array's bin, cm.
    """
    from .formats.polylines import polylines_from_segments

    n = len(np.asarray(system["radius_cm"]))
    if n == 0:
        return [], np.zeros(0)
    lines = polylines_from_segments(system)
    xy = np.column_stack([lines.points[:, 0], -lines.points[:, 2]])
    seg = lines.segment_order  # segment rows in polyline order
    radius = np.asarray(system["radius_cm"], dtype=float)[seg]
    weight = np.asarray(system["length_cm"], dtype=float)[seg] + 1e-12
    size_bin = np.floor(np.log(np.maximum(radius, 1e-9)) / np.log(width_ratio)).astype(np.int64)
    begins_line = np.zeros(n, dtype=bool)
    begins_line[lines.segment_offsets[:-1]] = True
    begins_piece = begins_line.copy()
    begins_piece[1:] |= size_bin[1:] != size_bin[:-1]
    # sorted segment k runs from point k + c_k - 1 to point k + c_k (c_k: polylines begun up to k)
    end_point = np.arange(n) + np.cumsum(begins_line)
    first = np.flatnonzero(begins_piece)
    last = np.append(first[1:], n) - 1
    piece_bin = size_bin[first]
    by_bin = np.argsort(piece_bin, kind="stable")
    first_point = end_point[first][by_bin] - 1
    n_vertices = end_point[last][by_bin] - first_point + 1
    piece_bin = piece_bin[by_bin]
    # gather the vertices of all pieces, bin by bin, each piece followed by one NaN row
    rows = n_vertices + 1
    out_start = np.cumsum(rows) - rows
    within = np.arange(int(rows.sum())) - np.repeat(out_start, rows)
    index = np.repeat(first_point, rows) + within
    vertices = xy[np.minimum(index, len(xy) - 1)]
    vertices[within == np.repeat(n_vertices, rows)] = np.nan
    # cut into arrays: a new one where the bin changes or the current one would pass max_vertices
    bins, bin_rank = np.unique(piece_bin, return_inverse=True)
    bin_first = np.searchsorted(piece_bin, bins)
    within_bin = out_start - out_start[bin_first][bin_rank]
    key = bin_rank * (int(rows.sum()) + 1) + within_bin // max(int(max_vertices), 1)
    cut = np.flatnonzero(np.diff(key)) + 1
    paths = np.split(vertices, out_start[cut])
    bin_radius = np.bincount(size_bin - bins[0], weights=radius * weight) / np.maximum(
        np.bincount(size_bin - bins[0], weights=weight), 1e-300)
    path_bin = np.append(piece_bin[0], piece_bin[cut])
    return paths, bin_radius[path_bin - bins[0]]


def plot_projection(
    system,
    *,
    width_scale: float = 1.0,
    title: str | None = None,
    figsize: tuple[float, float] | None = None,
    soil_colour: str = SOIL_COLOUR,
    root_colour: str = ROOT_COLOUR,
):
    """The root system projected on the x–z plane, as the glass face of a rhizobox shows it.

    Every segment is drawn as a straight line from (x0, depth0) to (x1, depth1), depth = -z,
    in one :class:`matplotlib.collections.LineCollection` (segments joined into few long
    polylines, see :func:`projection_paths`). Line width is the segment diameter at the
    figure's true scale (times ``width_scale``; radii binned in 10 % steps), at least
    ``MIN_LINE_WIDTH_PT`` points; thick roots are drawn last so they stay on top. The view covers the container (rhizobox width
    or pot diameter and depth) when the metadata give one, else the roots plus a margin. When the
    metadata hold a stand, the plants' seed positions (triangles), the rows (dashed lines at their x)
    and the walls of a pot or rhizobox are drawn over the roots.

    Parameters
    ----------
    system : RootSystem or pandas.DataFrame
        Segment-table columns ``x0 z0 x1 z1 radius_cm``; ``metadata["container"]`` optional.
    width_scale : float
        Factor on the true-scale line width (> 0); e.g. 3 to make fine roots easier to see.
    title : str, optional
        Axes title.
    figsize : (float, float), optional
        Inches; default keeps the aspect ratio of the view, 6 inches on the longer side.
    soil_colour, root_colour : str
        Matplotlib colours of the background and of the roots.

    Returns
    -------
    matplotlib.figure.Figure
        One Axes, x = horizontal position (cm), y = depth (cm, increasing downward), equal
        aspect; ``ax.collections[0]`` is the LineCollection of the roots; the Line2D objects with
        gid ``"plants"``, ``"rows"`` and ``"container"`` carry the stand's coordinates.
    """
    from matplotlib.collections import LineCollection

    if not width_scale > 0:
        raise RootsimError(f"plot_projection: width_scale must be > 0 (got {width_scale})")
    x_min, x_max, depth_max = _projection_extent(system)
    if figsize is None:
        span_x, span_z = x_max - x_min, depth_max
        scale = 6.0 / max(span_x, span_z)
        figsize = (max(span_x * scale, 2.5) + 1.0, max(span_z * scale, 2.5) + 0.6)
    fig = _new_figure(figsize)
    ax = fig.add_subplot(1, 1, 1)
    ax.set_facecolor(soil_colour)
    ax.set_xlim(x_min, x_max)
    ax.set_ylim(depth_max, 0.0)  # depth downward
    ax.set_aspect("equal", adjustable="box")
    ax.set_xlabel("x (cm)")
    ax.set_ylabel("depth (cm)")
    if title:
        ax.set_title(title)

    # true-scale width: points per cm from the final axes size (layout and equal aspect done
    # before the roots are added, so the draw is cheap and the roots do not change the layout)
    fig.canvas.draw()
    points_per_cm = ax.get_window_extent().width / fig.dpi * 72.0 / (x_max - x_min)
    paths, radius = projection_paths(system)
    widths = np.maximum(2.0 * radius * points_per_cm * width_scale, MIN_LINE_WIDTH_PT)
    ax.add_collection(LineCollection(paths, colors=root_colour, linewidths=widths, capstyle="round",
                                     joinstyle="round"))
    _draw_stand(ax, system, depth_max=depth_max)
    return fig


def _draw_stand(ax, system, *, depth_max: float) -> None:
    """Where the plants are, on an x–depth Axes: rows (dashed vertical lines, gid ``"rows"``) and seed
    positions (triangles, gid ``"plants"``) of a field stand, and the walls and bottom of a pot or
    rhizobox (gid ``"container"``); with a small legend. Nothing without stand metadata."""
    from .stand_layout import layout_from_metadata

    layout = layout_from_metadata(getattr(system, "metadata", None))
    if layout is None:
        return
    kind = (layout.get("container") or {}).get("kind", "field")
    if kind == "field":
        for i, x in enumerate(layout["row_x_cm"]):
            ax.axvline(x, color=STAND_COLOUR, linewidth=0.8, linestyle=(0, (4, 3)), alpha=0.8,
                       label="row" if i == 0 else "_row", gid="rows")
    else:
        half = 0.5 * (layout["cell_x_cm"][1] - layout["cell_x_cm"][0])
        bottom = float(layout["container"]["depth_cm"])
        ax.plot([-half, -half, half, half], [0.0, bottom, bottom, 0.0], color=STAND_COLOUR, linewidth=2.0,
                label=f"{kind} wall", gid="container", clip_on=False)
    positions = np.asarray(layout["plant_positions_cm"], dtype=float).reshape(-1, 3)
    if len(positions):
        ax.plot(positions[:, 0], -positions[:, 2], linestyle="none", marker="v", markersize=7,
                markerfacecolor=STAND_COLOUR, markeredgecolor="white", label="plant (seed)", gid="plants")
    ax.legend(loc="lower right", fontsize="x-small", framealpha=0.85)
