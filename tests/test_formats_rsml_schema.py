"""RSML export checked with the standard's own XML Schema (``rsml.xsd`` of the RSML validator,
Lobet et al. 2015, Plant Physiology 167(3):617-627, doi:10.1104/pp.114.253625), validated with
lxml's XMLSchema, and read back by rootsim's importer.

The schema is looked up at ``../shared/standards/rsml/rsml.xsd`` beside the project root (or in
the folder ``ROOTSIM_SHARED_DIR`` names); the tests skip with a reason where it is absent.
"""

from __future__ import annotations

import os
from pathlib import Path

import numpy as np
import pytest
from lxml import etree

from rootsim.formats import export_file, import_file
from rootsim.rootsystem import RootSystem

from test_formats_helpers import random_root_system, root_from_points

PROJECT_ROOT = Path(__file__).resolve().parents[1]


def _schema_path() -> Path:
    shared = os.environ.get("ROOTSIM_SHARED_DIR")
    base = Path(shared) if shared else PROJECT_ROOT.parent / "shared"
    return base / "standards" / "rsml" / "rsml.xsd"


@pytest.fixture(scope="module")
def schema():
    path = _schema_path()
    if not path.is_file():
        pytest.skip(f"RSML schema not found at {path} (the standards folder ../shared sits beside CI's clone only)")
    return etree.XMLSchema(etree.parse(str(path)))


def _errors(schema, path):
    ok = schema.validate(etree.parse(str(path)))
    return [] if ok else [f"{e.line}: {e.message}" for e in schema.error_log]


def test_export_validates_and_reads_back(schema, tmp_path):
    system = random_root_system(rng=21, joint_fraction=0.5)
    path = export_file(system, tmp_path / "roots.rsml")
    assert _errors(schema, path) == []
    back = import_file(path)
    # What export writes comes back: stand and run facts (from the scene's properties), plant and
    # root ids, classes, radii (diameter function), birth days (birth_day function), total length.
    assert back.metadata["stand"]["plant_positions_cm"] == system.metadata["stand"]["plant_positions_cm"]
    assert back.metadata["run"] == system.metadata["run"]
    assert set(np.unique(back["plant_id"]).tolist()) == set(np.unique(system["plant_id"]).tolist())
    assert set(np.unique(back["root_id"]).tolist()) == set(np.unique(system["root_id"]).tolist())
    for rid in np.unique(system["root_id"]).tolist():
        mine, theirs = system["root_id"] == rid, back["root_id"] == rid
        for column in ("radius_cm", "birth_day", "length_cm", "x1", "z1", "order", "root_class"):
            assert np.array_equal(np.sort(back[column][theirs]), np.sort(system[column][mine])), column
    assert back["length_cm"].sum() == pytest.approx(system["length_cm"].sum(), rel=1e-12)


def test_grown_plant_validates(schema, tmp_path):
    import rootsim
    from conftest import CEREAL

    spec = rootsim.load_spec(CEREAL)
    spec = spec.model_copy(update={"stand": spec.stand.model_copy(update={"rows": 1, "plants_per_row": 1})})
    plant = rootsim.grow(spec, seed=4, days=14, progress=False)
    path = export_file(plant, tmp_path / "cereal.rsml")
    assert _errors(schema, path) == []
    back = import_file(path)
    assert len(back) == len(plant)
    assert back["length_cm"].sum() == pytest.approx(plant["length_cm"].sum(), rel=1e-12)
    assert np.array_equal(np.bincount(back["order"]), np.bincount(plant["order"]))
    assert back.metadata["stand"] == plant.metadata["stand"]


def test_tiny_and_huge_numbers_and_resolution(schema, tmp_path):
    # xs:decimal has no exponent: 1e-7 cm and 9.9e6 cm (near the segment table's limit of 1e7 cm) must be
    # written as plain decimals and read back to the same doubles (coordinate / resolution = value in cm).
    points = [[0.0, 0.0, 0.0], [1e-7, -3e-6, -1e-5], [2.5e-5, 9.9e6, -1.0]]
    system = root_from_points(points, radius_cm=4e-6)
    for resolution in (1.0, 4.0):
        path = export_file(system, tmp_path / f"r{resolution:g}.rsml", resolution=resolution, user="an invented tester")
        assert _errors(schema, path) == []
        text = path.read_text()
        assert "e-0" not in text and "e+" not in text
        back = import_file(path)
        for column in ("x0", "y0", "z0", "x1", "y1", "z1"):
            assert back[column] == pytest.approx(system[column], rel=1e-15, abs=0), column
        assert back["radius_cm"] == pytest.approx(system["radius_cm"], rel=1e-15)
    assert etree.parse(str(path)).getroot().findtext("metadata/user") == "an invented tester"


def test_schema_refuses_the_old_layout(schema, tmp_path):
    # Control: the validator does catch the three faults the export used to have (sample values as
    # text, a project element inside <metadata>, no <user>).
    system = random_root_system(rng=2)
    path = export_file(system, tmp_path / "roots.rsml")
    doc = etree.parse(str(path))
    meta = doc.getroot().find("metadata")
    meta.remove(meta.find("user"))
    etree.SubElement(meta, "rootsim-table-metadata").text = "{}"
    sample = doc.getroot().find(".//sample")
    sample.text, sample.attrib["value"] = sample.get("value"), sample.get("value")
    del sample.attrib["value"]
    doc.write(str(tmp_path / "old.rsml"))
    errors = _errors(schema, tmp_path / "old.rsml")
    assert any("user" in e for e in errors)
    assert any("rootsim-table-metadata" in e for e in errors)
    assert any("value" in e for e in errors)


def test_empty_system_cannot_satisfy_the_schema_but_reads_back(schema, tmp_path):
    # The schema needs one plant with one root; an empty system gives an empty scene, which
    # rootsim reads back as empty.
    from rootsim.rootsystem import empty_columns

    path = export_file(RootSystem(empty_columns(), {}), tmp_path / "empty.rsml")
    assert any("plant" in e for e in _errors(schema, path))
    assert len(import_file(path)) == 0
