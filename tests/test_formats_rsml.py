"""RSML export and import: round trips, the standard's element structure (read with the standard
library's xml.etree.ElementTree, not our reader), hand-written files with analytic lengths, and errors."""

from __future__ import annotations

import xml.etree.ElementTree as ET

import numpy as np
import pytest

from rootsim.cli import main
from rootsim.errors import FormatError
from rootsim.formats import export_file, import_file
from rootsim.rootsystem import RootSystem, empty_columns
from rootsim.segment_table import read_segments

from test_formats_helpers import random_root_system


def _segment_keys(system):
    return [tuple(row) for row in np.column_stack([system[c] for c in ("x0", "y0", "z0", "x1", "y1", "z1")]).tolist()]


def test_round_trip_keeps_geometry_and_topology(tmp_path):
    # joint_fraction=0.5: many laterals branch exactly at a joint between two parent segments.
    original = random_root_system(rng=21, joint_fraction=0.5)
    back = import_file(export_file(original, tmp_path / "roots.rsml"))
    assert len(back) == len(original)
    assert back["length_cm"].sum() == pytest.approx(original["length_cm"].sum(), rel=1e-12)
    assert back.n_tips == original.n_tips
    # Match segments by their exact end points (coordinates are written as shortest round-trip decimals).
    index_of = {key: i for i, key in enumerate(_segment_keys(original))}
    match = np.array([index_of[key] for key in _segment_keys(back)])
    assert sorted(match.tolist()) == list(range(len(original)))
    for col in ("order", "plant_id", "radius_cm", "birth_day", "root_class"):
        assert np.array_equal(back[col], original[col][match]), col
    # Parent structure: the parent of each imported segment is the image of the original parent.
    parent_back = back["parent_id"]
    mapped = np.where(parent_back >= 0, match[np.maximum(parent_back, 0)], -1)
    assert np.array_equal(mapped, original["parent_id"][match])
    # Roots stay roots: same partition of segments into roots.
    pairs = set(zip(back["root_id"].tolist(), original["root_id"][match].tolist()))
    assert len(pairs) == np.unique(original["root_id"]).size == np.unique(back["root_id"]).size
    assert back.metadata["stand"]["plant_positions_cm"] == original.metadata["stand"]["plant_positions_cm"]
    assert back.metadata["run"]["duration_days"] == 30.0


def test_file_has_the_standard_structure(tmp_path):
    system = random_root_system(rng=2)
    path = export_file(system, tmp_path / "roots.rsml")
    top = ET.parse(path).getroot()  # plain XML parser from the standard library
    assert top.tag == "rsml"
    meta = top.find("metadata")
    assert meta.find("version").text == "1"
    assert meta.find("unit").text == "cm"
    assert float(meta.find("resolution").text) == 1.0
    assert meta.find("software").text == "rootsim"
    plants = top.findall("scene/plant")
    assert len(plants) == 2
    # Nesting depth = root order: count <root> elements at each depth.
    counts = []
    level = [r for p in plants for r in p.findall("root")]
    while level:
        counts.append(len(level))
        level = [c for r in level for c in r.findall("root")]
    assert counts == [np.unique(system["root_id"][system["order"] == k]).size for k in range(3)]
    radius_by_root = {int(r): system["radius_cm"][system["root_id"] == r][0] for r in np.unique(system["root_id"])}
    total = 0.0
    for root in top.iter("root"):
        pts = root.findall("geometry/polyline/point")
        assert len(pts) >= 2
        xyz = np.array([[float(p.get(a)) for a in "xyz"] for p in pts])
        total += np.linalg.norm(np.diff(xyz, axis=0), axis=1).sum()
        fn = root.find("functions/function[@name='diameter']")
        assert fn.get("domain") == "polyline"
        samples = [float(s.get("value")) for s in fn.findall("sample")]  # the schema: value attribute
        assert len(samples) == len(pts)
        assert np.allclose(samples, 2 * radius_by_root[int(root.get("id"))])
        assert root.get("label") in {"primary", "lateral", "fine_lateral"}
    assert total == pytest.approx(system["length_cm"].sum(), rel=1e-12)


TWO_D_PIXELS = """<?xml version="1.0"?>
<rsml>
  <metadata><version>1</version><unit>mm</unit><resolution>10</resolution></metadata>
  <scene>
    <plant id="A">
      <root id="main">
        <geometry><polyline>
          <point x="0" y="0"/><point x="0" y="100"/><point x="0" y="300"/>
        </polyline></geometry>
        <root id="side" label="branch">
          <geometry><polyline><point x="3" y="150"/><point x="43" y="180"/></polyline></geometry>
          <functions><function name="diameter" domain="polyline"><sample value="2"/><sample value="4"/></function></functions>
        </root>
      </root>
    </plant>
  </scene>
</rsml>
"""


