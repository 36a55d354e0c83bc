"""Readings against predictions: the one-factor leave-one-out and by-stage predictions
checked against brute force (conditioning afresh without the probe) and scikit-learn."""

from __future__ import annotations

import math

import numpy as np
import pytest
from core_helpers import one_unit_ground
from scipy import stats

from probewise.core.model import Correlation, GroundModel, ThicknessRange, Unit
from probewise.core.posterior import Observations, condition
from probewise.core.readings import (
    check_readings,
    observation_moments,
    summarise_boundary,
)

ORIGIN = (0.0, 0.0)


def three_units(nugget: float = 0.0, pairs=()) -> GroundModel:
    """Invented three thickness units over a basal one."""
    return GroundModel(
        (
            Unit("Fill", ThicknessRange(0.5, 1.0, 3.0), Correlation("exponential", 40.0, nugget)),
            Unit(
                "Clay", ThicknessRange(2.0, 4.0, 8.0, "triangular"), Correlation("gaussian", 80.0)
            ),
            Unit("Sand", ThicknessRange(1.0, 2.0, 4.0, "uniform"), Correlation("spherical", 60.0)),
            Unit("Rock", None, None),
        ),
        thickness_correlation=tuple(pairs),
    )


def random_readings(rng, n_probes: int, ground: GroundModel) -> Observations:
    """Probes reading random non-empty subsets of the boundaries, values from the prior."""
    xy, bnd, tau, probe = [], [], [], []
    for p in range(n_probes):
        at = rng.uniform(0, 150, 2)
        seen = [k for k in range(ground.n_boundaries) if rng.random() < 0.7] or [0]
        for k in seen:
            xy.append(at)
            bnd.append(k)
            tau.append(rng.choice([0.05, 0.2, 0.5]))
            probe.append(p)
    obs = Observations.build(np.array(xy), bnd, tau, np.zeros(len(bnd)), probe)
    mean, _, cov = observation_moments(ground, ORIGIN, obs)
    values = rng.multivariate_normal(mean, cov)
    return Observations.build(obs.xy, obs.boundary, obs.noise_std_m, values, obs.probe)


def subset(obs: Observations, keep: np.ndarray) -> Observations:
    return Observations.build(
        obs.xy[keep], obs.boundary[keep], obs.noise_std_m[keep], obs.value_m[keep], obs.probe[keep]
    )


def brute_force(ground, obs, known_mask_of):
    """For each reading: condition afresh on the readings ``known_mask_of(j)`` selects and
    predict the boundary at the reading's point (mean, variance of the depth)."""
    mean = np.empty(obs.size)
    var = np.empty(obs.size)
    for j in range(obs.size):
        state = condition(ground, ORIGIN, subset(obs, known_mask_of(j)))
        pred = state.predict(obs.xy[j : j + 1])
        mean[j] = pred.mean_m[0, obs.boundary[j]]
        var[j] = pred.var_m2[0, obs.boundary[j]]
    return mean, var


@pytest.mark.parametrize("nugget", [0.0, 0.3])
def test_leave_one_probe_out_equals_refitting_without_the_probe(nugget):
    # Brute force: a fresh Cholesky of the readings of every other probe, per probe.
    rng = np.random.default_rng(1)
    ground = three_units(nugget)
    obs = random_readings(rng, 25, ground)
    checks = check_readings(ground, ORIGIN, obs)
    mean, var = brute_force(ground, obs, lambda j: obs.probe != obs.probe[j])
    np.testing.assert_allclose(checks.predicted_mean_m, mean, rtol=1e-8, atol=1e-8)
    np.testing.assert_allclose(checks.predicted_std_m**2, var, rtol=1e-7, atol=1e-9)
    z = (obs.value_m - mean) / np.sqrt(var + obs.noise_std_m**2)
    np.testing.assert_allclose(checks.z, z, rtol=1e-7, atol=1e-9)


def test_by_stage_equals_conditioning_on_earlier_stages_only():
    rng = np.random.default_rng(2)
    ground = three_units()
    obs = random_readings(rng, 18, ground)
    probe_stage = rng.integers(-1, 3, 18)  # -1: no stage, the earliest information
    stage = probe_stage[obs.probe]
    checks = check_readings(ground, ORIGIN, obs, stage)
    mean, var = brute_force(ground, obs, lambda j: stage < stage[j])
    np.testing.assert_allclose(checks.predicted_mean_m, mean, rtol=1e-8, atol=1e-8)
    np.testing.assert_allclose(checks.predicted_std_m**2, var, rtol=1e-7, atol=1e-9)


