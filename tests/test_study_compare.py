"""Study comparisons: interval coverage, Welch/Holm against scipy and the published procedure, sampling power
against statsmodels and by simulation, and the HTML report parsed as a browser would."""

from __future__ import annotations

import base64
import io
import math
import re
import shutil
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from rootsim.cli import main
from rootsim.study import plan_study, run_plan
from rootsim.study.statistics import describe, differences, hedges_g, holm_adjust, power_table, samples_needed
from study_helpers import TINY_STUDY, write_study


def test_t_intervals_cover_the_mean_about_95_percent_of_the_time():
    # Coverage of the t interval on normal samples is exactly 95 % (Student 1908); checked by seeded simulation
    # with 2000 samples of n = 5: binomial SD of the coverage is 0.49 %.
    rng = np.random.default_rng(1908)
    hits = 0
    for _ in range(2000):
        d = describe(rng.normal(3.0, 2.0, size=5))
        hits += d["ci95_low"] <= 3.0 <= d["ci95_high"]
    assert abs(hits / 2000 - 0.95) < 0.015


def test_differences_match_welch_and_holm():
    rng = np.random.default_rng(3)
    table = pd.DataFrame({"variant": np.repeat(["ref", "a", "b", "c"], 6),
                          "x": np.concatenate([rng.normal(10, 1, 6), rng.normal(13, 2, 6), rng.normal(10.5, 1, 6),
                                               rng.normal(7, 3, 6)])})
    out = differences(table, ["x"], reference="ref").set_index("variant")
    ref = table.x[table.variant == "ref"]
    raw = []
    for v in ("a", "b", "c"):
        x = table.x[table.variant == v]
        welch = stats.ttest_ind(x, ref, equal_var=False)  # scipy's Welch test (independent implementation)
        assert out.loc[v, "p_value"] == pytest.approx(welch.pvalue, rel=1e-9)
        assert out.loc[v, "difference"] == pytest.approx(x.mean() - ref.mean())
        ci = welch.confidence_interval(0.95)
        assert (out.loc[v, "ci95_low"], out.loc[v, "ci95_high"]) == pytest.approx((ci.low, ci.high), rel=1e-9)
        raw.append(welch.pvalue)
    # Holm (1979): sort p ascending, multiply the k-th smallest by (m - k + 1), running maximum, cap at 1
    order = np.argsort(raw)
    adjusted = np.empty(3)
    running = 0.0
    for k, i in enumerate(order):
        running = max(running, min(1.0, (3 - k) * raw[i]))
        adjusted[i] = running
    assert out.loc[["a", "b", "c"], "p_holm"].to_numpy() == pytest.approx(adjusted)
    from statsmodels.stats.multitest import multipletests  # the independent library's Holm

    some = np.array([0.01, 0.04, 0.03, 0.005, 0.2, 0.04])
    assert holm_adjust(some) == pytest.approx(multipletests(some, method="holm")[1])
    # Hedges' g (Hedges 1981): pooled-SD standardized difference times 1 - 3 / (4 (n1 + n2) - 9)
    a = table.x[table.variant == "a"].to_numpy()
    pooled = math.sqrt((5 * a.var(ddof=1) + 5 * ref.var(ddof=1)) / 10)
    assert hedges_g(a, ref.to_numpy()) == pytest.approx((a.mean() - ref.mean()) / pooled * (1 - 3 / 39))


def test_samples_needed_against_statsmodels_and_by_simulation():
    from statsmodels.stats.power import tt_ind_solve_power

    mean, sd, rel = 2.0, 1.0, 0.5  # effect size d = 1.0
    n = samples_needed(mean, sd, relative_difference=rel)
    assert n == math.ceil(tt_ind_solve_power(effect_size=1.0, alpha=0.05, power=0.8))  # 17 (Cohen 1988: 17)
    assert n == 17
    # by simulation: with n samples per group, Welch's t test detects the difference about 80 % of the time
    rng = np.random.default_rng(80)
    a = rng.normal(mean, sd, (4000, int(n)))
    b = rng.normal(mean * (1 + rel), sd, (4000, int(n)))
    rate = np.mean(stats.ttest_ind(a, b, axis=1).pvalue < 0.05)
    assert 0.785 <= rate <= 0.845  # n is rounded up, so power is a little above 0.80 (SD of the rate 0.6 %)
    assert math.isnan(samples_needed(0.0, 1.0, relative_difference=0.2))


