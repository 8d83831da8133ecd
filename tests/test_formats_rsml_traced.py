"""RSML import of traced-like files, checked against an independent reading of the XML with lxml.

The files are built here like image-tracing tools write them (invented root systems, not real
data): laterals whose first traced point lies a little off the parent, 2-D files with explicit
``z="0"``, empty ``<root/>`` elements and one-point polylines, every length unit the RSML standard
lists, functions shorter and longer than their polylines. Lengths, orders, insertion angles and
depths are computed from the XML with lxml and plain loops (not rootsim's reader) and compared
with what rootsim measures. RSML: Lobet et al. 2015, Plant Physiology 167(3):617-627,
doi:10.1104/pp.114.253625.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from lxml import etree

from rootsim.cli import main
from rootsim.errors import FormatError
from rootsim.formats import import_file
from rootsim.segment_table import read_segments


# --------------------------------------------------------------------------------------------
# invented traced files
# --------------------------------------------------------------------------------------------

def _unit(v):
    return v / np.linalg.norm(v)


def _perpendicular(d, rng):
    w = _unit(np.cross(d, rng.normal(size=3)))
    return w


def traced_file(rng, *, image: bool = False, scale: float = 1.0, hints: bool = False):
    """An invented traced root system as RSML text, and the true insertion angle of every lateral.

    Primaries wiggle downwards; each lateral starts 0.02-0.1 cm beside a random point of its
    parent (off the centre line, as tracing tools put it) and its first segment leaves the parent
    segment at an angle drawn from 54-76 degrees. In ``image`` mode everything lies in the x-z
    plane and is written as image coordinates (y downwards) with z="0". Coordinates are written
    in cm divided by ``scale`` (so ``scale`` is the cm per file unit).
    """
    rng = np.random.default_rng(rng)
    true_angles = {}
    roots = []  # (id, parent id, points (k, 3) in cm, order)

    def walk(start, direction, n, step, turn, planar):
        pts = [start]
        d = direction
        for _ in range(n):
            pts.append(pts[-1] + d * step)
            kick = rng.normal(0, turn, 3)
            if planar:
                kick[1] = 0
            d = _unit(d + kick + np.array([0, 0, -0.05]))
        return np.array(pts)

    next_id = [0]

    def add(parent, order, planar):
        pid, ppts = parent
        seg = int(rng.integers(0, len(ppts) - 1))
        a, b = ppts[seg], ppts[seg + 1]
        tdir = _unit(b - a)
        base = a + rng.uniform(0.2, 0.8) * (b - a)
        side = _perpendicular(tdir, rng)
        if planar:
            side = _unit(np.array([-tdir[2], 0.0, tdir[0]])) * rng.choice([-1, 1])
        angle = np.radians(rng.uniform(54, 76))
        first_dir = np.cos(angle) * tdir + np.sin(angle) * side
        start = base + side * rng.uniform(0.02, 0.1)
        pts = walk(start, first_dir, int(rng.integers(3, 9)), rng.uniform(0.3, 0.8), 0.15, planar)
        rid = next_id[0]
        next_id[0] += 1
        true_angles[rid] = np.degrees(angle)
        roots.append((rid, pid, pts, order, seg))
        return rid, pts

    plants = []
    for plant in range(2):
        start_index = len(roots)
        primaries = []
        for _ in range(2):
            x = plant * 20.0 + rng.uniform(-1, 1)
            pts = walk(np.array([x, 0.0, -0.5]), _unit(np.array([rng.normal(0, 0.2), 0.0, -1.0])),
                       int(rng.integers(15, 25)), 1.0, 0.1, image)
            rid = next_id[0]
            next_id[0] += 1
            roots.append((rid, -1, pts, 0, -1))
            primaries.append((rid, pts))
        firsts = [add(primaries[int(rng.integers(0, 2))], 1, image) for _ in range(8)]
        for _ in range(6):
            add(firsts[int(rng.integers(0, len(firsts)))], 2, image)
        plants.append(roots[start_index:])

    by_parent = {}
    for r in roots:
        by_parent.setdefault(r[1], []).append(r)

    def point_xml(p):
        if image:  # image coordinates: x, y downwards (= depth), z = 0
            return f'<point x="{float(p[0] / scale)!r}" y="{float(-p[2] / scale)!r}" z="0"/>'
        return f'<point x="{float(p[0] / scale)!r}" y="{float(p[1] / scale)!r}" z="{float(p[2] / scale)!r}"/>'

    def root_xml(r):
        rid, _, pts, _, seg = r
        props = f'<properties><branch-segment-index value="{seg}"/></properties>' if hints and seg >= 0 else ""
        inner = "".join(root_xml(c) for c in by_parent.get(rid, []))
        return (f'<root id="{rid}">{props}<geometry><polyline>{"".join(point_xml(p) for p in pts)}'
                f"</polyline></geometry>{inner}</root>")

    body = "".join(f'<plant id="{i + 1}">{"".join(root_xml(r) for r in plant_roots if r[1] == -1)}</plant>'
                   for i, plant_roots in enumerate(plants))
    return body, true_angles


def rsml_text(body, *, unit="cm", resolution="1"):
    return (f'<?xml version="1.0"?><rsml><metadata><version>1</version><unit>{unit}</unit>'
            f"<resolution>{resolution}</resolution></metadata><scene>{body}</scene></rsml>")


# --------------------------------------------------------------------------------------------
# the independent reading
# --------------------------------------------------------------------------------------------

def independent_measures(path, cm_per_unit, *, image=None):
    """Lengths, orders, depths and insertion angles from the XML alone (lxml, plain loops).

    The insertion angle of a lateral is the angle between its first traced segment and the parent
    segment nearest to its first traced point (point-to-segment distance, brute force).
    """
    doc = etree.parse(str(path))
    roots = doc.getroot().findall(".//root")
    zs = [p.get("z") for r in roots for p in r.findall("geometry/polyline/point")]
    if image is None:
        image = all(z is None or float(z) == 0 for z in zs)
    info = {}
    for r in roots:
        pts = r.findall("geometry/polyline/point")
        if len(pts) < 2:
            continue
        if image:
            xyz = np.array([[float(p.get("x")), 0.0, -float(p.get("y"))] for p in pts]) * cm_per_unit
        else:
            xyz = np.array([[float(p.get(a)) for a in "xyz"] for p in pts]) * cm_per_unit
        order = 0
        up = r.getparent()
        while up.tag == "root":
            order += 1
            up = up.getparent()
        info[r] = {"points": xyz, "order": order, "length": float(np.sum(np.linalg.norm(np.diff(xyz, axis=0), axis=1)))}
    angles = {}
    for r, facts in info.items():
        parent = r.getparent()
        if parent.tag != "root" or parent not in info:
            continue
        q = facts["points"][0]
        ppts = info[parent]["points"]
        best, best_d = 0, np.inf
        for j in range(len(ppts) - 1):
            a, b = ppts[j], ppts[j + 1]
            t = np.clip(np.dot(q - a, b - a) / np.dot(b - a, b - a), 0, 1)
            d = np.linalg.norm(a + t * (b - a) - q)
            if d < best_d:
                best, best_d = j, d
        u = facts["points"][1] - facts["points"][0]
        v = ppts[best + 1] - ppts[best]
        angles[r.get("id")] = np.degrees(np.arccos(np.clip(np.dot(u, v) / np.linalg.norm(u) / np.linalg.norm(v), -1, 1)))
    all_points = np.vstack([f["points"] for f in info.values()])
    return {
        "total_length": sum(f["length"] for f in info.values()),
        "length_by_order": {o: sum(f["length"] for f in info.values() if f["order"] == o)
                            for o in sorted({f["order"] for f in info.values()})},
        "n_roots": len(info),
        "max_depth": float(-all_points[:, 2].min()),
        "angles": angles,
        "angle_by_order": {o: np.mean([angles[r.get("id")] for r, f in info.items() if f["order"] == o])
                           for o in sorted({f["order"] for f in info.values()}) if o > 0},
    }


def _lateral_angles(system):
    """rootsim's insertion angle of each lateral, keyed by its root id (as text)."""
    from rootsim.analysis.topology import branch_points, insertion_angles_deg, root_chains

    chains = root_chains(system)
    branches = branch_points(system, chains)
    angles = insertion_angles_deg(system, branches)
    return {str(int(system["root_id"][s])): a for s, a in zip(branches.first_segment, angles)}


