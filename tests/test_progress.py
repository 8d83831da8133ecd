"""Progress and silence: a line per stage (with its seconds) in logs, a live label on a terminal,
the writing after growth included; analyze in chunks within its stated memory budget."""

from __future__ import annotations

import io
import re
import tracemalloc
from pathlib import Path

import numpy as np
import pytest

import rootsim.progress as progress
from rootsim.cli import main
from rootsim.progress import format_seconds, stage

TAPROOT = Path(__file__).resolve().parents[1] / "params" / "taproot_laterals.toml"


class _Terminal(io.StringIO):
    def isatty(self):
        return True


def test_stage_writes_one_line_with_seconds_in_logs(monkeypatch):
    # The stage's seconds are the clock's difference between entering and leaving: a stand-in clock that reads
    # 100.0 s and then 102.5 s gives 2.5 s, written with two decimals below 10 s.
    import time

    log = io.StringIO()
    readings = iter([100.0, 102.5])
    monkeypatch.setattr(time, "perf_counter", lambda: next(readings))
    with stage("writing x.parquet", stream=log, min_seconds=0.0) as s:
        pass
    monkeypatch.undo()
    assert s.seconds == 2.5
    assert log.getvalue() == "writing x.parquet: 2.50 s\n"


def test_stage_on_a_terminal_shows_the_label_while_running_then_the_time():
    term = _Terminal()
    with stage("growing", stream=term, min_seconds=0.0):
        assert term.getvalue() == "growing ..."  # visible while the stage runs
    assert term.getvalue().endswith("\r\033[Kgrowing: " + term.getvalue().rsplit(": ", 1)[1])


def test_failed_or_quick_or_quiet_stages_leave_no_line():
    log = io.StringIO()
    with pytest.raises(ValueError):
        with stage("reading", stream=log, min_seconds=0.0):
            raise ValueError("bad")
    with stage("quick", stream=log):  # well under MIN_REPORT_SECONDS
        pass
    with stage("quiet", stream=log, enabled=False, min_seconds=0.0):
        pass
    assert log.getvalue() == ""


def test_format_seconds():
    assert format_seconds(0.4234) == "0.42 s" and format_seconds(12.34) == "12.3 s"
    assert format_seconds(185) == "3 min 05 s"


def test_grow_reports_growing_and_then_writing(tmp_path, capsys, monkeypatch):
    monkeypatch.setattr(progress, "MIN_REPORT_SECONDS", 0.0)  # report every stage, however quick
    assert main(["grow", str(TAPROOT), "--out", str(tmp_path), "--days", "3"]) == 0
    lines = capsys.readouterr().err.splitlines()
    assert re.fullmatch(r"growing taproot_laterals for 3 days: [\d.]+ s", lines[0]), lines
    assert re.fullmatch(rf"writing {re.escape(str(tmp_path / 'segments.parquet'))} and summary.json: [\d.]+ s", lines[1])


def many_plant_system(n_plants: int, segments_per_plant: int, *, seed: int = 5):
    """Random-walk roots (rootsim.sampling.synthetic) dealt to ``n_plants`` plants, laterals included:
    every 7th root branches from a segment of the previous root of the same plant."""
    from rootsim.rootsystem import RootSystem
    from rootsim.sampling.synthetic import random_walk_roots

    n_roots = 8 * n_plants
    base = random_walk_roots(n_plants * segments_per_plant, n_roots=n_roots, segment_cm=0.5,
                             rng=np.random.default_rng(seed))
    cols = {name: np.array(base[name]) for name in base.columns}
    per_root = len(cols["root_id"]) // n_roots
    cols["plant_id"] = cols["root_id"] % n_plants
    first = np.arange(0, n_roots * per_root, per_root)
    lateral = first[n_plants::7]  # roots branching from the previous root of their plant
    cols["parent_id"][lateral] = lateral - n_plants * per_root + per_root // 2
    cols["order"][:] = 0
    lateral_rows = np.isin(cols["root_id"], cols["root_id"][lateral])
    cols["order"][lateral_rows] = 1
    meta = {"stand": {"n_plants": n_plants, "ground_area_cm2": 3600.0 * n_plants}}
    return RootSystem(cols, meta)


