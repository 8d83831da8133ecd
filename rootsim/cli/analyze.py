"""``rootsim analyze``: RLD profile by depth layer and root traits of a grown or imported root system."""

from __future__ import annotations

import argparse
import json
import math
import re
from pathlib import Path

from ..errors import RootsimError

COMMAND = "analyze"
HELP = "RLD profile by depth and root traits (rooting depth, D50/D95, branching, topology) -> profile.csv, traits.json"
ORDER = 30
DESCRIPTION = """\
Measure a root system as in the field and the lab. Reads DIR/segments.parquet (written by
'rootsim grow' or 'rootsim import-rsml'; DIR may also be the file itself) and writes:

  profile.csv   one row per soil layer from the surface down to the deepest root:
                depth_top_cm, depth_bottom_cm, root_length_cm, rld_cm_per_cm3 (root
                length density, cm root per cm3 soil = layer length / (layer thickness x
                ground area)) and root_length_order_<k>_cm for each root order. Roots
                crossing a layer boundary are split exactly at it.
  traits.json   total length and length by order, tips, maximum rooting depth, D50/D95
                (depths above which 50 % / 95 % of the root length lie), root system width,
                convex hull volume, interbranch distance and insertion angle by lateral
                order, Gale & Grigal beta (cumulative fraction 1 - beta^depth), Fitter's
                topological indices per plant, and the ground area used.
  orientation.csv  per layer, the length-weighted angle of the roots from the vertical:
                mean_abs_cos (0.5 for randomly oriented roots, larger = steeper), mean angle,
                length shares at 0-30 (steep), 30-60 and 60-90 degrees (flat) and in 15-degree
                classes; orientation drives the bias of walls, tubes and grid counts.

The ground area is the stand's (plant spacing x row spacing x plants, stored by
'rootsim grow'). For imported data without a stand, give --area-cm2, or --box to count
only the roots inside a vertical column (like a monolith; the area is then the box's).

--root-class, --order and --plant measure part of the root system: the files are then
profile_<selection>.csv and traits_<selection>.json (e.g. profile_order-1.csv), so the
stand's own profile.csv stays. With --order or --root-class the RLD is per cm3 of the
whole stand's soil (the stand's RLD of those roots); with --plant it is per cm3 of the
chosen plants' share of the ground (ground area x chosen plants / plants).

The printout also shows the stand layout (rows along y at their x, plants along each
row, the stand's cell) so that cores and walls can be placed at real coordinates.
Large tables are measured in chunks of segments and plant by plant, within a bounded memory
per segment (see the README); progress shows on a terminal, one line per stage otherwise.

Examples:
  rootsim analyze results/demo
  rootsim analyze results/demo --layer-cm 10 --max-depth-cm 120
  rootsim analyze imported/plant7 --box -10,10,-5,5
  rootsim analyze results/demo --order 1            # -> profile_order-1.csv, traits_order-1.json
  rootsim analyze results/demo --root-class nodal --plant 0
"""


def register(parser: argparse.ArgumentParser) -> None:
    # Let box corners like "-10,10,-5,5" be values, not unknown options (argparse only knows "-10").
    if hasattr(parser, "_negative_number_matcher"):
        parser._negative_number_matcher = re.compile(r"^-\d[\d.,eE+-]*$|^-\.\d[\d.,eE+-]*$")
    parser.add_argument("dir", metavar="DIR", help="results directory holding segments.parquet (or the file itself)")
    parser.add_argument("--layer-cm", metavar="CM", default="5", help="soil layer thickness, cm (default 5)")
    parser.add_argument("--area-cm2", metavar="A", default=None,
                        help="ground area the roots belong to, cm² (default: from the stand layout)")
    parser.add_argument("--box", metavar="XMIN,XMAX,YMIN,YMAX", default=None,
                        help="count only roots inside this vertical column, cm; RLD uses its area "
                             "(--box=-10,10,-5,5 also works)")
    parser.add_argument("--max-depth-cm", metavar="D", default=None,
                        help="bottom of the profile, cm (default: the deepest root, rounded up to a layer)")
    parser.add_argument("--out-dir", metavar="DIR", default=None, help="where the two files go (default: DIR)")
    parser.add_argument("--root-class", metavar="NAME[,NAME...]", default=None,
                        help="only roots of these classes (names from the parameter file)")
    parser.add_argument("--order", metavar="N[,N...]", default=None,
                        help="only roots of these orders (0 = from the seed or shoot, 1 = their laterals, ...)")
    parser.add_argument("--plant", metavar="K[,K...]", default=None,
                        help="only these plants (plant ids 0..n-1; RLD then uses their share of the ground area)")


