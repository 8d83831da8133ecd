"""VTK output: root polylines as XML PolyData (.vtp) and the RLD voxel grid as XML ImageData (.vti).

Both are open formats read by any VTK-based viewer. Arrays carry units in
their names so a viewer can colour, filter and threshold without a legend.
"""

from __future__ import annotations

import json
import os
from pathlib import Path
from typing import Callable, NamedTuple

import numpy as np

from ..atomic import atomic_path
from ..errors import FormatError
from .polylines import polylines_from_segments, root_class_codes, run_duration_days

__all__ = ["polydata_from_segments", "polydata_from_arrays", "polyline_arrays", "write_vtp", "imagedata_from_rld", "write_vti", "SUFFIXES"]

SUFFIXES = (".vtp",)

#: Smallest radius (cm) in ``tube_radius_cm``, so a tube filter never gets a zero radius.
TUBE_RADIUS_FLOOR_CM = 1e-4


class Deferred(NamedTuple):
    """A point array computed only when it is written: its dtype, its length and a function making it."""

    dtype: np.dtype
    length: int
    make: Callable[[], np.ndarray]


def polyline_arrays(system, *, deferred: bool = False, point_arrays=None) -> dict:
    """The arrays of :func:`polydata_from_segments` as plain numpy arrays.

    Parameters
    ----------
    system : RootSystem
    deferred : bool
        Give the point data as :class:`Deferred` arrays, made one at a time by the writer
        (so that only one of them exists at once).
    point_arrays : iterable of str, optional
        Names of the point arrays to make (default all); e.g. a renderer needs only a few.

    Returns
    -------
    dict
        ``points`` (m, 3) float64 cm; ``offsets`` (p + 1,) int64, polyline ``i`` is points
        ``offsets[i]:offsets[i + 1]``; ``point_data`` and ``cell_data``, dicts of name to array;
        ``root_class_names`` list of str; ``metadata_json`` str. A system with connector segments
        (:mod:`rootsim.connectors`) is drawn with them, so laterals are joined to their parents, and
        gets a point array ``is_connector`` (uint8, 1 at the end point of a connector).
    """
    if hasattr(system, "with_connectors"):
        system = system.with_connectors()
    lines = polylines_from_segments(system)
    seg = lines.point_segment
    first = lines.first_segment
    counts = np.diff(lines.point_offsets)
    classes = system["root_class"]  # only the first segments' classes (a Categorical is not expanded)
    classes = classes.take(first) if hasattr(classes, "take") else np.asarray(classes)[first]
    codes, names = root_class_codes({"root_class": np.asarray(classes)})
    # Root attributes: one value per polyline (its first segment's), repeated over its points.
    per_root = {
        "order": np.asarray(system["order"])[first].astype(np.int32),
        "root_class_code": codes,
        "plant_id": np.asarray(system["plant_id"])[first].astype(np.int32),
        "root_id": np.asarray(system["root_id"])[first].astype(np.int64),
    }

    def gathered(name: str, dtype):
        return lambda: np.asarray(system[name], dtype=dtype)[seg]

    def repeated(values):
        return lambda: np.repeat(values, counts)

    makers = {
        "radius_cm": (np.float64, gathered("radius_cm", np.float64)),
        "tube_radius_cm": (np.float64, lambda: np.maximum(gathered("radius_cm", np.float64)(), TUBE_RADIUS_FLOOR_CM)),
    }
    makers.update({name: (values.dtype, repeated(values)) for name, values in per_root.items()})
    makers["segment_id"] = (np.int64, gathered("segment_id", np.int64))
    makers["birth_day"] = (np.float64, gathered("birth_day", np.float64))
    makers["age_days"] = (np.float64, lambda: run_duration_days(system) - gathered("birth_day", np.float64)())
    try:
        connector = system["is_connector"]
    except (KeyError, IndexError, TypeError):
        connector = None
    if connector is not None:
        makers["is_connector"] = (np.uint8, gathered("is_connector", np.uint8))
    columns = getattr(system, "columns", None)
    columns = set(columns) if columns is not None else set(system.keys()) if hasattr(system, "keys") else set()
    if "in_biopore" in columns:  # grown in a soil with biopores: 1 where the segment lies in a pore
        makers["in_biopore"] = (np.uint8, gathered("in_biopore", np.uint8))
    if "death_day" in columns:  # kept dead roots: the day the root died (+inf while alive)
        makers["death_day"] = (np.float64, gathered("death_day", np.float64))
    if point_arrays is not None:
        wanted = set(point_arrays)
        makers = {name: maker for name, maker in makers.items() if name in wanted}
    if deferred:
        point_data = {name: Deferred(np.dtype(dtype), len(seg), make) for name, (dtype, make) in makers.items()}
    else:
        point_data = {name: make() for name, (_, make) in makers.items()}
    meta = getattr(system, "metadata", None) or {}
    return {
        "points": lines.points, "offsets": lines.point_offsets, "point_data": point_data, "cell_data": per_root,
        "root_class_names": names, "metadata_json": json.dumps(meta, sort_keys=True, default=str),
    }


