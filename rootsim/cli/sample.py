"""``rootsim sample``: virtual soil cores, profile walls, minirhizotron tubes and projection counts."""

from __future__ import annotations

import argparse
import dataclasses
import sys
from pathlib import Path

from ..errors import SamplingError

COMMAND = "sample"
HELP = "sample a grown root system like in the field: soil cores, trench walls, minirhizotron tubes, grid counts"
ORDER = 40
DESCRIPTION = """\
Sample a grown root system the way it is done in the field, and compare each method's
RLD estimate (cm root per cm3 soil) with the true RLD of the same soil volume.
All lengths in cm; x, y horizontal; depth positive downward from the soil surface.

  --core X,Y,DIAMETER,DEPTH[,INCREMENT]     a soil core from the surface at (X, Y), cut into
                                            depth increments (default 10 cm) -> cores.csv
                                            (exact root length in each increment; repeatable)
  --core-grid DIAMETER,DEPTH[,INCREMENT]    cores at every plant (in_row_at_plant), midway
                                            between neighbouring plants of a row
                                            (in_row_between_plants) and midway between rows at
                                            each plant (mid_row), from the stand layout
  --wall Y,XMIN,XMAX,DEPTH,CELL             a trench face on the plane y = Y, roots cut by the
                                            face counted on CELL x CELL squares -> wall.csv;
                                            estimate 2 x intersections / area (Smith & Guttman 1953)
  --tube X,Y,ANGLE,LENGTH,OUTER_DIAMETER,DEPTH_OF_FIELD
                                            a minirhizotron tube entering at (X, Y), ANGLE degrees
                                            from vertical (tilted toward +x) -> tube.csv; windows of
                                            --tube-window-cm along the tube (--tube-view-deg: part
                                            of the circumference seen); estimate visible length
                                            / (window area x depth of field)
  --projection-grid-cm G                    line-intersect count of the roots projected on a face
                                            (x-z by default) with a G-cm grid -> projection.csv;
                                            Newman (1966) and Tennant (1975) lengths vs. true

Only the files asked for are written, into --out-dir (default DIR). Bad geometry (e.g. a core
outside a pot, XMIN >= XMAX) stops with one error line and writes nothing.

Examples:
  rootsim sample results/demo --core 0,0,5,60 --core 10,0,5,60,5
  rootsim sample results/demo --core-grid 4,90,15 --wall 0,-30,30,60,5
  rootsim sample results/demo --tube 0,10,45,120,5.6,0.2 --tube-window-cm 2 --projection-grid-cm 1
"""


