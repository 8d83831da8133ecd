"""From a parameter file's ``[soil]`` section to compiled soil fields and biopores.

Parameter-file points are ``[x_cm, y_cm, depth_cm]`` (depth positive downward); inside rootsim they become
``(x, y, z = -depth)``. Files named in the section (``.npy`` / ``.vti`` grids, depth-table CSVs) are relative to
the parameter file. Every problem is one line naming the parameter file, the key path and what is allowed.
"""

from __future__ import annotations

import re
from pathlib import Path

import numpy as np

from ..errors import RootsimError, SpecError
from .biopores import Biopores, biopores_from_list, draw_biopores
from .fields import (KNOWN_FIELDS, SoilFields, box_patch, compile_fields, constant_source, cylinder_patch,
                     depth_table_source, grid_source, layered_source, power_law_source, sphere_patch)

__all__ = ["soil_fields_from_spec", "biopores_from_spec", "check_spec_inputs", "soil_bounds_cm",
           "read_grid_file", "read_depth_table"]

#: Field names: lower-case words with underscores (units in the name), 4 to 64 characters.
FIELD_NAME = re.compile(r"^[a-z][a-z0-9_]{3,63}$")
#: Most biopores one run may draw.
MAX_BIOPORES = 1_000_000
#: Most values one grid file may hold.
MAX_GRID_VALUES = 20_000_000


class _Problem(Exception):
    def __init__(self, key: str, problem: str, allowed: str | None = None):
        super().__init__(key, problem, allowed)
        self.key, self.problem, self.allowed = key, problem, allowed


def _z(point) -> tuple:
    return (float(point[0]), float(point[1]), -float(point[2]))


def _resolve(spec, name: str) -> Path:
    from .thermal import resolve_input_path

    return resolve_input_path(spec.source, name)


def _check_range(values: np.ndarray, name: str, key: str, what: str) -> None:
    if name not in KNOWN_FIELDS:
        return
    low, high = KNOWN_FIELDS[name]
    bad = (values < low) | (values > high)
    if np.any(bad):
        shown = float(np.asarray(values)[bad].ravel()[0])
        raise _Problem(key, f"{what} holds {shown:g}, outside the range of {name}", f"{low:g} to {high:g}")


def read_grid_file(path: Path, *, array: str | None = None, field: str | None = None):
    """Read a grid file: ``.npy`` -> (values, None) or ``.vti`` -> (values [x, y, z], (origin, spacing, at)).

    A ``.vti`` holding several arrays gives the one named ``array``, else the one named ``field`` (the soil
    field being read, as ``rootsim soil --vti`` names them); with several arrays and neither, it is an error.

    Raises
    ------
    RootsimError
        Missing or unreadable file, a folder, not 3D or empty, NaN or infinite values, too large, an ambiguous
        ``.vti``.
    """
    if path.is_dir():
        raise RootsimError(f"{path}: is a folder (allowed: a .npy or .vti grid file)")
    if not path.is_file():
        raise RootsimError(f"{path}: file not found")
    if path.suffix.lower() == ".npy":
        with open(path, "rb") as handle:
            magic = handle.read(6)
        if magic != b"\x93NUMPY":
            raise RootsimError(f"{path}: not a .npy array file (allowed: a 3D array saved by numpy.save)")
        try:
            values = np.load(path, allow_pickle=False, mmap_mode="r")
        except (OSError, ValueError) as exc:
            raise RootsimError(f"{path}: cannot read as .npy ({' '.join(str(exc).split())[:100]})") from None
        if values.ndim != 3 or 0 in values.shape:
            raise RootsimError(f"{path}: grid has shape {values.shape} (allowed: a 3D array, axes x, y, depth, "
                               "at least one value along each)")
        if values.size > MAX_GRID_VALUES:
            raise RootsimError(f"{path}: grid has {values.size:,} values (allowed: at most {MAX_GRID_VALUES:,})")
        if not np.issubdtype(values.dtype, np.number) or np.issubdtype(values.dtype, np.complexfloating):
            raise RootsimError(f"{path}: grid values are {values.dtype} (allowed: real numbers)")
        values = np.asarray(values, dtype=np.float64)
        _check_finite(values, path)
        return values, None
    return _read_vti(path, array, field)


