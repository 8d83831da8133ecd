"""Voxel RLD grid: exact per-voxel clipping checked against analytic geometry."""

import numpy as np
import pytest

from rootsim.analysis import rld_voxel_grid
from rootsim.errors import RootsimError


def _table(p0, p1):
    p0 = np.atleast_2d(np.asarray(p0, dtype=float))
    p1 = np.atleast_2d(np.asarray(p1, dtype=float))
    cols = {name: p0[:, i] for i, name in enumerate(("x0", "y0", "z0"))}
    cols.update({name: p1[:, i] for i, name in enumerate(("x1", "y1", "z1"))})
    cols["length_cm"] = np.linalg.norm(p1 - p0, axis=1)
    return cols


def test_cube_diagonal_gives_analytic_lengths():
    # Analytic (Pythagoras): the main diagonal of an n x n x n grid of unit cubes passes through the
    # n cubes (i, i, i) only, with length sqrt(3) in each.
    n = 4
    rld, origin, spacing = rld_voxel_grid(_table([0, 0, 0], [n, n, n]), voxel_cm=1.0)
    assert rld.shape == (n, n, n)
    np.testing.assert_allclose(origin, 0.0)
    np.testing.assert_allclose(spacing, 1.0)
    expected = np.zeros((n, n, n))
    expected[np.arange(n), np.arange(n), np.arange(n)] = np.sqrt(3.0)
    np.testing.assert_allclose(rld, expected, atol=1e-12)


def test_planar_diagonal_gives_analytic_lengths():
    # Analytic: from (0, 0.5) to (3, 2) in unit squares the line y = 0.5 + x/2 crosses y = 1 at x = 1 and
    # y = 2 at x = 3; pieces x in [0,1] -> cell (0,0), [1,2] -> (1,1), [2,3] -> (2,1); each piece has
    # length dx * sqrt(1 + 1/4).
    rld, origin, spacing = rld_voxel_grid(_table([0, 0.5, 0.5], [3, 2, 0.5]), voxel_cm=1.0,
                                          bounds=(0, 3, 0, 3, 0, 1))
    per_unit_x = np.sqrt(1.25)
    expected = np.zeros((3, 3, 1))
    expected[0, 0, 0] = per_unit_x
    expected[1, 1, 0] = per_unit_x
    expected[2, 1, 0] = per_unit_x
    np.testing.assert_allclose(rld, expected, atol=1e-12)


def test_voxel_lengths_sum_to_segment_length_and_rld_uses_volume():
    rng = np.random.default_rng(1)
    p0 = rng.uniform(-10, 10, size=(300, 3))
    p1 = p0 + rng.normal(scale=4.0, size=(300, 3))
    table = _table(p0, p1)
    voxel = (1.5, 2.0, 0.7)
    rld, origin, spacing = rld_voxel_grid(table, voxel_cm=voxel)
    # Length conservation (segments are inside the default grid): sum of voxel lengths = total length.
    np.testing.assert_allclose(rld.sum() * np.prod(spacing), table["length_cm"].sum(), rtol=1e-12)
    np.testing.assert_allclose(spacing, voxel)
    # Default grid origin is aligned to voxel multiples below the data.
    lo = np.minimum(p0.min(axis=0), p1.min(axis=0))
    assert np.all(origin <= lo) and np.all(origin > lo - spacing)
    np.testing.assert_allclose(origin / spacing, np.round(origin / spacing))


def test_bounds_clip_exactly():
    # Analytic: a vertical segment from z = 0 to z = -10 inside a box that keeps z in [-4, 0] holds 4 cm.
    rld, origin, spacing = rld_voxel_grid(_table([0.5, 0.5, 0], [0.5, 0.5, -10]), voxel_cm=1.0,
                                          bounds=(0, 1, 0, 1, -4, 0))
    assert rld.shape == (1, 1, 4)
    np.testing.assert_allclose(rld[0, 0], 1.0)
    np.testing.assert_allclose(origin, (0, 0, -4))


def test_bad_voxel_size_and_bounds():
    table = _table([0, 0, 0], [1, 1, 1])
    with pytest.raises(RootsimError, match="voxel size"):
        rld_voxel_grid(table, voxel_cm=0)
    with pytest.raises(RootsimError, match="bounds"):
        rld_voxel_grid(table, voxel_cm=1, bounds=(0, -1, 0, 1, 0, 1))


@pytest.mark.parametrize("seed", range(5))
def test_each_voxel_matches_liang_barsky(seed):
    # Independent method: clip every segment against every voxel box with Liang-Barsky (rootsim.geometry,
    # Liang & Barsky 1984) and compare voxel by voxel, with explicit bounds cutting some segments.
    from rootsim.geometry import segment_box_length

    rng = np.random.default_rng(seed)
    p0 = rng.uniform(-3, 3, size=(60, 3))
    p1 = p0 + rng.normal(scale=1.5, size=(60, 3))
    bounds = (-2.0, 2.5, -2.0, 2.0, -2.5, 1.5)
    voxel = (0.5, 0.8, 0.6)
    rld, origin, spacing = rld_voxel_grid(_table(p0, p1), voxel_cm=voxel, bounds=bounds)
    idx = np.stack(np.meshgrid(*[np.arange(k) for k in rld.shape], indexing="ij"), axis=-1).reshape(-1, 3)
    lo = origin + idx * spacing
    hi = lo + spacing
    lengths = segment_box_length(p0[None, :, :], p1[None, :, :], lo[:, None, :], hi[:, None, :]).sum(axis=1)
    np.testing.assert_allclose(rld.reshape(-1) * np.prod(spacing), lengths, atol=1e-10)