def test_power_table_uses_core_and_stand_spread():
    # two replicate stands of 4 plants, two cores each; one layer 0-10 cm
    profiles = pd.DataFrame({"run_id": ["r0", "r1"], "variant": "ref", "replicate": [0, 1], "day": 10.0, "order": -1,
                             "depth_top_cm": 0.0, "depth_bottom_cm": 10.0, "root_length_cm": [1.0, 1.0],
                             "rld_cm_per_cm3": [1.0, 1.4]})
    samples = pd.DataFrame({"run_id": ["r0", "r0", "r1", "r1"], "variant": "ref", "replicate": [0, 0, 1, 1],
                            "day": 10.0, "sampler": "core", "sampler_id": [0, 1, 0, 1], "depth_top_cm": 0.0,
                            "depth_bottom_cm": 10.0, "root_length_cm": [10.0, 20.0, 30.0, 40.0],
                            "volume_cm3": 10.0})
    runs = pd.DataFrame({"run_id": ["r0", "r1"], "variant": "ref", "status": "ok", "n_plants": 4})
    row = power_table(samples, profiles, runs, reference="ref", relative_difference=0.25).iloc[0]
    core_sd = np.std([1.0, 2.0, 3.0, 4.0], ddof=1)
    assert row.core_mean_cm_per_cm3 == pytest.approx(2.5) and row.core_standard_deviation_cm_per_cm3 == pytest.approx(core_sd)
    from statsmodels.stats.power import TTestIndPower

    assert row.cores_needed == math.ceil(TTestIndPower().solve_power(0.25 * 2.5 / core_sd, alpha=0.05, power=0.8))
    plant_sd = np.std([1.0, 1.4], ddof=1) * 2.0  # stand of 4 independent plants: plant SD = stand SD x sqrt(4)
    assert row.plant_standard_deviation_cm_per_cm3 == pytest.approx(plant_sd)
    assert row.plants_needed == math.ceil(TTestIndPower().solve_power(0.25 * 1.2 / plant_sd, alpha=0.05, power=0.8))


@pytest.fixture(scope="module")
def tiny_study(tmp_path_factory):
    folder = tmp_path_factory.mktemp("compare")
    run_plan(plan_study(write_study(folder, TINY_STUDY.replace("replicates = 2", "replicates = 3"))),
             folder / "study", progress=False)
    return folder / "study"


