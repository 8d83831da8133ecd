"""Offscreen 3D pictures of root systems with pyvista/VTK (no display needed).

:func:`render_image` returns an RGB array (for notebooks: ``plt.imshow(system.render())``, or
``PIL.Image.fromarray(...)``); :func:`render_png` writes the same picture to a PNG file atomically.

The scene: one polyline per root (geometry from :func:`rootsim.formats.vtk.polydata_from_segments`),
drawn as lines, thicker for lower root orders, coloured by root order, root class, plant
(categorical legend, colours from :mod:`rootsim.palette`) or age (scalar bar, days); a translucent
soil-surface plane at z = 0; a labelled depth ruler in cm from the surface down to (a round number
past) the deepest root; a horizontal scale bar in side and oblique views; the walls and bottom of
a pot or rhizobox; in the top view the plants (dots at their seeds) and the rows of a field stand;
an optional title. The camera frames what is drawn tightly, the legend beside or above the roots.
An empty root system gives the empty scene (surface plane and ruler), no error.
"""

from __future__ import annotations

import math
import os
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from .atomic import atomic_path
from .errors import RootsimError

__all__ = ["COLOR_BY", "STYLES", "VIEWS", "RootScene", "root_scene", "render_image", "render_png", "parse_size"]

#: Allowed ``color_by`` values.
COLOR_BY = ("order", "age", "root_class", "plant")
#: Allowed ``style`` values.
STYLES = ("lines", "tubes")
#: Sides of the polygon tubes are built from.
TUBE_SIDES = 10
#: Allowed ``view`` values: side (looking along +y at the x–z plane), top (looking down), iso.
VIEWS = ("side", "top", "iso")

BACKGROUND = "white"
TEXT_COLOUR = "black"
SURFACE_COLOUR = "#a0794f"  # soil brown
SURFACE_OPACITY = 0.3
AGE_COLOURMAP = "viridis"
#: Line width (pixels at 1200 x 900) of order 0, 1, 2 and higher roots.
ORDER_LINE_WIDTH_PX = (4.0, 3.0, 2.0)
#: Thinnest line drawn, pixels (VTK blends the edges of lines, so thinner lines lose their colour).
MIN_LINE_WIDTH_PX = 2.0
#: Most entries a categorical legend lists (the rest are summarised in one line).
MAX_LEGEND_ENTRIES = 12
MAX_SIZE_PX = 8192


def _check_options(color_by: str, view: str, size) -> tuple[int, int]:
    if color_by not in COLOR_BY:
        raise RootsimError(f"unknown colouring {color_by!r} (allowed: {', '.join(COLOR_BY)})")
    if view not in VIEWS:
        raise RootsimError(f"unknown view {view!r} (allowed: {', '.join(VIEWS)})")
    try:
        width, height = (int(v) for v in size)
        ok = all(float(v) == int(v) for v in size)
    except (TypeError, ValueError):
        ok = False
    if not ok or not (16 <= width <= MAX_SIZE_PX and 16 <= height <= MAX_SIZE_PX):
        raise RootsimError(f"image size {size!r} not allowed (need (width, height) in pixels, each 16..{MAX_SIZE_PX})")
    return width, height


def parse_size(text: str) -> tuple[int, int]:
    """Parse ``"WIDTHxHEIGHT"`` (pixels, e.g. ``"1200x900"``) into ``(width, height)``.

    Raises
    ------
    RootsimError
        Not two positive integers joined by ``x``, or outside 16..8192.
    """
    parts = str(text).lower().replace("×", "x").split("x")
    if len(parts) != 2 or not all(p.strip().isdigit() for p in parts):
        raise RootsimError(f"image size {text!r} not understood (allowed: WIDTHxHEIGHT in pixels, e.g. 1200x900)")
    size = (int(parts[0]), int(parts[1]))
    _check_options("order", "iso", size)
    return size


def _prepare_offscreen() -> None:
    """Choose VTK's EGL window when there is no X display, unless the user chose a window class.

    VTK otherwise tries X first and warns before falling back. EGL needs libEGL (Mesa provides a
    software one); without it VTK's own fallback is kept.

    Mesa's software rasterizer (llvmpipe) is asked to rasterize in the drawing thread
    (``LP_NUM_THREADS=0``, unless the user set it): with its worker threads it queues binned scenes
    of every line segment, about 80 bytes per segment more at the peak, and on the 2-core machine
    it was no slower without them (same picture). GPU drivers ignore the variable; it takes effect
    when the first rendering context of the process is made.
    """
    os.environ.setdefault("LP_NUM_THREADS", "0")
    if os.environ.get("DISPLAY") or os.environ.get("VTK_DEFAULT_OPENGL_WINDOW"):
        return
    import ctypes.util

    if ctypes.util.find_library("EGL"):
        os.environ["VTK_DEFAULT_OPENGL_WINDOW"] = "vtkEGLRenderWindow"


