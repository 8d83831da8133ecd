"""``rootsim import-rsml --connectors`` (issue 12 point 1): laterals drawn joined to their parents, measured as traced.

The files are invented traced root systems (``traced_file`` of test_formats_rsml_traced: laterals start
0.02-0.1 cm beside their parent, as image-tracing tools put them). Connector geometry is checked against the XML read
with lxml and plain loops (not rootsim's reader); the segment table with pandas/pyarrow; drawings with VTK's own
XML reader. With connectors on, total length, profiles, traits and virtual-core samples must equal those of the
plain import exactly: a connector is a drawing aid with zero length, not root (RSML: Lobet et al. 2015,
doi:10.1104/pp.114.253625).
"""

from __future__ import annotations

import json
import math
import warnings

import numpy as np
import pandas as pd
import pytest
from lxml import etree

from rootsim.analysis.profile import layer_profile
from rootsim.analysis.traits import root_traits
from rootsim.cli import main
from rootsim.formats.rsml import read_rsml
from rootsim.sampling.cores import sample_cores
from test_formats_rsml_traced import rsml_text, traced_file


def _xml_roots(path):
    """(points (k, 3) cm, parent points or None) of every root with >= 2 points, in document order (lxml)."""
    roots = []

    def visit(element, parent_points):
        points = np.array([[float(p.get("x")), float(p.get("y")), float(p.get("z"))]
                           for p in element.find("geometry/polyline").findall("point")])
        roots.append((points, parent_points))
        for child in element.findall("root"):
            visit(child, points)

    for plant in etree.parse(str(path)).getroot().find("scene").findall("plant"):
        for root in plant.findall("root"):
            visit(root, None)
    return roots


def _distance_to_polyline(q, points):
    """Shortest distance from point ``q`` to the polyline ``points`` (plain loop over its segments)."""
    best = math.inf
    for a, b in zip(points[:-1], points[1:]):
        d = b - a
        t = min(max(float(np.dot(q - a, d) / np.dot(d, d)), 0.0), 1.0)
        best = min(best, float(np.linalg.norm(a + t * d - q)))
    return best


@pytest.fixture(params=[False, True], ids=["nearest", "hinted"])
def traced(tmp_path, request):
    body, _ = traced_file(31, hints=request.param)
    path = tmp_path / "traced.rsml"
    path.write_text(rsml_text(body))
    return path


def _read(path, **options):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UserWarning)
        return read_rsml(path, **options)


def test_connectors_join_laterals_and_change_no_measurement(traced):
    plain, joined = _read(traced), _read(traced, connectors=True)
    roots = _xml_roots(traced)
    laterals = [(pts, parent) for pts, parent in roots if parent is not None]
    assert joined.n_connectors == len(laterals) == 28 and plain.n_connectors == 0  # every lateral starts off its parent
    # analyzers see exactly the traced segments
    assert joined.columns == plain.columns
    for name in plain.columns:
        assert np.array_equal(np.asarray(joined[name]), np.asarray(plain[name])), name
    # total length = the traced polylines' length from the XML (connectors add none)
    xml_length = sum(float(np.linalg.norm(np.diff(pts, axis=0), axis=1).sum()) for pts, _ in roots)
    assert joined["length_cm"].sum() == pytest.approx(xml_length, rel=1e-12)
    area = 40.0 * 20.0
    pd.testing.assert_frame_equal(layer_profile(joined, layer_cm=5, area_cm2=area),
                                  layer_profile(plain, layer_cm=5, area_cm2=area))
    a, b = root_traits(joined, area_cm2=area), root_traits(plain, area_cm2=area)
    assert a.keys() == b.keys()
    for key in a:
        assert a[key] == b[key] or (isinstance(a[key], float) and math.isnan(a[key]) and math.isnan(b[key])), key
    cores = ["0,0,6,30,10", "20,0,6,30,10"]
    pd.testing.assert_frame_equal(sample_cores(joined, cores=cores, check_container=False, periodic=False),
                                  sample_cores(plain, cores=cores, check_container=False, periodic=False))


