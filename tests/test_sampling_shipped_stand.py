"""On the shipped cereal-like plant: orientation by depth, and wall and tube errors in the published direction.

The ``cereal_plant`` fixture is one plant at the stand's spacing, i.e. a periodic field of identical plants
(75 x 20 cm cell), so samplers see the neighbouring plants' roots.
"""

import dataclasses
import math

import numpy as np
import pytest

from rootsim.analysis import orientation_by_depth
from rootsim.analysis.orientation import ISOTROPIC_SHARES
from rootsim.sampling import Tube, Wall, sample_tube, sample_wall
from rootsim.sampling.bias_table import bias_table, stand_rld


def test_isotropic_reference_shares():
    # Isotropic lines: angle from vertical has density sin(theta) (common practice in stereology).
    assert ISOTROPIC_SHARES == pytest.approx((1 - math.sqrt(3) / 2, math.sqrt(3) / 2 - 0.5, 0.5))


def test_topsoil_is_flatter_than_random_and_the_deep_profile_steeper(cereal_plant):
    # Field maize: roots in the ploughed layer are mostly horizontal, steep axes dominate below (Tardieu &
    # Manichon 1986, Agronomie 6:415-425; from memory). Random orientation has mean |cos| = 0.5.
    o = orientation_by_depth(cereal_plant, layer_cm=30)
    top = o.iloc[0]
    deep = o[o["depth_top_cm"] >= 90]
    deep_cos = float((deep["mean_abs_cos"] * deep["root_length_cm"]).sum() / deep["root_length_cm"].sum())
    assert top["mean_abs_cos"] < 0.45
    assert top["share_flat_60_90_deg"] > 0.55  # random: 0.5
    assert deep_cos > 0.5
    assert np.all(np.diff(o["mean_abs_cos"].to_numpy()[:4]) > 0)  # steeper layer by layer to 120 cm


def test_prepared_trench_wall_reads_several_fold_below_the_stand(cereal_plant):
    # Trench-wall counts give RLD several-fold below cores (Böhm 1979, Methods of Studying Root Systems,
    # doi:10.1007/978-3-642-67282-8; from memory). Faces across the row through the plant cell. On an
    # unprepared face the estimate is near the truth at every depth (the shipped roots are close enough to
    # isotropic in azimuth for Smith & Guttman 1953); requiring 1 cm of protruding root from a 0.5 cm scraped
    # layer keeps (0.5 / 1)^2 = 1/4 of the crossings of isotropic roots (see test_sampling_field_methods).
    walls = [Wall(y_cm=y, x_min_cm=-37.5, x_max_cm=37.5, depth_cm=90, cell_cm=30, slab_thickness_cm=2.0)
             for y in (-7.5, -2.5, 2.5, 7.5)]
    plain = sample_wall(cereal_plant, walls=walls)
    prepared = sample_wall(cereal_plant, walls=[dataclasses.replace(w, scraped_cm=0.5, min_protruding_cm=1.0)
                                                for w in walls])
    truth = stand_rld(cereal_plant, np.array([0.0, 30.0, 60.0]), np.array([30.0, 60.0, 90.0]))
    plain_ratio = plain.groupby("depth_top_cm")["rld_estimate_cm_per_cm3"].mean().to_numpy() / truth
    prepared_ratio = prepared.groupby("depth_top_cm")["rld_estimate_cm_per_cm3"].mean().to_numpy() / truth
    assert np.all((plain_ratio > 0.75) & (plain_ratio < 1.3))
    assert np.all((prepared_ratio > 0.1) & (prepared_ratio < 0.35))


def test_tube_under_reads_the_topsoil_and_over_reads_depth_with_gap_and_wall_growth(cereal_plant):
    # Minirhizotrons read low in the topsoil and high at depth compared with cores (Samson & Sinclair 1994,
    # Plant Soil 161:225-232; Vos & Groenwold 1987; from memory), from poor tube-soil contact near the surface
    # and roots growing along the tube deeper down. A 0.1 cm gap to 30 cm and 10 % wall growth below it:
    # the gap can only remove image length and wall growth only add it, so the same tubes read lower in the
    # topsoil and higher below; with them the topsoil ratio is below the ratio at 60-90 cm. (The 30-60 cm band of a
    # 45-degree tube starting beside the row lies 30-60 cm away from it, under the inter-row, where the RLD at that
    # depth is below the stand mean whatever the method: that band reads low by position, so it is not compared.)
    tubes = [Tube(x_cm=0, y_cm=y, angle_from_vertical_deg=45, length_cm=130, outer_diameter_cm=5.6,
                  depth_of_field_cm=0.2, window_cm=5) for y in (-5.0, 5.0)]
    field = [dataclasses.replace(t, gap_cm=0.1, gap_depth_cm=30, wall_growth_fraction=0.1) for t in tubes]
    clean_table = bias_table(cereal_plant, tube=sample_tube(cereal_plant, tubes=tubes), tube_band_cm=30)
    field_table = bias_table(cereal_plant, tube=sample_tube(cereal_plant, tubes=field), tube_band_cm=30)
    clean = clean_table.set_index("depth_top_cm")["ratio_mean"]
    biased = field_table.set_index("depth_top_cm")["ratio_mean"]
    assert biased.loc[0.0] < clean.loc[0.0]
    assert biased.loc[30.0] > clean.loc[30.0] and biased.loc[60.0] > clean.loc[60.0]
    assert biased.loc[0.0] < biased.loc[60.0]
