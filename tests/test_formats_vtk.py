"""VTK export, checked by reading the files back with VTK's own XML readers (not our writer's code)."""

from __future__ import annotations

import numpy as np
import pytest
import vtk
from vtk.util.numpy_support import vtk_to_numpy

from rootsim.formats import export_file
from rootsim.formats.vtk import polydata_from_segments
from rootsim.rootsystem import RootSystem, empty_columns

from test_formats_helpers import random_root_system


def _read_vtp(path):
    # Independent reader: VTK's vtkXMLPolyDataReader.
    reader = vtk.vtkXMLPolyDataReader()
    reader.SetFileName(str(path))
    reader.Update()
    return reader.GetOutput()


def _polyline_lengths(poly):
    """Total length of all polylines, summed from VTK's point coordinates and cell connectivity."""
    pts = vtk_to_numpy(poly.GetPoints().GetData()) if poly.GetNumberOfPoints() else np.zeros((0, 3))
    lines = poly.GetLines()
    offsets = vtk_to_numpy(lines.GetOffsetsArray())
    conn = vtk_to_numpy(lines.GetConnectivityArray())
    total = 0.0
    for a, b in zip(offsets[:-1], offsets[1:]):
        p = pts[conn[a:b]]
        total += np.linalg.norm(np.diff(p, axis=0), axis=1).sum()
    return total, offsets, conn, pts


@pytest.mark.parametrize("compression", [None, "zlib"])  # numpy writer, and VTK's own writer
def test_vtp_round_trip_through_vtk_reader(tmp_path, compression):
    system = random_root_system(rng=3)
    out = export_file(system, tmp_path / "roots.vtp", compression=compression)
    poly = _read_vtp(out)
    n = len(system)
    n_roots = np.unique(system["root_id"]).size
    # One polyline per root; shared points: n segments in p polylines use n + p points.
    assert poly.GetNumberOfLines() == n_roots
    assert poly.GetNumberOfPoints() == n + n_roots
    total, offsets, conn, pts = _polyline_lengths(poly)
    # Total polyline length equals the table's total length (plain vector norms over VTK's points).
    assert total == pytest.approx(system["length_cm"].sum(), rel=1e-12)
    pd = poly.GetPointData()
    names = {pd.GetArrayName(i) for i in range(pd.GetNumberOfArrays())}
    assert {"radius_cm", "tube_radius_cm", "order", "root_class_code", "plant_id", "age_days", "birth_day"} <= names
    cd = poly.GetCellData()
    assert {"order", "root_class_code", "plant_id"} <= {cd.GetArrayName(i) for i in range(cd.GetNumberOfArrays())}
    # Values: every point j >= 1 of a polyline carries the segment ending there; find it by coordinates.
    seg_id = vtk_to_numpy(pd.GetArray("segment_id"))
    end = np.column_stack([system["x1"], system["y1"], system["z1"]])
    last_points = conn[offsets[1:] - 1]
    assert np.allclose(pts[last_points], end[seg_id[last_points]])
    radius = vtk_to_numpy(pd.GetArray("radius_cm"))
    assert np.array_equal(radius, system["radius_cm"][seg_id])
    age = vtk_to_numpy(pd.GetArray("age_days"))
    assert np.allclose(age, 30.0 - system["birth_day"][seg_id])  # metadata run.duration_days = 30
    # Root class names travel in field data, indexed by the code.
    fd = poly.GetFieldData()
    names_arr = fd.GetAbstractArray("root_class_names")
    class_names = [names_arr.GetValue(i) for i in range(names_arr.GetNumberOfValues())]
    codes = vtk_to_numpy(pd.GetArray("root_class_code"))
    assert [class_names[c] for c in codes] == list(system["root_class"][seg_id])
    # Cell data: one value per root; the order of each polyline's first point.
    cell_order = vtk_to_numpy(cd.GetArray("order"))
    assert np.array_equal(cell_order, system["order"][seg_id[conn[offsets[:-1]]]])


def test_lateral_polyline_starts_on_parent_segment():
    # A lateral's first point is its branch point, which lies on the parent segment (vector algebra).
    system = random_root_system(rng=5)
    poly = polydata_from_segments(system)
    offsets = poly.lines  # legacy padded layout [n, ids...]
    seg = np.asarray(poly.point_data["segment_id"])
    s = np.column_stack([system["x0"], system["y0"], system["z0"]])
    e = np.column_stack([system["x1"], system["y1"], system["z1"]])
    i = 0
    checked = 0
    while i < len(offsets):
        k = offsets[i]
        first = offsets[i + 1]
        sid = seg[first]
        par = system["parent_id"][sid]
        if par >= 0:
            a, b, p = s[par], e[par], np.asarray(poly.points[first])
            t = np.clip(np.dot(p - a, b - a) / np.dot(b - a, b - a), 0, 1)
            assert np.allclose(a + t * (b - a), p)
            checked += 1
        i += k + 1
    assert checked > 10


def test_empty_system_writes_valid_vtp(tmp_path):
    system = RootSystem(empty_columns(), {})
    out = export_file(system, tmp_path / "empty.vtp")
    poly = _read_vtp(out)
    assert poly.GetNumberOfPoints() == 0 and poly.GetNumberOfLines() == 0


def test_tube_filter_accepts_radius_array():
    # VTK's vtkTubeFilter (through pyvista) builds tubes from the tube-ready radius array.
    system = random_root_system(rng=2, n_plants=1, laterals=(3,))
    poly = polydata_from_segments(system)
    tube = poly.tube(scalars="tube_radius_cm", absolute=True, n_sides=6)
    assert tube.n_points > 0


def test_non_ascii_class_names(tmp_path):
    system = random_root_system(rng=8, n_plants=1, laterals=(4,))
    columns = {c: system[c] for c in system.columns}
    columns["root_class"] = np.where(system["order"] == 0, "Hauptwurzel", "Seitenwurzel 1. Ordnung (ä)")
    system = RootSystem(columns, {})
    for compression in (None, "zlib"):
        poly = _read_vtp(export_file(system, tmp_path / f"{compression}.vtp", compression=compression))
        names_arr = poly.GetFieldData().GetAbstractArray("root_class_names")
        names = [names_arr.GetValue(i) for i in range(names_arr.GetNumberOfValues())]
        codes = vtk_to_numpy(poly.GetPointData().GetArray("root_class_code"))
        seg = vtk_to_numpy(poly.GetPointData().GetArray("segment_id"))
        assert [names[c] for c in codes] == list(columns["root_class"][seg])


def test_metadata_json_in_field_data(tmp_path):
    import json

    system = random_root_system(rng=3)
    poly = _read_vtp(export_file(system, tmp_path / "roots.vtp"))
    text = poly.GetFieldData().GetAbstractArray("rootsim_metadata").GetValue(0)
    assert json.loads(text) == system.metadata
