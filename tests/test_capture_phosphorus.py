"""Phosphorus exploration: depletion volumes against analytic capsule and lens volumes."""

from __future__ import annotations

import numpy as np
import pytest

from rootsim.capture.phosphorus import explored_volume


def _lines(p0, p1, plant, root):
    p0, p1 = np.asarray(p0, float), np.asarray(p1, float)
    return {"x0": p0[:, 0], "y0": p0[:, 1], "z0": p0[:, 2], "x1": p1[:, 0], "y1": p1[:, 1], "z1": p1[:, 2],
            "plant_id": np.asarray(plant), "root_id": np.asarray(root)}


def test_single_straight_root_explores_pi_r2_l_plus_its_end_caps():
    # Analytic: a capsule of radius r around a segment of length L holds pi r^2 L + 4/3 pi r^3.
    r, length = 0.5, 10.0
    system = _lines([[0.1, 0.2, -1.0]], [[0.1 + length * 0.6, 0.2, -1.0 - length * 0.8]], [0], [0])
    result = explored_volume(system, radius_cm=r, voxel_cm=0.02)
    expected = np.pi * r * r * length + 4.0 / 3.0 * np.pi * r ** 3
    assert result["explored_cm3"] == pytest.approx(expected, rel=0.01)
    assert result["overlap_same_plant_cm3"] == 0.0 and result["overlap_between_plants_cm3"] == 0.0


def test_parallel_roots_closer_than_two_radii_overlap_by_the_lens():
    # Analytic: circle-circle lens area A = 2 r^2 acos(d / 2r) - (d / 2) sqrt(4 r^2 - d^2) along the length, plus
    # the ball-ball lens pi (4r + d)(2r - d)^2 / 12 from the two pairs of end caps.
    r, d, length = 0.5, 0.6, 4.0
    p0 = [[0.0, 0.0, -1.0], [d, 0.0, -1.0]]
    p1 = [[0.0, 0.0, -1.0 - length], [d, 0.0, -1.0 - length]]
    lens = 2 * r * r * np.arccos(d / (2 * r)) - d / 2 * np.sqrt(4 * r * r - d * d)
    expected = lens * length + np.pi * (4 * r + d) * (2 * r - d) ** 2 / 12
    same = explored_volume(_lines(p0, p1, [0, 0], [0, 1]), radius_cm=r, voxel_cm=0.02)
    assert same["overlap_same_plant_cm3"] == pytest.approx(expected, rel=0.02)
    assert same["overlap_between_plants_cm3"] == 0.0
    neighbours = explored_volume(_lines(p0, p1, [0, 1], [0, 0]), radius_cm=r, voxel_cm=0.02)
    assert neighbours["overlap_between_plants_cm3"] == pytest.approx(expected, rel=0.02)
    single = np.pi * r * r * length + 4.0 / 3.0 * np.pi * r ** 3
    assert same["explored_cm3"] == pytest.approx(2 * single - expected, rel=0.01)
    # by depth: the layers add up to the total
    assert same["profile"]["explored_cm3"].sum() == pytest.approx(same["explored_cm3"])


def test_explored_volume_is_unbiased_over_grid_offsets():
    # Analytic capsule volume pi r^2 L + 4/3 pi r^3; counting voxel centres is unbiased over sub-voxel shifts of
    # the root against the grid, so the mean over shifts lies much closer than any single alignment.
    r, length, voxel = 0.5, 10.0, 0.05
    expected = np.pi * r * r * length + 4.0 / 3.0 * np.pi * r ** 3
    rng = np.random.default_rng(3)
    volumes = []
    for shift in rng.uniform(0.0, voxel, size=(12, 3)):
        a = np.array([0.1, 0.2, -1.0]) + shift
        b = a + length * np.array([0.6, 0.0, -0.8])
        volumes.append(explored_volume(_lines([a], [b], [0], [0]), radius_cm=r, voxel_cm=voxel)["explored_cm3"])
    assert np.mean(volumes) == pytest.approx(expected, rel=0.003)


