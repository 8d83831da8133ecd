"""Where the plants are: the stand layout in `check`, `summary.json`, `analyze`, the projection and the top view.

Reference layout of the shipped cereal file (its own [stand] table: 2 rows 75 cm apart, 3 plants 20 cm apart,
centred on the origin, rows along y): rows at x = -37.5 and +37.5 cm, plants at y = -20, 0, 20 cm; the stand's
cell is 2 x 75 by 3 x 20 cm = 150 x 60 cm = 9,000 cm2 (ground area = row spacing x plant spacing x plants,
common practice).
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest

import rootsim
from rootsim.cli import main
from rootsim.stand_layout import field_sampling_spots, layout_from_metadata, layout_from_spec

PARAMS = Path(__file__).resolve().parents[1] / "params"
CEREAL = PARAMS / "cereal_fibrous.toml"
TAPROOT = PARAMS / "taproot_laterals.toml"


def test_cereal_layout_has_the_rows_plants_and_cell_of_its_stand_table():
    layout = layout_from_spec(rootsim.load_spec(CEREAL))
    assert layout["row_direction"] == "y"
    assert layout["row_x_cm"] == [-37.5, 37.5]
    assert layout["plant_y_cm"] == [-20.0, 0.0, 20.0]
    assert layout["cell_x_cm"] == [-75.0, 75.0] and layout["cell_y_cm"] == [-30.0, 30.0]
    assert layout["cell_size_cm"] == [150.0, 60.0] and layout["ground_area_cm2"] == 9000.0
    xy = {(p[0], p[1]) for p in layout["plant_positions_cm"]}
    assert xy == {(x, y) for x in (-37.5, 37.5) for y in (-20.0, 0.0, 20.0)}
    # field spots: on a plant, half a plant spacing along the row, half a row spacing across (common practice)
    spots = field_sampling_spots(layout)
    assert spots == {"in_row_at_plant": (-37.5, -20.0), "in_row_between_plants": (-37.5, -10.0),
                     "mid_row": (0.0, -20.0)}


def test_layout_positions_are_where_the_engine_sows(tmp_path):
    # the seeds of a grown stand: the first segment of each plant's first root starts at its seed
    spec = rootsim.load_spec(TAPROOT)
    system = rootsim.grow(spec, days=3, progress=False)
    starts = system.to_dataframe().query("parent_id == -1").groupby("plant_id")[["x0", "y0"]].first().to_numpy()
    # both the layout the spec describes and the one the grown table's metadata carries put every plant where
    # its roots actually start
    for layout in (layout_from_spec(spec), layout_from_metadata(system.metadata)):
        np.testing.assert_allclose(starts, np.asarray(layout["plant_positions_cm"])[:, :2], atol=1e-9)


def test_check_prints_the_stand_layout(capsys):
    assert main(["check", str(CEREAL)]) == 0
    out = capsys.readouterr().out
    assert "rows along y at x = -37.5, 37.5 cm" in out
    assert "plants at y = -20, 0, 20 cm" in out
    assert "x -75..75 cm, y -30..30 cm (150 x 60 cm), ground area 9,000 cm2" in out
    assert "in row at plant (-37.5, -20); in row between plants (-37.5, -10); mid row (0, -20)" in out


def test_summary_json_and_analyze_carry_the_layout(tmp_path, capsys):
    assert main(["grow", str(TAPROOT), "--out", str(tmp_path), "--days", "4", "--quiet"]) == 0
    summary = json.loads((tmp_path / "summary.json").read_text())
    layout = summary["stand_layout"]
    # taproot file: 1 row of 4 plants 15 cm apart -> y = -22.5, -7.5, 7.5, 22.5; row at x = 0; cell 50 x 60 cm
    assert layout["row_x_cm"] == [0.0] and layout["plant_y_cm"] == [-22.5, -7.5, 7.5, 22.5]
    assert layout["cell_size_cm"] == [50.0, 60.0] and layout["row_direction"] == "y"
    capsys.readouterr()
    assert main(["analyze", str(tmp_path)]) == 0
    out = capsys.readouterr().out
    assert "stand layout: rows along y at x = 0 cm" in out and "plants at y = -22.5, -7.5, 7.5, 22.5 cm" in out


def test_projection_marks_plants_and_rows_at_the_stand_coordinates():
    from rootsim.plots import plot_projection

    spec = rootsim.load_spec(CEREAL)
    system = rootsim.grow(spec, days=2, progress=False)
    ax = plot_projection(system).axes[0]
    lines = {line.get_gid(): line for line in ax.lines if line.get_gid() == "plants"}
    x, depth = (np.asarray(v, float) for v in lines["plants"].get_data())
    expected = np.asarray(layout_from_spec(spec)["plant_positions_cm"])
    np.testing.assert_allclose(np.sort(x), np.sort(expected[:, 0]))
    np.testing.assert_allclose(depth, 5.0)  # sown 5 cm deep
    rows = sorted(float(line.get_xdata()[0]) for line in ax.lines if line.get_gid() == "rows")
    assert rows == [-37.5, 37.5]
    lo, hi = ax.get_xlim()
    assert lo < -37.5 and hi > 37.5  # both rows in view


def test_top_render_marks_plants_at_their_coordinates():
    from rootsim.render import render_image

    spec = rootsim.load_spec(CEREAL)
    system = rootsim.grow(spec, days=2, progress=False)  # roots a few cm long: markers stand free
    image = render_image(system, view="top", size=(480, 360), color_by="order").astype(int)
    black = np.all(image < 40, axis=-1)
    black[int(0.85 * image.shape[0]):] = False  # leave out the ruler and its labels at the bottom
    from scipy import ndimage

    labels, count = ndimage.label(black)
    sizes = ndimage.sum(black, labels, index=np.arange(1, count + 1))
    blobs = [i + 1 for i, s in enumerate(sizes) if s >= 20]  # marker discs, not thin row lines
    centres = np.array(ndimage.center_of_mass(black, labels, blobs))  # (row, column) pixels
    assert len(centres) == 6
    # two columns of three markers (x = -37.5, 37.5 cm; y = -20, 0, 20 cm): spacing ratio 75 : 20 as in the stand
    cols = np.sort(centres[:, 1])
    rows = np.sort(centres[:, 0])
    dx = cols[3:].mean() - cols[:3].mean()
    dy = (rows[4:].mean() - rows[:2].mean()) / 2
    assert dx / dy == pytest.approx(75.0 / 20.0, rel=0.06)
    assert np.ptp(cols[:3]) <= 2 and np.ptp(cols[3:]) <= 2  # each row's plants on one vertical line
