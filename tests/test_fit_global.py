"""Global fit: recovery of two known parameters within the reported intervals, several dates, cores at their
positions, trait targets, bad observation files; interval RLD by bincount against per-segment clipping."""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest

from rootsim.cli import main
from rootsim.fitting import FitParameter, interval_rld, read_observations
from rootsim.growth import grow
from rootsim.sampling import sample_cores
from rootsim.spec import parse_spec
from rootsim.errors import RootsimError
from rootsim.study.global_fit import fit_global, parse_trait_target
from test_fitting import SPEC

RATE = "root_classes.axis.elongation_rate_cm_per_day"
ANGLE = "root_classes.axis.initial_angle_from_vertical_deg"


def test_interval_rld_by_bincount_matches_per_segment_clipping():
    # Reference: the definition of RLD with each segment's length shared in proportion to its depth range inside
    # the interval (uniform spread along a straight segment), computed one segment at a time.
    rng = np.random.default_rng(8)
    z0 = -rng.uniform(0, 40, 300)
    z1 = z0 - rng.normal(0, 6, 300)
    z1[:20] = z0[:20]  # horizontal segments
    z0[20:25] = -10.0  # ... some exactly on a boundary
    z1[20:25] = -10.0
    length = rng.uniform(0.1, 3.0, 300)
    top = np.array([0.0, 5.0, 10.0, 12.5, 30.0])
    bottom = np.array([5.0, 10.0, 12.5, 30.0, 33.0])
    expected = np.zeros(top.size)
    for a, b, w in zip(-z0, -z1, length):
        lo, hi = min(a, b), max(a, b)
        for k, (t, u) in enumerate(zip(top, bottom)):
            if hi == lo:
                expected[k] += w * (t <= lo < u)
            else:
                expected[k] += w * max(0.0, min(hi, u) - max(lo, t)) / (hi - lo)
    got = interval_rld({"z0": z0, "z1": z1, "length_cm": length}, top, bottom, area_cm2=7.0)
    np.testing.assert_allclose(got, expected / ((bottom - top) * 7.0), rtol=1e-12, atol=1e-15)


def _stand_observations(truth, days, seeds, rng, relative_sd=0.1, floor=0.05):
    """Stand-mean RLD of the stands grown with ``seeds`` plus measurement noise of SD floor * max + relative_sd *
    RLD; the stated SD is that of the reported mean, sqrt(noise SD^2 + between-stand variance / stands), as a
    field team would report it."""
    rows = []
    top = np.arange(0.0, 30.0, 3.0)
    for day in days:
        stand = truth.with_overrides(duration_days=day)
        stands = np.array([interval_rld(grow(stand, seed=s), top, top + 3.0, area_cm2=3000.0) for s in seeds])
        rld = stands.mean(axis=0)
        noise = floor * rld.max() + relative_sd * rld
        sd = np.sqrt(noise ** 2 + stands.var(axis=0, ddof=1) / len(stands))
        rows.append(pd.DataFrame({"day": day, "x_cm": np.nan, "y_cm": np.nan, "diameter_cm": np.nan,
                                  "depth_top_cm": top, "depth_bottom_cm": top + 3.0,
                                  "rld_cm_per_cm3": rld + rng.normal(0, noise), "rld_standard_deviation_cm_per_cm3": sd}))
    return pd.concat(rows, ignore_index=True)


