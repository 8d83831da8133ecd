"""Orientation by depth: analytic angles, exact layer splitting, isotropic reference, analyze output."""

import math

import numpy as np
import pandas as pd
import pytest

from rootsim.analysis import orientation_by_depth
from rootsim.cli import main
from rootsim.errors import RootsimError
from rootsim.sampling.synthetic import isotropic_lines, lines_system


def test_known_angles_and_exact_layer_split():
    # Analytic: a vertical root from 0 to 15 cm puts 10 cm (angle 0) in layer 0-10 and 5 cm in 10-20; a
    # horizontal 4-cm root at 5 cm (angle 90) and a 45-degree root of length 2 sqrt(2) from 12 to 14 cm.
    p0 = np.array([[0.0, 0, 0], [0.0, 0, -5], [0.0, 0, -12]])
    p1 = np.array([[0.0, 0, -15], [4.0, 0, -5], [2.0, 0, -14]])
    o = orientation_by_depth(lines_system(p0, p1), layer_cm=10)
    assert o["root_length_cm"].tolist() == pytest.approx([14.0, 5.0 + 2 * math.sqrt(2)])
    assert o["mean_abs_cos"].iloc[0] == pytest.approx(10 / 14)
    assert o["share_flat_60_90_deg"].iloc[0] == pytest.approx(4 / 14)
    second = 5.0 + 2 * math.sqrt(2)
    assert o["mean_abs_cos"].iloc[1] == pytest.approx((5 + 2 * math.sqrt(2) * math.cos(math.pi / 4)) / second)
    assert o["share_45_60_deg"].iloc[1] == pytest.approx(2 * math.sqrt(2) / second)  # 45 deg is in [45, 60)
    assert o["mean_angle_from_vertical_deg"].iloc[1] == pytest.approx(45 * 2 * math.sqrt(2) / second)


def test_isotropic_roots_have_mean_abs_cos_one_half():
    # Stereology (common practice): isotropic directions have |cos| uniform on [0, 1] -> mean 1/2, and length
    # shares 0.134 / 0.366 / 0.5 at 0-30 / 30-60 / 60-90 degrees. 60 000 segments: tolerance 0.01.
    rng = np.random.default_rng(4)
    p0, p1 = isotropic_lines(60_000, box_lo=[-10, -10, -40], box_hi=[10, 10, -1], length_cm=0.5, rng=rng)
    o = orientation_by_depth(lines_system(p0, p1), layer_cm=45)
    assert o["mean_abs_cos"].iloc[0] == pytest.approx(0.5, abs=0.01)
    shares = o[["share_steep_0_30_deg", "share_oblique_30_60_deg", "share_flat_60_90_deg"]].iloc[0].to_numpy()
    assert shares == pytest.approx([1 - math.sqrt(3) / 2, math.sqrt(3) / 2 - 0.5, 0.5], abs=0.01)


def test_bad_orientation_options():
    system = lines_system(np.zeros((1, 3)), -np.ones((1, 3)))
    with pytest.raises(RootsimError, match="must divide 90"):
        orientation_by_depth(system, bin_deg=7)
    with pytest.raises(RootsimError, match="must be a number > 0"):
        orientation_by_depth(system, layer_cm=0)


def test_analyze_writes_orientation_csv(tmp_path, capsys):
    system = lines_system(np.array([[0.0, 0, 0]]), np.array([[0.0, 0, -12]]))
    system.write(tmp_path / "segments.parquet")
    assert main(["analyze", str(tmp_path), "--area-cm2", "100", "--layer-cm", "5"]) == 0
    o = pd.read_csv(tmp_path / "orientation.csv")
    assert o["root_length_cm"].tolist() == pytest.approx([5.0, 5.0, 2.0])
    assert o["mean_abs_cos"].tolist() == pytest.approx([1.0, 1.0, 1.0])
    assert "orientation" in capsys.readouterr().out


def test_orientation_chunks_bound_memory_and_not_the_result():
    # The result is a sum over segments, so the chunk size changes it only by round-off; the temporaries are
    # per chunk (endpoints, directions, layer pieces: about 280 traced bytes per segment of a chunk, measured
    # once), so a tenth of the table per chunk must stay far below one chunk of the whole table.
    import tracemalloc

    from rootsim.analysis.orientation import ORIENTATION_CHUNK_SEGMENTS

    assert ORIENTATION_CHUNK_SEGMENTS <= 100_000  # sized so `rootsim analyze` stays <= 250 B/segment (README)
    rng = np.random.default_rng(4)
    p0, p1 = isotropic_lines(60_000, box_lo=[-10, -10, -40], box_hi=[10, 10, -1], length_cm=0.5, rng=rng)
    system = lines_system(p0, p1)
    whole = orientation_by_depth(system, layer_cm=5, chunk_segments=60_000)
    tracemalloc.start()
    try:
        parts = orientation_by_depth(system, layer_cm=5, chunk_segments=6_000)
        peak = tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()
    assert peak <= 60 * 60_000, peak / 60_000
    np.testing.assert_allclose(parts.to_numpy(), whole.to_numpy(), rtol=1e-12, atol=1e-9)
