"""A vertical slice of a soil field for pictures: values on a regular x–z grid at one y.

Used by ``rootsim render --soil-field`` to draw a field (for example the penetration resistance of a
plough pan, or a nutrient patch) behind the roots. Sampling is one vectorized call of
:meth:`rootsim.soil.fields.SoilFields.values` over all cell centres.
"""

from __future__ import annotations

import numpy as np

from ..errors import RootsimError

__all__ = ["field_label", "vertical_slice"]

#: Unit suffixes of field names (longest first) and how a scalar bar writes them.
_UNIT_SUFFIXES = (
    ("_g_per_cm3", "g/cm³"), ("_mg_per_kg", "mg/kg"), ("_cm3_per_cm3", "cm³/cm³"), ("_mpa", "MPa"),
    ("_kpa", "kPa"), ("_c", "°C"),
)
#: Fields whose name carries no unit suffix.
_UNITS_BY_NAME = {"volumetric_water_content": ("volumetric water content", "cm³/cm³")}


def field_label(name: str) -> str:
    """Scalar-bar title of field ``name``: its words and unit, e.g. ``"penetration resistance (MPa)"``.

    A name without a known unit suffix is shown as its words only.
    """
    if name in _UNITS_BY_NAME:
        words, unit = _UNITS_BY_NAME[name]
        return f"{words} ({unit})"
    for suffix, unit in _UNIT_SUFFIXES:
        if name.endswith(suffix) and len(name) > len(suffix):
            return f"{name[: -len(suffix)].replace('_', ' ')} ({unit})"
    return name.replace("_", " ")


def vertical_slice(fields, name: str, *, x_range_cm, z_range_cm, y_cm: float, cells: tuple[int, int] = (200, 200)):
    """Values of field ``name`` at the cell centres of a vertical x–z grid at ``y = y_cm``.

    Parameters
    ----------
    fields : rootsim.soil.fields.SoilFields
        Compiled fields (e.g. from :func:`rootsim.soil.build.soil_fields_from_spec`).
    name : str
        Field to sample.
    x_range_cm, z_range_cm : (float, float)
        Extent of the slice, cm (z negative below the surface).
    y_cm : float
        Position of the slice across the view, cm.
    cells : (int, int)
        Number of cells along x and along z.

    Returns
    -------
    ndarray of float64, shape (cells_z, cells_x)
        Row ``k`` holds the cells at height ``z_lo + (k + 0.5) * dz`` (bottom row first), column
        ``i`` at ``x_lo + (i + 0.5) * dx``.

    Raises
    ------
    RootsimError
        ``name`` is not a field of ``fields`` (the message lists the defined ones).
    """
    fields.index(name)  # one-line error naming the defined fields
    (x_lo, x_hi), (z_lo, z_hi) = (tuple(map(float, x_range_cm)), tuple(map(float, z_range_cm)))
    if not (x_hi > x_lo and z_hi > z_lo):
        raise RootsimError(f"soil slice: empty extent x {x_lo:g}..{x_hi:g}, z {z_lo:g}..{z_hi:g} cm")
    nx, nz = (max(int(c), 1) for c in cells)
    xc = x_lo + (np.arange(nx) + 0.5) * (x_hi - x_lo) / nx
    zc = z_lo + (np.arange(nz) + 0.5) * (z_hi - z_lo) / nz
    return fields.values(name, xc[None, :], float(y_cm), zc[:, None])