# --------------------------------------------------------------------------------------------
# tests
# --------------------------------------------------------------------------------------------

@pytest.mark.parametrize("hints", [False, True])
def test_laterals_off_the_parent_keep_traced_length_and_angles(tmp_path, hints):
    body, true_angles = traced_file(5, hints=hints)
    path = tmp_path / "traced.rsml"
    path.write_text(rsml_text(body, unit="mm", resolution="0.1"))  # 0.1 unit per mm: 1 unit = 1 cm
    system = import_file(path)
    ref = independent_measures(path, 1.0)
    traits = system.traits()
    assert system["length_cm"].sum() == pytest.approx(ref["total_length"], rel=1e-12)
    assert {int(k): v for k, v in traits["length_by_order_cm"].items()} == pytest.approx(ref["length_by_order"], rel=1e-12)
    assert traits["n_roots"] == ref["n_roots"]
    assert traits["max_depth_cm"] == pytest.approx(ref["max_depth"], rel=1e-12)
    # Insertion angles: from the lateral's own first traced segment against its parent segment,
    # equal to the independent computation and to the angle the laterals were drawn with.
    angles = _lateral_angles(system)
    assert set(angles) == set(ref["angles"]) == {str(k) for k in true_angles}
    for rid, value in angles.items():
        assert value == pytest.approx(ref["angles"][rid], abs=1e-9)
        assert value == pytest.approx(true_angles[int(rid)], abs=1e-9)
    assert {int(k): v for k, v in traits["mean_insertion_angle_deg"].items()} == pytest.approx(ref["angle_by_order"], abs=1e-9)
    # Laterals start at their first traced point, off the parent (not on it).
    assert system.metadata["import"]["dimensions"] == 3


