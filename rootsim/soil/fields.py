"""Named scalar soil fields over the soil volume, compiled into plain arrays with numba kernels.

A soil is a set of named fields (``penetration_resistance_mpa``, ``bulk_density_g_per_cm3``,
``volumetric_water_content``, ``matric_potential_kpa``, ``soil_temperature_c`` and any user-named ones such as
``nitrate_mg_per_kg``). Each field is an ordered list of *sources*; the value at a point starts at 0 and every
source is applied in turn inside its region with weight ``w`` (1 inside, falling linearly to 0 over an optional
``edge_width_cm`` outside a patch):

* ``replace``: ``v <- (1 - w) v + w s``
* ``add``: ``v <- v + w s``
* ``multiply``: ``v <- v (1 - w + w s)``

Sources:

===============  =========================================================================================
constant         one value everywhere
layers           depth layers with a value each (the parameter file's ``[[soil.layers]]``); a depth on a
                 boundary belongs to the layer above, the surface to the first layer; gaps take a stated
                 ``outside_value``
depth table      values at depths, linear between rows, the end values beyond the ends
grid             a regular 3D grid, values at the nodes (trilinear) or per cell (constant per voxel);
                 outside the grid: ``clamp`` (nearest grid value), ``value`` (a stated value) or ``none``
                 (the source does not apply)
box, sphere,     analytic patches with a value
cylinder
power law        ``a * theta**b * rho**c`` of two other fields (Busscher 1990; see :mod:`.strength`)
===============  =========================================================================================

Coordinates are cm, z up, soil surface at z = 0, depth = -z.

The compiled form (:class:`CompiledFields`) is a NamedTuple of numpy arrays, so numba functions take it as an
argument. :func:`value_at` and :func:`gradient_at` are ``@njit(cache=True)`` scalar kernels for one point (the
growth engine calls them per tip inside its compiled step); :func:`values_at` and :func:`gradients_at` are the
vectorized wrappers for arrays of points. Trilinear interpolation reproduces linear fields exactly.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Mapping, NamedTuple, Sequence

import numpy as np
from numba import njit

from ..errors import RootsimError

__all__ = [
    "KNOWN_FIELDS", "FieldSource", "CompiledFields", "SoilFields",
    "constant_source", "layered_source", "depth_table_source", "grid_source", "box_patch", "sphere_patch",
    "cylinder_patch", "power_law_source", "compile_fields", "value_at", "gradient_at", "values_at",
    "gradients_at", "value_and_gradient_at", "planned_value_and_gradient", "field_plan", "PLAN_GENERIC",
    "field_value_range", "SharedGrid", "shared_grid", "shared_grid_at",
]

#: Fields with a meaning rootsim knows: name -> (lowest, highest) plausible value of an input.
KNOWN_FIELDS: dict[str, tuple[float, float]] = {
    "penetration_resistance_mpa": (0.0, 50.0),
    "bulk_density_g_per_cm3": (0.05, 2.65),
    "volumetric_water_content": (0.0, 1.0),
    "matric_potential_kpa": (-1.0e6, 0.0),
    "soil_temperature_c": (-30.0, 60.0),
}

# source kinds
CONSTANT, LAYERS, DEPTH_TABLE, GRID_NODES, GRID_CELLS, BOX, SPHERE, CYLINDER, POWER_LAW = range(9)
# modes
REPLACE, ADD, MULTIPLY = range(3)
# outside rules of grids
CLAMP, OUTSIDE_VALUE, OUTSIDE_NONE = range(3)

_KINDS = {"constant": CONSTANT, "layers": LAYERS, "depth_table": DEPTH_TABLE, "grid_nodes": GRID_NODES,
          "grid_cells": GRID_CELLS, "box": BOX, "sphere": SPHERE, "cylinder": CYLINDER, "power_law": POWER_LAW}
_MODES = {"replace": REPLACE, "add": ADD, "multiply": MULTIPLY}
_OUTSIDE = {"clamp": CLAMP, "value": OUTSIDE_VALUE, "none": OUTSIDE_NONE}
_NP = 12  # float parameters per source
_NI = 7   # int parameters per source: data offset, n0, n1, n2, field a, field b, outside rule

#: Smallest water content used by the power law (avoids 0 ** negative).
MIN_WATER_CONTENT = 1e-3

#: Plan of a field evaluated by the generic per-source dispatch (:attr:`CompiledFields.plan`).
PLAN_GENERIC = -1
_BASE_KINDS = (CONSTANT, LAYERS, DEPTH_TABLE, GRID_NODES, GRID_CELLS)
_PATCH_KINDS = (BOX, SPHERE, CYLINDER)


class FieldSource(NamedTuple):
    """One source of a field before compilation (build it with the ``*_source`` / ``*_patch`` functions)."""

    kind: int
    mode: int
    params: tuple
    ints: tuple
    data: np.ndarray
    refs: tuple = ()  # names of the fields a power law reads


class CompiledFields(NamedTuple):
    """A soil's fields as plain arrays (numba-friendly).

    Attributes
    ----------
    field_first : ndarray of int64, shape (n_fields + 1,)
        Sources of field ``f`` are ``field_first[f] .. field_first[f + 1] - 1``.
    kind, mode : ndarray of int64, shape (n_sources,)
    params : ndarray of float64, shape (n_sources, 12)
    ints : ndarray of int64, shape (n_sources, 7)
    data : ndarray of float64, shape (n_data,)
        Layer edges and values, table rows and grid values (C order, axes x, y, z) of every source.
    plan : ndarray of int64, shape (n_fields,)
        How the kernels evaluate field ``f``: :data:`PLAN_GENERIC` (every source in turn through the generic
        source dispatch), or the kind of its first source, evaluated by that kind's own code, followed by its
        patches (see :func:`field_plan`).
    """

    field_first: np.ndarray
    kind: np.ndarray
    mode: np.ndarray
    params: np.ndarray
    ints: np.ndarray
    data: np.ndarray
    plan: np.ndarray


@dataclass(frozen=True)
class SoilFields:
    """Named fields and their compiled arrays.

    Attributes
    ----------
    names : tuple of str
        Field names; field ``names[i]`` has index ``i`` in the kernels.
    compiled : CompiledFields
    """

    names: tuple
    compiled: CompiledFields

    def index(self, name: str) -> int:
        """Index of field ``name`` (a one-line :class:`RootsimError` naming the known fields otherwise)."""
        try:
            return self.names.index(name)
        except ValueError:
            raise RootsimError(f"soil field {name!r} is not defined (defined: {', '.join(self.names) or 'none'})") \
                from None

    def values(self, name: str, x, y, z) -> np.ndarray:
        """Values of field ``name`` at points (arrays broadcast together); see :func:`values_at`."""
        return values_at(self.compiled, self.index(name), x, y, z)

    def gradients(self, name: str, x, y, z) -> np.ndarray:
        """Gradients (n, 3) of field ``name``; see :func:`gradients_at`."""
        return gradients_at(self.compiled, self.index(name), x, y, z)


def _mode(mode: str) -> int:
    if mode not in _MODES:
        raise RootsimError(f"soil patch mode {mode!r} is not known (allowed: {', '.join(_MODES)})")
    return _MODES[mode]


def _vec3(value, what: str) -> tuple:
    arr = np.asarray(value, dtype=float).ravel()
    if arr.size != 3 or not np.isfinite(arr).all():
        raise RootsimError(f"{what}: needs three finite numbers (x, y, z in cm)")
    return tuple(float(v) for v in arr)


def constant_source(value: float, *, mode: str = "replace") -> FieldSource:
    """The same value everywhere."""
    return FieldSource(CONSTANT, _mode(mode), (float(value),), (), np.zeros(0))


def layered_source(depth_top_cm, depth_bottom_cm, values, *, outside_value: float = 0.0,
                   mode: str = "replace") -> FieldSource:
    """Depth layers with one value each.

    Parameters
    ----------
    depth_top_cm, depth_bottom_cm, values : array_like, shape (n_layers,)
        Non-overlapping layers (any order). A depth exactly on a boundary belongs to the layer above; the soil
        surface and anything above it belong to the first interval (as the growth engine's layers do).
    outside_value : float, keyword-only
        Value in gaps between layers and below the last one.
    """
    tops = np.asarray(depth_top_cm, float)
    bottoms = np.asarray(depth_bottom_cm, float)
    vals = np.asarray(values, float)
    order = np.argsort(tops, kind="stable")
    edges = [0.0]
    out_values = []
    for top, bottom, value in zip(tops[order], bottoms[order], vals[order]):
        if top > edges[-1]:
            edges.append(top)
            out_values.append(float(outside_value))
        elif top < edges[-1]:
            edges[-1] = top
        edges.append(bottom)
        out_values.append(value)
    out_values.append(float(outside_value))
    edges_arr = np.asarray(edges[1:], float)  # interval i is (edges[i-1], edges[i]]
    data = np.concatenate([edges_arr, np.asarray(out_values, float)])
    return FieldSource(LAYERS, _mode(mode), (float(outside_value),), (0, edges_arr.size), data)


def depth_table_source(depth_cm, values, *, mode: str = "replace") -> FieldSource:
    """Values at depths, linear between rows; above the first row its value, below the last row its value.

    Parameters
    ----------
    depth_cm : array_like, shape (n_rows,)
        Strictly increasing depths (cm).
    values : array_like, shape (n_rows,)
    """
    depth = np.asarray(depth_cm, float)
    vals = np.asarray(values, float)
    if depth.ndim != 1 or depth.size == 0 or depth.shape != vals.shape:
        raise RootsimError("depth table: needs one value per depth and at least one row")
    if np.any(np.diff(depth) <= 0):
        raise RootsimError("depth table: depths must be strictly increasing")
    return FieldSource(DEPTH_TABLE, _mode(mode), (), (0, depth.size), np.concatenate([depth, vals]))


def grid_source(values, origin_cm, spacing_cm, *, at: str = "nodes", outside: str = "clamp",
                outside_value: float = 0.0, mode: str = "replace") -> FieldSource:
    """A regular 3D grid.

    Parameters
    ----------
    values : array_like, shape (n_x, n_y, n_z)
        Grid values indexed ``[i, j, k]`` along x, y, z (z up).
    origin_cm : 3 floats
        Position of node ``[0, 0, 0]`` (``at="nodes"``) or the low corner of cell ``[0, 0, 0]`` (``at="cells"``).
    spacing_cm : 3 floats, > 0
    at : {"nodes", "cells"}, keyword-only
        Values at nodes (trilinear interpolation, exact for linear fields) or constant per cell (a point on a
        cell face belongs to the cell above it in z, and to the cell on the high side in x and y).
    outside : {"clamp", "value", "none"}, keyword-only
        Outside the grid: the nearest grid value, ``outside_value``, or no contribution.
    """
    arr = np.ascontiguousarray(values, dtype=np.float64)
    if arr.ndim != 3 or min(arr.shape) < 1:
        raise RootsimError(f"soil grid: needs a 3D array (got shape {arr.shape})")
    if not np.isfinite(arr).all():
        raise RootsimError("soil grid: holds NaN or infinite values")
    origin = _vec3(origin_cm, "soil grid origin_cm")
    spacing = _vec3(spacing_cm, "soil grid spacing_cm")
    if min(spacing) <= 0:
        raise RootsimError("soil grid: spacing_cm must be > 0 along every axis")
    if at not in ("nodes", "cells"):
        raise RootsimError(f"soil grid: at={at!r} (allowed: nodes, cells)")
    if outside not in _OUTSIDE:
        raise RootsimError(f"soil grid: outside={outside!r} (allowed: {', '.join(_OUTSIDE)})")
    kind = GRID_NODES if at == "nodes" else GRID_CELLS
    params = origin + spacing + (float(outside_value),) + tuple(1.0 / h for h in spacing)  # inverses: see _grid_cell
    ints = (0,) + arr.shape + (-1, -1, _OUTSIDE[outside])
    return FieldSource(kind, _mode(mode), params, ints, arr.ravel())


def box_patch(center_cm, size_cm, value: float, *, mode: str = "add", edge_width_cm: float = 0.0) -> FieldSource:
    """An axis-aligned box of ``size_cm`` (3 full widths) centred on ``center_cm``."""
    size = _vec3(size_cm, "box size_cm")
    if min(size) <= 0:
        raise RootsimError("box patch: size_cm must be > 0 along every axis")
    params = _vec3(center_cm, "box center_cm") + tuple(s / 2 for s in size) + (float(value), float(edge_width_cm))
    return FieldSource(BOX, _mode(mode), params, (), np.zeros(0))


def sphere_patch(center_cm, radius_cm: float, value: float, *, mode: str = "add",
                 edge_width_cm: float = 0.0) -> FieldSource:
    """A ball of ``radius_cm`` around ``center_cm``."""
    if not radius_cm > 0:
        raise RootsimError("sphere patch: radius_cm must be > 0")
    params = _vec3(center_cm, "sphere center_cm") + (float(radius_cm), 0.0, 0.0, float(value), float(edge_width_cm))
    return FieldSource(SPHERE, _mode(mode), params, (), np.zeros(0))


def cylinder_patch(start_cm, end_cm, radius_cm: float, value: float, *, mode: str = "add",
                   edge_width_cm: float = 0.0) -> FieldSource:
    """A solid cylinder of ``radius_cm`` around the axis from ``start_cm`` to ``end_cm`` (any direction)."""
    start = np.asarray(_vec3(start_cm, "cylinder start_cm"))
    end = np.asarray(_vec3(end_cm, "cylinder end_cm"))
    length = float(np.linalg.norm(end - start))
    if length <= 0 or not radius_cm > 0:
        raise RootsimError("cylinder patch: needs start_cm != end_cm and radius_cm > 0")
    axis = (end - start) / length
    params = tuple(start) + tuple(axis) + (float(value), float(edge_width_cm), length, float(radius_cm))
    return FieldSource(CYLINDER, _mode(mode), params, (), np.zeros(0))


def power_law_source(coefficient: float, water_field: str, water_exponent: float, density_field: str,
                     density_exponent: float, *, mode: str = "replace") -> FieldSource:
    """``coefficient * theta ** water_exponent * rho ** density_exponent`` of two other fields.

    Busscher's (1990) power-law pedotransfer function for penetration resistance from volumetric water content
    ``theta`` and bulk density ``rho`` (see :func:`rootsim.soil.strength.busscher_penetration_resistance_mpa`).
    Water content is taken as at least :data:`MIN_WATER_CONTENT`. The two fields must not be power laws.
    """
    params = (float(coefficient), float(water_exponent), float(density_exponent))
    return FieldSource(POWER_LAW, _mode(mode), params, (), np.zeros(0), refs=(water_field, density_field))


def compile_fields(fields: Mapping[str, Sequence[FieldSource]]) -> SoilFields:
    """Compile named fields (name -> ordered sources) into :class:`SoilFields`.

    Raises
    ------
    RootsimError
        A power law referring to an undefined field or to another power law.
    """
    names = tuple(fields)
    kinds, modes, params, ints, chunks = [], [], [], [], []
    first = [0]
    offset = 0
    for name in names:
        for src in fields[name]:
            p = np.zeros(_NP)
            p[: len(src.params)] = src.params
            i = np.full(_NI, -1, dtype=np.int64)
            i[: len(src.ints)] = src.ints
            i[0] = offset
            if src.kind == POWER_LAW:
                for slot, ref in zip((4, 5), src.refs):
                    if ref not in fields:
                        raise RootsimError(f"soil field {name!r}: power law reads field {ref!r}, which is not "
                                           f"defined (defined: {', '.join(names)})")
                    if any(s.kind == POWER_LAW for s in fields[ref]):
                        raise RootsimError(f"soil field {name!r}: power law reads field {ref!r}, which is itself "
                                           "a power law (allowed: fields given directly)")
                    i[slot] = names.index(ref)
            kinds.append(src.kind)
            modes.append(src.mode)
            params.append(p)
            ints.append(i)
            chunks.append(np.asarray(src.data, np.float64))
            offset += src.data.size
        first.append(len(kinds))
    kind_arr = np.asarray(kinds, np.int64).reshape(-1)
    mode_arr = np.asarray(modes, np.int64).reshape(-1)
    ints_arr = np.asarray(ints, np.int64).reshape(-1, _NI)
    first_arr = np.asarray(first, np.int64)
    params_arr = np.asarray(params, np.float64).reshape(-1, _NP)
    data = np.concatenate(chunks) if chunks else np.zeros(0)
    plan = field_plan(first_arr, kind_arr, mode_arr, ints_arr)
    compiled = CompiledFields(
        field_first=first_arr, kind=kind_arr, mode=mode_arr, params=np.ascontiguousarray(params_arr),
        ints=np.ascontiguousarray(ints_arr), data=np.ascontiguousarray(data, np.float64), plan=plan)
    return SoilFields(names=names, compiled=compiled)


def field_plan(field_first: np.ndarray, kind: np.ndarray, mode: np.ndarray, ints: np.ndarray) -> np.ndarray:
    """How the kernels evaluate each field (:attr:`CompiledFields.plan`).

    A field whose first source is a base source (constant, layers, depth table, grid) or a power law, applied
    with mode ``replace`` or ``add``, and whose other sources are patches, is evaluated by its first source's
    own code (a grid is a direct trilinear or cell look-up) followed by the patches; a power law's two fields
    must have that form themselves. Its plan is the first source's kind. Every other field (a patch or a
    ``multiply`` first, a power law after the first source, ...) has :data:`PLAN_GENERIC`: each source through
    the generic dispatch. Both give the same numbers (the same operations in the same order), which
    ``tests/test_soil_fields.py`` checks on random points for every source kind.

    Returns
    -------
    ndarray of int64, shape (n_fields,)
    """
    n_fields = field_first.size - 1

    def simple(f, allow_power):
        lo, hi = int(field_first[f]), int(field_first[f + 1])
        if hi == lo or mode[lo] not in (REPLACE, ADD):
            return False
        if not (kind[lo] in _BASE_KINDS or (allow_power and kind[lo] == POWER_LAW)):
            return False
        return all(kind[s] in _PATCH_KINDS for s in range(lo + 1, hi))

    plan = np.full(n_fields, PLAN_GENERIC, np.int64)
    for f in range(n_fields):
        if not simple(f, True):
            continue
        s = int(field_first[f])
        if kind[s] == POWER_LAW and not (simple(int(ints[s, 4]), False) and simple(int(ints[s, 5]), False)):
            continue
        plan[f] = kind[s]
    return plan


def field_value_range(compiled: CompiledFields, field_index: int) -> tuple:
    """Bounds ``(low, high)`` that every value of a field lies within, by interval arithmetic over its sources.

    A base source spans its values (a grid also its ``outside_value``; one that may not apply keeps what came
    before), a patch weighs its value between 0 and 1 into the running value by its mode, and a power law takes
    its extremes at the corners of its two fields' ranges (it is monotone in each). The bounds may be wider than
    the values a field takes, never narrower; ``inf`` where they cannot be bounded. The growth engine uses the
    upper bound to skip the look-ahead of :func:`rootsim.growth.soil.deflect_by_field` in soils that are never
    strong enough to deflect.
    """
    c = compiled

    def span(f, allow_power=True):
        low = high = 0.0
        for s in range(int(c.field_first[f]), int(c.field_first[f + 1])):
            kind, mode = int(c.kind[s]), int(c.mode[s])
            off = int(c.ints[s, 0])
            weight_one = True  # False: the weight lies anywhere in [0, 1] (or is 0 or 1)
            if kind == CONSTANT:
                values = [c.params[s, 0]]
            elif kind == LAYERS:
                n = int(c.ints[s, 1])
                values = c.data[off + n: off + 2 * n + 1]
            elif kind == DEPTH_TABLE:
                n = int(c.ints[s, 1])
                values = c.data[off + n: off + 2 * n]
            elif kind in (GRID_NODES, GRID_CELLS):
                n = int(c.ints[s, 1] * c.ints[s, 2] * c.ints[s, 3])
                values = list(c.data[off: off + n]) if n <= 16 else [c.data[off: off + n].min(),
                                                                      c.data[off: off + n].max()]
                if c.ints[s, 6] == OUTSIDE_VALUE:
                    values.append(c.params[s, 6])
                elif c.ints[s, 6] == OUTSIDE_NONE:
                    weight_one = False
            elif kind == POWER_LAW:
                if not allow_power:
                    return -math.inf, math.inf
                theta_low, theta_high = span(int(c.ints[s, 4]), False)
                rho_low, rho_high = span(int(c.ints[s, 5]), False)
                thetas = [max(theta_low, MIN_WATER_CONTENT), max(theta_high, MIN_WATER_CONTENT)]
                values = [0.0] if rho_low <= 0 else []
                if rho_high > 0:
                    rhos = [max(rho_low, 0.0), rho_high]
                    with np.errstate(all="ignore"):
                        values += [c.params[s, 0] * t ** c.params[s, 1] * r ** c.params[s, 2]
                                   for t in thetas for r in rhos]
            else:  # a patch
                values = [c.params[s, 6]]
                weight_one = False
            source_low, source_high = float(np.min(values)), float(np.max(values))
            if not (np.isfinite(source_low) and np.isfinite(source_high)):
                return -math.inf, math.inf
            if mode == ADD:
                if weight_one:
                    low, high = low + source_low, high + source_high
                else:
                    low, high = low + min(source_low, 0.0), high + max(source_high, 0.0)
            elif mode == MULTIPLY:
                factors = (source_low, source_high) if weight_one else (min(source_low, 1.0), max(source_high, 1.0))
                products = [a * b for a in (low, high) for b in factors]
                low, high = min(products), max(products)
            elif weight_one:
                low, high = source_low, source_high
            else:
                low, high = min(low, source_low), max(high, source_high)
        return low, high

    low, high = span(int(field_index))
    return float(low), float(high)


class SharedGrid(NamedTuple):
    """Fields that are each one grid of nodes on the same layout, interleaved node by node (numba-friendly).

    Built by :func:`shared_grid`; the growth step reads them through :func:`shared_grid_at`, which locates a
    point's cell once for all of them and finds their corners in the same cache lines.

    Attributes
    ----------
    values : ndarray of float64, shape (n_nodes * n_columns,)
        Node ``(i * ny + j) * nz + k`` holds its value of column c at ``node * n_columns + c`` (empty: no shared
        grid).
    column : ndarray of int64, shape (n_fields,)
        Column of each field of the soil (-1: not in the shared grid).
    geometry : ndarray of float64, shape (9,)
        Origin (x, y, z) and spacing (x, y, z), cm, and the inverse spacings, 1/cm.
    shape : ndarray of int64, shape (4,)
        nx, ny, nz and the outside rule (:data:`CLAMP`, :data:`OUTSIDE_VALUE`, :data:`OUTSIDE_NONE`).
    outside : ndarray of float64, shape (n_columns,)
        Value of each column outside the grid (rule :data:`OUTSIDE_VALUE`).
    """

    values: np.ndarray
    column: np.ndarray
    geometry: np.ndarray
    shape: np.ndarray
    outside: np.ndarray


def shared_grid(compiled: CompiledFields, field_indices) -> SharedGrid:
    """The fields ``field_indices`` as one :class:`SharedGrid`, when every one is a single grid of nodes (mode
    ``replace`` or ``add``, no patches) on one layout (shape, origin, spacing, outside rule); otherwise an empty
    one (``values.size == 0``). Values read through it equal :func:`planned_value_and_gradient`'s exactly
    (the same operations in the same order)."""
    n_fields = compiled.field_first.size - 1
    column = np.full(max(n_fields, 1), -1, np.int64)
    empty = SharedGrid(np.zeros(0), column, np.zeros(9), np.zeros(4, np.int64), np.zeros(0))
    wanted = sorted({int(f) for f in field_indices if int(f) >= 0})
    if not wanted:
        return empty
    key = None
    for f in wanted:
        s = int(compiled.field_first[f])
        if int(compiled.field_first[f + 1]) - s != 1 or int(compiled.kind[s]) != GRID_NODES \
                or int(compiled.mode[s]) not in (REPLACE, ADD):
            return empty
        layout = (tuple(int(v) for v in compiled.ints[s, 1:4]), int(compiled.ints[s, 6]),
                  tuple(float(v) for v in compiled.params[s, :6])
                  + tuple(float(v) for v in compiled.params[s, 7:10]))
        if key is not None and layout != key:
            return empty
        key = layout
    (nx, ny, nz), rule, geometry = key
    n_nodes = nx * ny * nz
    values = np.empty((n_nodes, len(wanted)))  # interleaved: a node's columns side by side
    outside = np.empty(len(wanted))
    for c, f in enumerate(wanted):
        s = int(compiled.field_first[f])
        off = int(compiled.ints[s, 0])
        values[:, c] = compiled.data[off:off + n_nodes]
        outside[c] = compiled.params[s, 6]
        column[f] = c
    return SharedGrid(values.reshape(-1), column, np.asarray(geometry, np.float64),
                      np.array([nx, ny, nz, rule], np.int64), outside)


# -- kernels ---------------------------------------------------------------------------------------

#: Options of the per-point kernels the growth step calls: not inlined (inlined, their array arguments would be
#: reference-counted at every call, which costs more than the look-up), no reference counting of the arrays they
#: read, IEEE division (no divisor here can be zero: spacings, table steps and edge widths are > 0).
_POINT_KERNEL = {"cache": True, "error_model": "numpy", "_nrt": False}


@njit(cache=True, inline="always")
def _edge_weight(dist, edge):
    """Weight of a patch and d(weight)/d(distance) at ``dist`` cm outside it."""
    if dist <= 0.0:
        return 1.0, 0.0
    if edge <= 0.0 or dist >= edge:
        return 0.0, 0.0
    return 1.0 - dist / edge, -1.0 / edge


@njit(cache=True, inline="always")
def _axis_cell(u, n, at_cells, clamp):
    """Lower index, fraction and inside flag along one axis; ``u`` is the coordinate in units of the spacing."""
    inside = True
    if at_cells:
        if u < 0.0 or u >= n:
            inside = False
            if not clamp:
                return 0, 0.0, False
            u = min(max(u, 0.0), n - 1.0)
        k = int(math.floor(u))
        if k > n - 1:
            k = n - 1
        return k, 0.0, inside
    if u < 0.0 or u > n - 1.0:
        inside = False
        if not clamp:
            return 0, 0.0, False
        u = min(max(u, 0.0), n - 1.0)
    if n == 1:
        return 0, 0.0, inside
    k = int(math.floor(u))
    if k > n - 2:
        k = n - 2
    return k, u - k, inside


@njit(cache=True, inline="always")
def _grid_cell(nx, ny, nz, rule, cells, ox, oy, oz, hx, hy, hz, ix, iy, iz, x, y, z):
    """Cell of a grid at one point: (i, j, k, fx, fy, fz, in_x, in_y, in_z) (see :func:`_axis_cell`).

    Node grids scale by the inverse spacings ``ix, iy, iz`` (a product, not a division: the interpolant is
    continuous across cell faces, so the rounding of the product cannot matter); cell grids divide, so that a
    point on a cell face falls in the cell the module text states.
    """
    clamp = rule == CLAMP
    if cells:
        u, v, w = (x - ox) / hx, (y - oy) / hy, (z - oz) / hz
    else:
        u, v, w = (x - ox) * ix, (y - oy) * iy, (z - oz) * iz
    i, fx, in_x = _axis_cell(u, nx, cells, clamp)
    j, fy, in_y = _axis_cell(v, ny, cells, clamp)
    k, fz, in_z = _axis_cell(w, nz, cells, clamp)
    return i, j, k, fx, fy, fz, in_x, in_y, in_z


@njit(cache=True, inline="always")
def _trilinear(data, base, step_x, step_y, step_z, fx, fy, fz):
    """Trilinear value and its unscaled derivatives (per grid spacing) from the corners ``data[base]``,
    ``data[base + step_x]``, ... (``step_*`` is the index step to the next node along an axis, 0 for an axis with
    one node)."""
    v000 = data[base]
    v100 = data[base + step_x]
    v010 = data[base + step_y]
    v110 = data[base + step_x + step_y]
    v001 = data[base + step_z]
    v101 = data[base + step_x + step_z]
    v011 = data[base + step_y + step_z]
    v111 = data[base + step_x + step_y + step_z]
    # interpolate along x, then y, then z
    a00 = v000 + fx * (v100 - v000)
    a10 = v010 + fx * (v110 - v010)
    a01 = v001 + fx * (v101 - v001)
    a11 = v011 + fx * (v111 - v011)
    b0 = a00 + fy * (a10 - a00)
    b1 = a01 + fy * (a11 - a01)
    value = b0 + fz * (b1 - b0)
    # derivatives of the trilinear interpolant
    dx0 = (v100 - v000) + fy * ((v110 - v010) - (v100 - v000))
    dx1 = (v101 - v001) + fy * ((v111 - v011) - (v101 - v001))
    return value, dx0 + fz * (dx1 - dx0), (a10 - a00) + fz * ((a11 - a01) - (a10 - a00)), b1 - b0


@njit(cache=True, inline="always")
def _grid(data, off, nx, ny, nz, rule, cells, ox, oy, oz, hx, hy, hz, ix, iy, iz, outside_value, x, y, z):
    """(weight, value, gx, gy, gz) of a grid source (scalar arguments: cheap to call per point)."""
    i, j, k, fx, fy, fz, in_x, in_y, in_z = _grid_cell(nx, ny, nz, rule, cells, ox, oy, oz, hx, hy, hz, ix, iy, iz,
                                                       x, y, z)
    inside = in_x and in_y and in_z
    if not inside and rule == OUTSIDE_NONE:
        return 0.0, 0.0, 0.0, 0.0, 0.0
    if not inside and rule == OUTSIDE_VALUE:
        return 1.0, outside_value, 0.0, 0.0, 0.0
    syz = ny * nz
    if cells:
        return 1.0, data[off + i * syz + j * nz + k], 0.0, 0.0, 0.0
    value, dx, dy, dz = _trilinear(data, off + i * syz + j * nz + k, syz if nx > 1 else 0, nz if ny > 1 else 0,
                                   1 if nz > 1 else 0, fx, fy, fz)
    # zero along an axis that is clamped or has one node
    gx = dx * ix if (in_x and nx > 1) else 0.0
    gy = dy * iy if (in_y and ny > 1) else 0.0
    gz = dz * iz if (in_z and nz > 1) else 0.0
    return 1.0, value, gx, gy, gz


@njit(cache=True, inline="always")
def _layers(data, off, n, depth):
    """Value of a layered source at ``depth`` (interval i is (edges[i-1], edges[i]])."""
    lo = 0
    hi = n
    while lo < hi:  # number of edges strictly above ``depth`` (searchsorted, side="left")
        mid = (lo + hi) // 2
        if data[off + mid] < depth:
            lo = mid + 1
        else:
            hi = mid
    return data[off + n + lo]


@njit(cache=True, inline="always")
def _depth_table(data, off, n, depth):
    """Value and d(value)/dz of a depth table."""
    if depth <= data[off]:
        return data[off + n], 0.0
    if depth >= data[off + n - 1]:
        return data[off + 2 * n - 1], 0.0
    lo = 0
    hi = n - 1
    while hi - lo > 1:
        mid = (lo + hi) // 2
        if data[off + mid] <= depth:
            lo = mid
        else:
            hi = mid
    d0 = data[off + lo]
    d1 = data[off + lo + 1]
    v0 = data[off + n + lo]
    v1 = data[off + n + lo + 1]
    slope = (v1 - v0) / (d1 - d0)  # per cm of depth; z = -depth
    return v0 + slope * (depth - d0), -slope


@njit(cache=True)
def _box(x, y, z, cx, cy, cz, hx, hy, hz, edge):
    """Weight and its gradient of a box patch (centre, half sizes, edge width)."""
    ox = max(abs(x - cx) - hx, 0.0)
    oy = max(abs(y - cy) - hy, 0.0)
    oz = max(abs(z - cz) - hz, 0.0)
    dist = math.sqrt(ox * ox + oy * oy + oz * oz)
    w, dw = _edge_weight(dist, edge)
    if dw == 0.0:
        return w, 0.0, 0.0, 0.0
    sx = 1.0 if x >= cx else -1.0
    sy = 1.0 if y >= cy else -1.0
    sz = 1.0 if z >= cz else -1.0
    return w, dw * sx * ox / dist, dw * sy * oy / dist, dw * sz * oz / dist


@njit(cache=True)
def _sphere(x, y, z, cx, cy, cz, radius, edge):
    """Weight and its gradient of a sphere patch."""
    rx = x - cx
    ry = y - cy
    rz = z - cz
    rho = math.sqrt(rx * rx + ry * ry + rz * rz)
    w, dw = _edge_weight(rho - radius, edge)
    if dw == 0.0:
        return w, 0.0, 0.0, 0.0
    return w, dw * rx / rho, dw * ry / rho, dw * rz / rho


@njit(cache=True)
def _cylinder(x, y, z, sx, sy, sz, ux, uy, uz, length, radius, edge):
    """Weight and its gradient of a cylinder patch (start, unit axis, length, radius, edge width)."""
    rx = x - sx
    ry = y - sy
    rz = z - sz
    t = rx * ux + ry * uy + rz * uz
    px = rx - t * ux
    py = ry - t * uy
    pz = rz - t * uz
    rho = math.sqrt(px * px + py * py + pz * pz)
    radial = max(rho - radius, 0.0)
    if t < 0.0:
        axial = -t
        sign = -1.0
    elif t > length:
        axial = t - length
        sign = 1.0
    else:
        axial = 0.0
        sign = 0.0
    dist = math.sqrt(radial * radial + axial * axial)
    w, dw = _edge_weight(dist, edge)
    if dw == 0.0:
        return w, 0.0, 0.0, 0.0
    gx = (radial * px / rho if rho > 0 else 0.0) + axial * sign * ux
    gy = (radial * py / rho if rho > 0 else 0.0) + axial * sign * uy
    gz = (radial * pz / rho if rho > 0 else 0.0) + axial * sign * uz
    return w, dw * gx / dist, dw * gy / dist, dw * gz / dist


@njit(cache=True, inline="always")
def _patch(kinds, params, s, x, y, z):
    """(w, wgx, wgy, wgz): weight of patch source ``s`` and its gradient at one point (0 for other kinds)."""
    kind = kinds[s]
    if kind == BOX:
        return _box(x, y, z, params[s, 0], params[s, 1], params[s, 2], params[s, 3], params[s, 4], params[s, 5],
                    params[s, 7])
    if kind == SPHERE:
        return _sphere(x, y, z, params[s, 0], params[s, 1], params[s, 2], params[s, 3], params[s, 7])
    if kind == CYLINDER:
        return _cylinder(x, y, z, params[s, 0], params[s, 1], params[s, 2], params[s, 3], params[s, 4],
                         params[s, 5], params[s, 8], params[s, 9], params[s, 7])
    return 0.0, 0.0, 0.0, 0.0


@njit(cache=True, inline="always")
def _base(kinds, params, ints, data, s, x, y, z):
    """(w, value, gx, gy, gz) of base source ``s`` (constant, layers, depth table, grid) at one point."""
    kind = kinds[s]
    if kind == GRID_NODES or kind == GRID_CELLS:
        return _grid(data, ints[s, 0], ints[s, 1], ints[s, 2], ints[s, 3], ints[s, 6], kind == GRID_CELLS,
                     params[s, 0], params[s, 1], params[s, 2], params[s, 3], params[s, 4], params[s, 5],
                     params[s, 7], params[s, 8], params[s, 9], params[s, 6], x, y, z)
    if kind == LAYERS:
        return 1.0, _layers(data, ints[s, 0], ints[s, 1], -z), 0.0, 0.0, 0.0
    if kind == DEPTH_TABLE:
        v, gz = _depth_table(data, ints[s, 0], ints[s, 1], -z)
        return 1.0, v, 0.0, 0.0, gz
    return 1.0, params[s, 0], 0.0, 0.0, 0.0


@njit(cache=True, inline="always")
def _source(kinds, params, ints, data, s, x, y, z):
    """(w, value, gx, gy, gz, wgx, wgy, wgz) of source ``s`` at one point (power laws excluded)."""
    kind = kinds[s]
    if kind == BOX or kind == SPHERE or kind == CYLINDER:
        w, wgx, wgy, wgz = _patch(kinds, params, s, x, y, z)
        return w, params[s, 6], 0.0, 0.0, 0.0, wgx, wgy, wgz
    if kind == POWER_LAW:
        return 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0
    w, v, gx, gy, gz = _base(kinds, params, ints, data, s, x, y, z)
    return w, v, gx, gy, gz, 0.0, 0.0, 0.0


@njit(cache=True, inline="always")
def _apply(mode, v, gx, gy, gz, w, s, sgx, sgy, sgz, wgx, wgy, wgz):
    """Combine the running value/gradient with one source (see the module docstring)."""
    if mode == ADD:
        return v + w * s, gx + w * sgx + s * wgx, gy + w * sgy + s * wgy, gz + w * sgz + s * wgz
    if mode == MULTIPLY:
        m = 1.0 - w + w * s
        return (v * m, gx * m + v * (w * sgx + (s - 1.0) * wgx), gy * m + v * (w * sgy + (s - 1.0) * wgy),
                gz * m + v * (w * sgz + (s - 1.0) * wgz))
    return ((1.0 - w) * v + w * s, (1.0 - w) * gx + w * sgx + (s - v) * wgx,
            (1.0 - w) * gy + w * sgy + (s - v) * wgy, (1.0 - w) * gz + w * sgz + (s - v) * wgz)


@njit(cache=True, inline="always")
def _power_law(params, s, theta, tx, ty, tz, rho, rx, ry, rz):
    """Value and gradient of power-law source ``s`` from its two fields' values and gradients."""
    if theta < MIN_WATER_CONTENT:
        theta = MIN_WATER_CONTENT
        tx = 0.0
        ty = 0.0
        tz = 0.0
    if rho <= 0.0:
        return 0.0, 0.0, 0.0, 0.0
    sv = params[s, 0] * theta ** params[s, 1] * rho ** params[s, 2]
    return (sv, sv * (params[s, 1] * tx / theta + params[s, 2] * rx / rho),
            sv * (params[s, 1] * ty / theta + params[s, 2] * ry / rho),
            sv * (params[s, 1] * tz / theta + params[s, 2] * rz / rho))