def test_one_unit_leave_one_out_matches_scikit_learn_gaussian_process():
    # scikit-learn GaussianProcessRegressor, kernel C * RBF + White with fixed hyperparameters:
    # exp(-3 h^2 / r^2) is the RBF exp(-h^2 / (2 l^2)) with l = r / sqrt(6); the GP has zero
    # mean, so the prior mean is taken off the readings. Its predictive std includes the white
    # noise, i.e. sqrt(v + tau^2), the denominator of z.
    from sklearn.gaussian_process import GaussianProcessRegressor
    from sklearn.gaussian_process.kernels import RBF, ConstantKernel, WhiteKernel

    rng = np.random.default_rng(3)
    mean_m, std_m, range_m, tau = 4.0, 1.2, 60.0, 0.3
    ground = one_unit_ground("gaussian", range_m, mean_m, std_m)
    n = 30
    xy = rng.uniform(0, 200, (n, 2))
    values = mean_m + rng.normal(0, 1.5, n)
    obs = Observations.build(xy, np.zeros(n, int), np.full(n, tau), values, np.arange(n))
    checks = check_readings(ground, ORIGIN, obs)
    kernel = ConstantKernel(std_m**2, "fixed") * RBF(range_m / math.sqrt(6), "fixed")
    kernel += WhiteKernel(tau**2, "fixed")
    for j in range(n):
        keep = np.arange(n) != j
        gp = GaussianProcessRegressor(kernel, optimizer=None, normalize_y=False)
        gp.fit(xy[keep], values[keep] - mean_m)
        mu, sd = gp.predict(xy[j : j + 1], return_std=True)
        assert checks.predicted_mean_m[j] == pytest.approx(mean_m + mu[0], abs=1e-7)
        assert checks.z[j] == pytest.approx((values[j] - mean_m - mu[0]) / sd[0], abs=1e-6)


def test_readings_drawn_from_the_model_are_judged_consistent():
    # z of readings simulated from the model itself: standard normal each, so the share
    # within 1.645 is near 0.9 and the mean z^2 near 1 (many independent sites).
    rng = np.random.default_rng(4)
    ground = three_units()
    zs = []
    for _ in range(30):
        obs = random_readings(rng, 12, ground)
        zs.append(check_readings(ground, ORIGIN, obs).z)
    z = np.concatenate(zs)
    assert np.mean(z**2) == pytest.approx(1.0, abs=0.12)
    assert np.mean(np.abs(z) <= 1.645) == pytest.approx(0.9, abs=0.03)
    # and the z are standard normal (Kolmogorov-Smirnov, scipy.stats)
    assert stats.kstest(z, "norm").pvalue > 0.01


def test_verdicts_tell_over_confidence_from_one_conflicting_reading():
    rng = np.random.default_rng(5)
    ground = one_unit_ground("exponential", 50.0, 5.0, 1.0)
    n = 40
    xy = rng.uniform(0, 300, (n, 2))
    base = Observations.build(xy, np.zeros(n, int), np.full(n, 0.1), np.zeros(n), np.arange(n))
    mean, _, cov = observation_moments(ground, ORIGIN, base)
    good = rng.multivariate_normal(mean, cov)

    def verdict(values):
        obs = Observations.build(xy, np.zeros(n, int), np.full(n, 0.1), values, np.arange(n))
        ids = tuple(f"P{i}" for i in range(n))
        return summarise_boundary(check_readings(ground, ORIGIN, obs), 0, ids).verdict

    assert verdict(good).startswith("consistent")
    wide = mean + 3.0 * (good - mean)  # ground three times as variable as the model says
    assert verdict(wide).startswith("over-confident")
    narrow = mean + 0.3 * (good - mean)
    assert verdict(narrow).startswith("over-cautious")
    one_off = good.copy()
    one_off[7] += 6.0  # one reading of the wrong unit
    assert "conflicts" in verdict(one_off) and "P7" in verdict(one_off)


def test_a_flagged_reading_among_others_is_told_from_one_where_data_is_lacking():
    from probewise.core.readings import reading_note

    ground = one_unit_ground("exponential", 100.0, 5.0, 1.0)
    # a cluster of agreeing readings with one odd one inside it, and a lone far probe
    xy = np.array([[0, 0], [5, 0], [0, 5], [5, 5], [2, 2], [2000, 2000]], float)
    values = np.array([5.0, 5.1, 4.9, 5.0, 8.0, 9.5])
    obs = Observations.build(xy, np.zeros(6, int), np.full(6, 0.1), values, np.arange(6))
    checks = check_readings(ground, ORIGIN, obs)
    assert checks.flag[4] and checks.flag[5]
    assert "nearby readings" in reading_note(checks, 4)
    assert "conceptual range" in reading_note(checks, 5)
    # (the odd reading also pulls its neighbours' predictions: they may be flagged too)
    obs_ok = Observations.build(xy[:4], np.zeros(4, int), np.full(4, 0.1), values[:4], np.arange(4))
    calm = check_readings(ground, ORIGIN, obs_ok)
    assert not calm.flag.any() and all(reading_note(calm, j) == "" for j in range(4))
