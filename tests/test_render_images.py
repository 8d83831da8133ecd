"""Offscreen 3D renders: size, content and colouring of the pictures, read back with PIL.

Images are small (a few hundred segments, <= 320 x 240 pixels) to keep the tests quick.
"""

from __future__ import annotations

import numpy as np
import pytest

from rootsim.errors import RootsimError
from rootsim.render import COLOR_BY, VIEWS, parse_size, render_image, render_png, ruler_ticks
from rootsim.rootsystem import RootSystem, empty_columns

SIZE = (320, 240)
WHITE = np.array([255, 255, 255])
# The colour-blind-safe palette of Okabe & Ito (2008, https://jfly.uni-koeln.de/color/), as published:
# orange (230, 159, 0) for the first category (root order 0) and blue (0, 114, 178) for the second (order 1)
ORDER0_ORANGE = np.array([230, 159, 0])
ORDER1_BLUE = np.array([0, 114, 178])


def random_walk_system(*, n_plants=2, roots_per_plant=4, segments_per_root=30, seed=1) -> RootSystem:
    """Per plant: one order-0 root growing down from (20 * plant, 0, 0), and order-1 laterals
    branching from its segments; each root a random walk of 1 cm segments biased downward."""
    rng = np.random.default_rng(seed)
    starts, ends, parent, plant, root, order, klass, birth = [], [], [], [], [], [], [], []
    for p in range(n_plants):
        for r in range(roots_per_plant):
            root_id = p * roots_per_plant + r
            if r == 0:
                point, par, direction, first_main = np.array([20.0 * p, 0.0, 0.0]), -1, np.array([0, 0, -1.0]), len(starts)
            else:
                par = first_main + int(rng.integers(2, segments_per_root))
                point, direction = ends[par].copy(), np.array([*rng.normal(size=2), -0.3])
            for k in range(segments_per_root):
                direction = direction / np.linalg.norm(direction)
                nxt = point + direction
                nxt[2] = min(nxt[2], -0.01)  # stay in the soil
                starts.append(point)
                ends.append(nxt)
                parent.append(par if k == 0 else len(starts) - 2)
                plant.append(p)
                root.append(root_id)
                order.append(0 if r == 0 else 1)
                klass.append("taproot" if r == 0 else "lateral")
                birth.append(0.5 * k + 5.0 * (r > 0))
                point = nxt
                direction = direction + np.array([*rng.normal(scale=0.25, size=2), -0.1])
    s, e = np.array(starts), np.array(ends)
    n = len(s)
    cols = {"segment_id": np.arange(n), "parent_id": np.array(parent), "plant_id": np.array(plant),
            "root_id": np.array(root), "order": np.array(order), "root_class": np.array(klass),
            "x0": s[:, 0], "y0": s[:, 1], "z0": s[:, 2], "x1": e[:, 0], "y1": e[:, 1], "z1": e[:, 2],
            "radius_cm": np.where(np.array(order) == 0, 0.05, 0.02), "length_cm": np.linalg.norm(e - s, axis=1),
            "birth_day": np.array(birth)}
    return RootSystem(cols, {"run": {"duration_days": 30.0}, "stand": {"n_plants": n_plants}})


def vertical_root(*, depth_cm: float = 20.0, n: int = 20) -> RootSystem:
    """One straight order-0 root from the surface to ``depth_cm`` at x = y = 0; segment k born on day k."""
    z = np.linspace(0, -depth_cm, n + 1)
    cols = empty_columns()
    cols.update(segment_id=np.arange(n), parent_id=np.arange(n) - 1, plant_id=np.zeros(n, int), root_id=np.zeros(n, int),
                order=np.zeros(n, int), root_class=np.array(["taproot"] * n), x0=np.zeros(n), y0=np.zeros(n), z0=z[:-1],
                x1=np.zeros(n), y1=np.zeros(n), z1=z[1:], radius_cm=np.full(n, 0.1), length_cm=np.full(n, depth_cm / n),
                birth_day=np.arange(n, dtype=float))
    return RootSystem(cols, {"run": {"duration_days": float(n)}})


@pytest.fixture(scope="module")
def system():
    return random_walk_system()


def read_png(path) -> np.ndarray:
    from PIL import Image  # independent PNG reader

    with Image.open(path) as im:
        assert im.format == "PNG"
        return np.asarray(im.convert("RGB"))


def has_colour(image: np.ndarray, rgb: np.ndarray, *, tol: int = 6, min_pixels: int = 20) -> bool:
    return int(np.all(np.abs(image.astype(int) - rgb) <= tol, axis=-1).sum()) >= min_pixels


