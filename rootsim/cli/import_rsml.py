"""``rootsim import-rsml``: read an RSML file into a segment table other rootsim commands can use."""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

COMMAND = "import-rsml"
HELP = "import an RSML file (Root System Markup Language) as a result folder DIR (segments.parquet, ...)"
ORDER = 71
DESCRIPTION = """\
Read a root system from an RSML file (for example traced from images or exported by another
tool) and write a result folder that 'rootsim analyze', 'sample', 'plot', 'render' and 'export'
read and check like a grown run:
  DIR/segments.parquet   one row per straight segment
  DIR/summary.json       plants, roots, segments, total length, maximum depth, the source file
  DIR/manifest.json      the run's id and the SHA-256 checksum of each file (written last)

The folder is committed as a whole, as by 'rootsim grow': written into a hidden sibling and
swapped in at once. DIR must be new or empty; --overwrite replaces an earlier run there
together with everything derived from it.

  - root order = nesting depth (roots directly under a <plant> are order 0, their laterals 1, ...)
  - root class = the root's label attribute, else order_0, order_1, ...
  - radius = diameter / 2 from the root's "diameter" function; roots without one get
    --default-radius-cm (a note says so)
  - traced geometry is kept as it is: a lateral's segments are its own polyline, and its link
    to the parent (branch-segment-index, else the nearest parent segment) adds no length
  - --connectors draws a lateral that starts off its parent joined to it: one connector segment
    from the branch point on the parent to its first traced point (is_connector = true,
    length_cm = 0), shown by render and VTK export and never counted by analyze or sample
  - units from <metadata><unit> and <resolution> (coordinate / resolution = value in unit),
    every unit the RSML standard lists (m ... nm, inch); files in pixels need --cm-per-pixel
  - 2-D files (all points at z = 0 or without z) are images: image y (downwards) becomes depth
  - a function with fewer samples than points leaves the rest without values (radius then
    --default-radius-cm), extra samples are ignored, as the standard says
  - roots that cannot be measured (no geometry, fewer than 2 points) are skipped with one
    warning line that counts them; --strict refuses such files

Nothing is written if the file has an error; the message names the element, e.g.
"roots.rsml: plant 1 > root 3 > properties > branch-segment-index: value 99 is not a point of
the parent's polyline (allowed: 0 to 11)".

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
    parser.add_argument("--strict", action="store_true",
                        help="refuse files with roots that cannot be measured instead of skipping them")
    parser.add_argument("--connectors", action="store_true",
                        help="draw each lateral that starts off its parent joined to it: a connector segment from "
                             "the branch point to its first traced point (column is_connector, length_cm 0; "
                             "never counted by analyze or sample; off by default)")
    parser.add_argument("--overwrite", action="store_true",
                        help="replace an earlier run in --out and every file derived from it")


def run(args: argparse.Namespace) -> int:
    import json
    import warnings

    from ..atomic import atomic_write_text
    from ..formats.rsml import read_rsml
    from ..formats.rsml_reader import skipped_roots_message
    from ..result_folder import check_new_result_folder, write_result_folder

    out = check_new_result_folder(args.out, overwrite=args.overwrite)  # before reading: fail early, create nothing
    with warnings.catch_warnings():  # the skipped-roots warning is printed below as one line
        warnings.simplefilter("ignore", UserWarning)
        system = read_rsml(args.file, default_radius_cm=args.default_radius_cm, cm_per_pixel=args.cm_per_pixel,
                           strict=args.strict, connectors=args.connectors)
    s = system.summary()  # of the traced segments: connectors are not roots
    facts = {"source_file": str(args.file), "format": "rsml", "connectors": system.n_connectors}

    def write_files(staging: Path) -> dict:
        system.write(staging / "segments.parquet")  # connector rows included, marked is_connector
        atomic_write_text(staging / "summary.json", json.dumps({**s, **facts}, indent=2, default=str) + "\n")
        return facts

    manifest = write_result_folder(out, write_files, overwrite=args.overwrite, command="import-rsml")
    imported = system.metadata.get("import", {})
    skipped = skipped_roots_message(args.file, imported)
    if skipped:
        print(f"warning: {skipped}", file=sys.stderr)
    if imported.get("default_radius_cm") is not None:
        print(f"note: {args.file}: {imported.get('segments_without_diameter', 0):,} segments without a diameter value "
              f"got radius {imported['default_radius_cm']:g} cm (--default-radius-cm)", file=sys.stderr)
    print(f"{out / 'segments.parquet'}: {s['n_plants']} plant(s), {s['n_roots']:,} roots, {s['n_segments']:,} "
          f"segments, {s['total_length_cm']:.1f} cm"
          + (f", {system.n_connectors:,} zero-length connectors drawn" if system.n_connectors else "")
          + f" (run {manifest.run_id}; summary.json and manifest.json beside it)")
    return 0
