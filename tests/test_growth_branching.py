"""Branching rules checked against counting arguments, analytic emergence times and the distributions
of the parameter file (scipy.stats as the independent reference)."""

import numpy as np
import pytest
from scipy import stats

from growth_specs import first_segments, grow_frame, insertion_angles_deg, make_spec, root_class

SOWING_CM = 3.0


def _axis(**extra):
    values = dict(elongation_rate_cm_per_day=2.0, max_length_cm=20.0, basal_zone_cm=1.0, apical_zone_cm=2.0,
                  interbranch_distance_cm=1.5, branches=[{"root_class": "lateral"}])
    values.update(extra)
    return root_class(**values)


def _lateral(**extra):
    values = dict(elongation_rate_cm_per_day=0.5, max_length_cm=3.0, insertion_angle_deg=60.0)
    values.update(extra)
    return root_class(**values)


def _expected_branch_count(length, basal, apical, interbranch):
    # Branch points at basal + j * interbranch (j = 0, 1, ...) carry a lateral once the apical zone has
    # passed them: basal + j * interbranch + apical <= length, so floor((L - basal - apical) / d) + 1 of them
    # (counting argument, common practice for zone-and-spacing branching rules).
    if length < basal + apical:
        return 0
    return int(np.floor((length - basal - apical) / interbranch + 1e-12)) + 1


def _laterals(df):
    firsts = first_segments(df)
    return firsts[firsts["order"] == 1]


@pytest.mark.parametrize("length,basal,apical,interbranch", [(20.0, 1.0, 2.0, 1.5), (15.3, 0.0, 4.2, 0.7),
                                                           (9.0, 3.1, 1.0, 2.0), (4.0, 2.5, 2.0, 1.0)])
def test_lateral_count_and_positions_on_a_finished_axis(length, basal, apical, interbranch):
    spec = make_spec({"axis": _axis(max_length_cm=length, basal_zone_cm=basal, apical_zone_cm=apical,
                                    interbranch_distance_cm=interbranch), "lateral": _lateral()},
                     days=30.0, sowing_depth_cm=SOWING_CM)
    df = grow_frame(spec)
    laterals = _laterals(df)
    n = _expected_branch_count(length, basal, apical, interbranch)
    assert len(laterals) == n
    # The axis is vertical from the seed: insertion depth = sowing depth + basal + j * interbranch.
    depth = np.sort(-laterals["z0"].to_numpy())
    np.testing.assert_allclose(depth, SOWING_CM + basal + interbranch * np.arange(n), atol=1e-9)
    # Each lateral starts on (a point of) the segment named as its parent.
    parent = df.loc[laterals["parent_id"].to_numpy()]
    assert (parent["root_id"].to_numpy() == 0).all()
    lateral_depth = -laterals["z0"].to_numpy()
    assert np.all((lateral_depth >= -parent["z0"].to_numpy() - 1e-9) & (lateral_depth <= -parent["z1"].to_numpy() + 1e-9))
    np.testing.assert_allclose(laterals[["x0", "y0"]].to_numpy(), 0.0, atol=1e-9)


def _lateral_timing(days, step_days):
    """Analytic birth days of the laterals of ``_axis()`` up to ``days`` and the grown lengths per lateral.

    Linear growth: the axis (rate axis_rate) reaches basal + j d + apical at t_j = (basal + j d + apical) / axis_rate
    (when that is within its 20 cm), and lateral j then has length min(lateral_rate (T - t_j), max_len) (common practice).
    Returns (born, expected lengths, grown lengths longest first, grown axis length).
    """
    axis_rate, basal, apical, d, lateral_rate, max_len = 2.0, 1.0, 2.0, 1.5, 0.5, 3.0
    df = grow_frame(make_spec({"axis": _axis(), "lateral": _lateral()}, days=days, step_days=step_days))
    threshold = basal + apical + d * np.arange(20)
    t_j = threshold / axis_rate
    born = t_j[(t_j < days) & (threshold <= 20.0)]
    per_root = df.groupby("root_id")["length_cm"].sum()
    grown = np.sort(per_root.loc[_laterals(df)["root_id"].to_numpy()].to_numpy())[::-1]
    return born, np.minimum(lateral_rate * (days - born), max_len), grown, per_root.loc[0]


