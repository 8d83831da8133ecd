"""Resolution independence (time step 1 day against 0.1 day) and reproducibility of the growth engine."""

import numpy as np
import pytest
from scipy import stats

from growth_specs import grow_frame, make_spec, root_class

# -- resolution independence -----------------------------------------------------------------------

#: A small branched system with every process that acts per step: gravitropism, plagiotropism, random
#: turning, both elongation laws, per-root distributions and probabilistic branching.
_BRANCHED = {
    "axis": root_class(initial_angle_from_vertical_deg={"mean": 25.0, "standard_deviation": 10.0},
                       elongation_rate_cm_per_day={"mean": 2.0, "standard_deviation": 0.3}, max_length_cm=60.0,
                       gravitropism_per_cm=0.08, random_turning_deg_per_sqrt_cm=10.0, basal_zone_cm=1.0,
                       apical_zone_cm=3.0, interbranch_distance_cm={"mean": 1.5, "standard_deviation": 0.3},
                       branches=[{"root_class": "lateral", "probability": 0.7}]),
    "lateral": root_class(insertion_angle_deg={"mean": 70.0, "standard_deviation": 10.0},
                          elongation_law="negative_exponential",
                          elongation_rate_cm_per_day={"mean": 0.8, "standard_deviation": 0.2},
                          max_length_cm={"mean": 10.0, "standard_deviation": 3.0}, plagiotropism_per_cm=0.05,
                          preferred_angle_from_vertical_deg=70.0, random_turning_deg_per_sqrt_cm=15.0),
}


def _per_plant_statistics(df, *, rng, points_per_plant=400):
    """Per plant: total length, length-weighted mean depth and deciles of the length-weighted depth.

    The mean uses the exact centroid depth of each straight segment; deciles come from points drawn
    uniformly along the root length (a segment with probability proportional to its length, then a uniform
    position on it), so neither depends on how the roots are cut into segments.
    """
    plant = df["plant_id"].to_numpy()
    length = df["length_cm"].to_numpy()
    z0, z1 = df["z0"].to_numpy(), df["z1"].to_numpy()
    n_plants = plant.max() + 1
    total = np.bincount(plant, weights=length, minlength=n_plants)
    mean_depth = np.bincount(plant, weights=-0.5 * (z0 + z1) * length, minlength=n_plants) / total
    deciles = np.empty((n_plants, 9))
    order = np.argsort(plant, kind="stable")
    bounds = np.searchsorted(plant[order], np.arange(n_plants + 1))
    for p in range(n_plants):  # per-plant loop over a small number of plants
        rows = order[bounds[p]:bounds[p + 1]]
        cum = np.cumsum(length[rows])
        pick = np.searchsorted(cum, rng.uniform(0, cum[-1], points_per_plant), side="right")
        pick = np.minimum(pick, len(rows) - 1)
        t = rng.uniform(0, 1, points_per_plant)
        depth = -(z0[rows][pick] + t * (z1[rows][pick] - z0[rows][pick]))
        deciles[p] = np.quantile(depth, np.linspace(0.1, 0.9, 9))
    return total, mean_depth, deciles


def _branched_stand(step_days, seed, n_plants):
    spec = make_spec(_BRANCHED, emergence=[{"root_class": "axis", "roots_per_event": 2}], days=15.0,
                     step_days=step_days, seed=seed,
                     stand={"rows": 1, "plants_per_row": n_plants, "plant_spacing_cm": 100.0})
    return grow_frame(spec)


