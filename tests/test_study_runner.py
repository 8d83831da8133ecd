"""Study runs: seeds from the study file alone, identical results on 1 / 2 workers / Dask, kill and resume,
failed runs recorded, bad study files as one-line errors, batch as a thin form of the runner."""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import time
import zlib
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from rootsim.cli import main
from rootsim.study import plan_study, run_plan, run_seed
from study_helpers import PARAMS, TINY_STUDY, write_study

ROOT = Path(__file__).resolve().parents[1]


def _tables(folder):
    return {name: pd.read_parquet(folder / f"{name}.parquet") for name in ("runs", "profiles", "samples")}


def _assert_same(a, b):
    for name in a:
        pd.testing.assert_frame_equal(a[name], b[name], check_exact=True)


def test_seeds_are_seedsequence_children_keyed_by_variant_and_replicate():
    # Reference: numpy's SeedSequence spawn_key semantics (children depend only on entropy and key).
    expected = np.random.SeedSequence(11, spawn_key=(zlib.crc32(b"angle-45_spacing-0.5"), 1)).generate_state(1, dtype=np.uint32)[0]
    assert run_seed(11, "angle-45_spacing-0.5", 1) == int(expected)
    assert run_seed(11, "a", 0) != run_seed(11, "b", 0) != run_seed(11, "b", 1)
    assert run_seed(11, "a", 3, common_random_numbers=True) == run_seed(11, "b", 3, common_random_numbers=True)


def test_plan_factorial_names_levels_and_distributions(tmp_path):
    plan = plan_study(write_study(tmp_path))
    assert [t.variant for t in plan.tasks[::2]] == ["angle-45_spacing-0.5", "angle-45_spacing-1.5",
                                                     "angle-80_spacing-0.5", "angle-80_spacing-1.5"]
    task = plan.tasks[2]
    assert task.factors == {"angle": 45.0, "spacing": 1.5} and task.replicate == 0
    # a number set on a distribution sets its centre (the shipped insertion angle is a normal distribution)
    lateral = task.spec.root_classes["lateral_first"].insertion_angle_deg
    assert getattr(lateral, "mean", getattr(lateral, "value", None)) == 45.0
    spacing = task.spec.root_classes["taproot"].interbranch_distance_cm
    assert spacing.mean == 1.5 and spacing.standard_deviation > 0  # the spread of the base file is kept
    assert task.spec.run.duration_days == 10


def test_latin_hypercube_is_seeded_and_stratified(tmp_path):
    text = TINY_STUDY.replace('kind = "factorial"', 'kind = "latin_hypercube"\nsamples = 6').replace(
        "levels = [45.0, 80.0]", "range = [40.0, 85.0]").replace("levels = [0.5, 1.5]", "range = [0.5, 1.5]")
    a = plan_study(write_study(tmp_path, text))
    b = plan_study(write_study(tmp_path, text, "again.toml"))
    angles = np.array([t.factors["angle"] for t in a.tasks[::2]])
    assert np.array_equal(angles, [t.factors["angle"] for t in b.tasks[::2]])
    # Latin hypercube property (McKay et al. 1979): exactly one sample in each of the 6 equal strata
    strata = np.floor((angles - 40.0) / 45.0 * 6).astype(int)
    assert sorted(strata) == list(range(6))


def test_same_results_on_one_two_workers_and_dask(tmp_path):
    plan = plan_study(write_study(tmp_path))
    run_plan(plan, tmp_path / "one", progress=False)
    run_plan(plan, tmp_path / "two", workers=2, progress=False)
    from dask.distributed import LocalCluster

    with LocalCluster(n_workers=2, threads_per_worker=1, processes=True, host="127.0.0.1",
                      dashboard_address=None) as cluster:
        run_plan(plan, tmp_path / "dask", scheduler=cluster.scheduler_address, progress=False)
    one = _tables(tmp_path / "one")
    _assert_same(one, _tables(tmp_path / "two"))
    _assert_same(one, _tables(tmp_path / "dask"))
    runs = one["runs"]
    assert len(runs) == 8 and (runs.status == "ok").all()
    assert runs.groupby("variant").total_length_cm.nunique().min() == 2  # replicates differ
    # a variant's runs do not depend on the other variants in the study
    alone = TINY_STUDY.replace("levels = [45.0, 80.0]", "levels = [80.0]")
    single = run_plan(plan_study(write_study(tmp_path, alone, "alone.toml")), progress=False).runs
    mine = runs[runs.variant.str.startswith("angle-80")].reset_index(drop=True)
    assert np.array_equal(single.total_length_cm.to_numpy(), mine.total_length_cm.to_numpy())
    # profiles: the all-orders rows add up the per-order rows; layers add up to the root length above 40 cm
    prof = one["profiles"]
    last = prof[(prof.day == 10) & (prof.run_id == runs.run_id[0])]
    total = last[last.order == -1].root_length_cm.to_numpy()
    assert np.allclose(total, last[last.order >= 0].groupby("depth_top_cm").root_length_cm.sum().to_numpy())
    assert set(one["samples"].day) == {6.0, 10.0} and set(prof.day) == {6.0, 10.0}