def _string_array(name: str, values):
    import vtk

    array = vtk.vtkStringArray()
    array.SetName(name)
    for value in values:
        array.InsertNextValue(str(value))
    return array


def polydata_from_segments(system, *, point_arrays=None):
    """Root system as a :class:`pyvista.PolyData` with one polyline per root and shared points.

    A root's consecutive segments share their end points; a lateral's polyline starts at its
    branch point on the parent segment. ``n`` segments in ``p`` polylines give ``n + p`` points.

    Parameters
    ----------
    system : RootSystem
        Segment table with metadata (``run.duration_days`` is used for ages if present,
        otherwise the latest ``birth_day``).
    point_arrays : iterable of str, optional
        Only these point arrays (default all of those listed below).

    Returns
    -------
    pyvista.PolyData
        Point arrays (point ``j >= 1`` of a polyline carries the segment ending there, point 0
        the first segment): ``radius_cm`` (float64), ``tube_radius_cm`` (radius with a floor of
        1e-4 cm; active scalars, ready for ``poly.tube(scalars="tube_radius_cm", absolute=True)``),
        ``segment_id`` (int64), ``birth_day`` and ``age_days`` (run duration minus birth day, days),
        and the root's ``order``, ``root_class_code``, ``plant_id`` (int32) and ``root_id`` (int64).
        Cell arrays, one value per polyline: ``order``, ``root_class_code``, ``plant_id``, ``root_id``.
        Field data: ``root_class_names`` (string array indexed by ``root_class_code``) and
        ``rootsim_metadata`` (the table metadata as JSON).
    """
    return polydata_from_arrays(polyline_arrays(system, point_arrays=point_arrays))


def polydata_from_arrays(arrays: dict):
    """The :class:`pyvista.PolyData` of :func:`polydata_from_segments` from :func:`polyline_arrays` output."""
    import pyvista as pv

    points = arrays["points"]
    if len(points):
        cells = pv.CellArray.from_arrays(arrays["offsets"], np.arange(len(points), dtype=np.int64), deep=True)
        poly = pv.PolyData(points, lines=cells)
        for name, values in arrays["point_data"].items():
            poly.point_data[name] = values
        for name, values in arrays["cell_data"].items():
            poly.cell_data[name] = values
        if "tube_radius_cm" in arrays["point_data"]:
            poly.set_active_scalars("tube_radius_cm", preference="point")
    else:
        poly = pv.PolyData()
    field = poly.GetFieldData()
    field.AddArray(_string_array("root_class_names", arrays["root_class_names"] or [""]))
    field.AddArray(_string_array("rootsim_metadata", [arrays["metadata_json"]]))
    return poly


_VTK_TYPES = {np.dtype("<f8"): "Float64", np.dtype("<f4"): "Float32", np.dtype("<i8"): "Int64",
              np.dtype("<i4"): "Int32", np.dtype("u1"): "UInt8"}


