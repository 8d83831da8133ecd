"""``rootsim export`` end to end: files read back with VTK's own XML readers; error paths exit 2,
print one ``error:`` line and leave no file (complete or partial) behind."""

from __future__ import annotations

import numpy as np
import pytest
import vtk
from vtk.util.numpy_support import vtk_to_numpy

from rootsim.cli import main
from rootsim.rootsystem import RootSystem, empty_columns

from test_formats_helpers import random_root_system


@pytest.fixture()
def results(tmp_path):
    system = random_root_system(rng=13)
    out = tmp_path / "results"
    out.mkdir()
    system.write(out / "segments.parquet")
    return system, out


def _files(directory):
    return sorted(p.name for p in directory.rglob("*") if p.is_file())


def test_export_all_formats(results, tmp_path, capsys):
    system, out = results
    exp = tmp_path / "exp"
    code = main(["export", str(out), "--vtk", str(exp / "r.vtp"), "--rld-grid", str(exp / "rld.vti"), "--voxel-cm", "2",
                 "--mesh", str(exp / "r.ply"), "--rsml", str(exp / "r.rsml"), "--mesh-sides", "5", "--merge-short-cm", "0.5"])
    assert code == 0, capsys.readouterr().err
    assert _files(exp) == ["r.ply", "r.rsml", "r.vtp", "rld.vti"]
    # VTK's own image reader: one cell per voxel, spacing 2 cm, and the RLD times voxel volume
    # adds up to the total root length (the default grid covers every segment).
    reader = vtk.vtkXMLImageDataReader()
    reader.SetFileName(str(exp / "rld.vti"))
    reader.Update()
    image = reader.GetOutput()
    assert image.GetSpacing() == (2.0, 2.0, 2.0)
    rld = vtk_to_numpy(image.GetCellData().GetArray("rld_cm_per_cm3"))
    assert len(rld) == image.GetNumberOfCells()
    assert rld.sum() * 8.0 == pytest.approx(system["length_cm"].sum(), rel=1e-9)
    reader = vtk.vtkXMLPolyDataReader()
    reader.SetFileName(str(exp / "r.vtp"))
    reader.Update()
    assert reader.GetOutput().GetNumberOfLines() == np.unique(system["root_id"]).size


def test_export_empty_system(tmp_path):
    src = tmp_path / "empty"
    src.mkdir()
    RootSystem(empty_columns(), {}).write(src / "segments.parquet")
    assert main(["export", str(src), "--vtk", str(tmp_path / "e.vtp"), "--mesh", str(tmp_path / "e.stl"),
                 "--rsml", str(tmp_path / "e.rsml")]) == 0
    reader = vtk.vtkXMLPolyDataReader()
    reader.SetFileName(str(tmp_path / "e.vtp"))
    reader.Update()
    assert reader.GetOutput().GetNumberOfPoints() == 0
    assert (tmp_path / "e.stl").stat().st_size == 84  # binary STL: 80-byte header + count 0 (STL layout)


@pytest.mark.parametrize("args, message", [
    (["--vtk", "{t}/r.vtk"], "must end in .vtp"),
    (["--mesh", "{t}/r.dae"], "must end in .stl or .ply or .obj or .glb"),
    (["--rld-grid", "{t}/r.vti"], "needs --voxel-cm"),
    (["--rld-grid", "{t}/r.vti", "--voxel-cm", "0"], "must be > 0"),
    ([], "nothing to export"),
    (["--mesh", "{t}/r.stl", "--mesh-sides", "2"], "sides 2 is not allowed"),
    (["--vtk", "{t}/r.vtp", "--mesh-sides", "6"], "apply to --mesh"),
    (["--vtk", "{t}/blocker/r.vtp"], "cannot write"),
    (["--vtk", "{t}/a.vtp", "--rsml", "{t}/blocker/r.rsml"], "cannot write"),
    (["--vtk", "{t}/a.vtp", "--rsml-user", "someone"], "--rsml-user applies to --rsml"),
])
def test_export_errors(results, tmp_path, capsys, args, message):
    _, out = results
    target = tmp_path / "target"
    target.mkdir()
    (target / "blocker").write_text("a file, not a directory")
    code = main(["export", str(out)] + [a.format(t=target) for a in args])
    err = capsys.readouterr().err
    assert code == 2
    assert err.startswith("error: ") and len(err.strip().splitlines()) == 1 and message in err
    # All outputs are checked before any is written: nothing at all is left behind.
    assert _files(target) == ["blocker"]


def test_failed_write_leaves_nothing(results, tmp_path, capsys, monkeypatch):
    _, out = results
    import rootsim.formats.mesh as mesh

    def broken(path, vertices, faces):
        with open(path, "w") as fh:
            fh.write("v 0 0 0\n")  # partial output, then the disk "fills up"
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(mesh, "_write_obj", broken)
    assert main(["export", str(out), "--mesh", str(tmp_path / "m" / "r.obj")]) == 2
    assert "No space left on device" in capsys.readouterr().err
    assert _files(tmp_path / "m") == []


def test_missing_input(tmp_path, capsys):
    assert main(["export", str(tmp_path / "nothing"), "--vtk", str(tmp_path / "r.vtp")]) == 2
    assert capsys.readouterr().err.startswith("error: ")
    assert not (tmp_path / "r.vtp").exists()


def test_api_unknown_suffix_lists_allowed(tmp_path):
    from rootsim.errors import FormatError
    from rootsim.formats import export_file

    with pytest.raises(FormatError, match=r"allowed: \.glb, \.obj, \.ply, \.rsml, \.stl, \.vti, \.vtp"):
        export_file(random_root_system(rng=1), tmp_path / "roots.xyz")


def test_rootsystem_export_method_and_dataframe_input(tmp_path):
    # RootSystem.export forwards to export_file; a pandas DataFrame in the table layout works too.
    system = random_root_system(rng=6)
    path = system.export(tmp_path / "roots.vtp")
    reader = vtk.vtkXMLPolyDataReader()
    reader.SetFileName(str(path))
    reader.Update()
    assert reader.GetOutput().GetNumberOfPoints() == len(system) + np.unique(system["root_id"]).size
    from rootsim.formats import export_file
    import trimesh

    mesh = trimesh.load(export_file(system.to_dataframe(), tmp_path / "roots.stl"))
    assert mesh.is_watertight


def test_export_rsml_user_and_control_characters(results, tmp_path):
    # The mandatory <user> element carries --rsml-user; characters XML 1.0 forbids are dropped so
    # the file stays well-formed (read back with the standard library's XML parser).
    import xml.etree.ElementTree as ET

    _, out = results
    target = tmp_path / "r.rsml"
    assert main(["export", str(out), "--rsml", str(target), "--rsml-user", "trial\x01 team A"]) == 0
    assert ET.parse(target).getroot().findtext("metadata/user") == "trial team A"
