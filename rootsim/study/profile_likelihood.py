"""Weighted least squares with simulated means: global search, local polish and profile-likelihood intervals.

Written over a plain batch callable so that it runs the same on analytic models (tests) and on grown stands
(:func:`rootsim.study.global_fit.fit_global`, one batch of study tasks per call). Parameters live in the unit box
``[0, 1]^p``; the caller maps them to their bounds.

Objective
    ``chi2(u) = sum_i (simulated_i(u) - observed_i)^2 / (sd_i^2 + simulation_variance_i)``.
    ``simulation_variance_i`` is the sampling variance of the simulated mean (the between-stand variance of
    observable i divided by the number of stands averaged), estimated once at the search's optimum. The residual
    of a simulated mean against an observation carries both variances, so both go into the weights; this is the
    usual correction of simulation-based least squares / the method of simulated moments (McFadden 1989,
    doi:10.2307/1913621; Gourieroux & Monfort 1996, *Simulation-Based Econometric Methods*, the (1 + 1/S)
    inflation of the estimator's variance; references from memory; common practice). Without observation SDs (``scaled=True``) every
    weight is 1 and chi2 is divided by the residual variance ``chi2_min / (n - p)`` (common practice), which
    already holds the simulation noise, so none is added.

Steps
    1. Differential evolution over the box (Storn & Price 1997, doi:10.1023/A:1008202821328), one batch per
       generation, weights from the observations only.
    2. Simulation variance at its optimum; every evaluated point re-scored with the full weights.
    3. A bounded Nelder-Mead polish of all parameters from the best point (Nelder & Mead 1965,
       doi:10.1093/comjnl/7.4.308; ``scipy.optimize.minimize``).
    4. Profile likelihood (Venzon & Moolgavkar 1988, doi:10.2307/2347496): the profile of parameter k at value t
       is the minimum of chi2 over the other parameters with k held at t (bounded Nelder-Mead started from the
       optimum's other parameters, further out from the neighbouring profile point's minimiser). Going outward
       from the optimum on each side at the grid's spacing until the profile rises more than 3.84 (chi-square,
       one degree of freedom, 95 %) above the minimum, then refining that crossing by regula falsi on
       ``sqrt(profile - minimum)``, which is linear in t for a quadratic profile. The interval end is the crossing
       (or the bound when the profile stays below it).

All local minimisations of a step run side by side: each one is a thread that asks for one point at a time, and
every round of requests goes out as one batch (so the batch runner can use its workers). Each minimisation's
path depends only on its own objective values, so the result does not depend on the number of workers.
"""

from __future__ import annotations

import math
import threading
from dataclasses import dataclass

import numpy as np
import pandas as pd

__all__ = ["CHI2_95_ONE_DOF", "ProfileFit", "fit_and_profile", "run_side_by_side"]

CHI2_95_ONE_DOF = 3.841458820694124  # scipy.stats.chi2.ppf(0.95, 1)


class _Stopped(Exception):
    """Raised inside a waiting minimisation when the batch evaluation failed."""


class _Rounds:
    """Gathers one request from every running thread into one batch per round."""

    def __init__(self, count: int):
        self.condition = threading.Condition()
        self.requests: dict[int, tuple] = {}
        self.replies: dict[int, float] = {}
        self.running = count
        self.failed = False

    def ask(self, index: int, point: np.ndarray, tag) -> float:
        with self.condition:
            self.requests[index] = (point, tag)
            self.condition.notify_all()
            while index not in self.replies:
                if self.failed:
                    raise _Stopped
                self.condition.wait()
            return self.replies.pop(index)

    def finish(self) -> None:
        with self.condition:
            self.running -= 1
            self.condition.notify_all()


