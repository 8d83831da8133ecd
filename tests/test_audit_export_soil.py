"""Audit of ``rootsim export --vtk`` for runs grown in a soil with biopores: the per-segment ``in_biopore`` flag
(and ``death_day`` of kept dead roots) reach the VTK file, so roots in pores can be coloured next to the
``rootsim soil --vti`` grid. Read back with VTK's own reader (an independent library)."""

from __future__ import annotations

import numpy as np

from rootsim.cli import main
from rootsim.rootsystem import RootSystem
from rootsim.sampling.synthetic import lines_system


def test_in_biopore_and_death_day_reach_the_vtk_points(tmp_path, capsys):
    import vtk
    from vtk.util.numpy_support import vtk_to_numpy

    # One root of 6 straight 1 cm segments going down; segments 2 and 3 lie in a pore, segment 5 died on day 9.
    top = np.arange(0.0, 6.0)
    p0 = np.column_stack([np.zeros_like(top), np.zeros_like(top), -top])
    base = lines_system(p0, p0 - np.array([0.0, 0.0, 1.0]), parent_id=np.r_[-1, np.arange(5)],
                        root_id=np.zeros(6, dtype=np.int64))
    columns = {name: np.asarray(base[name]) for name in ("segment_id", "parent_id", "plant_id", "root_id", "order",
                                                          "root_class", "x0", "y0", "z0", "x1", "y1", "z1",
                                                          "radius_cm", "length_cm", "birth_day")}
    in_pore = np.array([False, False, True, True, False, False])
    death = np.array([np.inf] * 5 + [9.0])
    RootSystem({**columns, "in_biopore": in_pore, "death_day": death}, {"run": {"duration_days": 10.0}}).write(
        tmp_path / "run" / "segments.parquet")
    assert main(["export", str(tmp_path / "run"), "--vtk", str(tmp_path / "roots.vtp")]) == 0, capsys.readouterr().err
    reader = vtk.vtkXMLPolyDataReader()
    reader.SetFileName(str(tmp_path / "roots.vtp"))
    reader.Update()
    data = reader.GetOutput().GetPointData()
    segment = vtk_to_numpy(data.GetArray("segment_id"))
    assert data.GetArray("in_biopore") is not None and data.GetArray("death_day") is not None
    flags = vtk_to_numpy(data.GetArray("in_biopore"))
    deaths = vtk_to_numpy(data.GetArray("death_day"))
    assert np.array_equal(flags.astype(bool), in_pore[segment])     # each point carries its segment's flag
    assert np.array_equal(deaths, death[segment])
