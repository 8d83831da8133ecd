"""Audit of soil fields in parameter files (grids ``.npy``/``.vti``, depth tables) as a new user would write
them: each bad file gives one ``error:`` line naming the parameter file, the key path and what is allowed."""

from __future__ import annotations

import shutil
from pathlib import Path

import numpy as np
import pytest

from rootsim.cli import main

ROOT = Path(__file__).resolve().parents[1]
POT = ROOT / "params" / "pot_nutrient_patch.toml"
GRID_LINE = ('grid = { file = "pot_patch_water.npy", origin_cm = [-10.0, -10.0, 0.0], '
             'spacing_cm = [2.0, 2.0, 5.0] }')
KEY = "soil.fields.volumetric_water_content"


def _spec(tmp_path: Path, water_source: str) -> Path:
    """The shipped pot file with its water-content field given by ``water_source`` (one TOML line)."""
    text = POT.read_text()
    assert GRID_LINE in text
    path = tmp_path / "pot.toml"
    path.write_text(text.replace(GRID_LINE, water_source))
    shutil.copy(ROOT / "params" / "pot_patch_water.npy", tmp_path / "pot_patch_water.npy")
    return path


def _check_error(spec: Path, capsys) -> str:
    code = main(["check", str(spec)])
    err = capsys.readouterr().err.strip()
    assert "Traceback" not in err
    lines = err.splitlines()
    assert code == 2 and len(lines) == 1 and lines[0].startswith("error: "), err
    return lines[0]


def test_empty_npy_grid_names_the_file_and_key(tmp_path, capsys):
    # A grid with a zero-length axis used to give "error: soil grid: needs a 3D array (got shape (0, 11, 9))":
    # no parameter file, no key, no grid file.
    np.save(tmp_path / "empty.npy", np.zeros((0, 11, 9)))
    spec = _spec(tmp_path, GRID_LINE.replace("pot_patch_water.npy", "empty.npy"))
    line = _check_error(spec, capsys)
    assert str(spec) in line and f"{KEY}.grid.file" in line and "empty.npy" in line and "allowed" in line


@pytest.mark.parametrize("name", ["adir.npy", "adir.vti"])
def test_a_folder_named_as_grid_file_is_named_as_a_folder(tmp_path, capsys, name):
    # A folder where the grid file should be was reported as "file not found".
    (tmp_path / name).mkdir()
    grid = GRID_LINE.replace("pot_patch_water.npy", name)
    if name.endswith(".vti"):
        grid = f'grid = {{ file = "{name}" }}'
    line = _check_error(_spec(tmp_path, grid), capsys)
    assert f"{KEY}.grid.file" in line and "is a folder" in line and "not found" not in line


def test_a_folder_named_as_depth_table_is_named_as_a_folder(tmp_path, capsys):
    (tmp_path / "water.csv").mkdir()
    line = _check_error(_spec(tmp_path, 'depth_table_file = "water.csv"'), capsys)
    assert f"{KEY}.depth_table_file" in line and "is a folder" in line and "not found" not in line


def test_a_text_file_named_npy_says_what_a_grid_file_is(tmp_path, capsys):
    # numpy's own message leaked, cut mid-sentence: "This file contains pickled (object) data. If you trust the
    # file you can load it unsafely using the `"
    (tmp_path / "water.npy").write_text("depth_cm,value\n0,0.2\n")
    line = _check_error(_spec(tmp_path, GRID_LINE.replace("pot_patch_water.npy", "water.npy")), capsys)
    assert f"{KEY}.grid.file" in line and "numpy.save" in line and "pickled" not in line


def test_negative_depth_in_a_depth_table_is_named(tmp_path, capsys):
    # A first depth of -5 cm was reported as "row 2: depth_cm not increasing".
    (tmp_path / "water.csv").write_text("depth_cm,value\n-5,0.2\n20,0.3\n")
    line = _check_error(_spec(tmp_path, 'depth_table_file = "water.csv"'), capsys)
    assert "row 2" in line and "-5" in line and "negative" in line and "not increasing" not in line


def _write_vti(path: Path, arrays: dict) -> None:
    import vtk
    from vtk.util import numpy_support

    image = vtk.vtkImageData()
    image.SetDimensions(3, 3, 3)
    image.SetSpacing(10.0, 10.0, 10.0)
    image.SetOrigin(-10.0, -10.0, -20.0)
    for name, values in arrays.items():
        array = numpy_support.numpy_to_vtk(np.full(27, values, dtype=float), deep=True)
        array.SetName(name)
        image.GetPointData().AddArray(array)
    writer = vtk.vtkXMLImageDataWriter()
    writer.SetFileName(str(path))
    writer.SetInputData(image)
    assert writer.Write() == 1


