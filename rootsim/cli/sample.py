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
A field stand is one cell of an infinite periodic field: samplers see the roots of the
neighbouring cells where they reach past the cell (--bordered: only the table's roots).
X,Y may be a position relative to the stand: in_row_at_plant, in_row_between_plants or
mid_row, optionally :PLANT (default: the plant nearest the stand centre).

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
  --wall POSITION,DEPTH,CELL                a face across the rows through a stand position,
                                            spanning the stand from inter-row to inter-row
  --tube X,Y,ANGLE,LENGTH,OUTER_DIAMETER,DEPTH_OF_FIELD
                                            a minirhizotron tube entering at (X, Y), ANGLE degrees
                                            from vertical (tilted toward +x) -> tube.csv; windows of
                                            --tube-window-cm along the tube (--tube-view-deg: part
                                            of the circumference seen); estimate visible length
                                            / (window area x depth of field)
  --projection-grid-cm G                    line-intersect count of the roots projected on a face
                                            (x-z by default) with a G-cm grid -> projection.csv;
                                            Newman (1966) and Tennant (1975) lengths vs. true

Field artefacts (off by default; see README): --detection-limit-cm (thinnest root seen on
walls, tube images and broken core faces), --wall-scraped-cm / --wall-min-protruding-cm,
--tube-gap-cm / --tube-gap-depth-cm / --tube-wall-growth, --core-washing-recovery,
--core-break-ratio. --bias-csv writes sampling_bias.csv (estimate / stand RLD by depth, spread).

Printed tables (one per method; RLD in cm/cm3; "a ± s" = mean ± standard deviation):
  cores   depth cm | stand (true stand RLD of the layer) | RLD of the cores at each placement
          | washed / stand | break / stand (core-break estimate / stand RLD), over all cores
  wall    depth cm | counted (roots counted in the row of cells) | estimate (2 x counts / area)
          | slab (true RLD behind the face) | stand | estimate / stand (over the cells)
  tube    depth cm (10-cm bands of window centres) | windows | image (image length / (window
          area x depth of field)) | shell (true RLD of a shell around the tube) | stand |
          image / stand (over the windows)

Only the files asked for are written, into --out-dir (default DIR). Bad geometry (e.g. a core
outside a pot, XMIN >= XMAX) stops with one error line and writes nothing.

Examples:
  rootsim sample results/demo --core in_row_between_plants,5,90,15 --core mid_row,5,90,15
  rootsim sample results/demo --core-grid 4,90,15 --core-replicates 3 --wall in_row_between_plants,90,5
  rootsim sample results/demo --tube in_row_between_plants,45,120,5.6,0.2 --tube-gap-cm 0.1 --tube-gap-depth-cm 20
  rootsim sample results/demo --core 0,0,5,60 --projection-grid-cm 1
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
    parser.add_argument("--bias-csv", action="store_true",
                        help="also write sampling_bias.csv: estimate / stand RLD by depth per method, with spread")
    parser.add_argument("--bordered", action="store_true",
                        help="sample the table's roots only (a bordered plot), not the periodic field")
    parser.add_argument("--core-replicates", metavar="N", type=int, default=None,
                        help="cores per position kind at N different plants (--core-grid and position cores)")
    parser.add_argument("--seed", metavar="S", type=int, default=None,
                        help="seed for choosing the replicate plants (default: fixed order of a fresh generator)")
    parser.add_argument("--detection-limit-cm", metavar="D", type=float, default=0.0,
                        help="thinnest root diameter seen on walls, tube images and broken core faces (default 0)")
    parser.add_argument("--wall-scraped-cm", metavar="CM", type=float, default=0.0,
                        help="soil layer scraped off the face to expose roots (default 0)")
    parser.add_argument("--wall-min-protruding-cm", metavar="CM", type=float, default=0.0,
                        help="shortest protruding root counted on the face (default 0)")
    parser.add_argument("--tube-gap-cm", metavar="CM", type=float, default=0.0,
                        help="gap between tube and soil in the topsoil (default 0)")
    parser.add_argument("--tube-gap-depth-cm", metavar="CM", type=float, default=0.0,
                        help="depth down to which the tube-soil gap reaches (default 0)")
    parser.add_argument("--tube-wall-growth", metavar="F", type=float, default=0.0,
                        help="fraction of the root length meeting the tube that grows along it in view (default 0)")
    parser.add_argument("--tube-depth-of-field-cm", metavar="D[,D...]", default=None,
                        help="depths of field of the side-by-side image conversions (default 0.2,0.3)")
    parser.add_argument("--core-washing-recovery", metavar="F", type=float, default=1.0,
                        help="fraction of fine-root length recovered by washing (default 1)")
    parser.add_argument("--core-fine-diameter-cm", metavar="CM", type=float, default=0.02,
                        help="roots up to this diameter count as fine for washing losses (default 0.02)")
    parser.add_argument("--core-break-ratio", metavar="C", type=float, default=2.0,
                        help="core-break ratio C in RLD = C x roots per cm2 of broken face (default 2, isotropic)")


def _requests(args):
    """Parse every geometry before any reading or writing; returns the keyword arguments per method."""
    from ..sampling import parse_core, parse_core_grid, parse_tube, parse_wall
    from ..sampling.minirhizotron import DEFAULT_REFERENCE_CM, DEFAULT_WINDOW_CM

    from ..limits import check_magnitude

    for option in ("wall_slab_cm", "tube_window_cm", "tube_reference_cm", "projection_grid_cm", "projection_band_cm"):
        if getattr(args, option) is not None:
            check_magnitude(getattr(args, option), what="--" + option.replace("_", "-"))
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
    tube_options = {"gap_cm": args.tube_gap_cm, "gap_depth_cm": args.tube_gap_depth_cm,
                    "wall_growth_fraction": args.tube_wall_growth, "detection_limit_cm": args.detection_limit_cm}
    if args.tube_depth_of_field_cm is not None:
        from ..sampling.geometry_strings import parse_numbers

        values = str(args.tube_depth_of_field_cm).split(",")
        tube_options["conversion_depths_of_field_cm"] = tuple(
            parse_numbers(args.tube_depth_of_field_cm, option="--tube-depth-of-field-cm",
                          names=tuple(f"depth_of_field_{i}" for i in range(len(values)))).values())
    tubes = [dataclasses.replace(t, **tube_options) for t in tubes]
    walls = [dataclasses.replace(w, scraped_cm=args.wall_scraped_cm, min_protruding_cm=args.wall_min_protruding_cm,
                                 detection_limit_cm=args.detection_limit_cm) for w in walls]
    from ..sampling.minirhizotron import validate_tube
    from ..sampling.wall import validate_wall

    for text, tube in zip(args.tube, tubes):
        validate_tube(tube, label=f"--tube {text}")
    for text, wall in zip(args.wall, walls):
        validate_wall(wall, label=f"--wall {text}")
    from ..sampling.cores import _check_method_options

    _check_method_options(args.core_washing_recovery, args.core_fine_diameter_cm, args.core_break_ratio,
                          args.detection_limit_cm)
    if args.core_replicates is not None and args.core_replicates < 1:
        raise SamplingError(f"--core-replicates must be >= 1, got {args.core_replicates}")
    if args.seed is not None and args.seed < 0:
        raise SamplingError(f"--seed {args.seed} (allowed: a whole number >= 0)")
    grid_cm = args.projection_grid_cm
    if grid_cm is not None and not grid_cm > 0:
        raise SamplingError(f"--projection-grid-cm must be > 0 cm, got {grid_cm:g}")
    if grid_cm is None and args.projection_band_cm is not None:
        raise SamplingError("--projection-band-cm needs --projection-grid-cm")
    if not (cores or grid or walls or tubes or grid_cm):
        raise SamplingError("nothing to sample: give --core, --core-grid, --wall, --tube or --projection-grid-cm")
    return cores, grid, walls, tubes, grid_cm


def run(args: argparse.Namespace) -> int:
    from ..atomic import atomic_paths, ensure_output_dir
    from ..progress import stage
    from ..rootsystem import RootSystem
    from ..sampling import core_grid, sample_cores, sample_projection, sample_tube, sample_wall

    from ..sampling.bias_table import bias_table

    cores, grid, walls, tubes, grid_cm = _requests(args)
    with stage(f"reading {args.dir}"):
        system = RootSystem.read(args.dir)
    periodic = not args.bordered
    tables = {}
    if grid is not None:
        cores = cores + core_grid(system, **grid)
    if args.core_replicates is not None:
        cores = _replicated(system, cores, args.core_replicates, args.seed)
    if cores:
        with stage(f"sampling {len(cores)} core(s)"):
            tables["cores.csv"] = sample_cores(
                system, cores=cores, periodic=periodic, washing_recovery=args.core_washing_recovery,
                fine_root_diameter_cm=args.core_fine_diameter_cm, core_break_ratio=args.core_break_ratio,
                detection_limit_cm=args.detection_limit_cm)
    if walls:
        with stage(f"sampling {len(walls)} wall(s)"):
            tables["wall.csv"] = sample_wall(system, walls=walls, periodic=periodic)
    if tubes:
        with stage(f"sampling {len(tubes)} tube(s)"):
            tables["tube.csv"] = sample_tube(system, tubes=tubes, periodic=periodic)
    bias = None
    if cores or walls or tubes:
        bias = bias_table(system, cores=tables.get("cores.csv"), wall=tables.get("wall.csv"), tube=tables.get("tube.csv"))
        if args.bias_csv:
            tables["sampling_bias.csv"] = bias
    if grid_cm is not None:
        with stage("sampling the projection"):
            tables["projection.csv"] = sample_projection(system, grid_cm=grid_cm, plane=args.projection_plane,
                                                         band_cm=args.projection_band_cm)
    src = Path(args.dir)
    out = ensure_output_dir(args.out_dir if args.out_dir is not None else (src.parent if src.suffix == ".parquet" else src))
    from ..limits import require_finite

    for name, df in tables.items():
        require_finite(df, what=name)
    with atomic_paths([out / name for name in tables]) as temps:  # all files or none
        for tmp, df in zip(temps, tables.values()):
            df.to_csv(tmp, index=False, float_format="%.6g")
    from ..result_folder import record_derived

    record_derived(args.dir, [out / name for name in tables], command="sample")
    _print_summary(tables, bias, out)
    return 0


def _replicated(system, cores: list, replicates: int, seed) -> list:
    """Cores placed relative to the stand, repeated at ``replicates`` plants per position kind."""
    from ..sampling.columns import table_metadata
    from ..sampling.stand_positions import POSITION_KINDS, replicate_plants

    if not any(core.placement in POSITION_KINDS for core in cores):  # it used to be ignored without a word
        raise SamplingError(f"--core-replicates {replicates}: no core is placed relative to the stand (allowed: "
                            "with --core-grid or cores at a position kind: " + ", ".join(POSITION_KINDS) + ")")
    meta = table_metadata(system)
    out, seen = [], set()
    for core in cores:
        if core.placement not in POSITION_KINDS:
            out.append(core)
            continue
        key = (core.placement, core.diameter_cm, core.depth_cm, core.increment_cm)
        if key in seen:
            continue
        seen.add(key)
        plants = replicate_plants(meta, replicates, seed=seed, option="--core-replicates")
        out += [dataclasses.replace(core, x_cm=float("nan"), y_cm=float("nan"), plant_id=int(p)) for p in plants]
    return out


_SHORT = {"in_row_at_plant": "at plant", "in_row_between_plants": "between plants", "mid_row": "mid-row"}


def _pm(mean: float, sd: float) -> str:
    if sd != sd:  # NaN: a single unit
        return f"{mean:.3g}"
    return f"{mean:.3g} ± {sd:.2g}"


def _table(say, title: str, header: list[str], rows: list[list[str]]) -> None:
    """Print a title line and a right-aligned table."""
    widths = [max(len(h), *(len(r[i]) for r in rows)) if rows else len(h) for i, h in enumerate(header)]
    say(f"{title}\n")
    say("  " + "  ".join(h.rjust(w) for h, w in zip(header, widths)) + "\n")
    for r in rows:
        say("  " + "  ".join(c.rjust(w) for c, w in zip(r, widths)) + "\n")


def _print_cores(say, df, bias, out: Path, note: str) -> None:
    """The cores table: depth rows, the mean RLD of each placement, washed and core-break ÷ stand."""
    kinds = list(dict.fromkeys(df["placement"]))
    n_by_kind = df.groupby("placement")["core_id"].nunique()
    washed = bias[bias["method"] == "core_washed"]
    broken = bias[bias["method"] == "core_break"]
    overall = "all" if len(kinds) > 1 else kinds[0]
    rows = []
    for (top, bottom), part in washed.groupby(["depth_top_cm", "depth_bottom_cm"], sort=True):
        cells = [f"{top:g}-{bottom:g}", f"{part['rld_stand_cm_per_cm3'].iloc[0]:.3g}"]
        for kind in kinds:
            row = part[part["group"] == kind]
            cells.append(_pm(row["rld_estimate_mean_cm_per_cm3"].iloc[0],
                             row["rld_estimate_standard_deviation_cm_per_cm3"].iloc[0])
                         if len(row) else "-")
        for table in (part, broken[(broken["depth_top_cm"] == top) & (broken["depth_bottom_cm"] == bottom)]):
            row = table[table["group"] == overall]
            cells.append(_pm(row["ratio_mean"].iloc[0], row["ratio_standard_deviation"].iloc[0]) if len(row) else "-")
        rows.append(cells)
    counts = ", ".join(f"{int(n_by_kind[k])} {k}" for k in kinds)
    _table(say, f"cores ({counts}{note}) -> {out / 'cores.csv'}",
           ["depth cm", "stand"] + [_SHORT.get(k, k) for k in kinds] + ["washed / stand", "break / stand"], rows)


def _print_summary(tables: dict, bias, out: Path) -> None:
    """One short table per method (columns explained in --help and the README)."""
    say = sys.stdout.write
    if bias is not None:
        say("RLD in cm root per cm3 soil; a ± s = mean ± standard deviation; stand = true stand RLD of the layer\n")
    if "cores.csv" in tables:
        all_cores = tables["cores.csv"]
        schemes = sorted(all_cores["increment_cm"].unique())
        for increment in schemes:
            df = all_cores[all_cores["increment_cm"] == increment]
            pairs = set(zip(df["depth_top_cm"], df["depth_bottom_cm"]))
            in_scheme = [pair in pairs for pair in zip(bias["depth_top_cm"], bias["depth_bottom_cm"])]
            _print_cores(say, df, bias[in_scheme], out, f", {increment:g} cm increments" if len(schemes) > 1 else "")
    if "wall.csv" in tables:
        df = tables["wall.csv"]
        g = df.groupby(["depth_top_cm", "depth_bottom_cm"]).agg(
            n=("intersections", "sum"), est=("rld_estimate_cm_per_cm3", "mean"), slab=("rld_true_cm_per_cm3", "mean"))
        part = bias[bias["method"] == "wall"].set_index(["depth_top_cm", "depth_bottom_cm"])
        rows = [[f"{top:g}-{bottom:g}", f"{int(r['n'])}", f"{r['est']:.3g}", f"{r['slab']:.3g}",
                 f"{part.loc[(top, bottom), 'rld_stand_cm_per_cm3']:.3g}",
                 _pm(part.loc[(top, bottom), "ratio_mean"], part.loc[(top, bottom), "ratio_standard_deviation"])]
                for (top, bottom), r in g.iterrows()]
        _table(say, f"wall ({df['wall_id'].nunique()} wall(s)) -> {out / 'wall.csv'}",
               ["depth cm", "counted", "estimate", "slab", "stand", "estimate / stand"], rows)
    if "tube.csv" in tables:
        df = tables["tube.csv"]
        part = bias[bias["method"] == "tube_image"]
        centre = 0.5 * (df["depth_top_cm"] + df["depth_bottom_cm"])
        band = (centre // 10.0) * 10.0
        shell = df.groupby(band)["rld_true_cm_per_cm3"].mean()
        rows = [[f"{r['depth_top_cm']:g}-{r['depth_bottom_cm']:g}", f"{int(r['units'])}",
                 f"{r['rld_estimate_mean_cm_per_cm3']:.3g}", f"{shell.loc[r['depth_top_cm']]:.3g}",
                 f"{r['rld_stand_cm_per_cm3']:.3g}", _pm(r["ratio_mean"], r["ratio_standard_deviation"])]
                for _, r in part.iterrows()]
        _table(say, f"tube ({df['tube_id'].nunique()} tube(s)) -> {out / 'tube.csv'}",
               ["depth cm", "windows", "image", "shell", "stand", "image / stand"], rows)
    if "projection.csv" in tables:
        df = tables["projection.csv"]
        say(f"projection ({df['plane'].iloc[0]} plane, grid {df['grid_cm'].iloc[0]:g} cm) -> {out / 'projection.csv'}\n")
        say(f"  intersections {int(df['intersections'].sum())}: Newman {df['length_newman_cm'].sum():.1f} cm, "
            f"Tennant {df['length_tennant_cm'].sum():.1f} cm, true projected {df['projected_length_true_cm'].sum():.1f} cm "
            f"(3D length {df['root_length_true_cm'].sum():.1f} cm)\n")
    if "sampling_bias.csv" in tables:
        say(f"estimate / stand RLD by depth for every method -> {out / 'sampling_bias.csv'}\n")


__all__ = ["COMMAND", "HELP", "ORDER", "DESCRIPTION", "register", "run"]