def _check_finite(values: np.ndarray, path) -> None:
    bad = ~np.isfinite(values)
    if bad.any():
        where = tuple(int(i) for i in np.argwhere(bad)[0])
        raise RootsimError(f"{path}: grid value at index {list(where)} is {values[where]} "
                           "(allowed: finite numbers everywhere)")


def _read_vti(path: Path, array: str | None, field: str | None = None):
    import vtk
    from vtk.util.numpy_support import vtk_to_numpy

    reader = vtk.vtkXMLImageDataReader()
    if not reader.CanReadFile(str(path)):
        raise RootsimError(f"{path}: not a VTK image data (.vti) file")
    reader.SetFileName(str(path))
    reader.Update()
    image = reader.GetOutput()
    dims = image.GetDimensions()
    found = None
    names = [data.GetArrayName(i) for data in (image.GetPointData(), image.GetCellData())
             for i in range(data.GetNumberOfArrays())]
    if array is None and len(names) > 1:
        if field not in names:
            raise RootsimError(f"{path}: holds {len(names)} arrays ({', '.join(repr(n) for n in names)}) and "
                               f"none is named {field!r} (allowed: name one with grid.array = \"NAME\")")
        array = field
    for data, at in ((image.GetPointData(), "nodes"), (image.GetCellData(), "cells")):
        for i in range(data.GetNumberOfArrays()):
            name = data.GetArrayName(i)
            if array is None or name == array:
                found = (data.GetArray(i), at)
                break
        if found:
            break
    if found is None:
        raise RootsimError(f"{path}: " + (f"no array named {array!r}" if array else "no data arrays")
                           + " (allowed: a point- or cell-data array)")
    vtk_array, at = found
    if vtk_array.GetNumberOfComponents() != 1:
        raise RootsimError(f"{path}: array {vtk_array.GetName()!r} has {vtk_array.GetNumberOfComponents()} "
                           "components (allowed: one scalar per point or cell)")
    shape = tuple(dims) if at == "nodes" else tuple(max(d - 1, 1) for d in dims)
    flat = vtk_to_numpy(vtk_array).astype(np.float64)
    if flat.size != int(np.prod(shape)):
        raise RootsimError(f"{path}: array has {flat.size} values for a {shape} grid")
    values = flat.reshape(shape[::-1]).transpose(2, 1, 0).copy()  # VTK: x varies fastest
    _check_finite(values, path)
    return values, (image.GetOrigin(), image.GetSpacing(), at)


def read_depth_table(path: Path, field: str):
    """Read a depth table CSV: ``depth_cm`` and one value column (``value`` or the field's name).

    Returns
    -------
    depth_cm, values : ndarray, shape (n_rows,)
    """
    import pandas as pd

    if path.is_dir():
        raise RootsimError(f"{path}: is a folder (allowed: a CSV file with columns depth_cm and value)")
    if not path.is_file():
        raise RootsimError(f"{path}: file not found")
    try:
        frame = pd.read_csv(path, comment="#", skipinitialspace=True)
    except (OSError, UnicodeDecodeError, pd.errors.ParserError, pd.errors.EmptyDataError) as exc:
        raise RootsimError(f"{path}: cannot read as CSV ({' '.join(str(exc).split())[:100]})") from None
    frame = frame.rename(columns=lambda c: str(c).strip())
    empty = frame.isna().all(axis=1).to_numpy()
    if empty.size and empty[-1]:  # rows of empty cells a spreadsheet leaves at the end (",,") are no depths
        frame = frame.iloc[: len(empty) - int(np.argmin(empty[::-1])) if not empty.all() else 0]
    value_column = field if field in frame.columns else "value"
    if "depth_cm" not in frame.columns or value_column not in frame.columns:
        raise RootsimError(f"{path}: columns are {', '.join(frame.columns)} "
                           f"(allowed: depth_cm and value, or depth_cm and {field})")
    depth = pd.to_numeric(frame["depth_cm"], errors="coerce").to_numpy(float)
    values = pd.to_numeric(frame[value_column], errors="coerce").to_numpy(float)
    if depth.size == 0:
        raise RootsimError(f"{path}: the table has no rows (allowed: one row per depth)")
    bad = ~(np.isfinite(depth) & np.isfinite(values))
    if bad.any():
        raise RootsimError(f"{path}: row {int(np.flatnonzero(bad)[0]) + 2}: missing or non-numeric value "
                           "(allowed: numbers in every row)")
    if depth.min() < 0:
        row = int(np.flatnonzero(depth < 0)[0]) + 2
        raise RootsimError(f"{path}: row {row}: depth_cm {depth[row - 2]:g} is negative (allowed: depths >= 0 cm "
                           "below the surface, strictly increasing)")
    if np.any(np.diff(depth) <= 0) or depth[0] < 0:
        row = int(np.flatnonzero(np.diff(depth) <= 0)[0]) + 3 if np.any(np.diff(depth) <= 0) else 2
        raise RootsimError(f"{path}: row {row}: depth_cm not increasing (allowed: depths >= 0, strictly increasing)")
    return depth, values