def _length_above(depth_cm, top, base, length):
    """Root length above ``depth_cm`` with each segment's length spread evenly over its depth range and a
    horizontal segment counted below its own depth (half-open layers), by direct summation, cm."""
    steep = base > top
    span = np.where(steep, base - top, 1.0)
    share = np.where(steep, np.clip((depth_cm - top) / span, 0.0, 1.0), top < depth_cm)
    return float(np.sum(length * share))


def test_chunked_and_whole_table_analysis_against_direct_sums():
    # Independent references for both paths: layer lengths as differences of the root length above each depth,
    # summed directly; D50/D95 as the roots of that cumulative length (scipy brentq); the Gale & Grigal beta
    # (Gale & Grigal 1987, Can. J. For. Res. 17:829-834, doi:10.1139/x87-131) by scipy curve_fit of
    # Y = 1 - beta**d at the layer bottoms; totals, orders, roots and tips counted by hand (8 random-walk roots
    # per plant, each root one tip; every 7th root, from the 6th on, a lateral of order 1).
    from scipy.optimize import brentq, curve_fit

    from rootsim.analysis import layer_profile, root_traits
    from rootsim.analysis.chunked import chunked_layer_profile, chunked_root_traits

    n_plants, per_plant = 5, 3000
    system = many_plant_system(n_plants, per_plant)
    p0 = np.column_stack([np.asarray(system[f"{a}0"]) for a in "xyz"])
    p1 = np.column_stack([np.asarray(system[f"{a}1"]) for a in "xyz"])
    length = np.linalg.norm(p1 - p0, axis=1)
    top, base = np.minimum(-p0[:, 2], -p1[:, 2]), np.maximum(-p0[:, 2], -p1[:, 2])
    total = length.sum()
    area = 3600.0 * n_plants
    n_roots = 8 * n_plants
    lateral_roots = np.arange(n_plants, n_roots, 7)
    order = np.isin(np.asarray(system["root_id"]), lateral_roots).astype(int)

    for options, bottom in (({}, float(np.ceil(base.max() / 5.0)) * 5.0), ({"max_depth_cm": 40.0}, 40.0)):
        edges = np.arange(0.0, bottom + 1e-9, 5.0)
        above = np.array([_length_above(e, top, base, length) for e in edges])
        for profile in (layer_profile(system, layer_cm=5.0, **options),
                        chunked_layer_profile(system, layer_cm=5.0, chunk_segments=997, **options)):
            np.testing.assert_allclose(profile["depth_top_cm"], edges[:-1])
            np.testing.assert_allclose(profile["root_length_cm"], np.diff(above), rtol=1e-9, atol=1e-9)
            np.testing.assert_allclose(profile["rld_cm_per_cm3"], np.diff(above) / (area * 5.0), rtol=1e-9)

    quantiles = [brentq(lambda d: _length_above(d, top, base, length) - f * total, 0.0, base.max(), xtol=1e-12)
                 for f in (0.5, 0.95)]
    n_layers = int(np.ceil(base.max() / 5.0))
    bottoms = 5.0 * np.arange(1, n_layers + 1)
    fractions = np.array([_length_above(d, top, base, length) for d in bottoms]) / total
    (beta,), _ = curve_fit(lambda d, b: 1.0 - b ** d, bottoms, fractions, p0=[0.9], bounds=(0.0, 1.0))
    whole = root_traits(system, layer_cm=5.0)
    chunked = chunked_root_traits(system, layer_cm=5.0, chunk_segments=997)
    for traits in (whole, chunked):
        assert traits["n_segments"] == n_plants * per_plant
        assert traits["n_roots"] == n_roots and traits["n_tips"] == n_roots
        assert traits["total_length_cm"] == pytest.approx(total, rel=1e-12)
        assert traits["root_length_per_ground_area_cm_per_cm2"] == pytest.approx(total / area, rel=1e-12)
        assert traits["length_by_order_cm"] == pytest.approx(
            {str(k): v for k, v in enumerate(np.bincount(order, weights=length))}, rel=1e-12)
        assert traits["max_depth_cm"] == pytest.approx(base.max(), rel=1e-15)
        assert [traits["d50_depth_cm"], traits["d95_depth_cm"]] == pytest.approx(quantiles, abs=1e-9)
        assert traits["gale_grigal_beta"] == pytest.approx(beta, rel=1e-6)
        assert [q["total_length_cm"] for q in traits["plants"]] == pytest.approx(
            np.bincount(np.asarray(system["plant_id"]), weights=length), rel=1e-12)


