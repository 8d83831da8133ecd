"""Sampling inputs built a block at a time equal the whole-table arrays (the blocks only bound memory)."""

from __future__ import annotations

import numpy as np
import pytest

from rootsim.periodic_stand import PeriodicCell, segment_images, segment_images_of_columns
from rootsim.sampling.synthetic import random_walk_roots


@pytest.fixture(scope="module")
def table():
    roots = random_walk_roots(3_000, n_roots=40, segment_cm=0.8, rng=np.random.default_rng(4))
    return {name: np.asarray(roots[name]) for name in roots.columns}


@pytest.mark.parametrize("box", [(-80.0, 80.0, -40.0, 40.0), (-5.0, 5.0, -5.0, 5.0), (-400.0, 400.0, -90.0, 90.0)])
def test_periodic_images_in_chunks_equal_one_pass(table, box):
    cell = PeriodicCell(-10.0, 10.0, -6.0, 6.0)
    p0 = np.column_stack([table["x0"], table["y0"], table["z0"]])
    p1 = np.column_stack([table["x1"], table["y1"], table["z1"]])
    whole = segment_images(p0, p1, cell, box)
    for rows in (7, 97, 1_000, 10**6):
        chunked = segment_images_of_columns(table, cell, box, chunk_rows=rows)
        for a, b in zip(whole, chunked):
            np.testing.assert_array_equal(a, b)


def test_core_index_keys_in_blocks_equal_one_block(table, monkeypatch):
    from rootsim.sampling import spatial_index

    p0 = np.column_stack([table["x0"], table["y0"], table["z0"]])
    p1 = np.column_stack([table["x1"], table["y1"], table["z1"]])
    whole = spatial_index.MidpointGrid(p0, p1, query_radius_cm=2.0)
    monkeypatch.setattr(spatial_index, "_KEY_BLOCK", 37)
    blocked = spatial_index.MidpointGrid(p0, p1, query_radius_cm=2.0)
    np.testing.assert_array_equal(whole.order, blocked.order)
    np.testing.assert_array_equal(whole.keys, blocked.keys)
    np.testing.assert_array_equal(whole.candidates(1.0, -2.0, 2.0), blocked.candidates(1.0, -2.0, 2.0))


def test_stand_rld_in_blocks_equals_one_block(table, monkeypatch):
    import pandas as pd

    from rootsim.sampling import bias_table

    frame = pd.DataFrame(table)
    frame.attrs["rootsim"] = {"stand": {"n_plants": 1, "ground_area_cm2": 400.0}}
    tops, bottoms = np.array([0.0, 5.0, 12.5]), np.array([5.0, 12.5, 60.0])
    whole = bias_table.stand_rld(frame, tops, bottoms)
    monkeypatch.setattr(bias_table, "_BLOCK", 101)
    np.testing.assert_array_equal(bias_table.stand_rld(frame, tops, bottoms), whole)
    assert np.all(np.isfinite(whole)) and whole.sum() > 0