@njit(**_POINT_KERNEL)
def _plain(field_first, kinds, modes, params, ints, data, f, x, y, z):
    """Value and gradient of a field without power-law sources."""
    v = 0.0
    gx = 0.0
    gy = 0.0
    gz = 0.0
    for s in range(field_first[f], field_first[f + 1]):
        if kinds[s] == POWER_LAW:
            continue
        w, sv, sgx, sgy, sgz, wgx, wgy, wgz = _source(kinds, params, ints, data, s, x, y, z)
        v, gx, gy, gz = _apply(modes[s], v, gx, gy, gz, w, sv, sgx, sgy, sgz, wgx, wgy, wgz)
    return v, gx, gy, gz


@njit(**_POINT_KERNEL)
def _evaluate(field_first, kinds, modes, params, ints, data, f, x, y, z):
    """Value and gradient (d/dx, d/dy, d/dz per cm) of field ``f`` at one point: every source in turn through
    the generic dispatch (the reference of the planned evaluation, and its fallback)."""
    v = 0.0
    gx = 0.0
    gy = 0.0
    gz = 0.0
    for s in range(field_first[f], field_first[f + 1]):
        if kinds[s] == POWER_LAW:
            theta, tx, ty, tz = _plain(field_first, kinds, modes, params, ints, data, ints[s, 4], x, y, z)
            rho, rx, ry, rz = _plain(field_first, kinds, modes, params, ints, data, ints[s, 5], x, y, z)
            sv, sgx, sgy, sgz = _power_law(params, s, theta, tx, ty, tz, rho, rx, ry, rz)
            v, gx, gy, gz = _apply(modes[s], v, gx, gy, gz, 1.0, sv, sgx, sgy, sgz, 0.0, 0.0, 0.0)
        else:
            w, sv, sgx, sgy, sgz, wgx, wgy, wgz = _source(kinds, params, ints, data, s, x, y, z)
            v, gx, gy, gz = _apply(modes[s], v, gx, gy, gz, w, sv, sgx, sgy, sgz, wgx, wgy, wgz)
    return v, gx, gy, gz