def test_png_has_requested_size_and_is_not_blank(system, tmp_path):
    path = render_png(system, tmp_path / "roots.png", size=SIZE, title="Invented trial A")
    image = read_png(path)
    assert image.shape == (SIZE[1], SIZE[0], 3)  # PIL reports (height, width) rows x columns
    assert image.std() > 10  # not a flat picture
    non_background = np.any(image != WHITE, axis=-1).mean()
    assert 0.02 < non_background < 0.9  # roots, surface, ruler drawn; background still mostly visible


def test_array_matches_png(system, tmp_path):
    image = render_image(system, size=SIZE, view="side")
    assert image.dtype == np.uint8 and image.shape == (240, 320, 3)
    png = read_png(render_png(system, tmp_path / "side.png", size=SIZE, view="side"))
    assert np.mean(np.abs(png.astype(int) - image.astype(int))) < 1.0  # same scene, deterministic renderer


@pytest.mark.parametrize("size", [(200, 300), (257, 129)])
def test_odd_and_portrait_sizes(system, size):
    assert render_image(system, size=size).shape == (size[1], size[0], 3)


def test_order_colours_are_the_palette_colours(system):
    # lighting is off for roots, so order 0 lines carry Okabe-Ito orange and order 1 Okabe-Ito blue exactly
    image = render_image(system, size=SIZE, color_by="order", view="side")
    assert has_colour(image, ORDER0_ORANGE) and has_colour(image, ORDER1_BLUE)


def test_colouring_changes_the_picture(system):
    images = {c: render_image(system, size=SIZE, color_by=c, view="side").astype(int) for c in COLOR_BY}
    for a in COLOR_BY:
        for b in COLOR_BY:
            if a < b and not {a, b} == {"order", "root_class"}:
                assert np.abs(images[a] - images[b]).mean() > 0.3, (a, b)
    # order and root_class split this system the same way but the legends differ (order 0 / taproot)
    assert np.any(images["order"] != images["root_class"])
    # plant colouring: plant 0 orange, plant 1 blue (first and second palette colours)
    assert has_colour(images["plant"], ORDER1_BLUE)


def test_views_differ(system):
    images = [render_image(system, size=SIZE, view=v).astype(int) for v in VIEWS]
    assert np.abs(images[0] - images[1]).mean() > 1 and np.abs(images[1] - images[2]).mean() > 1


def test_title_is_drawn_at_the_top(system):
    plain = render_image(system, size=SIZE, view="side")
    titled = render_image(system, size=SIZE, view="side", title="Invented field 3")
    changed = np.any(plain != titled, axis=-1)
    rows = np.flatnonzero(changed.any(axis=1))
    assert rows.size and rows.max() < SIZE[1] * 0.2  # only the top band changes


def test_vertical_root_side_view_is_a_vertical_line():
    # one straight order-0 root 0..-20 cm at x = 0: in the side view its pixels form one narrow column
    image = render_image(vertical_root(), size=SIZE, view="side")
    blue = np.all(np.abs(image.astype(int) - ORDER0_ORANGE) <= 6, axis=-1)  # order 0's colour
    blue[: int(0.25 * SIZE[1]), int(0.7 * SIZE[0]):] = False  # ignore the legend swatch
    ys, xs = np.nonzero(blue)
    assert xs.size > 50
    assert xs.max() - xs.min() <= 6  # a few pixels wide
    assert ys.max() - ys.min() > 0.3 * SIZE[1]  # and long


def test_empty_system_renders_surface_only():
    image = render_image(RootSystem(empty_columns(), {}), size=SIZE, view="iso")
    assert image.shape == (240, 320, 3)
    assert np.any(image != WHITE, axis=-1).mean() > 0.05  # the translucent surface plane and ruler


def test_rootsystem_render_forwards(system):
    image = system.render(size=(160, 120), color_by="age")
    assert isinstance(image, np.ndarray) and image.shape == (120, 160, 3)


@pytest.mark.parametrize("kwargs,match", [
    ({"color_by": "colour"}, "unknown colouring 'colour' \\(allowed: order, age, root_class, plant\\)"),
    ({"view": "front"}, "unknown view 'front' \\(allowed: side, top, iso\\)"),
    ({"size": (0, 100)}, "image size"),
    ({"size": (100,)}, "image size"),
    ({"size": "big"}, "image size"),
])
def test_bad_options_raise_one_line_errors(system, tmp_path, kwargs, match):
    with pytest.raises(RootsimError, match=match) as info:
        render_png(system, tmp_path / "x.png", **kwargs)
    assert "\n" not in str(info.value)
    assert not list(tmp_path.iterdir())  # nothing written


