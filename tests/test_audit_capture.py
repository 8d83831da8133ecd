"""Audit of ``rootsim capture`` as a new user would try it: every bad input gives one ``error:`` line naming the
option or file and what is allowed, exit code 2, no traceback and nothing half-written."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from rootsim.cli import main
from rootsim.sampling.synthetic import lines_system

ROOT = Path(__file__).resolve().parents[1]
CAPTURE = ROOT / "params" / "capture"
SOIL = CAPTURE / "soil_water_loam.toml"


def _roots(tmp_path: Path) -> Path:
    """A 40 cm vertical root under one plant on 400 cm² (a field run)."""
    top = np.arange(0.0, 40.0)
    p0 = np.column_stack([np.zeros_like(top), np.zeros_like(top), -top])
    system = lines_system(p0, p0 - np.array([0.0, 0.0, 1.0]),
                          metadata={"stand": {"ground_area_cm2": 400.0, "n_plants": 1}})
    system.write(tmp_path / "run" / "segments.parquet")
    return tmp_path / "run"


def _weather(tmp_path: Path, text: str, name: str = "w.csv") -> Path:
    path = tmp_path / name
    path.write_text(text)
    return path


def _one_error_line(capsys) -> str:
    err = capsys.readouterr().err.strip()
    assert "Traceback" not in err
    lines = err.splitlines()
    assert len(lines) == 1 and lines[0].startswith("error: "), err
    return lines[0]


GOOD = "day,mean_air_temperature_c,rain_mm,potential_transpiration_mm\n0,15,1,2\n1,15,1,2\n2,15,0,1\n"


@pytest.mark.parametrize("option, value", [("--container-cell-cm", "-3"), ("--container-cell-cm", "0"),
                                           ("--container-cell-cm", "nan"), ("--phosphorus-radius-cm", "-1"),
                                           ("--phosphorus-radius-cm", "inf")])
def test_negative_zero_or_nan_sizes_are_refused_naming_the_option(tmp_path, capsys, option, value):
    # A field run used to accept --container-cell-cm -3 silently (the option only matters for pots), and a
    # negative phosphorus radius was reported as "phosphorus: radius_cm -1.0, voxel_cm -0.25" without the option.
    run = _roots(tmp_path)
    code = main(["capture", str(run), "--soil-water", str(SOIL), "--weather", str(_weather(tmp_path, GOOD)),
                 "--out", str(tmp_path / "out"), "--no-figures", option, value])
    line = _one_error_line(capsys)
    assert code == 2 and option in line and "allowed" in line and "cm" in line
    assert not (tmp_path / "out").exists()


def test_phosphorus_voxel_without_radius_is_refused(tmp_path, capsys):
    # --phosphorus-voxel-cm alone used to be ignored without a word (no phosphorus measured).
    run = _roots(tmp_path)
    code = main(["capture", str(run), "--soil-water", str(SOIL), "--weather", str(_weather(tmp_path, GOOD)),
                 "--out", str(tmp_path / "out"), "--no-figures", "--phosphorus-voxel-cm", "0.1"])
    line = _one_error_line(capsys)
    assert code == 2 and "--phosphorus-voxel-cm" in line and "--phosphorus-radius-cm" in line
    assert not (tmp_path / "out").exists()


def test_vtk_under_a_file_fails_before_anything_is_written(tmp_path, capsys):
    # --vtk inside a "folder" that is a file: the capture files must not be written while the .vti fails.
    run = _roots(tmp_path)
    blocker = tmp_path / "afile"
    blocker.write_text("x")
    code = main(["capture", str(run), "--soil-water", str(SOIL), "--weather", str(_weather(tmp_path, GOOD)),
                 "--out", str(tmp_path / "out"), "--no-figures", "--vtk", str(blocker / "soil.vti")])
    line = _one_error_line(capsys)
    assert code == 2 and str(blocker) in line and "not a folder" in line
    assert not (tmp_path / "out").exists()


def test_coupled_run_with_an_unwritable_vtk_target_commits_no_result_folder(tmp_path, capsys):
    # capture --grow used to commit OUT (roots and capture files) and only then fail on --vtk: exit 2 with a
    # half-done result. The check must come first.
    blocker = tmp_path / "afile"
    blocker.write_text("x")
    code = main(["capture", "--grow", str(ROOT / "params" / "pot_nutrient_patch.toml"), "--soil-water", str(SOIL),
                 "--weather", str(_weather(tmp_path, GOOD)), "--out", str(tmp_path / "out"), "--no-figures",
                 "--days", "2", "--vtk", str(blocker / "soil.vti")])
    line = _one_error_line(capsys)
    assert code == 2 and str(blocker) in line
    assert not (tmp_path / "out").exists()


def test_output_folder_under_a_file_names_the_file(tmp_path, capsys):
    run = _roots(tmp_path)
    blocker = tmp_path / "afile"
    blocker.write_text("x")
    code = main(["capture", str(run), "--soil-water", str(SOIL), "--weather", str(_weather(tmp_path, GOOD)),
                 "--out", str(blocker / "out"), "--no-figures"])
    line = _one_error_line(capsys)
    assert code == 2 and str(blocker) in line and "not a folder" in line


@pytest.mark.parametrize("text, must_say", [
    # NaN and negative values were shown as numpy reprs: "np.float64(nan) is missing or out of range"
    ("day,mean_air_temperature_c,rain_mm,potential_transpiration_mm\n0,15,1,2\n1,15,nan,2\n2,15,0,1\n",
     "row 3, column rain_mm: nan"),
    ("day,mean_air_temperature_c,rain_mm,potential_transpiration_mm\n0,15,1,2\n1,15,-5,2\n2,15,0,1\n",
     "row 3, column rain_mm: -5"),
    ("day,mean_air_temperature_c,rain_mm,potential_transpiration_mm\n0.5,15,1,2\n1.5,15,1,2\n",
     "row 2, column day: 0.5"),
    # an unsorted table (0, 2, 1) was reported as "days 1..1 are missing"
    ("day,mean_air_temperature_c,rain_mm,potential_transpiration_mm\n0,15,1,2\n2,15,1,2\n1,15,0,1\n",
     "unsorted"),
    # a true gap still reads as the missing days
    ("day,mean_air_temperature_c,rain_mm,potential_transpiration_mm\n0,15,1,2\n1,15,1,2\n4,15,0,1\n",
     "days 2..3 are missing"),
], ids=["nan_rain", "negative_rain", "fractional_day", "unsorted_days", "gap_of_two_days"])
def test_weather_table_problems_read_as_plain_words(tmp_path, capsys, text, must_say):
    run = _roots(tmp_path)
    weather = _weather(tmp_path, text)
    code = main(["capture", str(run), "--soil-water", str(SOIL), "--weather", str(weather),
                 "--out", str(tmp_path / "out"), "--no-figures"])
    line = _one_error_line(capsys)
    assert code == 2 and str(weather) in line and must_say in line and "np." not in line
    assert "allowed" in line
    assert not (tmp_path / "out").exists()


@pytest.mark.parametrize("option", ["--weather", "--soil-water"])
def test_a_folder_given_for_an_input_file_is_named_as_a_folder(tmp_path, capsys, option):
    run = _roots(tmp_path)
    folder = tmp_path / "inputs"
    folder.mkdir()
    files = {"--weather": str(_weather(tmp_path, GOOD)), "--soil-water": str(SOIL)}
    files[option] = str(folder)
    code = main(["capture", str(run), "--soil-water", files["--soil-water"], "--weather", files["--weather"],
                 "--out", str(tmp_path / "out"), "--no-figures"])
    line = _one_error_line(capsys)
    assert code == 2 and str(folder) in line and "is a folder" in line and "Errno" not in line


def test_help_says_the_weather_table_needs_air_temperature(capsys):
    # The help listed rain, irrigation and transpiration columns only; every weather table also needs the daily
    # air temperature (mean, or min and max), so a user following the help got an error.
    assert main(["capture", "--help"]) == 0
    out = " ".join(capsys.readouterr().out.split())
    assert "mean_air_temperature_c" in out


def test_a_good_season_still_runs(tmp_path, capsys):
    run = _roots(tmp_path)
    code = main(["capture", str(run), "--soil-water", str(SOIL), "--weather", str(_weather(tmp_path, GOOD)),
                 "--out", str(tmp_path / "out"), "--no-figures", "--container-cell-cm", "2"])
    assert code == 0, capsys.readouterr().err
    daily = pd.read_csv(tmp_path / "out" / "capture_daily.csv")
    assert len(daily) == 3


@pytest.mark.parametrize("text, must_say", [
    ("x = " + "[" * 5000 + "]" * 5000 + "\n", "nested"),      # ended in tomllib's RecursionError traceback
    ("[column]\ndepth_cm = 150.0\n" + "# padding\n" * 120_000, "bytes"),   # 1.2 MB: bounded like parameter files
    ("[column\n", "not valid TOML"),
], ids=["deeply_nested", "over_one_mebibyte", "invalid_toml"])
def test_soil_water_file_is_parsed_within_the_parameter_file_bounds(tmp_path, capsys, text, must_say):
    run = _roots(tmp_path)
    soil = tmp_path / "soil.toml"
    soil.write_text(text)
    code = main(["capture", str(run), "--soil-water", str(soil), "--weather", str(_weather(tmp_path, GOOD)),
                 "--out", str(tmp_path / "out"), "--no-figures"])
    line = _one_error_line(capsys)
    assert code == 2 and str(soil) in line and must_say in line
    assert not (tmp_path / "out").exists()


def test_roots_without_a_stand_layout_get_a_message_about_capture(tmp_path, capsys):
    # A measured system with no stand metadata was told to "pass --area-cm2 A or --box ... on the command line",
    # options that `rootsim capture` does not have.
    top = np.arange(0.0, 5.0)
    p0 = np.column_stack([np.zeros_like(top), np.zeros_like(top), -top])
    lines_system(p0, p0 - np.array([0.0, 0.0, 1.0]), metadata={}).write(tmp_path / "run" / "segments.parquet")
    code = main(["capture", str(tmp_path / "run"), "--soil-water", str(SOIL),
                 "--weather", str(_weather(tmp_path, GOOD)), "--out", str(tmp_path / "out"), "--no-figures"])
    line = _one_error_line(capsys)
    assert code == 2 and str(tmp_path / "run") in line and "ground area" in line and "allowed" in line
    assert "--area-cm2" not in line and "--box" not in line
    assert not (tmp_path / "out").exists()


def test_spreadsheet_exports_of_the_weather_table(tmp_path, capsys):
    # A table saved with ';' between values was reported as "neither 'day' nor 'date' is present"; rows of empty
    # cells a spreadsheet leaves at the end (",,,") stopped the run at "nan is not a whole day"; a capitalised
    # "Day" header was not shown back to the user.
    run = _roots(tmp_path)
    cases = [("day;mean_air_temperature_c;rain_mm;potential_transpiration_mm\n0;15;1;2\n1;15;1;2\n", 2, "';'"),
             (GOOD + ",,,\n,,,\n", 0, None),
             ("Day,mean_air_temperature_c,rain_mm,potential_transpiration_mm\n0,15,1,2\n1,15,1,2\n", 2, "found: Day")]
    for i, (text, expected, must_say) in enumerate(cases):
        weather = _weather(tmp_path, text, name=f"w{i}.csv")
        code = main(["capture", str(run), "--soil-water", str(SOIL), "--weather", str(weather),
                     "--out", str(tmp_path / f"out{i}"), "--no-figures"])
        assert code == expected, capsys.readouterr().err
        if expected:
            line = _one_error_line(capsys)
            assert must_say in line and str(weather) in line and "allowed" in line
        else:
            capsys.readouterr()
            assert len(pd.read_csv(tmp_path / f"out{i}" / "capture_daily.csv")) == 3
