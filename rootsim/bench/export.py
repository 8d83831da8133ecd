"""Bench stage ``export``: VTK PolyData and tube-mesh export of the bench stand.

Entries
-------
vtk_export
    :func:`rootsim.formats.vtk.write_vtp` (polylines built from the segment table, then VTK's
    XML writer, appended raw binary). Floor: ``numpy.save`` of the same arrays (points,
    connectivity, offsets, every point and cell array), in the same run.
mesh_export
    :func:`rootsim.formats.mesh.write_mesh` to binary STL with the decimation a large stand
    calls for (``sides`` and ``merge_short_cm`` stated in the entry). Floor: ``numpy.save`` of
    the mesh's vertex and face arrays.
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


def _mesh_entry(system, workdir: Path, *, options: dict, suffix: str, repeat: int) -> dict:
    from ..formats.mesh import tube_mesh_arrays, write_mesh

    target = workdir / f"bench_mesh{suffix}"
    seconds, _ = timed(write_mesh, system, target, repeat=repeat, **options)
    size = os.path.getsize(target)
    target.unlink()
    arrays = tube_mesh_arrays(system, **options)
    floor, _ = timed(_save_all, [arrays.vertices, arrays.faces], workdir, repeat=repeat)
    _remove(workdir, "floor_*.npy")
    return make_entry(
        segments=len(system["x0"]), seconds=seconds, floor_seconds=floor,
        floor="numpy.save of the mesh's vertex (float64) and face (int64) arrays, same run",
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
