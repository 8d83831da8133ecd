"""Analyzers: measure a root system as a root scientist would.

* :func:`layer_profile` – root length and root length density (RLD) by depth layer,
  segments clipped exactly at layer boundaries (:mod:`.profile`).
* :func:`root_traits` – total length, length by order, tips, rooting depth, D50/D95,
  width, convex-hull volume, interbranch distance, insertion angle, Gale & Grigal β,
  Fitter's topological indices (:mod:`.traits`, :mod:`.topology`, :mod:`.profile_model`).
* :func:`rld_voxel_grid` – RLD on a regular 3D grid, clipped exactly per voxel (:mod:`.voxels`).
* :func:`orientation_by_depth` – length-weighted angle from the vertical per layer (:mod:`.orientation`).

All accept a :class:`rootsim.RootSystem`, a DataFrame in the segment-table layout or a
mapping of columns.
"""

from __future__ import annotations

from .profile import layer_profile
from .profile_model import fit_gale_grigal, gale_grigal_fraction
from .traits import root_traits
from .voxels import rld_voxel_grid
from .orientation import orientation_by_depth

__all__ = ["layer_profile", "root_traits", "rld_voxel_grid", "fit_gale_grigal", "gale_grigal_fraction",
           "orientation_by_depth"]
