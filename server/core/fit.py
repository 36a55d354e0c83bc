"""Fit the ground model to the readings in hand by maximum likelihood.

The existing readings y are jointly Gaussian under the model (docs/model.md, "Probability
model"): y ~ N(mu + X beta, K(theta) + R), with theta per unit with a thickness its spread
multiplier, practical range and nugget, plus the lag-0 correlation of adjacent units'
thicknesses, and beta the units' mean shifts (column i of X is 1 on every reading of a
boundary at or below the base of unit i). The log-likelihood

    log L = -1/2 |L^-1 (y - mu - X beta)|^2 - sum log diag L - m/2 log(2 pi),  L L^T = K + R,

is maximised over theta by L-BFGS-B (scipy.optimize.minimize, box bounds, the gradient in
closed form, see ``_Problem``) with beta profiled out: for given theta its maximum is the
generalised least-squares estimate (a least-squares solve of the whitened system), so the
search runs over theta only.

Only what the readings can tell is fitted: a unit's parameters when at least
``MIN_PROBES_UNIT`` probes read its base, an adjacent pair's correlation when at least
``MIN_PROBES_PAIR`` probes read both units' bases (and the base above, for the lower pair);
everything else keeps the model's value.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass

import numpy as np
from scipy.linalg import LinAlgError, cholesky, lapack, lstsq, solve_triangular
from scipy.optimize import minimize

from probewise.core.correlation import correlate_unit, pairwise_distance_m
from probewise.core.field import unit_fields
from probewise.core.model import Correlation, GroundModel
from probewise.core.posterior import Observations
from probewise.core.readings import observation_moments

MIN_PROBES_UNIT = 8  # probes reading a unit's base before its parameters are fitted
MIN_PROBES_PAIR = 10  # probes reading both units before their correlation is fitted
FEW_PROBES = 30  # below this a fitted unit gets a warning that its estimates are rough
MULTIPLIER_BOUNDS = (0.05, 20.0)
NUGGET_MAX = 0.95
RHO_MAX = 0.95
LOG_2PI = math.log(2.0 * math.pi)
# The likelihood and its gradient hold several (m, m) matrices: 2,074 readings took 2 min and
# 1.2 GB (bench L with 500 CPTs). Beyond this many readings the fit uses a random subset of
# whole probes (fixed seed, so a rerun gives the same answer), and says so.
FIT_MAX_READINGS = 2_000
FIT_SUBSET_SEED = 20_240_601
PENALTY = 1e12  # minus log-likelihood of a parameter set the model cannot hold


@dataclass(frozen=True)
class UnitFit:
    """Fitted (or kept) values of one unit with a thickness; ``fitted`` says which."""

    index: int
    spread_multiplier: float
    range_m: float
    nugget: float
    mean_shift_m: float
    conceptual_range_m: float
    fitted: bool


@dataclass(frozen=True)
class FitResult:
    """The fit: per unit, the thickness correlations, both log-likelihoods and warnings.

    ``ground`` is the model with the fitted values adopted; ``pairs`` are
    ``(unit i, unit j, rho)`` with i < j (fitted adjacent pairs and any the model fixed).
    """

    units: tuple[UnitFit, ...]
    pairs: tuple[tuple[int, int, float], ...]
    log_likelihood: float
    log_likelihood_conceptual: float
    ground: GroundModel
    warnings: tuple[str, ...]


def log_likelihood(ground: GroundModel, origin: tuple[float, float], obs: Observations) -> float:
    """Joint Gaussian log-likelihood of readings under a model (Cholesky of K + R)."""
    if obs.size == 0:
        return 0.0
    mean, _, cov = observation_moments(ground, origin, obs)
    chol = cholesky(cov, lower=True, check_finite=False)
    white = solve_triangular(chol, obs.value_m - mean, lower=True, check_finite=False)
    return float(-0.5 * white @ white - np.log(np.diag(chol)).sum() - 0.5 * obs.size * LOG_2PI)


class _Problem:
    """Everything fixed while theta moves: distances, raw unit priors at the readings.

    :meth:`evaluate` gives the profiled log-likelihood and its gradient. With
    G = (alpha alpha^T - (K + R)^-1) / 2 and alpha = (K + R)^-1 r, d log L / d theta =
    sum(G * dK/d theta) (Rasmussen and Williams, Gaussian Processes for Machine Learning,
    2006, eq. 5.9); with the shifts at their GLS estimate the profiled gradient is the same
    expression (the likelihood is flat in beta there). K = sum_l (a_l a_l^T) * P_l with a_l
    the readings' loadings on field l and P_l its correlation, so each derivative costs one
    pass over an (m, m) array, not a factorisation.
    """

    def __init__(self, ground: GroundModel, origin, obs: Observations):
        self.ground = ground
        self.obs = obs
        B = ground.n_boundaries
        raw = dataclasses.replace(
            ground,
            units=tuple(
                dataclasses.replace(u, spread_multiplier=1.0, mean_shift_m=0.0)
                for u in ground.units
            ),
            thickness_correlation=(),
        )
        fields = unit_fields(raw, obs.xy, origin)
        rows = np.arange(obs.size)
        self.std = fields.std_m  # (m, B): the ranges' own stds
        self.base_mean = np.cumsum(fields.mean_m, axis=1)[rows, obs.boundary]
        self.h = pairwise_distance_m(obs.xy, obs.xy)
        self.coincident = (self.h == 0.0).astype(float)
        self.below = (obs.boundary[:, None] >= np.arange(B)[None, :]).astype(float)  # (m, B)
        self.noise = obs.noise_std_m**2
        self._cache: dict[tuple, tuple[np.ndarray, np.ndarray]] = {}

    def correlation(self, i: int, range_m: float) -> tuple[np.ndarray, np.ndarray]:
        """Unit i's correlation without nugget at the readings and its derivative in
        log range (central difference of the formula, no factorisation): ``(m, m)`` each."""
        key = (i, range_m)
        if key not in self._cache:
            if len(self._cache) > 2 * self.ground.n_boundaries:
                self._cache.clear()
            model = self.ground.units[i].correlation.model
            step = 1e-5
            up = correlate_unit(Correlation(model, range_m * math.exp(step)), self.h)
            down = correlate_unit(Correlation(model, range_m * math.exp(-step)), self.h)
            self._cache[key] = (
                correlate_unit(Correlation(model, range_m), self.h),
                (up - down) / (2.0 * step),
            )
        return self._cache[key]

    def loadings(self, mult, low) -> np.ndarray:
        """Loadings of each reading on each field: ``(m, B)``."""
        s = self.std * mult[None, :]
        rows = np.arange(self.obs.size)
        return np.cumsum(s[:, :, None] * low[None], axis=1)[rows, self.obs.boundary]

    def evaluate(self, mult, range_m, nugget, pairs, shift_free, shift_fixed, grad_of=None):
        """Profiled log-likelihood, the shifts at their GLS estimate and, when ``grad_of``
        = ``(units, pairs)`` is given, the gradient in (log multiplier, log range, nugget)
        of each listed unit then rho of each listed pair.

        Raises LinAlgError when the parameters make no valid covariance.
        """
        B = self.ground.n_boundaries
        c = _lag0(B, pairs)
        low = np.linalg.cholesky(c)
        load = self.loadings(mult, low)
        corr = [self.correlation(i, range_m[i]) for i in range(B)]
        shapes = [(1.0 - nugget[i]) * corr[i][0] + nugget[i] * self.coincident for i in range(B)]
        cov = np.zeros_like(self.h)
        for i in range(B):
            if load[:, i].any():
                cov += np.outer(load[:, i], load[:, i]) * shapes[i]
        cov[np.diag_indices_from(cov)] += self.noise
        chol = cholesky(cov, lower=True, check_finite=False)
        resid = self.obs.value_m - self.base_mean - self.below @ shift_fixed
        white = solve_triangular(chol, resid, lower=True, check_finite=False)
        shifts = shift_fixed.copy()
        cols = np.flatnonzero(shift_free)
        if len(cols):
            xw = solve_triangular(chol, self.below[:, cols], lower=True, check_finite=False)
            beta = lstsq(xw, white, check_finite=False)[0]
            white = white - xw @ beta
            shifts[cols] += beta
        m = self.obs.size
        ll = -0.5 * white @ white - np.log(np.diag(chol)).sum() - 0.5 * m * LOG_2PI
        if grad_of is None:
            return float(ll), shifts, None
        units, free_pairs = grad_of
        alpha = solve_triangular(chol, white, lower=True, trans="T", check_finite=False)
        # (K + R)^-1 from the factor (LAPACK potri): the gradient needs its elements.
        inv, info = lapack.dpotri(chol, lower=1)
        if info != 0:
            raise LinAlgError("covariance of the readings is singular")
        inv = np.tril(inv) + np.tril(inv, -1).T
        g = 0.5 * (np.outer(alpha, alpha) - inv)
        gp = [g * shapes[i] for i in range(B)]
        v = np.stack([gp[i] @ load[:, i] for i in range(B)], axis=1)  # (m, B)
        s = self.std * mult[None, :] * self.below  # (m, B): s_i at readings at or below i
        grad = []
        for i in units:
            a = load[:, i]
            # d a_l / d log m_i = s_i L_il on readings at or below boundary i
            d_mult = sum(2.0 * (s[:, i] * low[i, l]) @ v[:, l] for l in range(i + 1))
            d_range = (1.0 - nugget[i]) * (a @ ((g * corr[i][1]) @ a))
            d_nugget = a @ ((g * (self.coincident - corr[i][0])) @ a)
            grad += [d_mult, d_range, d_nugget]
        for key in free_pairs:
            step = 1e-6
            bumped = dict(((i, j), r) for i, j, r in pairs)
            bumped[key] = bumped.get(key, 0.0) + step
            d_low = (np.linalg.cholesky(_lag0(B, bumped.items(), flat=False)) - low) / step
            d_load = self.loadings(mult, d_low)
            grad.append(sum(2.0 * d_load[:, l] @ v[:, l] for l in range(B)))
        return float(ll), shifts, np.array(grad, dtype=float)


def _lag0(n: int, pairs, flat: bool = True) -> np.ndarray:
    """Lag-0 correlation matrix from ``(i, j, rho)`` triples (or ``((i, j), rho)`` items)."""
    c = np.eye(n)
    for item in pairs:
        (i, j), r = (item[:2], item[2]) if flat else item
        c[i, j] = c[j, i] = r
    return c


def _probes_reading(obs: Observations, boundaries: tuple[int, ...]) -> int:
    """Number of probes that read every boundary in ``boundaries``."""
    probes = None
    for k in boundaries:
        these = set(obs.probe[obs.boundary == k].tolist())
        probes = these if probes is None else probes & these
    return len(probes or ())


def _range_bounds(h: np.ndarray) -> tuple[float, float]:
    """Practical ranges the readings can speak to: a fifth of the closest spacing between
    distinct spots to ten times the widest (common practice, no source)."""
    positive = h[h > 0]
    if positive.size == 0:
        return 1.0, 1e6
    return max(0.2 * float(positive.min()), 1e-3), 10.0 * float(positive.max())


class _Parameters:
    """Which parameters the search moves, where it starts, and how its vector x maps back.

    x holds (log multiplier, log range, nugget) of each free unit, then rho of each free
    adjacent pair; everything else stays at the model's value.
    """

    def __init__(self, ground: GroundModel, obs: Observations):
        B = ground.n_boundaries
        units = ground.units[:B]
        self.mult0 = np.array([u.spread_multiplier for u in units])
        self.range0 = np.array([u.correlation.range_m for u in units])
        self.nugget0 = np.array([u.correlation.nugget for u in units])
        self.shift0 = np.array([u.mean_shift_m for u in units])
        self.fixed_pairs = {(i, j): r for i, j, r in ground.thickness_correlation}
        self.free_units = [i for i in range(B) if _probes_reading(obs, (i,)) >= MIN_PROBES_UNIT]
        self.free_pairs = [
            (i, i + 1)
            for i in range(B - 1)
            if i in self.free_units
            and i + 1 in self.free_units
            and _probes_reading(obs, tuple(range(max(i - 1, 0), i + 2))) >= MIN_PROBES_PAIR
        ]
        self.shift_free = np.zeros(B, dtype=bool)
        self.shift_free[self.free_units] = True

    def unpack(self, x: np.ndarray):
        """``(mult, range_m, nugget, pairs)`` of a search vector."""
        mult, rng, nug = self.mult0.copy(), self.range0.copy(), self.nugget0.copy()
        for n, i in enumerate(self.free_units):
            mult[i] = math.exp(x[3 * n])
            rng[i] = math.exp(x[3 * n + 1])
            nug[i] = x[3 * n + 2]
        pairs = dict(self.fixed_pairs)
        for n, key in enumerate(self.free_pairs):
            pairs[key] = x[3 * len(self.free_units) + n]
        return mult, rng, nug, tuple((i, j, r) for (i, j), r in pairs.items())

    def start_and_bounds(self, r_lo: float, r_hi: float) -> tuple[np.ndarray, list]:
        """The model's values (clipped into the bounds) and the box of the search."""
        x0, bounds = [], []
        log_mult = tuple(math.log(b) for b in MULTIPLIER_BOUNDS)
        for i in self.free_units:
            x0 += [
                min(max(math.log(self.mult0[i]), log_mult[0]), log_mult[1]),
                math.log(min(max(self.range0[i], r_lo), r_hi)),
                min(self.nugget0[i], NUGGET_MAX),
            ]
            bounds += [log_mult, (math.log(r_lo), math.log(r_hi)), (0.0, NUGGET_MAX)]
        for key in self.free_pairs:
            x0.append(min(max(self.fixed_pairs.get(key, 0.0), -RHO_MAX), RHO_MAX))
            bounds.append((-RHO_MAX, RHO_MAX))
        return np.array(x0, dtype=float), bounds


