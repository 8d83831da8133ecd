"""``rootsim analyze``: files written, and one-line errors with exit code 2 for bad input."""

import json

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.parquet as pq
import pytest

from rootsim.analysis import layer_profile
from rootsim.cli import main
from test_analysis_support import random_walk_system

STAND = {"stand": {"n_plants": 1, "plant_spacing_cm": 10.0, "row_spacing_cm": 30.0, "ground_area_cm2": 300.0}}


@pytest.fixture
def results(tmp_path):
    system = random_walk_system(8, 40, seed=5)
    system.metadata = dict(STAND)
    system.write(tmp_path / "segments.parquet")
    return tmp_path, system


def test_analyze_writes_profile_and_traits(results, capsys):
    out, system = results
    assert main(["analyze", str(out), "--layer-cm", "4"]) == 0
    printed = capsys.readouterr().out
    assert "D50" in printed and "profile.csv" in printed
    profile = pd.read_csv(out / "profile.csv")
    expected = layer_profile(system, layer_cm=4)
    np.testing.assert_allclose(profile.to_numpy(), expected.to_numpy(), rtol=1e-9)
    # Exact clipping preserves length: the layers hold all the root length (all roots are below the surface).
    assert profile["root_length_cm"].sum() == pytest.approx(system["length_cm"].sum(), rel=1e-9)
    traits = json.loads((out / "traits.json").read_text())
    assert traits["ground_area_cm2"] == 300.0
    assert traits["profile"]["layer_cm"] == 4.0
    assert traits["n_tips"] == 8


def test_analyze_box_and_area_and_out_dir(results, tmp_path_factory):
    out, system = results
    other = tmp_path_factory.mktemp("elsewhere")
    assert main(["analyze", str(out / "segments.parquet"), "--box", "-2,2,-3,3", "--max-depth-cm", "12",
                 "--out-dir", str(other)]) == 0
    traits = json.loads((other / "traits.json").read_text())
    assert traits["profile"]["ground_area_cm2"] == pytest.approx(24.0)
    assert len(pd.read_csv(other / "profile.csv")) == 3
    assert main(["analyze", str(out), "--area-cm2", "50"]) == 0
    assert json.loads((out / "traits.json").read_text())["ground_area_cm2"] == 50.0


def _assert_failed(out, capsys, argv, match):
    assert main(argv) == 2
    err = capsys.readouterr().err
    assert err.startswith("error:") and len(err.strip().splitlines()) == 1, err
    assert match in err, err
    assert not (out / "profile.csv").exists() and not (out / "traits.json").exists()
    assert not [p for p in out.iterdir() if p.name.startswith(".")], "temporary files left behind"


@pytest.mark.parametrize("options, match", [
    (["--layer-cm", "0"], "--layer-cm"),
    (["--layer-cm", "thin"], "--layer-cm"),
    (["--box", "1,2,3"], "--box"),
    (["--box", "2,1,0,1"], "XMIN < XMAX"),
    (["--box", "a,b,c,d"], "--box"),
    (["--area-cm2", "-4"], "--area-cm2"),
    (["--max-depth-cm", "0"], "--max-depth-cm"),
    (["--area-cm2", "10", "--box", "0,1,0,1"], "not both"),
])
def test_bad_options_exit_2_and_write_nothing(results, capsys, options, match):
    out, _ = results
    _assert_failed(out, capsys, ["analyze", str(out)] + options, match)


def test_no_area_known(tmp_path, capsys):
    random_walk_system(2, 5, seed=1).write(tmp_path / "segments.parquet")
    _assert_failed(tmp_path, capsys, ["analyze", str(tmp_path)], "--area-cm2")


def test_missing_file(tmp_path, capsys):
    _assert_failed(tmp_path, capsys, ["analyze", str(tmp_path)], "no such file")


def _write_raw(path, columns):
    pq.write_table(pa.table({k: pa.array(v) for k, v in columns.items()}), path)


@pytest.mark.parametrize("damage, match", [
    ("drop_column", "missing column"),
    ("nan", "NaN"),
    ("negative_radius", "negative"),
])
def test_bad_tables_are_reported(tmp_path, capsys, damage, match):
    system = random_walk_system(2, 5, seed=2)
    cols = {c: np.asarray(system[c]).copy() for c in system.columns}
    if damage == "drop_column":
        del cols["z1"]
    elif damage == "nan":
        cols["x0"][3] = np.nan
    else:
        cols["radius_cm"][2] = -0.1
    _write_raw(tmp_path / "segments.parquet", cols)
    _assert_failed(tmp_path, capsys, ["analyze", str(tmp_path), "--area-cm2", "10"], match)


def test_help_has_description_and_example(capsys):
    assert main(["analyze", "--help"]) == 0
    text = capsys.readouterr().out
    assert "rootsim analyze results/demo" in text and "rld_cm_per_cm3" in text


def test_box_with_negative_corner_and_malformed_box_value(results, capsys):
    # "-2,2,-3,3" must be read as the box, not as an unknown option.
    out, _ = results
    assert main(["analyze", str(out), "--box", "-2,2,-3,3"]) == 0
    capsys.readouterr()
    (out / "profile.csv").unlink()
    (out / "traits.json").unlink()
    _assert_failed(out, capsys, ["analyze", str(out), "--box", "-2,2,-3"], "--box")
