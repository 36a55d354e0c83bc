"""Locally present units: the thickness prior of "absent with 1 - p, else the range".

The moments of the mixture are checked against numerical integration of the mixture's
density (scipy.stats for the beta / triangular / uniform densities of the shapes, integrated
by scipy.integrate.quad) and against a Monte Carlo sample drawn with numpy.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import integrate, stats

from probewise.core.bounds import depth_bounds
from probewise.core.field import prior_boundary_moments, unit_fields
from probewise.core.model import Correlation, GroundModel, Polygon, ThicknessRange, Unit, Zone
from probewise.core.priors import presence_moments, thickness_moments


def _scipy_distribution(rng: ThicknessRange):
    """The shape's distribution in scipy.stats (PERT: beta with lambda 4, scaled to [a, c])."""
    a, b, c = rng.min_m, rng.likely_m, rng.max_m
    if rng.shape == "uniform":
        return stats.uniform(a, c - a)
    if rng.shape == "triangular":
        return stats.triang((b - a) / (c - a), loc=a, scale=c - a)
    alpha = 1 + 4 * (b - a) / (c - a)
    beta = 1 + 4 * (c - b) / (c - a)
    return stats.beta(alpha, beta, loc=a, scale=c - a)


def _mixture_moments_by_quadrature(rng: ThicknessRange, p: float) -> tuple[float, float]:
    """Mean and std of the mixture: the point mass at 0 adds nothing to E[T] or E[T^2]."""
    dist = _scipy_distribution(rng)
    m1 = integrate.quad(lambda t: t * dist.pdf(t), rng.min_m, rng.max_m)[0]
    m2 = integrate.quad(lambda t: t * t * dist.pdf(t), rng.min_m, rng.max_m)[0]
    mean = p * m1
    return mean, math.sqrt(p * m2 - mean**2)


@pytest.mark.parametrize("shape", ["pert", "triangular", "uniform"])
@pytest.mark.parametrize("p", [0.075, 0.4, 0.9])
def test_mixture_moments_match_numerical_integration(shape, p):
    rng = ThicknessRange(1.0, 2.5, 6.0, shape)
    mean, std = presence_moments(*thickness_moments(rng), p)
    ref_mean, ref_std = _mixture_moments_by_quadrature(rng, p)
    assert mean == pytest.approx(ref_mean, rel=1e-9)
    assert std == pytest.approx(ref_std, rel=1e-9)


def test_mixture_moments_match_a_monte_carlo_sample():
    """A unit met in 6 holes of 80, 1-6 m thick (likely 2.5 m) where met."""
    rng = ThicknessRange(1.0, 2.5, 6.0, "pert")
    p = 6 / 80
    gen = np.random.default_rng(20261204)
    n = 400_000
    present = gen.random(n) < p
    thickness = np.where(present, _scipy_distribution(rng).rvs(n, random_state=gen), 0.0)
    mean, std = presence_moments(*thickness_moments(rng), p)
    # the sample mean lies within 5 standard errors of the exact mean
    assert abs(thickness.mean() - mean) < 5 * std / math.sqrt(n)
    assert thickness.std() == pytest.approx(std, rel=0.02)
    # the mixture's mean is far below that of a 0/0/6 range standing for the same unit
    assert mean == pytest.approx(0.2125)
    assert thickness_moments(ThicknessRange(0.0, 0.0, 6.0, "pert"))[0] == pytest.approx(1.0)


def test_presence_one_changes_nothing_and_bad_presence_is_refused():
    assert presence_moments(2.0, 0.5, 1.0) == (2.0, 0.5)
    for bad in (0.0, -0.1, 1.2, math.nan):
        with pytest.raises(ValueError):
            presence_moments(2.0, 0.5, bad)


def _ground(presence: float) -> GroundModel:
    square = Polygon((np.array([[0.0, 0.0], [50.0, 0.0], [50.0, 50.0], [0.0, 50.0]]),))
    fill = ThicknessRange(2.0, 3.0, 5.0, "pert")
    marine = ThicknessRange(1.0, 2.5, 6.0, "pert")
    corr = Correlation("exponential", 40.0)
    units = (
        Unit("Fill", fill, corr),
        Unit("Marine deposit", marine, corr, presence=presence),
        Unit("Alluvium", ThicknessRange(4.0, 6.0, 9.0, "pert"), corr),
        Unit("Rock", None, None),
    )
    zone = Zone("North", square, {1: ThicknessRange(2.0, 4.0, 8.0, "uniform")})
    return GroundModel(units, zones=(zone,))


def test_unit_fields_apply_presence_to_default_and_zone_ranges():
    xy = np.array([[100.0, 100.0], [10.0, 10.0]])  # outside, inside the zone
    ground = _ground(0.25)
    fields = unit_fields(ground, xy)
    for row, rng in (
        (0, ThicknessRange(1.0, 2.5, 6.0)),
        (1, ThicknessRange(2.0, 4.0, 8.0, "uniform")),
    ):
        mu, s = thickness_moments(rng)
        assert fields.mean_m[row, 1] == pytest.approx(0.25 * mu)
        assert fields.std_m[row, 1] ** 2 == pytest.approx(0.25 * s**2 + 0.25 * 0.75 * mu**2)
        assert fields.min_m[row, 1] == 0.0 and fields.max_m[row, 1] == rng.max_m
    # other units are untouched
    assert fields.mean_m[0, 0] == pytest.approx(thickness_moments(ThicknessRange(2.0, 3.0, 5.0))[0])
    assert fields.min_m[0, 0] == 2.0
    # the hard bounds of the boundaries below start from a marine deposit of 0 m
    lo, hi = depth_bounds(ground, xy, fields=fields)
    assert lo[0].tolist() == pytest.approx([2.0, 2.0, 6.0])
    assert hi[0].tolist() == pytest.approx([5.0, 11.0, 20.0])
    mean, var = prior_boundary_moments(fields)
    assert mean[0, 2] - mean[0, 1] == pytest.approx(fields.mean_m[0, 2])
    full = unit_fields(_ground(1.0), xy)
    assert full.min_m[0, 1] == 1.0 and full.mean_m[0, 1] > fields.mean_m[0, 1]
