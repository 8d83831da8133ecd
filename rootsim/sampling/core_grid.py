"""Core placement across a stand: in the row at plants, in the row between plants, and mid-row.

Row crops are cored at fixed positions relative to the rows because RLD differs strongly
between the row and the inter-row (common practice). :func:`core_grid` reads the stand
layout from the table metadata (``stand.plant_positions_cm``, ``row_spacing_cm``,
``plant_spacing_cm``) and places

* ``in_row_at_plant`` – one core on every plant position;
* ``in_row_between_plants`` – one core midway between each pair of neighbouring plants of a
  row (a row of one plant gets one core half a plant spacing further along the row);
* ``mid_row`` – for every plant of each row but the last, one core at the plant's
  along-row position midway to the next row (a stand of one row gets one core per plant
  half a row spacing across).

Rows run along x unless the plant positions show they run along y (the orientation whose
neighbour gaps best match the plant and row spacings is taken; ties go to x).
"""

from __future__ import annotations

from typing import Any, Mapping

import numpy as np

from ..errors import SamplingError
from .columns import table_metadata
from .cores import DEFAULT_INCREMENT_CM, Core, validate_core
from .geometry_strings import parse_numbers

__all__ = ["core_grid", "parse_core_grid", "stand_rows"]

_ROUND_DECIMALS = 6


def _min_gap(values: np.ndarray) -> float:
    u = np.unique(np.round(values, _ROUND_DECIMALS))
    return float(np.diff(u).min()) if u.size > 1 else float("nan")


def stand_rows(stand: Mapping) -> tuple[np.ndarray, int, float, float]:
    """Plant positions, the along-row axis (0 = x, 1 = y) and the plant and row spacings, cm.

    Parameters
    ----------
    stand : mapping
        The ``stand`` entry of the table metadata.

    Returns
    -------
    positions : ndarray, shape (n_plants, 2)
        Plant (x, y), cm.
    along_axis : int
        0 when rows run along x, 1 along y.
    plant_spacing_cm, row_spacing_cm : float
        Spacings, cm (taken from the metadata, or from the positions when absent).

    Raises
    ------
    SamplingError
        No plant positions, or a spacing that is neither given nor visible in the positions.
    """
    raw = stand.get("plant_positions_cm")
    if not raw:
        raise SamplingError("--core-grid needs the stand layout: the segment table metadata has no stand.plant_positions_cm")
    try:
        pos = np.asarray(raw, dtype=np.float64).reshape(len(raw), -1)[:, :2]
    except (TypeError, ValueError):
        raise SamplingError("segment table metadata: stand.plant_positions_cm must be a list of [x, y, z] in cm") from None
    plant_sp = stand.get("plant_spacing_cm")
    row_sp = stand.get("row_spacing_cm")
    gaps = (_min_gap(pos[:, 0]), _min_gap(pos[:, 1]))

    def score(along: int) -> float:
        total = 0.0
        for gap, want in ((gaps[along], plant_sp), (gaps[1 - along], row_sp)):
            if want is not None and np.isfinite(gap):
                total += abs(gap - float(want))
        return total

    along = 0 if score(0) <= score(1) else 1
    plant_sp = float(plant_sp) if plant_sp is not None else gaps[along]
    row_sp = float(row_sp) if row_sp is not None else gaps[1 - along]
    for name, value in (("plant_spacing_cm", plant_sp), ("row_spacing_cm", row_sp)):
        if not (np.isfinite(value) and value > 0):
            raise SamplingError(
                f"--core-grid needs stand.{name} in the segment table metadata (it cannot be read from "
                f"{len(pos)} plant position(s))"
            )
    return pos, along, plant_sp, row_sp


def core_grid(system: Any, *, diameter_cm: float, depth_cm: float, increment_cm: float = DEFAULT_INCREMENT_CM) -> list[Core]:
    """Cores placed in the row at plants, between plants and mid-row (see module docstring).

    Parameters
    ----------
    system : RootSystem or pandas.DataFrame
        Root system whose metadata holds the stand layout.
    diameter_cm, depth_cm, increment_cm : float
        Core diameter, depth and increment thickness, cm.

    Returns
    -------
    list of Core
        With ``placement`` set to the position kind and ``plant_id`` to the plant it refers to.
    """
    stand = table_metadata(system).get("stand") or {}
    pos, along, plant_sp, row_sp = stand_rows(stand)
    across = 1 - along

    def point(a: float, c: float) -> tuple[float, float]:
        xy = [0.0, 0.0]
        xy[along], xy[across] = a, c
        return xy[0], xy[1]

    placed: list[tuple[float, float, str, int]] = []
    for pid, (x, y) in enumerate(pos):
        placed.append((x, y, "in_row_at_plant", pid))
    row_keys = np.round(pos[:, across], _ROUND_DECIMALS)
    rows = [np.flatnonzero(row_keys == key) for key in np.unique(row_keys)]
    for members in rows:
        members = members[np.argsort(pos[members, along], kind="stable")]
        if len(members) == 1:
            pid = int(members[0])
            placed.append((*point(pos[pid, along] + plant_sp / 2, pos[pid, across]), "in_row_between_plants", pid))
        for first, second in zip(members[:-1], members[1:]):
            a = 0.5 * (pos[first, along] + pos[second, along])
            placed.append((*point(a, pos[first, across]), "in_row_between_plants", int(first)))
    if len(rows) == 1:
        for pid in rows[0]:
            placed.append((*point(pos[pid, along], pos[pid, across] + row_sp / 2), "mid_row", int(pid)))
    for lower, upper in zip(rows[:-1], rows[1:]):
        c = 0.5 * (pos[lower[0], across] + pos[upper[0], across])
        for pid in lower[np.argsort(pos[lower, along], kind="stable")]:
            placed.append((*point(pos[pid, along], c), "mid_row", int(pid)))
    cores = [Core(x_cm=float(x), y_cm=float(y), diameter_cm=diameter_cm, depth_cm=depth_cm, increment_cm=increment_cm,
                  placement=kind, plant_id=pid) for x, y, kind, pid in placed]
    for core in cores[:1]:
        validate_core(core, label="--core-grid")
    return cores


def parse_core_grid(text: str, *, option: str = "--core-grid") -> dict[str, float]:
    """Parse ``"DIAMETER,DEPTH[,INCREMENT]"`` (cm) into keyword arguments of :func:`core_grid`."""
    v = parse_numbers(text, option=option, names=("diameter", "depth"), optional=("increment",))
    out = {"diameter_cm": v["diameter"], "depth_cm": v["depth"], "increment_cm": v.get("increment", DEFAULT_INCREMENT_CM)}
    validate_core(Core(x_cm=0.0, y_cm=0.0, **out), label=f"{option} {text}")
    return out
