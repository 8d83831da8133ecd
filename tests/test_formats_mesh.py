"""Tube meshes, checked with trimesh (an independent library) against analytic prism volumes."""

from __future__ import annotations

import numpy as np
import pytest
import trimesh

from rootsim.errors import FormatError
from rootsim.formats import export_file
from rootsim.formats.mesh import tube_mesh, tube_mesh_arrays
from rootsim.rootsystem import RootSystem, empty_columns

from test_formats_helpers import random_root_system, root_from_points, straight_root


def inscribed_prism_volume(radius, length, sides):
    # Analytic: a regular n-gon inscribed in a circle of radius r has area (n/2) r^2 sin(2 pi / n).
    return 0.5 * sides * radius**2 * np.sin(2 * np.pi / sides) * length


@pytest.mark.parametrize("sides", [3, 8, 17, 128])
def test_straight_root_volume_is_inscribed_prism(sides):
    r, L = 0.4, 12.0
    mesh = tube_mesh(straight_root(length_cm=L, radius_cm=r, n_segments=6, direction=(1.0, -2.0, -3.0)), sides=sides)
    assert mesh.is_watertight and mesh.is_winding_consistent  # trimesh's own checks
    assert mesh.volume == pytest.approx(inscribed_prism_volume(r, L, sides), rel=1e-10)
    # Faceting error against the cylinder pi r^2 L (analytic): 1 - n sin(2 pi / n) / (2 pi).
    faceting = 1 - mesh.volume / (np.pi * r**2 * L)
    assert faceting == pytest.approx(1 - sides * np.sin(2 * np.pi / sides) / (2 * np.pi), abs=1e-10)
    assert faceting > 0
    if sides == 128:
        assert faceting < 5e-4


@pytest.mark.parametrize("turn", [0.3, 3.0])
def test_bent_system_pieces_closed_and_volume(turn):
    # turn=3.0 gives many sharp bends (> 60 degrees), so tubes are split there.
    # Laterals start on the parent's centre line (trim_junctions=False), so the prisms cover every segment.
    system = random_root_system(rng=7, turn=turn, radius_cm=(0.05, 0.3))
    arrays = tube_mesh_arrays(system, sides=8, trim_junctions=False)
    mesh = trimesh.Trimesh(arrays.vertices, arrays.faces, process=False)
    n_roots = np.unique(system["root_id"]).size
    assert arrays.n_pieces >= n_roots
    if turn > 1:
        assert arrays.n_pieces > n_roots  # splits happened
    assert mesh.is_watertight and mesh.is_winding_consistent
    pieces = mesh.split(only_watertight=False)
    assert len(pieces) == arrays.n_pieces
    assert all(p.is_watertight and p.volume > 0 for p in pieces)
    # No degenerate faces: trimesh's own test (area and edge-length tolerance).
    assert trimesh.triangles.nondegenerate(mesh.triangles).all()
    # Mitred prisms keep volume = polygon area x centre-line length (analytic); split pieces too.
    r, L = system["radius_cm"], system["length_cm"]
    assert mesh.volume == pytest.approx(inscribed_prism_volume(r, L, 8).sum(), rel=1e-6)
    # Against the smooth tubes sum(pi r^2 L): within the octagon's faceting error plus a few percent.
    smooth = (np.pi * r**2 * L).sum()
    assert abs(mesh.volume / smooth - 8 * np.sin(2 * np.pi / 8) / (2 * np.pi)) < 0.03
    # With 64 sides the faceting error is 0.16 % (analytic), so the mesh is within 1 % of sum(pi r^2 L).
    fine = tube_mesh(system, sides=64, trim_junctions=False)
    assert fine.is_watertight and abs(fine.volume / smooth - 1) < 0.01


def test_hairpin_and_right_angle_turns():
    # A root that turns 90 degrees and then folds back almost completely (179 degrees).
    pts = np.array([[0, 0, 0], [0, 0, -2], [2, 0, -2], [2, 0, -4], [2.0, 0.035, -0.5]], dtype=float)
    system = root_from_points(pts, radius_cm=0.1)
    mesh = tube_mesh(system, sides=8)
    assert mesh.is_watertight and trimesh.triangles.nondegenerate(mesh.triangles).all()
    assert mesh.volume == pytest.approx(inscribed_prism_volume(0.1, system["length_cm"], 8).sum(), rel=1e-9)


