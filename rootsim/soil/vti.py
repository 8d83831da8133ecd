"""Soil fields as VTK image data (``.vti``): see roots against a plough pan, a patch or biopores.

The fields are sampled at the nodes of a regular grid (VTK point data, one array per field, plus
``biopore_index``: the biopore a node lies in, or -1), in rootsim's frame (cm, z up, soil surface at z = 0), so
the file overlays the ``.vtp`` roots written by ``rootsim export`` in any VTK viewer.
"""

from __future__ import annotations

import math
import os
from pathlib import Path

import numpy as np

from ..atomic import atomic_path
from ..errors import RootsimError
from ..limits import check_cell_count

__all__ = ["soil_grid_points", "write_soil_vti"]


def soil_grid_points(bounds_cm, voxel_cm: float):
    """Node coordinates of a grid covering ``bounds_cm`` = (xmin, xmax, ymin, ymax, zmin, zmax).

    Returns
    -------
    origin : tuple of 3 floats
    dims : tuple of 3 ints
        Nodes along x, y, z (the bounds are covered; the last node may lie up to one voxel beyond them).
    x, y, z : ndarray, shape (n_nodes,)
        Node coordinates in VTK order (x varies fastest).
    """
    if not (voxel_cm > 0 and math.isfinite(voxel_cm)):
        raise RootsimError(f"--voxel-cm {voxel_cm:g} (allowed: a positive number of cm)")
    lo = np.asarray(bounds_cm[0::2], float)
    hi = np.asarray(bounds_cm[1::2], float)
    dims = tuple(int(n) for n in np.maximum(np.ceil((hi - lo) / voxel_cm - 1e-9), 1).astype(int) + 1)
    check_cell_count(float(np.prod(dims)), what=f"soil grid nodes (--voxel-cm {voxel_cm:g})")
    axes = [lo[a] + voxel_cm * np.arange(dims[a]) for a in range(3)]
    z, y, x = np.meshgrid(axes[2], axes[1], axes[0], indexing="ij")
    return tuple(lo), dims, x.ravel(), y.ravel(), z.ravel()


def write_soil_vti(path: str | os.PathLike, fields, *, bounds_cm, voxel_cm: float, biopores=None,
                   names=None) -> Path:
    """Write soil fields sampled on a regular grid as VTK XML ImageData, atomically.

    Parameters
    ----------
    path : path-like
        Output ``.vti`` file.
    fields : SoilFields
    bounds_cm : (xmin, xmax, ymin, ymax, zmin, zmax)
    voxel_cm : float
        Node spacing (cm).
    biopores : Biopores, optional
        Adds the ``biopore_index`` array.
    names : list of str, optional
        Fields to write (default: all).

    Returns
    -------
    Path
    """
    import vtk
    from vtk.util.numpy_support import numpy_to_vtk

    path = Path(path)
    if path.suffix.lower() != ".vti":
        raise RootsimError(f"{path}: soil grids are written as .vti (VTK image data)")
    origin, dims, x, y, z = soil_grid_points(bounds_cm, voxel_cm)
    image = vtk.vtkImageData()
    image.SetDimensions(*dims)
    image.SetOrigin(*origin)
    image.SetSpacing(voxel_cm, voxel_cm, voxel_cm)
    for name in (names if names is not None else fields.names):
        values = np.ascontiguousarray(fields.values(name, x, y, z))
        array = numpy_to_vtk(values, deep=True)
        array.SetName(name)
        image.GetPointData().AddArray(array)
    if biopores is not None:
        index, _ = biopores.lookup(x, y, z)
        array = numpy_to_vtk(np.ascontiguousarray(index.astype(np.int32)), deep=True)
        array.SetName("biopore_index")
        image.GetPointData().AddArray(array)
    with atomic_path(path) as tmp:
        writer = vtk.vtkXMLImageDataWriter()
        writer.SetFileName(str(tmp))
        writer.SetInputData(image)
        writer.SetDataModeToBinary()
        if writer.Write() != 1:
            raise RootsimError(f"{path}: VTK could not write the file")
    return path
