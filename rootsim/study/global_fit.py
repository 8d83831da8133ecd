"""Global fitting of architecture parameters, evaluated through the study runner.

The objective is a weighted sum of squares over every observation (several sampling dates, whole-stand
profiles or virtual cores at the observed positions) and optional trait targets::

    chi2 = sum_i (simulated_i - observed_i)^2 / (sd_i^2 + s_i^2 / R) + (the same for each trait target)

with ``sd_i`` the observation's standard deviation when given (1 cm/cm³ otherwise, see below), ``R`` =
``replicates`` and ``s_i^2`` the between-stand variance of observable i, estimated once at the search's optimum
from ``max(replicates, noise_stands)`` stands. The simulated value is the mean over R stands grown with fixed
seeds (common random numbers), so the objective changes only through the parameters, but that mean still has
the sampling variance ``s_i^2 / R``, which the residual carries beside the observation's own; adding it to the
weights is the usual correction of simulation-based least squares (method of simulated moments, McFadden 1989,
doi:10.2307/1913621; common practice). It is minimized by differential evolution (Storn & Price 1997,
doi:10.1023/A:1008202821328; ``scipy.optimize.differential_evolution``), each generation's whole population run
as one batch of study tasks (serial, process pool or Dask), then polished by a bounded Nelder-Mead.

Uncertainty: a profile likelihood (Venzon & Moolgavkar 1988, doi:10.2307/2347496). The profile of parameter k at
value v is chi2 minimised over the other parameters with k held at v (bounded Nelder-Mead from the optimum; all
profile minimisations of a round run as one batch); the 95 % interval is where it stays within 3.84 (the 95 %
quantile of chi-square with one degree of freedom) of the minimum, its ends found by root finding on the profile
(see :mod:`rootsim.study.profile_likelihood`). Without given SDs, chi2 is scaled by the residual variance
chi2_min / (n - p) first (common practice; it then already holds the simulation noise, none is added).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from ..errors import RootsimError
from ..fitting import FitParameter, parse_named_pair, with_parameter
from .profile_likelihood import CHI2_95_ONE_DOF, fit_and_profile  # noqa: F401 (the threshold stays importable here)

__all__ = ["TraitTarget", "parse_trait_target", "fit_global", "GlobalFitResult"]

@dataclass(frozen=True)
class TraitTarget:
    """An observed trait the fit should reproduce: name (a column of runs.parquet), value and its standard
    deviation (in the trait's units), used as the weight 1 / standard_deviation² of the trait's term."""

    name: str
    value: float
    standard_deviation: float


def parse_trait_target(text: str) -> TraitTarget:
    """Parse ``NAME=VALUE:STANDARD_DEVIATION`` (e.g. ``d50_depth_cm=22:2``) with the shared
    :func:`rootsim.fitting.parse_named_pair`."""
    name, value, standard_deviation = parse_named_pair(
        text, option="--target", form="TRAIT=VALUE:STANDARD_DEVIATION with STANDARD_DEVIATION > 0",
        example="d50_depth_cm=22:2", valid=lambda value, standard_deviation: standard_deviation > 0)
    return TraitTarget(name, value, standard_deviation)


@dataclass
class GlobalFitResult:
    """Outcome of :func:`fit_global`.

    ``history`` holds every evaluated point (``stage`` search, polish or profile; ``profiled_parameter``),
    ``profile`` observed against fitted RLD (with the simulated mean's SD), ``likelihood_profiles`` the profile
    points (``parameter``, ``value``, ``profile_objective`` and the minimising values of all parameters),
    ``simulation_standard_deviation`` the SD of each trait target's simulated mean that entered the weights.
    """

    values: dict[str, float]
    intervals: dict[str, tuple[float, float]]
    objective: float
    evaluations: int
    history: pd.DataFrame
    profile: pd.DataFrame
    traits: dict[str, float] = field(default_factory=dict)
    likelihood_profiles: pd.DataFrame = field(default_factory=pd.DataFrame)
    simulation_standard_deviation: dict[str, float] = field(default_factory=dict)


def _cores_measure(observed: pd.DataFrame, source: str):
    from .schema import CoreSpec

    cores = []
    for (x, y, d), block in observed.groupby(["x_cm", "y_cm", "diameter_cm"], sort=True):
        thickness = (block["depth_bottom_cm"] - block["depth_top_cm"]).to_numpy()
        h = float(thickness[0])
        tops = block["depth_top_cm"].to_numpy()
        if not np.allclose(thickness, h) or not np.allclose(tops / h, np.round(tops / h)):
            raise RootsimError(f"{source}: core at ({x:g}, {y:g}): depth intervals must be increments of one "
                               f"thickness from the surface (got {h:g} cm and others)")
        cores.append(CoreSpec(x_cm=float(x), y_cm=float(y), diameter_cm=float(d),
                              depth_cm=float(block["depth_bottom_cm"].max()), increment_cm=h))
    return cores


def fit_global(spec, observed: pd.DataFrame, parameters: list[FitParameter], *, as_cores: bool = False,
               targets: list[TraitTarget] = (), replicates: int = 2, seed: int | None = None,
               population: int = 6, generations: int = 6, grid: int = 7, workers: int = 1,
               scheduler: str | None = None, source: str = "observations", progress: bool | None = None,
               noise_stands: int = 8) -> GlobalFitResult:
    """Fit ``parameters`` by differential evolution over their bounds (see the module documentation).

    Parameters
    ----------
    spec : Spec
        Starting parameter file (everything not fitted is kept).
    observed : DataFrame
        From :func:`rootsim.fitting.read_observations` (``day`` NaN means the run's end).
    parameters : list of FitParameter
        Key paths and bounds.
    as_cores : bool
        Simulate the observations with cores at the observed positions (else the whole-stand profile).
    targets : list of TraitTarget
        Trait values to reproduce (at the run's end).
    replicates : int
        Stands per evaluation (fixed seeds).
    population : int
        Population size multiplier of differential evolution (population = population x parameters).
    generations : int
        Generations of differential evolution.
    grid : int
        Profile values are tried outward from the optimum at the spacing of ``grid`` points across each
        parameter's bounds until the profile crosses the 95 % threshold; the crossing is then refined.
    workers, scheduler
        As for :func:`rootsim.study.run_plan`.
    noise_stands : int
        Stands grown at the search's optimum to estimate the between-stand variance of every observable (at
        least ``replicates``); below 2 no simulation noise is weighted.
    """
    from ..batch import replicate_seed
    from ..progress import stage
    from .design import StudyPlan, Task
    from .runner import open_runner, run_plan
    from .schema import Measure

    if not parameters:
        raise RootsimError("give at least one --param KEY.PATH=LOW:HIGH to fit")
    if replicates < 1 or population < 2 or generations < 1 or grid < 3 or noise_stands < 0:
        raise RootsimError("--replicates >= 1, --population >= 2, --generations >= 1, --noise-stands >= 0 "
                           "(and grid >= 3) are needed")
    for p in parameters:  # bad key paths and values outside the valid range fail here, before any run
        with_parameter(spec, p.key_path, p.low)
        with_parameter(spec, p.key_path, p.high)
    end = float(spec.run.duration_days)
    obs = observed.copy()
    obs["day"] = obs["day"].fillna(end)
    if (obs["day"] > end + 1e-9).any():
        raise RootsimError(f"{source}: observations after the run's end (day {obs['day'].max():g} > "
                           f"{end:g}); raise run.duration_days or pass --days")
    intervals = sorted({(float(a), float(b)) for a, b in zip(obs["depth_top_cm"], obs["depth_bottom_cm"])})
    measure = Measure(days=sorted(set(obs["day"]) - {end}), intervals_cm=[list(i) for i in intervals],
                      traits=[t.name for t in targets] or [], max_depth_cm=max(b for _, b in intervals),
                      cores=_cores_measure(obs, source) if as_cores else [])
    base = spec.run.seed if seed is None else seed
    seeds = [replicate_seed(base, r) for r in range(max(replicates, noise_stands))]
    sd_given = obs["rld_standard_deviation_cm_per_cm3"].to_numpy(float)
    weighted = bool(np.isfinite(sd_given).all())
    sd = np.concatenate([np.where(np.isfinite(sd_given), sd_given, 1.0), [t.standard_deviation for t in targets]])
    target = obs["rld_cm_per_cm3"].to_numpy(float)
    observed_all = np.concatenate([target, [t.value for t in targets]])
    low = np.array([p.low for p in parameters])
    span = np.array([p.high - p.low for p in parameters])
    counter = [0]
    if as_cores:
        keys = list(zip(obs["day"], obs["x_cm"], obs["y_cm"], obs["depth_top_cm"]))
    else:
        keys = list(zip(obs["day"], obs["depth_top_cm"], obs["depth_bottom_cm"]))

    phase = {"name": "search", "stage": None}

    def on_stage(name):  # the search shows its batches as before; later steps, many small batches, one line each
        if phase["stage"] is not None:
            phase["stage"].__exit__(None, None, None)
            phase["stage"] = None
        phase["name"] = name
        if name != "search":
            labels = {"noise": f"global fit: {max(replicates, noise_stands)} stands at the optimum (simulation noise)",
                      "polish": "global fit: polishing the optimum", "profile": "global fit: profile likelihood"}
            phase["stage"] = stage(labels[name], enabled=progress is not False)
            phase["stage"].__enter__()

    def grow_and_measure(units: np.ndarray, stands: int):
        specs, tasks = [], []
        for unit in units:
            values = low + np.clip(unit, 0.0, 1.0) * span
            s = spec
            error = None
            try:
                for p, v in zip(parameters, values):
                    s = with_parameter(s, p.key_path, float(v))
            except RootsimError as exc:
                s, error = None, exc.cli_message()
            name = f"candidate_{counter[0]:05d}"
            counter[0] += 1
            specs.append((name, values))
            for r, sd_r in enumerate(seeds[:stands]):
                tasks.append(Task(f"{name}__r{r:03d}", name, 0, r, sd_r, {}, s, error))
        plan = StudyPlan("fit", tasks, measure, [], kind="fit")
        results = run_plan(plan, None, workers=workers, scheduler=scheduler, run_lines=False, runner=pool[0],
                           progress=progress if phase["name"] == "search" else False)
        return specs, results

    def per_stand(results, name):
        """Observables of each stand of candidate ``name``: (stands, observations + targets), None if a run
        failed."""
        runs = results.runs[results.runs["variant"] == name]
        if (runs["status"] != "ok").any():
            return None
        if as_cores:
            smp = results.samples[results.samples["variant"] == name]
            smp = smp.assign(key=list(zip(smp["day"], smp["x_cm"], smp["y_cm"], smp["depth_top_cm"])))
            table = smp.groupby(["replicate", "key"])["rld_cm_per_cm3"].mean().unstack("key")
        else:
            prof = results.profiles[results.profiles["variant"] == name]
            prof = prof.assign(key=list(zip(prof["day"], prof["depth_top_cm"], prof["depth_bottom_cm"])))
            table = prof.groupby(["replicate", "key"])["rld_cm_per_cm3"].mean().unstack("key")
        table = table.reindex(index=sorted(runs["replicate"]))
        values = np.array([table[k].to_numpy(float) if k in table else np.full(len(table), np.nan) for k in keys]).T
        traits = []
        for t in targets:
            if t.name not in runs:
                raise RootsimError(f"--target {t.name}: not a trait rootsim measures (see runs.parquet columns)")
            traits.append(runs.sort_values("replicate")[t.name].to_numpy(float))
        return np.column_stack([values, *traits]) if traits else values

    def predicted_means(units):
        specs, results = grow_and_measure(units, replicates)
        rows = []
        for name, _ in specs:
            stands = per_stand(results, name)
            rows.append(np.full(observed_all.size, np.nan) if stands is None else stands.mean(axis=0))
        return np.array(rows)

    def simulation_variance(unit):  # between-stand variance / replicates, from noise_stands stands at the optimum
        specs, results = grow_and_measure(unit[None, :], max(replicates, noise_stands))
        stands = per_stand(results, specs[0][0])
        if stands is None:
            return np.zeros(observed_all.size)
        return stands.var(axis=0, ddof=1) / replicates

    pool = (None, None)
    if workers < 1:
        raise RootsimError(f"--workers must be >= 1 (got {workers})")
    pool = open_runner(workers, scheduler)  # one pool / Dask connection for all batches, not one per batch
    try:
        fit = fit_and_profile(predicted_means, observed_all, sd, dimension=len(parameters),
                              simulation_variance=simulation_variance if noise_stands >= 2 else None,
                              scaled=not weighted, seed=base, population=population, generations=generations,
                              grid=grid, on_stage=on_stage)
    except BaseException as exc:
        if phase["stage"] is not None:
            phase["stage"].__exit__(type(exc), exc, exc.__traceback__)
        if pool[1] is not None:
            pool[1]()
        raise
    on_stage("search")  # closes the last step's line; the final stands below are one more small batch
    try:
        specs, results = grow_and_measure(fit.best[None, :], replicates)
    finally:
        if pool[1] is not None:
            pool[1]()
    values = {p.key_path: float(low[k] + fit.best[k] * span[k]) for k, p in enumerate(parameters)}
    intervals = {p.key_path: (float(low[k] + lo * span[k]), float(low[k] + hi * span[k]))
                 for k, (p, (lo, hi)) in enumerate(zip(parameters, fit.intervals))}
    history = fit.history.copy()
    history["profiled_parameter"] = [parameters[k].key_path if k >= 0 else "" for k in history["profiled_parameter"]]
    for k, p in enumerate(parameters):
        history[p.key_path] = low[k] + history.pop(f"unit_{k}") * span[k]
    history = history[["stage", *[p.key_path for p in parameters], "objective", "profiled_parameter"]]
    likelihood = fit.profiles.copy()
    likelihood["parameter"] = [parameters[k].key_path for k in likelihood["parameter"]]
    likelihood["value"] = [low[k] + v * span[k] for k, v in zip(fit.profiles["parameter"], likelihood["value"])]
    likelihood = likelihood.rename(columns={"objective": "profile_objective"})
    for k, p in enumerate(parameters):
        likelihood[p.key_path] = low[k] + likelihood.pop(f"unit_{k}") * span[k]
    stands = per_stand(results, specs[0][0])
    fitted = stands.mean(axis=0)
    traits = {t.name: float(fitted[len(target) + i]) for i, t in enumerate(targets)}
    profile = obs[["day", "x_cm", "y_cm", "diameter_cm", "depth_top_cm", "depth_bottom_cm"]].copy()
    profile["rld_observed_cm_per_cm3"] = target
    profile["rld_standard_deviation_cm_per_cm3"] = obs["rld_standard_deviation_cm_per_cm3"].to_numpy()
    profile["rld_fitted_cm_per_cm3"] = fitted[:len(target)]
    profile["rld_simulation_standard_deviation_cm_per_cm3"] = np.sqrt(fit.simulation_variance[:len(target)])
    if not as_cores:
        profile = profile.drop(columns=["x_cm", "y_cm", "diameter_cm"])
    return GlobalFitResult(values, intervals, fit.objective, len(history), history, profile, traits, likelihood,
                           {t.name: float(math.sqrt(v)) for t, v in
                            zip(targets, fit.simulation_variance[len(target):])})


def observed_vs_fitted_figure(profile: pd.DataFrame):
    """Observed (points, with SD bars where given) and fitted RLD against depth, one panel per date."""
    from matplotlib.figure import Figure

    days = sorted(profile["day"].unique())
    fig = Figure(figsize=(3.2 * len(days) + 0.8, 4.5), dpi=100)
    for i, day in enumerate(days):
        ax = fig.add_subplot(1, len(days), i + 1)
        block = profile[profile["day"] == day]
        keys = ["depth_top_cm", "depth_bottom_cm"]
        mean = block.groupby(keys, sort=True)[["rld_observed_cm_per_cm3", "rld_fitted_cm_per_cm3",
                                               "rld_standard_deviation_cm_per_cm3"]].mean().reset_index()
        mid = 0.5 * (mean["depth_top_cm"] + mean["depth_bottom_cm"])
        err = mean["rld_standard_deviation_cm_per_cm3"].where(np.isfinite(mean["rld_standard_deviation_cm_per_cm3"]))
        ax.errorbar(mean["rld_observed_cm_per_cm3"], mid, xerr=err, fmt="o", ms=4, label="observed")
        ax.plot(mean["rld_fitted_cm_per_cm3"], mid, "-", label="fitted")
        ax.invert_yaxis()
        ax.set_title(f"day {day:g}", fontsize=9)
        ax.set_xlabel("RLD, cm cm$^{-3}$")
        if i == 0:
            ax.set_ylabel("depth, cm")
            ax.legend(fontsize=8)
    fig.tight_layout()
    return fig