@pytest.mark.parametrize("days,step_days", [(5.0, 0.5), (7.3, 0.3), (6.0, 0.25), (4.1, 1.0)])
def test_laterals_emerge_when_the_apical_zone_passes_and_grow_from_then(days, step_days):
    # The chosen run lengths have no lateral born during the final step (that case has its own test).
    born, expected, grown, axis_length = _lateral_timing(days, step_days)
    last_step_start = (np.ceil(days / step_days - 1e-9) - 1) * step_days
    assert not np.any((born > last_step_start) & (born < days)), "scenario must not need the final-step case"
    np.testing.assert_allclose(grown, expected, rtol=1e-9)
    assert axis_length == pytest.approx(min(2.0 * days, 20.0), rel=1e-12)


@pytest.mark.parametrize("days,step_days", [(4.8, 0.4), (5.5, 1.0), (4.0, 0.5)])
def test_lateral_born_during_the_final_step_has_grown_by_the_end(days, step_days):
    # Runs that end while laterals born in their final step are already growing: a lateral born at
    # t_j < T has length lateral_rate (T - t_j) > 0 at T.
    born, expected, grown, _ = _lateral_timing(days, step_days)
    assert len(grown) == len(born)
    np.testing.assert_allclose(grown, expected, rtol=1e-9)


@pytest.mark.parametrize("step_days", [1.0, 0.5])
def test_laterals_of_a_negative_exponential_axis_emerge_at_the_analytic_time(step_days):
    # Axis L(t) = L_max (1 - exp(-r t / L_max)) reaches the threshold h = basal + j d + apical at
    # t_j = -(max_len / rate) ln(1 - h / max_len) (inverting the law); a linear lateral then has
    # lateral_rate (T - t_j).
    axis_rate, axis_max, lateral_rate, days = 3.0, 20.0, 0.5, 20.0
    axis = _axis(elongation_law="negative_exponential", elongation_rate_cm_per_day=axis_rate, max_length_cm=axis_max)
    df = grow_frame(make_spec({"axis": axis, "lateral": _lateral(max_length_cm=100.0)}, days=days,
                              step_days=step_days))
    threshold = 3.0 + 1.5 * np.arange(20)
    threshold = threshold[threshold <= axis_max]
    t_j = -axis_max / axis_rate * np.log(1 - threshold / axis_max)
    t_j = t_j[t_j < days]
    assert np.all(t_j < days - step_days)  # none born in the final step
    per_root = df.groupby("root_id")["length_cm"].sum()
    grown = np.sort(per_root.loc[_laterals(df)["root_id"].to_numpy()].to_numpy())[::-1]
    # 1e-6 days is far below any step; the law itself is exact.
    np.testing.assert_allclose((days - grown / lateral_rate), t_j, atol=1e-6)


def _many_axes(n_axes, axis, laterals: dict, *, seed, days=30.0, angle_deg=30.0):
    axis = dict(axis, initial_angle_from_vertical_deg=angle_deg)
    spec = make_spec({"axis": axis, **laterals},
                     emergence=[{"root_class": "axis", "roots_per_event": n_axes}], days=days, seed=seed,
                     sowing_depth_cm=30.0)
    return grow_frame(spec)


def test_insertion_angles_follow_the_normal_distribution_of_the_spec():
    # The lateral is straight (no tropism, no turning), so its first chord is its initial heading: the angle
    # to the parent chord is the drawn insertion angle. Mean within 4.5 standard errors, s.d. within
    # 4.5 s.e. of a normal s.d. (sd / sqrt(2 (n - 1))), and a Kolmogorov-Smirnov test against scipy's normal.
    mean, sd = 62.0, 9.0
    df = _many_axes(200, _axis(), {"lateral": _lateral(insertion_angle_deg={"mean": mean, "standard_deviation": sd})},
                    seed=21)
    laterals = _laterals(df)
    angles = insertion_angles_deg(df, laterals)
    n = angles.size
    assert n == 200 * _expected_branch_count(20.0, 1.0, 2.0, 1.5)
    assert abs(angles.mean() - mean) < 4.5 * sd / np.sqrt(n)
    assert abs(angles.std(ddof=1) - sd) < 4.5 * sd / np.sqrt(2 * (n - 1))
    assert stats.kstest(angles, stats.norm(mean, sd).cdf).pvalue > 1e-3