def fit_model(
    ground: GroundModel,
    origin: tuple[float, float],
    obs: Observations,
    probe_ids: tuple[str, ...] = (),
) -> FitResult:
    """Maximum-likelihood spread multipliers, ranges, nuggets, mean shifts and adjacent-unit
    thickness correlations from the readings.

    Parameters
    ----------
    ground : GroundModel
        The conceptual model (its current values start the search and stay where the
        readings cannot tell).
    origin : (float, float)
    obs : Observations
        Existing readings with values, ``probe`` grouping them.
    probe_ids : tuple of str, optional
        Names of the probes ``obs.probe`` indexes, for the warnings.

    Returns
    -------
    FitResult
    """
    obs, subset_note = subset_for_fit(obs)
    problem = _Problem(ground, origin, obs)
    par = _Parameters(ground, obs)
    grad_of = (par.free_units, par.free_pairs)

    def cost(x):
        try:
            ll, _, grad = problem.evaluate(*par.unpack(x), par.shift_free, par.shift0, grad_of)
        except (LinAlgError, np.linalg.LinAlgError):
            return PENALTY, np.zeros_like(x)
        if not math.isfinite(ll):
            return PENALTY, np.zeros_like(x)
        return -ll, -grad

    x0, bounds = par.start_and_bounds(*_range_bounds(problem.h))
    x_best = x0
    if len(x0):
        best = minimize(cost, x0, jac=True, method="L-BFGS-B", bounds=bounds)
        if best.fun <= cost(x0)[0]:
            x_best = best.x
    mult, rng, nug, pairs = par.unpack(x_best)
    ll, shifts, _ = problem.evaluate(mult, rng, nug, pairs, par.shift_free, par.shift0)
    unit_fits = tuple(
        UnitFit(i, float(mult[i]), float(rng[i]), float(nug[i]), float(shifts[i]),
                float(par.range0[i]), i in par.free_units)
        for i in range(ground.n_boundaries)
    )  # fmt: skip
    warnings = [
        f"{ground.units[i].name}: fitted from {n} probes; with fewer than {FEW_PROBES} the "
        "estimates (ranges and nuggets above all) are rough"
        for i in par.free_units
        if (n := _probes_reading(obs, (i,))) < FEW_PROBES
    ]
    warnings += lonely_maximum_warnings(ground, obs, probe_ids)
    if subset_note:
        warnings.insert(0, subset_note)
    return FitResult(
        unit_fits,
        pairs,
        ll,
        log_likelihood(ground, origin, obs),
        _adopt(ground, mult, rng, nug, shifts, pairs),
        tuple(warnings),
    )