def test_global_fit_recovers_two_parameters_within_its_intervals():
    # Observations made with known values (2.0 cm/day, 30 degrees) on other seeds (eight stands), at two dates,
    # plus measurement noise of the stated SD; the fit's 95 % profile-likelihood intervals must hold the truth and
    # be informative (narrower than 40 % of the search box).
    # Pass rates by hand over 12 observation sets (stands 300+8k.., noise rng 4+k, k = 0..11): all checks held in
    # 11 of 12 (set 6 missed both truths: rate 1.849-1.959, angle 4.4-23.9; with two 95 % intervals a set fails
    # a check roughly one time in ten); intervals 0.11-0.21 cm/day and 14-33 degrees wide. On this test's set with other fit seeds
    # (1, 2, 5, 7, 11, 13) 5 of 6 passed (seed 1: rate 2.008-2.143). Before the profile was re-optimised and the
    # simulation noise weighted, 5 of 16 sets passed with the noisier data (relative SD 0.1) and 4 of 10 with
    # replicates=4 (the angle's held-at-optimum interval covered the truth 11 of 16 times). With that noisier data
    # the honest angle interval is too wide to be informative in 7 of 16 sets, hence the better data here.
    truth = parse_spec(SPEC).with_overrides(time_step_days=1.0)
    observed = _stand_observations(truth, (8.0, 12.0), range(300, 308), np.random.default_rng(4),
                                   relative_sd=0.05, floor=0.025)
    params = [FitParameter(RATE, 0.5, 4.0), FitParameter(ANGLE, 0.0, 85.0)]
    start = truth  # the start does not matter for a global search
    result = fit_global(start, observed, params, replicates=4, population=4, generations=4, progress=False)
    for p, value in ((params[0], 2.0), (params[1], 30.0)):
        low, high = result.intervals[p.key_path]
        assert low <= value <= high
        assert low <= result.values[p.key_path] <= high
        assert high - low < 0.4 * (p.high - p.low)
    assert set(result.profile["day"]) == {8.0, 12.0}
    # each interval end is bracketed by evaluated profile points: a profile value beyond it rises more than 3.84
    # above the minimum unless the end is the bound (the end is a crossing, not an extrapolation)
    assert set(result.history["stage"]) == {"search", "polish", "profile"}
    for p in params:
        low, high = result.intervals[p.key_path]
        points = result.likelihood_profiles[result.likelihood_profiles["parameter"] == p.key_path]
        outside = points[points["profile_objective"] > result.objective + 3.841458820694124]
        assert low == p.low or (outside["value"] <= low).any()
        assert high == p.high or (outside["value"] >= high).any()


def test_global_fit_cli_with_cores_and_a_trait_target(tmp_path):
    # Cores taken as a field team would (two positions, 4 cm increments, four replicate stands), reported with
    # the SD between stands; plus the stands' mean maximum rooting depth as a trait target. The fit simulates
    # the same cores and must bracket the rate the observations were made with (2.0 cm/day).
    # Pass rates by hand: all checks held for 12 of 12 core stand sets (seeds 400+4k.., k = 0..11; intervals
    # 0.09-0.17 cm/day wide). Before the profile was re-optimised and the simulation noise weighted: 5 of 6.
    from rootsim.analysis import root_traits

    truth = parse_spec(SPEC).with_overrides(time_step_days=1.0)
    frames, depths = [], []
    for s in (400, 401, 402, 403):
        system = grow(truth, seed=s)
        frames.append(sample_cores(system, cores=["0,0,6,24,4", "25,0,6,24,4"]))
        depths.append(root_traits(system)["max_depth_cm"])
    cores = pd.concat(frames, ignore_index=True)
    spread = cores.groupby(["core_id", "depth_top_cm"])["rld_cm_per_cm3"].transform("std")
    cores["rld_standard_deviation_cm_per_cm3"] = spread.clip(lower=0.002)
    cores.to_csv(tmp_path / "cores.csv", index=False)
    spec_file = tmp_path / "trial.toml"
    import tomlkit

    spec_file.write_text("# comments survive\n" + tomlkit.dumps({**SPEC, "run": {**SPEC["run"], "time_step_days": 1.0}}))
    out = tmp_path / "fit"
    target_depth_cm, target_standard_deviation_cm = np.mean(depths), max(np.std(depths, ddof=1), 0.5)
    target = f"max_depth_cm={target_depth_cm:.3f}:{target_standard_deviation_cm:.3f}"
    assert main(["fit", str(spec_file), "--observed", str(tmp_path / "cores.csv"), "--observed-as", "cores",
                 "--method", "global", "--param", f"{RATE}=0.5:4", "--target", target,
                 "--population", "6", "--generations", "6", "--replicates", "2", "--out", str(out)]) == 0
    report = json.loads((out / "fit.json").read_text())
    low, high = report["interval_95"][RATE]
    assert low <= 2.0 <= high and high - low < 0.4 * 3.5
    assert (out / "fitted_spec.toml").read_text().startswith("# comments survive")
    profile = pd.read_csv(out / "fit_profile.csv")
    assert {"x_cm", "y_cm", "rld_fitted_cm_per_cm3"} <= set(profile.columns) and len(profile) == 12
    assert (out / "fit_observed_vs_fitted.png").stat().st_size > 1000
    likelihood = pd.read_csv(out / "fit_likelihood_profiles.csv")
    assert set(likelihood["parameter"]) == {RATE} and report["noise_stands"] == 8
    # the fitted stands reproduce the trait target: within its value +- 2 standard deviations (the target's SD
    # is that of single stands; the fit reports the mean of its replicate stands, whose spread is smaller)
    fitted_depth_cm = report["fitted_traits"]["max_depth_cm"]
    assert abs(fitted_depth_cm - target_depth_cm) <= 2 * target_standard_deviation_cm, (fitted_depth_cm, target)


