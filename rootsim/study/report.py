"""``rootsim study compare``: tables, figures and one self-contained HTML report of a finished study.

Everything is computed and drawn in memory first, then written as a result folder
(:func:`rootsim.result_folder.write_result_folder`: a staged sibling swapped in, ``manifest.json`` with
``command = "study compare"``), so a failed comparison never leaves a half-written report. ``out`` may be new,
empty, or an earlier comparison (its manifest says so); anything else, and a folder equal to or holding the
study folder, or inside it other than the default ``STUDY/compare``, is refused before any work.
"""

from __future__ import annotations

import base64
import html
import io
import os
from pathlib import Path

import numpy as np
import pandas as pd

from ..errors import RootsimError
from .runner import read_results
from .statistics import differences, measure_unit, power_table, summarize

__all__ = ["compare_study", "comparison_tables", "report_html", "check_compare_folder"]

#: ``command`` recorded in the manifest of a comparison folder; only such a folder is ever replaced.
COMPARE_COMMAND = "study compare"
#: Level of every confidence interval in the tables (the columns are named ``ci95_...``).
_CONFIDENCE = 0.95
#: Default comparison folder inside a study folder.
DEFAULT_COMPARE_NAME = "compare"

#: Trait columns compared when present (in this order); other numeric trait columns follow.
_ID_COLUMNS = {"run_id", "variant", "replicate", "seed", "folder", "status", "error", "n_segments", "n_plants",
               "directory"}


def _trait_columns(runs: pd.DataFrame, factor_names) -> list[str]:
    skip = _ID_COLUMNS | set(factor_names)
    return [c for c in runs.columns if c not in skip and pd.api.types.is_numeric_dtype(runs[c])
            and runs[c].notna().any()]


def comparison_tables(results, *, reference=None, difference: float = 0.2, power: float = 0.8,
                      alpha: float = 0.05) -> dict[str, pd.DataFrame]:
    """The comparison tables of a study: trait and RLD-layer summaries, differences, power.

    Intervals are 95 % t intervals (``ci95_low``, ``ci95_high``); ``alpha`` is the significance level of the
    Holm-corrected tests and of the power table.

    Returns
    -------
    dict of DataFrame
        ``trait_summary`` (``variant, measure, unit, replicates, mean, standard_deviation, ci95_low, ci95_high``),
        ``trait_differences`` (``..., difference, ci95_low, ci95_high, unit, p_value, hedges_g, p_holm, ...``),
        ``rld_summary`` (``variant, layer, replicates, mean_cm_per_cm3, standard_deviation_cm_per_cm3,
        ci95_low_cm_per_cm3, ci95_high_cm_per_cm3``), ``rld_differences`` (``difference_cm_per_cm3``, ...) and
        ``power``.
    """
    for name, value, low, high in (("--difference", difference, 0, 10), ("--power", power, 0, 1),
                                   ("--alpha", alpha, 0, 1)):
        if not (low < value < high):
            raise RootsimError(f"{name} must be between {low} and {high} (exclusive), got {value:g}")
    runs = results.runs
    ok = runs[runs["status"] == "ok"]
    variants = list(dict.fromkeys(runs["variant"]))
    if reference is None:
        reference = variants[0]
    if reference not in variants:
        raise RootsimError(f"--reference {reference!r}: no such variant (allowed: {', '.join(variants)})")
    if ok.empty:
        raise RootsimError("no successful runs to compare (see the error column of runs.parquet)")
    traits = _trait_columns(ok, results.factor_names)
    prof = results.profiles
    prof = prof[(prof["order"] == -1) & (prof["day"] == prof["day"].max()) & prof["run_id"].isin(ok["run_id"])]
    labels = prof["depth_top_cm"].map("{:g}".format) + "-" + prof["depth_bottom_cm"].map("{:g}".format) + " cm"
    wide = prof.assign(layer=labels.to_numpy()).pivot_table(index=["run_id", "variant"], columns="layer",
                                                            values="rld_cm_per_cm3", sort=False).reset_index()
    layers = list(dict.fromkeys(labels))
    trait_summary = summarize(ok, traits, order=variants, confidence=_CONFIDENCE)
    trait_summary.insert(2, "unit", trait_summary["measure"].map(measure_unit))
    trait_differences = differences(ok, traits, reference=reference, order=variants, confidence=_CONFIDENCE,
                                    alpha=alpha)
    trait_differences.insert(trait_differences.columns.get_loc("p_value"), "unit",
                             trait_differences["measure"].map(measure_unit))
    rld_units = {c: f"{c}_cm_per_cm3" for c in ("mean", "standard_deviation", "ci95_low", "ci95_high", "difference")}
    return {
        "trait_summary": trait_summary,
        "trait_differences": trait_differences,
        "rld_summary": summarize(wide, layers, order=variants, confidence=_CONFIDENCE).rename(
            columns={"measure": "layer", **rld_units}),
        "rld_differences": differences(wide, layers, reference=reference, order=variants, confidence=_CONFIDENCE,
                                       alpha=alpha).rename(columns={"measure": "layer", **rld_units}),
        "power": power_table(results.samples, results.profiles[results.profiles["run_id"].isin(ok["run_id"])], ok,
                             reference=reference, relative_difference=difference, power=power, alpha=alpha),
    }


