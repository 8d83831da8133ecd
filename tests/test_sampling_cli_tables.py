"""``rootsim sample`` printouts: one short table per method with explained columns; stand-relative options."""

import numpy as np
import pandas as pd
import pytest

from rootsim.cli import main
from rootsim.sampling.synthetic import lines_system

# Two rows along y at x = -25 and 25 (row spacing 50), two plants per row 20 cm apart: cell 100 x 40 cm.
META = {"stand": {"n_plants": 4, "rows": 2, "plants_per_row": 2, "row_spacing_cm": 50.0, "plant_spacing_cm": 20.0,
                  "ground_area_cm2": 4000.0,
                  "plant_positions_cm": [[-25.0, -10.0, -5.0], [-25.0, 10.0, -5.0], [25.0, -10.0, -5.0],
                                         [25.0, 10.0, -5.0]]},
        "container": {"kind": "field"}}


@pytest.fixture()
def stand(tmp_path):
    # One vertical root of 40 cm under every plant.
    pos = np.array(META["stand"]["plant_positions_cm"])
    p0 = np.column_stack([pos[:, 0], pos[:, 1], np.zeros(4)])
    p1 = np.column_stack([pos[:, 0], pos[:, 1], np.full(4, -40.0)])
    lines_system(p0, p1, metadata=META).write(tmp_path / "segments.parquet")
    return tmp_path


def test_core_table_is_one_row_per_depth_with_a_column_per_placement(stand, capsys):
    # Layout and analytic values: 2 replicate cores per placement kind; a 4-cm core on a plant holds 10 cm of
    # root per 10-cm increment (RLD 10 / (pi 4 x 10) = 0.0796); between plants and mid-row cores hold none.
    # The stand holds 4 x 10 cm per 10-cm layer over 4000 cm2: 0.001 cm/cm3.
    code = main(["sample", str(stand), "--core-grid", "4,30,10", "--core-replicates", "2", "--seed", "5"])
    assert code == 0
    out = capsys.readouterr().out.splitlines()
    start = next(i for i, line in enumerate(out) if line.startswith("cores ("))
    header = out[start + 1].split()
    assert header[:2] == ["depth", "cm"] and "stand" in header and "mid-row" in header
    rows = out[start + 2:start + 5]
    assert [r.split()[0] for r in rows] == ["0-10", "10-20", "20-30"]
    assert all(r.split()[1] == "0.001" for r in rows)
    assert all(r.split()[2] == "0.0796" for r in rows)  # at plant, the same in both replicates (no spread shown)
    cores = pd.read_csv(stand / "cores.csv")
    assert cores.groupby("placement")["core_id"].nunique().to_dict() == {
        "in_row_at_plant": 2, "in_row_between_plants": 2, "mid_row": 2}


def test_stand_relative_wall_and_tube_from_the_cli(stand, capsys):
    # A face across the rows through the point between plants spans the stand (x -50..50); a tube at mid-row.
    code = main(["sample", str(stand), "--wall", "in_row_between_plants,40,10", "--tube", "mid_row,0,30,5.6,0.2",
                 "--tube-window-cm", "10", "--bias-csv"])
    assert code == 0
    wall = pd.read_csv(stand / "wall.csv")
    assert wall["x_left_cm"].min() == -50.0 and wall["x_right_cm"].max() == 50.0
    assert set(wall["placement"]) == {"in_row_between_plants"}
    bias = pd.read_csv(stand / "sampling_bias.csv")
    assert set(bias["method"]) == {"wall", "tube_image"}
    out = capsys.readouterr().out
    assert "estimate / stand" in out and "image / stand" in out
    lines = out.splitlines()
    wall_at = next(i for i, line in enumerate(lines) if line.startswith("wall ("))
    tube_at = next(i for i, line in enumerate(lines) if line.startswith("tube ("))
    assert tube_at - wall_at - 2 == 4        # one row per 10-cm row of cells, 0-40 cm
    assert len(lines) - tube_at - 3 == 3     # one row per 10-cm band of windows (30 cm tube), then the csv note


def test_help_explains_the_table_columns(capsys):
    try:
        code = main(["sample", "--help"])
    except SystemExit as exc:  # argparse exits after --help unless the CLI turns it into a return code
        code = exc.code
    assert code in (0, None)
    text = capsys.readouterr().out
    for word in ("washed / stand", "break / stand", "counted", "slab", "image / stand", "in_row_between_plants",
                 "--bordered", "--detection-limit-cm", "--tube-gap-cm", "--core-replicates"):
        assert word in text


@pytest.mark.parametrize("argv, fragment", [
    (["--core", "nowhere,4,30"], "position 'nowhere' is not known"),
    (["--core-grid", "4,30", "--core-replicates", "9"], "9 replicates need as many plants"),
    (["--tube", "0,0,0,30,5.6,0.2", "--tube-wall-growth", "2"], "wall growth fraction"),
    (["--wall", "0,-5,5,20,5", "--wall-scraped-cm", "-1"], "scraped layer"),
    (["--core", "0,0,4,30", "--core-washing-recovery", "1.5"], "washing recovery"),
    (["--core", "0,0,4,30", "--core-washing-recovery", "1.5"], "--core-washing-recovery"),
    (["--core", "0,0,4,30", "--core-break-ratio", "-1"], "--core-break-ratio"),
    (["--core", "0,0,4,30", "--detection-limit-cm", "-0.1"], "--detection-limit-cm"),
    (["--core", "0,0,4,30", "--core-fine-diameter-cm", "nan"], "--core-fine-diameter-cm"),
])
def test_bad_options_are_one_error_line_and_nothing_written(stand, capsys, argv, fragment):
    assert main(["sample", str(stand), *argv]) == 2
    err = capsys.readouterr().err
    assert err.startswith("error: ") and fragment in err and err.count("\n") == 1
    assert sorted(p.name for p in stand.iterdir()) == ["segments.parquet"]