def _nice_step(value: float, *, up: bool = True) -> float:
    """The 1, 2 or 5 x 10^k nearest ``value`` (> 0) from above (``up``) or from below."""
    if value <= 0:
        return 1.0
    exp = 10.0 ** math.floor(math.log10(value))
    candidates = [m * exp for m in (0.5, 1.0, 2.0, 5.0, 10.0)]
    if up:
        return min(c for c in candidates if c >= value * (1 - 1e-12))
    return max(c for c in candidates if c <= value * (1 + 1e-12))


def ruler_ticks(extent_cm: float, *, min_steps: int = 3, max_steps: int = 8) -> tuple[float, int]:
    """Length (cm) and number of labels of a ruler covering ``extent_cm`` in round steps.

    Among steps of 1, 2 or 5 x 10^k giving ``min_steps``..``max_steps`` steps, the one whose
    whole number of steps ends closest past ``extent_cm`` (fewer steps on a tie).
    """
    extent = max(float(extent_cm), 1e-6)
    exp = math.floor(math.log10(extent))
    best = None
    for k in range(exp - 2, exp + 1):
        for mantissa in (1.0, 2.0, 5.0):
            step = mantissa * 10.0**k
            count = max(1, math.ceil(extent / step - 1e-9))
            if min_steps <= count <= max_steps:
                candidate = (round(count * step, 12), count)
                best = candidate if best is None or candidate < best else best
    if best is None:  # pragma: no cover - some 1-2-5 step always fits 3..8 steps
        best = (extent, 1)
    return best[0], best[1] + 1


def _categories(color_by: str, poly) -> tuple[np.ndarray, list[str], np.ndarray]:
    """Category index per polyline, shape (p,), the legend label of each category and its RGB
    colour (floats in [0, 1], shape (k, 3)) from the one palette (:mod:`rootsim.palette`): root
    order k always gets order k's colour, other categories the palette in turn."""
    from .palette import category_colours, order_colours

    if color_by == "order":
        values = np.asarray(poly.cell_data["order"])
        kinds = np.unique(values)
        labels = [f"order {k}" for k in kinds]
        colours = order_colours(kinds).astype(np.float64) / 255.0
    elif color_by == "plant":
        values = np.asarray(poly.cell_data["plant_id"])
        kinds = np.unique(values)
        labels = [f"plant {k}" for k in kinds]
        colours = category_colours(len(kinds))
    else:
        values = np.asarray(poly.cell_data["root_class_code"])
        names = [str(s) for s in np.asarray(poly.field_data["root_class_names"])]
        kinds = np.unique(values)
        labels = [names[k] if 0 <= k < len(names) else str(k) for k in kinds]
        colours = category_colours(len(kinds))
    return np.searchsorted(kinds, values), labels, colours


def _scene_bounds(system) -> np.ndarray:
    """Bounding box of the roots, cm: ``[x_min, x_max, y_min, y_max, z_min, z_max]``, shape (6,).

    ``z_max`` is at least 0 (the soil surface), ``z_min`` at most -1 cm; an empty system gets a
    20 cm x 20 cm x 10 cm box under the surface.
    """
    if len(system) == 0:
        return np.array([-10.0, 10.0, -10.0, 10.0, -10.0, 0.0])
    box = []
    for axis in "xyz":
        lo = np.minimum(np.asarray(system[f"{axis}0"], float), np.asarray(system[f"{axis}1"], float))
        hi = np.maximum(np.asarray(system[f"{axis}0"], float), np.asarray(system[f"{axis}1"], float))
        box += [float(lo.min()), float(hi.max())]
    box[4], box[5] = min(box[4], -1.0), max(box[5], 0.0)
    return np.array(box)


@dataclass(frozen=True)
class RootScene:
    """What a picture needs from a segment table (see :func:`root_scene`): the roots' polylines with only
    the arrays drawn, their bounding box and the stand layout. Once it is made the table may be freed, so
    a large system is drawn without its table in memory (``rootsim render`` does so)."""

    arrays: dict | None
    box: np.ndarray
    layout: dict | None
    color_by: str
    style: str
    n_segments: int


