"""One colour code: plots, renders and meshes all use the Okabe & Ito (2008) palette from rootsim.palette.

Published Okabe-Ito colours (https://jfly.uni-koeln.de/color/; Wong 2011, doi:10.1038/nmeth.1618):
orange (230, 159, 0), sky blue (86, 180, 233), bluish green (0, 158, 115), yellow (240, 228, 66),
blue (0, 114, 178), vermillion (213, 94, 0), reddish purple (204, 121, 167), black (0, 0, 0).
"""

from __future__ import annotations

import numpy as np
from matplotlib.colors import to_rgb

from rootsim.palette import CATEGORY_COLOURS_RGB, hex_colour, order_colours

from test_plots_figures import vertical_root_with_lateral

OKABE_ITO = {"orange": (230, 159, 0), "sky blue": (86, 180, 233), "bluish green": (0, 158, 115),
             "yellow": (240, 228, 66), "blue": (0, 114, 178), "vermillion": (213, 94, 0),
             "reddish purple": (204, 121, 167)}


def test_palette_is_okabe_ito_and_orders_keep_their_colour():
    assert {tuple(int(v) for v in c) for c in CATEGORY_COLOURS_RGB} == set(OKABE_ITO.values())
    assert [tuple(c) for c in order_colours([0, 1, 2])] == [OKABE_ITO["orange"], OKABE_ITO["blue"],
                                                            OKABE_ITO["bluish green"]]
    assert hex_colour((0, 114, 178)) == "#0072b2" and hex_colour((1.0, 1.0, 1.0)) == "#ffffff"


def test_rld_plot_legend_colours_are_the_palette():
    from rootsim.plots import plot_rld_profile

    fig = plot_rld_profile(vertical_root_with_lateral(metadata={"stand": {"n_plants": 1, "ground_area_cm2": 100.0}}))
    legend = fig.axes[0].get_legend()
    colours = {t.get_text(): np.round(np.array(to_rgb(h.get_color())) * 255) for t, h in
               zip(legend.get_texts(), legend.legend_handles)}
    assert tuple(colours["order 0"]) == OKABE_ITO["orange"]
    assert tuple(colours["order 1"]) == OKABE_ITO["blue"]
    assert tuple(colours["all roots"]) == (0, 0, 0)


def test_render_draws_orders_in_the_palette_colours():
    from rootsim.render import render_image

    system = vertical_root_with_lateral(depth_cm=20.0, lateral_length_cm=10.0, metadata={"run": {"duration_days": 9}})
    image = render_image(system, view="side", size=(320, 240)).astype(int)
    for name in ("orange", "blue"):  # order 0 and order 1 lines (lighting off: exact colours)
        assert np.all(np.abs(image - OKABE_ITO[name]) <= 6, axis=-1).sum() >= 20, name
    assert not np.all(np.abs(image - (31, 119, 180)) <= 6, axis=-1).any()  # no matplotlib tab10 blue left


def test_mesh_vertex_colours_are_the_palette(tmp_path):
    import trimesh  # independent PLY reader

    from rootsim.formats import export_file

    system = vertical_root_with_lateral(depth_cm=10.0, lateral_length_cm=5.0)
    path = tmp_path / "roots.ply"
    export_file(system, path)
    mesh = trimesh.load(path, process=False)
    found = {tuple(int(v) for v in c[:3]) for c in np.asarray(mesh.visual.vertex_colors)}
    assert found == {OKABE_ITO["orange"], OKABE_ITO["blue"]}
