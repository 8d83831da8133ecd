"""2D figures: RLD profile read back from the Axes against analytic profiles; projection pixels.

Analytic reference for RLD (definition, common practice): a root length L lying inside a soil
layer of thickness t under a ground area A gives RLD = L / (t * A), cm cm⁻³.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from rootsim.errors import RootsimError
from rootsim.plots import ROOT_COLOUR, SOIL_COLOUR, plot_projection, plot_rld_profile, profile_order_rld, save_figure
from rootsim.rootsystem import RootSystem


def vertical_root_with_lateral(*, x_cm=5.0, depth_cm=20.0, n_main=8, lateral_depth_cm=7.5, lateral_length_cm=10.0,
                               radius_cm=0.05, metadata=None) -> RootSystem:
    """A straight vertical order-0 root from the surface down to ``depth_cm`` at x = ``x_cm`` (y = 0),
    plus (if ``lateral_length_cm`` > 0) one horizontal order-1 lateral at ``lateral_depth_cm`` going +x."""
    z = np.linspace(0.0, -depth_cm, n_main + 1)
    rows = {
        "x0": [x_cm] * n_main, "y0": [0.0] * n_main, "z0": list(z[:-1]),
        "x1": [x_cm] * n_main, "y1": [0.0] * n_main, "z1": list(z[1:]),
        "parent_id": list(range(-1, n_main - 1)), "root_id": [0] * n_main, "order": [0] * n_main,
        "root_class": ["primary"] * n_main, "radius_cm": [radius_cm] * n_main,
    }
    if lateral_length_cm > 0:
        parent = int(np.searchsorted(-z, lateral_depth_cm) - 1)  # main segment holding the branch point
        for key, value in {
            "x0": x_cm, "y0": 0.0, "z0": -lateral_depth_cm, "x1": x_cm + lateral_length_cm, "y1": 0.0,
            "z1": -lateral_depth_cm, "parent_id": parent, "root_id": 1, "order": 1, "root_class": "lateral",
            "radius_cm": radius_cm / 2,
        }.items():
            rows[key].append(value)
    n = len(rows["x0"])
    cols = {k: np.asarray(v) for k, v in rows.items()}
    cols["segment_id"] = np.arange(n)
    cols["plant_id"] = np.zeros(n, dtype=int)
    cols["length_cm"] = np.sqrt((cols["x1"] - cols["x0"]) ** 2 + (cols["z1"] - cols["z0"]) ** 2)
    cols["birth_day"] = np.arange(n, dtype=float)
    return RootSystem(cols, metadata or {})


def hand_profile(rld_by_order: dict[int, list[float]], *, layer_cm: float, area_cm2: float | None) -> pd.DataFrame:
    """A profile DataFrame in the layout of rootsim.analysis.layer_profile, built from known RLDs."""
    n = len(next(iter(rld_by_order.values())))
    top = np.arange(n) * layer_cm
    volume = layer_cm * (area_cm2 or 1.0)
    df = pd.DataFrame({"depth_top_cm": top, "depth_bottom_cm": top + layer_cm})
    for k, rld in rld_by_order.items():
        df[f"root_length_order_{k}_cm"] = np.asarray(rld) * volume
    df["root_length_cm"] = sum(df[f"root_length_order_{k}_cm"] for k in rld_by_order)
    df["rld_cm_per_cm3"] = df["root_length_cm"] / volume
    if area_cm2 is not None:
        df.attrs["ground_area_cm2"] = area_cm2
    return df


def lines_by_label(ax) -> dict[str, tuple[np.ndarray, np.ndarray]]:
    return {line.get_label(): (np.asarray(line.get_xdata(), float), np.asarray(line.get_ydata(), float)) for line in ax.lines}


# ---------------------------------------------------------------------------------------------
# RLD profile
# ---------------------------------------------------------------------------------------------
@pytest.mark.parametrize("area_cm2", [100.0, None])
def test_plotted_values_equal_given_profile(area_cm2):
    # known RLDs (cm cm^-3) per order; per-order RLD = L_k / (t * A) by definition (common practice)
    rld = {0: [0.02, 0.01, 0.005, 0.0], 1: [0.0, 0.03, 0.01, 0.0]}
    fig = plot_rld_profile(hand_profile(rld, layer_cm=10.0, area_cm2=area_cm2), by_order=True)
    ax = fig.axes[0]
    lines = lines_by_label(ax)
    mid = np.array([5.0, 15.0, 25.0, 35.0])  # layer mid-depths, cm
    np.testing.assert_allclose(lines["all roots"][0], np.add(rld[0], rld[1]))
    np.testing.assert_allclose(lines["all roots"][1], mid)
    np.testing.assert_allclose(lines["order 0"][0], rld[0])
    np.testing.assert_allclose(lines["order 1"][0], rld[1])
    # depth increases downward: the y axis is inverted (top of the axes is the soil surface)
    bottom, top = ax.get_ylim()
    assert top == 0 and bottom == pytest.approx(40.0)


def test_vertical_root_profile_from_system_is_analytic():
    analysis = pytest.importorskip("rootsim.analysis", reason="layer profiler not available yet")
    if not hasattr(analysis, "layer_profile"):
        pytest.skip("rootsim.analysis.layer_profile not available yet")
    area = 200.0
    system = vertical_root_with_lateral(metadata={"stand": {"n_plants": 1, "ground_area_cm2": area}})
    fig = plot_rld_profile(system, layer_cm=5.0)
    lines = lines_by_label(fig.axes[0])
    x, y = lines["all roots"]
    # analytic: main root 20 cm deep gives 5 cm per 5-cm layer -> 5 / (5 * 200) = 0.005 in 0-20 cm;
    # the 10 cm lateral at 7.5 cm depth adds 10 / (5 * 200) = 0.01 to the 5-10 cm layer; nothing deeper
    expected_total = np.where(y < 20, 0.005, 0.0) + np.where((y > 5) & (y < 10), 0.01, 0.0)
    np.testing.assert_allclose(x, expected_total, atol=1e-12)
    np.testing.assert_allclose(lines["order 0"][0], np.where(y < 20, 0.005, 0.0), atol=1e-12)
    np.testing.assert_allclose(lines["order 1"][0], np.where((y > 5) & (y < 10), 0.01, 0.0), atol=1e-12)
    assert y[0] == pytest.approx(2.5)  # first layer 0-5 cm drawn at its mid-depth


def test_compare_variants_one_panel_per_order_with_variant_labels():
    a = hand_profile({0: [0.02, 0.01], 1: [0.01, 0.0]}, layer_cm=5.0, area_cm2=50.0)
    b = hand_profile({0: [0.04, 0.03], 1: [0.0, 0.02]}, layer_cm=5.0, area_cm2=50.0)
    fig = plot_rld_profile({"early sown": a, "late sown": b})
    titles = [ax.get_title() for ax in fig.axes]
    assert titles == ["all roots", "order 0", "order 1"]
    for ax in fig.axes:
        assert set(lines_by_label(ax)) == {"early sown", "late sown"}
    np.testing.assert_allclose(lines_by_label(fig.axes[0])["late sown"][0], [0.04, 0.05])
    np.testing.assert_allclose(lines_by_label(fig.axes[2])["early sown"][0], [0.01, 0.0])
    # the two variants keep one colour each across the panels
    colour = [line.get_color() for line in fig.axes[1].lines]
    assert colour == [line.get_color() for line in fig.axes[2].lines] and colour[0] != colour[1]


def test_profile_order_rld_matches_definition():
    df = hand_profile({0: [0.5, 0.25], 2: [0.1, 0.0]}, layer_cm=2.0, area_cm2=10.0)
    got = profile_order_rld(df)
    assert list(got) == [0, 2]
    np.testing.assert_allclose(got[0], [0.5, 0.25])  # L / (t * A), definition
    np.testing.assert_allclose(got[2], [0.1, 0.0])


# ---------------------------------------------------------------------------------------------
# projection
# ---------------------------------------------------------------------------------------------
def _rgb(colour: str) -> np.ndarray:
    from matplotlib.colors import to_rgb

    return np.array(to_rgb(colour)) * 255


def test_projection_darkens_pixels_on_the_root_only(tmp_path):
    from PIL import Image  # independent PNG reader

    width_scale = 10.0  # drawn diameter 10 * 0.1 cm = 1 cm
    system = vertical_root_with_lateral(x_cm=5.0, depth_cm=20.0, lateral_length_cm=0.0,
                                        metadata={"container": {"kind": "rhizobox", "width_cm": 40.0,
                                                                "thickness_cm": 2.0, "depth_cm": 40.0}})
    fig = plot_projection(system, width_scale=width_scale)
    ax = fig.axes[0]
    assert ax.get_xlim() == (-20.0, 20.0) and ax.get_ylim() == (40.0, 0.0)  # the rhizobox, depth downward
    path = save_figure(fig, tmp_path / "projection.png", dpi=int(fig.dpi))
    image = np.asarray(Image.open(path).convert("RGB"), dtype=float)
    height = image.shape[0]

    def pixel(x_cm, depth_cm):
        px, py = ax.transData.transform((x_cm, depth_cm))
        return image[int(round(height - py)), int(round(px))]

    root, soil = _rgb(ROOT_COLOUR), _rgb(SOIL_COLOUR)
    for depth in (1.0, 10.0, 19.0):
        np.testing.assert_allclose(pixel(5.0, depth), root, atol=8)  # on the root: root colour
    for x, depth in [(-10.0, 10.0), (15.0, 5.0), (5.0, 30.0), (7.0, 10.0)]:
        np.testing.assert_allclose(pixel(x, depth), soil, atol=8)  # beside, below the tip: soil
    # dark area ~ drawn rectangle 1 cm x 20 cm (plus round caps, pi r^2), at the axes' px per cm
    x0, _ = ax.transData.transform((0.0, 0.0))
    x1, _ = ax.transData.transform((1.0, 0.0))
    px_per_cm = x1 - x0
    box = ax.get_window_extent()  # count inside the axes only (spines, tick labels are dark too)
    inside = image[int(height - box.y1) + 3:int(height - box.y0) - 3, int(box.x0) + 3:int(box.x1) - 3]
    dark = np.all(np.abs(inside - root) < 60, axis=-1).sum()
    expected = (20.0 * 1.0 + np.pi * 0.25) * px_per_cm**2
    assert dark == pytest.approx(expected, rel=0.15)


def drawn_segments(collection) -> np.ndarray:
    """Every straight piece the collection draws, rows (x_a, y_a, x_b, y_b), NaN breaks skipped."""
    pieces = []
    for path in collection.get_paths():
        v = path.vertices
        pair = np.hstack([v[:-1], v[1:]])
        pieces.append(pair[np.all(np.isfinite(pair), axis=1)])
    return np.vstack(pieces) if pieces else np.zeros((0, 4))


def canonical(rows: np.ndarray) -> np.ndarray:
    """Segments as sorted rows with the two end points in lexicographic order (direction-free)."""
    a, b = rows[:, :2], rows[:, 2:]
    swap = (a[:, 0] > b[:, 0]) | ((a[:, 0] == b[:, 0]) & (a[:, 1] > b[:, 1]))
    out = np.where(swap[:, None], np.hstack([b, a]), rows).round(9)
    return out[np.lexsort(out.T[::-1])]


def test_projection_line_width_is_true_scale():
    system = vertical_root_with_lateral(radius_cm=0.5, lateral_length_cm=10.0,
                                        metadata={"container": {"kind": "pot", "diameter_cm": 30.0, "depth_cm": 30.0}})
    fig = plot_projection(system)
    ax = fig.axes[0]
    (collection,) = ax.collections
    # width in points = diameter (cm) * points per cm of the axes (72 points per inch, definition)
    points_per_cm = ax.get_window_extent().width / fig.dpi * 72 / 30.0
    widths = collection.get_linewidths()
    np.testing.assert_allclose(widths, [0.5 * points_per_cm, 1.0 * points_per_cm], rtol=1e-9)  # thin drawn first


def test_projection_draws_exactly_the_segments_projected():
    # random tapering roots: the drawn pieces are the segments' (x, -z) end points, each once
    rng = np.random.default_rng(3)
    base = vertical_root_with_lateral(n_main=40, depth_cm=30.0, lateral_length_cm=12.0)
    cols = {c: np.array(base[c], copy=True) for c in base.columns}
    n = len(base)
    jitter = rng.normal(scale=0.3, size=n)
    cols["x1"] = cols["x1"] + jitter
    cols["x0"][1:] = np.where(cols["parent_id"][1:] == np.arange(n - 1), cols["x1"][:-1], cols["x0"][1:])
    cols["x0"][-1] = cols["x1"][cols["parent_id"][-1]]  # the lateral still starts at its parent segment
    cols["radius_cm"] = rng.uniform(0.01, 0.2, size=n)  # many radius bins: roots cut into pieces
    system = RootSystem(cols, {})
    (collection,) = plot_projection(system).axes[0].collections
    expected = np.column_stack([cols["x0"], -cols["z0"], cols["x1"], -cols["z1"]])
    np.testing.assert_allclose(canonical(drawn_segments(collection)), canonical(expected), atol=1e-9)
    # thin first, thick on top (drawing order follows the radius)
    assert np.all(np.diff(collection.get_linewidths()) >= 0)


def test_projection_of_empty_system_is_plain_soil():
    from rootsim.rootsystem import empty_columns

    fig = plot_projection(RootSystem(empty_columns(), {}))
    assert len(fig.axes[0].collections[0].get_segments()) == 0


def test_save_figure_rejects_unknown_suffix(tmp_path):
    fig = plot_projection(vertical_root_with_lateral())
    with pytest.raises(RootsimError, match="allowed: .png, .svg, .pdf"):
        save_figure(fig, tmp_path / "x.bmp")
    assert not list(tmp_path.iterdir())  # nothing half-written


@pytest.mark.parametrize("suffix,magic", [(".svg", b"<?xml"), (".pdf", b"%PDF")])
def test_save_figure_vector_formats(tmp_path, suffix, magic):
    path = save_figure(plot_projection(vertical_root_with_lateral()), tmp_path / f"p{suffix}")
    assert path.read_bytes()[:5].startswith(magic)  # file signatures of the formats (SVG/XML, PDF specs)


def test_rld_profile_accepts_segment_tables_in_several_forms():
    analysis = pytest.importorskip("rootsim.analysis")
    if not hasattr(analysis, "layer_profile"):
        pytest.skip("rootsim.analysis.layer_profile not available yet")
    system = vertical_root_with_lateral(lateral_length_cm=0.0)
    columns = {c: system[c] for c in system.columns}
    expected = np.full(4, 5.0 / (5.0 * 50.0))  # RLD = L / (t * A): 5 cm of root in each 5-cm layer over 50 cm², 0-20 cm
    for data in (system, system.to_dataframe(), columns):
        x, _ = lines_by_label(plot_rld_profile(data, layer_cm=5.0, area_cm2=50.0).axes[0])["all roots"]
        np.testing.assert_allclose(x, expected)