@njit(cache=True, inline="always")
def _base_and_patches(field_first, kinds, modes, params, ints, data, f, x, y, z):
    """Value and gradient of a field planned as one base source followed by patches (:func:`field_plan`)."""
    s = field_first[f]
    w, sv, sgx, sgy, sgz = _base(kinds, params, ints, data, s, x, y, z)
    v, gx, gy, gz = _apply(modes[s], 0.0, 0.0, 0.0, 0.0, w, sv, sgx, sgy, sgz, 0.0, 0.0, 0.0)
    for p in range(s + 1, field_first[f + 1]):
        w, wgx, wgy, wgz = _patch(kinds, params, p, x, y, z)
        v, gx, gy, gz = _apply(modes[p], v, gx, gy, gz, w, params[p, 6], 0.0, 0.0, 0.0, wgx, wgy, wgz)
    return v, gx, gy, gz


@njit(**_POINT_KERNEL)
def _planned_power_law(field_first, kinds, modes, params, ints, data, f, x, y, z):
    """Value and gradient of a field planned as a power law of two base-and-patches fields, then patches."""
    s = field_first[f]
    theta, tx, ty, tz = _base_and_patches(field_first, kinds, modes, params, ints, data, ints[s, 4], x, y, z)
    rho, rx, ry, rz = _base_and_patches(field_first, kinds, modes, params, ints, data, ints[s, 5], x, y, z)
    sv, sgx, sgy, sgz = _power_law(params, s, theta, tx, ty, tz, rho, rx, ry, rz)
    v, gx, gy, gz = _apply(modes[s], 0.0, 0.0, 0.0, 0.0, 1.0, sv, sgx, sgy, sgz, 0.0, 0.0, 0.0)
    for p in range(s + 1, field_first[f + 1]):
        w, wgx, wgy, wgz = _patch(kinds, params, p, x, y, z)
        v, gx, gy, gz = _apply(modes[p], v, gx, gy, gz, w, params[p, 6], 0.0, 0.0, 0.0, wgx, wgy, wgz)
    return v, gx, gy, gz