def test_two_dimensional_image_file_with_units(tmp_path):
    # Hand-computed: 10 pixels per mm -> 1 pixel = 0.01 cm. Primary: (0,0) -> (0,100) -> (0,300) px
    # = 1 cm + 2 cm down. The lateral starts 3 px off the primary at y=150 px; its traced polyline
    # (3,150) -> (43,180) px = 50 px = 0.5 cm (3-4-5 triangle) is kept as it is: no connecting
    # length, its first segment starts at its first traced point and hangs on the primary's 2nd segment.
    path = tmp_path / "traced.rsml"
    path.write_text(TWO_D_PIXELS)
    system = import_file(path)
    assert len(system) == 2 + 1
    assert np.allclose(system["length_cm"], [1.0, 2.0, 0.5])
    assert np.allclose(system["z1"][:2], [-1.0, -3.0])  # image y (down) becomes depth
    assert np.array_equal(system["order"], [0, 0, 1])
    assert list(system["root_class"]) == ["order_0", "order_0", "branch"]
    assert system["parent_id"].tolist() == [-1, 0, 1]  # lateral hangs on the primary's 2nd segment
    assert np.allclose([system["x0"][2], system["z0"][2]], [0.03, -1.5])
    # Radius = diameter / 2 at the segment's end point (mm -> cm): 4 px / 2 = 2 px = 0.02 cm.
    assert np.allclose(system["radius_cm"][2], 0.02)
    assert np.allclose(system["radius_cm"][:2], 0.025)  # stated default, no diameter function
    assert system.metadata["import"]["default_radius_cm"] == 0.025


def test_pixel_unit_needs_pixel_size(tmp_path):
    path = tmp_path / "px.rsml"
    path.write_text(TWO_D_PIXELS.replace("<unit>mm</unit><resolution>10</resolution>", "<unit>pixel</unit>"))
    with pytest.raises(FormatError, match="cm-per-pixel"):
        import_file(path)
    system = import_file(path, cm_per_pixel=0.01)
    assert np.allclose(system["length_cm"][:2], [1.0, 2.0])


def test_empty_system_round_trip(tmp_path):
    path = export_file(RootSystem(empty_columns(), {}), tmp_path / "empty.rsml")
    top = ET.parse(path).getroot()
    assert top.find("scene") is not None and len(top.find("scene")) == 0
    assert len(import_file(path)) == 0


def test_cli_import_writes_segment_table(tmp_path, capsys):
    src = export_file(random_root_system(rng=9), tmp_path / "roots.rsml")
    out = tmp_path / "imported"
    assert main(["import-rsml", str(src), "--out", str(out)]) == 0
    columns, metadata = read_segments(out / "segments.parquet")
    assert metadata["import"]["format"] == "rsml"
    assert len(columns["segment_id"]) == len(random_root_system(rng=9))


BAD_FILES = {
    "not_xml": ("this is not <xml", "not an XML file"),
    "wrong_top": ("<svg><scene/></svg>", "expected <rsml>"),
    "no_scene": ("<rsml><metadata><unit>cm</unit></metadata></rsml>", "no <scene>"),
    "one_point_strict": (
        '<rsml><scene><plant id="1"><root id="1"><geometry><polyline><point x="0" y="0" z="0"/><point x="0" y="0" z="-1"/>'
        '</polyline></geometry></root><root id="2"><geometry><polyline><point x="0" y="0" z="0"/><point x="1" y="0" z="-1"/>'
        '</polyline></geometry></root><root id="3"><geometry><polyline><point x="0" y="0" z="0"/></polyline></geometry>'
        "</root></plant></scene></rsml>",
        "plant 1 > root 3 > geometry: polyline has 1 point (need >= 2)",
    ),
    "hint_overflow": (
        '<rsml><scene><plant id="1"><root id="1"><geometry><polyline><point x="0" y="0" z="0"/><point x="0" y="0" z="-1"/>'
        '</polyline></geometry><root id="2"><properties><branch-segment-index value="99999999999999999999999"/>'
        '</properties><geometry><polyline><point x="0" y="0" z="-1"/><point x="1" y="0" z="-1"/></polyline></geometry>'
        "</root></root></plant></scene></rsml>",
        "plant 1 > root 1 > root 2 > properties > branch-segment-index: value 99999999999999999999999 is not a "
        "point of the parent's polyline (allowed: 0 to 1)",
    ),
    "hint_text": (
        '<rsml><scene><plant id="1"><root id="1"><geometry><polyline><point x="0" y="0" z="0"/><point x="0" y="0" z="-1"/>'
        '</polyline></geometry><root ID="b"><properties><branch-segment-index value="first"/>'
        '</properties><geometry><polyline><point x="0" y="0" z="-1"/><point x="1" y="0" z="-1"/></polyline></geometry>'
        "</root></root></plant></scene></rsml>",
        "plant 1 > root 1 > root b > properties > branch-segment-index: value 'first' is not a whole number",
    ),
    "text_coordinate": (
        '<rsml><scene><plant><root><geometry><polyline><point x="0" y="0" z="0"/><point x="one" y="0" z="-1"/>'
        "</polyline></geometry></root></plant></scene></rsml>",
        "plant #1 > root #1 > geometry: x coordinate 'one' is not a number",
    ),
    "samples": (
        '<rsml><scene><plant id="p"><root id="r"><geometry><polyline><point x="0" y="0" z="0"/><point x="0" y="0" z="-1"/>'
        '</polyline></geometry><functions><function name="diameter" domain="polyline"><sample value="-0.1"/></function>'
        "</functions></root></plant></scene></rsml>",
        "plant p > root r > function diameter: negative diameter",
    ),
    "unit": ("<rsml><metadata><unit>furlong</unit></metadata><scene/></rsml>", "unknown unit 'furlong'"),
}


