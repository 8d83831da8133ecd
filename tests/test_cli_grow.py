"""`rootsim grow`: the output layout, determinism, overrides, the segment budget and atomic output."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pandas as pd
import pyarrow.parquet as pq
import pytest

from rootsim.cli import main

PARAMS = Path(__file__).resolve().parents[1] / "params"
TAPROOT = PARAMS / "taproot_laterals.toml"

EXPECTED = ["segment_id", "parent_id", "plant_id", "root_id", "order", "root_class",
            "x0", "y0", "z0", "x1", "y1", "z1", "radius_cm", "length_cm", "birth_day"]


def grow_cli(out, *extra):
    return main(["grow", str(TAPROOT), "--out", str(out), "--days", "12", "--quiet", *extra])


def test_segments_parquet_layout_and_summary(tmp_path):
    assert grow_cli(tmp_path) == 0
    df = pd.read_parquet(tmp_path / "segments.parquet")  # plain pandas, as a user would
    assert list(df.columns[: len(EXPECTED)]) == EXPECTED
    schema = pq.read_schema(tmp_path / "segments.parquet")
    for name in ("segment_id", "parent_id", "plant_id", "root_id", "order"):
        assert str(schema.field(name).type) == "int64"
    assert np.array_equal(df.segment_id, np.arange(len(df)))
    assert (df.parent_id < df.segment_id).all() and (df.parent_id >= -1).all()
    # Geometry: length column equals the Euclidean distance of the end points; z <= 0 (soil below the surface).
    d = np.hypot(np.hypot(df.x1 - df.x0, df.y1 - df.y0), df.z1 - df.z0)
    assert np.allclose(d, df.length_cm, rtol=1e-9, atol=1e-12)
    assert (df[["z0", "z1"]].to_numpy() <= 0).all()
    # Continuations start where the parent ends; laterals start on their parent segment.
    parent = df.parent_id.to_numpy()
    has = parent >= 0
    same_root = np.zeros(len(df), bool)
    same_root[has] = df.root_id.to_numpy()[parent[has]] == df.root_id.to_numpy()[has]
    p0 = df[["x0", "y0", "z0"]].to_numpy()
    p1 = df[["x1", "y1", "z1"]].to_numpy()
    assert np.allclose(p0[same_root], p1[parent[same_root]])
    lat = has & ~same_root
    assert lat.any()
    a, b, q = p0[parent[lat]], p1[parent[lat]], p0[lat]
    t = np.clip(np.einsum("ij,ij->i", q - a, b - a) / np.einsum("ij,ij->i", b - a, b - a), 0, 1)
    assert np.abs(a + t[:, None] * (b - a) - q).max() < 1e-9
    assert (df.order[lat].to_numpy() == df.order.to_numpy()[parent[lat]] + 1).all()
    assert (df.order[parent == -1] == 0).all()
    summary = json.loads((tmp_path / "summary.json").read_text())
    for key in ("n_plants", "n_segments", "n_tips", "total_length_cm", "max_depth_cm", "length_by_order_cm"):
        assert key in summary
    assert summary["n_segments"] == len(df)
    assert summary["n_plants"] == 4
    assert summary["total_length_cm"] == pytest.approx(df.length_cm.sum())
    assert summary["max_depth_cm"] == pytest.approx(-df[["z0", "z1"]].to_numpy().min())
    by_order = df.groupby("order").length_cm.sum()
    assert {int(k): v for k, v in summary["length_by_order_cm"].items()} == pytest.approx(by_order.to_dict())
    # Tips: one per root (the root's apical segment).
    assert summary["n_tips"] == df.root_id.nunique()


def test_same_seed_is_byte_identical_and_other_seed_differs(tmp_path):
    # Reproducibility (the project's contract): the result depends on spec and seed alone, down to the bytes.
    assert grow_cli(tmp_path / "a", "--seed", "5") == 0
    assert grow_cli(tmp_path / "b", "--seed", "5") == 0
    assert grow_cli(tmp_path / "c", "--seed", "6") == 0
    a = (tmp_path / "a" / "segments.parquet").read_bytes()
    assert a == (tmp_path / "b" / "segments.parquet").read_bytes()
    assert a != (tmp_path / "c" / "segments.parquet").read_bytes()


def test_step_override_changes_resolution(tmp_path):
    # --step-days sets the time step: each growing tip makes one segment per step, so a 4x finer step makes
    # several times more segments while the total length stays the same law's length (within sampling error).
    assert grow_cli(tmp_path / "fine", "--step-days", "0.25") == 0
    assert grow_cli(tmp_path / "coarse", "--step-days", "1") == 0
    fine = json.loads((tmp_path / "fine" / "summary.json").read_text())
    coarse = json.loads((tmp_path / "coarse" / "summary.json").read_text())
    assert fine["time_step_days"] == 0.25 and coarse["time_step_days"] == 1
    assert fine["n_segments"] > 2.5 * coarse["n_segments"]
    assert fine["total_length_cm"] == pytest.approx(coarse["total_length_cm"], rel=0.15)


def test_segment_budget_stops_with_clear_message_and_writes_nothing(tmp_path, capsys):
    out = tmp_path / "run"
    assert grow_cli(out, "--max-segments", "200") == 2
    err = capsys.readouterr().err.strip()
    assert err.startswith("error: segment budget of 200 exceeded")
    assert "segments on day" in err and len(err.splitlines()) == 1
    assert not (out / "segments.parquet").exists() and not (out / "summary.json").exists()
    assert not list(out.glob("*.part*"))


def test_bad_input_is_one_line_error(tmp_path, capsys):
    assert main(["grow", str(tmp_path / "nope.toml"), "--out", str(tmp_path / "x")]) == 2
    assert capsys.readouterr().err.startswith("error: ")
    assert main(["grow", str(TAPROOT), "--out", str(tmp_path / "x"), "--step-days", "0"]) == 2
    err = capsys.readouterr().err
    assert err.startswith("error: ") and "run.time_step_days" in err and "Traceback" not in err
    assert main(["grow", str(TAPROOT), "--out", str(tmp_path / "x"), "--days", "abc"]) == 2
    assert capsys.readouterr().err.startswith("error: ")


def test_every_shipped_architecture_grows(tmp_path):
    # Smoke check of the README promise that each shipped file grows (its numbers are checked elsewhere).
    for path in sorted(PARAMS.glob("*.toml")):
        out = tmp_path / path.stem
        assert main(["grow", str(path), "--out", str(out), "--days", "8", "--quiet"]) == 0
        df = pd.read_parquet(out / "segments.parquet")
        assert len(df) > 0 and df.length_cm.sum() > 0
