"""``rootsim grow``: grow a root system from a parameter file."""

from __future__ import annotations

import json
import sys
from pathlib import Path

COMMAND = "grow"
ORDER = 10
HELP = "grow root systems from a TOML parameter file and write segments.parquet + summary.json"
DESCRIPTION = """\
Grow the stand described by a parameter file and write
  OUT/segments.parquet   one row per straight root segment (open it with pandas.read_parquet)
  OUT/summary.json       plants, segments, tips, total length, maximum depth, length by order
  OUT/manifest.json      the run's id and the SHA-256 checksum of each file (written last)

The folder is committed as a whole: the run is written into a hidden sibling folder and
swapped in at once, so OUT holds the earlier run or the new one, never a mix, and nothing
at all if growth fails (e.g. at the segment budget). Readers refuse a folder whose files
disagree with its manifest. OUT must be new or empty; --overwrite replaces an earlier run
together with everything derived from it (profiles, samples, exports, pictures).

example:
  rootsim grow params/cereal_fibrous.toml --out results/demo --days 30 --seed 7
"""


def register(parser) -> None:
    parser.add_argument("spec", metavar="SPEC", help="parameter file (.toml), e.g. params/cereal_fibrous.toml")
    parser.add_argument("--out", required=True, metavar="DIR", help="output directory (created if missing)")
    parser.add_argument("--days", type=float, metavar="N", help="override run.duration_days")
    parser.add_argument("--step-days", type=float, metavar="D", help="override run.time_step_days")
    parser.add_argument("--seed", type=int, metavar="S", help="override run.seed")
    parser.add_argument("--max-segments", type=int, metavar="N", help="override run.max_segments (segment budget)")
    parser.add_argument("--overwrite", action="store_true",
                        help="replace an earlier run in --out and every file derived from it")
    parser.add_argument("--quiet", action="store_true", help="print nothing on success")


def run(args) -> int:
    from ..atomic import atomic_write_text
    from ..progress import stage
    from ..result_folder import check_new_result_folder, file_sha256, write_result_folder
    from ..soil.thermal import grow_for_spec
    from ..spec import load_spec
    from ..stand_layout import layout_from_metadata

    spec = load_spec(args.spec)
    spec = spec.with_overrides(duration_days=args.days, time_step_days=args.step_days, seed=args.seed,
                               max_segments=args.max_segments)
    out = check_new_result_folder(args.out, overwrite=args.overwrite)  # before growing: fail early, create nothing
    with stage(f"growing {spec.name} for {spec.run.duration_days:g} days", enabled=not args.quiet):
        system = grow_for_spec(spec)  # calendar or thermal clock ([development])
    summary = system.summary()
    facts = {"spec_name": spec.name, "spec_file": str(args.spec), "duration_days": spec.run.duration_days,
             "time_step_days": spec.run.time_step_days, "seed": spec.run.seed}
    summary["stand_layout"] = layout_from_metadata(system.metadata)  # where the plants are

    def write_files(staging: Path) -> dict:
        system.write(staging / "segments.parquet")
        summary.update(facts)
        summary["run_id"] = file_sha256(staging / "segments.parquet")[:16]
        atomic_write_text(staging / "summary.json", json.dumps(summary, indent=2) + "\n")
        return facts

    with stage(f"writing {out / 'segments.parquet'} and summary.json", enabled=not args.quiet):
        manifest = write_result_folder(out, write_files, overwrite=args.overwrite, command="grow")
    if not args.quiet:
        print(f"{spec.name}: {summary['n_plants']} plant(s), {summary['n_segments']:,} segments, "
              f"{summary['n_tips']:,} tips, {summary['total_length_cm'] / 100:,.1f} m of root, "
              f"max depth {summary['max_depth_cm']:.1f} cm after {spec.run.duration_days:g} days")
        print(f"wrote {out / 'segments.parquet'}, {out / 'summary.json'} and {out / 'manifest.json'} "
              f"(run {manifest.run_id})", file=sys.stdout)
    return 0