def root_scene(system, *, color_by: str = "order", style: str = "lines") -> RootScene:
    """The roots of ``system`` prepared for :func:`render_image` with that ``color_by`` and ``style``.

    Parameters
    ----------
    system : RootSystem
    color_by, style : str
        As for :func:`render_image` (they decide which arrays are kept).

    Returns
    -------
    RootScene
    """
    from .formats.vtk import polyline_arrays
    from .stand_layout import layout_from_metadata

    if color_by not in COLOR_BY:
        raise RootsimError(f"unknown color_by {color_by!r} (allowed: {', '.join(COLOR_BY)})")
    if style not in STYLES:
        raise RootsimError(f"unknown style {style!r} (allowed: {', '.join(STYLES)})")
    drawn = (("age_days",) if color_by == "age" else ()) + (("tube_radius_cm",) if style == "tubes" else ())
    arrays = polyline_arrays(system, point_arrays=drawn) if len(system) else None  # only the point arrays drawn
    return RootScene(arrays, _scene_bounds(system), layout_from_metadata(getattr(system, "metadata", None)),
                     color_by, style, len(system))


def render_image(system, *, color_by: str = "order", view: str = "iso", size=(1200, 900),
                 title: str | None = None, style: str = "lines", tube_scale: float = 1.0,
                 soil_fields=None, soil_field: str | None = None) -> np.ndarray:
    """Render a root system offscreen and return the picture.

    Parameters
    ----------
    system : RootSystem or RootScene
        Segment table with metadata (``run.duration_days`` sets ages if present), or its
        :func:`root_scene` made with the same ``color_by`` and ``style``.
    color_by : {"order", "age", "root_class", "plant"}
        Categorical colours with a legend (order, root class, plant), or age in days
        (run duration minus birth day) with a scalar bar.
    view : {"side", "top", "iso"}
        ``side`` looks horizontally along +y at the x–z plane, ``top`` looks straight down,
        ``iso`` obliquely from the front right and above (all parallel projections, so the
        depth ruler reads the same everywhere along it in side view).
    size : (int, int)
        Image width and height in pixels (16..8192 each).
    title : str, optional
        Text at the top edge.
    style : {"lines", "tubes"}
        ``lines`` (fast, for any size; thicker for lower orders) or shaded ``tubes`` of the
        segment radius times ``tube_scale`` (for close-ups; true-scale roots of a whole stand
        are thinner than a pixel).
    tube_scale : float
        Factor on the radius of tubes (> 0), e.g. 5 to thicken fine roots.
    soil_fields : rootsim.soil.fields.SoilFields, optional
        Compiled soil (:func:`rootsim.soil.build.soil_fields_from_spec`); needed with ``soil_field``.
    soil_field : str, optional
        Draw this field as a translucent vertical slice behind the roots (side and iso views): sampled
        on an x–z grid of cells through the stand's centre (y of the stand cell's middle), drawn at the
        back of the scene so it never hides a root, coloured with :data:`rootsim.palette.FIELD_COLOURMAP`
        between the slice's lowest and highest value, with a scalar bar naming the field and its unit.

    Returns
    -------
    ndarray of uint8, shape (height, width, 3)
        RGB picture.

    Raises
    ------
    RootsimError
        Unknown ``color_by``, ``view`` or ``style``, a bad ``size`` or ``tube_scale``; an unknown
        ``soil_field``, or one asked for in the top view or without ``soil_fields``.
    """
    width, height = _check_options(color_by, view, size)
    if soil_field is not None:
        if soil_fields is None:
            raise RootsimError(f"soil field {soil_field!r}: no soil given (allowed: with a compiled soil)")
        if view == "top":
            raise RootsimError(f"soil field {soil_field!r}: a vertical slice cannot be seen from the top "
                               "(allowed views: side, iso)")
        soil_fields.index(soil_field)  # a one-line error naming the defined fields
    if style not in STYLES:
        raise RootsimError(f"unknown style {style!r} (allowed: {', '.join(STYLES)})")
    if not (isinstance(tube_scale, (int, float)) and math.isfinite(tube_scale) and tube_scale > 0):
        raise RootsimError(f"tube scale {tube_scale!r} not allowed (need a number > 0)")
    if isinstance(system, RootScene):
        scene = system
        if (scene.color_by, scene.style) != (color_by, style):
            raise RootsimError(f"the scene was made for color_by {scene.color_by!r} and style {scene.style!r}, "
                               f"not {color_by!r} and {style!r} (allowed: the same as in root_scene)")
    else:
        scene = root_scene(system, color_by=color_by, style=style)
    del system
    _prepare_offscreen()
    import pyvista as pv

    from .formats.vtk import polydata_from_arrays

    layout = scene.layout
    box = _with_stand(scene.box, layout, view=view)
    margin = 0.06 * float(np.max(box[1::2] - box[0::2]))
    x_lo, x_hi, y_lo, y_hi = box[0] - margin, box[1] + margin, box[2] - margin, box[3] + margin
    scale = math.sqrt(width * height / (1200 * 900))  # line widths follow the image size

    plotter = pv.Plotter(off_screen=True, window_size=(width, height))
    try:
        plotter.set_background(BACKGROUND)
        legend_entries = 0
        if scene.arrays is not None:
            roots = polydata_from_arrays(scene.arrays)
            legend_entries = _add_roots(plotter, roots, color_by=color_by, scale=scale,
                                        tube_scale=tube_scale if style == "tubes" else None,
                                        bar_low=soil_field is not None)
            del roots  # the drawn parts share its points; the rest is freed before rendering
        plane = pv.Plane(center=(0.5 * (x_lo + x_hi), 0.5 * (y_lo + y_hi), 0.0), direction=(0, 0, 1),
                         i_size=x_hi - x_lo, j_size=y_hi - y_lo, i_resolution=1, j_resolution=1)
        plotter.add_mesh(plane, color=SURFACE_COLOUR, opacity=SURFACE_OPACITY, lighting=False)
        # front edge of the surface, so the surface shows as a line in the side view too
        plotter.add_mesh(pv.Line((x_lo, y_lo, 0.0), (x_hi, y_lo, 0.0)), color=SURFACE_COLOUR,
                         line_width=2.0 * scale, lighting=False)
        _add_stand(plotter, layout, view=view, scale=scale, y_range=(y_lo, y_hi))
        ruler_end = _add_ruler(plotter, view=view, corner=(x_lo, y_lo), x_span=x_hi - x_lo, depth=-box[4])
        z_lo = min(box[4], ruler_end[2])
        if soil_field is not None:
            cell_y = layout["cell_y_cm"] if layout is not None else box[2:4]
            _add_soil_slice(plotter, soil_fields, soil_field, x_range=(x_lo, x_hi), z_range=(z_lo, 0.0),
                            sample_y=0.5 * (float(cell_y[0]) + float(cell_y[1])), drawn_y=y_hi, scale=scale)
        if view == "side":  # a horizontal scale at the bottom right, level with the depth ruler's end
            _add_scale_bar(plotter, right=(x_hi, y_lo, z_lo), x_span=x_hi - x_lo)
        elif view == "iso":  # on the soil surface along its back edge, at the right end, clear of the roots
            _add_scale_bar(plotter, right=(x_hi, y_hi, 0.0), x_span=x_hi - x_lo)
        if title:
            plotter.add_text(str(title), position="upper_edge", font_size=max(8, int(14 * scale)), color=TEXT_COLOUR)
        z_span = box[5] - z_lo
        # what is drawn: the roots (and walls), the surface plane, the rulers with room for their labels
        below = z_lo - 0.07 * z_span
        points = [[x, y, z] for x in box[0:2] for y in box[2:4] for z in box[4:6]]
        points += [[x, y, 0.0] for x in (x_lo, x_hi) for y in (y_lo, y_hi)]
        points += [[x_lo, y_lo, below], list(ruler_end)] + ([[x_hi, y_lo, below]] if view == "side" else [])
        if view == "top":  # the ruler runs along the front edge: room for its labels below it
            points.append([x_lo, y_lo - 0.08 * (y_hi - y_lo), 0.0])
        _set_camera(plotter, view, points=np.asarray(points, dtype=float), aspect=width / height,
                    legend_height=_legend_height(legend_entries)
                    if color_by != "age" and soil_field is None else None)
        image = plotter.screenshot(return_img=True)
    finally:
        plotter.close()
    image = np.ascontiguousarray(np.asarray(image)[..., :3], dtype=np.uint8)
    if image.shape != (height, width, 3):  # pragma: no cover - VTK returned another size
        raise RootsimError(f"renderer returned an image of shape {image.shape}, expected {(height, width, 3)}")
    return image