def subset_for_fit(obs: Observations) -> tuple[Observations, str | None]:
    """The readings of a random subset of whole probes holding at most ``FIT_MAX_READINGS``
    (all of them when they fit), and a note saying what was left out (None if nothing)."""
    if obs.size <= FIT_MAX_READINGS:
        return obs, None
    probes, counts = np.unique(obs.probe, return_counts=True)
    order = np.random.default_rng(FIT_SUBSET_SEED).permutation(len(probes))
    keep = probes[order[np.cumsum(counts[order]) <= FIT_MAX_READINGS]]
    mask = np.isin(obs.probe, keep)
    subset = Observations(
        obs.xy[mask], obs.boundary[mask], obs.noise_std_m[mask], obs.value_m[mask],
        obs.probe[mask],
    )  # fmt: skip
    note = (
        f"fitted on {subset.size} readings of {len(keep)} of the {len(probes)} probes "
        f"(a random subset of whole probes, the same on every run): the likelihood of all "
        f"{obs.size} readings would need several {obs.size} x {obs.size} matrices"
    )
    return subset, note


def _adopt(ground, mult, rng, nug, shifts, pairs) -> GroundModel:
    """The model with fitted values written in (what adopting the fit means)."""
    units = list(ground.units)
    for i in range(ground.n_boundaries):
        corr = dataclasses.replace(
            units[i].correlation, range_m=float(rng[i]), nugget=float(nug[i])
        )
        units[i] = dataclasses.replace(
            units[i],
            correlation=corr,
            spread_multiplier=float(mult[i]),
            mean_shift_m=float(shifts[i]),
        )
    kept = tuple((i, j, float(r)) for i, j, r in pairs)
    return dataclasses.replace(ground, units=tuple(units), thickness_correlation=kept)


