"""Binary glTF export: the Khronos glTF validator (npm ``gltf-validator``, run with node) and the
specification's units and axes (glTF 2.0, section 3.4: metres, +Y up, right-handed), read back
with an independent GLB parser written here from the specification's layout (section 4.4)."""

from __future__ import annotations

import json
import shutil
import struct
import subprocess
from pathlib import Path

import numpy as np
import pytest
import trimesh

from rootsim.formats import export_file
from rootsim.formats.mesh import ORDER_COLOURS_RGB
from rootsim.rootsystem import RootSystem, empty_columns

from test_formats_helpers import random_root_system, straight_root

PROJECT_ROOT = Path(__file__).resolve().parents[1]
VALIDATOR_SCRIPT = """
const fs = require('fs');
const validator = require(process.argv[1]);
validator.validateBytes(new Uint8Array(fs.readFileSync(process.argv[2])), {maxIssues: 100})
  .then(report => console.log(JSON.stringify(report.issues)))
  .catch(error => { console.error(String(error)); process.exit(1); });
"""


def _validator_module() -> str | None:
    """Path of an installed gltf-validator package (.ci/node from CI, else node's own lookup)."""
    if shutil.which("node") is None:
        return None
    local = PROJECT_ROOT / ".ci" / "node" / "node_modules" / "gltf-validator"
    if (local / "package.json").is_file():
        return str(local)
    found = subprocess.run(["node", "-e", "console.log(require.resolve('gltf-validator'))"],
                           capture_output=True, text=True, timeout=60)
    return str(Path(found.stdout.strip()).parent) if found.returncode == 0 and found.stdout.strip() else None


@pytest.fixture(scope="module")
def validate():
    module = _validator_module()
    if module is None:
        pytest.skip("Khronos glTF validator not installed (node and `npm install --prefix .ci/node gltf-validator`; "
                    ".ci/run installs it when npm is available)")

    def run(path):
        done = subprocess.run(["node", "-e", VALIDATOR_SCRIPT, module, str(path)], capture_output=True, text=True,
                              timeout=300)
        assert done.returncode == 0, done.stderr
        return json.loads(done.stdout)

    return run


def read_glb(path):
    """(document, float32 positions (v, 3), [uint32 indices of each primitive]) from a .glb file."""
    data = Path(path).read_bytes()
    magic, version, total = struct.unpack_from("<4sII", data, 0)
    assert magic == b"glTF" and version == 2 and total == len(data)
    json_length, json_type = struct.unpack_from("<I4s", data, 12)
    assert json_type == b"JSON"
    document = json.loads(data[20:20 + json_length])
    offset = 20 + json_length
    if offset == len(data):
        return document, np.zeros((0, 3), np.float32), []
    bin_length, bin_type = struct.unpack_from("<I4s", data, offset)
    assert bin_type == b"BIN\x00"
    binary = data[offset + 8:offset + 8 + bin_length]

    def accessor(index):
        acc = document["accessors"][index]
        view = document["bufferViews"][acc["bufferView"]]
        dtype = {5126: np.float32, 5125: np.uint32, 5123: np.uint16}[acc["componentType"]]
        width = {"SCALAR": 1, "VEC3": 3, "VEC4": 4}[acc["type"]]
        start = view.get("byteOffset", 0) + acc.get("byteOffset", 0)
        return np.frombuffer(binary, dtype=dtype, count=acc["count"] * width, offset=start).reshape(-1, width)

    primitives = document["meshes"][0]["primitives"]
    positions = accessor(primitives[0]["attributes"]["POSITION"])
    return document, positions, [accessor(p["indices"]).ravel() for p in primitives]


def test_validator_reports_no_issues(tmp_path, validate):
    system = random_root_system(rng=4)
    for name, source, options in (("roots", system, {"sides": 8}), ("merged", system, {"sides": 5, "merge_short_cm": 1.0}),
                                  ("empty", RootSystem(empty_columns(), {}), {})):
        report = validate(export_file(source, tmp_path / f"{name}.glb", **options))
        assert report["numErrors"] == 0, report["messages"]
        assert report["numWarnings"] == 0, report["messages"]


