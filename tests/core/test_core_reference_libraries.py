"""The core against reference libraries: scikit-learn, gstools and scipy.stats.

One-unit models (a single thickness over a basal unit) make the boundary depth a stationary
Gaussian field with the unit's mean and std, so conditioning on readings is simple kriging /
Gaussian-process regression with a fixed kernel, which the libraries compute independently.
With two units the deeper boundary is a Gaussian process with the sum of the two kernels
(scikit-learn again). A zone overriding a unit's range makes the field non-stationary; that
case, with its hard bounds, is checked against a dense construction written in this file from
docs/model.md and solved with scipy.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from core_helpers import one_unit_ground
from scipy import stats

from probewise.core.bounds import depth_bounds, truncated_quantiles
from probewise.core.correlation import correlate
from probewise.core.model import Correlation, GroundModel, Polygon, ThicknessRange, Unit, Zone
from probewise.core.posterior import Observations, condition
from probewise.core.priors import thickness_moments

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


# --- two units: the deeper boundary against scikit-learn with a sum kernel --------------------
# docs/model.md: D_2 = T_1 + T_2 with independent thicknesses, so
# Cov(D_2(x), D_2(y)) = s_1^2 rho_1(h) + s_2^2 rho_2(h): a Gaussian process whose kernel is the
# sum of the two units' kernels (Rasmussen & Williams 2006, section 4.2.4, sums of kernels).
# Source: scikit-learn 1.x GaussianProcessRegressor, kernels ConstantKernel * Matern(nu=0.5)
# + ConstantKernel * RBF, measurement noise as WhiteKernel of variance tau^2 (equal precisions).
UPPER = (2.5, 0.9, "exponential", 50.0)  # mean, std, correlation model, practical range (m)
LOWER = (5.0, 1.6, "gaussian", 90.0)


def _uniform(mean: float, std: float) -> ThicknessRange:
    """A uniform range with exactly this mean and std (half-width std * sqrt(3))."""
    half = std * math.sqrt(3.0)
    return ThicknessRange(mean - half, mean, mean + half, "uniform")


def _two_unit_ground(zones=()) -> GroundModel:
    units = tuple(
        Unit(name, _uniform(mean, std), Correlation(model, range_m))
        for name, (mean, std, model, range_m) in (("Upper", UPPER), ("Lower", LOWER))
    )
    return GroundModel((*units, Unit("Basal", None, None)), zones=zones)


@pytest.mark.parametrize("seed", [10, 11, 12])
def test_two_units_deeper_boundary_matches_sklearn_sum_kernel(seed):
    from sklearn.gaussian_process import GaussianProcessRegressor
    from sklearn.gaussian_process.kernels import RBF, ConstantKernel, Matern, WhiteKernel

    rng = np.random.default_rng(seed)
    xy = rng.uniform(0.0, 150.0, (12, 2))
    tau = 0.2
    total_mean = UPPER[0] + LOWER[0]
    val = rng.normal(total_mean, 1.5, len(xy))
    targets = np.vstack([rng.uniform(-20.0, 170.0, (30, 2)), xy[:2]])

    kernel = (
        ConstantKernel(UPPER[1] ** 2, constant_value_bounds="fixed")
        * Matern(length_scale=UPPER[3] / 3.0, nu=0.5, length_scale_bounds="fixed")
        + ConstantKernel(LOWER[1] ** 2, constant_value_bounds="fixed")
        * RBF(length_scale=LOWER[3] / math.sqrt(6.0), length_scale_bounds="fixed")
        + WhiteKernel(tau**2, noise_level_bounds="fixed")
    )
    gpr = GaussianProcessRegressor(kernel, alpha=0.0, optimizer=None, normalize_y=False)
    gpr.fit(xy, val - total_mean)
    # The white kernel is noise of a reading, not of the field: predict the field without it.
    gpr.kernel_ = gpr.kernel_.k1
    ref_mean, ref_std = gpr.predict(targets, return_std=True)

    obs = Observations.build(xy, np.ones(len(xy), dtype=int), np.full(len(xy), tau), val)
    pred = condition(_two_unit_ground(), (0.0, 0.0), obs).predict(targets)
    np.testing.assert_allclose(pred.mean_m[:, 1], ref_mean + total_mean, rtol=0, atol=1e-9)
    np.testing.assert_allclose(np.sqrt(pred.var_m2[:, 1]), ref_std, rtol=0, atol=1e-9)


# --- a zone overriding a unit's range: the dense construction of docs/model.md ----------------
# Built here from the formulas alone: the first zone containing a point gives that point's
# range for the units it names (else the unit's default); moments of the range by its shape;
# Cov(D_j(x), D_k(y)) = sum over i <= min(j, k) of s_i(x) s_i(y) rho_i(|x - y|); conditioning
# by scipy's Cholesky (cho_factor / cho_solve); hard bounds as sums of minima and maxima,
# quantiles from scipy.stats.truncnorm.
ZONE_SQUARE = np.array([[40.0, 40.0], [100.0, 40.0], [100.0, 100.0], [40.0, 100.0], [40.0, 40.0]])
ZONE_UPPER = ThicknessRange(1.0, 4.0, 9.0, "pert")  # the zone's range for the upper unit


def _moments_by_hand(a: float, b: float, c: float, shape: str) -> tuple[float, float]:
    """Mean and std of a range (docs/model.md "Probability model")."""
    if shape == "uniform":
        return (a + c) / 2, math.sqrt((c - a) ** 2 / 12)
    if shape == "triangular":
        return (a + b + c) / 3, math.sqrt((a * a + b * b + c * c - a * b - a * c - b * c) / 18)
    mean = (a + 4 * b + c) / 6
    return mean, math.sqrt((mean - a) * (c - mean) / 7)


def _rho_by_hand(model: str, h: np.ndarray, r: float) -> np.ndarray:
    if model == "exponential":
        return np.exp(-3.0 * h / r)
    if model == "gaussian":
        return np.exp(-3.0 * h**2 / r**2)
    return np.where(h < r, 1 - 1.5 * (h / r) + 0.5 * (h / r) ** 3, 0.0)


def _priors_by_hand(xy: np.ndarray):
    """Per point and unit: mean, std, min, max of the thickness, ``(n, 2)`` each."""
    inside = (xy[:, 0] >= 40) & (xy[:, 0] <= 100) & (xy[:, 1] >= 40) & (xy[:, 1] <= 100)
    out = np.zeros((4, len(xy), 2))
    for i, (mean, std, _, _) in enumerate((UPPER, LOWER)):
        half = std * math.sqrt(3.0)
        out[:, :, i] = np.array([mean, std, mean - half, mean + half])[:, None]
    zone = ZONE_UPPER
    zone_mean, zone_std = _moments_by_hand(zone.min_m, zone.likely_m, zone.max_m, zone.shape)
    out[:, inside, 0] = np.array([zone_mean, zone_std, zone.min_m, zone.max_m])[:, None]
    return out


def _dense_cov(xy_a, k_a, xy_b, k_b) -> np.ndarray:
    s_a, s_b = _priors_by_hand(xy_a)[1], _priors_by_hand(xy_b)[1]
    h = np.hypot(xy_a[:, None, 0] - xy_b[None, :, 0], xy_a[:, None, 1] - xy_b[None, :, 1])
    cov = np.zeros(h.shape)
    for i, (_, _, model, range_m) in enumerate((UPPER, LOWER)):
        # unit i adds to D_j and D_k only when both boundaries lie at or below its base
        both = (k_a[:, None] >= i) & (k_b[None, :] >= i)
        cov += both * np.outer(s_a[:, i], s_b[:, i]) * _rho_by_hand(model, h, range_m)
    return cov


def test_zoned_two_unit_model_matches_a_dense_construction():
    from scipy.linalg import cho_factor, cho_solve

    rng = np.random.default_rng(21)
    xy = rng.uniform(0.0, 140.0, (14, 2))
    k_obs = rng.integers(0, 2, len(xy))
    tau = rng.uniform(0.05, 0.3, len(xy))
    val = np.cumsum(_priors_by_hand(xy)[0], axis=1)[np.arange(len(xy)), k_obs]
    val = val + rng.normal(0.0, 1.0, len(xy))
    targets = np.vstack([rng.uniform(-10.0, 150.0, (40, 2)), [[70.0, 70.0], [10.0, 10.0]]])

    zone = Zone("Deep pocket", Polygon((ZONE_SQUARE,)), {0: ZONE_UPPER})
    state = condition(
        _two_unit_ground((zone,)), (0.0, 0.0), Observations.build(xy, k_obs, tau, val)
    )
    pred = state.predict(targets)

    priors_obs, priors_t = _priors_by_hand(xy), _priors_by_hand(targets)
    mean_obs = np.cumsum(priors_obs[0], axis=1)[np.arange(len(xy)), k_obs]
    factor = cho_factor(_dense_cov(xy, k_obs, xy, k_obs) + np.diag(tau**2), lower=True)
    weights = cho_solve(factor, val - mean_obs)
    n = len(targets)
    for k in (0, 1):
        ks = np.full(n, k)
        cross = _dense_cov(targets, ks, xy, k_obs)  # (n, m)
        prior_var = np.diag(_dense_cov(targets, ks, targets, ks))
        want_mean = np.cumsum(priors_t[0], axis=1)[:, k] + cross @ weights
        want_var = prior_var - np.einsum("ij,ji->i", cross, cho_solve(factor, cross.T))
        np.testing.assert_allclose(pred.prior_var_m2[:, k], prior_var, rtol=0, atol=1e-9)
        np.testing.assert_allclose(pred.mean_m[:, k], want_mean, rtol=0, atol=1e-9)
        np.testing.assert_allclose(pred.var_m2[:, k], np.maximum(want_var, 0), rtol=0, atol=1e-9)

    # the zone makes the prior vary in space: inside it the upper unit is far less certain
    zone_std = _moments_by_hand(1.0, 4.0, 9.0, "pert")[1]
    assert zone_std > 1.5 * UPPER[1]
    assert pred.prior_std_m[-2, 0] == pytest.approx(zone_std, abs=1e-12)  # (70, 70): inside
    assert pred.prior_std_m[-1, 0] == pytest.approx(UPPER[1], abs=1e-12)  # (10, 10): outside

    # hard bounds (sums of minima and maxima, zone ranges inside) and truncated quantiles
    lo, hi = depth_bounds(_two_unit_ground((zone,)), targets)
    np.testing.assert_allclose(lo, np.cumsum(priors_t[2], axis=1), rtol=0, atol=1e-12)
    np.testing.assert_allclose(hi, np.cumsum(priors_t[3], axis=1), rtol=0, atol=1e-12)
    std = np.sqrt(pred.var_m2)
    for q in (0.05, 0.95):
        got = truncated_quantiles(pred.mean_m, std, lo, hi, q)
        ref = stats.truncnorm.ppf(
            q, (lo - pred.mean_m) / std, (hi - pred.mean_m) / std, loc=pred.mean_m, scale=std
        )
        np.testing.assert_allclose(got, ref, rtol=0, atol=1e-8)
