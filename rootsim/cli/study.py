"""``rootsim study``: run a study file, compare its variants, and analyse its sensitivity."""

from __future__ import annotations

COMMAND = "study"
ORDER = 16
HELP = "run a whole trait study (variants x replicates x measurements), compare variants, sensitivity"
DESCRIPTION = """\
A study file (TOML) names a base parameter file, factors or named variants, replicates, a master seed
and what to measure per run (profile layers, traits, virtual cores / walls / tubes).

  rootsim study run STUDY.toml --out DIR [--workers N | --scheduler ADDRESS] [--resume]
      runs every (variant, replicate); writes DIR/runs.parquet, profiles.parquet, samples.parquet and one
      folder per run, each committed whole; a killed study is finished with --resume
  rootsim study compare DIR [--reference VARIANT] [--difference 0.2]
      means, SDs, 95% CIs, differences to the reference (Welch t, Holm-corrected), effect sizes, the number
      of cores and plants needed to see a given relative difference per depth layer; figures and one
      self-contained HTML report in DIR/compare/
  rootsim study sensitivity STUDY.toml --method morris|sobol --trait NAME --out DIR
      global sensitivity of a trait to the study's factor ranges (SALib), through the same runner

examples:
  rootsim study run params/studies/eastmoor_pan_trial.toml --out results/study --workers 2
  rootsim study compare results/study --reference shallow_sparse
  rootsim study sensitivity params/studies/eastmoor_screening.toml --method morris --trait d50_depth_cm \\
      --samples 4 --workers 2 --out results/screening
"""


def register(parser) -> None:
    sub = parser.add_subparsers(title="study commands", metavar="ACTION", parser_class=type(parser))
    run_p = sub.add_parser("run", help="run a study file", description="Run every (variant, replicate) of a study file.")
    run_p.add_argument("study", metavar="STUDY", help="study file (.toml)")
    run_p.add_argument("--out", required=True, metavar="DIR", help="study folder")
    run_p.add_argument("--workers", type=int, default=1, metavar="N", help="worker processes (default 1: serial)")
    run_p.add_argument("--scheduler", metavar="ADDRESS", help="run on an existing Dask scheduler (tcp://host:8786)")
    run_p.add_argument("--resume", action="store_true", help="finish a study started in --out")
    run_p.add_argument("--replicates", type=int, metavar="N", help="override the study's replicates")
    run_p.add_argument("--days", type=float, metavar="N", help="override run.duration_days for every run")
    run_p.set_defaults(handler=_run)

    cmp_p = sub.add_parser("compare", help="statistics, sampling power, figures and an HTML report",
                           description="Compare the variants of a finished study folder.")
    cmp_p.add_argument("folder", metavar="DIR", help="study folder written by 'rootsim study run'")
    cmp_p.add_argument("--reference", metavar="VARIANT", help="variant the others are compared with (default: first)")
    cmp_p.add_argument("--difference", type=float, default=0.2, metavar="FRACTION",
                       help="relative RLD difference the sampling-power table is for (default 0.2 = 20%%)")
    cmp_p.add_argument("--power", type=float, default=0.8, metavar="P", help="statistical power (default 0.8)")
    cmp_p.add_argument("--alpha", type=float, default=0.05, metavar="A", help="significance level (default 0.05)")
    cmp_p.add_argument("--out", metavar="DIR", help="report folder (default DIR/compare)")
    cmp_p.set_defaults(handler=_compare)

    sen_p = sub.add_parser("sensitivity", help="global sensitivity (Morris or Sobol') of a trait",
                           description="Global sensitivity of traits to the factor ranges of a study file (SALib).")
    sen_p.add_argument("study", metavar="STUDY", help="study file whose factors have range = [low, high]")
    sen_p.add_argument("--method", choices=("morris", "sobol"), default="morris",
                       help="Morris elementary effects (screening) or Sobol' first and total indices")
    sen_p.add_argument("--trait", action="append", required=True, metavar="NAME", help="trait (column of runs.parquet)")
    sen_p.add_argument("--samples", type=int, default=8, metavar="N",
                       help="Morris trajectories, or Sobol' base samples (a power of 2) (default 8)")
    sen_p.add_argument("--out", required=True, metavar="DIR", help="folder for the runs and the results")
    sen_p.add_argument("--workers", type=int, default=1, metavar="N", help="worker processes (default 1: serial)")
    sen_p.add_argument("--scheduler", metavar="ADDRESS", help="run on an existing Dask scheduler (tcp://host:8786)")
    sen_p.add_argument("--resume", action="store_true", help="finish an analysis started in --out")
    sen_p.set_defaults(handler=_sensitivity)


def run(args) -> int:  # pragma: no cover - argparse dispatches to the action handlers
    from ..errors import RootsimError

    raise RootsimError("rootsim study: give an action: run, compare or sensitivity (see 'rootsim study --help')")


def _run(args) -> int:
    from ..errors import RootsimError
    from ..study import plan_study, run_plan

    overrides = {}
    if args.replicates is not None:
        overrides["replicates"] = args.replicates
    plan = plan_study(args.study, overrides=overrides)
    if args.days is not None:
        from ..errors import SpecError

        tasks = []
        for t in plan.tasks:
            try:
                spec = None if t.spec is None else t.spec.with_overrides(duration_days=args.days)
            except SpecError as exc:
                raise RootsimError(f"--days {args.days:g}: {exc.cli_message()}") from None
            tasks.append(type(t)(**{**t.__dict__, "spec": spec}))
        plan.tasks = tasks
    results = run_plan(plan, args.out, workers=args.workers, scheduler=args.scheduler, resume=args.resume)
    runs = results.runs
    failed = runs[runs["status"] != "ok"]
    print(f"{plan.name}: {len(runs)} run(s) of {len(plan.variants)} variant(s), {len(failed)} failed; wrote {args.out}")
    for _, row in failed.head(5).iterrows():
        print(f"  failed {row['run_id']}: {row['error']}")
    return 0


def _compare(args) -> int:
    from pathlib import Path

    from ..study.report import compare_study

    out = Path(args.out) if args.out else Path(args.folder) / "compare"
    summary = compare_study(args.folder, out, reference=args.reference, difference=args.difference,
                            power=args.power, alpha=args.alpha)
    print(summary)
    return 0


def _sensitivity(args) -> int:
    from ..study.sensitivity import run_sensitivity

    table = run_sensitivity(args.study, args.out, method=args.method, traits=args.trait, samples=args.samples,
                            workers=args.workers, scheduler=args.scheduler, resume=args.resume)
    print(table.to_string(index=False, float_format=lambda v: f"{v:.3g}"))
    print(f"wrote {args.out}/sensitivity.csv and sensitivity.png")
    return 0