def _figure_profiles(results, summary: pd.DataFrame):
    from matplotlib.figure import Figure

    fig = Figure(figsize=(6.0, 5.0), dpi=100)
    ax = fig.add_subplot()
    for variant, block in summary.groupby("variant", sort=False):
        bounds = block["layer"].str.replace(" cm", "").str.split("-", expand=True).astype(float)
        mid = bounds.mean(axis=1).to_numpy()
        line, = ax.plot(block["mean_cm_per_cm3"], mid, marker="o", ms=3, label=str(variant))
        ax.fill_betweenx(mid, block["ci95_low_cm_per_cm3"], block["ci95_high_cm_per_cm3"], color=line.get_color(),
                         alpha=0.2, lw=0)
    ax.invert_yaxis()
    ax.set_xlabel("RLD, cm cm$^{-3}$ (mean, 95% CI band over replicates)")
    ax.set_ylabel("depth, cm")
    ax.legend(fontsize=8)
    fig.tight_layout()
    return fig


def _figure_traits(runs: pd.DataFrame, traits: list[str], variants: list):
    from matplotlib.figure import Figure

    shown = traits[:6]
    cols = 2
    rows = max(1, -(-len(shown) // cols))
    fig = Figure(figsize=(7.0, 2.4 * rows), dpi=100)
    rng = np.random.default_rng(0)  # horizontal jitter of the points only
    for i, trait in enumerate(shown):
        ax = fig.add_subplot(rows, cols, i + 1)
        for k, v in enumerate(variants):
            y = runs.loc[runs["variant"] == v, trait].to_numpy(float)
            ax.plot(k + rng.uniform(-0.12, 0.12, y.size), y, "o", ms=3, alpha=0.7)
            if y.size:
                ax.plot([k - 0.25, k + 0.25], [np.nanmean(y)] * 2, "k-", lw=1.5)
        ax.set_xticks(range(len(variants)))
        ax.set_xticklabels([str(v) for v in variants], rotation=30, ha="right", fontsize=7)
        ax.set_title(trait, fontsize=8)
    fig.tight_layout()
    return fig


def _figure_power(power: pd.DataFrame, difference: float):
    from matplotlib.figure import Figure

    fig = Figure(figsize=(6.0, 4.0), dpi=100)
    ax = fig.add_subplot()
    labels = [f"{a:g}-{b:g}" for a, b in zip(power["depth_top_cm"], power["depth_bottom_cm"])]
    y = np.arange(len(labels))
    ax.barh(y - 0.2, power["cores_needed"].fillna(0), height=0.4, label="cores per variant")
    ax.barh(y + 0.2, power["plants_needed"].fillna(0), height=0.4, label="plants per variant")
    ax.set_yticks(y)
    ax.set_yticklabels(labels)
    ax.invert_yaxis()
    ax.set_xscale("symlog", linthresh=10)
    ax.set_xlabel(f"samples needed to detect a {difference:.0%} RLD difference (80% power)")
    ax.set_ylabel("depth layer, cm")
    ax.legend(fontsize=8)
    fig.tight_layout()
    return fig


def _png(fig) -> bytes:
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    FigureCanvasAgg(fig)
    buf = io.BytesIO()
    fig.savefig(buf, format="png")
    return buf.getvalue()


def report_html(title: str, intro: str, sections: list[tuple[str, str, object]]) -> str:
    """A self-contained HTML page: ``sections`` are (heading, text, DataFrame or PNG bytes); no external links."""
    parts = ["<!DOCTYPE html>", '<html lang="en"><head><meta charset="utf-8">',
             '<meta name="viewport" content="width=device-width, initial-scale=1">',
             f"<title>{html.escape(title)}</title>",
             "<style>body{font-family:sans-serif;margin:1em;max-width:60em}img{max-width:100%;height:auto}"
             ".scroll{overflow-x:auto}table{border-collapse:collapse;font-size:0.85em}"
             "td,th{border:1px solid #ccc;padding:2px 6px;text-align:right}</style></head><body>",
             f"<h1>{html.escape(title)}</h1>", f"<p>{html.escape(intro)}</p>"]
    for heading, text, content in sections:
        parts.append(f"<h2>{html.escape(heading)}</h2>")
        if text:
            parts.append(f"<p>{html.escape(text)}</p>")
        if isinstance(content, bytes):
            data = base64.b64encode(content).decode("ascii")
            parts.append(f'<img alt="{html.escape(heading)}" src="data:image/png;base64,{data}">')
        elif isinstance(content, pd.DataFrame):
            parts.append('<div class="scroll">' + content.to_html(index=False, float_format=lambda v: f"{v:.4g}",
                                                                    na_rep="", border=0) + "</div>")
    parts.append("<p><small>Simulated results are research aids, not agronomic advice.</small></p></body></html>")
    return "\n".join(parts) + "\n"


def compare_study(folder, out, *, reference=None, difference: float = 0.2, power: float = 0.8,
                  alpha: float = 0.05) -> str:
    """Write the comparison of the study in ``folder`` into ``out`` (CSV tables, PNG figures, report.html).

    Returns a short text summary. Raises :class:`RootsimError` for a folder that is not a finished study or a
    bad option; nothing is written then.
    """
    results = read_results(folder)
    out = check_compare_folder(folder, out)
    tables = comparison_tables(results, reference=reference, difference=difference, power=power, alpha=alpha)
    variants = list(dict.fromkeys(results.runs["variant"]))
    reference = reference or variants[0]
    ok = results.runs[results.runs["status"] == "ok"]
    traits = _trait_columns(ok, results.factor_names)
    figures = {"rld_profiles.png": _png(_figure_profiles(results, tables["rld_summary"])),
               "traits.png": _png(_figure_traits(ok, traits, variants)),
               "power.png": _png(_figure_power(tables["power"], difference))}
    name = results.manifest.get("name", "study")
    failed = int((results.runs["status"] != "ok").sum())
    intro = (f"{len(results.runs)} runs of {len(variants)} variants ({failed} failed); reference variant: {reference}. "
             f"Intervals are 95% t intervals over replicate stands; differences use Welch's t with Holm's correction "
             f"within each trait; effect sizes are Hedges' g.")
    html_text = report_html(f"Study {name}: comparison", intro, [
        ("RLD profiles by variant", "Mean RLD per depth layer at the last date, with 95% CI bands.",
         figures["rld_profiles.png"]),
        ("RLD by depth layer", "", tables["rld_summary"]),
        (f"RLD differences to {reference}", "", tables["rld_differences"]),
        ("Traits", "", figures["traits.png"]),
        ("Trait summary", "", tables["trait_summary"]),
        (f"Trait differences to {reference}", "", tables["trait_differences"]),
        ("Sampling power", f"Cores and plants per variant needed to detect a {difference:.0%} difference in RLD "
         f"with {power:.0%} power at alpha = {alpha:g} (two-sided two-sample t test), from the reference "
         f"variant's spread.", figures["power.png"]),
        ("Sampling power table", "", tables["power"]),
    ])
    from ..result_folder import write_result_folder

    def write_files(staging: Path) -> dict:
        for key, table in tables.items():
            table.to_csv(staging / f"{key}.csv", index=False)
        for key, data in figures.items():
            (staging / key).write_bytes(data)
        (staging / "report.html").write_text(html_text, encoding="utf-8")
        return {"study_folder": str(Path(folder).resolve()), "reference": reference}

    write_result_folder(out, write_files, overwrite=True, command=COMPARE_COMMAND, run_file="report.html")
    diff = tables["trait_differences"]
    lines = [f"compared {len(variants)} variants against {reference}; wrote {out}/report.html and CSV tables"]
    for _, r in diff[diff["significant_holm"]].head(8).iterrows():
        lines.append(f"  {r['variant']}: {r['measure']} {r['difference']:+.4g} "
                     f"(95% CI {r['ci95_low']:.4g} to {r['ci95_high']:.4g}, Holm p = {r['p_holm']:.3g})")
    return "\n".join(lines)


def check_compare_folder(study_folder, out) -> Path:
    """Check, before any work, that the comparison of ``study_folder`` may be written to ``out``.

    Allowed: a missing or empty folder, or an earlier comparison (its ``manifest.json`` records
    ``command = "study compare"``), which is then replaced as a whole. Refused: an existing file, any other
    folder with content, the study folder itself, a folder that holds it, and a folder inside it other than
    ``STUDY/compare``.

    Raises
    ------
    RootsimError
        One line naming ``--out`` and what is allowed; nothing was written.
    """
    from ..errors import SegmentTableError
    from ..result_folder import read_manifest

    out = Path(out)
    study = Path(study_folder).resolve()
    target = out.resolve()
    allowed = "a new or empty folder, or an earlier 'rootsim study compare' folder"
    if target == study or target in study.parents:
        raise RootsimError(f"--out {out}: is or holds the study folder {study_folder} (allowed: {allowed} "
                           "outside it, or the default STUDY/compare)")
    if study in target.parents and target != study / DEFAULT_COMPARE_NAME:
        raise RootsimError(f"--out {out}: lies inside the study folder {study_folder} (allowed: {allowed} "
                           f"outside it, or the default {Path(study_folder) / DEFAULT_COMPARE_NAME})")
    if out.exists() or out.is_symlink():
        if not out.is_dir():
            raise RootsimError(f"--out {out}: exists and is not a folder (allowed: {allowed})")
        if any(os.scandir(out)):
            try:
                manifest = read_manifest(out)
            except SegmentTableError:
                manifest = None
            if manifest is None or manifest.command != COMPARE_COMMAND:
                raise RootsimError(f"--out {out}: is not empty and is not an earlier comparison (no manifest.json "
                                   f"of '{COMPARE_COMMAND}'); allowed: {allowed}")
    return out
