"""``rootsim import-rsml``: read an RSML file into a segment table other rootsim commands can use."""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

COMMAND = "import-rsml"
HELP = "import an RSML file (Root System Markup Language) as DIR/segments.parquet"
ORDER = 71
DESCRIPTION = """\
Read a root system from an RSML file (for example traced from images or exported by another
tool) and write DIR/segments.parquet, which 'rootsim sample', 'rootsim plot', 'rootsim render'
and 'rootsim export' read like a grown system.

  - root order = nesting depth (roots directly under a <plant> are order 0, their laterals 1, ...)
  - root class = the root's label attribute, else order_0, order_1, ...
  - radius = diameter / 2 from the root's "diameter" function; roots without one get
    --default-radius-cm (a note says so)
  - a lateral starts at the nearest point of its parent root's polyline
  - units from <metadata><unit> and <resolution> (coordinate / resolution = value in unit);
    files in pixels need --cm-per-pixel
  - 2-D files (points without z) are read as images: image y (downwards) becomes depth

Nothing is written if the file has an error; the message names the element, e.g.
"roots.rsml: plant 1 > root 3 > geometry: polyline has 1 point (need >= 2)".

examples:
  rootsim import-rsml traced/plant_a.rsml --out results/plant_a
  rootsim import-rsml scan.rsml --out results/scan --cm-per-pixel 0.0042 --default-radius-cm 0.02
"""


def register(parser: argparse.ArgumentParser) -> None:
    from ..formats.rsml import DEFAULT_RADIUS_CM

    parser.add_argument("file", metavar="FILE.rsml", help="RSML file to read")
    parser.add_argument("--out", metavar="DIR", required=True, help="directory to write segments.parquet into")
    parser.add_argument("--default-radius-cm", type=float, default=DEFAULT_RADIUS_CM, metavar="R",
                        help=f"radius of roots without a diameter function, cm (default {DEFAULT_RADIUS_CM:g})")
    parser.add_argument("--cm-per-pixel", type=float, default=None, metavar="S",
                        help="pixel size in cm, for files whose unit is pixel")


def run(args: argparse.Namespace) -> int:
    from ..atomic import ensure_output_dir
    from ..formats.rsml import read_rsml
    from ..segment_table import write_segments

    system = read_rsml(args.file, default_radius_cm=args.default_radius_cm, cm_per_pixel=args.cm_per_pixel)
    out = ensure_output_dir(args.out)
    target = write_segments({c: system[c] for c in system.columns}, Path(out) / "segments.parquet",
                            metadata=system.metadata)
    facts = system.metadata.get("import", {})
    if facts.get("default_radius_cm") is not None:
        print(f"note: {args.file}: roots without a diameter function got radius {facts['default_radius_cm']:g} cm "
              "(--default-radius-cm)", file=sys.stderr)
    s = system.summary()
    print(f"{target}: {s['n_plants']} plant(s), {s['n_roots']:,} roots, {s['n_segments']:,} segments, "
          f"{s['total_length_cm']:.1f} cm")
    return 0