def _line_subset(poly, cells: np.ndarray, *, point_scalars: dict, cell_scalars: dict):
    """A lean :class:`pyvista.PolyData` holding polylines ``cells`` of ``poly`` and only the given arrays.

    Points (and point arrays) are shared with ``poly`` uncopied; the line connectivity of the
    chosen cells is gathered with array arithmetic (no per-cell loop).
    """
    import pyvista as pv
    from vtkmodules.util.numpy_support import vtk_to_numpy

    lines = poly.GetLines()
    offsets = np.asarray(vtk_to_numpy(lines.GetOffsetsArray()), dtype=np.int64)  # views when already int64
    connectivity = np.asarray(vtk_to_numpy(lines.GetConnectivityArray()), dtype=np.int64)
    counts = offsets[cells + 1] - offsets[cells]
    new_offsets = np.concatenate([[0], np.cumsum(counts)])
    gather = np.repeat(offsets[cells] - new_offsets[:-1], counts) + np.arange(int(new_offsets[-1]))
    part = pv.PolyData(poly.points, lines=pv.CellArray.from_arrays(new_offsets, connectivity[gather], deep=True))
    for name, values in point_scalars.items():
        part.point_data[name] = values
    for name, values in cell_scalars.items():
        part.cell_data[name] = values[cells]
    return part


