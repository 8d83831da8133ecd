"""Where the plants are: the stand layout of a parameter file or of a grown root system.

Plants stand on a rectangular layout centred on x = y = 0: ``rows`` rows run along y and are
``row_spacing_cm`` apart in x; the ``plants_per_row`` plants of a row are ``plant_spacing_cm``
apart in y. The stand's cell (the ground the plants share, whose area is the ground area of RLD)
is ``rows x row_spacing_cm`` by ``plants_per_row x plant_spacing_cm``, centred on the origin
(common practice: the ground area of a plant is row spacing x plant spacing). In a pot or
rhizobox the cell is the container's cross-section.

:func:`layout_from_spec` and :func:`layout_from_metadata` return the same JSON-ready dict;
:func:`describe_layout` turns it into the lines ``rootsim check`` and ``rootsim analyze`` print.
:func:`field_sampling_spots` gives the three places a field team takes cores in a row crop: in the
row at a plant, in the row midway between two plants, and mid-row (halfway between two rows).
"""

from __future__ import annotations

import math
from typing import Any, Mapping

import numpy as np

__all__ = ["layout_from_spec", "layout_from_metadata", "describe_layout", "field_sampling_spots",
           "container_size_text"]


def _layout(*, rows: int, plants_per_row: int, row_spacing_cm: float, plant_spacing_cm: float,
            sowing_depth_cm: float, container: Mapping[str, Any] | None) -> dict:
    i, j = np.meshgrid(np.arange(rows), np.arange(plants_per_row), indexing="ij")
    row_x = (np.arange(rows) - (rows - 1) / 2) * row_spacing_cm
    plant_y = (np.arange(plants_per_row) - (plants_per_row - 1) / 2) * plant_spacing_cm
    positions = np.column_stack([row_x[i.ravel()], plant_y[j.ravel()], np.full(i.size, -sowing_depth_cm)])
    container = dict(container or {"kind": "field"})
    kind = container.get("kind", "field")
    if kind == "pot":
        half = 0.5 * float(container["diameter_cm"])
        cell_x, cell_y = [-half, half], [-half, half]
        area = math.pi * half**2
    elif kind == "rhizobox":
        half_w, half_t = 0.5 * float(container["width_cm"]), 0.5 * float(container["thickness_cm"])
        cell_x, cell_y = [-half_w, half_w], [-half_t, half_t]
        area = 4.0 * half_w * half_t
    else:
        half_x, half_y = 0.5 * rows * row_spacing_cm, 0.5 * plants_per_row * plant_spacing_cm
        cell_x, cell_y = [-half_x, half_x], [-half_y, half_y]
        area = 4.0 * half_x * half_y
    return {
        "container": container,
        "row_direction": "y",
        "rows": int(rows),
        "plants_per_row": int(plants_per_row),
        "row_spacing_cm": float(row_spacing_cm),
        "plant_spacing_cm": float(plant_spacing_cm),
        "sowing_depth_cm": float(sowing_depth_cm),
        "row_x_cm": [float(v) for v in row_x],
        "plant_y_cm": [float(v) for v in plant_y],
        "plant_positions_cm": positions.tolist(),
        "cell_x_cm": [float(v) for v in cell_x],
        "cell_y_cm": [float(v) for v in cell_y],
        "cell_size_cm": [float(cell_x[1] - cell_x[0]), float(cell_y[1] - cell_y[0])],
        "ground_area_cm2": float(area),
    }


def layout_from_spec(spec) -> dict:
    """Stand layout of a validated parameter file (:class:`rootsim.spec.Spec`).

    Returns
    -------
    dict
        ``container`` (kind and size), ``row_direction`` (``"y"``), ``rows``, ``plants_per_row``,
        ``row_spacing_cm``, ``plant_spacing_cm``, ``sowing_depth_cm``, ``row_x_cm`` (x of each row,
        shape (rows,)), ``plant_y_cm`` (y of the plants along a row), ``plant_positions_cm`` (seed
        positions, shape (n_plants, 3), plant k = row k // plants_per_row), ``cell_x_cm`` and
        ``cell_y_cm`` (the stand's cell, [low, high]), ``cell_size_cm`` ([x, y] extent) and
        ``ground_area_cm2`` (cell area; the container's cross-section for pots and rhizoboxes).
    """
    st = spec.stand
    return _layout(rows=st.rows, plants_per_row=st.plants_per_row, row_spacing_cm=st.row_spacing_cm,
                   plant_spacing_cm=st.plant_spacing_cm, sowing_depth_cm=st.sowing_depth_cm,
                   container=spec.container.model_dump(exclude_none=True))


