"""``rootsim render``: a 3D picture of a grown root system, rendered offscreen to PNG."""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

from ..errors import RootsimError

COMMAND = "render"
HELP = "render a 3D picture of a root system to PNG (no display needed)"
ORDER = 61
DESCRIPTION = """\
Render a 3D picture of a root system to a PNG file, offscreen (works on servers
without a display).

The picture shows every root as a line (thicker for lower orders) coloured by
--color-by (one colour-blind-safe palette, the same as in 'rootsim plot' and meshes),
the soil surface as a translucent plane at depth 0, a depth ruler in cm, a horizontal
scale bar (side and iso views), the walls of a pot or rhizobox, the plants and rows
(top view), a legend (or a colour bar for age) and an optional title. The scene is
framed tightly.

  --color-by order       root order: 0 = roots from the seed or shoot, 1 = their laterals, ...
  --color-by root_class  root class names from the parameter file
  --color-by plant       one colour per plant of the stand
  --color-by age         days since the segment formed (colour bar)
  --view side|top|iso    looking horizontally, straight down, or obliquely from above
  --style tubes          shaded tubes of the real root radius instead of lines (close-ups
                         of a plant; add --tube-scale 5 to thicken fine roots)
  --soil-field NAME      a translucent vertical slice of that soil field (e.g.
                         penetration_resistance_mpa) through the stand's centre, behind the
                         roots, with a colour bar naming the field and its unit (side and iso
                         views); the soil comes from --soil-spec SPEC.toml, else from the
                         parameter file recorded in the run

DIR is a results directory written by 'rootsim grow' (holding segments.parquet) or a
segments.parquet file. A root system without segments renders as an empty scene
(surface and ruler only) with a warning.

Examples:
  rootsim render results/demo --png results/demo/roots.png
  rootsim render results/demo --png side.png --view side --color-by age --size 1600x1200 --title "Trial 7, day 40"
  rootsim render results/pot_test --png tubes.png --style tubes --tube-scale 3
  rootsim render results/pan --png pan.png --view side --soil-field penetration_resistance_mpa \
      --soil-spec params/field_plough_pan.toml
"""


def register(parser: argparse.ArgumentParser) -> None:
    from ..render import COLOR_BY, STYLES, VIEWS

    parser.add_argument("dir", metavar="DIR", help="results directory (or segments.parquet) to render")
    parser.add_argument("--png", metavar="FILE", required=True, help="PNG file to write")
    parser.add_argument("--color-by", choices=COLOR_BY, default="order", help="colouring (default order)")
    parser.add_argument("--view", choices=VIEWS, default="iso", help="viewpoint (default iso)")
    parser.add_argument("--size", metavar="WxH", default="1200x900", help="image size in pixels (default 1200x900)")
    parser.add_argument("--title", metavar="T", default=None, help="title at the top of the picture")
    parser.add_argument("--style", choices=STYLES, default="lines",
                        help="lines (default; fast for any stand) or shaded tubes of the root radius")
    parser.add_argument("--tube-scale", metavar="F", type=float, default=1.0,
                        help="with --style tubes: thicken tubes by this factor (default 1 = true radius)")
    parser.add_argument("--soil-field", metavar="NAME", default=None,
                        help="draw this soil field as a translucent slice behind the roots (side and iso views)")
    parser.add_argument("--soil-spec", metavar="SPEC.toml", default=None,
                        help="parameter file whose soil --soil-field comes from (default: the one recorded in the run)")


def run(args: argparse.Namespace) -> int:
    from ..progress import stage
    from ..render import parse_size, render_png, root_scene
    from ..rootsystem import RootSystem

    size = parse_size(args.size)
    if not str(args.png).lower().endswith(".png"):
        raise RootsimError(f"--png {args.png}: the file name must end in .png")
    if args.soil_spec is not None and args.soil_field is None:
        raise RootsimError("--soil-spec needs --soil-field NAME (the field to draw)")
    if not (args.tube_scale > 0 and args.tube_scale < float("inf")):  # also refuses nan
        raise RootsimError(f"--tube-scale {args.tube_scale:g}: tube scale not allowed (allowed: a number > 0; "
                           "1 = the true radius)")
    if args.soil_field is not None and args.view == "top":
        raise RootsimError(f"--soil-field {args.soil_field} with --view top: the field is drawn as a vertical slice, "
                           "which cannot be seen from the top (allowed views: side, iso)")
    from ..atomic import check_output_location

    check_output_location(args.png)  # before the table is read and the picture drawn
    with stage(f"reading {args.dir}"):
        system = RootSystem.read(args.dir)
    soil_fields = _soil_fields(args, system) if args.soil_field is not None else None
    if len(system) == 0:
        print(f"warning: {args.dir}: no segments; the picture shows only the soil surface and the ruler", file=sys.stderr)
    with stage(f"rendering {len(system):,} segments to {args.png}"):
        scene = root_scene(system, color_by=args.color_by, style=args.style)
        del system  # the picture needs only the scene: the table's memory is freed before drawing
        path = render_png(scene, args.png, color_by=args.color_by, view=args.view, size=size, title=args.title,
                          style=args.style, tube_scale=args.tube_scale, soil_fields=soil_fields,
                          soil_field=args.soil_field)
    from ..result_folder import record_derived

    record_derived(args.dir, [path], command="render")
    print(path)
    return 0


def _soil_fields(args: argparse.Namespace, system):
    """The compiled soil of ``--soil-spec``, else of the parameter file recorded in the run's metadata."""
    from ..soil.build import soil_fields_from_spec
    from ..spec import load_spec

    spec_path = args.soil_spec or (getattr(system, "metadata", None) or {}).get("spec_file")
    if not spec_path:
        raise RootsimError(f"--soil-field {args.soil_field}: {args.dir} records no parameter file "
                           "(allowed: give one with --soil-spec SPEC.toml)")
    if args.soil_spec is None and not Path(spec_path).is_file():
        raise RootsimError(f"--soil-field {args.soil_field}: {args.dir} was grown from {spec_path}, not found from "
                           "here (moved, or relative to another folder) (allowed: give it with --soil-spec SPEC.toml)")
    fields = soil_fields_from_spec(load_spec(spec_path))
    try:
        fields.index(args.soil_field)
    except RootsimError:
        raise RootsimError(f"--soil-field {args.soil_field}: not a soil field of {spec_path} (allowed: "
                           f"{', '.join(fields.names) or 'none defined'})") from None
    return fields