def test_connector_rows_in_the_written_table(traced, tmp_path):
    out = tmp_path / "joined"
    assert main(["import-rsml", str(traced), "--out", str(out), "--connectors"]) == 0
    table = pd.read_parquet(out / "segments.parquet")  # as a pandas user sees it
    roots = _xml_roots(traced)
    connectors = table[table["is_connector"]]
    assert len(connectors) == sum(parent is not None for _, parent in roots)
    assert (connectors["length_cm"] == 0).all()
    summary = json.loads((out / "summary.json").read_text())
    assert summary["n_segments"] == len(table) - len(connectors)
    traced_rows = table[~table["is_connector"]]
    assert traced_rows["length_cm"].sum() == pytest.approx(summary["total_length_cm"], rel=1e-12)
    firsts = {tuple(np.round(pts[0], 9)): (pts, parent) for pts, parent in roots if parent is not None}
    for row in connectors.itertuples():
        start = np.array([row.x0, row.y0, row.z0])
        end = np.array([row.x1, row.y1, row.z1])
        pts, parent = firsts[tuple(np.round(end, 9))]  # ends at a lateral's first traced point
        assert _distance_to_polyline(start, parent) < 1e-9  # starts on the parent's centre line
        child = table.iloc[int(np.flatnonzero(table["parent_id"].to_numpy() == row.segment_id)[0])]
        assert child.root_id == row.root_id and not child.is_connector  # the lateral continues the connector
        assert [child.x0, child.y0, child.z0] == pytest.approx(list(pts[0]), abs=1e-12)
        assert table.loc[row.parent_id, "root_id"] != row.root_id  # and hangs from the parent root


def test_cli_outputs_equal_with_and_without_connectors_and_vtk_draws_them(traced, tmp_path, capsys):
    import vtk
    from vtk.util.numpy_support import vtk_to_numpy

    plain, joined = tmp_path / "plain", tmp_path / "joined"
    assert main(["import-rsml", str(traced), "--out", str(plain)]) == 0
    assert main(["import-rsml", str(traced), "--out", str(joined), "--connectors"]) == 0
    for folder in (plain, joined):
        assert main(["analyze", str(folder), "--area-cm2", "800"]) == 0
        assert main(["sample", str(folder), "--core", "0,0,6,30,10", "--core", "20,0,6,30,10"]) == 0
        assert main(["export", str(folder), "--vtk", str(folder / "roots.vtp")]) == 0
    for name in ("profile.csv", "orientation.csv", "cores.csv"):
        assert (joined / name).read_text() == (plain / name).read_text(), name
    traits = [json.loads((f / "traits.json").read_text()) for f in (plain, joined)]
    for t in traits:
        t.pop("run_id", None), t.pop("source", None)  # runs and folders differ, the measurements must not
    assert traits[0] == traits[1]
    # drawn: each lateral's polyline starts on its parent (VTK's own reader)
    roots = _xml_roots(traced)
    for folder, joined_up in ((plain, False), (joined, True)):
        reader = vtk.vtkXMLPolyDataReader()
        reader.SetFileName(str(folder / "roots.vtp"))
        reader.Update()
        poly = reader.GetOutput()
        points = vtk_to_numpy(poly.GetPoints().GetData())
        lines = poly.GetLines()
        offsets = vtk_to_numpy(lines.GetOffsetsArray())
        connectivity = vtk_to_numpy(lines.GetConnectivityArray())
        starts, tips = points[connectivity[offsets[:-1]]], points[connectivity[offsets[1:] - 1]]
        assert poly.GetNumberOfLines() == len(roots)
        by_tip = {tuple(np.round(pts[-1], 6)): (pts, parent) for pts, parent in roots}
        on_parent = []
        for start, tip, k in zip(starts, tips, np.diff(offsets)):
            pts, parent = by_tip[tuple(np.round(tip, 6))]  # the XML root ending at this polyline's tip
            if parent is None:
                continue
            on_parent.append(_distance_to_polyline(start, parent) < 1e-9)
            assert k == len(pts) + joined_up  # the connector adds one point: the branch point
        assert all(on_parent) if joined_up else not any(on_parent)


def test_tables_with_wrong_connector_rows_are_one_line_errors(traced, tmp_path, capsys):
    out = tmp_path / "joined"
    assert main(["import-rsml", str(traced), "--out", str(out), "--connectors"]) == 0
    table = pd.read_parquet(out / "segments.parquet")
    bad_tables = {
        "length": table.assign(length_cm=np.where(table.is_connector, 0.5, table.length_cm)),
        "first": table.assign(is_connector=table.segment_id == 0),  # a plant's first segment has no parent
        "numbers": table.assign(is_connector=table.is_connector.astype(int)),
    }
    for name, frame in bad_tables.items():
        folder = tmp_path / name
        folder.mkdir()
        frame.to_parquet(folder / "segments.parquet", index=False)
        capsys.readouterr()
        assert main(["analyze", str(folder), "--area-cm2", "800"]) == 2, name
        err = capsys.readouterr().err
        assert err.startswith("error: ") and err.count("\n") == 1 and "is_connector" in err, err