def _add_roots(plotter, poly, *, color_by: str, scale: float, tube_scale: float | None = None,
               bar_low: bool = False) -> int:
    """Add the roots, one actor per root-order group (order 0, 1, >= 2), and their legend
    (categorical colourings) or scalar bar (age); return the number of legend entries (0 for age).
    Lines get widths by order; with ``tube_scale`` the roots become shaded tubes of radius
    ``tube_radius_cm * tube_scale`` instead. ``bar_low``: the age bar keeps the lower right corner
    free (for a soil field's bar)."""
    point_scalars, cell_scalars = {}, {}
    if color_by == "age":
        age = np.asarray(poly.point_data["age_days"], dtype=float)
        point_scalars["age_days"] = age
        style = {"scalars": "age_days", "cmap": AGE_COLOURMAP, "show_scalar_bar": False,
                 "clim": (float(age.min()), float(max(age.max(), age.min() + 1e-9)))}
    else:
        category, labels, colours = _categories(color_by, poly)
        cell_scalars["colour_rgb"] = (colours[category] * 255).astype(np.uint8)
        style = {"scalars": "colour_rgb", "rgb": True, "preference": "cell"}
    if tube_scale is not None:
        point_scalars["drawn_radius_cm"] = np.asarray(poly.point_data["tube_radius_cm"], dtype=float) * tube_scale
    order = np.asarray(poly.cell_data["order"])
    for width, mask in zip(ORDER_LINE_WIDTH_PX, (order == 0, order == 1, order >= 2)):
        if not mask.any():
            continue
        part = _line_subset(poly, np.flatnonzero(mask), point_scalars=point_scalars, cell_scalars=cell_scalars)
        if tube_scale is None:
            plotter.add_mesh(part, line_width=max(MIN_LINE_WIDTH_PX, width * scale), lighting=False, **style)
        else:
            tubes = part.tube(scalars="drawn_radius_cm", absolute=True, n_sides=TUBE_SIDES, capping=True)
            plotter.add_mesh(tubes, smooth_shading=True, **style)
    if color_by == "age":
        plotter.add_scalar_bar(title="age (days)", color=TEXT_COLOUR, n_labels=5, fmt="%.0f", vertical=True,
                               position_x=0.84, position_y=0.45 if bar_low else 0.2, width=0.06,
                               height=0.4 if bar_low else 0.6, unique_bar=True,
                               title_font_size=max(7, int(22 * scale)), label_font_size=max(7, int(20 * scale)))
        return 0
    entries = [[label, colours[i]] for i, label in enumerate(labels)]
    _add_legend(plotter, entries)
    return len(entries)


#: Opacity of a soil field's slice (the white background shows through, so the roots stand out).
SOIL_SLICE_OPACITY = 0.55
#: Cells of a soil slice along x and along z.
SOIL_SLICE_CELLS = (240, 240)


