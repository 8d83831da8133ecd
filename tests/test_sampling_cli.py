"""``rootsim sample`` end to end: files written, analytic values in them, one-line errors, bench stage."""

import math

import numpy as np
import pandas as pd
import pytest

from rootsim.cli import main
from rootsim.sampling.synthetic import lines_system, random_walk_roots

# A finite (bordered) plot: the analytic values below count only these roots, not periodic images
# (periodic stands are checked in test_sampling_periodic.py).
STAND = {"stand": {"n_plants": 2, "plant_positions_cm": [[0, 0, 0], [20, 0, 0]], "row_spacing_cm": 50,
                   "plant_spacing_cm": 20, "boundary": "bordered"}}


@pytest.fixture()
def results(tmp_path):
    # One vertical root on the core axis (0 to 25 cm deep) and one horizontal root across y = 0.
    system = lines_system([[0.0, 0.0, 0.0], [-30.0, -5.0, -12.0]], [[0.0, 0.0, -25.0], [30.0, 5.0, -12.0]],
                          metadata=STAND)
    system.write(tmp_path / "segments.parquet")
    return tmp_path


def written(path):
    return sorted(p.name for p in path.iterdir() if p.name != "segments.parquet")


def test_cores_and_wall_written_with_analytic_values(results, capsys):
    code = main(["sample", str(results), "--core", "0,0,5,30", "--wall", "0,-20,20,20,10"])
    assert code == 0
    assert written(results) == ["cores.csv", "wall.csv"]
    cores = pd.read_csv(results / "cores.csv")
    assert list(cores.columns[:8]) == ["core_id", "x_cm", "y_cm", "diameter_cm", "depth_top_cm", "depth_bottom_cm",
                                       "root_length_cm", "rld_cm_per_cm3"]
    # Analytic: the vertical root gives 10, 10, 5 cm; the horizontal root (direction (60, 10, 0),
    # through the axis) adds a diameter chord 5 cm in the 10-20 cm increment.
    assert cores["root_length_cm"].tolist() == pytest.approx([10.0, 15.0, 5.0], rel=1e-5)
    assert cores["rld_cm_per_cm3"].iloc[0] == pytest.approx(10 / (math.pi * 6.25 * 10), rel=1e-5)
    wall = pd.read_csv(results / "wall.csv")
    # The horizontal root crosses y = 0 at x = 0, depth 12: one intersection in the cell 0-10 x 10-20.
    hit = wall[wall["intersections"] > 0]
    assert hit[["x_left_cm", "depth_top_cm", "intersections"]].values.tolist() == [[0, 10, 1]]
    out = capsys.readouterr().out
    assert "cores" in out and "wall" in out and "RLD" in out
    # Analytic: a 2 cm slab (|y| <= 1) holds the vertical root's top 20 cm and the part of the horizontal
    # root (run (60, 10, 0), length 10 sqrt(37)) with |y| <= 1, a fifth of it: 2 sqrt(37).
    assert main(["sample", str(results), "--wall", "0,-20,20,20,10", "--wall-slab-cm", "2"]) == 0
    wall = pd.read_csv(results / "wall.csv")
    assert (wall["slab_thickness_cm"] == 2).all()
    assert wall["slab_root_length_cm"].sum() == pytest.approx(20 + 2 * math.sqrt(37), rel=1e-5)


def test_core_grid_tube_and_projection(results):
    code = main(["sample", str(results / "segments.parquet"), "--core-grid", "4,20", "--tube", "0,0,0,30,2,0.5",
                 "--tube-window-cm", "10", "--projection-grid-cm", "1", "--projection-band-cm", "10"])
    assert code == 0
    assert written(results) == ["cores.csv", "projection.csv", "tube.csv"]
    cores = pd.read_csv(results / "cores.csv")
    placed = cores.drop_duplicates("core_id")
    # Two plants 20 cm apart in one row (spacing 50): 2 at plants, 1 between them, 2 mid-row at y = 25.
    assert sorted(zip(placed["placement"], placed["x_cm"], placed["y_cm"])) == [
        ("in_row_at_plant", 0, 0), ("in_row_at_plant", 20, 0), ("in_row_between_plants", 10, 0),
        ("mid_row", 0, 25), ("mid_row", 20, 25)]
    tube = pd.read_csv(results / "tube.csv")
    assert len(tube) == 3
    # The horizontal root passes through the tube axis at depth 12; its direction (6, 1, 0)/sqrt(37)
    # is normal to the vertical axis: visible chord 2 (1.5 - 1) = 1 cm in the window 10-20.
    assert tube["visible_length_cm"].tolist() == pytest.approx([0.0, 1.0, 0.0], abs=1e-6)
    proj = pd.read_csv(results / "projection.csv")
    assert proj["projected_length_true_cm"].sum() == pytest.approx(25.0 + 60.0, rel=1e-6)