@njit(cache=True, inline="always")
def planned_value_and_gradient(c, f, x, y, z):
    """``(value, d/dx, d/dy, d/dz)`` of field ``f`` by its plan (:func:`field_plan`): the same numbers as the
    generic evaluation, with the common base-source fields read by their own code.

    Inlined into its caller: meant for kernels compiled without reference counting (``_nrt=False``), such as
    :func:`value_at` or :func:`rootsim.growth.soil.soil_at_tip`; inlined into a reference-counted function its
    array reads would be counted at every call.
    """
    plan = c.plan[f]
    if plan == PLAN_GENERIC:
        return _evaluate(c.field_first, c.kind, c.mode, c.params, c.ints, c.data, f, x, y, z)
    if plan == POWER_LAW:
        return _planned_power_law(c.field_first, c.kind, c.mode, c.params, c.ints, c.data, f, x, y, z)
    return _base_and_patches(c.field_first, c.kind, c.mode, c.params, c.ints, c.data, f, x, y, z)


@njit(cache=True, inline="always")
def _shared_column(g, c, i, j, k, fx, fy, fz, inside, in_x, in_y, in_z):
    """Value and gradient of column ``c`` of a shared grid at a located point (as :func:`_grid`)."""
    rule = g.shape[3]
    if not inside and rule == OUTSIDE_NONE:
        return 0.0, 0.0, 0.0, 0.0
    if not inside and rule == OUTSIDE_VALUE:
        return g.outside[c], 0.0, 0.0, 0.0
    nx, ny, nz = g.shape[0], g.shape[1], g.shape[2]
    m = g.outside.size
    syz = ny * nz
    value, dx, dy, dz = _trilinear(g.values, (i * syz + j * nz + k) * m + c, syz * m if nx > 1 else 0,
                                   nz * m if ny > 1 else 0, m if nz > 1 else 0, fx, fy, fz)
    gx = dx * g.geometry[6] if (in_x and nx > 1) else 0.0
    gy = dy * g.geometry[7] if (in_y and ny > 1) else 0.0
    gz = dz * g.geometry[8] if (in_z and nz > 1) else 0.0
    return value, gx, gy, gz