def _add_soil_slice(plotter, fields, name: str, *, x_range, z_range, sample_y: float, drawn_y: float,
                    scale: float) -> None:
    """A translucent x–z slice of soil field ``name`` sampled at ``y = sample_y`` and drawn at
    ``y = drawn_y`` (the back of the scene), one flat colour per cell, and its scalar bar at the
    lower right."""
    import pyvista as pv

    from .palette import FIELD_COLOURMAP
    from .soil.slice import field_label, vertical_slice

    nx, nz = SOIL_SLICE_CELLS
    values = vertical_slice(fields, name, x_range_cm=x_range, z_range_cm=z_range, y_cm=sample_y, cells=(nx, nz))
    grid = pv.ImageData(dimensions=(nx + 1, 1, nz + 1), origin=(x_range[0], drawn_y, z_range[0]),
                        spacing=((x_range[1] - x_range[0]) / nx, 1.0, (z_range[1] - z_range[0]) / nz))
    label = field_label(name)
    grid.cell_data[label] = np.ascontiguousarray(values.ravel())  # x fastest, as VTK orders cells
    low, high = float(np.nanmin(values)), float(np.nanmax(values))
    actor = plotter.add_mesh(grid, scalars=label, cmap=FIELD_COLOURMAP, clim=(low, max(high, low + 1e-9)),
                             opacity=SOIL_SLICE_OPACITY, lighting=False, show_scalar_bar=False,
                             preference="cell")
    plotter.add_scalar_bar(title=label, mapper=actor.mapper, color=TEXT_COLOUR, n_labels=4, fmt="%.3g",
                           vertical=True, position_x=0.84, position_y=0.05, width=0.06, height=0.3,
                           title_font_size=max(7, int(20 * scale)), label_font_size=max(7, int(18 * scale)))


def _legend_height(count: int) -> float:
    """Height of a categorical legend of ``count`` entries, as a fraction of the picture height."""
    shown = min(count, MAX_LEGEND_ENTRIES + 1)
    return min(0.036 * shown + 0.015, 0.6)


def _add_legend(plotter, entries: list) -> None:
    """A categorical legend ``[[label, rgb], ...]`` at the upper right, at most MAX_LEGEND_ENTRIES lines."""
    if len(entries) > MAX_LEGEND_ENTRIES:
        entries = entries[:MAX_LEGEND_ENTRIES] + [[f"... {len(entries) - MAX_LEGEND_ENTRIES} more", "gray"]]
    height = _legend_height(len(entries))
    legend = plotter.add_legend(labels=entries, bcolor=BACKGROUND, face="rectangle", size=(0.16, height))
    # place the box explicitly (normalised viewport), right edge inside the picture, below the title
    for coordinate, value in ((legend.GetPositionCoordinate(), (0.82, 0.92 - height)),
                              (legend.GetPosition2Coordinate(), (0.16, height))):
        coordinate.SetCoordinateSystemToNormalizedViewport()
        coordinate.SetValue(*value)


def _add_ruler(plotter, *, view: str, corner: tuple[float, float], x_span: float, depth: float) -> tuple:
    """Add a ruler in cm at the front-left corner of the surface; return its far end (x, y, z).

    Side and iso views get a vertical depth ruler from the surface (0) down past the deepest
    root in round steps; the top view, where depth is not visible, a horizontal one along x.
    """
    x_lo, y_lo = corner
    if view == "top":
        step = _nice_step(0.5 * x_span / 5, up=False)
        length, labels = 5 * step, 6
        a, b, title = (x_lo, y_lo, 0.0), (x_lo + length, y_lo, 0.0), "cm"
    else:
        length, labels = ruler_ticks(depth)
        a, b, title = (x_lo, y_lo, 0.0), (x_lo, y_lo, -length), "depth (cm)"
    ruler = plotter.add_ruler(a, b, title=title, number_labels=labels,
                              label_format="%.0f" if length / (labels - 1) >= 1 else "%g",
                              label_color=TEXT_COLOUR, tick_color=TEXT_COLOUR, font_size_factor=0.7)
    ruler.SetTitlePosition(1.0)  # title at the far end, clear of the labels
    ruler.GetProperty().SetColor(0.0, 0.0, 0.0)
    ruler.GetProperty().SetLineWidth(MIN_LINE_WIDTH_PX)
    return b


