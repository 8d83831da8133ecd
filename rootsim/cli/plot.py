"""``rootsim plot``: 2D figures of grown root systems (RLD profile by depth, rhizobox-style projection)."""

from __future__ import annotations

import argparse
import re
import sys
from pathlib import Path

from ..errors import RootsimError

COMMAND = "plot"
HELP = "draw the RLD profile by depth and a rhizobox-style projection (PNG, SVG or PDF)"
ORDER = 60
DESCRIPTION = """\
Draw 2D figures of one root system, or compare several (variants of a trial).

Writes into --out-dir (default: the first DIR):
  rld_profile.png     root length density (cm root per cm3 soil) by depth, depth
                      downward; all roots and each root order; with --compare one
                      line per variant, one panel per order
  projection.png      the roots projected on the vertical x-z plane, as seen on
                      the glass of a rhizobox (with --compare: projection_<name>.png
                      for each variant)

Each DIR is a results directory written by 'rootsim grow' (holding segments.parquet)
or a segments.parquet file. Variants are labelled by their directory name.
RLD uses the stand's ground area; for imported data without a stand give --area-cm2,
or --box to profile only the roots inside a vertical column (like a monolith).

Examples:
  rootsim plot results/demo
  rootsim plot results/early_sown --compare results/late_sown --layer-cm 10 --format pdf
  rootsim plot imported/plant7 --box -10,10,-5,5 --out-dir figures
"""


def register(parser: argparse.ArgumentParser) -> None:
    # let box corners like "-10,10,-5,5" be values, not unknown options (as 'rootsim analyze' does)
    if hasattr(parser, "_negative_number_matcher"):
        parser._negative_number_matcher = re.compile(r"^-\d[\d.,eE+-]*$|^-\.\d[\d.,eE+-]*$")
    parser.add_argument("dir", metavar="DIR", help="results directory (or segments.parquet) to plot")
    parser.add_argument("--compare", metavar="DIR2", nargs="+", default=[],
                        help="further results directories drawn in the same RLD figure")
    parser.add_argument("--out-dir", metavar="DIR", default=None, help="where the figures go (default: DIR)")
    parser.add_argument("--layer-cm", metavar="CM", type=float, default=5.0,
                        help="soil layer thickness for the RLD profile, cm (default 5)")
    parser.add_argument("--area-cm2", metavar="A", type=float, default=None,
                        help="ground area the roots belong to, cm² (default: from the stand layout)")
    parser.add_argument("--box", metavar="XMIN,XMAX,YMIN,YMAX", default=None,
                        help="profile only roots inside this vertical column, cm; RLD uses its area")
    parser.add_argument("--format", choices=("png", "svg", "pdf"), default="png", help="file format (default png)")
    parser.add_argument("--width-scale", metavar="F", type=float, default=1.0,
                        help="widen roots in the projection by this factor (default 1 = true scale)")


def variant_labels(paths: list[str], systems: list) -> list[str]:
    """Legend labels: the directory names; where two clash, the spec name (metadata ``spec_name``
    or the stem of ``spec_file``); if labels still clash, the paths as given."""
    names = [_dir_name(p) for p in paths]
    out = []
    for path, name, system in zip(paths, names, systems):
        if names.count(name) == 1:
            out.append(name)
            continue
        meta = system.metadata or {}
        spec = meta.get("spec_name") or (Path(str(meta["spec_file"])).stem if meta.get("spec_file") else None)
        out.append(str(spec) if spec else str(path))
    if len(set(out)) < len(out):
        out = [str(p) for p in paths]
    return out


def _dir_name(path: str) -> str:
    p = Path(path)
    if p.suffix == ".parquet":
        p = p.parent if p.stem == "segments" else p.with_suffix("")
    return p.resolve().name or str(path)


def run(args: argparse.Namespace) -> int:
    from ..atomic import ensure_output_dir
    from ..plots import plot_projection, plot_rld_profile, save_figure
    from ..rootsystem import RootSystem

    if not args.layer_cm > 0:
        raise RootsimError(f"--layer-cm must be a positive thickness in cm (got {args.layer_cm:g})")
    if not args.width_scale > 0:
        raise RootsimError(f"--width-scale must be > 0 (got {args.width_scale:g})")
    box = _box(args.box)
    if box is not None and args.area_cm2 is not None:
        raise RootsimError("give either --area-cm2 or --box, not both (with --box the area is the box's)")
    if args.area_cm2 is not None and not args.area_cm2 > 0:
        raise RootsimError(f"--area-cm2 must be a ground area > 0 in cm² (got {args.area_cm2:g})")
    paths = [args.dir] + list(args.compare)
    systems = [RootSystem.read(p) for p in paths]
    labels = variant_labels(paths, systems)
    out_dir = ensure_output_dir(args.out_dir if args.out_dir is not None else _default_out_dir(args.dir))
    for path, system in zip(paths, systems):
        if len(system) == 0:
            print(f"warning: {path}: no segments; its figures show empty soil", file=sys.stderr)

    figures = []  # every figure is drawn before any file is written: all or nothing
    profile_options = {"layer_cm": args.layer_cm, "area_cm2": args.area_cm2, "box": box}
    if len(systems) == 1:
        fig = plot_rld_profile(systems[0], title=f"Root length density – {labels[0]}", **profile_options)
    else:
        fig = plot_rld_profile(dict(zip(labels, systems)), title="Root length density by variant", **profile_options)
    figures.append((fig, out_dir / f"rld_profile.{args.format}"))
    for label, system in zip(labels, systems):
        name = "projection" if len(systems) == 1 else f"projection_{_file_safe(label)}"
        fig = plot_projection(system, width_scale=args.width_scale, title=f"{label}: x–z projection")
        figures.append((fig, out_dir / f"{name}.{args.format}"))
    written = [path for _, path in figures]
    if len(set(written)) != len(written):
        raise RootsimError("two variants would write the same figure file; give directories with distinct names")
    from ..atomic import atomic_paths
    from ..result_folder import record_derived

    with atomic_paths(written) as temps:
        for (fig, _), tmp in zip(figures, temps):
            save_figure(fig, tmp)
    for path in written:
        print(path)
    record_derived(args.dir, written, command="plot")
    return 0


def _box(text: str | None):
    if text is None:
        return None
    from ..analysis.profile import check_box

    try:
        return check_box(tuple(part.strip() for part in text.split(",")))
    except RootsimError:
        raise RootsimError(f"--box {text!r}: give four numbers XMIN,XMAX,YMIN,YMAX in cm with XMIN < XMAX and "
                           "YMIN < YMAX, e.g. --box -10,10,-5,5") from None


def _default_out_dir(path: str) -> Path:
    p = Path(path)
    return p.parent if p.suffix == ".parquet" else p


def _file_safe(label: str) -> str:
    from ..path_names import safe_path_component

    return safe_path_component(label, what=f"--compare: variant label {label[:40]!r}")