def test_two_dimensional_file_with_explicit_zero_z_is_an_image(tmp_path):
    body, _ = traced_file(8, image=True, scale=0.01)  # coordinates in pixels of 0.01 cm
    path = tmp_path / "image.rsml"
    path.write_text(rsml_text(body, unit="pixel"))
    assert 'z="0"' in path.read_text()
    system = import_file(path, cm_per_pixel=0.01)
    ref = independent_measures(path, 0.01, image=True)
    assert system.metadata["import"]["dimensions"] == 2
    assert system["length_cm"].sum() == pytest.approx(ref["total_length"], rel=1e-12)
    traits = system.traits()
    assert traits["max_depth_cm"] == pytest.approx(ref["max_depth"], rel=1e-12)
    assert ref["max_depth"] > 10  # the primaries reach well below the surface layer
    # Depth profile: not all in the first layer; the layers add up to the traced length.
    profile = system.profile(layer_cm=5, area_cm2=100.0)
    assert profile["root_length_cm"].sum() == pytest.approx(ref["total_length"], rel=1e-9)
    assert profile["root_length_cm"].iloc[0] < 0.5 * ref["total_length"]
    assert np.all(system["y0"] == 0) and np.all(system["y1"] == 0)
    for rid, value in _lateral_angles(system).items():
        assert value == pytest.approx(ref["angles"][rid], abs=1e-9)


def test_files_without_z_or_with_zero_z_read_the_same(tmp_path):
    body, _ = traced_file(3, image=True)
    with_z = tmp_path / "with.rsml"
    without = tmp_path / "without.rsml"
    with_z.write_text(rsml_text(body))
    without.write_text(rsml_text(body.replace(' z="0"', "")))
    a, b = import_file(with_z), import_file(without)
    for column in ("x0", "y0", "z0", "x1", "y1", "z1", "parent_id", "order"):
        assert np.array_equal(a[column], b[column]), column


BAD_ROOTS = """<?xml version="1.0"?>
<rsml><metadata><unit>cm</unit></metadata><scene>
  <plant id="1">
    <root id="main"><geometry><polyline><point x="0" y="0" z="0"/><point x="0" y="0" z="-4"/></polyline></geometry>
      <root id="empty"/>
      <root id="dot"><geometry><polyline><point x="0" y="0" z="-2"/></polyline></geometry>
        <root id="orphan"><geometry><polyline><point x="0" y="0" z="-2"/><point x="1" y="0" z="-2"/></polyline></geometry></root>
      </root>
      <root id="good"><geometry><polyline><point x="0" y="0" z="-1"/><point x="0" y="3" z="-5"/></polyline></geometry></root>
    </root>
    <root ID="bare"><geometry><polyline/></geometry></root>
  </plant>
</scene></rsml>
"""


def test_bad_roots_are_skipped_with_one_counted_warning(tmp_path):
    path = tmp_path / "bad_roots.rsml"
    path.write_text(BAD_ROOTS)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        system = import_file(path)
    messages = [str(w.message) for w in caught]
    assert len(messages) == 1 and "\n" not in messages[0]
    # Hand count: 'empty' (no geometry), 'dot' (1 point), 'bare' (0 points), 'orphan' (inside 'dot').
    assert "skipped 4 roots" in messages[0]
    assert "1 without <geometry><polyline>" in messages[0] and "2 with fewer than 2 points" in messages[0]
    assert "1 nested in a skipped root" in messages[0] and "plant 1 > root main > root empty" in messages[0]
    # Kept: 'main' (4 cm) and 'good' (a 3-4-5 triangle scaled: 5 cm), orders 0 and 1.
    assert system["length_cm"].sum() == pytest.approx(9.0, rel=1e-12)
    assert system["order"].tolist() == [0, 1]
    assert system.metadata["import"]["skipped_roots"] == 4