def test_vti_with_several_arrays_takes_the_one_named_after_the_field(tmp_path):
    # A .vti holding several fields (as `rootsim soil --vti` writes) used to give its first array to any field:
    # the pot's water content read the nitrate array (4 mg/kg) and was refused as "outside 0 to 1".
    from rootsim.soil.build import soil_fields_from_spec
    from rootsim.spec import load_spec

    _write_vti(tmp_path / "soil.vti", {"nitrate_mg_per_kg": 4.0, "volumetric_water_content": 0.27})
    spec = load_spec(_spec(tmp_path, 'grid = { file = "soil.vti" }'))
    fields = soil_fields_from_spec(spec)
    water = fields.values("volumetric_water_content", np.array([0.0]), np.array([0.0]), np.array([-5.0]))
    assert water[0] == pytest.approx(0.27, abs=1e-12)   # a constant grid interpolates to its value


def test_vti_with_several_arrays_none_named_after_the_field_asks_for_one(tmp_path, capsys):
    _write_vti(tmp_path / "soil.vti", {"first": 0.2, "second": 0.3})
    line = _check_error(_spec(tmp_path, 'grid = { file = "soil.vti" }'), capsys)
    assert f"{KEY}.grid" in line and "'first'" in line and "'second'" in line and "array" in line


def test_rootsim_soil_vti_round_trip_reads_each_field_back(tmp_path, capsys):
    # The .vti that `rootsim soil --vti` writes, named as the grid of a field, gives that field's values back.
    from rootsim.soil.build import soil_fields_from_spec
    from rootsim.spec import load_spec

    spec_path = _spec(tmp_path, GRID_LINE)
    assert main(["soil", str(spec_path), "--vti", str(tmp_path / "soil.vti"), "--voxel-cm", "2"]) == 0
    capsys.readouterr()
    original = soil_fields_from_spec(load_spec(spec_path))
    again = soil_fields_from_spec(load_spec(_spec(tmp_path, 'grid = { file = "soil.vti" }')))
    x, y, z = np.array([-3.0, 0.0, 4.0]), np.array([1.0, 0.0, -2.0]), np.array([-4.0, -11.0, -25.0])
    a = original.values("volumetric_water_content", x, y, z)
    b = again.values("volumetric_water_content", x, y, z)
    assert np.all(b >= 0.2) and np.all(b <= 0.3)      # the shipped grid's range, not another field's
    assert np.allclose(a, b, atol=0.01)               # resampled on 2 cm voxels


def test_soil_printout_of_a_huge_depth_is_refused_not_run(tmp_path, capsys):
    # `rootsim soil SPEC --depth-cm 1e9` printed (or tried to) 100 million rows and never ended.
    spec = _spec(tmp_path, GRID_LINE)
    for option, value in (("--depth-cm", "1e9"), ("--step-cm", "0.0001")):
        code = main(["soil", str(spec), option, value])
        captured = capsys.readouterr()
        lines = captured.err.strip().splitlines()
        assert code == 2 and len(lines) == 1 and lines[0].startswith("error: ") and option in lines[0]
        assert "allowed" in lines[0] and captured.out == ""


def test_soil_help_gives_units_of_each_size():
    import argparse

    from rootsim.cli import build_parser

    parser = build_parser()
    soil = next(a for a in parser._actions if isinstance(a, argparse._SubParsersAction)).choices["soil"]
    for action in soil._actions:
        if action.dest in ("voxel_cm", "depth_cm", "step_cm"):
            assert "cm" in action.help, action.dest


def test_depth_table_with_trailing_empty_spreadsheet_rows_reads_its_rows(tmp_path):
    # ",," rows at the end (as spreadsheets save them) stopped the run at "row 4: missing or non-numeric value".
    from rootsim.soil.build import soil_fields_from_spec
    from rootsim.spec import load_spec

    (tmp_path / "water.csv").write_text("depth_cm,value\n0,0.20\n40,0.30\n,\n,\n")
    fields = soil_fields_from_spec(load_spec(_spec(tmp_path, 'depth_table_file = "water.csv"')))
    water = fields.values("volumetric_water_content", np.zeros(3), np.zeros(3), np.array([0.0, -10.0, -40.0]))
    assert np.allclose(water, [0.20, 0.225, 0.30], atol=1e-12)   # linear between the two rows (by hand)