@pytest.mark.parametrize("gravitropism,turning", [(0.0, 0.0), (0.2, 20.0)])
def test_fixed_insertion_angle_is_exact_and_laterals_start_on_their_parent_segment(gravitropism, turning):
    # Inclined straight parents, and curving, wandering ones: the angle to the parent segment is the spec's
    # fixed insertion angle, and the lateral's first point lies on that segment (point-segment distance,
    # vector geometry).
    axis = _axis(gravitropism_per_cm=gravitropism, random_turning_deg_per_sqrt_cm=turning)
    df = _many_axes(5, axis, {"lateral": _lateral(insertion_angle_deg=47.0)}, seed=2, angle_deg=35.0)
    laterals = _laterals(df)
    np.testing.assert_allclose(insertion_angles_deg(df, laterals), 47.0, atol=1e-9)
    parent = df.loc[laterals["parent_id"].to_numpy()]
    a, b = parent[["x0", "y0", "z0"]].to_numpy(), parent[["x1", "y1", "z1"]].to_numpy()
    p = laterals[["x0", "y0", "z0"]].to_numpy()
    u = np.clip(np.sum((p - a) * (b - a), axis=1) / np.sum((b - a) ** 2, axis=1), 0.0, 1.0)
    np.testing.assert_allclose(np.linalg.norm(p - (a + u[:, None] * (b - a)), axis=1), 0.0, atol=1e-9)


def test_truncated_normal_insertion_angles_stay_in_range_with_truncnorm_shape():
    # Mean 170, s.d. 20 truncated to the valid range [0, 180]: the draws follow scipy's truncnorm (a clipped
    # normal would instead pile 31 % of them at exactly 180).
    mean, sd = 170.0, 20.0
    df = _many_axes(100, _axis(), {"lateral": _lateral(insertion_angle_deg={"mean": mean, "standard_deviation": sd})},
                    seed=22)
    angles = insertion_angles_deg(df, _laterals(df))
    assert np.all((angles >= 0) & (angles <= 180 + 1e-9))
    ref = stats.truncnorm((0 - mean) / sd, (180 - mean) / sd, loc=mean, scale=sd)
    assert stats.kstest(angles, ref.cdf).pvalue > 1e-3


def test_truncated_normal_radius_stays_positive_with_truncnorm_shape():
    # radius_cm is valid on (0, 5]; mean 0.01, s.d. 0.02 truncates 31 % of the normal's mass below 0.
    mean, sd = 0.01, 0.02
    df = _many_axes(100, _axis(), {"lateral": _lateral(radius_cm={"mean": mean, "standard_deviation": sd})}, seed=23)
    laterals = _laterals(df)
    radius = laterals["radius_cm"].to_numpy()
    assert np.all(radius > 0) and np.all(radius <= 5)
    # One radius per root: every segment of a root carries its root's value.
    assert (df.groupby("root_id")["radius_cm"].nunique() == 1).all()
    ref = stats.truncnorm((0 - mean) / sd, (5 - mean) / sd, loc=mean, scale=sd)
    assert stats.kstest(radius, ref.cdf).pvalue > 1e-3


def _spacings(laterals):
    # Straight parents: distance of each insertion point from its parent's base, differenced along the parent.
    base = laterals[["bx", "by", "bz"]].to_numpy()
    dist = np.linalg.norm(laterals[["x0", "y0", "z0"]].to_numpy() - base, axis=1)
    laterals = laterals.assign(dist=dist).sort_values(["parent_root", "dist"])
    gaps = laterals.groupby("parent_root")["dist"].diff().dropna().to_numpy()
    first = laterals.groupby("parent_root")["dist"].first().to_numpy()
    return gaps, first


def _laterals_with_parent_base(df):
    laterals = _laterals(df).copy()
    firsts = first_segments(df).set_index("root_id")
    parent_root = df.loc[laterals["parent_id"].to_numpy(), "root_id"].to_numpy()
    laterals["parent_root"] = parent_root
    laterals["bx"] = firsts.loc[parent_root, "x0"].to_numpy()
    laterals["by"] = firsts.loc[parent_root, "y0"].to_numpy()
    laterals["bz"] = firsts.loc[parent_root, "z0"].to_numpy()
    return laterals


