"""``rootsim capture``: outputs written whole, bad input one line and exit 2."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from rootsim.cli import main
from rootsim.sampling.synthetic import lines_system

PARAMS = Path(__file__).resolve().parents[1] / "params" / "capture"


def _roots(tmp_path):
    top = np.arange(0.0, 40.0)
    p0 = np.column_stack([np.zeros_like(top), np.zeros_like(top), -top])
    p1 = p0 - np.array([0.0, 0.0, 1.0])
    system = lines_system(p0, p1, metadata={"stand": {"ground_area_cm2": 400.0, "n_plants": 1}})
    system.write(tmp_path / "run" / "segments.parquet")
    return tmp_path / "run"


def test_capture_command_writes_daily_table_layers_traits_and_figures(tmp_path, capsys):
    run = _roots(tmp_path)
    code = main(["capture", str(run), "--soil-water", str(PARAMS / "soil_water_loam.toml"),
                 "--weather", str(PARAMS / "weather_drying_season.csv"), "--out", str(tmp_path / "out"),
                 "--phosphorus-radius-cm", "0.4", "--phosphorus-voxel-cm", "0.1"])
    assert code == 0
    daily = pd.read_csv(tmp_path / "out" / "capture_daily.csv")
    traits = json.loads((tmp_path / "out" / "capture_traits.json").read_text())
    assert len(daily) == 61
    for figure in ("water_content.png", "cumulative_uptake.png", "season_summary.png"):
        assert (tmp_path / "out" / figure).read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    # water balance (in - out - change in storage) closes every day
    assert daily["water_balance_error_mm"].abs().max() < 1e-5
    assert traits["seasonal_transpiration_mm"] == pytest.approx(daily["actual_transpiration_mm"].sum(), rel=1e-9)
    assert traits["water_uptake_below_depth_mm"] == 0.0        # roots end at 40 cm, the trait depth is 60 cm
    # one straight 40 cm root: pi r^2 L + 4/3 pi r^3 (capsule, analytic), counted on 0.1 cm voxels
    capsule = np.pi * 0.4 ** 2 * 40.0 + 4.0 / 3.0 * np.pi * 0.4 ** 3
    assert traits["phosphorus_explored_cm3"] == pytest.approx(capsule, rel=0.05)
    assert pd.read_csv(tmp_path / "out" / "phosphorus_profile.csv")["explored_cm3"].sum() == pytest.approx(
        traits["phosphorus_explored_cm3"], rel=1e-9)


def test_weather_without_needed_columns_exits_2_with_one_line(tmp_path, capsys):
    run = _roots(tmp_path)
    weather = tmp_path / "w.csv"
    weather.write_text("day,mean_air_temperature_c,rain_mm\n0,15,0\n1,16,2\n")
    code = main(["capture", str(run), "--soil-water", str(PARAMS / "soil_water_loam.toml"), "--weather",
                 str(weather), "--out", str(tmp_path / "out")])
    err = capsys.readouterr().err
    assert code == 2 and err.count("\n") == 1 and "potential_transpiration_mm" in err
    assert not (tmp_path / "out" / "capture_daily.csv").exists()


def test_hydraulic_parameter_out_of_range_exits_2(tmp_path, capsys):
    run = _roots(tmp_path)
    soil = tmp_path / "soil.toml"
    soil.write_text('[column]\ndepth_cm = 50.0\n[[horizons]]\ndepth_bottom_cm = 50.0\ntexture = "loam"\n'
                    'saturated_water_content = 1.2\n')
    code = main(["capture", str(run), "--soil-water", str(soil), "--weather",
                 str(PARAMS / "weather_drying_season.csv")])
    err = capsys.readouterr().err
    assert code == 2 and "horizons[0].saturated_water_content" in err and err.count("\n") == 1


def test_capture_of_a_pot_run_uses_the_3d_voxel_column(tmp_path, capsys):
    # A pot run (container in the table's metadata) gets the 3D column with no-flow walls: the surface is the
    # pot's cells (10 cm pot on 2 cm cells: the cells whose centres lie in the circle, counted below).
    top = np.arange(0.0, 12.0)
    p0 = np.column_stack([np.full_like(top, 1.0), np.zeros_like(top), -top])
    system = lines_system(p0, p0 - np.array([0.0, 0.0, 1.0]),
                          metadata={"stand": {"ground_area_cm2": 78.5, "n_plants": 1},
                                    "container": {"kind": "pot", "diameter_cm": 10.0, "depth_cm": 20.0}})
    system.write(tmp_path / "run" / "segments.parquet")
    soil = tmp_path / "pot_soil.toml"
    soil.write_text('[column]\ndepth_cm = 20.0\ncell_cm = 2.0\ninitial_pressure_head_cm = -100.0\n'
                    '[[horizons]]\ndepth_bottom_cm = 20.0\ntexture = "loam"\n[traits]\ndeep_water_below_cm = 10.0\n')
    weather = pd.read_csv(PARAMS / "weather_drying_season.csv", comment="#").head(5)
    weather.to_csv(tmp_path / "w.csv", index=False)
    code = main(["capture", str(tmp_path / "run"), "--soil-water", str(soil), "--weather", str(tmp_path / "w.csv"),
                 "--out", str(tmp_path / "out"), "--no-figures"])
    assert code == 0, capsys.readouterr().err
    traits = json.loads((tmp_path / "out" / "capture_traits.json").read_text())
    centres = np.arange(-4.0, 5.0, 2.0)
    cells = int(((centres[:, None] ** 2 + centres[None, :] ** 2) <= 25.0).sum())
    assert traits["soil_column"] == "3d_voxels_pot" and traits["ground_area_cm2"] == pytest.approx(cells * 4.0)
    daily = pd.read_csv(tmp_path / "out" / "capture_daily.csv")
    assert daily["water_balance_error_mm"].abs().max() < 1e-5
    layers = pd.read_csv(tmp_path / "out" / "capture_layers.csv")
    assert (layers.loc[layers["depth_top_cm"] >= 12.0, "water_uptake_mm"] == 0.0).all()   # no roots below 12 cm
    # the pot's season carries nitrate too: its balance closes each day and no nitrate is taken below the roots
    assert "nitrate_uptake_kg_n_per_ha" in traits and traits["nitrate_uptake_kg_n_per_ha"] > 0
    assert daily["nitrate_balance_error_kg_n_per_ha"].abs().max() <= 1e-10 * daily["nitrate_storage_kg_n_per_ha"].max()
    assert (layers.loc[layers["depth_top_cm"] >= 12.0, "nitrate_uptake_kg_n_per_ha"] == 0.0).all()
    # a soil file deeper than the pot: one line, exit 2, nothing written
    soil.write_text(soil.read_text().replace("20.0", "30.0"))
    code = main(["capture", str(tmp_path / "run"), "--soil-water", str(soil), "--weather", str(tmp_path / "w.csv"),
                 "--out", str(tmp_path / "out2")])
    err = capsys.readouterr().err
    assert code == 2 and err.count("\n") == 1 and "column.depth_cm" in err and not (tmp_path / "out2").exists()
