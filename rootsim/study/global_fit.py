"""Global fitting of architecture parameters, evaluated through the study runner.

The objective is a weighted sum of squares over every observation (several sampling dates, whole-stand
profiles or virtual cores at the observed positions) and optional trait targets::

    chi2 = sum_i ((simulated_i - observed_i) / sd_i)^2 + sum_t ((trait_t - target_t) / sd_t)^2

with ``sd_i`` the observation's standard deviation when given (weights 1 / SD², the usual weighted least
squares) and 1 cm/cm³ otherwise. The simulated value is the mean over ``replicates`` stands grown with fixed
seeds (common random numbers), so the objective changes only through the parameters. It is minimized by
differential evolution (Storn & Price 1997, doi:10.1023/A:1008202821328; ``scipy.optimize.differential_evolution``),
each generation's whole population run as one batch of study tasks (serial, process pool or Dask).

Uncertainty: a profile likelihood. Every evaluated point (the optimizer's and a grid along each parameter
through the optimum) gives chi2; the profile of parameter k at value v is the lowest chi2 among points whose
k-th value falls in v's grid cell, and the 95 % interval is where it stays within 3.84 (the 95 % quantile of
chi-square with one degree of freedom; Venzon & Moolgavkar 1988, doi:10.2307/2347496) of the minimum. Without
given SDs, chi2 is scaled by the residual variance chi2_min / (n - p) first (common practice).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from ..errors import RootsimError
from ..fitting import FitParameter, parse_named_pair, with_parameter

__all__ = ["TraitTarget", "parse_trait_target", "fit_global", "GlobalFitResult"]

CHI2_95_ONE_DOF = 3.841458820694124  # scipy.stats.chi2.ppf(0.95, 1)


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
    """Outcome of :func:`fit_global`."""

    values: dict[str, float]
    intervals: dict[str, tuple[float, float]]
    objective: float
    evaluations: int
    history: pd.DataFrame
    profile: pd.DataFrame
    traits: dict[str, float] = field(default_factory=dict)


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
               scheduler: str | None = None, source: str = "observations", progress: bool | None = None
               ) -> GlobalFitResult:
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
        Points per parameter on the grid through the optimum (profile likelihood).
    workers, scheduler
        As for :func:`rootsim.study.run_plan`.
    """
    from scipy.optimize import differential_evolution

    from ..batch import replicate_seed
    from .design import StudyPlan, Task
    from .runner import run_plan
    from .schema import Measure

    if not parameters:
        raise RootsimError("give at least one --param KEY.PATH=LOW:HIGH to fit")
    if replicates < 1 or population < 2 or generations < 1 or grid < 3:
        raise RootsimError("--replicates >= 1, --population >= 2, --generations >= 1 are needed")
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
    seeds = [replicate_seed(base, r) for r in range(replicates)]
    sd = obs["rld_standard_deviation_cm_per_cm3"].to_numpy(float)
    weighted = bool(np.isfinite(sd).all())
    sd = np.where(np.isfinite(sd), sd, 1.0)
    target = obs["rld_cm_per_cm3"].to_numpy(float)
    low = np.array([p.low for p in parameters])
    span = np.array([p.high - p.low for p in parameters])
    history: list[dict] = []
    counter = [0]

    def grow_and_measure(units: np.ndarray):
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
            for r, sd_r in enumerate(seeds):
                tasks.append(Task(f"{name}__r{r:03d}", name, 0, r, sd_r, {}, s, error))
        plan = StudyPlan("fit", tasks, measure, [], kind="fit")
        results = run_plan(plan, None, workers=workers, scheduler=scheduler, progress=progress, run_lines=False)
        return specs, results

    def observe(results, name):
        runs = results.runs[results.runs["variant"] == name]
        if (runs["status"] != "ok").any():
            return None, {}
        if as_cores:
            smp = results.samples[results.samples["variant"] == name]
            smp = smp.assign(key=list(zip(smp["day"], smp["x_cm"], smp["y_cm"], smp["depth_top_cm"])))
            sim = smp.groupby("key")["rld_cm_per_cm3"].mean()
            keys = list(zip(obs["day"], obs["x_cm"], obs["y_cm"], obs["depth_top_cm"]))
        else:
            prof = results.profiles[results.profiles["variant"] == name]
            prof = prof.assign(key=list(zip(prof["day"], prof["depth_top_cm"], prof["depth_bottom_cm"])))
            sim = prof.groupby("key")["rld_cm_per_cm3"].mean()
            keys = list(zip(obs["day"], obs["depth_top_cm"], obs["depth_bottom_cm"]))
        values = np.array([sim.get(k, np.nan) for k in keys], float)
        traits = {t.name: float(runs[t.name].mean()) if t.name in runs else math.nan for t in targets}
        return values, traits

    def chi2(values, traits):
        if values is None or not np.isfinite(values).all():
            return math.inf
        total = float(np.sum(((values - target) / sd) ** 2))
        for t in targets:
            if not math.isfinite(traits.get(t.name, math.nan)):
                raise RootsimError(f"--target {t.name}: not a trait rootsim measures (see runs.parquet columns)")
            total += ((traits[t.name] - t.value) / t.standard_deviation) ** 2
        return total

    def evaluate(units, stage):
        specs, results = grow_and_measure(np.atleast_2d(units))
        out = []
        for name, values in specs:
            sim, traits = observe(results, name)
            value = chi2(sim, traits)
            history.append({"stage": stage, **{p.key_path: float(v) for p, v in zip(parameters, values)},
                            "objective": value})
            out.append(value)
        return out

    def mapper(func, population_units):  # differential evolution's map-like "workers": one batch per generation
        return evaluate(np.array(list(population_units)), "search")

    differential_evolution(lambda u: 0.0, bounds=[(0.0, 1.0)] * len(parameters), popsize=population,
                           maxiter=generations, rng=np.random.default_rng(base), polish=False, init="latinhypercube",
                           updating="deferred", workers=mapper, tol=0.0)
    table = pd.DataFrame(history)
    best = table.loc[table["objective"].idxmin()]
    best_unit = np.array([(best[p.key_path] - p.low) / (p.high - p.low) for p in parameters])
    # grid through the optimum along each parameter (profile likelihood points)
    ticks = np.linspace(0.0, 1.0, grid)
    points = []
    for k in range(len(parameters)):
        for t in ticks:
            u = best_unit.copy()
            u[k] = t
            points.append(u)
    evaluate(np.array(points), "profile")
    table = pd.DataFrame(history)
    finite = table[np.isfinite(table["objective"])]
    best = finite.loc[finite["objective"].idxmin()]
    values = {p.key_path: float(best[p.key_path]) for p in parameters}
    n_obs = len(target) + len(targets)
    scale = 1.0 if weighted else max(best["objective"] / max(n_obs - len(parameters), 1), 1e-300)
    threshold = best["objective"] + CHI2_95_ONE_DOF * scale
    intervals = {}
    for p in parameters:
        cells = np.clip(((finite[p.key_path] - p.low) / (p.high - p.low) * (grid - 1)).round().astype(int), 0, grid - 1)
        profile = finite.groupby(cells)["objective"].min()
        inside = profile.index[profile.to_numpy() <= threshold]
        cell = (p.high - p.low) / (grid - 1)
        lo = max(p.low, p.low + inside.min() * cell - 0.5 * cell)
        hi = min(p.high, p.low + inside.max() * cell + 0.5 * cell)
        intervals[p.key_path] = (float(min(lo, values[p.key_path])), float(max(hi, values[p.key_path])))
    best_unit = np.array([(values[p.key_path] - p.low) / (p.high - p.low) for p in parameters])
    specs, results = grow_and_measure(best_unit[None, :])
    fitted, traits = observe(results, specs[0][0])
    profile = obs[["day", "x_cm", "y_cm", "diameter_cm", "depth_top_cm", "depth_bottom_cm"]].copy()
    profile["rld_observed_cm_per_cm3"] = target
    profile["rld_standard_deviation_cm_per_cm3"] = obs["rld_standard_deviation_cm_per_cm3"].to_numpy()
    profile["rld_fitted_cm_per_cm3"] = fitted
    if not as_cores:
        profile = profile.drop(columns=["x_cm", "y_cm", "diameter_cm"])
    return GlobalFitResult(values, intervals, float(best["objective"]), len(table), table, profile, traits)


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
