"""The core against reference libraries: scikit-learn, gstools and scipy.stats.

One-unit models (a single thickness over a basal unit) make the boundary depth a stationary
Gaussian field with the unit's mean and std, so conditioning on readings is simple kriging /
Gaussian-process regression with a fixed kernel, which the libraries compute independently.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from core_helpers import one_unit_ground
from scipy import stats

from server.core.bounds import truncated_quantiles
from server.core.correlation import correlate
from server.core.model import ThicknessRange
from server.core.posterior import Observations, condition
from server.core.priors import thickness_moments

MEAN, STD = 4.0, 1.3
MODELS = ["exponential", "gaussian", "spherical"]


def _case(seed: int, n_obs: int = 9, noisy: bool = True):
    rng = np.random.default_rng(seed)
    xy = rng.uniform(0.0, 120.0, (n_obs, 2))
    val = rng.normal(MEAN, STD, n_obs)
    tau = rng.uniform(0.05, 0.4, n_obs) if noisy else np.zeros(n_obs)
    targets = np.vstack([rng.uniform(-10.0, 130.0, (25, 2)), xy[:3]])
    return xy, val, tau, targets


def _core(model: str, range_m: float, xy, val, tau, targets):
    ground = one_unit_ground(model, range_m, MEAN, STD)
    obs = Observations.build(xy, np.zeros(len(xy), dtype=int), tau, val)
    pred = condition(ground, (0.0, 0.0), obs).predict(targets)
    return pred.mean_m[:, 0], pred.var_m2[:, 0]


# --- scikit-learn GaussianProcessRegressor with a fixed kernel and alpha = precision^2 ---------
# Source: scikit-learn 1.x, sklearn.gaussian_process (Rasmussen & Williams 2006, Alg. 2.1).
# exponential = Matern(nu=0.5) with length scale range/3: exp(-h/(r/3)) = exp(-3h/r);
# gaussian = RBF with length scale range/sqrt(6): exp(-h^2/(2 r^2/6)) = exp(-3h^2/r^2).
@pytest.mark.parametrize("model", ["exponential", "gaussian"])
@pytest.mark.parametrize("seed", [0, 1, 2])
def test_one_unit_matches_sklearn_gpr(model, seed):
    from sklearn.gaussian_process import GaussianProcessRegressor
    from sklearn.gaussian_process.kernels import RBF, ConstantKernel, Matern

    range_m = 60.0
    xy, val, tau, targets = _case(seed)
    if model == "exponential":
        shape = Matern(length_scale=range_m / 3.0, nu=0.5, length_scale_bounds="fixed")
    else:
        shape = RBF(length_scale=range_m / math.sqrt(6.0), length_scale_bounds="fixed")
    kernel = ConstantKernel(STD**2, constant_value_bounds="fixed") * shape
    gpr = GaussianProcessRegressor(kernel, alpha=tau**2, optimizer=None, normalize_y=False)
    gpr.fit(xy, val - MEAN)
    ref_mean, ref_std = gpr.predict(targets, return_std=True)

    mean, var = _core(model, range_m, xy, val, tau, targets)
    np.testing.assert_allclose(mean, ref_mean + MEAN, rtol=0, atol=1e-9)
    np.testing.assert_allclose(np.sqrt(var), ref_std, rtol=0, atol=1e-9)


# --- gstools simple kriging (krige.Simple with mean = prior mean) ----------------------------
# Source: gstools 1.5+ (Mueller, Schueler, Zech, Attinger, Heße; GMD 2022). Covariance models
# with the len_scale that gives our practical-range convention: Exponential exp(-h/l), l = r/3;
# Gaussian exp(-pi/4 (h/l)^2), l = r sqrt(pi/12); Spherical reaches 0 at l = r.
def _gstools_model(model: str, range_m: float, nugget: float = 0.0):
    import gstools as gs

    if model == "exponential":
        return gs.Exponential(dim=2, var=STD**2, len_scale=range_m / 3.0, nugget=nugget)
    if model == "gaussian":
        return gs.Gaussian(
            dim=2, var=STD**2, len_scale=range_m * math.sqrt(math.pi / 12.0), nugget=nugget
        )
    return gs.Spherical(dim=2, var=STD**2, len_scale=range_m, nugget=nugget)


@pytest.mark.parametrize("model", MODELS)
@pytest.mark.parametrize("seed", [3, 4])
def test_one_unit_noisy_matches_gstools_simple_kriging(model, seed):
    import gstools as gs

    range_m = 70.0
    xy, val, tau, targets = _case(seed)
    # gstools takes measurement error as cond_err (a variance, at most the model nugget) and
    # reports the variance of a new reading, nugget included: subtract it for the field's.
    nugget = float(np.max(tau**2))
    krig = gs.krige.Simple(
        _gstools_model(model, range_m, nugget),
        cond_pos=xy.T,
        cond_val=val,
        mean=MEAN,
        exact=False,
        cond_err=tau**2,
        pseudo_inv=False,
    )
    ref_mean, ref_var = krig(targets.T, mesh_type="unstructured", return_var=True)

    mean, var = _core(model, range_m, xy, val, tau, targets)
    np.testing.assert_allclose(mean, ref_mean, rtol=0, atol=1e-9)
    np.testing.assert_allclose(var, ref_var - nugget, rtol=0, atol=1e-9)


@pytest.mark.parametrize("model", ["exponential", "spherical"])
def test_one_unit_exact_matches_gstools_simple_kriging(model):
    import gstools as gs

    range_m = 70.0
    xy, val, tau, targets = _case(5, noisy=False)
    krig = gs.krige.Simple(
        _gstools_model(model, range_m),
        cond_pos=xy.T,
        cond_val=val,
        mean=MEAN,
        exact=True,
        pseudo_inv=False,
    )
    ref_mean, ref_var = krig(targets.T, mesh_type="unstructured", return_var=True)
    mean, var = _core(model, range_m, xy, val, tau, targets)
    np.testing.assert_allclose(mean, ref_mean, rtol=0, atol=1e-9)
    np.testing.assert_allclose(var, np.maximum(ref_var, 0.0), rtol=0, atol=1e-9)


@pytest.mark.parametrize("model", MODELS)
def test_correlation_matches_gstools_correlation(model):
    """Source: gstools CovModel.correlation with the len_scale conversions above."""
    range_m = 45.0
    h = np.linspace(0.0, 2.5 * range_m, 301)
    ref = _gstools_model(model, range_m).correlation(h)
    np.testing.assert_allclose(correlate(model, h, range_m), ref, rtol=0, atol=1e-12)


def test_practical_range_is_about_five_percent():
    """docs/model.md: the practical range is where correlation falls to about 5% (exp(-3))."""
    r = 80.0
    assert correlate("exponential", np.array(r), r) == pytest.approx(math.exp(-3.0))
    assert correlate("gaussian", np.array(r), r) == pytest.approx(math.exp(-3.0))
    assert correlate("spherical", np.array(r), r) == 0.0


# --- thickness moments against scipy.stats ---------------------------------------------------
# Source: scipy.stats uniform, triang and beta; PERT as a beta on [a, c] with
# alpha = 1 + 4(b-a)/(c-a), beta = 1 + 4(c-b)/(c-a) (Vose, Risk Analysis, 3rd ed., 2008).
RANGES = [(0.3, 1.0, 2.0), (1.0, 3.0, 6.0), (0.5, 2.0, 4.0), (2.0, 2.0, 9.0), (0.0, 7.5, 7.5)]


@pytest.mark.parametrize("a,b,c", RANGES)
def test_moments_match_scipy_stats(a, b, c):
    refs = {
        "uniform": stats.uniform(loc=a, scale=c - a),
        "triangular": stats.triang((b - a) / (c - a), loc=a, scale=c - a),
        "pert": stats.beta(
            1 + 4 * (b - a) / (c - a), 1 + 4 * (c - b) / (c - a), loc=a, scale=c - a
        ),
    }
    for shape, ref in refs.items():
        mean, std = thickness_moments(ThicknessRange(a, b, c, shape))
        assert mean == pytest.approx(ref.mean(), abs=1e-12), shape
        assert std == pytest.approx(ref.std(), abs=1e-12), shape


# --- truncated quantiles against scipy.stats.truncnorm ---------------------------------------
# Source: scipy.stats.truncnorm (standardised bounds a = (lo - mean)/std, b = (hi - mean)/std).
@pytest.mark.parametrize("q", [0.05, 0.5, 0.95])
def test_truncated_quantiles_match_scipy_truncnorm(q):
    rng = np.random.default_rng(7)
    mean = rng.uniform(-3, 12, 400)
    std = rng.uniform(0.01, 3.0, 400)
    lo = rng.uniform(-2, 5, 400)
    hi = lo + rng.uniform(0.05, 8, 400)
    got = truncated_quantiles(mean, std, lo, hi, q)
    ref = stats.truncnorm.ppf(q, (lo - mean) / std, (hi - mean) / std, loc=mean, scale=std)
    np.testing.assert_allclose(got, ref, rtol=0, atol=1e-8)


@pytest.mark.parametrize(
    "mean,std,lo,hi",
    [
        (0.0, 1.0, 8.0, 9.0),  # far in the upper tail
        (0.0, 1.0, -9.0, -8.0),  # far in the lower tail
        (50.0, 1.0, 10.0, 12.0),  # mean 38 std above the bounds
        (1.0, 0.5, -np.inf, np.inf),  # no bounds: the normal quantile
        (2.0, 1.0, 1.0, 1.5),
    ],
)
def test_truncated_quantiles_in_the_tails(mean, std, lo, hi):
    for q in (0.05, 0.95):
        got = float(truncated_quantiles(mean, std, lo, hi, q))
        ref = float(stats.truncnorm.ppf(q, (lo - mean) / std, (hi - mean) / std, mean, std))
        if np.isfinite(ref):
            assert got == pytest.approx(ref, abs=1e-6)
        assert lo <= got <= hi


def test_truncated_quantile_without_spread_is_the_clipped_mean():
    got = truncated_quantiles(np.array([1.0, 5.0, -1.0]), 0.0, 0.0, 3.0, 0.95)
    np.testing.assert_array_equal(got, [1.0, 3.0, 0.0])
