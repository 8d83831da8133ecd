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
    "gradients_at",
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
    """

    field_first: np.ndarray
    kind: np.ndarray
    mode: np.ndarray
    params: np.ndarray
    ints: np.ndarray
    data: np.ndarray


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
    params = origin + spacing + (float(outside_value),)
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
    compiled = CompiledFields(
        field_first=np.asarray(first, np.int64),
        kind=np.asarray(kinds, np.int64).reshape(-1),
        mode=np.asarray(modes, np.int64).reshape(-1),
        params=np.ascontiguousarray(np.asarray(params, np.float64).reshape(-1, _NP)),
        ints=np.ascontiguousarray(np.asarray(ints, np.int64).reshape(-1, _NI)),
        data=np.ascontiguousarray(np.concatenate(chunks) if chunks else np.zeros(0)),
    )
    return SoilFields(names=names, compiled=compiled)


# -- kernels ---------------------------------------------------------------------------------------

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


@njit(cache=True)
def _grid(data, off, nx, ny, nz, rule, cells, ox, oy, oz, hx, hy, hz, outside_value, x, y, z):
    """(weight, value, gx, gy, gz) of a grid source (scalar arguments: cheap to call per point)."""
    clamp = rule == CLAMP
    i, fx, in_x = _axis_cell((x - ox) / hx, nx, cells, clamp)
    j, fy, in_y = _axis_cell((y - oy) / hy, ny, cells, clamp)
    k, fz, in_z = _axis_cell((z - oz) / hz, nz, cells, clamp)
    inside = in_x and in_y and in_z
    if not inside and rule == OUTSIDE_NONE:
        return 0.0, 0.0, 0.0, 0.0, 0.0
    if not inside and rule == OUTSIDE_VALUE:
        return 1.0, outside_value, 0.0, 0.0, 0.0
    syz = ny * nz
    if cells:
        return 1.0, data[off + i * syz + j * nz + k], 0.0, 0.0, 0.0
    i1 = i + 1 if nx > 1 else i
    j1 = j + 1 if ny > 1 else j
    k1 = k + 1 if nz > 1 else k
    v000 = data[off + i * syz + j * nz + k]
    v100 = data[off + i1 * syz + j * nz + k]
    v010 = data[off + i * syz + j1 * nz + k]
    v110 = data[off + i1 * syz + j1 * nz + k]
    v001 = data[off + i * syz + j * nz + k1]
    v101 = data[off + i1 * syz + j * nz + k1]
    v011 = data[off + i * syz + j1 * nz + k1]
    v111 = data[off + i1 * syz + j1 * nz + k1]
    # interpolate along x, then y, then z
    a00 = v000 + fx * (v100 - v000)
    a10 = v010 + fx * (v110 - v010)
    a01 = v001 + fx * (v101 - v001)
    a11 = v011 + fx * (v111 - v011)
    b0 = a00 + fy * (a10 - a00)
    b1 = a01 + fy * (a11 - a01)
    value = b0 + fz * (b1 - b0)
    # derivatives of the trilinear interpolant (zero along an axis that is clamped or has one node)
    dx0 = (v100 - v000) + fy * ((v110 - v010) - (v100 - v000))
    dx1 = (v101 - v001) + fy * ((v111 - v011) - (v101 - v001))
    gx = (dx0 + fz * (dx1 - dx0)) / hx if (in_x and nx > 1) else 0.0
    gy = ((a10 - a00) + fz * ((a11 - a01) - (a10 - a00))) / hy if (in_y and ny > 1) else 0.0
    gz = (b1 - b0) / hz if (in_z and nz > 1) else 0.0
    return 1.0, value, gx, gy, gz


@njit(cache=True)
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


@njit(cache=True)
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
def _source(kinds, params, ints, data, s, x, y, z):
    """(w, value, gx, gy, gz, wgx, wgy, wgz) of source ``s`` at one point (power laws excluded)."""
    kind = kinds[s]
    if kind == CONSTANT:
        return 1.0, params[s, 0], 0.0, 0.0, 0.0, 0.0, 0.0, 0.0
    if kind == LAYERS:
        return 1.0, _layers(data, ints[s, 0], ints[s, 1], -z), 0.0, 0.0, 0.0, 0.0, 0.0, 0.0
    if kind == DEPTH_TABLE:
        v, gz = _depth_table(data, ints[s, 0], ints[s, 1], -z)
        return 1.0, v, 0.0, 0.0, gz, 0.0, 0.0, 0.0
    if kind == GRID_NODES or kind == GRID_CELLS:
        w, v, gx, gy, gz = _grid(data, ints[s, 0], ints[s, 1], ints[s, 2], ints[s, 3], ints[s, 6],
                                 kind == GRID_CELLS, params[s, 0], params[s, 1], params[s, 2], params[s, 3],
                                 params[s, 4], params[s, 5], params[s, 6], x, y, z)
        return w, v, gx, gy, gz, 0.0, 0.0, 0.0
    if kind == BOX:
        w, wgx, wgy, wgz = _box(x, y, z, params[s, 0], params[s, 1], params[s, 2], params[s, 3], params[s, 4],
                                params[s, 5], params[s, 7])
    elif kind == SPHERE:
        w, wgx, wgy, wgz = _sphere(x, y, z, params[s, 0], params[s, 1], params[s, 2], params[s, 3], params[s, 7])
    elif kind == CYLINDER:
        w, wgx, wgy, wgz = _cylinder(x, y, z, params[s, 0], params[s, 1], params[s, 2], params[s, 3], params[s, 4],
                                     params[s, 5], params[s, 8], params[s, 9], params[s, 7])
    else:
        return 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0
    return w, params[s, 6], 0.0, 0.0, 0.0, wgx, wgy, wgz


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


@njit(cache=True)
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


@njit(cache=True, inline="always")
def _evaluate(field_first, kinds, modes, params, ints, data, f, x, y, z):
    """Value and gradient (d/dx, d/dy, d/dz per cm) of field ``f`` at one point."""
    v = 0.0
    gx = 0.0
    gy = 0.0
    gz = 0.0
    for s in range(field_first[f], field_first[f + 1]):
        if kinds[s] == POWER_LAW:
            theta, tx, ty, tz = _plain(field_first, kinds, modes, params, ints, data, ints[s, 4], x, y, z)
            rho, rx, ry, rz = _plain(field_first, kinds, modes, params, ints, data, ints[s, 5], x, y, z)
            if theta < MIN_WATER_CONTENT:
                theta = MIN_WATER_CONTENT
                tx = 0.0
                ty = 0.0
                tz = 0.0
            if rho <= 0.0:
                sv = 0.0
                sgx = 0.0
                sgy = 0.0
                sgz = 0.0
            else:
                sv = params[s, 0] * theta ** params[s, 1] * rho ** params[s, 2]
                sgx = sv * (params[s, 1] * tx / theta + params[s, 2] * rx / rho)
                sgy = sv * (params[s, 1] * ty / theta + params[s, 2] * ry / rho)
                sgz = sv * (params[s, 1] * tz / theta + params[s, 2] * rz / rho)
            v, gx, gy, gz = _apply(modes[s], v, gx, gy, gz, 1.0, sv, sgx, sgy, sgz, 0.0, 0.0, 0.0)
        else:
            w, sv, sgx, sgy, sgz, wgx, wgy, wgz = _source(kinds, params, ints, data, s, x, y, z)
            v, gx, gy, gz = _apply(modes[s], v, gx, gy, gz, w, sv, sgx, sgy, sgz, wgx, wgy, wgz)
    return v, gx, gy, gz


@njit(cache=True, inline="always")
def value_at(compiled, field_index, x, y, z):
    """Value of field ``field_index`` at the point (x, y, z) cm (scalar numba kernel)."""
    c = compiled
    return _evaluate(c.field_first, c.kind, c.mode, c.params, c.ints, c.data, field_index, x, y, z)[0]


@njit(cache=True, inline="always")
def gradient_at(compiled, field_index, x, y, z):
    """Gradient ``(d/dx, d/dy, d/dz)`` per cm of field ``field_index`` at (x, y, z) (scalar numba kernel).

    Exact for the interpolants: trilinear grids (one-sided at nodes and cell faces), linear depth tables,
    patch edges of width ``edge_width_cm``; zero inside piecewise-constant parts (layers, cell grids,
    patch interiors) and outside clamped grid axes.
    """
    c = compiled
    v, gx, gy, gz = _evaluate(c.field_first, c.kind, c.mode, c.params, c.ints, c.data, field_index, x, y, z)
    return gx, gy, gz


@njit(cache=True)
def _values_loop(c, f, x, y, z, out):
    field_first, kinds, modes, params, ints, data = c.field_first, c.kind, c.mode, c.params, c.ints, c.data
    for i in range(x.size):
        out[i] = _evaluate(field_first, kinds, modes, params, ints, data, f, x[i], y[i], z[i])[0]


@njit(cache=True)
def _gradients_loop(c, f, x, y, z, out):
    field_first, kinds, modes, params, ints, data = c.field_first, c.kind, c.mode, c.params, c.ints, c.data
    for i in range(x.size):
        v, gx, gy, gz = _evaluate(field_first, kinds, modes, params, ints, data, f, x[i], y[i], z[i])
        out[i, 0] = gx
        out[i, 1] = gy
        out[i, 2] = gz


def _points(x, y, z):
    bx, by, bz = np.broadcast_arrays(np.asarray(x, float), np.asarray(y, float), np.asarray(z, float))
    shape = bx.shape
    return shape, [np.ascontiguousarray(a.ravel()) for a in (bx, by, bz)]


def values_at(compiled: CompiledFields, field_index: int, x, y, z) -> np.ndarray:
    """Values of one field at many points.

    Parameters
    ----------
    compiled : CompiledFields
    field_index : int
    x, y, z : array_like
        Coordinates in cm (broadcast together).

    Returns
    -------
    ndarray of float64, the broadcast shape of x, y, z
    """
    shape, (px, py, pz) = _points(x, y, z)
    out = np.empty(px.size)
    _values_loop(compiled, int(field_index), px, py, pz, out)
    return out.reshape(shape)


def gradients_at(compiled: CompiledFields, field_index: int, x, y, z) -> np.ndarray:
    """Gradients of one field at many points: shape (*broadcast shape, 3), units of the field per cm."""
    shape, (px, py, pz) = _points(x, y, z)
    out = np.empty((px.size, 3))
    _gradients_loop(compiled, int(field_index), px, py, pz, out)
    return out.reshape(shape + (3,))
