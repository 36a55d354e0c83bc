"""Gaussian conditioning of boundary depths on probe observations (simple kriging).

A probe at s reads D_k(s) + e with e ~ N(0, tau^2) for each boundary k it observes. With K the
prior covariance of the observed depths, R = diag(tau^2) and c the covariance of the
observations with a target depth,

    mean_post = mean_prior + c^T (K + R)^-1 (y - mean_obs)
    var_post  = var_prior  - c^T (K + R)^-1 c

(docs/model.md "Probability model"). Everything goes through the Cholesky factor L of K + R and
triangular solves, never an inverse: with W = L^-1 C^T ("whitened" cross-covariance),
var_post = var_prior - sum_j W_j^2 and mean_post = mean_prior + W_known^T L_known^-1 r.

Observations come in blocks. The first block holds the *known* observations (existing probes
with recorded depths); they alone move the mean. Later blocks (planned probes) have no values
yet and only reduce the variance, which is what lets a layout be scored before anyone drills.
A block is appended by a block Cholesky update, so the factor and the whitened
cross-covariance of the baseline are reused unchanged for every layout.

Coordinates are relative to the project origin (see ``Project.origin``) so that 6-7 digit
projected coordinates lose no precision in the distances.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
from scipy.linalg import LinAlgError, cholesky, solve_triangular

from probewise.core.covariance import boundary_covariance, cross_covariance_all
from probewise.core.field import UnitFields, prior_boundary_moments, unit_fields
from probewise.core.model import GroundModel

# Jitter on the diagonal, relative to the largest diagonal entry: tiny to start with, grown
# by 100x only when the factorisation fails (coincident zero-noise observations).
JITTER_START = 1e-12
JITTER_GROWTH = 100.0
JITTER_MAX = 1e-2


@dataclass(frozen=True, eq=False)
class Observations:
    """Depth readings: one entry per (probe, boundary) pair.

    Attributes
    ----------
    xy : (m, 2) float
        Where, relative to the project origin (m).
    boundary : (m,) int
        Which boundary each entry reads.
    noise_std_m : (m,) float
        Standard deviation tau of the reading (m); 0 = exact.
    value_m : (m,) float
        Depth read (m); NaN for planned readings whose value is not known yet.
    probe : (m,) int
        Index of the probe each entry comes from (within its list of probes), for reporting.
    """

    xy: np.ndarray
    boundary: np.ndarray
    noise_std_m: np.ndarray
    value_m: np.ndarray
    probe: np.ndarray

    @property
    def size(self) -> int:
        return int(self.boundary.shape[0])

    @staticmethod
    def build(xy, boundary, noise_std_m, value_m=None, probe=None) -> Observations:
        """Observations from array-likes; ``value_m`` None = planned (all NaN)."""
        boundary = np.asarray(boundary, dtype=int).reshape(-1)
        m = boundary.shape[0]
        return Observations(
            xy=np.asarray(xy, dtype=float).reshape(m, 2),
            boundary=boundary,
            noise_std_m=np.asarray(noise_std_m, dtype=float).reshape(m),
            value_m=(
                np.full(m, np.nan) if value_m is None else np.asarray(value_m, float).reshape(m)
            ),
            probe=np.zeros(m, dtype=int) if probe is None else np.asarray(probe, int).reshape(m),
        )

    @staticmethod
    def empty() -> Observations:
        return Observations.build(np.zeros((0, 2)), [], [])


@dataclass(frozen=True, eq=False)
class Prediction:
    """Prior and posterior of every boundary depth at ``n`` points.

    Attributes
    ----------
    xy : (n, 2) float
        Points, relative to the project origin.
    fields : UnitFields
        Thickness priors at the points.
    prior_mean_m, prior_var_m2 : (n, B) float
    mean_m : (n, B) float
        Posterior mean (moved by the known observations only).
    var_m2 : (n, B) float
        Posterior variance from all observations, clipped at 0.
    white : tuple of (m_b, B, n) float
        Whitened cross-covariance, one array per observation block of the state; kept so a
        state extended by more observations can update this prediction cheaply.
    """

    xy: np.ndarray
    fields: UnitFields
    prior_mean_m: np.ndarray
    prior_var_m2: np.ndarray
    mean_m: np.ndarray
    var_m2: np.ndarray
    white: tuple[np.ndarray, ...]

    @property
    def std_m(self) -> np.ndarray:
        return np.sqrt(self.var_m2)

    @property
    def prior_std_m(self) -> np.ndarray:
        return np.sqrt(self.prior_var_m2)


def cholesky_jittered(a: np.ndarray, scale: float | None = None) -> tuple[np.ndarray, float]:
    """Lower Cholesky factor of a symmetric positive semi-definite matrix, with jitter.

    Parameters
    ----------
    a : (m, m) float
        Symmetric matrix (only the lower triangle is read).
    scale : float, optional
        Size the jitter is relative to; default the largest diagonal entry.

    Returns
    -------
    (L, jitter) : ((m, m) float, float)
        ``L @ L.T == a + jitter * I``. The jitter starts at ``JITTER_START * scale`` and grows
        only when the factorisation fails, so duplicate or coincident exact readings never
        make it fail.
    """
    m = a.shape[0]
    if m == 0:
        return np.zeros((0, 0)), 0.0
    if scale is None:
        scale = float(np.max(np.diag(a)))
    scale = scale if np.isfinite(scale) and scale > 0 else 1.0
    jitter = JITTER_START * scale
    diag = np.diag_indices(m)
    while True:
        work = a.copy()  # factorised in place: one copy per try, no identity matrix
        work[diag] += jitter
        try:
            low = cholesky(work, lower=True, overwrite_a=True, check_finite=False)
            if np.all(np.isfinite(low)):
                return low, jitter
        except LinAlgError:
            pass
        if jitter > JITTER_MAX * scale:
            raise LinAlgError("covariance of the observations is not positive semi-definite")
        jitter *= JITTER_GROWTH


class PosteriorState:
    """Boundary depths conditioned on blocks of observations.

    Build with :func:`condition` (known observations), then :meth:`extend` with planned ones.
    Attributes are read-only by convention.

    Attributes
    ----------
    ground : GroundModel
    origin : (float, float)
        Project coordinates of the local origin; observation and prediction points are local.
    observations : tuple of Observations
        The blocks; the first holds the known readings.
    fields : tuple of UnitFields
        Thickness priors at each block's points.
    chol : (m, m) float
        Lower Cholesky factor of K + R (+ jitter) of all observations, blocks in order.
    residual_white : (m0,) float
        ``L0^-1 (y - prior mean)`` of the known block.
    """

    def __init__(self, ground, origin, observations, fields, chol, residual_white, jitters):
        self.ground: GroundModel = ground
        self.origin: tuple[float, float] = (float(origin[0]), float(origin[1]))
        self.observations: tuple[Observations, ...] = observations
        self.fields: tuple[UnitFields, ...] = fields
        self.chol: np.ndarray = chol
        self.residual_white: np.ndarray = residual_white
        self.jitters: tuple[float, ...] = jitters

    @property
    def n_observations(self) -> int:
        return int(self.chol.shape[0])

    @property
    def block_sizes(self) -> tuple[int, ...]:
        return tuple(o.size for o in self.observations)

    def extend(self, planned: Observations) -> PosteriorState:
        """A new state with a block of planned observations appended (values ignored).

        Block Cholesky update: with L00 the current factor,
        ``L10 = (L00^-1 K_0p)^T`` and ``L11 = chol(K_pp + R_p - L10 L10^T)``; the mean is
        unchanged and the variance only falls.
        """
        m0, m1 = self.n_observations, planned.size
        if m1 == 0:
            return self
        f_new = unit_fields(self.ground, planned.xy, self.origin)
        k_pp = _observation_covariance(self.ground, planned, f_new)
        scale = float(np.max(np.diag(k_pp)))  # jitter relative to the unconditioned scale
        if m0:
            k_0p = np.vstack(
                [
                    boundary_covariance(
                        self.ground, o.xy, o.boundary, f, planned.xy, planned.boundary, f_new
                    )
                    for o, f in zip(self.observations, self.fields, strict=True)
                ]
            )
            l10 = solve_triangular(self.chol, k_0p, lower=True, check_finite=False).T
            schur = k_pp - l10 @ l10.T
        else:
            l10 = np.zeros((m1, 0))
            schur = k_pp
        l11, jitter = cholesky_jittered(schur, scale)
        chol = np.zeros((m0 + m1, m0 + m1))
        chol[:m0, :m0] = self.chol
        chol[m0:, :m0] = l10
        chol[m0:, m0:] = l11
        return PosteriorState(
            self.ground,
            self.origin,
            (*self.observations, planned),
            (*self.fields, f_new),
            chol,
            self.residual_white,
            (*self.jitters, jitter),
        )

    def predict(self, xy: np.ndarray, base: Prediction | None = None) -> Prediction:
        """Prior and posterior of every boundary depth at points.

        Parameters
        ----------
        xy : (n, 2) float
            Points relative to ``origin``.
        base : Prediction, optional
            A prediction at the same points from a state this one extends; its whitened
            blocks are reused and only the new blocks are solved.

        Returns
        -------
        Prediction
        """
        xy = np.asarray(xy, dtype=float).reshape(-1, 2)
        fields = base.fields if base is not None else unit_fields(self.ground, xy, self.origin)
        prior_mean, prior_var = prior_boundary_moments(fields)

        def cross(obs: Observations, fields_obs: UnitFields) -> np.ndarray:
            return cross_covariance_all(self.ground, obs.xy, obs.boundary, fields_obs, xy, fields)

        return self.predict_targets(xy, fields, prior_mean, prior_var, cross, base)

    def predict_targets(
        self,
        xy: np.ndarray,
        fields: UnitFields,
        prior_mean: np.ndarray,
        prior_var: np.ndarray,
        cross: Callable[[Observations, UnitFields], np.ndarray],
        base: Prediction | None = None,
    ) -> Prediction:
        """Prior and posterior of every boundary at targets given by their prior moments
        and their covariance with readings (points, or cell averages: probewise.core.blocks).

        Parameters
        ----------
        xy : (n, 2) float
            Where the targets are (points, or cell centres), relative to ``origin``.
        fields : UnitFields
            Thickness priors at ``xy`` (they give the hard bounds).
        prior_mean, prior_var : (n, B) float
            Prior mean and variance of every boundary of each target.
        cross : callable(Observations, UnitFields) -> (m, B, n) float
            Prior covariance of a block of readings (with their fields) with the targets.
        base : Prediction, optional
            A prediction of the same targets from a state this one extends; its whitened
            blocks are reused and only the new blocks are solved.

        Returns
        -------
        Prediction
        """
        n, B = len(xy), self.ground.n_boundaries
        white = list(base.white) if base is not None else []
        starts = np.cumsum((0, *self.block_sizes))
        for b in range(len(white), len(self.observations)):
            obs, f_obs = self.observations[b], self.fields[b]
            lo, hi = starts[b], starts[b + 1]
            rhs = cross(obs, f_obs).reshape(hi - lo, B * n)
            for a in range(b):  # subtract what earlier blocks already explain
                rhs -= self.chol[lo:hi, starts[a] : starts[a + 1]] @ white[a].reshape(-1, B * n)
            w = solve_triangular(self.chol[lo:hi, lo:hi], rhs, lower=True, check_finite=False)
            white.append(w.reshape(hi - lo, B, n))
        explained = np.zeros((B, n))
        for w in white:
            explained += np.einsum("mbn,mbn->bn", w, w)
        var = np.maximum(prior_var - explained.T, 0.0)
        mean = prior_mean.copy()
        if white and white[0].shape[0]:
            mean += np.tensordot(self.residual_white, white[0], axes=(0, 0)).T
        return Prediction(xy, fields, prior_mean, prior_var, mean, var, tuple(white))


def _observation_covariance(ground: GroundModel, obs: Observations, fields: UnitFields):
    """K + R of a block of observations: ``(m, m)``."""
    k = boundary_covariance(ground, obs.xy, obs.boundary, fields, obs.xy, obs.boundary, fields)
    k = 0.5 * (k + k.T)
    k[np.diag_indices_from(k)] += obs.noise_std_m**2
    return k


def condition(
    ground: GroundModel, origin: tuple[float, float], known: Observations
) -> PosteriorState:
    """The state conditioned on known observations (existing probes' recorded depths).

    Parameters
    ----------
    ground : GroundModel
    origin : (float, float)
        Project coordinates of the local origin of ``known.xy`` and later points.
    known : Observations
        Readings with values; NaN values are not allowed here.

    Returns
    -------
    PosteriorState
        Mean moved by ``known``; variance reduced by it. Extend with planned readings.
    """
    if known.size and not np.all(np.isfinite(known.value_m)):
        raise ValueError("known observations need finite values")
    fields = unit_fields(ground, known.xy, origin)
    k = _observation_covariance(ground, known, fields)
    chol, jitter = cholesky_jittered(k)
    prior_mean_obs = np.take_along_axis(
        prior_boundary_moments(fields)[0], known.boundary[:, None], axis=1
    )[:, 0]
    residual = known.value_m - prior_mean_obs
    res_white = (
        solve_triangular(chol, residual, lower=True, check_finite=False)
        if known.size
        else np.zeros(0)
    )
    return PosteriorState(ground, origin, (known,), (fields,), chol, res_white, (jitter,))
