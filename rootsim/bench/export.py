"""Bench stage ``export``: VTK PolyData and tube-mesh export of the bench stand.

Entries
-------
vtk_export
    :func:`rootsim.formats.vtk.write_vtp` (polylines built from the segment table, then VTK's
    XML writer, appended raw binary). Floor: ``numpy.save`` of the same arrays (points,
    connectivity, offsets, every point and cell array), in the same run.
mesh_export
    :func:`rootsim.formats.mesh.write_mesh` to binary STL with the decimation a large stand
    calls for (``sides`` and ``merge_short_cm`` stated in the entry). Floor: building tube vertex
    and face arrays of the same size with numpy (a ring of ``sides`` vertices around both ends of
    as many segments as the mesh has tube segments, frames from each segment's direction, the
    side triangles) plus ``numpy.save`` of both.
mesh_export_full
    The same without decimation (8 sides, every segment its own piece), to binary PLY.
"""

from __future__ import annotations

import os
from pathlib import Path

import numpy as np

from . import make_entry, timed

NAME = "export"
ORDER = 70

DECIMATED = {"sides": 6, "merge_short_cm": 1.0}
FULL = {"sides": 8, "merge_short_cm": 0.0}


def _save_all(arrays, directory: Path) -> None:
    for i, values in enumerate(arrays):
        np.save(directory / f"floor_{i}.npy", values)


def _remove(directory: Path, pattern: str) -> None:
    for path in directory.glob(pattern):
        path.unlink()


def _polydata_arrays(system) -> list[np.ndarray]:
    from vtk.util.numpy_support import vtk_to_numpy

    from ..formats.vtk import polydata_from_segments

    poly = polydata_from_segments(system)
    arrays = [np.asarray(poly.points)]
    if poly.n_points:
        lines = poly.GetLines()
        arrays += [vtk_to_numpy(lines.GetConnectivityArray()), vtk_to_numpy(lines.GetOffsetsArray())]
    arrays += [np.asarray(poly.point_data[k]) for k in poly.point_data.keys()]
    arrays += [np.asarray(poly.cell_data[k]) for k in poly.cell_data.keys()]
    return arrays


def numpy_tube_arrays(system, n_segments: int, sides: int) -> tuple[np.ndarray, np.ndarray]:
    """Vertices (2 sides n, 3) and side faces (2 sides n, 3) of open tubes around the first ``n_segments``
    segments: a ring of ``sides`` vertices at each end, in the plane across the segment."""
    start = np.stack([system["x0"][:n_segments], system["y0"][:n_segments], system["z0"][:n_segments]], axis=1)
    end = np.stack([system["x1"][:n_segments], system["y1"][:n_segments], system["z1"][:n_segments]], axis=1)
    radius = np.asarray(system["radius_cm"][:n_segments], dtype=np.float64)
    axis = end - start
    axis /= np.maximum(np.linalg.norm(axis, axis=1), 1e-12)[:, None]
    side = np.cross(axis, [0.0, 0.0, 1.0])
    flat = np.linalg.norm(side, axis=1) < 1e-9
    side[flat] = [1.0, 0.0, 0.0]
    side /= np.linalg.norm(side, axis=1)[:, None]
    other = np.cross(axis, side)
    angle = 2 * np.pi * np.arange(sides) / sides
    ring = (np.cos(angle)[None, :, None] * side[:, None, :] + np.sin(angle)[None, :, None] * other[:, None, :]) \
        * radius[:, None, None]
    vertices = np.concatenate([start[:, None, :] + ring, end[:, None, :] + ring], axis=1).reshape(-1, 3)
    base = (2 * sides * np.arange(len(start)))[:, None]
    k = np.arange(sides)
    a, b = base + k, base + (k + 1) % sides
    c, d = a + sides, b + sides
    faces = np.concatenate([np.stack([a, b, d], axis=-1), np.stack([a, d, c], axis=-1)], axis=1).reshape(-1, 3)
    return vertices, faces


def _build_and_save_tubes(system, n_segments: int, sides: int, directory: Path) -> int:
    vertices, faces = numpy_tube_arrays(system, n_segments, sides)
    _save_all([vertices, faces], directory)
    return len(faces)


def _mesh_entry(system, workdir: Path, *, options: dict, suffix: str, repeat: int) -> dict:
    from ..formats.mesh import tube_mesh_arrays, write_mesh

    target = workdir / f"bench_mesh{suffix}"
    seconds, _ = timed(write_mesh, system, target, repeat=repeat, **options)
    size = os.path.getsize(target)
    target.unlink()
    arrays = tube_mesh_arrays(system, **options)
    n_tube = min(int(arrays.n_edges), len(system["x0"]))
    floor, floor_faces = timed(_build_and_save_tubes, system, n_tube, options["sides"], workdir, repeat=repeat)
    _remove(workdir, "floor_*.npy")
    return make_entry(
        segments=len(system["x0"]), seconds=seconds, floor_seconds=floor,
        floor="numpy: rings of the same sides around both ends of as many segments as the mesh has tube "
              "segments, side triangles, numpy.save of vertices and faces",
        floor_faces=int(floor_faces),
        format=suffix[1:], sides=options["sides"], merge_short_cm=options["merge_short_cm"],
        faces=int(len(arrays.faces)), vertices=int(len(arrays.vertices)), tube_pieces=int(arrays.n_pieces),
        tube_segments=int(arrays.n_edges), file_bytes=int(size),
        faces_per_second=float(len(arrays.faces) / seconds) if seconds > 0 else float("inf"),
    )


def run(system, *, workdir) -> dict[str, dict]:
    """Time VTK and tube-mesh export of ``system``; files go to ``workdir`` and are removed."""
    from ..formats.vtk import write_vtp

    workdir = Path(workdir)
    n = len(system["x0"])
    target = workdir / "bench.vtp"
    vtk_seconds, _ = timed(write_vtp, system, target, repeat=3)
    vtp_bytes = os.path.getsize(target)
    target.unlink()
    arrays = _polydata_arrays(system)
    floor_seconds, _ = timed(_save_all, arrays, workdir, repeat=3)
    _remove(workdir, "floor_*.npy")
    results = {
        "vtk_export": make_entry(
            segments=n, seconds=vtk_seconds, floor_seconds=floor_seconds,
            floor="numpy.save of the same arrays (points, connectivity, offsets, point and cell arrays), same run",
            file_bytes=int(vtp_bytes), array_bytes=int(sum(a.nbytes for a in arrays)), points=int(len(arrays[0])),
        ),
        "mesh_export": _mesh_entry(system, workdir, options=DECIMATED, suffix=".stl", repeat=2),
        "mesh_export_full": _mesh_entry(system, workdir, options=FULL, suffix=".ply", repeat=1),
    }
    return results
