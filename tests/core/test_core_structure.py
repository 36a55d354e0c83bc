"""Ground-model structure: Matérn correlations, nugget, correlated thicknesses (a linear model
of coregionalisation), spread multipliers and mean shifts; defaults change nothing."""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from test_core_readings import three_units

from probewise.core.correlation import correlate, correlate_unit
from probewise.core.covariance import boundary_covariance, cross_covariance_all
from probewise.core.field import (
    boundary_loadings,
    lag0_correlation,
    prior_boundary_moments,
    unit_fields,
)
from probewise.core.matern import MATERN32_SCALE, MATERN52_SCALE
from probewise.core.model import Correlation, GroundModel

H = np.array([0.0, 1e-3, 1.0, 7.5, 30.0, 80.0, 100.0, 160.0, 400.0])


@pytest.mark.parametrize(
    ("model", "nu", "scale"), [("matern32", 1.5, MATERN32_SCALE), ("matern52", 2.5, MATERN52_SCALE)]
)
def test_matern_matches_scikit_learn_and_gstools(model, nu, scale):
    # scikit-learn Matern(length_scale l, nu): u = sqrt(2 nu) h / l, so l = sqrt(2 nu) r / c;
    # gstools Matern(len_scale l, nu) uses u = sqrt(nu) h / l, so l = sqrt(nu) r / c.
    import gstools as gs
    from sklearn.gaussian_process.kernels import Matern

    r = 100.0
    ours = correlate(model, H, r)
    sk = Matern(length_scale=math.sqrt(2 * nu) * r / scale, nu=nu)
    pts = np.c_[H, np.zeros_like(H)]
    np.testing.assert_allclose(ours, sk(pts[:1], pts)[0], rtol=1e-12, atol=1e-15)
    g = gs.Matern(dim=2, var=1.0, len_scale=math.sqrt(nu) * r / scale, nu=nu)
    np.testing.assert_allclose(ours, g.correlation(H), rtol=1e-10, atol=1e-15)


@pytest.mark.parametrize("model", ["matern32", "matern52"])
def test_matern_practical_range_is_five_percent(model):
    # The practical-range convention: correlation 5% at h = r (docs/model.md).
    assert correlate(model, np.array([250.0]), 250.0)[0] == pytest.approx(0.05, abs=1e-12)
    assert correlate(model, np.array([0.0]), 250.0)[0] == 1.0


def test_nugget_scales_correlation_away_from_coincident_points_only():
    corr = Correlation("exponential", 50.0, 0.25)
    rho = correlate_unit(corr, H)
    assert rho[0] == 1.0
    np.testing.assert_allclose(rho[1:], 0.75 * np.exp(-3.0 * H[1:] / 50.0), rtol=1e-13)
    # nugget 0 is exactly the plain correlation
    plain = Correlation("exponential", 50.0)
    assert np.array_equal(correlate_unit(plain, H), correlate("exponential", H, 50.0))


def with_units(ground: GroundModel, **changes) -> GroundModel:
    units = tuple(
        dataclasses.replace(u, **changes) if u.thickness is not None else u for u in ground.units
    )
    return dataclasses.replace(ground, units=units)


def test_spread_multiplier_and_mean_shift_move_the_fields():
    ground = three_units()
    xy = np.random.default_rng(0).uniform(0, 100, (5, 2))
    base = unit_fields(ground, xy)
    moved = unit_fields(with_units(ground, spread_multiplier=1.5, mean_shift_m=-0.8), xy)
    np.testing.assert_allclose(moved.std_m, 1.5 * base.std_m, rtol=1e-15)
    np.testing.assert_allclose(moved.mean_m, base.mean_m - 0.8, rtol=1e-15)
    np.testing.assert_allclose(moved.max_m, base.max_m - 0.8, rtol=1e-15)
    np.testing.assert_allclose(moved.min_m, np.maximum(base.min_m - 0.8, 0.0), rtol=1e-15)


def test_explicit_defaults_give_bit_identical_covariances():
    ground = three_units()
    explicit = with_units(ground, spread_multiplier=1.0, mean_shift_m=0.0)
    rng = np.random.default_rng(1)
    xy = rng.uniform(0, 100, (12, 2))
    bnd = rng.integers(0, 3, 12)
    for g in (ground, explicit):
        f = unit_fields(g, xy)
        assert f.coreg is None
    f0, f1 = unit_fields(ground, xy), unit_fields(explicit, xy)
    k0 = boundary_covariance(ground, xy, bnd, f0, xy, bnd, f0)
    k1 = boundary_covariance(explicit, xy, bnd, f1, xy, bnd, f1)
    assert np.array_equal(k0, k1)
    assert all(
        np.array_equal(a, b)
        for a, b in zip(prior_boundary_moments(f0), prior_boundary_moments(f1), strict=True)
    )