def test_branched_system_statistics_agree_between_steps_of_1_and_0_1_day():
    # The plants of a stand are independent replicates (each has its own random stream); different run seeds
    # for the two steps keep the samples independent. Welch's t-test (scipy.stats.ttest_ind) on per-plant
    # statistics and a two-sample Kolmogorov-Smirnov test on the per-plant totals and mean depths
    # (scipy.stats.ks_2samp); every p-value must exceed 1e-3.
    n = 200
    rng = np.random.default_rng(7)
    coarse = _per_plant_statistics(_branched_stand(1.0, 0, n), rng=rng)
    fine = _per_plant_statistics(_branched_stand(0.1, 1, n), rng=rng)
    for name, a, b in (("total length", coarse[0], fine[0]), ("mean depth", coarse[1], fine[1])):
        assert stats.ttest_ind(a, b, equal_var=False).pvalue > 1e-3, name
        assert stats.ks_2samp(a, b).pvalue > 1e-3, name
    for k in range(9):
        assert stats.ttest_ind(coarse[2][:, k], fine[2][:, k], equal_var=False).pvalue > 1e-3, f"decile {k + 1}"


def test_tip_depth_under_gravitropism_and_turning_agrees_between_steps():
    # Straight-from-the-seed axes with gravitropism and random turning only: the mean tip depth after 40 cm
    # must not depend on the time step beyond sampling error (Welch's t-test, scipy.stats; 16000 roots each).
    def tip_depths(step_days, seed):
        cls = root_class(initial_angle_from_vertical_deg=25.0, elongation_rate_cm_per_day=2.0, max_length_cm=100.0,
                         gravitropism_per_cm=0.08, random_turning_deg_per_sqrt_cm=10.0)
        spec = make_spec({"axis": cls}, emergence=[{"root_class": "axis", "roots_per_event": 8000, "event_count": 2}], days=20.0,
                         step_days=step_days, seed=seed, sowing_depth_cm=50.0)
        return -grow_frame(spec).groupby("root_id")["z1"].last().to_numpy()

    coarse, fine = tip_depths(1.0, 1), tip_depths(0.1, 2)
    assert stats.ttest_ind(coarse, fine, equal_var=False).pvalue > 1e-3, (coarse.mean(), fine.mean())


def _linear_branched(step_days, days):
    classes = {
        "axis": root_class(initial_angle_from_vertical_deg=25.0, elongation_rate_cm_per_day=2.0, max_length_cm=60.0,
                           gravitropism_per_cm=0.08, random_turning_deg_per_sqrt_cm=10.0, basal_zone_cm=1.0,
                           apical_zone_cm=3.0, interbranch_distance_cm=1.5, branches=[{"root_class": "lateral"}]),
        "lateral": root_class(insertion_angle_deg=70.0, elongation_rate_cm_per_day=0.8, max_length_cm=10.0,
                              plagiotropism_per_cm=0.05, preferred_angle_from_vertical_deg=70.0,
                              random_turning_deg_per_sqrt_cm=15.0),
    }
    spec = make_spec(classes, emergence=[{"root_class": "axis", "roots_per_event": 3}], days=days,
                     step_days=step_days, seed=1)
    return grow_frame(spec)


@pytest.mark.parametrize("step_days", [1.0, 0.5, 0.1])
@pytest.mark.parametrize("days", [20.0, 13.7])
def test_total_length_of_a_fixed_parameter_system_is_analytic_at_any_step(step_days, days):
    # With fixed parameters and every branch point taken, total length does not depend on the random turning:
    # axes min(axis_rate T, axis_max); lateral j born at t_j = (basal + j d + apical) / axis_rate when
    # basal + j d + apical <= axis_max,
    # length min(lateral_rate (T - t_j), lateral_max) (linear growth, common practice).
    axis_rate, axis_max, basal, apical, d, lateral_rate, lateral_max, n_axes = 2.0, 60.0, 1.0, 3.0, 1.5, 0.8, 10.0, 3
    threshold = basal + apical + d * np.arange(100)
    t_j = threshold[threshold <= axis_max] / axis_rate
    t_j = t_j[t_j < days]
    expected = n_axes * (min(axis_rate * days, axis_max) + np.sum(np.minimum(lateral_rate * (days - t_j), lateral_max)))
    total = _linear_branched(step_days, days)["length_cm"].sum()
    assert total == pytest.approx(expected, rel=1e-9)


# -- reproducibility -------------------------------------------------------------------------------

_COLUMNS = ["order", "root_class", "x0", "y0", "z0", "x1", "y1", "z1", "radius_cm", "length_cm", "birth_day"]