@pytest.mark.parametrize("text, words", [
    ("depth_top_cm,depth_bottom_cm,rld_cm_per_cm3\n", ["no rows"]),
    ("", ["empty"]),
    ("depth_top_cm,rld_cm_per_cm3\n0,1\n", ["missing column", "depth_bottom_cm"]),
    ("depth_top_cm,depth_bottom_cm,rld_cm_per_cm3\n0,10,1\n5,15,1\n", ["overlapping", "0-10", "5-15"]),
    ("depth_top_cm,depth_bottom_cm,rld_cm_per_cm3,rld_standard_deviation_cm_per_cm3\n0,10,1,0\n", ["rld_standard_deviation_cm_per_cm3"]),
])
def test_bad_observation_files_are_one_line_errors(tmp_path, capsys, text, words):
    path = tmp_path / "obs.csv"
    path.write_text(text)
    for method in ("local", "global"):
        assert main(["fit", str(tmp_path / "none.toml"), "--observed", str(path), "--param", f"{RATE}=1:2",
                     "--method", method, "--out", str(tmp_path / "out")]) == 2
        capsys.readouterr()
    spec_file = tmp_path / "trial.toml"
    import tomlkit

    spec_file.write_text(tomlkit.dumps(SPEC))
    for method in ("local", "global"):
        assert main(["fit", str(spec_file), "--observed", str(path), "--param", f"{RATE}=1:2",
                     "--method", method, "--out", str(tmp_path / "out")]) == 2
        err = capsys.readouterr().err
        assert err.startswith("error: ") and err.count("\n") == 1 and str(path) in err
        for w in words:
            assert w in err
    assert not (tmp_path / "out").exists()


def test_observations_average_replicates_and_parse_targets(tmp_path):
    path = tmp_path / "o.csv"
    path.write_text("day,depth_top_cm,depth_bottom_cm,rld_cm_per_cm3,rld_standard_deviation_cm_per_cm3\n"
                    "10,0,10,1.0,0.2\n10,0,10,3.0,0.2\n20,0,10,0.5,0.1\n")
    table = read_observations(path)
    assert table["rld_cm_per_cm3"].tolist() == [2.0, 0.5]
    assert table["rld_standard_deviation_cm_per_cm3"].tolist() == pytest.approx([0.2 / np.sqrt(2), 0.1])  # SD of a mean of two
    assert parse_trait_target("d50_depth_cm=22:2").standard_deviation == 2.0
    for bad in ("d50_depth_cm=22", "d50_depth_cm=22:0", "d50_depth_cm=22:-1", "=22:2", "d50_depth_cm=22:inf"):
        with pytest.raises(RootsimError, match=r"^--target '.*': expected TRAIT=VALUE:STANDARD_DEVIATION with "
                                               r"STANDARD_DEVIATION > 0, e\.g\. d50_depth_cm=22:2$"):
            parse_trait_target(bad)


