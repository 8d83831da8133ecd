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

Both files are written atomically: if growth fails, nothing is left half-written.

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
    parser.add_argument("--quiet", action="store_true", help="print nothing on success")


def run(args) -> int:
    from ..atomic import atomic_write_text, ensure_output_dir
    from ..soil.thermal import grow_for_spec
    from ..spec import load_spec

    spec = load_spec(args.spec)
    spec = spec.with_overrides(duration_days=args.days, time_step_days=args.step_days, seed=args.seed,
                               max_segments=args.max_segments)
    out = ensure_output_dir(args.out)
    system = grow_for_spec(spec)  # calendar or thermal clock ([development])
    summary = system.summary()
    summary.update({"spec_name": spec.name, "spec_file": str(args.spec), "duration_days": spec.run.duration_days,
                    "time_step_days": spec.run.time_step_days, "seed": spec.run.seed})
    system.write(Path(out) / "segments.parquet")
    atomic_write_text(Path(out) / "summary.json", json.dumps(summary, indent=2) + "\n")
    if not args.quiet:
        print(f"{spec.name}: {summary['n_plants']} plant(s), {summary['n_segments']:,} segments, "
              f"{summary['n_tips']:,} tips, {summary['total_length_cm'] / 100:,.1f} m of root, "
              f"max depth {summary['max_depth_cm']:.1f} cm after {spec.run.duration_days:g} days")
        print(f"wrote {out / 'segments.parquet'} and {out / 'summary.json'}", file=sys.stdout)
    return 0
