"""Batches: per-replicate seeds, independence from worker count and from the other variants."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd

from rootsim import RootSystem
from rootsim.batch import plan_batch, replicate_seed, run_batch
from rootsim.cli import main
from rootsim.spec import load_spec

PARAMS = Path(__file__).resolve().parents[1] / "params"


def small(name):
    return load_spec(PARAMS / f"{name}.toml").with_overrides(duration_days=6)


def test_replicate_seeds_follow_seedsequence_and_differ():
    # Reference: numpy's SeedSequence spawning (children depend only on the parent entropy and their index).
    assert replicate_seed(7, 3) == int(np.random.SeedSequence(7).spawn(4)[3].generate_state(1, dtype=np.uint32)[0])
    seeds = {replicate_seed(7, r) for r in range(20)}
    assert len(seeds) == 20


def test_results_do_not_depend_on_workers_or_other_variants(tmp_path):
    # The reproducibility contract: a run depends on its spec, seed and replicate number alone, so serial and
    # Dask runs, and batches with other variants, give identical tables.
    taproot, basal = small("taproot_laterals"), small("shallow_basal")
    serial = run_batch(plan_batch([taproot, basal], replicates=2), out_dir=tmp_path / "serial", progress=False)
    alone = run_batch(plan_batch([basal], replicates=2), progress=False)
    parallel = run_batch(plan_batch([basal, taproot], replicates=2), out_dir=tmp_path / "dask", workers=2,
                         progress=False)
    cols = ["variant", "replicate", "seed", "n_segments", "total_length_cm", "max_depth_cm"]
    pd.testing.assert_frame_equal(serial[cols], parallel[cols])
    pd.testing.assert_frame_equal(serial[serial.variant == "shallow_basal"][cols].reset_index(drop=True),
                                  alone[cols])
    assert serial.groupby("variant").total_length_cm.nunique().min() == 2  # replicates differ
    a = RootSystem.read(tmp_path / "serial" / "shallow_basal" / "replicate_001")
    b = RootSystem.read(tmp_path / "dask" / "shallow_basal" / "replicate_001")
    assert np.array_equal(a["x1"], b["x1"]) and np.array_equal(a["parent_id"], b["parent_id"])
    assert (tmp_path / "serial" / "batch.csv").exists()


def test_batch_cli_and_errors(tmp_path, capsys):
    spec = PARAMS / "taproot_laterals.toml"
    assert main(["batch", str(spec), "--replicates", "2", "--days", "4", "--out", str(tmp_path / "b")]) == 0
    table = pd.read_csv(tmp_path / "b" / "batch.csv")
    assert list(table.replicate) == [0, 1]
    assert main(["batch", str(spec), str(spec), "--out", str(tmp_path / "c")]) == 2
    assert "distinct" in capsys.readouterr().err
    assert main(["batch", str(spec), "--replicates", "0", "--out", str(tmp_path / "d")]) == 2
    assert capsys.readouterr().err.startswith("error: ")