def test_cli_bad_roots_warning_and_strict(tmp_path, capsys):
    path = tmp_path / "bad_roots.rsml"
    path.write_text(BAD_ROOTS)
    assert main(["import-rsml", str(path), "--out", str(tmp_path / "ok")]) == 0
    err = capsys.readouterr().err
    warning_lines = [line for line in err.splitlines() if line.startswith("warning:")]
    assert len(warning_lines) == 1 and "skipped 4 roots" in warning_lines[0]
    columns, _ = read_segments(tmp_path / "ok" / "segments.parquet")
    assert len(columns["segment_id"]) == 2
    assert main(["import-rsml", str(path), "--out", str(tmp_path / "strict"), "--strict"]) == 2
    err = capsys.readouterr().err
    assert err.startswith("error: ") and len(err.strip().splitlines()) == 1
    assert f"{path}: plant 1 > root main > root empty: no <geometry><polyline>" in err
    assert not (tmp_path / "strict").exists()


# Length of one unit in cm: SI prefixes (metre = 100 cm; milli 1e-3, micro 1e-6, nano 1e-9 of a
# metre) and the international inch of exactly 2.54 cm (common practice).
UNITS = {
    "m": 100.0, "metre": 100.0, "meter": 100.0, "cm": 1.0, "centimetre": 1.0, "mm": 0.1, "millimetre": 0.1,
    "millimeter": 0.1, "um": 1e-4, "\u00b5m": 1e-4, "\u03bcm": 1e-4, "micrometre": 1e-4, "micrometer": 1e-4,
    "micron": 1e-4, "nm": 1e-7, "nanometre": 1e-7, "nanometer": 1e-7, "inch": 2.54, "in": 2.54, "MM": 0.1,
}


@pytest.mark.parametrize("unit", sorted(UNITS))
def test_every_unit_the_standard_lists(tmp_path, unit):
    # A root from (0, 0, 0) to (0, 3, -4): 5 units long; resolution 2 -> 2.5 units (coordinate / resolution).
    path = tmp_path / "unit.rsml"
    body = ('<plant id="1"><root id="1"><geometry><polyline><point x="0" y="0" z="0"/><point x="0" y="3" z="-4"/>'
            '</polyline></geometry><functions><function name="diameter" domain="polyline"><sample value="1"/>'
            '<sample value="1"/></function></functions></root></plant>')
    path.write_text(rsml_text(body, unit=unit, resolution="2"), encoding="utf-8")
    system = import_file(path)
    assert system["length_cm"].sum() == pytest.approx(2.5 * UNITS[unit], rel=1e-12)
    assert system["radius_cm"][0] == pytest.approx(0.25 * UNITS[unit], rel=1e-12)  # diameter 1 / resolution 2 / 2


def test_short_and_long_functions_as_the_standard_says(tmp_path):
    # 4 points; the diameter has 2 samples (points 2 and 3 have none: default radius), the
    # birth_day has 6 (the last 2 are ignored).
    body = ('<plant id="1"><root id="1"><geometry><polyline><point x="0" y="0" z="0"/><point x="0" y="0" z="-1"/>'
            '<point x="0" y="0" z="-2"/><point x="0" y="0" z="-3"/></polyline></geometry><functions>'
            '<function name="diameter" domain="polyline"><sample value="0.2"/><sample value="0.1"/></function>'
            '<function name="birth_day" domain="polyline">' + "".join(f'<sample value="{v}"/>' for v in range(6))
            + "</function></functions></root></plant>")
    path = tmp_path / "functions.rsml"
    path.write_text(rsml_text(body))
    system = import_file(path, default_radius_cm=0.03)
    # Segment j ends at point j + 1 and takes that point's value.
    assert system["radius_cm"].tolist() == pytest.approx([0.05, 0.03, 0.03])
    assert system["birth_day"].tolist() == [1.0, 2.0, 3.0]
    assert system.metadata["import"]["segments_without_diameter"] == 2
    assert system.metadata["import"]["default_radius_cm"] == 0.03