@njit(cache=True, inline="always")
def shared_grid_at(g, first, second, third, x, y, z):
    """Values of fields ``first`` and ``second`` and the value and gradient of field ``third`` (field indices,
    -1: none, 0 returned) of a :class:`SharedGrid` at (x, y, z) cm, the point's cell located once.

    Inlined into its caller: meant for kernels compiled without reference counting (see
    :func:`planned_value_and_gradient`).
    """
    i, j, k, fx, fy, fz, in_x, in_y, in_z = _grid_cell(g.shape[0], g.shape[1], g.shape[2], g.shape[3], False,
                                                       g.geometry[0], g.geometry[1], g.geometry[2],
                                                       g.geometry[3], g.geometry[4], g.geometry[5], g.geometry[6],
                                                       g.geometry[7], g.geometry[8], x, y, z)
    inside = in_x and in_y and in_z
    a = 0.0
    b = 0.0
    v, gx, gy, gz = 0.0, 0.0, 0.0, 0.0
    if first >= 0:
        a = _shared_column(g, g.column[first], i, j, k, fx, fy, fz, inside, in_x, in_y, in_z)[0]
    if second >= 0:
        b = _shared_column(g, g.column[second], i, j, k, fx, fy, fz, inside, in_x, in_y, in_z)[0]
    if third >= 0:
        v, gx, gy, gz = _shared_column(g, g.column[third], i, j, k, fx, fy, fz, inside, in_x, in_y, in_z)
    return a, b, v, gx, gy, gz


