"""On the shipped cereal-like plant: orientation by depth, and plain and prepared trench walls against stereology.

The ``cereal_plant`` fixture is one plant at the stand's spacing, i.e. a periodic field of identical plants
(75 x 20 cm cell), so samplers see the neighbouring plants' roots. The minirhizotron's depth trend on the same
plant is checked in test_sampling_depth_bias.py; its gap and wall growth analytically in test_sampling_field_methods.py.
"""

import dataclasses
import math

import numpy as np
import pytest

from rootsim.analysis import orientation_by_depth
from rootsim.analysis.orientation import ISOTROPIC_SHARES
from rootsim.sampling import Wall, sample_wall
from rootsim.sampling.bias_table import stand_rld


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


def _orientation_to_face_normal(system, tops_cm, layer_cm):
    """Per depth layer (segment midpoints): length, length x |cos| to the face normal (y) and that of |cos| <= 0.5."""
    d = np.column_stack([np.asarray(system[f"{a}1"]) - np.asarray(system[f"{a}0"]) for a in "xyz"])
    length = np.linalg.norm(d, axis=1)
    cos_normal = np.abs(d[:, 1]) / np.maximum(length, 1e-300)
    depth = -0.5 * (np.asarray(system["z0"]) + np.asarray(system["z1"]))
    out = []
    for top in tops_cm:
        m = (depth >= top) & (depth < top + layer_cm)
        crossing_weight = length[m] * cos_normal[m]  # chance of crossing a plane is proportional to l |cos|
        out.append((length[m].sum(), crossing_weight.sum(), crossing_weight[cos_normal[m] <= 0.5].sum()))
    return np.array(out)


def test_prepared_trench_wall_reads_several_fold_below_the_stand(cereal_plant):
    # Trench-wall counts give RLD several-fold below cores (Böhm 1979, Methods of Studying Root Systems,
    # doi:10.1007/978-3-642-67282-8; from memory). Faces across the row every 5 cm over the 20 cm plant spacing
    # (a systematic sample of face positions in the periodic stand).
    tops = np.array([0.0, 30.0, 60.0])
    walls = [Wall(y_cm=y, x_min_cm=-37.5, x_max_cm=37.5, depth_cm=90, cell_cm=30, slab_thickness_cm=2.0)
             for y in (-7.5, -2.5, 2.5, 7.5)]
    plain = sample_wall(cereal_plant, walls=walls).groupby("depth_top_cm")[["intersections", "cell_area_cm2"]].sum()
    prepared = sample_wall(cereal_plant, walls=[dataclasses.replace(w, scraped_cm=0.5, min_protruding_cm=1.0)
                                                for w in walls]).groupby("depth_top_cm")["intersections"].sum()
    all_crossings = plain["intersections"].to_numpy().astype(float)
    counted = prepared.to_numpy().astype(float)
    length, crossing_weight, steep_weight = _orientation_to_face_normal(cereal_plant, tops, 30.0).T
    # Unprepared face: a plane with unit normal n cuts lines of length density L_V with direction u at
    # Q_A = L_V E|u . n| per unit area, so the estimate 2 Q_A (Smith & Guttman 1953, Trans. AIME 197:81-87)
    # divided by L_V is 2 E|u . n| (1 for isotropic lines; common practice in stereology). Tolerance: 4 standard
    # errors of a Poisson count of the crossings (1.1 %, 1.9 % and 4.1 % relative for these faces).
    truth = stand_rld(cereal_plant, tops, tops + 30.0)
    plain_ratio = 2.0 * all_crossings / plain["cell_area_cm2"].to_numpy() / truth
    assert np.all(np.abs(plain_ratio / (2.0 * crossing_weight / length) - 1.0) < 4.0 / np.sqrt(all_crossings))
    # Prepared face: a root crossing at angle theta to the normal protrudes scraped / |cos theta| out of the
    # scraped layer; requiring 1 cm of protruding root from a 0.5 cm layer keeps the crossings with |cos| <= 0.5.
    # Crossings are drawn with weight l |cos| (as above), so the kept share is sum l|cos| [|cos| <= 0.5] / sum l|cos|
    # over the roots of the layer; for isotropic roots (density 2c of |cos| among crossings) it is (0.5 / 1)^2 = 1/4
    # (derivation and isotropic check in test_sampling_field_methods). Kept crossings are a subset of the same
    # faces' crossings: binomial, tolerance 4 standard errors.
    share = steep_weight / crossing_weight
    assert np.all(np.abs(counted / all_crossings - share) < 4.0 * np.sqrt(share * (1 - share) / all_crossings))
    # several-fold below the stand: at most about a third of the true RLD in every layer
    assert np.all(2.0 * counted / plain["cell_area_cm2"].to_numpy() / truth < 0.35)