def register(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("dir", metavar="DIR", help="results directory holding segments.parquet (or the file itself)")
    parser.add_argument("--core", metavar="X,Y,DIAMETER,DEPTH[,INCREMENT]", action="append", default=[],
                        help="a soil core, cm (repeatable); increment default 10 cm")
    parser.add_argument("--core-grid", metavar="DIAMETER,DEPTH[,INCREMENT]", default=None,
                        help="cores in the row at and between plants and mid-row, from the stand layout")
    parser.add_argument("--wall", metavar="Y,XMIN,XMAX,DEPTH,CELL", action="append", default=[],
                        help="a profile wall on the plane y = Y counted on square cells, cm (repeatable)")
    parser.add_argument("--wall-slab-cm", metavar="CM", type=float, default=None,
                        help="thickness of the slab around the wall for the true RLD (default: CELL)")
    parser.add_argument("--tube", metavar="X,Y,ANGLE,LENGTH,OUTER_DIAMETER,DEPTH_OF_FIELD", action="append", default=[],
                        help="a minirhizotron tube, cm and degrees from vertical (repeatable)")
    parser.add_argument("--tube-window-cm", metavar="CM", type=float, default=None,
                        help="length of the viewing windows along the tube (default 5)")
    parser.add_argument("--tube-view-deg", metavar="DEG", type=float, default=360.0,
                        help="part of the tube circumference seen, centred on the upper side (default 360 = all)")
    parser.add_argument("--tube-reference-cm", metavar="CM", type=float, default=None,
                        help="thickness of the soil shell around the tube for the true RLD (default 2)")
    parser.add_argument("--projection-grid-cm", metavar="G", type=float, default=None,
                        help="grid unit of the line-intersect count on the projection")
    parser.add_argument("--projection-plane", choices=("xz", "yz", "xy"), default="xz",
                        help="projection plane: xz = rhizobox face (default), yz, or xy = seen from above")
    parser.add_argument("--projection-band-cm", metavar="CM", type=float, default=None,
                        help="report the projection count in bands of this height (a multiple of G)")
    parser.add_argument("--out-dir", metavar="DIR", default=None, help="where the CSV files go (default: DIR)")


def _requests(args):
    """Parse every geometry before any reading or writing; returns the keyword arguments per method."""
    from ..sampling import parse_core, parse_core_grid, parse_tube, parse_wall
    from ..sampling.minirhizotron import DEFAULT_REFERENCE_CM, DEFAULT_WINDOW_CM

    cores = [parse_core(text) for text in args.core]
    grid = parse_core_grid(args.core_grid) if args.core_grid is not None else None
    walls = [parse_wall(text) for text in args.wall]
    if args.wall_slab_cm is not None:
        if not args.wall_slab_cm > 0:
            raise SamplingError(f"--wall-slab-cm must be > 0 cm, got {args.wall_slab_cm:g}")
        walls = [dataclasses.replace(w, slab_thickness_cm=args.wall_slab_cm) for w in walls]
    window = DEFAULT_WINDOW_CM if args.tube_window_cm is None else args.tube_window_cm
    reference = DEFAULT_REFERENCE_CM if args.tube_reference_cm is None else args.tube_reference_cm
    for name, value in (("--tube-window-cm", window), ("--tube-reference-cm", reference)):
        if not value > 0:
            raise SamplingError(f"{name} must be > 0 cm, got {value:g}")
    tubes = [parse_tube(text, window_cm=window, reference_cm=reference, view_angle_deg=args.tube_view_deg)
             for text in args.tube]
    grid_cm = args.projection_grid_cm
    if grid_cm is not None and not grid_cm > 0:
        raise SamplingError(f"--projection-grid-cm must be > 0 cm, got {grid_cm:g}")
    if grid_cm is None and args.projection_band_cm is not None:
        raise SamplingError("--projection-band-cm needs --projection-grid-cm")
    if not (cores or grid or walls or tubes or grid_cm):
        raise SamplingError("nothing to sample: give --core, --core-grid, --wall, --tube or --projection-grid-cm")
    return cores, grid, walls, tubes, grid_cm


def run(args: argparse.Namespace) -> int:
    from ..atomic import atomic_path, ensure_output_dir
    from ..progress import stage
    from ..rootsystem import RootSystem
    from ..sampling import core_grid, sample_cores, sample_projection, sample_tube, sample_wall

    cores, grid, walls, tubes, grid_cm = _requests(args)
    with stage(f"reading {args.dir}"):
        system = RootSystem.read(args.dir)
    tables = {}
    if grid is not None:
        cores = cores + core_grid(system, **grid)
    if cores:
        with stage(f"sampling {len(cores)} core(s)"):
            tables["cores.csv"] = sample_cores(system, cores=cores)
    if walls:
        with stage(f"sampling {len(walls)} wall(s)"):
            tables["wall.csv"] = sample_wall(system, walls=walls)
    if tubes:
        with stage(f"sampling {len(tubes)} tube(s)"):
            tables["tube.csv"] = sample_tube(system, tubes=tubes)
    if grid_cm is not None:
        with stage("sampling the projection"):
            tables["projection.csv"] = sample_projection(system, grid_cm=grid_cm, plane=args.projection_plane,
                                                         band_cm=args.projection_band_cm)
    src = Path(args.dir)
    out = ensure_output_dir(args.out_dir if args.out_dir is not None else (src.parent if src.suffix == ".parquet" else src))
    for name, df in tables.items():
        with atomic_path(out / name) as tmp:
            df.to_csv(tmp, index=False, float_format="%.6g")
    _print_summary(tables, out)
    return 0


def _print_summary(tables: dict, out: Path) -> None:
    """Short comparison of estimates with the true RLD, grouped by depth."""
    say = sys.stdout.write
    if "cores.csv" in tables:
        df = tables["cores.csv"]
        g = df.groupby(["depth_top_cm", "depth_bottom_cm"])["rld_cm_per_cm3"].agg(["mean", "min", "max"])
        _by_depth(say, f"cores ({df['core_id'].nunique()} cores) -> {out / 'cores.csv'}",
                  f"{'RLD mean':>9}  {'min':>9}  {'max':>9}   (cm/cm3, exact)",
                  g, lambda row: f"{row['mean']:9.4f}  {row['min']:9.4f}  {row['max']:9.4f}")
    if "wall.csv" in tables:
        df = tables["wall.csv"]
        g = df.groupby(["depth_top_cm", "depth_bottom_cm"]).agg(
            n=("intersections", "sum"), est=("rld_estimate_cm_per_cm3", "mean"), true=("rld_true_cm_per_cm3", "mean"))
        _by_depth(say, f"wall ({df['wall_id'].nunique()} wall(s)) -> {out / 'wall.csv'}",
                  f"{'counts':>7}  {'RLD est.':>9}  {'RLD true':>9}   (2 x intersections / area; slab)",
                  g, lambda row: f"{int(row['n']):7d}  {row['est']:9.4f}  {row['true']:9.4f}")
    if "tube.csv" in tables:
        df = tables["tube.csv"]
        say(f"tube ({df['tube_id'].nunique()} tube(s)) -> {out / 'tube.csv'}\n")
        say(f"  {'tube':>4}  {'depth cm':>12}  {'RLD est.':>9}  {'shell':>9}  {'reference':>9}   (depth of field; exact)\n")
        for _, row in df.iterrows():
            span = f"{row['depth_top_cm']:.3g}-{row['depth_bottom_cm']:.3g}"
            say(f"  {int(row['tube_id']):4d}  {span:>12}  {row['rld_estimate_cm_per_cm3']:9.4f}  "
                f"{row['rld_shell_true_cm_per_cm3']:9.4f}  {row['rld_true_cm_per_cm3']:9.4f}\n")
    if "projection.csv" in tables:
        df = tables["projection.csv"]
        say(f"projection ({df['plane'].iloc[0]} plane, grid {df['grid_cm'].iloc[0]:g} cm) -> {out / 'projection.csv'}\n")
        say(f"  intersections {int(df['intersections'].sum())}: Newman {df['length_newman_cm'].sum():.1f} cm, "
            f"Tennant {df['length_tennant_cm'].sum():.1f} cm, true projected {df['projected_length_true_cm'].sum():.1f} cm "
            f"(3D length {df['root_length_true_cm'].sum():.1f} cm)\n")


__all__ = ["COMMAND", "HELP", "ORDER", "DESCRIPTION", "register", "run"]


def _by_depth(say, title: str, header: str, grouped, cells) -> None:
    """Print one line per depth range of a DataFrame grouped by (depth_top_cm, depth_bottom_cm)."""
    say(f"{title}\n  {'depth cm':>12}  {header}\n")
    for (top, bottom), row in grouped.iterrows():
        say(f"  {f'{top:g}-{bottom:g}':>12}  {cells(row)}\n")