@pytest.mark.parametrize("distribution,reference", [
    ({"mean": 1.2, "standard_deviation": 0.25}, stats.norm(1.2, 0.25)),
    ({"low": 0.5, "high": 1.5}, stats.uniform(0.5, 1.0)),
])
def test_interbranch_distances_follow_the_spec_distribution(distribution, reference):
    # Long apical-free axes (apical zone 0, max length 40) give ~30 spacings each; each spacing is one draw.
    axis = _axis(max_length_cm=40.0, apical_zone_cm=0.0, basal_zone_cm=2.0, interbranch_distance_cm=distribution)
    df = _many_axes(60, axis, {"lateral": _lateral(max_length_cm=0.5)}, seed=24)
    gaps, first = _spacings(_laterals_with_parent_base(df))
    np.testing.assert_allclose(first, 2.0, atol=1e-9)  # the first branch point is at the basal zone
    assert gaps.size > 1000
    assert stats.kstest(gaps, reference.cdf).pvalue > 1e-3
    assert abs(gaps.mean() - reference.mean()) < 4.5 * reference.std() / np.sqrt(gaps.size)


def test_branch_probabilities_match_multinomial_expectation():
    # Two lateral classes with p = 0.3 and 0.5 (so 0.2 none) at every branch point: the counts follow a
    # multinomial distribution; chi-square goodness of fit and exact binomial tests (scipy.stats).
    axis = _axis(branches=[{"root_class": "lateral_a", "probability": 0.3},
                           {"root_class": "lateral_b", "probability": 0.5}])
    df = _many_axes(300, axis, {"lateral_a": _lateral(), "lateral_b": _lateral()}, seed=25)
    points = 300 * _expected_branch_count(20.0, 1.0, 2.0, 1.5)
    laterals = _laterals(df)
    n_a = int((laterals["root_class"] == "lateral_a").sum())
    n_b = int((laterals["root_class"] == "lateral_b").sum())
    observed = [n_a, n_b, points - n_a - n_b]
    assert observed[2] >= 0
    assert stats.chisquare(observed, np.array([0.3, 0.5, 0.2]) * points).pvalue > 1e-3
    assert stats.binomtest(n_a, points, 0.3).pvalue > 1e-3
    assert stats.binomtest(n_b, points, 0.5).pvalue > 1e-3


def test_spiral_placement_turns_by_the_divergence_angle():
    # Spiral (phyllotactic) placement: successive branch points turn by the divergence angle around the
    # parent axis (137.5 deg is the golden angle, common practice). Vertical parent: azimuths in the
    # horizontal plane.
    axis = _axis(radial_placement="spiral", spiral_divergence_deg=137.5)
    spec = make_spec({"axis": axis, "lateral": _lateral(insertion_angle_deg=90.0)}, days=30.0)
    laterals = _laterals(grow_frame(spec)).sort_values("z0", ascending=False)
    d = laterals[["x1", "y1"]].to_numpy() - laterals[["x0", "y0"]].to_numpy()
    azimuth = np.degrees(np.arctan2(d[:, 1], d[:, 0]))
    turn = np.abs(np.mod(np.diff(azimuth) + 180.0, 360.0) - 180.0)
    np.testing.assert_allclose(turn, 137.5, atol=1e-7)


def test_second_order_laterals_have_order_two_and_count_by_the_same_rule():
    lateral = _lateral(max_length_cm=6.0, elongation_rate_cm_per_day=1.0, basal_zone_cm=0.5, apical_zone_cm=1.0,
                       interbranch_distance_cm=0.8, branches=[{"root_class": "fine"}])
    spec = make_spec({"axis": _axis(), "lateral": lateral, "fine": _lateral(max_length_cm=0.5)}, days=40.0)
    firsts = first_segments(grow_frame(spec))
    n1 = _expected_branch_count(20.0, 1.0, 2.0, 1.5)
    n2 = _expected_branch_count(6.0, 0.5, 1.0, 0.8)
    assert (firsts["order"] == 1).sum() == n1
    assert (firsts["order"] == 2).sum() == n1 * n2
    assert set(firsts.loc[firsts["order"] == 2, "root_class"]) == {"fine"}