def _with_stand(box: np.ndarray, layout: dict | None, *, view: str) -> np.ndarray:
    """The scene box grown to hold a pot's or rhizobox's walls and bottom, and in the top view the
    plants and the rows across the stand's cell."""
    if layout is None:
        return box
    box = box.copy()
    kind = (layout.get("container") or {}).get("kind", "field")
    if kind != "field":
        box[0], box[1] = min(box[0], layout["cell_x_cm"][0]), max(box[1], layout["cell_x_cm"][1])
        box[2], box[3] = min(box[2], layout["cell_y_cm"][0]), max(box[3], layout["cell_y_cm"][1])
        box[4] = min(box[4], -float(layout["container"]["depth_cm"]))
    elif view == "top":
        positions = np.asarray(layout["plant_positions_cm"], dtype=float).reshape(-1, 3)
        if len(positions):
            box[0], box[1] = min(box[0], positions[:, 0].min()), max(box[1], positions[:, 0].max())
            box[2], box[3] = min(box[2], positions[:, 1].min()), max(box[3], positions[:, 1].max())
    return box


#: Colour of the plant markers and row lines of the top view, and of container walls.
STAND_COLOUR = "black"
#: Diameter of a plant marker at 1200 x 900 pixels.
PLANT_MARKER_PX = 14.0
#: Smallest diameter of a plant marker, pixels (small pictures keep visible markers).
MIN_PLANT_MARKER_PX = 8.0


def _add_stand(plotter, layout: dict | None, *, view: str, scale: float, y_range: tuple[float, float]) -> None:
    """Where the plants are: walls and bottom of a pot (rim and bottom circles and the outline of its
    side as seen from the view) or rhizobox
    (box edges) in every view; in the top view of a field stand the rows (lines along y at their x
    across the picture) and the plants (round markers at their seed positions, drawn at the surface)."""
    import pyvista as pv

    if layout is None:
        return
    container = layout.get("container") or {}
    kind = container.get("kind", "field")
    width = max(MIN_LINE_WIDTH_PX, 2.0 * scale)
    if kind == "pot":
        radius, depth = 0.5 * float(container["diameter_cm"]), float(container["depth_cm"])
        angle = np.linspace(0.0, 2.0 * np.pi, 97)
        for z in (0.0, -depth):
            ring = np.column_stack([radius * np.cos(angle), radius * np.sin(angle), np.full(angle.size, z)])
            plotter.add_mesh(pv.lines_from_points(ring), color=STAND_COLOUR, line_width=width, lighting=False)
        toward = np.asarray(_VIEW_DIRECTIONS[view][0][:2], dtype=float)
        if np.linalg.norm(toward) > 0:  # the cylinder's outline seen from this side: two vertical lines
            across = np.array([-toward[1], toward[0]]) / np.linalg.norm(toward)
            for sign in (-1.0, 1.0):
                x, y = sign * radius * across
                plotter.add_mesh(pv.Line((x, y, 0.0), (x, y, -depth)), color=STAND_COLOUR, line_width=width,
                                 lighting=False)
    elif kind == "rhizobox":
        bounds = (*layout["cell_x_cm"], *layout["cell_y_cm"], -float(container["depth_cm"]), 0.0)
        plotter.add_mesh(pv.Box(bounds=bounds).extract_all_edges(), color=STAND_COLOUR, line_width=width,
                         lighting=False)
    if view != "top":
        return
    if kind == "field":
        for x in layout["row_x_cm"]:
            plotter.add_mesh(pv.Line((x, y_range[0], 0.05), (x, y_range[1], 0.05)), color=STAND_COLOUR,
                             line_width=max(1.0, 1.0 * scale), lighting=False, opacity=0.6)
    positions = np.asarray(layout["plant_positions_cm"], dtype=float).reshape(-1, 3)
    if len(positions):
        points = positions.copy()
        points[:, 2] = 0.1  # on top of the surface plane and the roots below it
        plotter.add_points(points, color=STAND_COLOUR, point_size=max(MIN_PLANT_MARKER_PX, PLANT_MARKER_PX * scale),
                           render_points_as_spheres=True, lighting=False)


def _add_scale_bar(plotter, *, right: tuple[float, float, float], x_span: float) -> None:
    """A horizontal scale bar in cm along x, ending at ``right`` (the picture's lower right corner),
    about a quarter of the scene wide in a round length (1, 2 or 5 x 10^k cm)."""
    length = _nice_step(0.25 * x_span, up=False)
    x1, y, z = right
    ruler = plotter.add_ruler((x1 - length, y, z), (x1, y, z), title="cm", number_labels=3,
                              label_format="%.0f" if length / 2 >= 1 else "%g", label_color=TEXT_COLOUR,
                              tick_color=TEXT_COLOUR, font_size_factor=0.7)
    ruler.SetTitlePosition(1.0)
    ruler.GetProperty().SetColor(0.0, 0.0, 0.0)
    ruler.GetProperty().SetLineWidth(MIN_LINE_WIDTH_PX)