@njit(**_POINT_KERNEL)
def value_at(compiled, field_index, x, y, z):
    """Value of field ``field_index`` at the point (x, y, z) cm (scalar numba kernel)."""
    return planned_value_and_gradient(compiled, field_index, x, y, z)[0]


@njit(**_POINT_KERNEL)
def gradient_at(compiled, field_index, x, y, z):
    """Gradient ``(d/dx, d/dy, d/dz)`` per cm of field ``field_index`` at (x, y, z) (scalar numba kernel).

    Exact for the interpolants: trilinear grids (one-sided at nodes and cell faces), linear depth tables,
    patch edges of width ``edge_width_cm``; zero inside piecewise-constant parts (layers, cell grids,
    patch interiors) and outside clamped grid axes.
    """
    v, gx, gy, gz = planned_value_and_gradient(compiled, field_index, x, y, z)
    return gx, gy, gz


@njit(**_POINT_KERNEL)
def value_and_gradient_at(compiled, field_index, x, y, z):
    """``(value, d/dx, d/dy, d/dz)`` of field ``field_index`` at (x, y, z) in one pass (scalar numba kernel)."""
    return planned_value_and_gradient(compiled, field_index, x, y, z)


@njit(cache=True)
def _values_loop(c, f, x, y, z, out, reference):
    for i in range(x.size):
        if reference:
            out[i] = _evaluate(c.field_first, c.kind, c.mode, c.params, c.ints, c.data, f, x[i], y[i], z[i])[0]
        else:
            out[i] = value_at(c, f, x[i], y[i], z[i])


