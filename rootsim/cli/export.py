"""``rootsim export``: write a root system for 3D viewers, CAD/printing tools and RSML software."""

from __future__ import annotations

import argparse
import os
import sys
from pathlib import Path

from ..errors import RootsimError

COMMAND = "export"
HELP = "export a root system as VTK (.vtp, .vti RLD grid), tube meshes (.stl .ply .obj .glb) or RSML"
ORDER = 70
DESCRIPTION = """\
Export a grown (or imported) root system to open file formats. Give one or more outputs:

  --vtk FILE.vtp         VTK PolyData: one polyline per root, with point and cell arrays
                         radius_cm, order, root_class_code (names in field data root_class_names),
                         plant_id, birth_day and age_days, so a VTK-based 3D viewer can
                         colour and filter roots (tubes: filter "Tube", vary radius by tube_radius_cm).
  --rld-grid FILE.vti    root length density on a voxel grid (cm root per cm3 soil), VTK ImageData,
                         for volume rendering; needs --voxel-cm.
  --mesh FILE            closed tubes around every root with its radius, by suffix .stl, .ply, .obj
                         (cm, z up) or .glb (binary glTF 2.0: metres, +Y up, as that standard
                         requires); .ply and .glb are coloured by root order. A lateral's tube
                         starts at its parent's surface. --mesh-sides sets the polygon (default 8);
                         --merge-short-cm joins consecutive short segments into longer pieces,
                         which makes meshes of large stands much smaller.
  --rsml FILE.rsml       Root System Markup Language (laterals nested in their parent roots, with
                         diameters), valid against the standard's XML Schema, readable by RSML
                         tools and by 'rootsim import-rsml'; --rsml-user names who made it.

DIR is a results directory (holding segments.parquet) or a segments.parquet file. Every file is
written completely or not at all. A system without segments gives valid empty files.

examples:
  rootsim export results/demo --vtk results/demo/roots.vtp
  rootsim export results/demo --rld-grid results/demo/rld.vti --voxel-cm 2
  rootsim export results/demo --mesh roots.glb --mesh-sides 6 --merge-short-cm 1 --rsml roots.rsml
"""


def register(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("dir", metavar="DIR", help="results directory (or segments.parquet) to export")
    parser.add_argument("--vtk", metavar="FILE.vtp", help="write root polylines as VTK XML PolyData")
    parser.add_argument("--rld-grid", metavar="FILE.vti", help="write the RLD voxel grid as VTK XML ImageData")
    parser.add_argument("--voxel-cm", type=float, metavar="V", help="voxel edge length for --rld-grid, cm")
    parser.add_argument("--mesh", metavar="FILE", help="write tube meshes (.stl, .ply, .obj or .glb)")
    parser.add_argument("--rsml", metavar="FILE.rsml", help="write RSML")
    parser.add_argument("--rsml-user", metavar="NAME", default=None,
                        help="who made the RSML file, for its <user> element (default: unknown)")
    parser.add_argument("--mesh-sides", type=int, default=8, metavar="N", help="sides of each tube (3-256, default 8)")
    parser.add_argument("--merge-short-cm", type=float, default=0.0, metavar="L",
                        help="merge consecutive segments into mesh pieces about L cm long (default 0: no merging)")


def _plan(args) -> list[tuple[str, Path, str, dict]]:
    """(option, path, registry suffix, writer options) for every requested output; checked before writing."""
    from ..formats import format_for_path
    from ..formats.mesh import SUFFIXES as MESH_SUFFIXES

    wanted = [("--vtk", args.vtk, (".vtp",)), ("--rld-grid", args.rld_grid, (".vti",)),
              ("--mesh", args.mesh, MESH_SUFFIXES), ("--rsml", args.rsml, (".rsml",))]
    plan = []
    for option, value, allowed in wanted:
        if value is None:
            continue
        path = Path(value)
        suffix = path.suffix.lower()
        if suffix not in allowed:
            raise RootsimError(f"{option} {value}: the file name must end in {' or '.join(allowed)}")
        key = format_for_path(path)
        options: dict = {}
        if option == "--mesh":
            options = {"sides": args.mesh_sides, "merge_short_cm": args.merge_short_cm}
        elif option == "--rsml":  # the file is written under a temporary name: its key is the final name's
            options = {"file_key": path.stem}
            if args.rsml_user is not None:
                options["user"] = args.rsml_user
        elif option == "--rld-grid":
            if args.voxel_cm is None:
                raise RootsimError("--rld-grid needs --voxel-cm V (voxel edge length in cm, e.g. 2)")
            if not args.voxel_cm > 0:
                raise RootsimError(f"--voxel-cm {args.voxel_cm:g}: must be > 0")
            options = {"voxel_cm": args.voxel_cm}
        plan.append((option, path, key, options))
    if not plan:
        raise RootsimError("nothing to export: give at least one of --vtk, --rld-grid, --mesh, --rsml")
    if args.mesh is None and (args.mesh_sides != 8 or args.merge_short_cm != 0):
        raise RootsimError("--mesh-sides and --merge-short-cm apply to --mesh; give --mesh FILE")
    if args.rsml_user is not None and args.rsml is None:
        raise RootsimError("--rsml-user applies to --rsml; give --rsml FILE.rsml")
    if args.voxel_cm is not None and args.rld_grid is None:
        raise RootsimError("--voxel-cm applies to --rld-grid; give --rld-grid FILE.vti")
    if args.mesh is not None:
        from ..formats.mesh import check_mesh_options

        check_mesh_options(args.mesh_sides, args.merge_short_cm, 60.0)
    paths = [p.resolve() for _, p, _, _ in plan]
    if len(set(paths)) != len(paths):
        raise RootsimError("two outputs name the same file")
    for option, path, _, _ in plan:
        _check_writable(option, path)
    return plan


def _check_writable(option: str, path: Path) -> None:
    """Fail before anything is written if ``path`` cannot be created (its nearest existing ancestor)."""
    if path.is_dir():
        raise RootsimError(f"{option} {path}: is a directory, expected a file name")
    ancestor = path.absolute().parent
    while not ancestor.exists() and ancestor != ancestor.parent:
        ancestor = ancestor.parent
    if not ancestor.is_dir():
        raise RootsimError(f"{option} {path}: cannot write ({ancestor} is not a directory)")
    if not os.access(ancestor, os.W_OK | os.X_OK):
        raise RootsimError(f"{option} {path}: cannot write ({ancestor} is not writable)")


def run(args: argparse.Namespace) -> int:
    from ..formats import export_file
    from ..progress import progress_bar, stage
    from ..rootsystem import RootSystem

    plan = _plan(args)
    with stage(f"reading {args.dir}"):
        system = RootSystem.read(args.dir)
    if len(system) == 0:
        print(f"warning: {args.dir}: no segments; writing empty files", file=sys.stderr)
    from ..atomic import atomic_paths
    from ..result_folder import record_derived

    with progress_bar(total=len(plan), desc="export", unit="file") as bar, \
            atomic_paths([path for _, path, _, _ in plan]) as temps:  # every file or none
        for (option, path, key, options), tmp in zip(plan, temps):
            try:
                with stage(f"writing {path}"):
                    export_file(system, tmp, format=key, **options)
            except OSError as exc:
                raise RootsimError(f"{path}: cannot write ({exc.strerror or exc})") from None
            bar.update(1)
    for _, path, _, _ in plan:
        print(path)
    record_derived(args.dir, [path for _, path, _, _ in plan], command="export")
    return 0
