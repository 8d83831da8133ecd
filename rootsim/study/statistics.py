"""Statistics of a study: per-variant summaries with confidence intervals, differences to a reference with a
multiple-comparison correction and effect sizes, and sampling power per depth layer.

All tests and intervals come from statsmodels / scipy:

* mean and its t confidence interval: ``statsmodels.stats.weightstats.DescrStatsW.tconfint_mean``;
* difference of means with Welch's unequal-variance t interval and test (Welch 1947,
  doi:10.1093/biomet/34.1-2.28): ``CompareMeans.tconfint_diff`` / ``ttest_ind(usevar="unequal")``;
* Holm's step-down correction of the p values of one trait's comparisons (Holm 1979, Scand. J. Stat.
  6:65-70): :func:`holm_adjust`, a few numpy lines equal to ``statsmodels.stats.multitest.multipletests(
  method="holm")`` (checked against it in the tests), which forces a full garbage collection on every call
  (about 0.3 s per trait in a process holding large tables);
* effect size: Hedges' g, the standardized mean difference with the small-sample correction
  J = 1 - 3 / (4 (n1 + n2) - 9) (Hedges 1981, doi:10.3102/10769986006002107);
* power: ``statsmodels.stats.power.TTestIndPower.solve_power`` (two-sided two-sample t test).
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd

__all__ = ["describe", "summarize", "differences", "hedges_g", "holm_adjust", "samples_needed", "power_table"]


def holm_adjust(p_values) -> np.ndarray:
    """Holm-adjusted p values (Holm 1979): the k-th smallest of m times (m - k + 1), running maximum, capped at 1."""
    p = np.asarray(p_values, dtype=float)
    order = np.argsort(p, kind="stable")
    m = p.size
    stepped = np.minimum(1.0, np.maximum.accumulate((m - np.arange(m)) * p[order]))
    out = np.empty(m)
    out[order] = stepped
    return out


def describe(values, *, confidence: float = 0.95) -> dict:
    """n, mean, standard deviation (n - 1) and the t confidence interval of the mean of ``values`` (NaN dropped)."""
    from statsmodels.stats.weightstats import DescrStatsW

    x = np.asarray(values, dtype=float)
    x = x[np.isfinite(x)]
    n = int(x.size)
    out = {"n": n, "mean": float(x.mean()) if n else math.nan, "sd": float(x.std(ddof=1)) if n > 1 else math.nan,
           "ci_low": math.nan, "ci_high": math.nan}
    if n > 1:
        stats = DescrStatsW(x)
        if stats.std > 0:
            low, high = stats.tconfint_mean(alpha=1 - confidence)
        else:
            low = high = stats.mean
        out.update(ci_low=float(low), ci_high=float(high))
    return out


def summarize(table: pd.DataFrame, columns: list[str], *, by: str = "variant", order: list | None = None,
              confidence: float = 0.95) -> pd.DataFrame:
    """One row per (group, column): ``n, mean, sd, ci_low, ci_high`` (long table)."""
    groups = order if order is not None else list(dict.fromkeys(table[by]))
    rows = []
    for column in columns:
        for g in groups:
            rows.append({by: g, "measure": column, **describe(table.loc[table[by] == g, column], confidence=confidence)})
    return pd.DataFrame(rows)


def hedges_g(a, b) -> float:
    """Hedges' g of ``a`` against ``b``: (mean a - mean b) / pooled SD x J (Hedges 1981)."""
    a, b = np.asarray(a, float), np.asarray(b, float)
    n1, n2 = a.size, b.size
    if n1 < 2 or n2 < 2:
        return math.nan
    pooled = math.sqrt(((n1 - 1) * a.var(ddof=1) + (n2 - 1) * b.var(ddof=1)) / (n1 + n2 - 2))
    if pooled == 0:
        return math.nan
    return (a.mean() - b.mean()) / pooled * (1 - 3 / (4 * (n1 + n2) - 9))


def differences(table: pd.DataFrame, columns: list[str], *, reference, by: str = "variant", order=None,
                confidence: float = 0.95) -> pd.DataFrame:
    """Each group minus ``reference`` per column: difference, Welch CI, p, Holm-adjusted p, Hedges' g."""
    from statsmodels.stats.weightstats import CompareMeans, DescrStatsW

    groups = [g for g in (order if order is not None else dict.fromkeys(table[by])) if g != reference]
    rows = []
    for column in columns:
        ref = table.loc[table[by] == reference, column].to_numpy(float)
        ref = ref[np.isfinite(ref)]
        block = []
        for g in groups:
            x = table.loc[table[by] == g, column].to_numpy(float)
            x = x[np.isfinite(x)]
            row = {by: g, "reference": reference, "measure": column,
                   "difference": float(x.mean() - ref.mean()) if x.size and ref.size else math.nan,
                   "ci_low": math.nan, "ci_high": math.nan, "p_value": math.nan, "hedges_g": hedges_g(x, ref)}
            if x.size > 1 and ref.size > 1 and (x.std() > 0 or ref.std() > 0):
                cm = CompareMeans(DescrStatsW(x), DescrStatsW(ref))
                low, high = cm.tconfint_diff(alpha=1 - confidence, usevar="unequal")
                _, p, _ = cm.ttest_ind(usevar="unequal")
                row.update(ci_low=float(low), ci_high=float(high), p_value=float(p))
            block.append(row)
        p = np.array([r["p_value"] for r in block], float)
        ok = np.isfinite(p)
        adjusted = np.full(p.shape, math.nan)
        if ok.any():
            adjusted[ok] = holm_adjust(p[ok])
        for r, q in zip(block, adjusted):
            r["p_holm"] = float(q)
            r["significant_holm"] = bool(q < 1 - confidence) if np.isfinite(q) else False
        rows += block
    return pd.DataFrame(rows)