def _study_cmd(study, out, *extra):
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    return [sys.executable, "-m", "rootsim", "study", "run", str(study), "--out", str(out), *extra], env


def test_killed_study_resumes_to_the_uninterrupted_result(tmp_path):
    study = write_study(tmp_path, TINY_STUDY.replace("replicates = 2", "replicates = 3"))
    reference = tmp_path / "reference"
    run_plan(plan_study(study), reference, progress=False)
    out = tmp_path / "killed"
    rng = np.random.default_rng(20261202)
    for delay in rng.uniform(1.0, 3.0, size=2):
        cmd, env = _study_cmd(study, out, "--resume")
        proc = subprocess.Popen(cmd, env=env, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
        time.sleep(delay)
        proc.send_signal(signal.SIGKILL)
        proc.wait()
        # after any kill: every run folder is whole (run.json and its tables), nothing else
        for run_dir in out.glob("runs/*/replicate_*"):
            assert (run_dir / "run.json").is_file() and (run_dir / "profile.parquet").is_file()
    cmd, env = _study_cmd(study, out, "--resume")
    assert subprocess.run(cmd, env=env, capture_output=True).returncode == 0
    _assert_same(_tables(reference), _tables(out))
    assert not (out / ".partial").exists() and not list(out.rglob("*.part*"))


def test_segment_budget_failures_are_recorded_and_the_study_goes_on(tmp_path):
    text = TINY_STUDY.replace('key = "root_classes.taproot.interbranch_distance_cm"\nlevels = [0.5, 1.5]',
                              'key = "run.max_segments"\nlevels = [20, 1000000]')
    results = run_plan(plan_study(write_study(tmp_path, text)), tmp_path / "out", progress=False)
    runs = results.runs.set_index("variant")
    assert (runs.loc["angle-45_spacing-1000000", "status"] == "ok").all()
    budget = runs.loc["angle-45_spacing-20"]
    assert (budget.status == "failed").all() and budget.error.str.contains("segment budget").all()
    assert (runs.loc["angle-80_spacing-1000000", "status"] == "ok").all()
    assert len(results.runs) == 8


_NAMED_VARIANTS = f'''
name = "typed_values"
base = "{PARAMS / 'taproot_laterals.toml'}"
master_seed = 3
replicates = 1
[design]
kind = "variants"
[[variants]]
name = "fine"
[[variants]]
name = "thick"
set = {{ "root_classes.taproot.radius_cm" = "thick" }}
'''


@pytest.mark.parametrize("change, words", [
    (("root_classes.taproot.interbranch_distance_cm", "root_classes.taproot.interbranch_distanse_cm"),
     ["factors[1].key", "unknown key path", "interbranch_distance_cm"]),
    (("levels = [0.5, 1.5]", "levels = []"), ["factors[1].levels"]),
    (("taproot_laterals.toml", "no_such_base.toml"), ["base", "does not exist"]),
    (("replicates = 2", "replicates = 0"), ["replicates"]),
    (("[measure]", "[measure]\ncapture = true"), ["capture"]),
    # an invalid value of one factor level stops the plan before any run (insertion angles lie in 0..180 deg)
    (("levels = [45.0, 80.0]", "levels = [45.0, 250.0]"),
     ["factors[0].levels", "angle-250_spacing-0.5", "insertion_angle_deg"]),
])
def test_bad_study_files_are_one_line_errors_and_write_nothing(tmp_path, capsys, change, words):
    study = write_study(tmp_path, TINY_STUDY.replace(*change))
    assert main(["study", "run", str(study), "--out", str(tmp_path / "out")]) == 2
    err = capsys.readouterr().err
    assert err.startswith("error: ") and err.count("\n") == 1 and str(study) in err
    for w in words:
        assert w in err
    assert not (tmp_path / "out").exists()


def test_a_wrongly_typed_set_value_stops_the_study_before_any_run(tmp_path, capsys):
    study = write_study(tmp_path, _NAMED_VARIANTS)
    assert main(["study", "run", str(study), "--out", str(tmp_path / "out")]) == 2
    err = capsys.readouterr().err
    assert err.startswith(f"error: {study}: variants[1].set.root_classes.taproot.radius_cm: ") and "'thick'" in err
    assert err.count("\n") == 1 and not (tmp_path / "out").exists()


def test_cyclic_base_and_folder_of_another_study(tmp_path, capsys):
    (tmp_path / "a.toml").write_text('based_on = "b.toml"\n')
    (tmp_path / "b.toml").write_text('based_on = "a.toml"\n')
    study = write_study(tmp_path, TINY_STUDY.replace(str(PARAMS / "taproot_laterals.toml"), "a.toml"))
    assert main(["study", "run", str(study), "--out", str(tmp_path / "out")]) == 2
    assert "cycle" in capsys.readouterr().err
    first = write_study(tmp_path, TINY_STUDY.replace("replicates = 2", "replicates = 1"), "first.toml")
    assert main(["study", "run", str(first), "--out", str(tmp_path / "s")]) == 0
    before = (tmp_path / "s" / "runs.parquet").read_bytes()
    other = write_study(tmp_path, TINY_STUDY.replace("master_seed = 11", "master_seed = 12").replace(
        "replicates = 2", "replicates = 1"), "other.toml")
    capsys.readouterr()
    assert main(["study", "run", str(other), "--out", str(tmp_path / "s"), "--resume"]) == 2
    assert "another study" in capsys.readouterr().err
    assert main(["study", "run", str(first), "--out", str(tmp_path / "s")]) == 2
    assert "--resume" in capsys.readouterr().err
    assert (tmp_path / "s" / "runs.parquet").read_bytes() == before  # nothing contradicts the run folders


def test_batch_is_the_runner_with_safe_names_and_resume(tmp_path, capsys):
    spec = tmp_path / "evil.toml"
    spec.write_text(f'based_on = "{PARAMS / "taproot_laterals.toml"}"\nname = "../../escape"\n')
    out = tmp_path / "deep" / "batch"
    assert main(["batch", str(spec), "--replicates", "2", "--days", "4", "--out", str(out)]) == 0
    from rootsim.path_names import safe_path_component

    folder = safe_path_component("../../escape")
    assert "/" not in folder and folder not in (".", "..")
    assert (out / folder / "replicate_001" / "segments.parquet").is_file()
    assert not (tmp_path / "escape").exists() and not (tmp_path / "deep" / "escape").exists()
    table = pd.read_csv(out / "batch.csv")
    # kill-like loss of one run folder, then --resume: only that run is redone and batch.csv agrees again
    import shutil

    shutil.rmtree(out / folder / "replicate_001")
    (out / "batch.csv").unlink()
    assert main(["batch", str(spec), "--replicates", "2", "--days", "4", "--out", str(out), "--resume"]) == 0
    pd.testing.assert_frame_equal(pd.read_csv(out / "batch.csv"), table)
    # another batch into the same folder is refused instead of leaving a batch.csv that contradicts it
    capsys.readouterr()
    assert main(["batch", str(PARAMS / "shallow_basal.toml"), "--days", "4", "--out", str(out)]) == 2
    assert "another batch" in capsys.readouterr().err
    nul = tmp_path / "nul.toml"
    nul.write_text(f'based_on = "{PARAMS / "taproot_laterals.toml"}"\nname = "a\\u0000b"\n')
    assert main(["batch", str(nul), "--days", "4", "--out", str(tmp_path / "n")]) == 2
    err = capsys.readouterr().err
    assert err.startswith("error: ") and "control characters" in err and err.count("\n") == 1


def test_parameter_file_layers_as_a_factor(tmp_path):
    # soils or seasons as a factor: each level is a parameter-file layer over the base
    (tmp_path / "loose.toml").write_text("[[soil.layers]]\ndepth_top_cm = 0.0\ndepth_bottom_cm = 200.0\n"
                                         "penetration_resistance_mpa = 0.3\n")
    (tmp_path / "pan.toml").write_text("[[soil.layers]]\ndepth_top_cm = 20.0\ndepth_bottom_cm = 30.0\n"
                                       "penetration_resistance_mpa = 3.0\n")
    text = TINY_STUDY.replace('[[factors]]\nname = "spacing"\nkey = "root_classes.taproot.interbranch_distance_cm"\n'
                              'levels = [0.5, 1.5]', '[[factors]]\nname = "soil"\nfiles = ["loose.toml", "pan.toml"]')
    plan = plan_study(write_study(tmp_path, text))
    by_variant = {t.variant: t for t in plan.tasks}
    assert sorted(by_variant) == ["angle-45_soil-loose", "angle-45_soil-pan", "angle-80_soil-loose", "angle-80_soil-pan"]
    pan = by_variant["angle-80_soil-pan"]
    assert pan.factors == {"angle": 80.0, "soil": "pan"}
    assert [(l.depth_top_cm, l.penetration_resistance_mpa) for l in pan.spec.soil.layers] == [(20.0, 3.0)]
    assert by_variant["angle-80_soil-loose"].spec.soil.layers[0].penetration_resistance_mpa == 0.3
    assert pan.spec.stand == by_variant["angle-45_soil-loose"].spec.stand  # the rest of the base is kept
