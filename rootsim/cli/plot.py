"""``rootsim plot``: 2D figures of grown root systems (RLD profile by depth, rhizobox-style projection)."""

from __future__ import annotations

import argparse
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

Examples:
  rootsim plot results/demo
  rootsim plot results/early_sown --compare results/late_sown --layer-cm 10 --format pdf
"""


def register(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("dir", metavar="DIR", help="results directory (or segments.parquet) to plot")
    parser.add_argument("--compare", metavar="DIR2", nargs="+", default=[],
                        help="further results directories drawn in the same RLD figure")
    parser.add_argument("--out-dir", metavar="DIR", default=None, help="where the figures go (default: DIR)")
    parser.add_argument("--layer-cm", metavar="CM", type=float, default=5.0,
                        help="soil layer thickness for the RLD profile, cm (default 5)")
    parser.add_argument("--format", choices=("png", "svg", "pdf"), default="png", help="file format (default png)")
    parser.add_argument("--width-scale", metavar="F", type=float, default=1.0,
                        help="widen roots in the projection by this factor (default 1 = true scale)")


def variant_labels(paths: list[str], systems: list) -> list[str]:
    """Legend labels: the directory names; where two clash, the spec file name, else the path as given."""
    names = [_dir_name(p) for p in paths]
    out = []
    for path, name, system in zip(paths, names, systems):
        if names.count(name) == 1:
            out.append(name)
            continue
        spec = (system.metadata or {}).get("spec_file")
        out.append(Path(str(spec)).stem if spec else str(path))
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
    paths = [args.dir] + list(args.compare)
    systems = [RootSystem.read(p) for p in paths]
    labels = variant_labels(paths, systems)
    out_dir = ensure_output_dir(args.out_dir if args.out_dir is not None else _default_out_dir(args.dir))
    for path, system in zip(paths, systems):
        if len(system) == 0:
            print(f"warning: {path}: no segments; its figures show empty soil", file=sys.stderr)

    written = []
    if len(systems) == 1:
        fig = plot_rld_profile(systems[0], layer_cm=args.layer_cm, title=f"Root length density – {labels[0]}")
    else:
        fig = plot_rld_profile(dict(zip(labels, systems)), layer_cm=args.layer_cm, title="Root length density by variant")
    written.append(save_figure(fig, out_dir / f"rld_profile.{args.format}"))
    for label, system in zip(labels, systems):
        name = "projection" if len(systems) == 1 else f"projection_{_file_safe(label)}"
        fig = plot_projection(system, width_scale=args.width_scale, title=f"{label}: x–z projection")
        written.append(save_figure(fig, out_dir / f"{name}.{args.format}"))
    for path in written:
        print(path)
    return 0


def _default_out_dir(path: str) -> Path:
    p = Path(path)
    return p.parent if p.suffix == ".parquet" else p


def _file_safe(label: str) -> str:
    return "".join(c if c.isalnum() or c in "-_." else "_" for c in label)