def samples_needed(mean: float, sd: float, *, relative_difference: float, power: float = 0.8,
                   alpha: float = 0.05) -> float:
    """Samples per variant for a two-sided two-sample t test to detect ``relative_difference`` x ``mean``.

    Effect size d = relative_difference x mean / sd (Cohen's d); solved with statsmodels' ``TTestIndPower``.
    Returns NaN when the mean or SD is zero or not finite (or the solver finds no answer), and the answer
    rounded up to a whole sample, at least 2.
    """
    from statsmodels.stats.power import TTestIndPower

    if not (np.isfinite(mean) and np.isfinite(sd)) or mean <= 0 or sd <= 0:
        return math.nan
    import warnings

    effect = relative_difference * mean / sd
    analysis = TTestIndPower()
    if analysis.power(effect_size=effect, nobs1=2, alpha=alpha, ratio=1.0, alternative="two-sided") >= power:
        return 2.0  # the smallest sample with a variance estimate already has the power asked for
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        n = float(np.squeeze(analysis.solve_power(effect_size=effect, alpha=alpha, power=power, ratio=1.0,
                                                  alternative="two-sided")))
    return float(math.ceil(n - 1e-9)) if math.isfinite(n) else math.nan


def power_table(samples: pd.DataFrame | None, profiles: pd.DataFrame, runs: pd.DataFrame, *, reference,
                relative_difference: float = 0.2, power: float = 0.8, alpha: float = 0.05) -> pd.DataFrame:
    """Cores and plants per variant needed to detect a relative RLD difference in each depth layer.

    Cores: from the RLD of every core increment of the reference variant at the last date (the spread
    includes core-to-core and replicate-to-replicate variance, so each core counts as one independent sample).
    Plants: from the spread of whole-stand RLD between replicate stands; plants of a stand grow independently
    in rootsim, so one plant's SD is the stand SD x sqrt(plants per stand).
    """
    prof = profiles[(profiles["variant"] == reference) & (profiles["order"] == -1)]
    prof = prof[prof["day"] == prof["day"].max()]
    plants = runs.loc[(runs["variant"] == reference) & (runs["status"] == "ok"), "n_plants"] if "n_plants" in runs else []
    per_stand = float(plants.iloc[0]) if len(plants) else math.nan
    rows = []
    for (top, bottom), layer in prof.groupby(["depth_top_cm", "depth_bottom_cm"], sort=True):
        stand = describe(layer["rld_cm_per_cm3"])
        row = {"depth_top_cm": top, "depth_bottom_cm": bottom, "rld_mean_cm_per_cm3": stand["mean"],
               "stand_sd_cm_per_cm3": stand["sd"], "plant_sd_cm_per_cm3": stand["sd"] * math.sqrt(per_stand),
               "core_mean_cm_per_cm3": math.nan, "core_sd_cm_per_cm3": math.nan, "cores_needed": math.nan}
        row["plants_needed"] = samples_needed(stand["mean"], row["plant_sd_cm_per_cm3"],
                                              relative_difference=relative_difference, power=power, alpha=alpha)
        if samples is not None and "sampler" in samples:
            cores = samples[(samples["variant"] == reference) & (samples["sampler"] == "core")]
            cores = cores[(cores["day"] == cores["day"].max()) & (cores["depth_top_cm"] >= top - 1e-9)
                          & (cores["depth_bottom_cm"] <= bottom + 1e-9)]
            if len(cores):
                # one value per core and layer: length-weighted RLD of the increments inside the layer
                key = ["run_id", "sampler_id"]
                agg = cores.groupby(key)[["root_length_cm", "volume_cm3"]].sum()
                rld = (agg["root_length_cm"] / agg["volume_cm3"]).to_numpy()
                core = describe(rld)
                row.update(core_mean_cm_per_cm3=core["mean"], core_sd_cm_per_cm3=core["sd"],
                           cores_needed=samples_needed(core["mean"], core["sd"], relative_difference=relative_difference,
                                                       power=power, alpha=alpha))
        rows.append(row)
    return pd.DataFrame(rows)
