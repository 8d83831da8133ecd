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

__all__ = ["describe", "summarize", "interval_names", "measure_unit", "differences", "hedges_g", "holm_adjust", "samples_needed", "power_table"]


def holm_adjust(p_values) -> np.ndarray:
    """Holm-adjusted p values (Holm 1979): the k-th smallest of m times (m - k + 1), running maximum, capped at 1."""
    p = np.asarray(p_values, dtype=float)
    order = np.argsort(p, kind="stable")
    m = p.size
    stepped = np.minimum(1.0, np.maximum.accumulate((m - np.arange(m)) * p[order]))
    out = np.empty(m)
    out[order] = stepped
    return out


def interval_names(confidence: float = 0.95) -> tuple[str, str]:
    """Column names of a confidence interval's ends: ``("ci95_low", "ci95_high")`` for 95 %."""
    level = f"{confidence * 100:g}".replace(".", "_")
    return f"ci{level}_low", f"ci{level}_high"


#: Units of trait names by their suffix (project naming: units in the name), longest suffix first.
_UNIT_SUFFIXES = (("_cm_per_cm3", "cm cm-3"), ("_cm_per_cm2", "cm cm-2"), ("_cm_per_day", "cm d-1"),
                  ("_cm3", "cm3"), ("_cm2", "cm2"), ("_cm", "cm"), ("_deg", "deg"), ("_days", "days"),
                  ("_mpa", "MPa"), ("_kg_n_per_ha", "kg N ha-1"), ("_mm", "mm"))


def measure_unit(name: str) -> str:
    """Unit of a measured column from its name: ``total_length_cm`` -> ``"cm"``, ``n_tips`` -> ``"count"``,
    names without a unit suffix (indices, shape parameters) -> ``"dimensionless"``."""
    for suffix, unit in _UNIT_SUFFIXES:
        if name.endswith(suffix):
            return unit
    return "count" if name.startswith("n_") else "dimensionless"


def describe(values, *, confidence: float = 0.95) -> dict:
    """Replicates, mean, standard deviation (n - 1) and the t confidence interval of the mean of ``values``.

    NaN values are dropped. Keys: ``replicates``, ``mean``, ``standard_deviation`` and the interval's ends
    named by :func:`interval_names` (``ci95_low``, ``ci95_high`` at 95 %).
    """
    from statsmodels.stats.weightstats import DescrStatsW

    low_name, high_name = interval_names(confidence)
    x = np.asarray(values, dtype=float)
    x = x[np.isfinite(x)]
    n = int(x.size)
    out = {"replicates": n, "mean": float(x.mean()) if n else math.nan,
           "standard_deviation": float(x.std(ddof=1)) if n > 1 else math.nan, low_name: math.nan, high_name: math.nan}
    if n > 1:
        stats = DescrStatsW(x)
        if stats.std > 0:
            low, high = stats.tconfint_mean(alpha=1 - confidence)
        else:
            low = high = stats.mean
        out.update({low_name: float(low), high_name: float(high)})
    return out


def summarize(table: pd.DataFrame, columns: list[str], *, by: str = "variant", order: list | None = None,
              confidence: float = 0.95) -> pd.DataFrame:
    """One row per (group, column): ``replicates, mean, standard_deviation, ci95_low, ci95_high`` (long table)."""
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
                confidence: float = 0.95, alpha: float | None = None) -> pd.DataFrame:
    """Each group minus ``reference`` per column: difference, Welch CI (``ci95_low``, ``ci95_high`` at 95 %),
    p, Holm-adjusted p (significant below ``alpha``, default 1 - ``confidence``), Hedges' g."""
    from statsmodels.stats.weightstats import CompareMeans, DescrStatsW

    low_name, high_name = interval_names(confidence)
    alpha = 1 - confidence if alpha is None else alpha

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
                   low_name: math.nan, high_name: math.nan, "p_value": math.nan, "hedges_g": hedges_g(x, ref)}
            if x.size > 1 and ref.size > 1 and (x.std() > 0 or ref.std() > 0):
                cm = CompareMeans(DescrStatsW(x), DescrStatsW(ref))
                low, high = cm.tconfint_diff(alpha=1 - confidence, usevar="unequal")
                _, p, _ = cm.ttest_ind(usevar="unequal")
                row.update({low_name: float(low), high_name: float(high), "p_value": float(p)})
            block.append(row)
        p = np.array([r["p_value"] for r in block], float)
        ok = np.isfinite(p)
        adjusted = np.full(p.shape, math.nan)
        if ok.any():
            adjusted[ok] = holm_adjust(p[ok])
        for r, q in zip(block, adjusted):
            r["p_holm"] = float(q)
            r["significant_holm"] = bool(q < alpha) if np.isfinite(q) else False
        rows += block
    return pd.DataFrame(rows)


def samples_needed(mean: float, standard_deviation: float, *, relative_difference: float, power: float = 0.8,
                   alpha: float = 0.05) -> float:
    """Samples per variant for a two-sided two-sample t test to detect ``relative_difference`` x ``mean``.

    Effect size d = relative_difference x mean / standard_deviation (Cohen's d); solved with statsmodels' ``TTestIndPower``.
    Returns NaN when the mean or SD is zero or not finite (or the solver finds no answer), and the answer
    rounded up to a whole sample, at least 2.
    """
    from statsmodels.stats.power import TTestIndPower

    if not (np.isfinite(mean) and np.isfinite(standard_deviation)) or mean <= 0 or standard_deviation <= 0:
        return math.nan
    import warnings

    effect = relative_difference * mean / standard_deviation
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
    Columns: ``depth_top_cm``, ``depth_bottom_cm``, ``rld_mean_cm_per_cm3``, ``stand_standard_deviation_cm_per_cm3``,
    ``plant_standard_deviation_cm_per_cm3``, ``core_mean_cm_per_cm3``, ``core_standard_deviation_cm_per_cm3``,
    ``cores_needed``, ``plants_needed``.
    """
    prof = profiles[(profiles["variant"] == reference) & (profiles["order"] == -1)]
    prof = prof[prof["day"] == prof["day"].max()]
    plants = runs.loc[(runs["variant"] == reference) & (runs["status"] == "ok"), "n_plants"] if "n_plants" in runs else []
    per_stand = float(plants.iloc[0]) if len(plants) else math.nan
    rows = []
    for (top, bottom), layer in prof.groupby(["depth_top_cm", "depth_bottom_cm"], sort=True):
        stand = describe(layer["rld_cm_per_cm3"])
        row = {"depth_top_cm": top, "depth_bottom_cm": bottom, "rld_mean_cm_per_cm3": stand["mean"],
               "stand_standard_deviation_cm_per_cm3": stand["standard_deviation"],
               "plant_standard_deviation_cm_per_cm3": stand["standard_deviation"] * math.sqrt(per_stand),
               "core_mean_cm_per_cm3": math.nan, "core_standard_deviation_cm_per_cm3": math.nan,
               "cores_needed": math.nan}
        row["plants_needed"] = samples_needed(stand["mean"], row["plant_standard_deviation_cm_per_cm3"],
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
                row.update(core_mean_cm_per_cm3=core["mean"], core_standard_deviation_cm_per_cm3=core["standard_deviation"],
                           cores_needed=samples_needed(core["mean"], core["standard_deviation"],
                                                       relative_difference=relative_difference, power=power,
                                                       alpha=alpha))
        rows.append(row)
    return pd.DataFrame(rows)