def _write_vtp_numpy(arrays: dict, path: Path) -> Path:
    """VTK XML PolyData, appended raw binary, written straight from numpy arrays.

    Layout of the VTK XML file formats (Kitware, "VTK File Formats", VTK User's Guide): an XML
    header whose ``DataArray`` elements give byte offsets into one ``<AppendedData
    encoding="raw">`` block that starts with ``_``; each array there is a UInt64 byte count
    followed by the little-endian values. String arrays are NUL-terminated UTF-8 strings.
    Line cells are ``connectivity`` (point ids) and ``offsets`` (end of each cell).
    """
    from xml.sax.saxutils import quoteattr

    n_points = len(arrays["points"])
    offsets = arrays["offsets"]
    n_lines = max(len(offsets) - 1, 0)
    blocks: list = []
    position = 0

    def size(block) -> int:
        if isinstance(block, Deferred):
            return block.length * block.dtype.itemsize
        return block.nbytes if isinstance(block, np.ndarray) else len(block)

    def add(values) -> int:
        nonlocal position
        start = position
        blocks.append(values)
        position += 8 + size(values)
        return start

    def data_array(name, values, components=1):
        if not isinstance(values, Deferred):
            values = np.ascontiguousarray(values, dtype=values.dtype.newbyteorder("<"))
        kind = _VTK_TYPES[values.dtype]
        comp = f' NumberOfComponents="{components}"' if components != 1 else ""
        return (f'<DataArray type="{kind}" Name={quoteattr(name)}{comp} format="appended" '
                f'offset="{add(values)}"/>')

    def string_array(name, values):
        data = b"".join(str(v).encode("utf-8") + b"\0" for v in values)
        return (f'<Array type="String" Name={quoteattr(name)} NumberOfTuples="{len(values)}" format="appended" '
                f'offset="{add(data)}"/>')

    field = [string_array("root_class_names", arrays["root_class_names"] or [""]),
             string_array("rootsim_metadata", [arrays["metadata_json"]])]
    if n_points:
        point = [data_array(k, v) for k, v in arrays["point_data"].items()]
        cell = [data_array(k, v) for k, v in arrays["cell_data"].items()]
    else:
        point, cell = [], []
    pts = data_array("Points", arrays["points"].reshape(-1, 3), components=3)
    conn = data_array("connectivity", Deferred(np.dtype(np.int64), n_points, lambda: np.arange(n_points, dtype=np.int64)))
    ends = data_array("offsets", np.asarray(offsets[1:], dtype=np.int64))
    nl = "\n        "
    scalars = ' Scalars="tube_radius_cm"' if n_points else ""
    header = (
        '<?xml version="1.0"?>\n'
        '<VTKFile type="PolyData" version="1.0" byte_order="LittleEndian" header_type="UInt64">\n'
        "  <PolyData>\n"
        f"    <FieldData>\n      {(nl[:-2]).join(field)}\n    </FieldData>\n"
        f'    <Piece NumberOfPoints="{n_points}" NumberOfVerts="0" NumberOfLines="{n_lines}" '
        'NumberOfStrips="0" NumberOfPolys="0">\n'
        f"      <PointData{scalars}>\n        {nl.join(point)}\n      </PointData>\n"
        f"      <CellData>\n        {nl.join(cell)}\n      </CellData>\n"
        f"      <Points>\n        {pts}\n      </Points>\n"
        f"      <Lines>\n        {conn}\n        {ends}\n      </Lines>\n"
        "    </Piece>\n  </PolyData>\n"
        '  <AppendedData encoding="raw">\n   _'
    )
    with atomic_path(path) as tmp, open(tmp, "wb") as fh:
        fh.write(header.encode("utf-8"))
        for block in blocks:
            nbytes = size(block)
            fh.write(np.uint64(nbytes).tobytes())
            if isinstance(block, Deferred):  # made now, written, freed before the next one
                values = np.ascontiguousarray(block.make(), dtype=block.dtype.newbyteorder("<"))
                if values.nbytes != nbytes:  # pragma: no cover - a maker disagreeing with its declared size
                    raise FormatError(f"{path}: internal error: array of {values.nbytes} bytes, declared {nbytes}")
                values.tofile(fh)
                del values
            elif isinstance(block, np.ndarray):
                block.tofile(fh)
            else:
                fh.write(block)
        fh.write(b"\n  </AppendedData>\n</VTKFile>\n")
    return path