def test_compare_writes_a_self_contained_report(tiny_study, capsys):
    from lxml import html as lxml_html
    from matplotlib.image import imread

    assert main(["study", "compare", str(tiny_study), "--reference", "angle-80_spacing-1.5"]) == 0
    out = tiny_study / "compare"
    for name in ("trait_summary", "trait_differences", "rld_summary", "rld_differences", "power"):
        assert (out / f"{name}.csv").is_file()
    summary = pd.read_csv(out / "trait_summary.csv")
    runs = pd.read_parquet(tiny_study / "runs.parquet")
    mine = summary[(summary.variant == "angle-45_spacing-0.5") & (summary.measure == "total_length_cm")].iloc[0]
    values = runs.total_length_cm[runs.variant == "angle-45_spacing-0.5"]
    assert mine["mean"] == pytest.approx(values.mean())
    assert mine["standard_deviation"] == pytest.approx(values.std(ddof=1))
    assert mine["replicates"] == 3 and mine["unit"] == "cm"
    rld = pd.read_csv(out / "rld_summary.csv")
    assert list(rld.columns) == ["variant", "layer", "replicates", "mean_cm_per_cm3", "standard_deviation_cm_per_cm3",
                                 "ci95_low_cm_per_cm3", "ci95_high_cm_per_cm3"]
    power = pd.read_csv(out / "power.csv")
    assert {"stand_standard_deviation_cm_per_cm3", "plant_standard_deviation_cm_per_cm3",
            "core_standard_deviation_cm_per_cm3"} <= set(power.columns)
    diffs = pd.read_csv(out / "trait_differences.csv")
    assert set(diffs.reference) == {"angle-80_spacing-1.5"} and "angle-80_spacing-1.5" not in set(diffs.variant)
    text = (out / "report.html").read_text()
    doc = lxml_html.fromstring(text)
    assert doc.find(".//meta[@name='viewport']") is not None  # readable on a phone
    images = doc.findall(".//img")
    assert len(images) == 3
    for img in images:
        src = img.get("src")
        assert src.startswith("data:image/png;base64,")
        picture = imread(io.BytesIO(base64.b64decode(src.split(",", 1)[1])), format="png")
        assert picture.shape[0] > 100 and picture.shape[1] > 100
    refs = [e.get(a) for e in doc.iter() for a in ("src", "href") if e.get(a)]
    assert all(r.startswith("data:") for r in refs)  # nothing fetched from the network or the disk
    assert len(doc.findall(".//table")) == 5
    # the same page in a real browser: test_report_opens_without_errors_in_headless_chromium


def _chromium() -> str | None:
    found = shutil.which("chromium")
    return found or ("/usr/bin/chromium" if Path("/usr/bin/chromium").exists() else None)


needs_chromium = pytest.mark.skipif(_chromium() is None,
                                    reason="Chromium is not installed (Debian package 'chromium', /usr/bin/chromium)")

# Chromium's log line for a page's console message: [pid:tid:date/time:LEVEL:CONSOLE...] "message", source: url (line)
_CONSOLE = re.compile(r"^\[[^\]]*:(?P<level>[A-Z]+):CONSOLE[^\]]*\] (?P<message>.*)$")


def open_in_chromium(page: Path, profile: Path) -> tuple[str, list[str]]:
    """The DOM headless Chromium builds from ``page`` and every message the page put on its console (uncaught
    exceptions, console.error, resources that failed to load), read from Chromium's own log on stderr.

    Chromium logs all console messages at one level (INFO), whatever their severity, so every one counts: the
    report has no scripts and a clean page writes nothing to the console."""
    import subprocess

    profile.mkdir()  # a new, empty profile: no extensions, history or settings of anyone
    done = subprocess.run([_chromium(), "--headless", "--no-sandbox", "--disable-gpu", "--disable-background-networking",
                           "--no-first-run", "--disable-component-update", "--disable-sync",
                           f"--user-data-dir={profile}", "--enable-logging=stderr", "--v=0", "--dump-dom",
                           page.as_uri()], capture_output=True, text=True, timeout=180)
    assert done.returncode == 0, done.stderr[-2000:]
    errors = []
    for line in done.stderr.splitlines():
        if _CONSOLE.match(line):
            errors.append(line)
    return done.stdout, errors


@needs_chromium
def test_the_chromium_check_sees_a_script_error(tmp_path):
    # the check itself can fail: a page with an uncaught ReferenceError and a console.error is reported
    page = tmp_path / "broken.html"
    page.write_text("<!DOCTYPE html><html><body><table><tr><td>1</td></tr></table>"
                    "<script>console.error('broken on purpose'); notDefinedAnywhere();</script></body></html>")
    dom, errors = open_in_chromium(page, tmp_path / "profile")
    assert "<table>" in dom
    assert any("notDefinedAnywhere" in e for e in errors) and any("broken on purpose" in e for e in errors), errors


