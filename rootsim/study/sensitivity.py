"""Global sensitivity of study traits to factor ranges, with SALib, evaluated through the study runner.

* Morris elementary effects for screening (Morris 1991, doi:10.1080/00401706.1991.10484804; the mu* measure
  of Campolongo, Cariboni & Saltelli 2007, doi:10.1016/j.envsoft.2006.10.004), with bootstrap confidence
  intervals of mu*.
* Sobol' first-order and total indices (Sobol' 2001, doi:10.1016/S0378-4754(00)00270-6) with Saltelli's
  sampling scheme and estimators (Saltelli et al. 2010, doi:10.1016/j.cpc.2009.09.018) and bootstrap
  confidence intervals.

Every sample point is a named variant of a study (``point_00001`` ...) run with common random numbers (every
point sees the same random streams per replicate), so differences between points come from the factors, and
the runs are parallel and resumable like any study. The trait of a point is its mean over replicates.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd

from ..errors import RootsimError, SpecError

__all__ = ["sensitivity_design", "sensitivity_indices", "run_sensitivity"]


def _problem(names, bounds) -> dict:
    return {"num_vars": len(names), "names": list(names), "bounds": [list(map(float, b)) for b in bounds]}


def sensitivity_design(names: list[str], bounds: list, *, method: str, samples: int, seed: int) -> np.ndarray:
    """Sample points, shape (n, d), for ``method`` ``"morris"`` (``samples`` trajectories, 4 levels) or
    ``"sobol"`` (``samples`` base points, a power of 2; n = samples x (d + 2), no second-order terms)."""
    if isinstance(samples, bool) or not isinstance(samples, (int, np.integer)) or samples < 1:
        raise RootsimError(f"--samples {samples}: must be a whole number >= 1 (Morris trajectories, or Sobol' "
                           "base samples: a power of 2)")
    problem = _problem(names, bounds)
    if method == "morris":
        from SALib.sample import morris

        return morris.sample(problem, N=samples, num_levels=4, seed=seed)
    if method == "sobol":
        from SALib.sample import sobol

        if samples < 2 or samples & (samples - 1):
            raise RootsimError(f"--samples {samples}: Sobol' sampling needs a power of 2 (allowed: 2, 4, 8, 16, ...)")
        return sobol.sample(problem, N=samples, calc_second_order=False, seed=seed)
    raise RootsimError(f"--method {method!r}: unknown (allowed: morris, sobol)")


def sensitivity_indices(names: list[str], bounds: list, points: np.ndarray, values: np.ndarray, *, method: str,
                        seed: int = 0) -> pd.DataFrame:
    """Sensitivity indices of ``values`` (shape (n,)) at ``points`` from :func:`sensitivity_design`.

    Returns one row per factor: Morris ``mu_star``, ``mu_star_ci95`` (half-width of the 95 % bootstrap
    interval), ``sigma``; Sobol' ``first_order``, ``first_order_ci95``, ``total``, ``total_ci95`` (half-widths).
    """
    import warnings

    problem = _problem(names, bounds)
    values = np.asarray(values, dtype=float)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        if method == "morris":
            from SALib.analyze import morris

            res = morris.analyze(problem, points, values, num_levels=4, seed=seed)
            return pd.DataFrame({"factor": names, "mu_star": res["mu_star"], "mu_star_ci95": res["mu_star_conf"],
                                 "sigma": res["sigma"]})
        from SALib.analyze import sobol

        res = sobol.analyze(problem, values, calc_second_order=False, seed=seed)
    return pd.DataFrame({"factor": names, "first_order": res["S1"], "first_order_ci95": res["S1_conf"],
                         "total": res["ST"], "total_ci95": res["ST_conf"]})


def _bar_chart(table: pd.DataFrame, method: str):
    from matplotlib.figure import Figure

    traits = list(dict.fromkeys(table["trait"]))
    fig = Figure(figsize=(6.5, 2.0 + 1.6 * len(traits)), dpi=100)
    for i, trait in enumerate(traits):
        ax = fig.add_subplot(len(traits), 1, i + 1)
        block = table[table["trait"] == trait]
        y = np.arange(len(block))
        if method == "morris":
            ax.barh(y, block["mu_star"], xerr=block["mu_star_ci95"], color="tab:blue")
            ax.set_xlabel("Morris mu* (trait units)")
        else:
            ax.barh(y - 0.2, block["first_order"], 0.4, xerr=block["first_order_ci95"], label="first order")
            ax.barh(y + 0.2, block["total"], 0.4, xerr=block["total_ci95"], label="total")
            ax.set_xlabel("Sobol' index")
            ax.legend(fontsize=7)
        ax.set_yticks(y)
        ax.set_yticklabels(block["factor"], fontsize=8)
        ax.set_title(trait, fontsize=9)
    fig.tight_layout()
    return fig


def run_sensitivity(study_path, out_dir, *, method: str, traits: list[str], samples: int = 8, workers: int = 1,
                    scheduler: str | None = None, resume: bool = False, progress: bool | None = None) -> pd.DataFrame:
    """Sample the study's factor ranges, run every point through the study runner, write the indices.

    The study file's factors must all have ``range = [low, high]``; its base, replicates, run settings and
    measurements are used as they are. Writes the study folder ``out_dir`` plus ``sensitivity.csv`` and
    ``sensitivity.png``. Returns the table.
    """
    from ..atomic import atomic_path, atomic_write_text
    from .design import _plan
    from .runner import run_plan
    from .schema import load_study_file, parse_study_file

    study_path = Path(study_path)
    study = load_study_file(study_path)
    if not study.factors:
        raise SpecError(str(study_path), "factors", "sensitivity needs [[factors]] with range = [low, high]")
    for i, f in enumerate(study.factors):
        if f.range is None:
            raise SpecError(str(study_path), f"factors[{i}]", f"factor {f.name!r} has no range",
                            "range = [low, high] for every factor of a sensitivity analysis")
    names = [f.name for f in study.factors]
    bounds = [f.range for f in study.factors]
    points = sensitivity_design(names, bounds, method=method, samples=samples, seed=study.master_seed)
    width = len(str(len(points)))
    variants = []
    for k, row in enumerate(points):
        values = {f.key: (int(round(v)) if f.integer else float(v)) for f, v in zip(study.factors, row)}
        variants.append({"name": f"point_{k + 1:0{width}d}", "set": values})
    data = study.model_dump(exclude_none=True)
    data.update(factors=[], variants=variants,
                design={"kind": "variants", "common_random_numbers": True})
    try:
        plan = _plan(parse_study_file(data, source=str(study_path)), study_path.parent, str(study_path),
                     kind="sensitivity")
    except SpecError as exc:  # a sample point outside what a key allows: point at the factor's range
        i = next((i for i, f in enumerate(study.factors) if exc.key_path.endswith(f".set.{f.key}")), None)
        if i is None:
            raise
        raise SpecError(exc.file, f"factors[{i}].range", exc.problem, exc.allowed) from None
    plan.factor_names = []
    results = run_plan(plan, out_dir, workers=workers, scheduler=scheduler, resume=resume, progress=progress)
    runs = results.runs
    failed = runs[runs["status"] != "ok"]
    if len(failed):
        raise RootsimError(f"{out_dir}: {len(failed)} of {len(runs)} runs failed (first: {failed['run_id'].iloc[0]}: "
                           f"{failed['error'].iloc[0]}); narrow the factor ranges")
    missing = [t for t in traits if t not in runs]
    if missing:
        numeric = [c for c in runs.columns if pd.api.types.is_numeric_dtype(runs[c])
                   and c not in ("replicate", "seed", "n_segments", "n_plants")]
        raise RootsimError(f"--trait {missing[0]}: not measured by this study (allowed: {', '.join(numeric)})")
    order = [v["name"] for v in variants]
    means = runs.groupby("variant", sort=False)[traits].mean().reindex(order)
    tables = []
    for trait in traits:
        table = sensitivity_indices(names, bounds, points, means[trait].to_numpy(), method=method,
                                    seed=study.master_seed)
        table.insert(0, "trait", trait)
        tables.append(table)
    result = pd.concat(tables, ignore_index=True)
    out = Path(out_dir)
    atomic_write_text(out / "sensitivity.csv", result.to_csv(index=False))
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    fig = _bar_chart(result, method)
    FigureCanvasAgg(fig)
    with atomic_path(out / "sensitivity.png") as tmp:
        fig.savefig(tmp, format="png")
    return result