def layout_from_metadata(metadata: Mapping | None) -> dict | None:
    """Stand layout from the table facts of a grown root system (``RootSystem.metadata``).

    Returns the dict of :func:`layout_from_spec`, with the stored ``plant_positions_cm`` and
    ``ground_area_cm2`` when present (a subset of plants keeps only its own), or None when the
    table carries no stand (e.g. imported from RSML).
    """
    stand = (metadata or {}).get("stand") or {}
    needed = ("rows", "plants_per_row", "row_spacing_cm", "plant_spacing_cm")
    if not all(k in stand for k in needed):
        return None
    layout = _layout(rows=int(stand["rows"]), plants_per_row=int(stand["plants_per_row"]),
                     row_spacing_cm=float(stand["row_spacing_cm"]), plant_spacing_cm=float(stand["plant_spacing_cm"]),
                     sowing_depth_cm=float(stand.get("sowing_depth_cm", 0.0)),
                     container=(metadata or {}).get("container"))
    if stand.get("plant_positions_cm") is not None:
        layout["plant_positions_cm"] = [list(map(float, p)) for p in stand["plant_positions_cm"]]
    if stand.get("plant_ids") is not None:
        layout["plant_ids"] = [int(k) for k in stand["plant_ids"]]
    if stand.get("ground_area_cm2") is not None:
        layout["ground_area_cm2"] = float(stand["ground_area_cm2"])
    return layout


def field_sampling_spots(layout: Mapping) -> dict[str, tuple[float, float]]:
    """(x, y) in cm of the places a field team cores a row crop, next to the first plant of the first row.

    ``in_row_at_plant`` (on the plant), ``in_row_between_plants`` (in the row, half a plant spacing
    along it) and ``mid_row`` (beside the plant, half a row spacing across the rows). Common practice
    for row crops: cores at these three positions, averaged with weights for the ground each
    represents, estimate the stand mean. Pots and rhizoboxes get the container centre only.
    """
    kind = (layout.get("container") or {}).get("kind", "field")
    if kind != "field":
        return {"centre": (0.0, 0.0)}
    x, y = float(layout["row_x_cm"][0]), float(layout["plant_y_cm"][0])
    return {
        "in_row_at_plant": (x, y),
        "in_row_between_plants": (x, y + 0.5 * float(layout["plant_spacing_cm"])),
        "mid_row": (x + 0.5 * float(layout["row_spacing_cm"]), y),
    }


def container_size_text(container: Mapping | None) -> str:
    """``"pot 20 cm diameter x 40 cm deep"``, ``"rhizobox 30 x 2 cm, 50 cm deep"`` or ``"field"``."""
    container = container or {}
    kind = container.get("kind", "field")
    if kind == "pot":
        return f"pot {float(container['diameter_cm']):g} cm diameter x {float(container['depth_cm']):g} cm deep"
    if kind == "rhizobox":
        return (f"rhizobox {float(container['width_cm']):g} cm wide (x) x {float(container['thickness_cm']):g} cm "
                f"thick (y), {float(container['depth_cm']):g} cm deep")
    return "field"


def _values(values, limit: int = 8) -> str:
    shown = ", ".join(f"{v:g}" for v in values[:limit])
    return shown + (f", ... ({len(values)} in all)" if len(values) > limit else "")


def describe_layout(layout: Mapping | None, *, indent: str = "  ") -> list[str]:
    """Human lines describing a stand layout (empty when there is none).

    Fields: row direction, the x of the rows, the y of the plants in a row, the cell and its
    ground area, and three field sampling spots. Pots and rhizoboxes: the container size and its
    cross-section instead of row spacing.
    """
    if not layout:
        return []
    kind = (layout.get("container") or {}).get("kind", "field")
    n_plants = len(layout["plant_positions_cm"])
    area = float(layout["ground_area_cm2"])
    if kind != "field":
        lines = [f"{indent}container: {container_size_text(layout['container'])}, cross-section {area:,.0f} cm2 "
                 f"(the ground area of RLD); {n_plants} plant(s)"]
        positions = np.asarray(layout["plant_positions_cm"], dtype=float).reshape(-1, 3)
        lines.append(f"{indent}plants at (x, y) cm: "
                     + "; ".join(f"({x:g}, {y:g})" for x, y in positions[:8, :2])
                     + (" ..." if len(positions) > 8 else ""))
        return lines
    lines = [
        f"{indent}stand layout: rows along y at x = {_values(layout['row_x_cm'])} cm "
        f"({layout['row_spacing_cm']:g} cm apart); plants at y = {_values(layout['plant_y_cm'])} cm in each row "
        f"({layout['plant_spacing_cm']:g} cm apart), sown {layout['sowing_depth_cm']:g} cm deep",
        f"{indent}stand cell: x {layout['cell_x_cm'][0]:g}..{layout['cell_x_cm'][1]:g} cm, "
        f"y {layout['cell_y_cm'][0]:g}..{layout['cell_y_cm'][1]:g} cm ({layout['cell_size_cm'][0]:g} x "
        f"{layout['cell_size_cm'][1]:g} cm), ground area {area:,.0f} cm2",
    ]
    if layout.get("plant_ids") is not None:
        positions = np.asarray(layout["plant_positions_cm"], dtype=float).reshape(-1, 3)
        lines[-1] = lines[-1].rsplit(", ground area", 1)[0] + (
            f", ground area {layout['cell_size_cm'][0] * layout['cell_size_cm'][1]:,.0f} cm2")
        lines.append(f"{indent}selected plant(s): " + "; ".join(
            f"plant {k} at ({x:g}, {y:g})" for k, (x, y) in zip(layout["plant_ids"], positions[:, :2]))
            + f"; their ground area {area:,.0f} cm2")
    spots = field_sampling_spots(layout)
    lines.append(f"{indent}field sampling spots (x, y cm): " + "; ".join(
        f"{name.replace('_', ' ')} ({x:g}, {y:g})" for name, (x, y) in spots.items()))
    return lines