def _grid_source_from_spec(spec, name: str, grid, key: str):
    path = _resolve(spec, grid.file)
    try:
        values, header = read_grid_file(path, array=grid.array, field=name)
    except RootsimError as exc:
        raise _Problem(f"{key}.file", exc.cli_message()) from None
    _check_range(values, name, f"{key}.file", str(path))
    if header is None:  # .npy: axes x, y, depth downward; origin [x, y, depth]
        nz = values.shape[2]
        sx, sy, sd = grid.spacing_cm
        ox, oy, od = grid.origin_cm
        if grid.values_at == "nodes":
            z0 = -(od + (nz - 1) * sd)
        else:
            z0 = -(od + nz * sd)
        values = values[:, :, ::-1]
        origin, spacing, at = (ox, oy, z0), (sx, sy, sd), grid.values_at
    else:
        origin, spacing, at = header
        if min(spacing) <= 0:
            raise _Problem(f"{key}.file", f"{path}: spacing {tuple(spacing)} (allowed: > 0 along every axis)")
    return grid_source(values, origin, spacing, at=at, outside=grid.outside, outside_value=grid.outside_value)


def _field_sources(spec, name: str, field_spec) -> list:
    key = f"soil.fields.{name}"
    sources = []
    if field_spec.value is not None:
        _check_range(np.asarray([field_spec.value]), name, f"{key}.value", "value")
        sources.append(constant_source(field_spec.value))
    elif field_spec.layers is not None:
        vals = np.asarray([l.value for l in field_spec.layers], float)
        _check_range(vals, name, f"{key}.layers", "a layer")
        sources.append(layered_source([l.depth_top_cm for l in field_spec.layers],
                                      [l.depth_bottom_cm for l in field_spec.layers], vals,
                                      outside_value=field_spec.outside_value))
    elif field_spec.depth_table_file is not None:
        path = _resolve(spec, field_spec.depth_table_file)
        try:
            depth, vals = read_depth_table(path, name)
        except RootsimError as exc:
            raise _Problem(f"{key}.depth_table_file", exc.cli_message()) from None
        _check_range(vals, name, f"{key}.depth_table_file", str(path))
        sources.append(depth_table_source(depth, vals))
    elif field_spec.grid is not None:
        sources.append(_grid_source_from_spec(spec, name, field_spec.grid, f"{key}.grid"))
    else:
        ptf = field_spec.pedotransfer
        if name != "penetration_resistance_mpa":
            raise _Problem(f"{key}.pedotransfer", "a pedotransfer function gives penetration resistance only",
                           "soil.fields.penetration_resistance_mpa.pedotransfer")
        for ref_key, ref in (("water_content_field", ptf.water_content_field),
                             ("bulk_density_field", ptf.bulk_density_field)):
            if ref not in spec.soil.fields:
                raise _Problem(f"{key}.pedotransfer.{ref_key}", f"field {ref!r} is not defined",
                               f"a field of [soil.fields] ({', '.join(sorted(spec.soil.fields)) or 'none defined'})")
            if spec.soil.fields[ref].pedotransfer is not None:
                raise _Problem(f"{key}.pedotransfer.{ref_key}", f"field {ref!r} is itself derived",
                               "a field given by value, layers, table or grid")
        sources.append(power_law_source(ptf.coefficient_mpa, ptf.water_content_field, ptf.water_content_exponent,
                                        ptf.bulk_density_field, ptf.bulk_density_exponent))
    for j, patch in enumerate(field_spec.patches):
        pkey = f"{key}.patches[{j}]"
        if patch.mode != "add":
            _check_range(np.asarray([patch.value]), name, f"{pkey}.value", "value")
        try:
            if patch.shape == "box":
                sources.append(box_patch(_z(patch.center_cm), patch.size_cm, patch.value, mode=patch.mode,
                                         edge_width_cm=patch.edge_width_cm))
            elif patch.shape == "sphere":
                sources.append(sphere_patch(_z(patch.center_cm), patch.radius_cm, patch.value, mode=patch.mode,
                                            edge_width_cm=patch.edge_width_cm))
            else:
                sources.append(cylinder_patch(_z(patch.top_cm), _z(patch.bottom_cm), patch.radius_cm, patch.value,
                                              mode=patch.mode, edge_width_cm=patch.edge_width_cm))
        except RootsimError as exc:
            raise _Problem(pkey, exc.cli_message()) from None
    return sources