def run_side_by_side(jobs, evaluate):
    """Run ``jobs`` (functions of one argument ``ask(point, tag) -> float``) side by side, one batch per round.

    Parameters
    ----------
    jobs : list of callables
        Each is called as ``job(ask)`` in its own thread and returns its result.
    evaluate : callable
        ``evaluate(points (m, p), tags) -> sequence of m floats``, called in the calling thread once per round
        with the requests of all running jobs in job order.

    Returns
    -------
    list
        The jobs' results in job order.
    """
    rounds = _Rounds(len(jobs))
    results: list = [None] * len(jobs)
    errors: list = [None] * len(jobs)

    def body(i, job):
        try:
            results[i] = job(lambda point, tag=None: rounds.ask(i, np.asarray(point, float), tag))
        except _Stopped:
            pass
        except BaseException as exc:  # handed to the calling thread
            errors[i] = exc
        finally:
            rounds.finish()

    threads = [threading.Thread(target=body, args=(i, job), daemon=True) for i, job in enumerate(jobs)]
    for t in threads:
        t.start()
    try:
        while True:
            with rounds.condition:
                while len(rounds.requests) < rounds.running:
                    rounds.condition.wait()
                if rounds.running == 0:
                    break
                batch = sorted(rounds.requests.items())
                rounds.requests.clear()
            values = evaluate(np.array([point for _, (point, _) in batch]), [tag for _, (_, tag) in batch])
            with rounds.condition:
                for (i, _), value in zip(batch, values):
                    rounds.replies[i] = float(value)
                rounds.condition.notify_all()
    except BaseException:
        with rounds.condition:
            rounds.failed = True
            rounds.condition.notify_all()
        for t in threads:
            t.join()
        raise
    for t in threads:
        t.join()
    for exc in errors:
        if exc is not None:
            raise exc
    return results


def _bounded_nelder_mead(function, start: np.ndarray, *, step: float, fatol: float, maxfev: int):
    """Bounded Nelder-Mead in the unit box from ``start`` with a simplex of edge ``step``; (point, value)."""
    from scipy.optimize import minimize

    q = start.size
    simplex = np.repeat(start[None, :], q + 1, axis=0)
    for i in range(q):
        simplex[i + 1, i] += step if start[i] + step <= 1.0 else -step
    best = [start, math.inf]

    def tracked(x):
        value = function(x)
        if value < best[1]:
            best[0], best[1] = np.array(x, float), value
        return value

    minimize(tracked, start, method="Nelder-Mead", bounds=[(0.0, 1.0)] * q,
             options={"initial_simplex": simplex, "xatol": 2e-3, "fatol": fatol, "maxfev": maxfev})
    return best[0], best[1]


@dataclass
class ProfileFit:
    """Outcome of :func:`fit_and_profile` (everything in unit-box coordinates).

    Attributes
    ----------
    best : ndarray, shape (p,)
        Lowest-chi2 point evaluated.
    objective : float
        Its chi2 (with the full weights).
    intervals : list of (float, float)
        95 % profile-likelihood interval of each parameter.
    history : DataFrame
        Every evaluated point: ``stage`` (search, polish, profile), ``profiled_parameter`` (index or -1),
        ``unit_0 .. unit_{p-1}``, ``objective``.
    profiles : DataFrame
        Profile points: ``parameter``, ``value`` (unit), ``objective`` (profile chi2), ``unit_0 ..`` (minimiser).
    simulation_variance : ndarray, shape (n,)
        Variance of each simulated mean added to the weights (zeros when none was added).
    scale : float
        Factor the 3.84 threshold was multiplied by (1 with observation SDs).
    """

    best: np.ndarray
    objective: float
    intervals: list
    history: pd.DataFrame
    profiles: pd.DataFrame
    simulation_variance: np.ndarray
    scale: float


