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
  rld_profile.png     stand-mean root length density (cm root per cm3 soil over the
                      stand's ground area; the title gives the day and that area) by
                      depth, depth downward; all roots and each root order; with
                      --compare one line per variant, one panel per order. Runs grown
                      from the same parameters with other seeds (e.g. the replicate
                      folders of 'rootsim batch') are replicates of one variant: drawn
                      as their mean with a band of +-1 standard deviation, labelled
                      with the spec name and the number of replicates
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
  rootsim plot results/batch/*/replicate_* --out-dir results/batch    # mean and spread per variant
"""


def register(parser: argparse.ArgumentParser) -> None:
    # let box corners like "-10,10,-5,5" be values, not unknown options (as 'rootsim analyze' does)
    if hasattr(parser, "_negative_number_matcher"):
        parser._negative_number_matcher = re.compile(r"^-\d[\d.,eE+-]*$|^-\.\d[\d.,eE+-]*$")
    parser.add_argument("dir", metavar="DIR", help="results directory (or segments.parquet) to plot")
    parser.add_argument("more", metavar="DIR2", nargs="*", default=[],
                        help="further results directories, as with --compare")
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
    paths = [args.dir] + list(args.more) + list(args.compare)
    systems = [RootSystem.read(p) for p in paths]
    labels = variant_labels(paths, systems)
    out_dir = ensure_output_dir(args.out_dir if args.out_dir is not None else _default_out_dir(args.dir))
    for path, system in zip(paths, systems):
        if len(system) == 0:
            print(f"warning: {path}: no segments; its figures show empty soil", file=sys.stderr)

    figures = []  # every figure is drawn before any file is written: all or nothing
    profile_options = {"layer_cm": args.layer_cm, "area_cm2": args.area_cm2, "box": box}
    groups = replicate_groups(paths, systems)
    if len(systems) == 1:
        fig = plot_rld_profile(systems[0], title=_title(labels[0], systems, args, box), **profile_options)
        names = ["projection"]
    elif all(len(members) == 1 for members in groups.values()):
        fig = plot_rld_profile(dict(zip(labels, systems)), title=_title("variants", systems, args, box),
                               **profile_options)
        names = [f"projection_{_file_safe(label)}" for label in labels]
    else:  # replicates of a variant: mean and spread per variant
        fig = plot_rld_profile({label: [systems[i] for i in members] for label, members in groups.items()},
                               title=_title("variants", systems, args, box), **profile_options)
        names = [""] * len(systems)
        for label, members in groups.items():
            for j, i in enumerate(members):
                names[i] = f"projection_{_file_safe(label)}" + (f"_replicate_{j + 1}" if len(members) > 1 else "")
    figures.append((fig, out_dir / f"rld_profile.{args.format}"))
    for label, name, system in zip(labels, names, systems):
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


def _title(what: str, systems: list, args, box) -> str:
    """RLD figure title naming the day (when all runs share it) and the ground area RLD refers to."""
    from ..analysis.profile import profile_area
    from ..plots import rld_title

    days = {(s.metadata.get("run") or {}).get("duration_days") for s in systems}
    day = days.pop() if len(days) == 1 else None
    try:
        areas = {round(profile_area(s, area_cm2=args.area_cm2, box=box), 6) for s in systems}
    except RootsimError:
        areas = set()
    title = rld_title(what, day=day, area_cm2=areas.pop() if len(areas) == 1 else None)
    if box is not None:
        title = title.replace("stand-mean RLD", "RLD in the box")
    return title


def _variant_key(system) -> str | None:
    """What a run was grown from, without its seed: runs with equal keys are replicates of one variant."""
    import json

    meta = dict(system.metadata or {})
    run = dict(meta.get("run") or {})
    if "seed" not in run or not (meta.get("spec_name") or meta.get("spec_file")):
        return None
    run.pop("seed")
    meta["run"] = run
    meta.pop("selection", None)
    return json.dumps(meta, sort_keys=True, default=str)


def replicate_groups(paths: list[str], systems: list) -> dict[str, list[int]]:
    """Group runs that are replicates of one variant (grown from the same parameters, other seeds).

    Returns ``{short label: [index, ...]}`` in the order the runs were given. The label is the
    spec name, else the name of the folder holding the run's folder (``batch/<variant>/replicate_001``),
    else the run's own folder name, whichever first tells the groups apart. Runs without grow
    metadata are groups of one.
    """
    keys: dict[str, list[int]] = {}
    for i, system in enumerate(systems):
        key = _variant_key(system)
        keys.setdefault(key if key is not None else f"#{i}", []).append(i)
    members = list(keys.values())

    def spec_name(i):
        meta = systems[i].metadata or {}
        return meta.get("spec_name") or (Path(str(meta["spec_file"])).stem if meta.get("spec_file") else None)

    def parent_name(i):
        p = Path(paths[i])
        p = p.parent if p.suffix == ".parquet" else p
        return p.resolve().parent.name or None

    for naming in (spec_name, parent_name, lambda i: _dir_name(paths[i])):
        names = [naming(group[0]) for group in members]
        if all(names) and len(set(names)) == len(names):
            return dict(zip(names, members))
    return {str(paths[group[0]]): group for group in members}


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