def _fields(spec, replace=None) -> SoilFields:
    soil = spec.soil
    for name in soil.fields:
        if not FIELD_NAME.match(name):
            raise _Problem(f"soil.fields.{name}", "field names are lower-case words joined by '_', 4-64 characters",
                           "e.g. nitrate_mg_per_kg; known: " + ", ".join(KNOWN_FIELDS))
    if soil.layers and "penetration_resistance_mpa" in soil.fields:
        raise _Problem("soil.fields.penetration_resistance_mpa",
                       "penetration resistance is given both here and as [[soil.layers]]", "one of the two")
    sources: dict[str, list] = {}
    if soil.layers:
        sources["penetration_resistance_mpa"] = [layered_source(
            [l.depth_top_cm for l in soil.layers], [l.depth_bottom_cm for l in soil.layers],
            [l.penetration_resistance_mpa for l in soil.layers])]
    for name, field_spec in soil.fields.items():
        sources[name] = _field_sources(spec, name, field_spec)
    sources.update(replace or {})
    return compile_fields(sources)


def soil_bounds_cm(spec, *, depth_cm: float | None = None) -> tuple:
    """(xmin, xmax, ymin, ymax, zmin, zmax) of the soil a spec's roots grow in (the stand footprint in a field)."""
    c, st = spec.container, spec.stand
    if c.kind == "pot":
        half_x = half_y = c.diameter_cm / 2
    elif c.kind == "rhizobox":
        half_x, half_y = c.width_cm / 2, c.thickness_cm / 2
    else:
        half_x, half_y = st.rows * st.row_spacing_cm / 2, st.plants_per_row * st.plant_spacing_cm / 2
    if depth_cm is None:
        depth_cm = c.depth_cm if c.depth_cm is not None else max(
            [100.0] + [l.depth_bottom_cm for l in spec.soil.layers]
            + ([spec.soil.biopores.depth_bottom_cm] if spec.soil.biopores is not None else []))
    return (-half_x, half_x, -half_y, half_y, -float(depth_cm), 0.0)


