"""Sampling positions given relative to the stand, as a field team places them.

Row crops are sampled at fixed positions relative to the rows, because RLD differs strongly
between the row and the inter-row (common practice):

* ``in_row_at_plant`` – on a plant, in the row;
* ``in_row_between_plants`` – in the row, midway between a plant and its neighbour;
* ``mid_row`` – level with a plant, midway between its row and the next.

A position is written ``KIND`` or ``KIND:PLANT`` in place of ``X,Y`` in ``--core``, ``--tube``
and ``--wall`` (e.g. ``--core mid_row,5,90,15``; ``--core in_row_between_plants:4,5,90``).
Without a plant number the plant nearest the stand centre is used (an inner plant, so a
bordered plot works too). The neighbour (between plants) and the next row (mid-row) are
taken toward the stand centre, so positions stay inside a finite plot; in a periodic stand
every choice is equivalent. Short forms ``at_plant`` and ``between_plants`` are accepted.
"""

from __future__ import annotations

from typing import Mapping

import numpy as np

from ..errors import SamplingError

__all__ = ["POSITION_KINDS", "parse_position", "stand_position", "is_position_word", "stand_layout", "replicate_plants"]

POSITION_KINDS = ("in_row_at_plant", "in_row_between_plants", "mid_row")
_ALIASES = {"at_plant": "in_row_at_plant", "between_plants": "in_row_between_plants", "midrow": "mid_row",
            "mid-row": "mid_row"}


def is_position_word(token: str) -> bool:
    """True if ``token`` starts with a letter (a position word rather than a coordinate)."""
    token = str(token).strip()
    return bool(token) and token[0].isalpha() and token.lower() not in ("nan", "inf", "infinity")


def parse_position(token: str, *, option: str) -> tuple[str, int]:
    """Parse ``KIND`` or ``KIND:PLANT`` into the position kind and the plant number (-1 = central plant).

    Raises
    ------
    SamplingError
        Unknown kind or a plant number that is not a whole number >= 0.
    """
    text = str(token).strip()
    kind, _, plant = text.partition(":")
    kind = _ALIASES.get(kind.strip().lower(), kind.strip().lower())
    if kind not in POSITION_KINDS:
        raise SamplingError(f"{option}: position {text!r} is not known "
                            f"(allowed: X,Y in cm or {', '.join(POSITION_KINDS)}, optionally :PLANT)")
    if not plant:
        return kind, -1
    try:
        number = int(plant)
    except ValueError:
        number = -1
        plant_ok = False
    else:
        plant_ok = number >= 0
    if not plant_ok:
        raise SamplingError(f"{option}: plant number in {text!r} must be a whole number >= 0, got {plant!r}")
    return kind, number


def stand_layout(metadata: Mapping, *, option: str) -> tuple[np.ndarray, int, float, float]:
    """Plant positions (n, 2), along-row axis (0 = x, 1 = y), plant and row spacing, cm, from metadata.

    The row direction is :func:`rootsim.periodic_stand.rows_along_y` (ties, e.g. a single plant, go to
    rows along y as the growth engine lays them out).
    """
    from .core_grid import stand_rows

    stand = dict((metadata or {}).get("stand") or {})
    if not stand.get("plant_positions_cm"):
        raise SamplingError(f"{option}: positions relative to the stand need the stand layout, and the segment "
                            "table metadata has no stand.plant_positions_cm (give X,Y in cm instead)")
    try:
        pos, _, plant_sp, row_sp = stand_rows(stand)
    except SamplingError as exc:
        raise SamplingError(f"{option}: {exc}") from None
    from ..periodic_stand import rows_along_y

    return pos, 1 if rows_along_y(pos, plant_spacing_cm=plant_sp, row_spacing_cm=row_sp) else 0, plant_sp, row_sp


def stand_position(metadata: Mapping, kind: str, plant: int = -1, *, option: str = "position") -> tuple[float, float, int]:
    """Coordinates of a stand-relative position.

    Parameters
    ----------
    metadata : mapping
        Segment-table metadata holding the stand layout.
    kind : {"in_row_at_plant", "in_row_between_plants", "mid_row"}
        Position kind (module docstring).
    plant : int
        Plant number (0 .. n_plants - 1), or -1 for the plant nearest the stand centre.
    option : str
        Option text for messages.

    Returns
    -------
    x_cm, y_cm : float
        Position, cm.
    plant : int
        The plant it refers to.
    """
    pos, along, plant_sp, row_sp = stand_layout(metadata, option=option)
    centre = 0.5 * (pos.min(axis=0) + pos.max(axis=0))
    if plant < 0:
        plant = int(np.argmin(np.hypot(*(pos - centre).T) + 1e-9 * np.arange(len(pos))))
    elif plant >= len(pos):
        raise SamplingError(f"{option}: plant {plant} does not exist (the stand has plants 0 to {len(pos) - 1})")
    xy = pos[plant].astype(np.float64).copy()
    across = 1 - along
    if kind == "in_row_between_plants":
        xy[along] += 0.5 * plant_sp * (1.0 if xy[along] <= centre[along] else -1.0)
    elif kind == "mid_row":
        xy[across] += 0.5 * row_sp * (1.0 if xy[across] <= centre[across] else -1.0)
    elif kind != "in_row_at_plant":
        raise SamplingError(f"{option}: position {kind!r} is not known (allowed: {', '.join(POSITION_KINDS)})")
    return float(xy[0]), float(xy[1]), plant


def replicate_plants(metadata: Mapping, replicates: int, *, seed: int | None, option: str) -> np.ndarray:
    """Plants for ``replicates`` cores of one position kind, drawn without replacement, shape (replicates,).

    A field team takes replicate cores at the same kind of position next to different plants
    of a plot; here the plants are drawn from the stand with ``numpy.random.default_rng(seed)``.

    Raises
    ------
    SamplingError
        Fewer plants than replicates, or ``replicates < 1``.
    """
    pos, _, _, _ = stand_layout(metadata, option=option)
    if replicates < 1:
        raise SamplingError(f"{option}: replicates must be >= 1, got {replicates}")
    if replicates > len(pos):
        raise SamplingError(f"{option}: {replicates} replicates need as many plants; the stand has {len(pos)}")
    rng = np.random.default_rng(seed)
    return np.sort(rng.choice(len(pos), size=replicates, replace=False))