def test_param_and_target_share_one_parser():
    from rootsim.fitting import parse_fit_parameter, parse_named_pair

    assert parse_named_pair(" a.b = 1:2 ", option="--x", form="F", example="E", valid=lambda a, b: True) \
        == ("a.b", 1.0, 2.0)
    for bad in ("a.b", "a.b=1", "=1:2", "a.b=1:x", "a.b=nan:2"):
        with pytest.raises(RootsimError, match=r"^--x '.*': expected F, e\.g\. E$"):
            parse_named_pair(bad, option="--x", form="F", example="E", valid=lambda a, b: True)
    # both options go through it: the same malformed text gives the same shape of message
    with pytest.raises(RootsimError, match=r"^--param 'a\.b=2:1': expected KEY\.PATH=LOW:HIGH with LOW < HIGH"):
        parse_fit_parameter("a.b=2:1")
    assert parse_trait_target("  d50_depth_cm =22:2") == parse_trait_target("d50_depth_cm=22:2")


# --- profile likelihood on analytic models (rootsim.study.profile_likelihood) ---------------------------------------

def test_profile_interval_of_a_linear_model_is_the_exact_interval():
    # For a linear model with known SDs the profile of chi2 is exactly quadratic and its 95 % interval is the
    # classical theta_k +- sqrt(3.84 * C_kk), C = (X' W X)^-1 (weighted least squares; Venzon & Moolgavkar 1988,
    # doi:10.2307/2347496; common practice). Intercept and slope over x = 5..15 are strongly correlated, so
    # holding the other parameter at its optimum instead of re-optimising it gives an interval about 3x too
    # narrow, far outside the tolerance used here; the ends must not be set by the profile grid either.
    from rootsim.study.profile_likelihood import fit_and_profile

    x = np.linspace(5.0, 15.0, 12)
    sd = np.full(x.size, 0.5)
    observed = 2.0 + 0.5 * x + np.random.default_rng(11).normal(0.0, sd)
    low, span = np.array([-5.0, -1.0]), np.array([20.0, 4.0])

    def predicted_means(units):
        theta = low + units * span
        return theta[:, :1] + theta[:, 1:] * x[None, :]

    fit = fit_and_profile(predicted_means, observed, sd, dimension=2, seed=3, population=6, generations=8, grid=7)
    design = np.column_stack([np.ones_like(x), x]) / sd[:, None]
    exact, *_ = np.linalg.lstsq(design, observed / sd, rcond=None)
    covariance = np.linalg.inv(design.T @ design)
    assert np.all(np.abs(low + fit.best * span - exact) <= 2e-3 * span), (low + fit.best * span, exact)
    for k in range(2):
        half = np.sqrt(3.841458820694124 * covariance[k, k])
        held = np.sqrt(3.841458820694124 / (design.T @ design)[k, k])  # the other parameter held at the optimum
        assert half > 2.5 * held
        got = low[k] + np.array(fit.intervals[k]) * span[k]
        np.testing.assert_allclose(got, [exact[k] - half, exact[k] + half], atol=0.01 * half)
    assert fit.objective == pytest.approx(np.sum((design @ exact - observed / sd) ** 2), abs=1e-3)


def _exponential_fit_coverage(sets, *, weigh_simulation_noise):
    """Coverage of the truth by the 95 % intervals of a two-parameter RLD-like profile a * exp(-depth / b) fitted
    to ``sets`` observation sets, where the 'simulation' is the model plus the mean of two stands' noise drawn
    once per fit (common random numbers, as the grown stands)."""
    from rootsim.study.profile_likelihood import fit_and_profile

    depth = np.arange(1.5, 30.0, 3.0)
    low, span, truth = np.array([0.5, 3.0]), np.array([3.5, 27.0]), np.array([2.0, 10.0])
    replicates = 2

    def model(theta):
        return theta[:, :1] * np.exp(-depth[None, :] / theta[:, 1:])

    clean = model(truth[None, :])[0]
    stand_sd = 0.15 * clean + 0.03
    sd = 0.05 * clean.max() + 0.1 * clean
    covered = np.zeros(2, int)
    for s in range(sets):
        rng = np.random.default_rng([2026, s])
        observed = clean + rng.normal(0.0, sd)
        stand_noise = rng.normal(0.0, 1.0, (replicates, depth.size)) * stand_sd
        more_stands = rng.normal(0.0, 1.0, (8, depth.size)) * stand_sd

        def predicted_means(units):
            return model(low + units * span) + stand_noise.mean(axis=0)

        def simulation_variance(unit):  # between-stand variance of 8 stands / replicates
            return more_stands.var(axis=0, ddof=1) / replicates

        fit = fit_and_profile(predicted_means, observed, sd, dimension=2, seed=s, population=4, generations=4,
                              simulation_variance=simulation_variance if weigh_simulation_noise else None)
        unit_truth = (truth - low) / span
        covered += [lo <= unit_truth[k] <= hi for k, (lo, hi) in enumerate(fit.intervals)]
    return covered


