"""VTK output: root polylines as XML PolyData (.vtp) and the RLD voxel grid as XML ImageData (.vti).

Both are open formats read by ParaView, VisIt and any VTK-based viewer. Arrays carry units in
their names so a viewer can colour, filter and threshold without a legend.
"""

from __future__ import annotations

import json
import os
from pathlib import Path

import numpy as np

from ..atomic import atomic_path
from ..errors import FormatError
from .polylines import polylines_from_segments, root_class_codes, run_duration_days

__all__ = ["polydata_from_segments", "write_vtp", "imagedata_from_rld", "write_vti", "SUFFIXES"]

SUFFIXES = (".vtp",)

#: Smallest radius (cm) in ``tube_radius_cm``, so a tube filter never gets a zero radius.
TUBE_RADIUS_FLOOR_CM = 1e-4


def polydata_from_segments(system):
    """Root system as a :class:`pyvista.PolyData` with one polyline per root and shared points.

    A root's consecutive segments share their end points; a lateral's polyline starts at its
    branch point on the parent segment. ``n`` segments in ``p`` polylines give ``n + p`` points.

    Parameters
    ----------
    system : RootSystem
        Segment table with metadata (``run.duration_days`` is used for ages if present,
        otherwise the latest ``birth_day``).

    Returns
    -------
    pyvista.PolyData
        Point arrays (point ``j >= 1`` of a polyline carries the segment ending there, point 0
        the first segment): ``radius_cm`` (float64), ``tube_radius_cm`` (radius with a floor of
        1e-4 cm; active scalars, ready for ``poly.tube(scalars="tube_radius_cm", absolute=True)``),
        ``order``, ``root_class_code``, ``plant_id`` (int32), ``root_id``, ``segment_id`` (int64),
        ``birth_day`` and ``age_days`` (run duration minus birth day, days).
        Cell arrays, one value per polyline: ``order``, ``root_class_code``, ``plant_id``, ``root_id``.
        Field data: ``root_class_names`` (string array indexed by ``root_class_code``) and
        ``rootsim_metadata`` (the table metadata as JSON).
    """
    import pyvista as pv

    lines = polylines_from_segments(system)
    seg = lines.point_segment
    codes, names = root_class_codes(system)
    duration = run_duration_days(system)
    radius = np.asarray(system["radius_cm"], dtype=np.float64)
    birth = np.asarray(system["birth_day"], dtype=np.float64)
    n_points = len(lines.points)
    cells = pv.CellArray.from_arrays(lines.point_offsets, np.arange(n_points, dtype=np.int64), deep=True)
    poly = pv.PolyData(lines.points, lines=cells) if n_points else pv.PolyData()
    ints = {
        "order": np.asarray(system["order"]).astype(np.int32),
        "root_class_code": codes,
        "plant_id": np.asarray(system["plant_id"]).astype(np.int32),
        "root_id": np.asarray(system["root_id"]).astype(np.int64),
    }
    if n_points:
        point = poly.point_data
        point["radius_cm"] = radius[seg]
        point["tube_radius_cm"] = np.maximum(radius[seg], TUBE_RADIUS_FLOOR_CM)
        for name, values in ints.items():
            point[name] = values[seg]
        point["segment_id"] = np.asarray(system["segment_id"]).astype(np.int64)[seg]
        point["birth_day"] = birth[seg]
        point["age_days"] = duration - birth[seg]
        first = lines.first_segment
        for name, values in ints.items():
            poly.cell_data[name] = values[first]
        poly.set_active_scalars("tube_radius_cm", preference="point")
    poly.field_data["root_class_names"] = np.array(names if names else [""], dtype=str)
    meta = getattr(system, "metadata", None) or {}
    poly.field_data["rootsim_metadata"] = np.array([json.dumps(meta, sort_keys=True, default=str)])
    return poly


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
        Compression of the binary arrays (default none: fastest, largest).

    Returns
    -------
    pathlib.Path
    """
    return _write_xml(polydata_from_segments(system), Path(path), writer_class="vtkXMLPolyDataWriter",
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