def test_gentle_helix_has_no_twist():
    # Along a gentle helix every quad should stay close to a rectangle: the rotation-minimizing
    # frame does not twist rings (Bishop 1975). Checked with trimesh's face normals: adjacent
    # side faces on the same ring are within the polygon angle 2 pi / n plus the bend angle.
    t = np.linspace(0, 4 * np.pi, 400)
    pts = np.column_stack([3 * np.cos(t), 3 * np.sin(t), -0.5 * t])
    n = len(pts) - 1
    system = root_from_points(pts, radius_cm=0.2)
    arrays = tube_mesh_arrays(system, sides=8)
    assert arrays.n_pieces == 1
    mesh = trimesh.Trimesh(arrays.vertices, arrays.faces, process=False)
    # The two triangles of each side quad: nearly coplanar when the ring is not twisted.
    side = mesh.face_normals[: n * 16].reshape(n, 2, 8, 3)
    cos_pair = np.einsum("ijk,ijk->ij", side[:, 0], side[:, 1])
    assert cos_pair.min() > np.cos(np.radians(5))
    assert mesh.volume == pytest.approx(inscribed_prism_volume(0.2, system["length_cm"], 8).sum(), rel=1e-9)


def test_merge_short_segments_reduces_size():
    system = random_root_system(rng=11)
    full = tube_mesh_arrays(system, sides=6)
    merged = tube_mesh_arrays(system, sides=6, merge_short_cm=2.0)
    assert merged.n_edges < full.n_edges / 2
    mesh = trimesh.Trimesh(merged.vertices, merged.faces, process=False)
    assert mesh.is_watertight
    # Chords are shorter than arcs: volume a bit below the unmerged prism volume, not far off.
    ratio = mesh.volume / trimesh.Trimesh(full.vertices, full.faces, process=False).volume
    assert 0.85 < ratio <= 1.0 + 1e-9


@pytest.mark.parametrize("suffix", [".stl", ".ply", ".obj", ".glb"])
def test_files_load_back_in_trimesh(tmp_path, suffix):
    system = random_root_system(rng=4)
    path = export_file(system, tmp_path / f"roots{suffix}", sides=8, trim_junctions=False)  # full segments
    loaded = trimesh.load(path, force="mesh")  # trimesh's own readers (merges duplicate vertices on load)
    assert loaded.is_watertight
    expected = inscribed_prism_volume(system["radius_cm"], system["length_cm"], 8).sum()
    if suffix == ".glb":  # glTF 2.0 is in metres (specification section 3.4): 1 cm^3 = 1e-6 m^3
        expected *= 1e-6
    assert loaded.volume == pytest.approx(expected, rel=1e-4)  # float32 storage in STL / PLY / GLB


@pytest.mark.parametrize("suffix", [".stl", ".ply", ".obj", ".glb"])
def test_empty_system_gives_valid_empty_file(tmp_path, suffix):
    path = export_file(RootSystem(empty_columns(), {}), tmp_path / f"empty{suffix}")
    loaded = trimesh.load(path)  # trimesh's readers accept the file
    geometry = list(loaded.geometry.values()) if isinstance(loaded, trimesh.Scene) else [loaded]
    assert sum(len(g.faces) for g in geometry) == 0


@pytest.mark.parametrize("options", [{"sides": 2}, {"sides": 8.5}, {"merge_short_cm": -1}, {"sharp_turn_deg": 180}])
def test_bad_options(tmp_path, options):
    with pytest.raises(FormatError):
        export_file(random_root_system(rng=1), tmp_path / "x.stl", **options)
    assert not list(tmp_path.iterdir())


@pytest.mark.parametrize("suffix", [".ply"])
def test_vertex_colours_by_order(tmp_path, suffix):
    # trimesh reads the colours back; each tube carries the colour of its root order.
    from rootsim.formats.mesh import ORDER_COLOURS_RGB

    system = random_root_system(rng=4)
    loaded = trimesh.load(export_file(system, tmp_path / f"c{suffix}", sides=6), force="mesh", process=False)
    colours = np.asarray(loaded.visual.vertex_colors)[:, :3]
    found = {tuple(c) for c in np.unique(colours, axis=0).tolist()}
    assert found == {tuple(ORDER_COLOURS_RGB[k].tolist()) for k in np.unique(system["order"])}
    # Share of order-0 coloured vertices equals the share of ring vertices on order-0 tubes.
    arrays = tube_mesh_arrays(system, sides=6)
    is_zero = np.all(colours == ORDER_COLOURS_RGB[0], axis=1)
    assert is_zero.sum() == (arrays.vertex_order == 0).sum()