@njit(cache=True)
def _gradients_loop(c, f, x, y, z, out, reference):
    for i in range(x.size):
        if reference:
            v, gx, gy, gz = _evaluate(c.field_first, c.kind, c.mode, c.params, c.ints, c.data, f, x[i], y[i], z[i])
        else:
            gx, gy, gz = gradient_at(c, f, x[i], y[i], z[i])
        out[i, 0] = gx
        out[i, 1] = gy
        out[i, 2] = gz


def _points(x, y, z):
    bx, by, bz = np.broadcast_arrays(np.asarray(x, float), np.asarray(y, float), np.asarray(z, float))
    shape = bx.shape
    return shape, [np.ascontiguousarray(a.ravel()) for a in (bx, by, bz)]


def values_at(compiled: CompiledFields, field_index: int, x, y, z, *, reference: bool = False) -> np.ndarray:
    """Values of one field at many points.

    Parameters
    ----------
    compiled : CompiledFields
    field_index : int
    x, y, z : array_like
        Coordinates in cm (broadcast together).
    reference : bool, keyword-only
        Evaluate every source in turn through the generic dispatch instead of the field's plan (the same
        numbers, slower; the reference the plans are tested against).

    Returns
    -------
    ndarray of float64, the broadcast shape of x, y, z
    """
    shape, (px, py, pz) = _points(x, y, z)
    out = np.empty(px.size)
    _values_loop(compiled, int(field_index), px, py, pz, out, bool(reference))
    return out.reshape(shape)


def gradients_at(compiled: CompiledFields, field_index: int, x, y, z, *, reference: bool = False) -> np.ndarray:
    """Gradients of one field at many points: shape (*broadcast shape, 3), units of the field per cm
    (``reference``: as in :func:`values_at`)."""
    shape, (px, py, pz) = _points(x, y, z)
    out = np.empty((px.size, 3))
    _gradients_loop(compiled, int(field_index), px, py, pz, out, bool(reference))
    return out.reshape(shape + (3,))
