"""``rootsim batch``: grow many variants x replicates, serially or on Dask."""

from __future__ import annotations

COMMAND = "batch"
ORDER = 15
HELP = "grow several parameter files x stochastic replicates (process pool or Dask) and tabulate them"
DESCRIPTION = """\
Grow every parameter file given, each --replicates times with independent seeds, and write
  OUT/<variant>/replicate_<r>/segments.parquet and summary.json   one directory per run
  OUT/batch.csv, OUT/runs.parquet                                 one row per run: totals, depths, traits

A batch is a thin form of 'rootsim study run': each run folder is committed whole, a killed batch is
finished with --resume, and a folder holding another batch or study is refused.

Replicate r of a variant always gets the same seed (derived from the file's run.seed, or --seed), so
results do not depend on --workers or on which other variants are in the batch.

examples:
  rootsim batch params/cereal_fibrous.toml params/shallow_basal.toml --replicates 5 --out results/batch
  rootsim batch params/*.toml --replicates 20 --workers 2 --days 30 --out results/batch
  rootsim batch params/*.toml --replicates 100 --scheduler tcp://scheduler-host:8786 --out /shared/batch
"""


def register(parser) -> None:
    parser.add_argument("specs", nargs="+", metavar="SPEC", help="parameter files (.toml), one per variant")
    parser.add_argument("--out", required=True, metavar="DIR", help="output directory")
    parser.add_argument("--replicates", type=int, default=1, metavar="N", help="replicates per variant (default 1)")
    parser.add_argument("--seed", type=int, metavar="S", help="batch seed replacing each file's run.seed")
    parser.add_argument("--days", type=float, metavar="N", help="override run.duration_days for every variant")
    parser.add_argument("--step-days", type=float, metavar="D", help="override run.time_step_days")
    parser.add_argument("--max-segments", type=int, metavar="N", help="override run.max_segments")
    parser.add_argument("--workers", type=int, default=1, metavar="N",
                        help="worker processes (default 1: run serially in this process)")
    parser.add_argument("--scheduler", metavar="ADDRESS", help="run on an existing Dask scheduler instead")
    parser.add_argument("--resume", action="store_true",
                        help="finish a killed batch in --out (finished runs are kept, not rerun)")


def run(args) -> int:
    from ..batch import plan_batch, run_batch
    from ..errors import RootsimError
    from ..progress import stage
    from ..spec import load_spec

    if args.workers < 1:
        raise RootsimError(f"--workers must be >= 1 (got {args.workers})")
    specs = [load_spec(p).with_overrides(duration_days=args.days, time_step_days=args.step_days,
                                         max_segments=args.max_segments) for p in args.specs]
    runs = plan_batch(specs, replicates=args.replicates, seed=args.seed)
    with stage(f"growing {len(runs)} run(s) of {len(specs)} variant(s)"):
        table = run_batch(runs, out_dir=args.out, workers=args.workers, scheduler=args.scheduler, resume=args.resume)
    cols = [c for c in ("variant", "replicate", "n_segments", "total_length_cm", "max_depth_cm", "d50_depth_cm")
            if c in table]
    print(table[cols].to_string(index=False, float_format=lambda v: f"{v:.1f}"))
    print(f"wrote {len(table)} run(s) and {args.out}/batch.csv")
    return 0