def _number(text, option: str, unit: str) -> float | None:
    if text is None:
        return None
    try:
        value = float(text)
    except ValueError:
        value = float("nan")
    if not (math.isfinite(value) and value > 0):
        raise RootsimError(f"{option} {text!r}: must be a number > 0 ({unit})")
    from ..limits import check_magnitude

    return check_magnitude(value, what=f"{option} {text!r}") if unit == "cm" else value


def _list(text: str | None, option: str, kind):
    """Comma-separated option values as a list of ``kind`` (None if the option was not given)."""
    if text is None:
        return None
    parts = [p.strip() for p in str(text).split(",") if p.strip()]
    if not parts:
        raise RootsimError(f"{option} {text!r}: give one or more values separated by commas")
    if kind is int:
        try:
            return [int(p) for p in parts]
        except ValueError:
            raise RootsimError(f"{option} {text!r}: give whole numbers separated by commas, e.g. {option} 0,1") from None
    return parts


def _box(text: str | None):
    if text is None:
        return None
    parts = [p.strip() for p in text.split(",")]
    try:
        values = [float(p) for p in parts]
    except ValueError:
        values = []
    if len(values) != 4 or not all(math.isfinite(v) for v in values):
        raise RootsimError(f"--box {text!r}: give four numbers XMIN,XMAX,YMIN,YMAX in cm, e.g. --box -10,10,-5,5")
    if not (values[1] > values[0] and values[3] > values[2]):
        raise RootsimError(f"--box {text!r}: need XMIN < XMAX and YMIN < YMAX")
    from ..limits import check_magnitude

    for value in values:
        check_magnitude(value, what=f"--box {text!r}")
    return tuple(values)


def _out_dir(path: str) -> Path:
    p = Path(path)
    return p.parent if p.suffix == ".parquet" else p


