"""File formats: export root systems for viewers and other tools, import RSML.

The file suffix picks the format through a small registry:

========== ============================= ========================================
suffix     module                        content
========== ============================= ========================================
.vtp       :mod:`rootsim.formats.vtk`    VTK XML PolyData, one polyline per root
.vti       :mod:`rootsim.formats.vtk`    VTK XML ImageData, RLD voxel grid
.stl .ply  :mod:`rootsim.formats.mesh`   closed tube surface around every root
.obj .glb
.rsml      :mod:`rootsim.formats.rsml`   Root System Markup Language (export and import)
========== ============================= ========================================
"""

from __future__ import annotations

import importlib
import os
from pathlib import Path

from ..errors import FormatError

__all__ = ["EXPORTERS", "IMPORTERS", "export_file", "import_file", "format_for_path"]

#: suffix -> (module, function) writing ``function(system, path, **options)``.
EXPORTERS: dict[str, tuple[str, str]] = {
    ".vtp": ("vtk", "write_vtp"),
    ".vti": ("vtk", "write_vti"),
    ".stl": ("mesh", "write_mesh"),
    ".ply": ("mesh", "write_mesh"),
    ".obj": ("mesh", "write_mesh"),
    ".glb": ("mesh", "write_mesh"),
    ".rsml": ("rsml", "write_rsml"),
}

#: suffix -> (module, function) reading ``function(path, **options) -> RootSystem``.
IMPORTERS: dict[str, tuple[str, str]] = {
    ".rsml": ("rsml", "read_rsml"),
}


def format_for_path(path: str | os.PathLike, *, format: str | None = None, registry=None) -> str:
    """The registry suffix for ``path`` (or the explicit ``format``), e.g. ``".vtp"``.

    Raises
    ------
    FormatError
        If the suffix or format is not in the registry (the message lists the allowed ones).
    """
    registry = EXPORTERS if registry is None else registry
    key = format if format is not None else Path(path).suffix
    key = str(key).lower()
    if key and not key.startswith("."):
        key = "." + key
    if key not in registry:
        allowed = ", ".join(sorted(registry))
        what = f"format {format!r}" if format is not None else f"suffix {Path(path).suffix or '(none)'!r}"
        raise FormatError(f"{path}: unknown {what} (allowed: {allowed})")
    return key


def export_file(system, path: str | os.PathLike, *, format: str | None = None, **options) -> Path:
    """Write ``system`` to ``path`` in the format its suffix (or ``format``) names, atomically.

    Parameters
    ----------
    system : RootSystem
    path : path-like
        Target file; its suffix picks the format unless ``format`` is given.
    format : str, optional
        One of the registry suffixes (``"vtp"``, ``".stl"``, ...).
    **options
        Passed to the format's writer (e.g. ``sides=8`` for meshes, ``voxel_cm=2`` for .vti).

    Returns
    -------
    pathlib.Path
        The written file.
    """
    key = format_for_path(path, format=format)
    module, func = EXPORTERS[key]
    writer = getattr(importlib.import_module(f"{__name__}.{module}"), func)
    return writer(system, path, **options)


def import_file(path: str | os.PathLike, *, format: str | None = None, **options):
    """Read a root system from ``path`` (format from its suffix, or ``format``).

    Returns
    -------
    RootSystem
    """
    key = format_for_path(path, format=format, registry=IMPORTERS)
    module, func = IMPORTERS[key]
    reader = getattr(importlib.import_module(f"{__name__}.{module}"), func)
    return reader(path, **options)
