"""``rootsim fit``: fit architecture parameters to an observed RLD profile."""

from __future__ import annotations

COMMAND = "fit"
ORDER = 40
HELP = "fit parameters of a parameter file to an observed RLD profile (cores or profile.csv)"
DESCRIPTION = """\
Adjust the chosen parameters of a parameter file, within bounds, until the mean simulated RLD
profile (over --replicates fixed seeds) matches an observed one. The observed CSV needs the columns
depth_top_cm, depth_bottom_cm, rld_cm_per_cm3 (as in profile.csv from 'rootsim analyze' or cores.csv
from 'rootsim sample'; rows with the same depths are averaged). Writes
  OUT/fit.json            fitted values, objective (sum of squared RLD differences), evaluations
  OUT/fit_history.csv     every evaluated parameter set
  OUT/fit_profile.csv     observed and fitted RLD per depth interval
  OUT/fitted_spec.toml    the parameter file with the fitted values written in (comments kept)

A normal distribution's mean is fitted (its standard deviation kept); a uniform one is shifted.
The simulated side is the stand mean (root length over the whole ground area); cores taken in the
row read several times higher in the topsoil, so give a stand-mean profile. Depth intervals that
overlap (10 and 15 cm increments mixed) are refused.

--method global searches the whole box of bounds by differential evolution, each generation run as one
batch through the study runner (--workers N or --scheduler ADDRESS). It also takes observations on several
dates (a 'day' column), per-observation standard deviations as weights (a 'rld_standard_deviation_cm_per_cm3' column),
observations taken with cores at their positions (--observed-as cores: columns x_cm, y_cm, diameter_cm, as
in cores.csv), trait targets (--target d50_depth_cm=22:2), and reports a 95% profile-likelihood interval
for each fitted value (the other parameters re-optimised at each profile value; the simulated mean's own
sampling variance, from --noise-stands stands at the optimum / --replicates, added to each observation's
variance); it also writes OUT/fit_observed_vs_fitted.png and OUT/fit_likelihood_profiles.csv.

examples:
  rootsim fit params/cereal_fibrous.toml --observed field/plot12_stand_mean.csv --days 45 \\
      --param root_classes.nodal.initial_angle_from_vertical_deg=40:80 \\
      --param root_classes.lateral_first.max_length_cm=5:25 --replicates 2 --out results/fit
  rootsim fit params/soil_compacted_pan.toml --observed field/cores_two_dates.csv --observed-as cores \
      --method global --workers 2 --param root_classes.nodal.initial_angle_from_vertical_deg=25:75 \
      --param root_classes.nodal.elongation_rate_cm_per_day=1.5:4 --out results/fit_global
"""


def register(parser) -> None:
    parser.add_argument("spec", metavar="SPEC", help="parameter file (.toml) to start from")
    parser.add_argument("--observed", required=True, metavar="CSV", help="observed RLD profile")
    parser.add_argument("--param", action="append", required=True, metavar="KEY.PATH=LOW:HIGH",
                        help="parameter to fit and its bounds (repeatable)")
    parser.add_argument("--out", required=True, metavar="DIR", help="output directory")
    parser.add_argument("--replicates", type=int, default=3, metavar="N", help="replicate seeds per evaluation")
    parser.add_argument("--max-evaluations", type=int, default=40, metavar="N", help="evaluation budget")
    parser.add_argument("--seed", type=int, metavar="S", help="base seed of the replicates")
    parser.add_argument("--days", type=float, metavar="N", help="override run.duration_days (match the sampling date)")
    parser.add_argument("--step-days", type=float, metavar="D", help="override run.time_step_days")
    parser.add_argument("--area-cm2", type=float, metavar="A", help="ground area for the simulated RLD (local)")
    parser.add_argument("--method", choices=("local", "global"), default="local",
                        help="local: Powell from the file's values (default); global: differential evolution")
    parser.add_argument("--observed-as", choices=("stand", "cores"), default="stand",
                        help="global: compare with the whole-stand profile or with cores at the observed positions")
    parser.add_argument("--target", action="append", default=[], metavar="TRAIT=VALUE:STANDARD_DEVIATION",
                        help="global: a trait to reproduce, with its SD (repeatable)")
    parser.add_argument("--population", type=int, default=6, metavar="N",
                        help="global: population per parameter (default 6)")
    parser.add_argument("--generations", type=int, default=6, metavar="N", help="global: generations (default 6)")
    parser.add_argument("--noise-stands", type=int, default=8, metavar="N",
                        help="global: stands grown at the optimum to estimate the simulated mean's variance, which "
                             "is added to each observation's variance in the weights (default 8; 0: none)")
    parser.add_argument("--workers", type=int, default=1, metavar="N", help="global: worker processes")
    parser.add_argument("--scheduler", metavar="ADDRESS", help="global: an existing Dask scheduler")


