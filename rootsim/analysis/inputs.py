"""Reading segment columns and table facts from any segment-table-like object.

The analyzers accept a :class:`rootsim.RootSystem`, a :class:`pandas.DataFrame` in the
segment-table layout (metadata, if any, in ``DataFrame.attrs["rootsim"]``) or a plain
mapping of column name to array. These helpers give them numpy arrays and metadata
without copying more than needed.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from ..errors import RootsimError, SegmentTableError

__all__ = ["ValidatedColumns", "float_column", "int_column", "system_metadata", "ground_area_from_metadata", "positive_number"]


def _column(system: Any, name: str) -> np.ndarray:
    try:
        values = system[name]
    except (KeyError, IndexError, TypeError):
        raise SegmentTableError(f"segment table: missing column {name} (needed by this analysis)") from None
    return values.to_numpy() if hasattr(values, "to_numpy") else np.asarray(values)


class ValidatedColumns(dict):
    """Column name -> array taken from a validated :class:`rootsim.RootSystem` (e.g. one plant's rows):
    read back as stored, without checking the values again."""


def _validated(system: Any) -> bool:
    from ..rootsystem import RootSystem

    # columns were validated when it was built or read
    return isinstance(system, (RootSystem, ValidatedColumns))


def float_column(system: Any, name: str) -> np.ndarray:
    """Column ``name`` as a float64 array, shape (n,); raises on missing columns or NaN/inf values.

    Columns of a :class:`rootsim.RootSystem` are already validated and are returned as stored.
    """
    values = _column(system, name)
    if _validated(system) and values.dtype == np.float64:
        return values
    try:
        arr = np.asarray(values, dtype=np.float64)
    except (TypeError, ValueError):
        raise SegmentTableError(f"segment table: column {name} must be numbers") from None
    if not np.isfinite(arr).all():
        raise SegmentTableError(f"segment table: column {name} has NaN or infinite values")
    return arr


def int_column(system: Any, name: str) -> np.ndarray:
    """Column ``name`` as an int64 array, shape (n,); raises on missing columns or non-integer values."""
    values = _column(system, name)
    if np.issubdtype(np.asarray(values).dtype, np.integer):
        return np.asarray(values, dtype=np.int64)
    arr = float_column(system, name)
    if np.any(arr != np.round(arr)):
        raise SegmentTableError(f"segment table: column {name} must be integers")
    return arr.astype(np.int64)


def system_metadata(system: Any) -> dict:
    """Table facts (``stand``, ``container``, ``run``) of a RootSystem or DataFrame; ``{}`` if none."""
    meta = getattr(system, "metadata", None)
    if isinstance(meta, dict):
        return meta
    attrs = getattr(system, "attrs", None)
    if isinstance(attrs, dict) and isinstance(attrs.get("rootsim"), dict):
        return attrs["rootsim"]
    return {}


def ground_area_from_metadata(metadata: dict) -> float | None:
    """Ground area of the stand, cm², from ``stand.ground_area_cm2`` or spacing x plants; None if unknown.

    Common practice: the ground area of a stand is plant spacing x row spacing x number of plants.
    """
    stand = metadata.get("stand") or {}
    area = stand.get("ground_area_cm2")
    if area is None:
        try:
            area = float(stand["plant_spacing_cm"]) * float(stand["row_spacing_cm"]) * float(stand["n_plants"])
        except (KeyError, TypeError, ValueError):
            return None
    try:
        area = float(area)
    except (TypeError, ValueError):
        return None
    return area if np.isfinite(area) and area > 0 else None


def positive_number(value, what: str, *, unit: str = "cm") -> float:
    """``value`` as a finite float > 0, or a one-line :class:`RootsimError` naming ``what`` and ``unit``."""
    try:
        out = float(value)
    except (TypeError, ValueError):
        out = float("nan")
    if not (np.isfinite(out) and out > 0):
        raise RootsimError(f"{what} {value!r}: must be a number > 0 ({unit})")
    return out