def observed_thicknesses(obs: Observations, unit: int) -> tuple[np.ndarray, np.ndarray]:
    """Thickness of a unit at every probe that reads its base and top: ``(probe, t_m)``."""
    base = {
        int(p): v
        for p, v in zip(
            obs.probe[obs.boundary == unit], obs.value_m[obs.boundary == unit], strict=True
        )
    }
    if unit == 0:
        top = dict.fromkeys(base, 0.0)
    else:
        sel = obs.boundary == unit - 1
        top = {int(p): v for p, v in zip(obs.probe[sel], obs.value_m[sel], strict=True)}
    probes = sorted(set(base) & set(top))
    return np.array(probes, dtype=int), np.array([base[p] - top[p] for p in probes])


def lonely_maximum_warnings(
    ground: GroundModel, obs: Observations, probe_ids: tuple[str, ...] = (), min_probes: int = 5
):
    """Units whose upper range rests on one reading.

    A unit is flagged when at least ``min_probes`` probes read its thickness and exactly one
    of them lies in the upper half of the range above its likely value: the range's maximum
    may have come from that one hole, and a skewed range then pulls the mean by metres
    (common practice, no source). Yields plain sentences.
    """
    for i in range(ground.n_boundaries):
        rng = ground.units[i].thickness
        if rng is None or rng.max_m <= rng.likely_m:
            continue
        probes, t = observed_thicknesses(obs, i)
        if len(t) < min_probes:
            continue
        high = np.flatnonzero(t >= rng.likely_m + 0.5 * (rng.max_m - rng.likely_m))
        if len(high) == 1:
            j = int(high[0])
            p = int(probes[j])
            name = probe_ids[p] if p < len(probe_ids) else f"#{p + 1}"
            yield (
                f"{ground.units[i].name}: only one probe ({name}) reads a "
                f"thickness in the upper part of the range ({t[j]:.2f} m; maximum "
                f"{rng.max_m:g} m, likely {rng.likely_m:g} m); the maximum may rest on that "
                f"one reading (median of {len(t)} readings {np.median(t):.2f} m)"
            )