@pytest.mark.parametrize("case", sorted(BAD_FILES))
def test_cli_bad_files_exit_2_and_write_nothing(tmp_path, capsys, case):
    text, message = BAD_FILES[case]
    path = tmp_path / "bad.rsml"
    path.write_text(text)
    out = tmp_path / "out"
    strict = ["--strict"] if case.endswith("_strict") else []
    assert main(["import-rsml", str(path), "--out", str(out), *strict]) == 2
    err = capsys.readouterr().err
    assert err.startswith("error: ") and len(err.strip().splitlines()) == 1
    assert f"{path}: " in err and message in err
    assert not out.exists()


def test_cli_missing_file(tmp_path, capsys):
    assert main(["import-rsml", str(tmp_path / "nope.rsml"), "--out", str(tmp_path / "o")]) == 2
    assert capsys.readouterr().err.startswith("error: ")


def test_namespaced_file_and_nested_laterals_off_the_parent(tmp_path):
    # A default XML namespace on every element, and a second-order lateral whose first point is
    # 0.3 cm off its parent (hand-computed: parent runs along x at z = -1; lateral starts at
    # (0.5, 0, -1.3)): its traced 1 cm is kept, no connecting length is added, and it hangs on
    # the parent's only segment.
    text = """<rsml xmlns="urn:example:rsml"><scene><plant>
      <root label="tap"><geometry><polyline><point x="0" y="0" z="0"/><point x="0" y="0" z="-1"/></polyline></geometry>
        <root><geometry><polyline><point x="0" y="0" z="-1"/><point x="2" y="0" z="-1"/></polyline></geometry>
          <root><geometry><polyline><point x="0.5" y="0" z="-1.3"/><point x="0.5" y="0" z="-2.3"/></polyline></geometry></root>
        </root>
      </root></plant></scene></rsml>"""
    path = tmp_path / "ns.rsml"
    path.write_text(text)
    system = import_file(path)
    assert np.allclose(system["length_cm"], [1.0, 2.0, 1.0])
    assert system["order"].tolist() == [0, 1, 2]
    assert system["parent_id"].tolist() == [-1, 0, 1]
    assert list(system["root_class"]) == ["tap", "order_1", "order_2"]
    assert np.allclose([system["x0"][2], system["z0"][2]], [0.5, -1.3])


MORE_BAD = {
    "missing_z": ('<rsml><scene><plant id="1"><root id="7"><geometry><polyline><point x="0" y="0" z="-0.5"/>'
                  '<point x="0" y="1"/></polyline></geometry></root></plant></scene></rsml>',
                  "plant 1 > root 7 > geometry: point 2 has no z coordinate"),
    "bad_sample": ('<rsml><scene><plant id="1"><root id="7"><geometry><polyline><point x="0" y="0" z="0"/>'
                   '<point x="0" y="1" z="-1"/></polyline></geometry><functions><function name="diameter" '
                   'domain="polyline"><sample>0.1</sample><sample>thin</sample></function></functions></root>'
                   "</plant></scene></rsml>",
                   "plant 1 > root 7 > function diameter: sample 'thin' is not a number"),
    "huge_coordinate": ('<rsml><metadata><unit>m</unit></metadata><scene><plant id="1"><root id="7"><geometry>'
                        '<polyline><point x="0" y="0" z="0"/><point x="0" y="0" z="-1e307"/></polyline></geometry>'
                        "</root></plant></scene></rsml>",
                        "plant 1 > root 7 > geometry: a coordinate is too large to measure once converted to cm"),
    "no_geometry": ('<rsml><scene><plant id="1"><root id="7"/></plant></scene></rsml>',
                    "plant 1 > root 7: no <geometry><polyline>"),  # refused with strict=True
}


@pytest.mark.parametrize("case", sorted(MORE_BAD))
def test_more_bad_files(tmp_path, case):
    text, message = MORE_BAD[case]
    path = tmp_path / "bad.rsml"
    path.write_text(text)
    with pytest.raises(FormatError) as info:
        import_file(path, strict=True)
    assert str(info.value) == f"{path}: {message}" or str(info.value).startswith(f"{path}: {message}")


def test_cli_notes_default_radius(tmp_path, capsys):
    path = tmp_path / "traced.rsml"
    path.write_text(TWO_D_PIXELS)
    assert main(["import-rsml", str(path), "--out", str(tmp_path / "o"), "--default-radius-cm", "0.04"]) == 0
    captured = capsys.readouterr()
    assert "note:" in captured.err and "0.04 cm" in captured.err
    columns, _ = read_segments(tmp_path / "o")
    assert np.allclose(columns["radius_cm"][:2], 0.04)
