"""``rootsim capture --vtk``: the soil state by depth and day as VTK image data, read back with VTK's own reader."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from rootsim.cli import main
from rootsim.sampling.synthetic import lines_system

PARAMS = Path(__file__).resolve().parents[1] / "params" / "capture"


def _run(tmp_path):
    top = np.arange(0.0, 30.0)
    p0 = np.column_stack([np.zeros_like(top), np.zeros_like(top), -top])
    system = lines_system(p0, p0 - np.array([0.0, 0.0, 1.0]),
                          metadata={"stand": {"ground_area_cm2": 400.0, "n_plants": 1}})
    system.write(tmp_path / "run" / "segments.parquet")
    weather = pd.read_csv(PARAMS / "weather_drying_season.csv", comment="#").head(8)
    weather.to_csv(tmp_path / "w.csv", index=False)
    return tmp_path / "run", tmp_path / "w.csv"


def test_capture_vtk_image_reads_back_with_vtk_reader(tmp_path, capsys):
    vtk = pytest.importorskip("vtk")
    from vtk.util.numpy_support import vtk_to_numpy

    run, weather = _run(tmp_path)
    target = tmp_path / "state" / "soil_state.vti"
    code = main(["capture", str(run), "--soil-water", str(PARAMS / "soil_water_loam.toml"), "--weather",
                 str(weather), "--out", str(tmp_path / "out"), "--no-figures", "--vtk", str(target)])
    assert code == 0, capsys.readouterr().err
    reader = vtk.vtkXMLImageDataReader()
    reader.SetFileName(str(target))
    reader.Update()
    image = reader.GetOutput()
    # geometry: 8 days along x, the 150 cm column in 2 cm cells along z (soil surface at z = 0, z up)
    assert image.GetDimensions() == (9, 2, 76)
    assert image.GetBounds() == pytest.approx((0.0, 8.0, 0.0, 1.0, -150.0, 0.0))
    cells = image.GetCellData()
    theta = vtk_to_numpy(cells.GetArray("water_content")).reshape(75, 8)     # (z from the bottom, day)
    roots = vtk_to_numpy(cells.GetArray("root_length_cm")).reshape(75, 8)
    daily = pd.read_csv(tmp_path / "out" / "capture_daily.csv")
    # storage (mm) = sum over cells of water content x 2 cm x 10 mm/cm, the solver's own daily storage column
    np.testing.assert_allclose(theta.sum(axis=0) * 2.0 * 10.0, daily["soil_water_storage_mm"], rtol=1e-9)
    # one vertical 30 cm root from the surface (analytic): 2 cm in each of the top 15 cells, none below, every day
    expected = np.zeros(75)
    expected[-15:] = 2.0
    np.testing.assert_allclose(roots, np.repeat(expected[:, None], 8, axis=1), atol=1e-9)
    # each horizon between its residual and saturated water content, Carsel & Parrish (1988) class means:
    # loam 0.078..0.43 (0-30 cm), silt loam 0.067..0.45 (30-80 cm), sandy clay loam 0.100..0.39 (80-150 cm)
    depth_centre = 150.0 - (np.arange(75) + 0.5) * 2.0                       # rows from the bottom up
    for (top, bottom), (residual, saturated) in {(0, 30): (0.078, 0.43), (30, 80): (0.067, 0.45),
                                                 (80, 150): (0.100, 0.39)}.items():
        rows = theta[(depth_centre > top) & (depth_centre < bottom)]
        assert rows.min() > residual and rows.max() <= saturated + 1e-12


def test_capture_vtk_needs_vti_suffix_one_line_exit_2(tmp_path, capsys):
    run, weather = _run(tmp_path)
    code = main(["capture", str(run), "--soil-water", str(PARAMS / "soil_water_loam.toml"), "--weather",
                 str(weather), "--out", str(tmp_path / "out"), "--vtk", str(tmp_path / "state.vtu")])
    err = capsys.readouterr().err
    assert code == 2 and err.count("\n") == 1 and "--vtk" in err and ".vti" in err
    assert not (tmp_path / "out").exists() and not (tmp_path / "state.vtu").exists()


def test_capture_vtk_holds_nitrate_per_cell_that_sums_to_the_daily_nitrate_storage(tmp_path, capsys):
    vtk = pytest.importorskip("vtk")
    from vtk.util.numpy_support import vtk_to_numpy

    run, weather = _run(tmp_path)
    table = pd.read_csv(weather)
    table["nitrate_fertilizer_kg_n_per_ha"] = np.where(table["day"] == table["day"].iloc[2], 30.0, 0.0)
    table.to_csv(weather, index=False)
    target = tmp_path / "soil_state.vti"
    code = main(["capture", str(run), "--soil-water", str(PARAMS / "soil_water_loam.toml"), "--weather",
                 str(weather), "--out", str(tmp_path / "out"), "--no-figures", "--vtk", str(target)])
    assert code == 0, capsys.readouterr().err
    reader = vtk.vtkXMLImageDataReader()
    reader.SetFileName(str(target))
    reader.Update()
    cells = reader.GetOutput().GetCellData()

    def grid(name):  # (z from the bottom, day)
        return vtk_to_numpy(cells.GetArray(name)).reshape(75, 8)

    amount, concentration = grid("nitrate_n_kg_per_ha"), grid("nitrate_n_mg_per_l")
    uptake, theta = grid("nitrate_uptake_kg_n_per_ha"), grid("water_content")
    daily = pd.read_csv(tmp_path / "out" / "capture_daily.csv")
    # the cells of each day hold the daily nitrate balance's storage, and its uptake (to the 10 significant
    # digits capture_daily.csv is written with)
    np.testing.assert_allclose(amount.sum(axis=0), daily["nitrate_storage_kg_n_per_ha"], rtol=5e-10)
    np.testing.assert_allclose(uptake.sum(axis=0), daily["nitrate_uptake_kg_n_per_ha"], rtol=5e-10, atol=1e-15)
    # units: 1 mg/L x theta x 2 cm = 2e-3 theta mg/cm² = 0.2 theta kg/ha (1 kg/ha = 0.01 mg/cm², common practice)
    np.testing.assert_allclose(amount, concentration * theta * 2.0 * 1e-3 * 100.0, rtol=1e-10)
    # the fertilizer of day 2 arrives at the top: 30 kg/ha more storage, less that day's uptake and leaching
    change = daily["nitrate_storage_kg_n_per_ha"].diff().iloc[2]
    assert change == pytest.approx(30.0 - daily["nitrate_uptake_kg_n_per_ha"].iloc[2]
                                   - daily["nitrate_leached_kg_n_per_ha"].iloc[2], rel=1e-9)
    # no uptake where no roots are (the one root ends at 30 cm: the bottom 60 rows of 2 cm cells hold none)
    assert not uptake[:-15].any() and uptake[-15:].sum() > 0


def test_nitrate_cells_sum_to_the_daily_storage_to_round_off_in_memory(tmp_path):
    from rootsim.capture.season import run_water_season
    from rootsim.capture.soil_file import read_soil_water_file
    from rootsim.rootsystem import RootSystem
    from rootsim.soil.weather import read_weather_table

    run, weather = _run(tmp_path)
    table = pd.read_csv(weather)
    table["nitrate_fertilizer_kg_n_per_ha"] = np.where(table["day"] == table["day"].iloc[0], 50.0, 0.0)
    table.to_csv(weather, index=False)
    result = run_water_season(RootSystem.read(run), read_soil_water_file(PARAMS / "soil_water_loam.toml"),
                              read_weather_table(weather))
    per_day = result["layers"].groupby("day")["nitrate_n_kg_per_ha"].sum().to_numpy()
    np.testing.assert_allclose(per_day, result["daily"]["nitrate_storage_kg_n_per_ha"], rtol=1e-13)
    taken = result["layers"].groupby("day")["nitrate_uptake_kg_n_per_ha"].sum().to_numpy()
    np.testing.assert_allclose(taken, result["daily"]["nitrate_uptake_kg_n_per_ha"], rtol=1e-13)
