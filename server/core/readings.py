"""Readings against predictions: each existing reading checked against what the others predict.

Leave-one-probe-out (docs/model.md, "Readings against predictions"): every reading of probe p
is predicted from every other existing probe (all readings of p removed): mean m, variance v
of the boundary depth at p; with tau the reading's precision,

    z = (y - m) / sqrt(v + tau^2),    flagged when |z| > 1.96.

By stage: a reading of stage k is predicted from the readings of earlier stages only.

Both come from one Cholesky factor of the readings' covariance K + R, not a refit per probe:

- leave-one-out: with Q = (K + R)^-1 and alpha = Q (y - mu), the readings I of one probe have
  y_I - m_I = (Q_II)^-1 alpha_I and Var(y_I | rest) = (Q_II)^-1 (Rasmussen and Williams,
  Gaussian Processes for Machine Learning, 2006, section 5.4.2, for a single point; the same
  partitioned-inverse identity holds for a block). Q_II comes from W = L^-1 as W_I^T W_I.
- by stage: order the readings by stage; with K + R = L L^T and w = L^-1 (y - mu), the
  readings of a stage (rows a..b) given every earlier row have mean mu + L[a:b, :a] w[:a]
  and covariance L[a:b, a:b] L[a:b, a:b]^T (the Schur complement is the trailing factor).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.linalg import cho_factor, cho_solve, lapack, solve_triangular
from scipy.stats import chi2

from probewise.core.covariance import boundary_covariance
from probewise.core.field import prior_boundary_moments, unit_fields
from probewise.core.local_conditioning import (
    MAX_TILE_TARGETS,
    LocalState,
    group_tiles,
    one_blas_thread,
    take_observations,
    use_local,
)
from probewise.core.model import GroundModel
from probewise.core.posterior import Observations, cholesky_jittered

FLAG_Z = 1.96  # two-sided 95%
WITHIN_Z = 1.645  # two-sided 90%: the share within it should be about 0.9
# A flagged reading whose predicted std is below this share of its prior std sits among
# other readings that disagree with it; above, the place merely lacks data and the reading
# lies outside the conceptual range there (common practice, no source).
NEAR_DATA_RATIO = 0.7


@dataclass(frozen=True, eq=False)
class ReadingChecks:
    """Every reading against its prediction; arrays ``(m,)``, one entry per reading.

    ``probe`` indexes the existing probes; ``stage`` indexes the stage labels (-1 = none);
    ``predicted_std_m`` is the std of the boundary depth (without the reading's precision).
    """

    probe: np.ndarray
    boundary: np.ndarray
    stage: np.ndarray
    reading_m: np.ndarray
    predicted_mean_m: np.ndarray
    predicted_std_m: np.ndarray
    prior_std_m: np.ndarray
    precision_m: np.ndarray
    z: np.ndarray

    @property
    def flag(self) -> np.ndarray:
        return np.abs(self.z) > FLAG_Z


@dataclass(frozen=True)
class BoundarySummary:
    """Per boundary: readings, share with |z| <= 1.645 (0.9 expected), mean z^2 (1 expected)."""

    n: int
    share_within_90: float | None
    mean_z2: float | None
    verdict: str


def observation_moments(
    ground: GroundModel, origin: tuple[float, float], obs: Observations
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Prior mean, prior variance and covariance (with noise) of readings.

    Returns
    -------
    mean_m : (m,) float
    prior_var_m2 : (m,) float
        Variance of the boundary depth at each reading (no noise).
    cov_m2 : (m, m) float
        ``K + R``: covariance of the readings, precision squared on the diagonal.
    """
    fields = unit_fields(ground, obs.xy, origin)
    mean, var = prior_boundary_moments(fields)
    rows = np.arange(obs.size)
    k = boundary_covariance(ground, obs.xy, obs.boundary, fields, obs.xy, obs.boundary, fields)
    k = 0.5 * (k + k.T)
    k[np.diag_indices_from(k)] += obs.noise_std_m**2
    return mean[rows, obs.boundary], var[rows, obs.boundary], k


def leave_group_out(
    cov: np.ndarray, residual: np.ndarray, group: np.ndarray
) -> tuple[np.ndarray, np.ndarray, float]:
    """Prediction of each reading from every reading outside its group.

    Parameters
    ----------
    cov : (m, m) float
        Covariance of the readings (noise included).
    residual : (m,) float
        Readings minus their prior mean.
    group : (m,) int
        Group of each reading (a probe); a group is left out whole.

    Returns
    -------
    loo_residual : (m,) float
        Reading minus its leave-group-out mean.
    loo_var : (m,) float
        Variance of the reading given the other groups (noise and jitter included).
    jitter : float
        What was added to the diagonal to factor ``cov``.
    """
    m = cov.shape[0]
    if m == 0:
        return np.zeros(0), np.zeros(0), 0.0
    chol, jitter = cholesky_jittered(cov)
    alpha = cho_solve((chol, True), residual, check_finite=False)
    # W = L^-1 by LAPACK's triangular inverse: the diagonal blocks of the precision are
    # W_I^T W_I, which is what leaving a block out needs (not a solve of a system).
    w_inv, info = lapack.dtrtri(chol, lower=1)
    if info != 0:
        raise np.linalg.LinAlgError("triangular factor is singular")
    loo_res = np.empty(m)
    loo_var = np.empty(m)
    order = np.argsort(group, kind="stable")
    cuts = np.flatnonzero(np.diff(group[order])) + 1
    for idx in np.split(order, cuts):
        w_i = w_inv[idx.min() :, idx]  # rows above the block's first row are zero
        q = w_i.T @ w_i
        factor = cho_factor(q, lower=True, check_finite=False)
        loo_res[idx] = cho_solve(factor, alpha[idx], check_finite=False)
        low_inv = solve_triangular(factor[0], np.eye(len(idx)), lower=True, check_finite=False)
        loo_var[idx] = np.einsum("ij,ij->j", low_inv, low_inv)
    return loo_res, loo_var, jitter


def predict_by_stage(
    cov: np.ndarray, residual: np.ndarray, stage: np.ndarray
) -> tuple[np.ndarray, np.ndarray, float]:
    """Prediction of each reading from the readings of earlier stages only.

    Parameters
    ----------
    cov : (m, m) float
    residual : (m,) float
    stage : (m,) int
        Stage rank of each reading; lower ranks come first.

    Returns
    -------
    (loo_residual, loo_var, jitter) as :func:`leave_group_out`.
    """
    m = cov.shape[0]
    if m == 0:
        return np.zeros(0), np.zeros(0), 0.0
    order = np.argsort(stage, kind="stable")
    chol, jitter = cholesky_jittered(cov[np.ix_(order, order)])
    white = solve_triangular(chol, residual[order], lower=True, check_finite=False)
    res = np.empty(m)
    var = np.empty(m)
    ranks = stage[order]
    starts = np.flatnonzero(np.r_[True, np.diff(ranks) != 0])
    stops = np.r_[starts[1:], m]
    for a, b in zip(starts, stops, strict=True):
        res[order[a:b]] = residual[order[a:b]] - chol[a:b, :a] @ white[:a]
        var[order[a:b]] = np.einsum("ij,ij->i", chol[a:b, a:b], chol[a:b, a:b])
    return res, var, jitter


def predict_readings(
    ground: GroundModel, origin: tuple[float, float], obs: Observations, stage
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Each reading predicted from the other probes (``stage`` None) or from earlier stages:
    ``(prior variance, reading minus prediction, variance of the reading, jitter)``, each
    ``(m,)``."""
    mean, prior_var, cov = observation_moments(ground, origin, obs)
    residual = obs.value_m - mean
    if stage is None:
        res, var_y, jitter = leave_group_out(cov, residual, obs.probe)
    else:
        res, var_y, jitter = predict_by_stage(cov, residual, stage)
    return prior_var, res, var_y, np.full(obs.size, jitter)


def predict_locally(
    ground: GroundModel, origin: tuple[float, float], obs: Observations, stage
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """:func:`predict_readings` tile by tile: the probes of a tile of spots are predicted from
    the readings of the tile's nearest spots (``probewise.core.local_conditioning``;
    docs/model.md "Many readings"), never from a matrix of all readings."""
    local = LocalState(ground, origin, obs)
    index = local.existing
    out = tuple(np.empty(obs.size) for _ in range(4))
    with one_blas_thread():
        for tile in group_tiles(index.spots, local.tile_m, MAX_TILE_TARGETS):
            _predict_tile(ground, origin, obs, stage, local, tile, out)
    return out


def _predict_tile(ground, origin, obs, stage, local, tile, out) -> None:
    """One tile of :func:`predict_locally`, written into ``out``."""
    index = local.existing
    lo, hi = index.spots[tile].min(axis=0), index.spots[tile].max(axis=0)
    near = local.nearest_index(index, lo, hi)
    mine = np.isin(index.spot_of[near], tile)
    sub_stage = None if stage is None else stage[near]
    got = predict_readings(ground, origin, take_observations(obs, near), sub_stage)
    for whole, part in zip(out, got, strict=True):
        whole[near[mine]] = part[mine]


def check_readings(
    ground: GroundModel,
    origin: tuple[float, float],
    obs: Observations,
    stage: np.ndarray | None = None,
) -> ReadingChecks:
    """Check every reading against its prediction.

    Parameters
    ----------
    ground : GroundModel
    origin : (float, float)
    obs : Observations
        Existing readings with values; ``obs.probe`` groups them by probe.
    stage : (m,) int, optional
        Stage rank of each reading (probes without a stage: -1, the earliest). Given: each
        reading is predicted from earlier stages only; None: leave one probe out.

    Returns
    -------
    ReadingChecks
    """
    stage_in = None if stage is None else np.asarray(stage, dtype=int).reshape(-1)
    stage_out = np.full(obs.size, -1) if stage_in is None else stage_in
    # beyond exact conditioning each tile of probes is checked against its nearest readings
    predict = predict_locally if use_local(obs.size, 0) else predict_readings
    prior_var, res, var_y, jitter = predict(ground, origin, obs, stage_in)
    var_y = np.maximum(var_y, 0.0)
    var_d = np.maximum(var_y - obs.noise_std_m**2 - jitter, 0.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        z = np.where(var_y > 0, res / np.sqrt(var_y), np.sign(res) * np.inf)
    return ReadingChecks(
        probe=obs.probe.copy(),
        boundary=obs.boundary.copy(),
        stage=stage_out,
        reading_m=obs.value_m.copy(),
        predicted_mean_m=obs.value_m - res,
        predicted_std_m=np.sqrt(var_d),
        prior_std_m=np.sqrt(prior_var),
        precision_m=obs.noise_std_m.copy(),
        z=z,
    )


def reading_note(checks: ReadingChecks, j: int) -> str:
    """A plain note on reading ``j``: empty unless it is flagged."""
    if not checks.flag[j]:
        return ""
    side = "deeper" if checks.z[j] > 0 else "shallower"
    if checks.predicted_std_m[j] < NEAR_DATA_RATIO * checks.prior_std_m[j]:
        return f"{side} than nearby readings allow: wrong unit called, or a local feature?"
    return f"{side} than the conceptual range allows here (few readings nearby)"


def summarise_boundary(
    checks: ReadingChecks, boundary: int, probe_ids: tuple[str, ...] = ()
) -> BoundarySummary:
    """Share within 90%, mean z^2 and a plain verdict for one boundary.

    Mean z^2 is judged against the central 95% of chi-square(n) / n, the spread it would
    have if the z were independent standard normal (they are not quite: leave-one-out
    predictions share readings, so the limits are a guide).
    """
    sel = np.flatnonzero(checks.boundary == boundary)
    n = len(sel)
    if n == 0:
        return BoundarySummary(0, None, None, "no readings of this boundary")
    z = checks.z[sel]
    z2 = z * z
    share = float(np.mean(np.abs(z) <= WITHIN_Z))
    mean_z2 = float(np.mean(z2))
    if n < 3:
        return BoundarySummary(n, share, mean_z2, f"too few readings to judge ({n})")
    lo, hi = chi2.ppf(0.025, n) / n, chi2.ppf(0.975, n) / n
    if mean_z2 > hi:
        worst = int(np.argmax(z2))
        rest = np.delete(z2, worst)
        if abs(z[worst]) > FLAG_Z and chi2.ppf(0.025, n - 1) / (n - 1) <= rest.mean() <= (
            chi2.ppf(0.975, n - 1) / (n - 1)
        ):
            p = int(checks.probe[sel[worst]])
            name = probe_ids[p] if p < len(probe_ids) else f"#{p + 1}"
            return BoundarySummary(
                n,
                share,
                mean_z2,
                f"one reading conflicts with the rest: probe {name} (z = {z[worst]:.1f}); "
                "check the unit called there",
            )
        return BoundarySummary(
            n,
            share,
            mean_z2,
            f"over-confident: readings scatter more than the model allows (mean z^2 "
            f"{mean_z2:.2f}, about 1 expected); spreads or ranges may be too small",
        )
    if mean_z2 < lo:
        return BoundarySummary(
            n,
            share,
            mean_z2,
            f"over-cautious: readings agree with their predictions more closely than the "
            f"bands say (mean z^2 {mean_z2:.2f}, about 1 expected); spreads may be too wide",
        )
    return BoundarySummary(
        n, share, mean_z2, "consistent: readings fall within the bands about as often as expected"
    )