def _write_xml(dataset, path: Path, *, writer_class: str, compression: str | None) -> Path:
    """Write a VTK dataset with an XML writer into ``path`` atomically (appended raw binary)."""
    import vtk

    writer = getattr(vtk, writer_class)()
    writer.SetInputData(dataset)
    writer.SetDataModeToAppended()
    writer.EncodeAppendedDataOff()
    if compression in (None, "none"):
        writer.SetCompressorTypeToNone()
    elif compression == "zlib":
        writer.SetCompressorTypeToZLib()
    elif compression == "lz4":
        writer.SetCompressorTypeToLZ4()
    else:
        raise FormatError(f"{path}: unknown VTK compression {compression!r} (allowed: none, zlib, lz4)")
    with atomic_path(path) as tmp:
        writer.SetFileName(str(tmp))
        if writer.Write() != 1:
            raise FormatError(f"{path}: VTK writer failed (disk full or not writable?)")
    return path


def write_vtp(system, path: str | os.PathLike, *, compression: str | None = None) -> Path:
    """Write the root polylines as VTK XML PolyData (.vtp), atomically.

    Parameters
    ----------
    system : RootSystem
    path : path-like
        Target file; an empty system gives a valid file with no points.
    compression : {None, "zlib", "lz4"}
        Compression of the binary arrays. ``None`` (default, fastest, largest) writes the
        arrays straight from numpy in the appended raw layout; otherwise VTK's own
        ``vtkXMLPolyDataWriter`` writes the :func:`polydata_from_segments` object.

    Returns
    -------
    pathlib.Path
    """
    path = Path(path)
    if compression in (None, "none"):
        return _write_vtp_numpy(polyline_arrays(system, deferred=True), path)
    return _write_xml(polydata_from_segments(system), path, writer_class="vtkXMLPolyDataWriter",
                      compression=compression)


def imagedata_from_rld(rld: np.ndarray, origin_cm, spacing_cm):
    """An RLD voxel grid as :class:`pyvista.ImageData` with one cell per voxel.

    Parameters
    ----------
    rld : ndarray, shape (nx, ny, nz)
        Root length density of each voxel, cm of root per cm³ of soil.
    origin_cm : sequence of 3 floats
        Lower corner of voxel (0, 0, 0), cm.
    spacing_cm : float or sequence of 3 floats
        Voxel edge lengths, cm.

    Returns
    -------
    pyvista.ImageData
        Cell array ``rld_cm_per_cm3`` (also as point array interpolated by VTK viewers on demand).
    """
    import pyvista as pv

    rld = np.asarray(rld, dtype=np.float64)
    if rld.ndim != 3:
        raise FormatError(f"RLD grid must be 3-D (nx, ny, nz), got shape {rld.shape}")
    spacing = np.broadcast_to(np.asarray(spacing_cm, dtype=np.float64), (3,))
    grid = pv.ImageData(dimensions=np.array(rld.shape) + 1, spacing=tuple(spacing),
                        origin=tuple(np.asarray(origin_cm, dtype=np.float64)))
    grid.cell_data["rld_cm_per_cm3"] = rld.ravel(order="F")
    return grid


def write_vti(system, path: str | os.PathLike, *, voxel_cm: float, bounds=None,
              compression: str | None = "zlib") -> Path:
    """Write the RLD voxel grid as VTK XML ImageData (.vti), atomically.

    Uses :func:`rootsim.analysis.rld_voxel_grid` for the densities.

    Parameters
    ----------
    system : RootSystem
    path : path-like
    voxel_cm : float or sequence of 3 floats
        Voxel edge length(s), cm (> 0).
    bounds : optional
        Passed to :func:`rootsim.analysis.rld_voxel_grid`.
    compression : {None, "zlib", "lz4"}
    """
    path = Path(path)
    try:
        voxel = np.asarray(voxel_cm, dtype=np.float64)
    except (TypeError, ValueError):
        voxel = np.full(1, np.nan)
    if voxel.shape not in ((), (3,)) or not np.all(np.isfinite(voxel)) or np.any(voxel <= 0):
        raise FormatError(f"{path}: voxel size {voxel_cm!r} cm is not allowed (need a number > 0, or three)")
    voxel = float(voxel) if voxel.shape == () else tuple(voxel.tolist())
    try:
        from ..analysis import rld_voxel_grid
    except ImportError:
        raise FormatError(f"{path}: the RLD voxel grid is not available in this version "
                          "(rootsim.analysis.rld_voxel_grid missing)") from None
    rld, origin, spacing = rld_voxel_grid(system, voxel_cm=voxel, bounds=bounds)
    return _write_xml(imagedata_from_rld(rld, origin, spacing), path, writer_class="vtkXMLImageDataWriter",
                      compression=compression)