@pytest.mark.parametrize("argv, fragment", [
    (["--core", "0,0,5"], "--core '0,0,5': expected X,Y,DIAMETER,DEPTH[,INCREMENT]"),
    (["--core", "0,0,-5,30"], "diameter must be > 0"),
    (["--core", "0,0,5,30,0"], "increment must be > 0"),
    (["--wall", "0,10,-10,20,5"], "XMIN (10) must be less than XMAX (-10)"),
    (["--wall", "0,-10,10,20,x"], "CELL must be a number"),
    (["--tube", "0,0,95,30,2,0.5"], "ANGLE_FROM_VERTICAL"),
    (["--tube", "0,0,30,30,2,0.5", "--tube-view-deg", "0"], "view angle"),
    (["--projection-grid-cm", "0"], "--projection-grid-cm must be > 0"),
    (["--projection-grid-cm", "2", "--projection-band-cm", "3"], "whole multiple"),
    ([], "nothing to sample"),
])
def test_bad_input_is_one_error_line_and_nothing_written(results, capsys, argv, fragment):
    # Bad geometries other than cores come next to a valid core: that one must not be written either.
    valid = ["--core", "0,0,5,30"] if argv and argv[0] != "--core" else []
    code = main(["sample", str(results)] + valid + argv)
    assert code == 2
    err = capsys.readouterr().err
    assert err.startswith("error:") and err.count("\n") == 1 and "Traceback" not in err
    assert fragment in err
    assert written(results) == []


def test_out_dir(results, tmp_path_factory):
    out = tmp_path_factory.mktemp("elsewhere") / "sampling"
    assert main(["sample", str(results), "--core", "0,0,5,30", "--out-dir", str(out)]) == 0
    assert written(results) == [] and sorted(p.name for p in out.iterdir()) == ["cores.csv"]


def test_core_outside_a_pot_is_an_error(tmp_path, capsys):
    meta = {"container": {"kind": "pot", "diameter_cm": 15, "depth_cm": 30}}
    lines_system([[0, 0, 0]], [[0, 0, -10]], metadata=meta).write(tmp_path / "segments.parquet")
    assert main(["sample", str(tmp_path), "--core", "0,0,5,20", "--core", "6,0,5,20"]) == 2
    err = capsys.readouterr().err
    assert err.startswith("error: core 1 at (6, 0)") and "outside the pot" in err
    assert written(tmp_path) == []


def test_missing_results_and_missing_layout(tmp_path, capsys):
    assert main(["sample", str(tmp_path / "nowhere"), "--core", "0,0,5,20"]) == 2
    assert capsys.readouterr().err.startswith("error:")
    lines_system([[0, 0, 0]], [[0, 0, -10]]).write(tmp_path / "segments.parquet")
    assert main(["sample", str(tmp_path), "--core-grid", "4,20"]) == 2
    assert "stand layout" in capsys.readouterr().err


def test_help_explains_the_methods(capsys):
    try:
        code = main(["sample", "--help"])
    except SystemExit as exc:  # argparse exits after --help unless the CLI turns it into a return code
        code = exc.code
    assert code in (0, None)
    out = capsys.readouterr().out
    for word in ("--core", "--core-grid", "--wall", "--tube", "--projection-grid-cm", "Examples:", "rootsim sample"):
        assert word in out


def test_bench_stage_reports_time_and_floor(tmp_path):
    from rootsim.bench import sampling

    system = random_walk_roots(20_000, n_roots=50, segment_cm=0.5, rng=np.random.default_rng(1))
    entry = sampling.run(system, workdir=tmp_path)["cores"]
    assert entry["segments"] == 20_000 and entry["cores"] == 64
    assert entry["seconds"] > 0 and entry["floor_seconds"] > 0 and "grid index" in entry["floor"]
    assert entry["increments"] >= 64