@pytest.mark.parametrize("tile_edge", [128, 4])
def test_counts_equal_a_brute_force_count_of_voxel_centres(monkeypatch, tile_edge):
    # Independent count: every voxel centre of the grid (edge v, aligned with x = y = 0 and the surface) tested
    # against every segment with numpy; three roots of two plants crossing each other, one reaching the surface.
    # With 4-voxel tiles the roots cross many tile boundaries (the counts must not change).
    from rootsim.capture import depletion_kernel

    monkeypatch.setattr(depletion_kernel, "TILE_EDGE_VOXELS", tile_edge)
    r, v = 0.3, 0.1
    p0 = np.array([[0.0, 0.0, 0.0], [-1.0, 0.1, -1.0], [0.2, -1.0, -0.8]])
    p1 = np.array([[0.3, 0.1, -3.0], [1.5, 0.0, -1.4], [0.1, 1.2, -1.2]])
    system = _lines(p0, p1, [0, 0, 1], [0, 1, 0])
    result = explored_volume(system, radius_cm=r, voxel_cm=v)
    low = np.floor((np.minimum(p0, p1).min(axis=0) - r) / v)
    high = np.floor((np.maximum(p0, p1).max(axis=0) + r) / v)
    axes = [(np.arange(lo, hi + 1) + 0.5) * v for lo, hi in zip(low, high)]
    centres = np.stack(np.meshgrid(*axes, indexing="ij"), axis=-1).reshape(-1, 3)
    centres = centres[centres[:, 2] <= 0.0]                                  # soil only
    d = p1 - p0
    t = np.clip(np.einsum("nsk,sk->ns", centres[:, None, :] - p0[None], d) / np.einsum("sk,sk->s", d, d), 0, 1)
    gap = centres[:, None, :] - p0[None] - t[..., None] * d[None]
    near = np.einsum("nsk,nsk->ns", gap, gap) <= r * r                       # (voxels, segments)
    plant0 = near[:, 0] | near[:, 1]
    cube = v ** 3
    assert result["explored_cm3"] == pytest.approx(near.any(axis=1).sum() * cube, rel=1e-12)
    assert result["overlap_same_plant_cm3"] == pytest.approx((near[:, 0] & near[:, 1]).sum() * cube, rel=1e-12)
    assert result["overlap_between_plants_cm3"] == pytest.approx((plant0 & near[:, 2]).sum() * cube, rel=1e-12)
    assert result["overlap_any_roots_cm3"] == pytest.approx((near.sum(axis=1) >= 2).sum() * cube, rel=1e-12)
    assert result["overlap_same_plant_cm3"] > 0 and result["overlap_between_plants_cm3"] > 0


@pytest.mark.parametrize("tile_edge", [64, 4])
def test_chained_roots_with_parent_ids_count_like_brute_force(monkeypatch, tile_edge):
    # Roots as chains of short bent segments linked by parent_id (as grown): the kernel skips what a segment's
    # predecessor already covers; the counts must equal an independent numpy count of voxel centres within r.
    from rootsim.capture import depletion_kernel

    monkeypatch.setattr(depletion_kernel, "TILE_EDGE_VOXELS", tile_edge)
    r, v = 0.25, 0.1
    s = np.linspace(0.0, 6.0, 41)
    chains = [np.column_stack([0.8 * np.sin(s), 0.5 * np.cos(1.3 * s), -0.5 - 0.6 * s]),      # plant 0, root 0
              # plant 0, root 1 and plant 1, root 0: bent chains through points of the first root
              np.column_stack([0.8 * np.sin(2.0) + 0.5 * (s - 3), 0.5 * np.cos(2.6) + 0.1 * np.sin(s - 3),
                               -1.7 - 0.05 * (s - 3) ** 2]),
              np.column_stack([0.8 * np.sin(4.0) + 0.15 * (s - 3), 0.5 * np.cos(5.2) - 0.15 * (s - 3),
                               -2.9 + 0.1 * np.cos(s)])]
    p0 = np.concatenate([c[:-1] for c in chains])
    p1 = np.concatenate([c[1:] for c in chains])
    n = len(s) - 1
    plant = np.repeat([0, 0, 1], n)
    root = np.repeat([0, 1, 0], n)
    parent = np.concatenate([np.arange(b * n - 1, b * n + n - 1) for b in range(3)])
    parent[::n] = -1
    system = {**_lines(p0, p1, plant, root), "parent_id": parent}
    result = explored_volume(system, radius_cm=r, voxel_cm=v)
    low = np.floor((np.minimum(p0, p1).min(axis=0) - r) / v)
    high = np.floor((np.maximum(p0, p1).max(axis=0) + r) / v)
    axes = [(np.arange(lo, hi + 1) + 0.5) * v for lo, hi in zip(low, high)]
    centres = np.stack(np.meshgrid(*axes, indexing="ij"), axis=-1).reshape(-1, 3)
    centres = centres[centres[:, 2] <= 0.0]
    d = p1 - p0
    near = np.zeros((len(centres), 3), dtype=bool)                         # (voxel, chain)
    for c in range(3):
        rows = slice(c * n, (c + 1) * n)
        t = np.clip(np.einsum("nsk,sk->ns", centres[:, None, :] - p0[None, rows], d[rows])
                    / np.einsum("sk,sk->s", d[rows], d[rows]), 0, 1)
        gap = centres[:, None, :] - p0[None, rows] - t[..., None] * d[None, rows]
        near[:, c] = (np.einsum("nsk,nsk->ns", gap, gap) <= r * r).any(axis=1)
    cube = v ** 3
    assert result["explored_cm3"] == pytest.approx(near.any(axis=1).sum() * cube, rel=1e-12)
    assert result["overlap_same_plant_cm3"] == pytest.approx((near[:, 0] & near[:, 1]).sum() * cube, rel=1e-12)
    assert result["overlap_between_plants_cm3"] == pytest.approx(
        ((near[:, 0] | near[:, 1]) & near[:, 2]).sum() * cube, rel=1e-12)
    assert result["overlap_same_plant_cm3"] > 0 and result["overlap_between_plants_cm3"] > 0
