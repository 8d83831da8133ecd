"""The soil state of a season as VTK image data (``.vti``): water content, head, uptake and roots by depth and day.

The image is one cell thick in y. Along z it is the soil column in rootsim's frame (cm, z up, soil surface at
z = 0, the column bottom at z = -depth), one image cell per solver cell. Along x it is **time**: one image cell per
day, x = day .. day + 1 (so x is in days, not cm), holding the state at the end of that day. Each column of the
``capture_layers.csv`` table named in :data:`SOIL_STATE_ARRAYS` becomes one cell-data array of the same name, so
any VTK viewer shows the season as a depth-time picture (e.g. colour by ``water_content`` or
``nitrate_n_mg_per_l``): water content, head, water uptake, root length and nitrate-N per cell (amount in kg N/ha
of ground, concentration in the soil solution in mg N/L, uptake in kg N/ha during the day).
"""

from __future__ import annotations

import os
from pathlib import Path

import numpy as np
import pandas as pd

from .errors import CaptureError

__all__ = ["SOIL_STATE_ARRAYS", "soil_state_image", "write_soil_state_vti"]

#: Columns of the layers table written as cell-data arrays.
SOIL_STATE_ARRAYS = ("water_content", "pressure_head_cm", "water_uptake_mm", "root_length_cm",
                     "nitrate_n_kg_per_ha", "nitrate_n_mg_per_l", "nitrate_uptake_kg_n_per_ha")


def soil_state_image(layers: pd.DataFrame):
    """Build a ``vtkImageData`` of the layers table (see the module docstring for the axes).

    Parameters
    ----------
    layers : pandas.DataFrame, shape (n_days * n_cells, ...)
        ``run_water_season(...)["layers"]``: rows day-major, cells from the surface down, with ``day``,
        ``depth_top_cm``, ``depth_bottom_cm`` and the columns in :data:`SOIL_STATE_ARRAYS`.

    Returns
    -------
    vtk.vtkImageData
        Dimensions (n_days + 1, 2, n_cells + 1) points; cell data arrays of shape (n_days * n_cells,) in VTK
        order (x, i.e. day, fastest; then z from the bottom up).
    """
    import vtk
    from vtk.util.numpy_support import numpy_to_vtk

    days = np.unique(layers["day"].to_numpy())
    n_days = days.size
    if n_days == 0 or len(layers) % n_days:
        raise CaptureError("soil state: the layers table is empty or ragged (allowed: every cell on every day)")
    n_cells = len(layers) // n_days
    top = layers["depth_top_cm"].to_numpy()[:n_cells]
    cell_cm = float(layers["depth_bottom_cm"].iloc[0] - layers["depth_top_cm"].iloc[0])
    image = vtk.vtkImageData()
    image.SetDimensions(n_days + 1, 2, n_cells + 1)
    image.SetOrigin(float(days[0]), 0.0, -float(top[-1] + cell_cm))
    image.SetSpacing(1.0, 1.0, cell_cm)
    for name in SOIL_STATE_ARRAYS:
        if name not in layers:  # nitrate columns are absent from tables made without the solute model
            continue
        grid = layers[name].to_numpy(dtype=np.float64).reshape(n_days, n_cells)     # (day, cell from the top)
        values = np.ascontiguousarray(grid.T[::-1].ravel())                         # z from the bottom, day fastest
        array = numpy_to_vtk(values, deep=True)
        array.SetName(name)
        image.GetCellData().AddArray(array)
    return image


def write_soil_state_vti(path: str | os.PathLike, layers: pd.DataFrame) -> Path:
    """Write :func:`soil_state_image` as VTK XML ImageData (binary) to ``path`` as given.

    The caller makes it atomic (``rootsim.atomic.atomic_path``) and checks the ``.vti`` suffix of the final name.
    """
    import vtk

    path = Path(path)
    writer = vtk.vtkXMLImageDataWriter()
    writer.SetFileName(str(path))
    writer.SetInputData(soil_state_image(layers))
    writer.SetDataModeToBinary()
    if writer.Write() != 1:
        raise CaptureError(f"{path}: VTK could not write the file")
    return path