def _biopores(spec, *, seed: int | None = None) -> Biopores | None:
    bp = spec.soil.biopores
    if bp is None:
        return None
    tops = [_z(ch.top_cm) for ch in bp.channels]
    bottoms = [_z(ch.bottom_cm) for ch in bp.channels]
    radii = [ch.radius_cm for ch in bp.channels]
    if bp.density_per_m2 > 0:
        xmin, xmax, ymin, ymax, _, _ = soil_bounds_cm(spec)
        expected = bp.density_per_m2 * (xmax - xmin) * (ymax - ymin) / 1e4
        if expected > MAX_BIOPORES:
            raise _Problem("soil.biopores.density_per_m2", f"{bp.density_per_m2:g} per m² over "
                           f"{(xmax - xmin) * (ymax - ymin) / 1e4:g} m² gives about {expected:,.0f} biopores",
                           f"at most {MAX_BIOPORES:,}")

        def pair(value):
            return (value["low"], value["high"]) if isinstance(value, dict) else (value, value)

        drawn = draw_biopores(seed=spec.run.seed if seed is None else seed, density_per_m2=bp.density_per_m2,
                              x_range_cm=(xmin, xmax), y_range_cm=(ymin, ymax), depth_top_cm=bp.depth_top_cm,
                              depth_bottom_cm=bp.depth_bottom_cm, radius_cm=pair(bp.radius_cm),
                              inclination_from_vertical_deg=pair(bp.inclination_from_vertical_deg))
        tops += [tuple(p) for p in drawn.top_cm]
        bottoms += [tuple(p) for p in drawn.bottom_cm]
        radii += drawn.radius_cm.tolist()
    return biopores_from_list(np.asarray(tops, float).reshape(-1, 3), np.asarray(bottoms, float).reshape(-1, 3),
                              np.asarray(radii, float), resistance_mpa=bp.resistance_mpa)


def soil_fields_from_spec(spec, *, replace=None) -> SoilFields:
    """Compile a spec's soil fields (``[[soil.layers]]`` become ``penetration_resistance_mpa``).

    ``replace`` (field name -> list of :class:`~rootsim.soil.fields.FieldSource`) replaces those fields' sources
    or adds the fields (a coupled soil-water season supplies ``volumetric_water_content`` this way).

    Raises
    ------
    SpecError
        A file is missing or malformed, a value out of range, a referenced field undefined.
    """
    try:
        return _fields(spec, replace)
    except _Problem as exc:
        raise SpecError(spec.source, exc.key, exc.problem, exc.allowed) from None


def biopores_from_spec(spec, *, seed: int | None = None) -> Biopores | None:
    """The spec's biopores (explicit channels plus those drawn with ``seed``, default ``run.seed``), or None."""
    try:
        return _biopores(spec, seed=seed)
    except _Problem as exc:
        raise SpecError(spec.source, exc.key, exc.problem, exc.allowed) from None


def _check_field_references(spec) -> None:
    """Fields named by root classes (``field_tropism``, ``proliferation``) must be defined."""
    defined = set(spec.soil.fields) | ({"penetration_resistance_mpa"} if spec.soil.layers else set())
    for class_name, root_class in spec.root_classes.items():
        for key in ("field_tropism", "proliferation"):
            response = getattr(root_class, key)
            if response is not None and response.field not in defined:
                raise _Problem(f"root_classes.{class_name}.{key}.field", f"soil field {response.field!r} is not "
                               "defined", f"a field of [soil.fields] ({', '.join(sorted(defined)) or 'none defined'})")


def check_spec_inputs(spec):
    """``None`` when the soil, weather and development sections are usable, else ``(key, problem, allowed)``.

    Reads every file the sections name (grids, depth tables, the weather table) and checks field references.
    """
    try:
        _check_field_references(spec)
        if spec.soil.fields:
            _fields(spec)
        if spec.soil.biopores is not None:
            _biopores(spec)
        if spec.weather is not None or spec.development.clock == "thermal":
            from .thermal import weather_table_for_spec

            try:
                table = weather_table_for_spec(spec)
            except SpecError as exc:
                raise _Problem(exc.key_path, exc.problem, exc.allowed) from None
            if spec.development.clock == "thermal":
                if not table.has(spec.development.temperature_column):
                    raise _Problem("development.temperature_column",
                                   f"{table.source} has no column {spec.development.temperature_column!r}",
                                   ", ".join(sorted(table.columns)))
                try:
                    table.covering(0, spec.run.duration_days, what=f"a {spec.run.duration_days:g}-day run")
                except RootsimError as exc:
                    raise _Problem("weather.file", exc.cli_message()) from None
    except _Problem as exc:
        return exc.key, exc.problem, exc.allowed
    return None