def test_vertical_root_is_in_metres_with_y_up(tmp_path):
    # Analytic: a root from the surface straight down 10 cm with radius 0.5 cm spans Y from
    # -0.10 m to 0 m, and X and Z within +-0.005 m (the ring radius).
    path = export_file(straight_root(length_cm=10.0, radius_cm=0.5, n_segments=4), tmp_path / "root.glb", sides=8)
    _, positions, _ = read_glb(path)
    assert positions[:, 1].min() == pytest.approx(-0.10, abs=1e-7)
    assert positions[:, 1].max() == pytest.approx(0.0, abs=1e-7)
    assert np.abs(positions[:, [0, 2]]).max() == pytest.approx(0.005, abs=1e-7)


def test_glb_is_the_cm_mesh_rotated_and_scaled(tmp_path):
    # Same tubes as the STL (cm, z up, read by trimesh): glTF X = x / 100, Y = z / 100, Z = -y / 100.
    system = random_root_system(rng=6)
    stl = trimesh.load(export_file(system, tmp_path / "r.stl", sides=6), force="mesh")
    document, positions, primitives = read_glb(export_file(system, tmp_path / "r.glb", sides=6))
    expected = np.column_stack([stl.vertices[:, 0], stl.vertices[:, 2], -stl.vertices[:, 1]]) / 100.0
    assert np.allclose(positions.min(axis=0), expected.min(axis=0), rtol=0, atol=1e-6)
    assert np.allclose(positions.max(axis=0), expected.max(axis=0), rtol=0, atol=1e-6)
    # Extents 100 times smaller than the cm input; accessor bounds as the file states them.
    assert np.allclose(np.ptp(positions, axis=0) * 100, np.ptp(stl.vertices[:, [0, 2, 1]], axis=0), atol=1e-4)
    assert document["accessors"][0]["min"] == positions.min(axis=0).tolist()
    # The deepest root point has the most negative Y: the lowest segment end in the table.
    deepest_cm = min(system["z0"].min(), system["z1"].min())
    assert positions[:, 1].min() * 100 <= deepest_cm + 1e-4
    assert positions[:, 1].min() * 100 >= deepest_cm - system["radius_cm"].max() - 1e-4
    # Rotation, not reflection: the volume keeps its sign (outward normals), scaled by 1e-6.
    faces = np.concatenate(primitives).reshape(-1, 3)
    glb_mesh = trimesh.Trimesh(positions.astype(np.float64), faces, process=True)
    assert glb_mesh.volume == pytest.approx(stl.volume * 1e-6, rel=1e-4)
    assert glb_mesh.volume > 0


def _srgb_to_linear(byte):
    # sRGB transfer function, IEC 61966-2-1:1999 (glTF baseColorFactor is linear; specification 3.9.2).
    c = byte / 255.0
    return c / 12.92 if c <= 0.04045 else ((c + 0.055) / 1.055) ** 2.4


def test_one_coloured_primitive_per_root_order(tmp_path):
    system = random_root_system(rng=4)
    document, positions, primitives = read_glb(export_file(system, tmp_path / "c.glb", sides=6))
    orders = np.unique(system["order"]).tolist()
    assert len(primitives) == len(orders)
    starts = np.column_stack([system["x0"], system["y0"], system["z0"]])
    ends = np.column_stack([system["x1"], system["y1"], system["z1"]])
    for primitive, order, indices in zip(document["meshes"][0]["primitives"], orders, primitives):
        material = document["materials"][primitive["material"]]
        expected = [_srgb_to_linear(int(v)) for v in ORDER_COLOURS_RGB[order]] + [1.0]
        assert material["pbrMetallicRoughness"]["baseColorFactor"] == pytest.approx(expected, abs=1e-6)
        # Every vertex of the primitive lies on a tube around a segment of that order (in cm).
        points = positions[np.unique(indices)].astype(np.float64)
        points_cm = np.column_stack([points[:, 0], -points[:, 2], points[:, 1]]) * 100
        mine = system["order"] == order
        a, b = starts[mine], ends[mine]
        ab = b - a
        t = np.clip(np.einsum("pij,ij->pi", points_cm[:, None, :] - a[None], ab) / np.einsum("ij,ij->i", ab, ab), 0, 1)
        distance = np.linalg.norm(a[None] + t[..., None] * ab[None] - points_cm[:, None, :], axis=2).min(axis=1)
        assert distance.max() <= 2.0 * system["radius_cm"][mine].max()