def _t_junction(angle_deg, *, parent_radius=0.5, lateral_radius=0.1, lateral_length=4.0):
    """A vertical parent (2 segments, 10 cm) and one straight lateral leaving its axis at z = -2.5
    at ``angle_deg`` from the parent's downward direction."""
    theta = np.radians(angle_deg)
    d = np.array([np.sin(theta), 0.0, -np.cos(theta)])
    start = np.array([0.0, 0.0, -2.5])
    end = start + lateral_length * d
    cols = {
        "segment_id": np.arange(3), "parent_id": np.array([-1, 0, 0]), "plant_id": np.zeros(3, int),
        "root_id": np.array([0, 0, 1]), "order": np.array([0, 0, 1]),
        "root_class": np.array(["primary", "primary", "lateral"]),
        "x0": np.array([0.0, 0.0, start[0]]), "y0": np.zeros(3), "z0": np.array([0.0, -5.0, start[2]]),
        "x1": np.array([0.0, 0.0, end[0]]), "y1": np.zeros(3), "z1": np.array([-5.0, -10.0, end[2]]),
        "radius_cm": np.array([parent_radius, parent_radius, lateral_radius]),
        "length_cm": np.array([5.0, 5.0, lateral_length]), "birth_day": np.zeros(3),
    }
    return RootSystem(cols, {})


@pytest.mark.parametrize("angle", [90.0, 60.0, 30.0])
def test_lateral_tube_starts_at_the_parent_surface(angle):
    # Analytic: a straight lateral leaving the parent's axis at angle theta reaches the parent's
    # surface (distance R from the axis) after s = R / sin(theta); its tube keeps L - s of its length.
    big_r, small_r, length, sides = 0.5, 0.1, 4.0, 8
    system = _t_junction(angle, parent_radius=big_r, lateral_radius=small_r, lateral_length=length)
    arrays = tube_mesh_arrays(system, sides=sides)
    mesh = trimesh.Trimesh(arrays.vertices, arrays.faces, process=False)
    assert mesh.is_watertight and mesh.is_winding_consistent
    s = big_r / np.sin(np.radians(angle))
    expected = inscribed_prism_volume(big_r, 10.0, sides) + inscribed_prism_volume(small_r, length - s, sides)
    assert mesh.volume == pytest.approx(expected, rel=1e-9)
    # The lateral's vertices stay outside the parent's cylinder except the start ring's inner half,
    # which reaches in by at most r |cos(theta)| (the tilt of a ring perpendicular to the lateral).
    lateral = np.unique(arrays.faces[arrays.face_order == 1])
    radial = np.hypot(arrays.vertices[lateral, 0], arrays.vertices[lateral, 1])
    assert radial.min() >= big_r - small_r * abs(np.cos(np.radians(angle))) - 1e-9
    # Without trimming the lateral's tube starts on the parent's axis.
    untrimmed = tube_mesh_arrays(system, sides=sides, trim_junctions=False)
    lateral = np.unique(untrimmed.faces[untrimmed.face_order == 1])
    assert np.hypot(untrimmed.vertices[lateral, 0], untrimmed.vertices[lateral, 1]).min() < small_r


@pytest.mark.parametrize("turn", [0.3, 3.0])
def test_trimmed_junctions_keep_closed_pieces(turn):
    # Every piece stays a closed surface with positive volume after the laterals' starts move out;
    # the total volume drops by the parts of laterals that were inside their parents.
    system = random_root_system(rng=7, turn=turn, radius_cm=(0.05, 0.3))
    arrays = tube_mesh_arrays(system, sides=8)
    mesh = trimesh.Trimesh(arrays.vertices, arrays.faces, process=False)
    assert mesh.is_watertight and mesh.is_winding_consistent
    assert all(p.is_watertight and p.volume > 0 for p in mesh.split(only_watertight=False))
    assert trimesh.triangles.nondegenerate(mesh.triangles).all()
    full = inscribed_prism_volume(system["radius_cm"], system["length_cm"], 8).sum()
    assert mesh.volume < full