def test_parse_size():
    assert parse_size("1200x900") == (1200, 900)
    assert parse_size("64X48") == (64, 48)
    for bad in ("1200", "12x", "x9", "-5x9", "1.5x9", "10x10x10", "99999x10"):
        with pytest.raises(RootsimError):
            parse_size(bad)


@pytest.mark.parametrize("extent,length,labels", [(35.0, 35.0, 8), (155.5, 160.0, 9), (100.0, 100.0, 6), (7.3, 8.0, 5),
                                                  (0.3, 0.3, 4), (1.0, 1.0, 6)])
def test_ruler_covers_the_depth_in_round_steps(extent, length, labels):
    got_length, got_labels = ruler_ticks(extent)
    assert got_length == pytest.approx(length) and got_labels == labels
    step = got_length / (got_labels - 1)
    assert got_length >= extent and got_length - step < extent  # shortest whole number of steps


def test_depth_ruler_is_true_to_scale_in_side_view():
    # a 20 cm root and the ruler (0..20 cm: ruler_ticks(20) = 20 cm in 5-cm steps) span the same pixel rows
    assert ruler_ticks(20.0)[0] == 20.0
    image = render_image(vertical_root(depth_cm=20.0), size=SIZE, view="side", color_by="age").astype(int)
    coloured = (image.max(axis=-1) - image.min(axis=-1)) > 40  # viridis colours are far from grey
    black = np.all(image < 40, axis=-1)
    left = slice(0, SIZE[0] // 2)
    root_rows = np.flatnonzero(coloured[:, left].any(axis=1))
    ruler_column = int(np.argmax(black[:, left].sum(axis=0)))  # the ruler's axis line: the longest black column
    ruler_rows = np.flatnonzero(black[:, ruler_column])
    assert ruler_rows.size > 0.5 * SIZE[1]
    assert abs((root_rows.max() - root_rows.min()) - (ruler_rows.max() - ruler_rows.min())) <= 3
    assert abs(root_rows.min() - ruler_rows.min()) <= 3  # both start at the surface


def test_age_colours_follow_viridis_from_young_tip_to_old_base():
    # ages: 20 days at the base, 1 day at the tip (duration 20, birth days 0..19); the colour map's
    # ends are viridis(0) = #440154 and viridis(1) = #fde725 (matplotlib's published viridis table)
    image = render_image(vertical_root(), size=SIZE, view="side", color_by="age").astype(int)
    coloured = (image.max(axis=-1) - image.min(axis=-1)) > 40
    coloured[:, SIZE[0] // 2:] = False  # leave out the scalar bar
    column = int(np.argmax(coloured.sum(axis=0)))  # the middle of the 2-pixel line (its edges are blended)
    rows = np.flatnonzero(coloured[:, column])
    base, tip = image[rows.min() + 1, column], image[rows.max() - 1, column]
    np.testing.assert_allclose(base, [0xFD, 0xE7, 0x25], atol=25)
    np.testing.assert_allclose(tip, [0x44, 0x01, 0x54], atol=25)


def test_tubes_have_the_scaled_radius():
    # true to scale: a tube of radius 0.1 cm x 5 is 1 cm wide, i.e. as wide as 1/20 of the 20 cm ruler
    image = render_image(vertical_root(depth_cm=20.0), size=SIZE, view="side", style="tubes", tube_scale=5.0).astype(int)
    black = np.all(image < 40, axis=-1)
    ruler_column = int(np.argmax(black[:, : SIZE[0] // 2].sum(axis=0)))
    ruler_rows = np.flatnonzero(black[:, ruler_column])
    px_per_cm = (ruler_rows.max() - ruler_rows.min()) / 20.0
    middle = (ruler_rows.max() + ruler_rows.min()) // 2
    row = np.any(image[middle] < 230, axis=-1)
    row[: ruler_column + 4] = False  # leave out the ruler and its labels
    row[int(0.7 * SIZE[0]):] = False  # and the legend
    width_px = np.ptp(np.flatnonzero(row)) + 1
    assert width_px == pytest.approx(1.0 * px_per_cm, abs=2.0), (width_px, px_per_cm)
    lines = render_image(vertical_root(depth_cm=20.0), size=SIZE, view="side").astype(int)
    assert np.abs(lines - image).mean() > 0.5  # tubes are not the same picture as lines


@pytest.mark.parametrize("kwargs,match", [
    ({"style": "ribbons"}, "unknown style 'ribbons' \\(allowed: lines, tubes\\)"),
    ({"style": "tubes", "tube_scale": 0}, "tube scale 0 not allowed"),
    ({"style": "tubes", "tube_scale": float("nan")}, "tube scale nan not allowed"),
])
def test_bad_style_options(kwargs, match):
    with pytest.raises(RootsimError, match=match):
        render_image(vertical_root(), size=SIZE, **kwargs)