def run(args: argparse.Namespace) -> int:
    from ..analysis.chunked import chunked_layer_profile, chunked_root_traits
    from ..progress import progress_bar, stage
    from ..atomic import atomic_path, ensure_output_dir
    from ..rootsystem import RootSystem
    from ..path_names import safe_path_component
    from ..stand_layout import layout_from_metadata
    from ..subsets import select_segments, selection_name

    layer = _number(args.layer_cm, "--layer-cm", "cm")
    area = _number(args.area_cm2, "--area-cm2", "cm²")
    max_depth = _number(args.max_depth_cm, "--max-depth-cm", "cm")
    box = _box(args.box)
    if area is not None and box is not None:
        raise RootsimError("give either --area-cm2 or --box, not both (with --box the area is the box's)")
    with stage(f"reading {args.dir}"):
        system = RootSystem.read(args.dir)
    selection = {"order": args.order, "root_class": args.root_class, "plant": args.plant}
    if any(v is not None for v in selection.values()):
        system = select_segments(system, order=_list(args.order, "--order", int),
                                 root_class=_list(args.root_class, "--root-class", str),
                                 plant=_list(args.plant, "--plant", int),
                                 labels={k: f"--{k.replace('_', '-')} {v}".replace("{", "{{").replace("}", "}}")
                                         for k, v in selection.items()})
    suffix = selection_name(system.metadata.get("selection") or {})
    n = len(system)
    with progress_bar(total=2 * n, desc="analyze", unit="segment") as bar:
        with stage(f"profiling {n:,} segments"):
            profile = chunked_layer_profile(system, layer_cm=layer, area_cm2=area, box=box, max_depth_cm=max_depth,
                                            on_chunk=bar.update)
        with stage(f"traits of {n:,} segments, plant by plant"):
            traits = chunked_root_traits(system, layer_cm=layer, area_cm2=area, box=box, on_plant=bar.update)
    traits["profile"] = {
        "layer_cm": layer,
        "max_depth_cm": float(profile["depth_bottom_cm"].iloc[-1]),
        "box_cm": None if box is None else list(box),
        "ground_area_cm2": profile.attrs["ground_area_cm2"],
        "root_length_counted_cm": profile.attrs["root_length_counted_cm"],
        "root_length_outside_profile_cm": profile.attrs["root_length_outside_profile_cm"],
    }
    traits["source"] = str(args.dir)
    traits["run_id"] = system.metadata.get("run_id")  # the run these numbers come from (None outside a result folder)
    if suffix:
        traits["selection"] = system.metadata["selection"]
    from ..limits import require_finite

    require_finite(profile, what="profile.csv")
    require_finite(traits, what="traits.json")
    out = ensure_output_dir(args.out_dir if args.out_dir is not None else _out_dir(args.dir))
    tail = f"_{safe_path_component(suffix, what='selection')}" if suffix else ""
    csv_path, json_path = out / f"profile{tail}.csv", out / f"traits{tail}.json"
    from ..analysis import orientation_by_depth

    orientation = orientation_by_depth(system, layer_cm=layer, max_depth_cm=float(profile["depth_bottom_cm"].iloc[-1]))
    orientation_path = out / f"orientation{tail}.csv"
    with atomic_path(csv_path) as tmp_csv, atomic_path(json_path) as tmp_json, \
            atomic_path(orientation_path) as tmp_orientation:
        profile.to_csv(tmp_csv, index=False, float_format="%.10g")
        tmp_json.write_text(json.dumps(traits, indent=2, allow_nan=False) + "\n", encoding="utf-8")
        orientation.to_csv(tmp_orientation, index=False, float_format="%.6g")
    from ..result_folder import record_derived

    record_derived(args.dir, [csv_path, json_path, orientation_path], command="analyze")
    print(summary_text(str(args.dir), traits, profile, layout_from_metadata(system.metadata)))
    steep = "; ".join(f"{r.depth_top_cm:g}-{r.depth_bottom_cm:g} cm: {r.mean_abs_cos:.2f}"
                      for r in orientation.head(6).itertuples() if r.root_length_cm > 0)
    print(f"  orientation, mean |cos| from vertical (0.5 = random, 1 = vertical): {steep}")
    print(f"wrote {csv_path}, {json_path} and {orientation_path}")
    return 0


def _fmt(value, spec: str = ".1f", unit: str = "") -> str:
    return "n/a" if value is None else f"{value:{spec}}{unit}"


def summary_text(source: str, traits: dict, profile, layout: dict | None = None) -> str:
    """A short human summary of the traits, the stand layout (``layout`` from
    :func:`rootsim.stand_layout.layout_from_metadata`, if any) and the top of the profile."""
    from ..stand_layout import describe_layout

    by_order = ", ".join(f"order {k}: {v:,.1f}" for k, v in traits["length_by_order_cm"].items())
    chosen = traits.get("selection") or {}
    if chosen:
        source += " (only " + ", ".join(f"{k.replace('_', ' ')} {', '.join(map(str, v))}" for k, v in chosen.items()) + ")"
    lines = [
        f"{source}: {traits['n_plants']} plant(s), {traits['n_segments']:,} segments, {traits['n_tips']:,} tips",
        f"  root length {traits['total_length_cm']:,.1f} cm ({by_order})",
        f"  rooting depth: max {traits['max_depth_cm']:.1f} cm, D50 {_fmt(traits['d50_depth_cm'], unit=' cm')}, "
        f"D95 {_fmt(traits['d95_depth_cm'], unit=' cm')}; Gale & Grigal beta {_fmt(traits['gale_grigal_beta'], '.4f')}",
        f"  width {traits['width_cm']:.1f} cm, convex hull {traits['convex_hull_volume_cm3']:,.0f} cm3 (mean per plant); "
        f"topological index {_fmt(traits['mean_topological_index'], '.3f')}",
    ]
    lines += describe_layout(layout)
    rows = [f"{r.depth_top_cm:g}-{r.depth_bottom_cm:g} cm: {r.rld_cm_per_cm3:.3g}" for r in profile.head(6).itertuples()]
    more = " ..." if len(profile) > 6 else ""
    lines.append(f"  RLD, cm/cm3 (ground area {profile.attrs['ground_area_cm2']:,.0f} cm2): " + "; ".join(rows) + more)
    return "\n".join(lines)