def test_coregionalised_path_with_identity_equals_independent_units():
    # The general form with C = I must give the independent-unit sums (to rounding).
    ground = three_units()
    rng = np.random.default_rng(2)
    xy_a, xy_b = rng.uniform(0, 100, (9, 2)), rng.uniform(0, 100, (7, 2))
    bnd_a = rng.integers(0, 3, 9)
    fa, fb = unit_fields(ground, xy_a), unit_fields(ground, xy_b)
    fa_i = dataclasses.replace(fa, coreg=np.eye(3))
    fb_i = dataclasses.replace(fb, coreg=np.eye(3))
    bnd_b = rng.integers(0, 3, 7)
    np.testing.assert_allclose(
        boundary_covariance(ground, xy_a, bnd_a, fa_i, xy_b, bnd_b, fb_i),
        boundary_covariance(ground, xy_a, bnd_a, fa, xy_b, bnd_b, fb),
        rtol=1e-13,
    )
    np.testing.assert_allclose(
        cross_covariance_all(ground, xy_a, bnd_a, fa_i, xy_b, fb_i),
        cross_covariance_all(ground, xy_a, bnd_a, fa, xy_b, fb),
        rtol=1e-13,
    )
    np.testing.assert_allclose(prior_boundary_moments(fa_i)[1], prior_boundary_moments(fa)[1])


def test_coregionalised_covariance_matches_sampled_latent_fields():
    # Direct construction: independent unit-variance fields Z_l at the points (each with its
    # unit's correlation and nugget), T_i - mu_i = s_i sum_{l<=i} L_il Z_l, D_k = cumsum;
    # 200,000 draws. Standard error of a sampled covariance is about var * sqrt(2 / N),
    # 0.003 var here: a tolerance of 0.02 var is loose enough, tight enough to see a wrong L.
    pairs = ((0, 1, -0.6), (1, 2, -0.4), (0, 2, 0.2))
    ground = three_units(nugget=0.2, pairs=pairs)
    ground = dataclasses.replace(
        ground,
        units=(
            dataclasses.replace(ground.units[0], correlation=Correlation("matern32", 40.0, 0.2)),
            *ground.units[1:],
        ),
    )
    xy = np.array([[0.0, 0.0], [15.0, 5.0], [40.0, 30.0], [15.0, 5.0]])
    n, B = len(xy), 3
    fields = unit_fields(ground, xy)
    low_c = np.linalg.cholesky(lag0_correlation(ground))
    rng = np.random.default_rng(3)
    draws = 200_000
    h = np.sqrt(((xy[:, None] - xy[None]) ** 2).sum(-1))
    z = np.empty((draws, B, n))
    for l in range(B):
        rho = correlate_unit(ground.units[l].correlation, h)
        z[:, l, :] = rng.standard_normal((draws, n)) @ np.linalg.cholesky(rho + 1e-12 * np.eye(n)).T
    t = np.einsum("il,dln->din", low_c, z) * fields.std_m.T[None]  # (draws, B, n)
    d = np.cumsum(t, axis=1).reshape(draws, B * n)  # entry k * n + p = D_k(x_p)
    sampled = np.cov(d, rowvar=False)
    bnd = np.repeat(np.arange(B), n)
    pts = np.tile(xy, (B, 1))
    f_rep = fields.take(np.tile(np.arange(n), B))
    model_cov = boundary_covariance(ground, pts, bnd, f_rep, pts, bnd, f_rep)
    scale = np.max(np.diag(model_cov))
    np.testing.assert_allclose(model_cov, sampled, atol=0.02 * scale)
    # the cross-covariance of many points is the same thing in another layout
    cross = cross_covariance_all(ground, pts, bnd, f_rep, xy, fields)  # (m, B, n)
    np.testing.assert_allclose(cross.reshape(B * n, B * n), model_cov, rtol=1e-12, atol=1e-12)
    np.testing.assert_allclose(
        prior_boundary_moments(fields)[1].T.reshape(-1), np.diag(model_cov), rtol=1e-12
    )


@settings(max_examples=60, deadline=None)
@given(
    rho01=st.floats(-0.95, 0.95),
    rho12=st.floats(-0.95, 0.95),
    nugget=st.floats(0.0, 0.9),
    seed=st.integers(0, 10_000),
)
def test_coregionalised_covariance_is_positive_semidefinite(rho01, rho12, nugget, seed):
    # Adjacent-unit pairs alone always make a positive definite C (a tridiagonal correlation
    # matrix with |rho| < 1/sqrt(2) is; larger ones are skipped when C is not).
    c = np.array([[1, rho01, 0], [rho01, 1, rho12], [0, rho12, 1]])
    if np.linalg.eigvalsh(c).min() <= 1e-6:
        return
    ground = three_units(nugget, ((0, 1, rho01), (1, 2, rho12)))
    rng = np.random.default_rng(seed)
    xy = rng.uniform(0, 120, (15, 2))
    xy[5] = xy[4]  # a coincident pair
    bnd = rng.integers(0, 3, 15)
    f = unit_fields(ground, xy)
    k = boundary_covariance(ground, xy, bnd, f, xy, bnd, f)
    assert np.allclose(k, k.T, atol=1e-12)
    assert np.linalg.eigvalsh(k).min() >= -1e-9 * np.max(np.diag(k))


def test_loadings_of_independent_units_are_the_stds_above_each_boundary():
    ground = three_units()
    f = unit_fields(ground, np.array([[10.0, 20.0]]))
    a = boundary_loadings(f)[0]
    s = f.std_m[0]
    expected = np.array([[s[0], 0, 0], [s[0], s[1], 0], [s[0], s[1], s[2]]])
    np.testing.assert_array_equal(a, expected)


def test_impossible_correlations_are_refused_by_the_core():
    with pytest.raises(ValueError, match="positive definite"):
        unit_fields(
            three_units(pairs=((0, 1, 0.99), (1, 2, 0.99), (0, 2, -0.99))), np.zeros((1, 2))
        )
