"""``rootsim bench``: measured throughputs next to simple floors."""

from __future__ import annotations

import json
import sys

COMMAND = "bench"
ORDER = 90
HELP = "benchmark growth, profiles, sampling and exports against simple numpy floors"
DESCRIPTION = """\
Grow a stand of at least --segments segments, then time each later stage (profiles, core sampling,
exports) on it. Each stage is reported next to a floor measured in the same run (the best simple numpy
way to do the same job; for growth: numpy drawing the same number of random unit steps and summing them
into positions), as a ratio. Times are CPU seconds of the process (time.process_time), medians of
repeated runs, so other work on the machine does not inflate them.

examples:
  rootsim bench
  rootsim bench --json > bench.json
"""


def register(parser) -> None:
    parser.add_argument("--segments", type=int, default=1_000_000, metavar="N",
                        help="minimum number of segments of the bench stand (default 1,000,000)")
    parser.add_argument("--seed", type=int, default=0, metavar="S", help="seed of the bench stand")
    parser.add_argument("--stage", action="append", metavar="NAME", dest="stages",
                        help="run only this later stage (repeatable; one of: %s); growth always runs" % ", ".join(__import__("rootsim.bench", fromlist=["stage_names"]).stage_names()))
    parser.add_argument("--json", action="store_true", help="print one JSON object instead of a table")


def run(args) -> int:
    from ..bench import run_bench
    from ..errors import RootsimError

    if args.segments < 1:
        raise RootsimError("--segments must be >= 1")
    from ..bench import stage_names

    unknown = sorted(set(args.stages or ()) - set(stage_names()))
    if unknown:
        raise RootsimError(f"--stage {', '.join(unknown)}: unknown stage (allowed: {', '.join(stage_names())})")
    say = (lambda msg: print(f"bench: {msg} ...", file=sys.stderr)) if sys.stderr.isatty() else None
    results = run_bench(segments=args.segments, seed=args.seed, stages=args.stages, report=say)
    if args.json:
        print(json.dumps(results, indent=2))
        return 0
    from ..bench import TIMING

    print(f"times: {TIMING}")
    print(f"{'stage':<16}{'segments':>12}{'seconds':>10}{'floor s':>10}{'ratio':>8}  extra")
    for name, e in results.items():
        extra = ", ".join(f"{k}={v:.4g}" if isinstance(v, float) else f"{k}={v}" for k, v in e.items()
                          if k not in ("segments", "seconds", "floor_seconds", "ratio_to_floor", "floor", "segments_per_second",
                                        "timing"))
        print(f"{name:<16}{e['segments']:>12,}{e['seconds']:>10.3f}{e['floor_seconds']:>10.3f}{e['ratio_to_floor']:>8.2f}  {extra}")
        print(f"{'':<16}floor: {e['floor']}")
    return 0