def test_chunked_analysis_equals_whole_table_analysis():
    from rootsim.analysis import layer_profile, root_traits
    from rootsim.analysis.chunked import chunked_layer_profile, chunked_root_traits

    system = many_plant_system(5, 3000)
    for options in ({}, {"box": (-10.0, 10.0, -10.0, 10.0)}, {"max_depth_cm": 40.0}):
        whole = layer_profile(system, layer_cm=5.0, **options)
        chunked = chunked_layer_profile(system, layer_cm=5.0, chunk_segments=997, **options)
        assert list(chunked.columns) == list(whole.columns)
        np.testing.assert_allclose(chunked.to_numpy(), whole.to_numpy(), rtol=1e-10, atol=1e-9)
    whole, chunked = root_traits(system, layer_cm=5.0), chunked_root_traits(system, layer_cm=5.0, chunk_segments=997)
    assert set(chunked) == set(whole)
    for key in ("n_segments", "n_roots", "n_tips", "length_by_order_cm"):
        assert chunked[key] == pytest.approx(whole[key], rel=1e-10), key
    assert len(chunked["plants"]) == len(whole["plants"]) == 5
    for mine, theirs in zip(chunked["plants"], whole["plants"]):
        assert mine.keys() == theirs.keys()
        assert list(mine.values()) == pytest.approx(list(theirs.values()), rel=1e-10)
    for key in ("total_length_cm", "max_depth_cm", "d50_depth_cm", "d95_depth_cm", "gale_grigal_beta",
                "width_cm", "convex_hull_volume_cm3"):
        assert chunked[key] == pytest.approx(whole[key], rel=1e-10), key
    for key in ("mean_interbranch_distance_cm", "mean_insertion_angle_deg"):
        assert chunked[key].keys() == whole[key].keys()
        assert list(chunked[key].values()) == pytest.approx(list(whole[key].values()), rel=1e-10)


def test_chunked_d50_of_a_vertical_root_is_half_its_depth():
    # a straight vertical root of uniform density from the surface to 40 cm: D50 = 20 cm, D95 = 38 cm (analytic)
    from rootsim.analysis.chunked import chunked_quantile_depths
    from rootsim.analysis.depth_distribution import quantile_depths

    z = np.linspace(0.0, -40.0, 401)
    table = {"z0": z[:-1], "z1": z[1:], "length_cm": np.full(400, 0.1)}
    assert chunked_quantile_depths(table, (0.5, 0.95), chunk_segments=37) == pytest.approx([20.0, 38.0], abs=1e-9)
    assert quantile_depths(-z[:-1], -z[1:], table["length_cm"], (0.5, 0.95)) == pytest.approx([20.0, 38.0], abs=1e-9)


def test_analyze_stays_within_the_memory_budget_stated_in_the_readme(tmp_path, capsys, monkeypatch):
    # README: beyond the table itself (~120 B/segment once read) analyze needs at most ~30 B per segment of the
    # table plus ~250 B per segment of the largest plant. Measured with tracemalloc, reading included.
    import pandas  # noqa: F401 - imports are not part of the budget
    import scipy.spatial  # noqa: F401

    from rootsim.analysis import chunked

    n_plants, per_plant = 8, 25_000
    many_plant_system(n_plants, per_plant).write(tmp_path / "segments.parquet")
    n = n_plants * per_plant
    # chunks scaled to this small table as the default 500,000 is to tables of millions
    monkeypatch.setattr(chunked, "DEFAULT_CHUNK_SEGMENTS", 20_000)
    main(["analyze", str(tmp_path / "segments.parquet"), "--out-dir", str(tmp_path / "warm")])  # warm caches
    capsys.readouterr()
    tracemalloc.start()
    try:
        code = main(["analyze", str(tmp_path)])
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    assert code == 0
    budget = (120 + 30) * n + 250 * per_plant + 150 * 20_000 + 4_000_000
    assert peak <= budget, (peak / n, budget / n)