def test_emergence_events_bring_their_roots_at_their_days_and_depths():
    # event_count events every interval_days from first_day, roots_per_event each, at depth_cm shifted by
    # depth_step_cm per event; each root then grows r (T - t_event) (linear law). With no azimuth jitter the
    # roots of one event are spread evenly: 360 / roots_per_event apart.
    rate, days, first, interval, count, per_event = 1.5, 12.0, 1.2, 2.5, 3, 4
    spec = make_spec({"seminal": root_class(initial_angle_from_vertical_deg=40.0, elongation_rate_cm_per_day=rate)},
                     emergence=[{"root_class": "seminal", "first_day": first, "event_count": count,
                                 "roots_per_event": per_event, "interval_days": interval, "depth_cm": 2.0,
                                 "depth_step_cm": 1.5, "azimuth_jitter_deg": 0.0}],
                     days=days, step_days=0.5)
    df = grow_frame(spec)
    firsts = first_segments(df)
    assert len(firsts) == count * per_event
    event_day = first + interval * np.arange(count)
    depth = -firsts["z0"].to_numpy()
    np.testing.assert_allclose(np.sort(depth), np.repeat(2.0 + 1.5 * np.arange(count), per_event), atol=1e-12)
    per_root = df.groupby("root_id")["length_cm"].sum().loc[firsts["root_id"].to_numpy()].to_numpy()
    event_of = np.rint((depth - 2.0) / 1.5).astype(int)
    np.testing.assert_allclose(per_root, rate * (days - event_day[event_of]), rtol=1e-12)
    d = firsts[["x1", "y1"]].to_numpy() - firsts[["x0", "y0"]].to_numpy()
    azimuth = np.degrees(np.arctan2(d[:, 1], d[:, 0]))
    for e in range(count):
        a = np.sort(np.mod(azimuth[event_of == e], 360.0))
        gaps = np.diff(np.r_[a, a[0] + 360.0])
        np.testing.assert_allclose(gaps, 360.0 / per_event, atol=1e-7)


def test_upward_depth_steps_stop_at_the_soil_surface():
    # Shoot nodes step upward (negative depth_step_cm); a node above ground would put roots in the air, so
    # every root starts at or below the surface.
    spec = make_spec({"nodal": root_class(initial_angle_from_vertical_deg=70.0)},
                     emergence=[{"root_class": "nodal", "event_count": 5, "interval_days": 1.0, "roots_per_event": 3,
                                 "depth_cm": 2.0, "depth_step_cm": -0.8}], days=10.0)
    df = grow_frame(spec)
    assert np.all(df[["z0", "z1"]].to_numpy() <= 0.0)
    np.testing.assert_allclose(np.sort(np.unique(np.round(-first_segments(df)["z0"].to_numpy(), 9))),
                               [0.0, 0.4, 1.2, 2.0])


def test_roots_older_than_their_lifespan_are_left_out_with_their_laterals():
    # Laterals born at t_j (as above) with a 4-day lifespan: at T only those with t_j + 4 > T remain, each of
    # length lateral_rate (T - t_j). An axis with a 10-day lifespan takes all its laterals with it.
    lateral = _lateral(max_length_cm=100.0, lifespan_days=4.0)
    axis = _axis(max_length_cm=60.0)
    days = 20.0
    df = grow_frame(make_spec({"axis": axis, "lateral": lateral}, days=days, step_days=0.5))
    laterals = _laterals(df)
    j = np.arange(100)
    t_j = (3.0 + 1.5 * j) / 2.0
    t_j = t_j[(3.0 + 1.5 * j <= 60.0) & (t_j < days)]
    alive = t_j[t_j + 4.0 > days]
    per_root = df.groupby("root_id")["length_cm"].sum()
    lengths = np.sort(per_root.loc[laterals["root_id"].to_numpy()].to_numpy())[::-1]
    np.testing.assert_allclose(lengths, 0.5 * (days - alive), rtol=1e-9)
    np.testing.assert_array_equal(df["segment_id"], np.arange(len(df)))
    assert df["parent_id"].max() < len(df)
    short_lived = grow_frame(make_spec({"axis": _axis(lifespan_days=10.0), "lateral": _lateral()}, days=12.0))
    assert len(short_lived) == 0