def test_branch_segment_index_names_the_parent_segment(tmp_path):
    # A parent along z in 3 segments; the lateral's first point (0.1, 0, -1.5) is nearest to
    # segment 1, but its branch-segment-index says 2: the file's topology wins; index 3 (the
    # parent's last point) means its last segment; 4 is outside the parent's 4 points.
    def file(index):
        return rsml_text('<plant id="1"><root id="p"><geometry><polyline><point x="0" y="0" z="0"/>'
                         '<point x="0" y="0" z="-1"/><point x="0" y="0" z="-2"/><point x="0" y="0" z="-3"/>'
                         '</polyline></geometry><root id="l"><properties>'
                         f'<branch-segment-index value="{index}"/></properties><geometry><polyline>'
                         '<point x="0.1" y="0" z="-1.5"/><point x="1.1" y="0" z="-1.5"/></polyline></geometry>'
                         "</root></root></plant>")

    path = tmp_path / "hint.rsml"
    for index, parent in ((2, 2), (3, 2), (0, 0)):
        path.write_text(file(index))
        assert import_file(path)["parent_id"][3] == parent
    path.write_text(file(4))
    with pytest.raises(FormatError, match=r"root p > root l > properties > branch-segment-index: value 4 is not a "
                                          r"point of the parent's polyline \(allowed: 0 to 3\)$"):
        import_file(path)
    path.write_text(file(2**63))  # beyond int64
    with pytest.raises(FormatError, match="value 9223372036854775808 is not a point"):
        import_file(path)


def test_ids_name_plants_and_roots(tmp_path):
    # Whole-number ids become plant_id and root_id; other ids fall back to document order.
    body, _ = traced_file(2)
    path = tmp_path / "ids.rsml"
    path.write_text(rsml_text(body))
    system = import_file(path)
    ids = {int(r.get("id")) for r in etree.parse(str(path)).getroot().iter("root")}
    assert set(np.unique(system["root_id"]).tolist()) == ids
    assert set(np.unique(system["plant_id"]).tolist()) == {1, 2}


FUZZ_BASE = """<rsml><metadata><unit>{unit}</unit><resolution>{resolution}</resolution></metadata><scene><plant id="{plant}">
<root id="1"><geometry><polyline><point x="0" y="0" z="{z0}"/><point x="{x1}" y="0" z="-2"/><point x="0" y="1" z="-3"/>
</polyline></geometry><functions><function name="diameter" domain="polyline"><sample value="{diameter}"/></function>
</functions><root ID="{lateral}"><properties><branch-segment-index value="{hint}"/></properties><geometry><polyline>
<point x="0" y="0" z="-2"/><point x="1" y="{y1}" z="-2"/></polyline></geometry></root></root></plant></scene></rsml>"""


def test_fuzzed_values_give_a_system_or_one_line_errors(tmp_path):
    # Property-based (hypothesis): odd values in every slot of a small file either read or give
    # a one-line FormatError naming the file; never another exception.
    from hypothesis import HealthCheck, given, settings
    from hypothesis import strategies as st

    odd = st.one_of(
        st.sampled_from(["0", "-1", "1e309", "-1e309", "nan", "inf", "", " 3 ", "1e-320", "0x10", "½", "1_0",
                         "9" * 40, "-" + "9" * 30, "7.5", "1,5", "\u0661"]),
        st.integers(-(2**70), 2**70).map(str),
        st.floats(allow_nan=True, allow_infinity=True).map(repr),
        st.text(alphabet=st.characters(blacklist_categories=("Cs", "Cc")), max_size=8).map(
            lambda t: t.replace("&", "").replace("<", "").replace('"', "")),
    )
    slots = ("unit", "resolution", "plant", "z0", "x1", "diameter", "lateral", "hint", "y1")
    path = tmp_path / "fuzz.rsml"

    @settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
    @given(st.fixed_dictionaries({k: odd for k in slots}), st.sampled_from(slots))
    def check(values, keep_sane):
        sane = {"unit": "cm", "resolution": "1", "plant": "1", "z0": "0", "x1": "0", "diameter": "0.1",
                "lateral": "2", "hint": "1", "y1": "0"}
        # Mostly one odd slot at a time, sometimes all of them.
        fields = {**sane, keep_sane: values[keep_sane]} if values["plant"] != "0" else values
        path.write_text(FUZZ_BASE.format(**fields), encoding="utf-8")
        try:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                system = import_file(path, cm_per_pixel=0.01)
        except FormatError as exc:
            message = str(exc)
            assert "\n" not in message and message.startswith(f"{path}: "), message
            return
        assert np.all(np.isfinite(system["length_cm"]))

    check()
