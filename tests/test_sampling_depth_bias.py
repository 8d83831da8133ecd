"""On replicate plants of the shipped cereal-like file: wall and tube errors change with depth in the published direction.

Three plants of ``params/cereal_fibrous.toml`` (the ``cereal_plant`` fixture and two more seeds, each one plant at
the stand's spacing, i.e. a periodic field of identical plants, 75 x 20 cm cell) are the replicates; the spread
of the ratios across them is the replicate noise that every depth trend below must exceed.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

import rootsim
from rootsim.sampling import Tube, Wall, sample_tube, sample_wall
from rootsim.sampling.bias_table import bias_table, stand_rld

LAYER_TOPS_CM = np.array([0.0, 30.0, 60.0])
LAYER_CM = 30.0
# Faces across the row every 2 cm over the 20 cm plant spacing: a systematic sample of face positions.
FACE_Y_CM = tuple(np.arange(-9.0, 10.0, 2.0))
EXTRA_SEEDS = (101, 202)
CEREAL = Path(__file__).resolve().parents[1] / "params" / "cereal_fibrous.toml"


@pytest.fixture(scope="module")
def replicate_plants(cereal_plant):
    spec = rootsim.load_spec(CEREAL)
    spec = spec.model_copy(update={"stand": spec.stand.model_copy(update={"rows": 1, "plants_per_row": 1})})
    return [cereal_plant] + [rootsim.grow(spec, seed=seed, progress=False) for seed in EXTRA_SEEDS]


def _wall_ratio_by_layer(system) -> np.ndarray:
    """Wall estimate / stand RLD per 30 cm layer: 2 x all intersections / all face area (Smith & Guttman 1953)."""
    walls = [Wall(y_cm=y, x_min_cm=-37.5, x_max_cm=37.5, depth_cm=90, cell_cm=30, slab_thickness_cm=0.5)
             for y in FACE_Y_CM]
    sums = sample_wall(system, walls=walls).groupby("depth_top_cm")[["intersections", "cell_area_cm2"]].sum()
    estimate = 2.0 * sums["intersections"].to_numpy() / sums["cell_area_cm2"].to_numpy()
    return estimate / stand_rld(system, LAYER_TOPS_CM, LAYER_TOPS_CM + LAYER_CM)


def _twice_mean_abs_cos_to_face_normal(system) -> np.ndarray:
    """2 x length-weighted mean |u . n| per layer (n = face normal, y), by segment midpoint depth."""
    d = np.column_stack([np.asarray(system[f"{a}1"]) - np.asarray(system[f"{a}0"]) for a in "xyz"])
    length = np.linalg.norm(d, axis=1)
    depth = -0.5 * (np.asarray(system["z0"]) + np.asarray(system["z1"]))
    out = []
    for top in LAYER_TOPS_CM:
        m = (depth >= top) & (depth < top + LAYER_CM)
        out.append(2.0 * np.abs(d[m, 1]).sum() / length[m].sum())
    return np.array(out)


@pytest.fixture(scope="module")
def wall_ratios(replicate_plants):
    return np.array([_wall_ratio_by_layer(p) for p in replicate_plants])


def test_wall_estimate_follows_the_orientation_of_the_roots(replicate_plants, wall_ratios):
    # Stereology: a plane with unit normal n cuts lines of length density L_V with direction u at
    # Q_A = L_V E|u . n| per unit area, so the estimate 2 Q_A (Smith & Guttman 1953, Trans. AIME 197:81-87) divided
    # by L_V is 2 E|u . n| (1 for isotropic lines; common practice in stereology). Faces every 2 cm over the plant
    # spacing sample the field systematically, so the measured ratio must agree with the orientation of the roots.
    for plant, ratio in zip(replicate_plants, wall_ratios):
        np.testing.assert_allclose(ratio, _twice_mean_abs_cos_to_face_normal(plant), rtol=0.05)


def test_trench_wall_reads_lower_with_depth(wall_ratios):
    # Vertical trench faces cut the flat roots of the ploughed layer well and miss the steep deep roots, so the
    # ratio of RLD to root intersections per area on the face rises with depth in field maize (Tardieu & Manichon
    # 1986, Agronomie 6:415-425; from memory; Chopart & Siband 1999, Plant Soil 214:61-74,
    # doi:10.1023/A:1004658918388, convert maize counts on profile walls to RLD with a depth-dependent relation;
    # from memory): the wall estimate / true RLD falls with depth. Checked in every replicate plant, with the
    # fall from 0-30 cm to 60-90 cm larger than three standard deviations of its spread across replicates and
    # every replicate's topsoil ratio above every replicate's 60-90 cm ratio.
    top, middle, deep = wall_ratios[:, 0], wall_ratios[:, 1], wall_ratios[:, 2]
    fall = top - deep
    assert np.all(top > middle) and np.all(middle > deep)
    assert fall.mean() > 3.0 * fall.std(ddof=1)
    assert top.min() > deep.max()
    # The flat topsoil over-reads (2 E|u . n| > 1 needs roots flatter than random) and the steep subsoil under-reads.
    assert np.all(top > 1.0) and np.all(deep < 1.0)


def test_tube_with_gap_and_wall_growth_reads_low_in_the_topsoil_and_high_at_depth(replicate_plants):
    # Minirhizotrons read low in the topsoil and high at depth compared with cores (Samson & Sinclair 1994,
    # Plant Soil 161:225-232; Vos & Groenwold 1987; from memory), from poor tube-soil contact near the surface and
    # roots growing along the tube deeper down. Two 45 degree tubes from the row, with a 0.1 cm gap to 30 cm and
    # 10 % wall growth below it: in every replicate plant the image RLD / stand RLD is below 1 at 0-30 cm and above
    # 1 at 60-90 cm, and the spread across replicates does not bridge the difference: every replicate's topsoil
    # ratio is below every replicate's 60-90 cm ratio. (The size of the gap's loss and of the wall-growth gain is
    # checked analytically on isotropic roots in test_sampling_field_methods.py.)
    field = [Tube(x_cm=0, y_cm=y, angle_from_vertical_deg=45, length_cm=130, outer_diameter_cm=5.6,
                  depth_of_field_cm=0.2, window_cm=5, gap_cm=0.1, gap_depth_cm=30, wall_growth_fraction=0.1)
             for y in (-5.0, 5.0)]
    tops, deeps = [], []
    for plant in replicate_plants:
        windows = sample_tube(plant, tubes=field)
        ratio = bias_table(plant, tube=windows, tube_band_cm=30).set_index("depth_top_cm")["ratio_mean"]
        assert ratio.loc[0.0] < 1.0 < ratio.loc[60.0]
        tops.append(ratio.loc[0.0])
        deeps.append(ratio.loc[60.0])
    assert max(tops) < min(deeps)
