"""Fitting the model to the readings: the log-likelihood against scipy.stats, its gradient
against finite differences, recovery of known parameters from simulated readings."""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest
from fit_helpers import TRUTH, simulated_readings, true_ground, two_units
from scipy.optimize import approx_fprime
from scipy.stats import multivariate_normal
from test_core_readings import random_readings, three_units
from threadpoolctl import threadpool_limits

from probewise.core.fit import _Problem, fit_model, log_likelihood, lonely_maximum_warnings
from probewise.core.posterior import Observations
from probewise.core.readings import observation_moments

ORIGIN = (0.0, 0.0)


@pytest.fixture(autouse=True)
def one_blas_thread():
    # Many small factorisations: BLAS threads only fight over a busy machine's cores.
    with threadpool_limits(limits=1, user_api="blas"):
        yield


def test_log_likelihood_matches_scipy_multivariate_normal():
    # scipy.stats.multivariate_normal.logpdf with the model's mean and K + R.
    ground = three_units(0.2, ((0, 1, -0.4),))
    obs = random_readings(np.random.default_rng(0), 20, ground)
    mean, _, cov = observation_moments(ground, ORIGIN, obs)
    expected = multivariate_normal(mean, cov).logpdf(obs.value_m)
    assert log_likelihood(ground, ORIGIN, obs) == pytest.approx(expected, rel=1e-10)


def test_gradient_matches_finite_differences():
    ground = three_units(0.0, ((0, 1, -0.3),))
    obs = random_readings(np.random.default_rng(1), 30, ground)
    problem = _Problem(ground, ORIGIN, obs)
    free = np.array([True, True, False])
    grad_of = ([0, 1, 2], [(0, 1), (1, 2)])

    def value(x, grad=False):
        pairs = ((0, 1, x[9]), (1, 2, x[10]))
        out = problem.evaluate(
            np.exp(x[0:9:3]), np.exp(x[1:9:3]), x[2:9:3], pairs, free, np.zeros(3),
            grad_of if grad else None,
        )  # fmt: skip
        return out[2] if grad else out[0]

    x = np.array([0.2, np.log(50), 0.2, -0.1, np.log(90), 0.1, 0.0, np.log(30), 0.3, -0.4, 0.2])
    np.testing.assert_allclose(value(x, True), approx_fprime(x, value, 1e-6), rtol=2e-4, atol=1e-4)


def test_profiled_fit_equals_the_likelihood_of_the_adopted_model():
    # The fast path (shifts profiled, cached correlations) against the plain likelihood of
    # the model with the fitted values written in; and the fit is no worse than the start.
    obs = simulated_readings(60, seed=11)
    fit = fit_model(two_units(), ORIGIN, obs)
    assert fit.log_likelihood == pytest.approx(log_likelihood(fit.ground, ORIGIN, obs), rel=1e-9)
    assert fit.log_likelihood >= fit.log_likelihood_conceptual
    assert fit.log_likelihood_conceptual == pytest.approx(
        log_likelihood(two_units(), ORIGIN, obs), rel=1e-12
    )


def test_fit_recovers_known_parameters_from_simulated_readings():
    # 150 probes reading both boundaries, four independent sites (seeds). Tolerances: about
    # three times the spread of the mean of four fits seen over eight seeds (ranges and
    # nuggets trade off and are the least certain); each fit alone within wider limits.
    fits = [fit_model(two_units(), ORIGIN, simulated_readings(150, seed)) for seed in range(4)]
    for fit in fits:
        assert all(u.fitted for u in fit.units)
        for i, u in enumerate(fit.units):
            assert u.spread_multiplier == pytest.approx(TRUTH["spread_multiplier"][i], rel=0.25)
            assert 0.5 <= u.range_m / TRUTH["range_m"][i] <= 2.0
            assert u.mean_shift_m == pytest.approx(TRUTH["mean_shift_m"][i], abs=0.35)
        assert fit.pairs[0][2] == pytest.approx(TRUTH["rho"], abs=0.15)
    mean = {
        key: np.mean([[getattr(u, key) for u in f.units] for f in fits], axis=0)
        for key in ("spread_multiplier", "range_m", "nugget", "mean_shift_m")
    }
    np.testing.assert_allclose(mean["spread_multiplier"], TRUTH["spread_multiplier"], rtol=0.1)
    np.testing.assert_allclose(mean["range_m"], TRUTH["range_m"], rtol=0.3)
    np.testing.assert_allclose(mean["nugget"], TRUTH["nugget"], atol=0.15)
    np.testing.assert_allclose(mean["mean_shift_m"], TRUTH["mean_shift_m"], atol=0.15)
    assert np.mean([f.pairs[0][2] for f in fits]) == pytest.approx(TRUTH["rho"], abs=0.1)
    # the truth explains the readings better than the conceptual model, the fit at least as well
    obs = simulated_readings(150, 0)
    assert fits[0].log_likelihood >= log_likelihood(true_ground(), ORIGIN, obs) - 1e-6


def test_units_with_too_few_readings_keep_the_model_values():
    obs = simulated_readings(150, 5)
    keep = (obs.boundary == 0) | (obs.probe < 5)  # only 5 probes read the second boundary
    few = Observations.build(
        obs.xy[keep], obs.boundary[keep], obs.noise_std_m[keep], obs.value_m[keep],
        obs.probe[keep],
    )  # fmt: skip
    fit = fit_model(two_units(), ORIGIN, few)
    assert fit.units[0].fitted and not fit.units[1].fitted
    clay = two_units().units[1]
    assert fit.units[1].range_m == clay.correlation.range_m
    assert fit.units[1].spread_multiplier == 1.0 and fit.units[1].mean_shift_m == 0.0
    assert fit.pairs == ()


def test_one_deep_reading_behind_the_maximum_is_warned_about():
    ground = two_units()  # Fill: likely 1.5 m, max 3.0 m
    depths = [1.2, 1.4, 1.6, 1.3, 1.5, 2.9]  # one probe near the maximum
    n = len(depths)
    obs = Observations.build(np.zeros((n, 2)), np.zeros(n, int), np.full(n, 0.1), depths,
                             np.arange(n))  # fmt: skip
    warnings = list(lonely_maximum_warnings(ground, obs, tuple(f"P{i}" for i in range(n))))
    assert len(warnings) == 1 and "P5" in warnings[0] and warnings[0].startswith("Fill")
    both = dataclasses.replace(obs, value_m=np.array([1.2, 1.4, 2.4, 1.3, 1.5, 2.9]))
    assert list(lonely_maximum_warnings(ground, both)) == []
