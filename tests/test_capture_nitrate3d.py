"""Nitrate in the 3D voxel column: equals the 1D column for a laterally uniform box, closes its balance, and
takes up nothing where there are no roots."""

import numpy as np

from rootsim.capture.nitrate import NitrateParameters, nitrate_step
from rootsim.capture.nitrate3d import voxel_nitrate_step
from rootsim.capture.richards3d import VoxelGrid, _faces


def test_laterally_uniform_box_equals_the_1d_column():
    # The 1D column (advection-dispersion, Millington & Quirk tortuosity, Michaelis-Menten uptake) is an
    # independent implementation (banded solve); a box whose layers are uniform has no lateral flow or gradient,
    # so each layer must carry the 1D mass per cm² of ground.
    nx, ny, nz, dx, dy, dz = 3, 2, 12, 4.0, 5.0, 2.0
    grid = VoxelGrid((nx, ny, nz), (dx, dy, dz), (0.0, 0.0), np.ones((nx, ny, nz), dtype=bool))
    ground = nx * ny * dx * dy
    depth = np.arange(nz)
    theta_old = 0.22 + 0.01 * np.sin(depth)
    theta_new = theta_old + 0.004 * np.cos(depth)
    saturated = np.full(nz, 0.43)
    q = 0.3 + 0.05 * np.cos(np.arange(nz + 1))            # cm/day downward across each face (0: surface)
    q[5] = -0.1                                           # one upward face
    roots = np.where(depth < 8, 40.0 / (1 + depth), 0.0)  # cm of root per layer of the whole box
    mass1d = 0.002 * (1 + depth % 3)                      # mg N per cm² of ground per layer
    parameters = NitrateParameters()
    m1, u1, l1 = nitrate_step(mass1d, 1.0, theta_old=theta_old, theta_new=theta_new, face_flux_cm_per_day=q,
                              saturated=saturated, cell_cm=dz, root_length_cm=roots, ground_area_cm2=ground,
                              parameters=parameters)
    faces, _surface, bottom = _faces(grid)
    k = grid.layer_of_active()
    flow = np.where(faces.vertical, q[k[faces.first] + 1] * dx * dy, 0.0)
    m3, u3, l3 = voxel_nitrate_step(mass1d[k] * dx * dy, 1.0, grid=grid, theta_old=theta_old[k],
                                    theta_new=theta_new[k], saturated=saturated[k], face_flow_cm3_per_day=flow,
                                    drainage_cm3_per_day=np.full(bottom.size, q[-1] * dx * dy),
                                    root_length_cm=roots[k] / (nx * ny), parameters=parameters)
    np.testing.assert_allclose(np.bincount(k, weights=m3) / ground, m1, rtol=1e-10)
    np.testing.assert_allclose(np.bincount(k, weights=u3) / ground, u1, rtol=1e-10, atol=1e-18)
    assert abs(l3 / ground - l1) <= 1e-10 * abs(l1)


def _pot():
    nx, ny, nz = 6, 6, 8
    x, y = np.meshgrid(np.arange(nx) - 2.5, np.arange(ny) - 2.5, indexing="ij")
    inside = x ** 2 + y ** 2 <= 9.0
    return VoxelGrid((nx, ny, nz), (2.0, 2.0, 2.5), (0.0, 0.0), np.repeat(inside[:, :, None], nz, axis=2))


def test_balance_closes_every_day_and_no_uptake_without_roots():
    # Conservation (common practice for a finite-volume scheme): stored mass change = -(uptake + leaching).
    grid = _pot()
    geometry = _faces(grid)
    faces, _surface, bottom = geometry
    n = grid.n_active
    rng = np.random.default_rng(11)
    flow = np.where(faces.vertical, 2.0, 0.3) * rng.standard_normal(faces.first.size)
    roots = np.where(rng.random(n) < 0.4, rng.uniform(1.0, 30.0, n), 0.0)
    theta = 0.2 + 0.1 * rng.random(n)
    mass = 0.05 * rng.random(n)
    parameters = NitrateParameters()
    for day in range(10):
        theta_new = np.clip(theta + 0.01 * rng.standard_normal(n), 0.05, 0.42)
        new, uptake, leached = voxel_nitrate_step(
            mass, 1.0, grid=grid, theta_old=theta, theta_new=theta_new, saturated=np.full(n, 0.45),
            face_flow_cm3_per_day=flow, drainage_cm3_per_day=np.full(bottom.size, 1.5), root_length_cm=roots,
            parameters=parameters, _geometry=geometry)
        error = new.sum() - mass.sum() + uptake.sum() + leached
        assert abs(error) <= 1e-12 * mass.sum(), (day, error)
        assert (uptake[roots == 0] == 0).all()
        assert (uptake[roots > 0] > 0).all() and leached > 0
        mass, theta = new, theta_new
