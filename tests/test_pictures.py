"""Pictures: renders framed tightly, a horizontal scale bar in side and oblique views, pot and rhizobox
walls; RLD titles with the day and ground area; `plot --compare` groups replicates of a variant.

Renders are read back pixel by pixel (small images); figures through their matplotlib artists.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

import rootsim
from rootsim.render import render_image, ruler_ticks

from test_render_images import random_walk_system, vertical_root

SIZE = (400, 300)
TAPROOT = Path(__file__).resolve().parents[1] / "params" / "taproot_laterals.toml"


def depth_ruler_px_per_cm(image: np.ndarray, depth_cm: float) -> tuple[float, int]:
    """Pixels per cm from the depth ruler (the longest black column in the left half) and its bottom row."""
    black = np.all(image.astype(int) < 40, axis=-1)
    left = black[:, : image.shape[1] // 2]
    column = int(np.argmax(left.sum(axis=0)))
    rows = np.flatnonzero(left[:, column])
    return (rows.max() - rows.min()) / ruler_ticks(depth_cm)[0], int(rows.max())


@pytest.mark.parametrize("view", ["side", "iso"])
@pytest.mark.parametrize("n_plants", [3, 6])
def test_the_scene_fills_the_frame(view, n_plants):
    # everything drawn (roots, surface, rulers and their labels; the legend box left out) spans at least 90 %
    # of the picture in its limiting direction: no half-empty frame
    image = render_image(random_walk_system(n_plants=n_plants), size=SIZE, view=view).astype(int)
    drawn = np.any(image < 235, axis=-1)
    drawn[: int(0.3 * SIZE[1]), int(0.78 * SIZE[0]):] = False  # the legend at the upper right
    ys, xs = np.nonzero(drawn)
    width, height = (np.ptp(xs) + 1) / SIZE[0], (np.ptp(ys) + 1) / SIZE[1]
    assert max(width, height) >= 0.90, (width, height)


def test_side_view_has_a_horizontal_scale_bar_of_a_round_length():
    system = random_walk_system(n_plants=3)
    image = render_image(system, size=SIZE, view="side", color_by="age")
    depth = -min(system["z0"].min(), system["z1"].min())
    px_per_cm, ruler_bottom = depth_ruler_px_per_cm(image, depth)
    black = np.all(image.astype(int) < 40, axis=-1)
    black[:, : SIZE[0] // 3] = False  # right of the depth ruler and its labels
    runs = []
    for row in range(ruler_bottom - 3, min(ruler_bottom + 4, SIZE[1])):
        cols = np.flatnonzero(black[row])
        if cols.size:
            breaks = np.flatnonzero(np.diff(cols) > 1)
            starts = np.r_[cols[0], cols[breaks + 1]]
            ends = np.r_[cols[breaks], cols[-1]]
            runs.append(int((ends - starts).max()))
    assert runs, "no horizontal line level with the bottom of the depth ruler"
    bar_cm = max(runs) / px_per_cm
    # a 1, 2 or 5 x 10^k cm bar, to within two pixels
    candidates = [m * 10.0**k for k in range(-1, 3) for m in (1, 2, 5)]
    nearest = min(candidates, key=lambda c: abs(c - bar_cm))
    assert abs(bar_cm - nearest) * px_per_cm <= 2.0, (bar_cm, nearest)


def test_pot_walls_are_drawn_at_the_pot_diameter():
    system = vertical_root(depth_cm=20.0)
    system.metadata.update({"container": {"kind": "pot", "diameter_cm": 16.0, "depth_cm": 25.0},
                            "stand": {"n_plants": 1, "rows": 1, "plants_per_row": 1, "row_spacing_cm": 16.0,
                                      "plant_spacing_cm": 16.0, "sowing_depth_cm": 0.0,
                                      "plant_positions_cm": [[0.0, 0.0, 0.0]]}})
    image = render_image(system, size=SIZE, view="side", color_by="age")
    px_per_cm, _ = depth_ruler_px_per_cm(image, 25.0)  # the ruler reaches the pot bottom
    black = np.all(image.astype(int) < 40, axis=-1)
    tall = np.flatnonzero(black.sum(axis=0) > 0.5 * 25.0 * px_per_cm)  # long vertical black lines
    groups = np.split(tall, np.flatnonzero(np.diff(tall) > 1) + 1)
    centres = [g.mean() for g in groups]
    assert len(centres) == 3, centres  # the depth ruler and the two walls seen from the side
    wall_gap_cm = (centres[2] - centres[1]) / px_per_cm
    assert wall_gap_cm == pytest.approx(16.0, abs=2.0 / px_per_cm + 0.05)  # the pot's diameter


def test_plot_titles_carry_day_and_ground_area(tmp_path, capsys):
    from rootsim.cli import main
    from rootsim.cli.plot import _title

    assert main(["grow", str(TAPROOT), "--out", str(tmp_path), "--days", "4", "--quiet"]) == 0
    system = rootsim.RootSystem.read(tmp_path)

    class Args:
        area_cm2 = None

    # taproot file: 4 plants x 15 cm x 50 cm rows = 3,000 cm2 of ground (row x plant spacing x plants)
    assert _title("demo", [system], Args, None) == "demo: stand-mean RLD, day 4, ground area 3,000 cm²"
    assert main(["plot", str(tmp_path)]) == 0  # and the command draws with it


def grown_replicates(seeds, *, days=4.0):
    spec = rootsim.load_spec(TAPROOT)
    return [rootsim.grow(spec, seed=s, days=days, progress=False) for s in seeds]


def test_replicates_of_a_variant_are_one_group_with_a_short_label(tmp_path):
    from rootsim.cli.plot import replicate_groups

    systems = grown_replicates([1, 2, 3]) + [rootsim.grow(rootsim.load_spec(TAPROOT), seed=1, days=6.0,
                                                          progress=False)]
    paths = [str(tmp_path / "batch" / "taproot_laterals" / f"replicate_{i:03d}") for i in range(3)] + [str(tmp_path / "late")]
    groups = replicate_groups(paths, systems)
    # three seeds of the same 4-day run are replicates; the 6-day run is another variant (same spec name),
    # so the labels fall back to the folder holding each run
    assert groups == {"taproot_laterals": [0, 1, 2], str(tmp_path.name): [3]}


def test_replicate_mean_and_spread_are_drawn():
    from rootsim.analysis import layer_profile
    from rootsim.plots import plot_rld_profile

    replicates = grown_replicates([1, 2, 3])
    other = grown_replicates([9])
    fig = plot_rld_profile({"taproot": replicates, "other": other}, layer_cm=5.0, by_order=False)
    ax = fig.axes[0]
    lines = {line.get_label(): line for line in ax.lines}
    assert set(lines) == {"taproot (n=3)", "other"}
    deepest = max(-min(s["z0"].min(), s["z1"].min()) for s in replicates + other)
    bottom = 5.0 * np.ceil(deepest / 5.0)
    rld = np.array([layer_profile(s, layer_cm=5.0, max_depth_cm=bottom)["rld_cm_per_cm3"] for s in replicates])
    np.testing.assert_allclose(lines["taproot (n=3)"].get_xdata(), rld.mean(axis=0), rtol=1e-12)
    band = ax.collections[0].get_paths()[0].vertices[:, 0]  # the ±1 s.d. band of the replicated variant
    spread = rld.std(axis=0, ddof=1)
    assert band.max() == pytest.approx((rld.mean(axis=0) + spread).max(), rel=1e-9)
    assert band.min() == pytest.approx(np.maximum(rld.mean(axis=0) - spread, 0.0).min(), abs=1e-12)
    legend = [t.get_text() for t in ax.get_legend().get_texts()]
    assert legend == ["taproot (n=3)", "other"]