#: Direction from the scene to the camera, and the up vector, of each view.
_VIEW_DIRECTIONS = {
    "side": ((0.0, -1.0, 0.0), (0.0, 0.0, 1.0)),  # camera on -y looking along +y: x right, z up
    "top": ((0.0, 0.0, 1.0), (0.0, 1.0, 0.0)),  # camera above looking down: x right, y up
    "iso": ((1.0, -1.6, 0.9), (0.0, 0.0, 1.0)),  # oblique, from the front right and above
}


#: Fraction of the picture height kept free at the top for the title.
TITLE_BAND = 0.08
#: Fraction of the picture width kept free at the right for a legend or colour bar beside the roots.
LEGEND_COLUMN = 0.19
#: Free margin around the roots, as a fraction of the picture; more on the left for the ruler labels.
MARGIN = 0.02
LEFT_MARGIN = 0.06


def _set_camera(plotter, view: str, *, points: np.ndarray, aspect: float, legend_height: float | None = None) -> None:
    """Parallel-projection camera for ``view`` that frames ``points`` (shape (k, 3), cm: the corners of
    what is drawn) tightly: they are projected on the view plane and their extent scaled to fill the
    picture, keeping a title band at the top and room for the legend at the upper right: either a
    column at the right (roots beside it) or, for a categorical legend of ``legend_height``
    (fraction of the picture), a band at the top (roots below it), whichever shows the roots larger.
    """
    toward, up = (np.asarray(v, dtype=float) for v in _VIEW_DIRECTIONS[view])
    toward /= np.linalg.norm(toward)
    right = np.cross(up, toward)
    right /= np.linalg.norm(right)
    up = np.cross(toward, right)
    corners = np.asarray(points, dtype=float)
    u, v, w = corners @ right, corners @ up, corners @ toward
    width_cm, height_cm = max(float(np.ptp(u)), 1e-6), max(float(np.ptp(v)), 1e-6)
    # regions (left, right, bottom, top) of the picture, in [0, 1], the roots may fill
    regions = [(LEFT_MARGIN, 1.0 - LEGEND_COLUMN - MARGIN, MARGIN, 1.0 - TITLE_BAND)]
    if legend_height is not None:
        regions.append((LEFT_MARGIN, 1.0 - MARGIN, MARGIN, 1.0 - TITLE_BAND - legend_height - MARGIN))
    best = None
    for left, right_edge, bottom, top in regions:
        # half the picture height in cm so that the box fits the region in both directions
        half = max(0.5 * height_cm / (top - bottom), 0.5 * width_cm / (aspect * (right_edge - left)))
        if best is None or half < best[0]:
            best = (half, left, right_edge, bottom, top)
    half, left, right_edge, bottom, top = best
    # the picture centre, so that the box's centre lands on the region's centre
    u_centre = 0.5 * (u.min() + u.max()) - (0.5 * (left + right_edge) - 0.5) * 2.0 * half * aspect
    v_centre = 0.5 * (v.min() + v.max()) - (0.5 * (bottom + top) - 0.5) * 2.0 * half
    centre = u_centre * right + v_centre * up + 0.5 * (w.min() + w.max()) * toward
    distance = 2.0 * float(np.ptp(w) + np.ptp(u) + np.ptp(v)) + 1.0
    plotter.camera_position = [tuple(centre + distance * toward), tuple(centre), tuple(up)]
    plotter.enable_parallel_projection()
    plotter.camera.parallel_scale = half
    plotter.reset_camera_clipping_range()


def render_png(system, path: str | os.PathLike, **options) -> Path:
    """Render like :func:`render_image` and write the picture as a PNG file, atomically.

    Parameters
    ----------
    system : RootSystem
    path : path-like
        Target ``.png`` file.
    **options
        ``color_by``, ``view``, ``size``, ``title`` as for :func:`render_image`.

    Returns
    -------
    pathlib.Path
    """
    from PIL import Image

    path = Path(path)
    if path.suffix.lower() != ".png":
        raise RootsimError(f"{path}: render output must be a .png file (got {path.suffix or 'no suffix'!r})")
    image = render_image(system, **options)
    with atomic_path(path) as tmp:
        try:
            Image.fromarray(image, mode="RGB").save(tmp, format="PNG")
        except OSError as exc:
            raise RootsimError(f"{path}: cannot write ({exc.strerror or exc})") from None
    return path