@needs_chromium
def test_report_opens_without_errors_in_headless_chromium(tiny_study, tmp_path, capsys):
    # issue 11: the report must open without errors in a real headless browser (Chromium from the system packages)
    from lxml import html as lxml_html

    out = tmp_path / "compare"
    assert main(["study", "compare", str(tiny_study), "--reference", "angle-80_spacing-1.5", "--out", str(out)]) == 0
    dom, errors = open_in_chromium(out / "report.html", tmp_path / "profile")
    assert errors == []
    doc = lxml_html.fromstring(dom)  # the browser's DOM, serialized by Chromium, parsed by lxml
    assert doc.findtext(".//h1").startswith("Study tiny_trial")
    assert len(doc.findall(".//img")) == 3
    tables = doc.findall(".//table")
    # the report's five tables, each with the columns and rows of the CSV written beside it (read by pandas)
    shown = sorted((tuple(th.text_content().strip() for th in t.findall(".//thead//th")), len(t.findall(".//tbody/tr")))
                   for t in tables)
    written = sorted((tuple(frame.columns), len(frame)) for frame in
                     (pd.read_csv(out / f"{n}.csv") for n in ("trait_summary", "trait_differences", "rld_summary",
                                                               "rld_differences", "power")))
    assert shown == written


def test_compare_bad_input_is_one_line_and_writes_nothing(tiny_study, tmp_path, capsys):
    assert main(["study", "compare", str(tiny_study), "--reference", "nope", "--out", str(tmp_path / "c")]) == 2
    err = capsys.readouterr().err
    assert err.startswith("error: ") and "nope" in err and "angle-45_spacing-0.5" in err and err.count("\n") == 1
    assert not (tmp_path / "c").exists()
    assert main(["study", "compare", str(tmp_path), "--out", str(tmp_path / "c")]) == 2
    assert "not a study folder" in capsys.readouterr().err
    assert main(["study", "compare", str(tiny_study), "--difference", "0", "--out", str(tmp_path / "c")]) == 2
    assert not (tmp_path / "c").exists()


def _tree(folder: Path) -> dict:
    """Every file under ``folder`` with its bytes (to show a refused command changed nothing)."""
    return {str(p.relative_to(folder)): p.read_bytes() for p in sorted(folder.rglob("*")) if p.is_file()}


def test_compare_never_replaces_what_is_not_an_earlier_comparison(tiny_study, tmp_path, capsys):
    study_files = _tree(tiny_study)
    precious = tmp_path / "precious.txt"
    precious.write_text("field notes\n")
    notes = tmp_path / "notes"
    notes.mkdir()
    (notes / "plot_plan.txt").write_text("block layout\n")
    refused = {str(tiny_study): "is or holds the study folder",  # the study folder itself
               str(tiny_study.parent): "is or holds the study folder",  # a folder holding it
               str(tiny_study / "runs"): "lies inside the study folder",
               str(precious): "exists and is not a folder",
               str(notes): "is not an earlier comparison"}
    for out, words in refused.items():
        assert main(["study", "compare", str(tiny_study), "--out", out]) == 2
        err = capsys.readouterr().err
        assert err.startswith("error: --out ") and words in err and err.count("\n") == 1, err
    assert _tree(tiny_study) == study_files  # runs/, runs.parquet and the rest untouched
    assert precious.read_text() == "field notes\n"
    assert (notes / "plot_plan.txt").read_text() == "block layout\n" and len(list(notes.iterdir())) == 1
    # an earlier comparison (its manifest says so) is replaced as a whole, twice over
    out = tmp_path / "cmp"
    for _ in range(2):
        assert main(["study", "compare", str(tiny_study), "--out", str(out)]) == 0
        capsys.readouterr()
    from rootsim.result_folder import verify_result_folder

    manifest = verify_result_folder(out)
    assert manifest.command == "study compare" and "report.html" in manifest.files
    assert not [p for p in tmp_path.iterdir() if p.name.startswith(".")]  # no staging or .old folder left