def fit_and_profile(predicted_means, observed, standard_deviation, *, dimension: int, simulation_variance=None,
                    scaled: bool = False, seed: int = 0, population: int = 6, generations: int = 6,
                    grid: int = 7, refinements: int = 3, on_stage=None) -> ProfileFit:
    """Minimise chi2 over the unit box and profile each parameter (see the module documentation).

    Parameters
    ----------
    predicted_means : callable
        ``predicted_means(units (m, p)) -> (m, n)`` simulated means; a row holding NaN marks a failed point (chi2 inf).
    observed, standard_deviation : array, shape (n,)
        Observations and their standard deviations (all 1 with ``scaled``).
    dimension : int
        Number of parameters p.
    simulation_variance : callable, optional
        ``simulation_variance(unit (p,)) -> (n,)`` variance of each simulated mean at that point; called once at
        the search's optimum. None: no simulation noise is weighted.
    scaled : bool
        No observation SDs: threshold scaled by the residual variance.
    seed : int
        Seed of differential evolution.
    population, generations : int
        Differential evolution's population multiplier and generations.
    grid : int
        Profile values are tried outward from the optimum at the spacing of ``grid`` points across the box.
    refinements : int
        Regula falsi steps on each interval end.
    on_stage : callable, optional
        Called with "search", "noise", "polish" and "profile" as each step starts (progress reports).
    """
    from scipy.optimize import differential_evolution

    observed = np.asarray(observed, float)
    sd2 = np.asarray(standard_deviation, float) ** 2
    p = int(dimension)
    records: list[dict] = []
    simulated: list[np.ndarray] = []
    variance = [sd2]
    announce = on_stage if on_stage is not None else (lambda name: None)

    def chi2_of(values: np.ndarray) -> float:
        if not np.isfinite(values).all():
            return math.inf
        return float(np.sum((values - observed) ** 2 / variance[0]))

    def evaluate(units, tags):
        units = np.clip(np.atleast_2d(np.asarray(units, float)), 0.0, 1.0)
        values = np.asarray(predicted_means(units), float).reshape(len(units), observed.size)
        out = []
        for unit, sim, tag in zip(units, values, tags):
            stage, k = tag
            simulated.append(sim)
            value = chi2_of(sim)
            records.append({"stage": stage, "profiled_parameter": k,
                            **{f"unit_{j}": float(unit[j]) for j in range(p)}, "objective": value})
            out.append(value)
        return out

    def mapper(func, population_units):  # differential evolution's map-like "workers": one batch per generation
        units = np.array(list(population_units))
        return evaluate(units, [("search", -1)] * len(units))

    announce("search")
    differential_evolution(lambda u: 0.0, bounds=[(0.0, 1.0)] * p, popsize=population, maxiter=generations,
                           rng=np.random.default_rng(seed), polish=False, init="latinhypercube",
                           updating="deferred", workers=mapper, tol=0.0)

    def rescore() -> int:
        for record, sim in zip(records, simulated):
            record["objective"] = chi2_of(sim)
        return int(np.argmin([r["objective"] for r in records]))

    def unit_of(i: int) -> np.ndarray:
        return np.array([records[i][f"unit_{j}"] for j in range(p)])

    best = unit_of(rescore())
    noise = np.zeros_like(observed)
    if simulation_variance is not None and not scaled:
        announce("noise")
        noise = np.nan_to_num(np.asarray(simulation_variance(best), float), nan=0.0).clip(min=0.0)
        variance[0] = sd2 + noise
        best = unit_of(rescore())
    n_fit = observed.size
    fatol = 1e-3 * CHI2_95_ONE_DOF

    # polish every parameter from the search's best point
    def polish(ask):
        return _bounded_nelder_mead(lambda x: ask(x, ("polish", -1)), best, step=0.05, fatol=fatol,
                                    maxfev=60 * p)

    announce("polish")
    run_side_by_side([polish], evaluate)
    i_best = rescore()
    best, minimum = unit_of(i_best), records[i_best]["objective"]
    scale = 1.0 if not scaled else max(minimum / max(n_fit - p, 1), 1e-300)
    target = math.sqrt(CHI2_95_ONE_DOF * scale)
    ticks = np.linspace(0.0, 1.0, grid)
    profile_points: list[dict] = []
    lock = threading.Lock()

    def profile_value(ask, k, t, start_others):
        """Profile chi2 of parameter k at t and the minimiser (full unit vector)."""
        def full(others):
            u = np.empty(p)
            u[k] = t
            u[np.arange(p) != k] = others
            return u

        if p == 1:
            u = full(np.empty(0))
            value = ask(u, ("profile", k))
        else:
            others, value = _bounded_nelder_mead(lambda x: ask(full(x), ("profile", k)), start_others,
                                                 step=0.05, fatol=fatol, maxfev=40 * (p - 1) + 20)
            u = full(others)
        with lock:
            profile_points.append({"parameter": k, "value": float(t), "objective": value,
                                   **{f"unit_{j}": float(u[j]) for j in range(p)}})
        return value, u

    def side(k, direction):
        def job(ask):
            inside_t, inside_h = best[k], 0.0
            inside_others = np.delete(best, k)
            outward = ticks[ticks > best[k] + 1e-9] if direction > 0 else ticks[ticks < best[k] - 1e-9][::-1]
            outside = None
            for t in outward:
                value, u = profile_value(ask, k, t, inside_others)
                h = math.sqrt(max(value - minimum, 0.0))
                if h >= target:
                    outside = (t, h)
                    break
                inside_t, inside_h, inside_others = t, h, np.delete(u, k)
            if outside is None:
                return
            for _ in range(refinements):
                (t_out, h_out) = outside
                if abs(t_out - inside_t) < 1e-3 or not math.isfinite(h_out):
                    if not math.isfinite(h_out):  # a failed point outside: halve the bracket instead
                        t_new = 0.5 * (inside_t + t_out)
                    else:
                        break
                else:
                    t_new = inside_t + (target - inside_h) / (h_out - inside_h) * (t_out - inside_t)
                value, u = profile_value(ask, k, t_new, inside_others)
                h = math.sqrt(max(value - minimum, 0.0))
                if h >= target:
                    outside = (t_new, h)
                else:
                    inside_t, inside_h, inside_others = t_new, h, np.delete(u, k)
                if abs(h - target) < 0.02 * target:
                    break
        return job

    announce("profile")
    run_side_by_side([side(k, d) for k in range(p) for d in (-1, 1)], evaluate)
    history = pd.DataFrame(records)
    i_best = int(history["objective"].idxmin())
    best, minimum = unit_of(i_best), float(history["objective"].iloc[i_best])
    scale = 1.0 if not scaled else max(minimum / max(n_fit - p, 1), 1e-300)
    target = math.sqrt(CHI2_95_ONE_DOF * scale)
    profiles = pd.DataFrame(profile_points, columns=["parameter", "value", "objective",
                                                     *[f"unit_{j}" for j in range(p)]])
    profiles = profiles.sort_values(["parameter", "value"], kind="stable").reset_index(drop=True)
    intervals = [_interval(profiles[profiles["parameter"] == k], best[k], minimum, target) for k in range(p)]
    return ProfileFit(best, minimum, intervals, history, profiles, noise, scale)


def _interval(points: pd.DataFrame, at_best: float, minimum: float, target: float) -> tuple[float, float]:
    """Interval where the profile stays within target**2 of the minimum, ends interpolated linearly in
    ``sqrt(profile - minimum)`` between the outermost inside point and its outside neighbour (the bound when the
    profile never crosses on that side)."""
    t = np.append(points["value"].to_numpy(float), at_best)
    h = np.append(np.sqrt(np.clip(points["objective"].to_numpy(float) - minimum, 0.0, None)), 0.0)
    order = np.argsort(t, kind="stable")
    t, h = t[order], h[order]
    inside = np.flatnonzero(h < target)
    ends = []
    for i, neighbour, bound in ((inside.min(), inside.min() - 1, 0.0), (inside.max(), inside.max() + 1, 1.0)):
        if neighbour < 0 or neighbour >= t.size:
            ends.append(bound)
        elif not math.isfinite(h[neighbour]):
            ends.append(float(t[neighbour]))
        else:
            ends.append(float(t[i] + (target - h[i]) / (h[neighbour] - h[i]) * (t[neighbour] - t[i])))
    return ends[0], ends[1]