def test_profile_intervals_cover_the_truth_at_their_nominal_rate():
    # 200 observation sets of an analytic model with known observation and simulation noise: each parameter's
    # 95 % interval must hold the truth in a number of sets inside the binomial 99 % band of 0.95 (181..197 of
    # 200; binomial distribution). Counted when written: 190 and 190 of 200. Without the simulation noise in the
    # weights the same sets gave 177 and 181 (358 of 400 intervals, below the band 368..390 of 400): the
    # correction is what brings the coverage up, not a wide band.
    from scipy.stats import binom

    low_count, high_count = binom.interval(0.99, 200, 0.95)
    covered = _exponential_fit_coverage(200, weigh_simulation_noise=True)
    assert all(low_count <= c <= high_count for c in covered), covered


def test_side_by_side_minimisations_equal_one_at_a_time_and_pass_errors_on():
    # Batching the requests of several minimisations must not change any of them (each path depends only on its
    # own objective values): compared with running each alone through the same bounded Nelder-Mead. Errors on
    # either side end the run with the error instead of hanging.
    from rootsim.study.profile_likelihood import _bounded_nelder_mead, run_side_by_side

    centres = [np.array([0.2, 0.7]), np.array([0.9, 0.1]), np.array([0.5, 0.5])]
    batches = []

    def evaluate(points, tags):
        batches.append(len(points))
        return [float(np.sum((x - centres[t]) ** 2) + 0.1 * np.sin(9 * x[0])) for x, t in zip(points, tags)]

    def job(i):
        return lambda ask: _bounded_nelder_mead(lambda x: ask(x, i), np.full(2, 0.4), step=0.05, fatol=1e-6,
                                                 maxfev=80 + 20 * i)

    together = run_side_by_side([job(i) for i in range(3)], evaluate)
    assert max(batches) == 3 and len(batches) < sum(80 + 20 * i for i in range(3))
    for i in range(3):
        alone = run_side_by_side([job(i)], evaluate)[0]
        np.testing.assert_array_equal(alone[0], together[i][0])
        assert alone[1] == together[i][1]

    def failing_evaluate(points, tags):
        raise RootsimError("no stands")

    with pytest.raises(RootsimError, match="no stands"):
        run_side_by_side([job(i) for i in range(3)], failing_evaluate)

    def failing_job(ask):
        ask(np.zeros(2), 0)
        raise ValueError("bad job")

    with pytest.raises(ValueError, match="bad job"):
        run_side_by_side([job(0), failing_job], evaluate)


def test_global_fit_is_the_same_on_one_and_two_workers():
    # The profile minimisations hand their requests over in rounds, one batch per round, on one process pool kept
    # open for the whole fit; the result must not depend on the number of workers (same values, intervals and
    # every evaluated point).
    from test_fitting import observed_profile

    truth = parse_spec(SPEC).with_overrides(time_step_days=1.0)
    observed = observed_profile(truth, range(500, 504))
    observed["rld_standard_deviation_cm_per_cm3"] = 0.001 + 0.1 * observed["rld_cm_per_cm3"]
    observed = observed.assign(day=np.nan, x_cm=np.nan, y_cm=np.nan, diameter_cm=np.nan)
    params = [FitParameter(RATE, 0.5, 4.0), FitParameter(ANGLE, 0.0, 85.0)]
    one, two = (fit_global(truth, observed, params, replicates=2, population=3, generations=2, workers=w,
                           progress=False) for w in (1, 2))
    assert one.values == two.values and one.intervals == two.intervals
    pd.testing.assert_frame_equal(one.history, two.history)
    pd.testing.assert_frame_equal(one.likelihood_profiles, two.likelihood_profiles)
    assert (one.history["stage"] == "profile").sum() > 20  # many small batches went through the one pool