def _stand_spec(rows, plants_per_row, seed=5):
    return make_spec(_BRANCHED, emergence=[{"root_class": "axis", "roots_per_event": 2},
                                           {"root_class": "axis", "first_day": 2.3, "event_count": 2,
                                            "interval_days": 1.5}],
                     days=8.0, step_days=0.5, seed=seed,
                     stand={"rows": rows, "plants_per_row": plants_per_row, "row_spacing_cm": 40.0,
                            "plant_spacing_cm": 15.0})


def test_same_spec_and_seed_give_identical_tables():
    a = grow_frame(_stand_spec(2, 3))
    b = grow_frame(_stand_spec(2, 3))
    assert a.equals(b)
    # The run seed in the spec and the seed override are the same thing.
    c = grow_frame(_stand_spec(2, 3, seed=0), seed=5)
    assert a.equals(c)


def test_a_different_seed_gives_a_different_system():
    a = grow_frame(_stand_spec(1, 2, seed=5))
    b = grow_frame(_stand_spec(1, 2, seed=6))
    assert len(a) != len(b) or not np.allclose(a[["x1", "y1", "z1"]].to_numpy(), b[["x1", "y1", "z1"]].to_numpy())


def _plant(df, k, offset):
    """Plant k's segments in a frame with its seed at the origin and parents as indices within the plant."""
    part = df[df["plant_id"] == k]
    ids = part["segment_id"].to_numpy()
    parent = part["parent_id"].to_numpy()
    local_parent = np.where(parent >= 0, np.searchsorted(ids, parent), -1)
    assert np.all(ids[local_parent[parent >= 0]] == parent[parent >= 0])  # parents lie in the same plant
    out = part[_COLUMNS].reset_index(drop=True).copy()
    for axis, name in enumerate("xyz"):
        out[f"{name}0"] -= offset[axis]
        out[f"{name}1"] -= offset[axis]
    out["local_parent"] = local_parent
    return out


def _assert_same_plant(a, b):
    np.testing.assert_array_equal(a["local_parent"], b["local_parent"])
    np.testing.assert_array_equal(a["order"], b["order"])
    np.testing.assert_array_equal(a["root_class"], b["root_class"])
    for name in ("radius_cm", "birth_day"):
        np.testing.assert_allclose(a[name], b[name], rtol=1e-12)
    # Coordinates (and lengths computed from them) carry the rounding of the plant's offset.
    for name in ("x0", "y0", "z0", "x1", "y1", "z1", "length_cm"):
        np.testing.assert_allclose(a[name], b[name], atol=1e-9)


def _grow_with_positions(spec):
    import rootsim

    system = rootsim.grow(spec, progress=False)
    return system.to_dataframe(), np.asarray(system.metadata["stand"]["plant_positions_cm"])


def test_a_plant_does_not_depend_on_the_size_of_its_stand():
    # Each plant draws from SeedSequence(seed).spawn(n)[k]; spawned children do not depend on n (numpy's
    # SeedSequence spawn keys), so plant 0 alone equals plant 0 of a two-row stand moved to its position.
    single, pos1 = _grow_with_positions(_stand_spec(1, 1))
    stand2, pos2 = _grow_with_positions(_stand_spec(2, 1))
    assert not np.allclose(pos1[0], pos2[0])
    _assert_same_plant(_plant(single, 0, pos1[0]), _plant(stand2, 0, pos2[0]))


def test_plant_k_of_a_six_plant_row_equals_plant_k_of_a_two_row_stand():
    six, pos6 = _grow_with_positions(_stand_spec(1, 6))
    twelve, pos12 = _grow_with_positions(_stand_spec(2, 6))
    # Rows run along y and are spaced in x: plants 0-5 of the two-row stand form its first row.
    np.testing.assert_allclose(pos12[:6, 1:], pos6[:, 1:])
    assert not np.allclose(pos12[:6, 0], pos6[:, 0])
    for k in range(6):
        _assert_same_plant(_plant(six, k, pos6[k]), _plant(twelve, k, pos12[k]))