def run(args) -> int:
    import json
    from pathlib import Path

    from ..atomic import atomic_write_text, ensure_output_dir
    from ..errors import RootsimError
    from ..fitting import fit_profile, fitted_toml, parse_fit_parameter, read_observed_profile
    from ..observations import check_depth_intervals
    from ..spec import load_spec

    if args.area_cm2 is not None and not args.area_cm2 > 0:
        raise RootsimError(f"--area-cm2 must be > 0 (got {args.area_cm2:g})")
    spec = load_spec(args.spec).with_overrides(duration_days=args.days, time_step_days=args.step_days)
    parameters = [parse_fit_parameter(p) for p in args.param]
    from ..result_folder import check_derived_file

    check_derived_file(args.observed)  # a sample file of an earlier run, or damaged, is refused
    if args.method == "global":
        return _run_global(args, spec, parameters)
    if args.target or args.observed_as != "stand":
        raise RootsimError("--target and --observed-as cores need --method global")
    observed = read_observed_profile(args.observed)
    check_depth_intervals(observed, source=str(args.observed))
    result = fit_profile(spec, observed, parameters, replicates=args.replicates, seed=args.seed,
                         max_evaluations=args.max_evaluations, area_cm2=args.area_cm2)
    out = ensure_output_dir(args.out)  # only once the fit has run: bad input leaves nothing behind
    report = {"spec_file": str(args.spec), "observed": str(args.observed), "values": result.values,
              "objective_rld_squared": result.objective, "evaluations": result.evaluations,
              "replicates": args.replicates, "bounds": {p.key_path: [p.low, p.high] for p in parameters}}
    atomic_write_text(Path(out) / "fit_history.csv", result.history.to_csv(index=False))
    atomic_write_text(Path(out) / "fit_profile.csv", result.profile.to_csv(index=False))
    atomic_write_text(Path(out) / "fitted_spec.toml", fitted_toml(args.spec, result.values))
    atomic_write_text(Path(out) / "fit.json", json.dumps(report, indent=2) + "\n")
    for key, value in result.values.items():
        print(f"{key} = {value:.4g}")
    print(f"objective {result.objective:.4g} (cm/cm3)^2 after {result.evaluations} evaluations; wrote {out}")
    return 0


def _run_global(args, spec, parameters) -> int:
    import json
    from pathlib import Path

    from matplotlib.backends.backend_agg import FigureCanvasAgg

    from ..atomic import atomic_path, atomic_write_text, ensure_output_dir
    from ..errors import RootsimError
    from ..fitting import fitted_toml, read_observations
    from ..study.global_fit import fit_global, observed_vs_fitted_figure, parse_trait_target

    if args.area_cm2 is not None:
        raise RootsimError("--area-cm2 is for --method local (the global fit uses the stand's area or the cores)")
    targets = [parse_trait_target(t) for t in args.target]
    observed = read_observations(args.observed, as_cores=args.observed_as == "cores")
    result = fit_global(spec, observed, parameters, as_cores=args.observed_as == "cores", targets=targets,
                        replicates=args.replicates, seed=args.seed, population=args.population,
                        generations=args.generations, workers=args.workers, scheduler=args.scheduler,
                        source=str(args.observed), noise_stands=args.noise_stands)
    figure = observed_vs_fitted_figure(result.profile)
    FigureCanvasAgg(figure)
    out = ensure_output_dir(args.out)
    report = {"spec_file": str(args.spec), "observed": str(args.observed), "method": "differential evolution",
              "observed_as": args.observed_as, "values": result.values,
              "interval_95": {k: list(v) for k, v in result.intervals.items()},
              "objective_chi2": result.objective, "evaluations": result.evaluations,
              "replicates": args.replicates, "targets": {t.name: [t.value, t.standard_deviation] for t in targets},
              "fitted_traits": result.traits, "bounds": {p.key_path: [p.low, p.high] for p in parameters},
              "interval_method": "profile likelihood, other parameters re-optimised, chi2 within 3.84 of the minimum",
              "noise_stands": args.noise_stands,
              "trait_simulation_standard_deviation": result.simulation_standard_deviation}
    atomic_write_text(Path(out) / "fit_history.csv", result.history.to_csv(index=False))
    atomic_write_text(Path(out) / "fit_profile.csv", result.profile.to_csv(index=False))
    atomic_write_text(Path(out) / "fit_likelihood_profiles.csv", result.likelihood_profiles.to_csv(index=False))
    atomic_write_text(Path(out) / "fitted_spec.toml", fitted_toml(args.spec, result.values))
    with atomic_path(Path(out) / "fit_observed_vs_fitted.png") as tmp:
        figure.savefig(tmp, format="png")
    atomic_write_text(Path(out) / "fit.json", json.dumps(report, indent=2) + "\n")
    for key, value in result.values.items():
        low, high = result.intervals[key]
        print(f"{key} = {value:.4g} (95% interval {low:.4g} to {high:.4g})")
    print(f"chi-square {result.objective:.4g} after {result.evaluations} evaluations; wrote {out}")
    return 0
