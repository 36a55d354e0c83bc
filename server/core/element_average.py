"""The average of a boundary depth over a design element, as one linear functional.

docs/model.md "The value of an investigation": a choice element is decided on its average
boundary depth over its cells' sub-points (k x k per cell, at the centres of a k x k
subdivision; the sub-points of every cell lie on one regular lattice of spacing g / k). The
average is Gaussian; as one linear functional of the field:

- its prior mean is the mean of the sub-points' prior means;
- its prior variance is the mean prior covariance over all pairs of its sub-points: per
  independent field l (a unit, or a latent field of correlated thicknesses), the mean over
  pairs of A(a) A(b) rho_l(|a - b|) with A the boundary's loading on that field
  (``probewise.core.field.boundary_loadings``; A = the unit's std s for independent units): a
  sum over lattice offsets of rho times the autocorrelation of the loading field, computed
  with a zero-padded FFT (exact, O(N log N) instead of O(N^2) for N sub-points);
- its covariance with a reading is the mean over the sub-points;
- its posterior follows by the same Cholesky conditioning as every other target
  (``probewise.core.posterior``): w = L^-1 c, var = prior var - w'w, mean moved by the known
  readings only.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.linalg import solve_triangular

from probewise.core.correlation import correlate, correlate_unit, pairwise_distance_m
from probewise.core.field import (
    UnitFields,
    boundary_loadings,
    prior_boundary_moments,
    unit_fields,
)
from probewise.core.grid import EvaluationGrid
from probewise.core.model import GroundModel
from probewise.core.posterior import Observations, PosteriorState

SUBPOINTS_PER_SIDE = 4  # k: an element's average is over k x k sub-points per cell
SUBPOINT_CHUNK = 8192  # sub-points per cross-covariance pass


def subpoint_offsets_m(spacing_m: float, per_side: int = SUBPOINTS_PER_SIDE) -> np.ndarray:
    """Offsets ``(k * k, 2)`` from a cell centre to the centres of its k x k subdivision,
    x fastest."""
    u = ((np.arange(per_side) + 0.5) / per_side - 0.5) * float(spacing_m)
    gx, gy = np.meshgrid(u, u)
    return np.column_stack([gx.ravel(), gy.ravel()])


def lattice_pair_mean(
    lattice: np.ndarray,
    weight: np.ndarray,
    step_m: float,
    model: str,
    range_m: float,
    nugget: float = 0.0,
) -> float:
    """Mean over all ordered pairs (a, b) of ``weight[a] weight[b] rho(|x_a - x_b|)``.

    Parameters
    ----------
    lattice : (N, 2) int
        Row and column of each point on a square lattice of spacing ``step_m``; distinct.
    weight : (N,) float
    step_m : float
    model, range_m
        Correlation model and practical range (``probewise.core.correlation``).

    Returns
    -------
    float
        sum over lattice offsets d of rho(|d|) R(d) / N^2, R the autocorrelation of the
        weights on the lattice (zero-padded FFT, so no offset wraps round).
    """
    lattice = np.asarray(lattice, dtype=int).reshape(-1, 2)
    n = len(lattice)
    if n == 0:
        return 0.0
    rel = lattice - lattice.min(axis=0)
    rows, cols = (int(v) + 1 for v in rel.max(axis=0))
    f = np.zeros((rows, cols))
    f[rel[:, 0], rel[:, 1]] = weight
    shape = (2 * rows, 2 * cols)
    spec = np.fft.rfft2(f, s=shape)
    auto = np.fft.irfft2(spec * np.conj(spec), s=shape)  # R(d), offsets wrapped at 2 x size
    dr = np.where(np.arange(shape[0]) < rows, np.arange(shape[0]), np.arange(shape[0]) - shape[0])
    dc = np.where(np.arange(shape[1]) < cols, np.arange(shape[1]), np.arange(shape[1]) - shape[1])
    h = step_m * np.hypot(dr[:, None], dc[None, :])
    rho = correlate(model, h, range_m)
    if nugget:  # only the zero offset (a sub-point with itself) shares the nugget
        rho = (1.0 - nugget) * rho + nugget * (h == 0.0)
    return float((rho * auto).sum() / (n * n))


@dataclass(frozen=True, eq=False)
class ElementAverage:
    """The average of boundary ``boundary`` over an element's sub-points.

    Attributes
    ----------
    boundary : int
    sub_xy : (N, 2) float
        Sub-points, relative to the project origin.
    fields : UnitFields
        Thickness priors at the sub-points.
    prior_mean_m, prior_var_m2 : float
        Prior mean and variance of the average.
    """

    boundary: int
    sub_xy: np.ndarray
    fields: UnitFields
    prior_mean_m: float
    prior_var_m2: float


def element_average(
    ground: GroundModel,
    grid: EvaluationGrid,
    cells: np.ndarray,
    boundary: int,
    per_side: int = SUBPOINTS_PER_SIDE,
) -> ElementAverage:
    """Prior moments of the mean of boundary ``boundary`` over the cells' sub-points.

    Parameters
    ----------
    ground : GroundModel
    grid : EvaluationGrid
        Its ``index`` places each cell on the raster, so sub-points fall on one lattice.
    cells : (c,) int
        The element's cells.
    boundary : int
    per_side : int
        k: sub-points per side of a cell.
    """
    cells = np.asarray(cells, dtype=int).reshape(-1)
    offsets = subpoint_offsets_m(grid.spacing_m, per_side)
    sub_xy = (grid.xy[cells, None, :] + offsets[None, :, :]).reshape(-1, 2)
    iy, ix = np.divmod(np.arange(per_side * per_side), per_side)
    lattice = (
        grid.index[cells, None, :] * per_side + np.column_stack([iy, ix])[None, :, :]
    ).reshape(-1, 2)
    fields = unit_fields(ground, sub_xy, grid.origin)
    prior_mean = float(prior_boundary_moments(fields)[0][:, boundary].mean())
    step = grid.spacing_m / per_side
    load = boundary_loadings(fields)[:, boundary, :]  # (N, B); field l enters for l <= boundary
    var = 0.0
    for i in range(boundary + 1):
        corr = ground.units[i].correlation
        var += lattice_pair_mean(lattice, load[:, i], step, corr.model, corr.range_m, corr.nugget)
    return ElementAverage(boundary, sub_xy, fields, prior_mean, var)


def average_cross_covariance(
    ground: GroundModel, average: ElementAverage, obs: Observations, fields_obs: UnitFields
) -> np.ndarray:
    """Covariance ``(m,)`` of each reading with the element average (mean over sub-points).

    A reading of boundary b at x and the average of boundary k share the fields l <= min(b, k):
    the covariance is the sum over those fields of A_bl(x) times the mean over the sub-points
    a of A_kl(a) rho_l(|x - a|) (A the loadings, ``boundary_loadings``; A_bl = s_l for
    independent units). Each distinct reading spot is correlated once.
    """
    if obs.size == 0:
        return np.zeros(0)
    k = average.boundary
    spots, spot_of = np.unique(obs.xy, axis=0, return_inverse=True)
    spot_of = spot_of.reshape(-1)
    deepest = min(int(obs.boundary.max()), k)
    load_avg = boundary_loadings(average.fields)[:, k, :]  # (N, B)
    terms = np.zeros((deepest + 1, len(spots)))  # mean over a of A_kl(a) rho_l, per field
    n = len(average.sub_xy)
    for a0 in range(0, n, SUBPOINT_CHUNK):
        a1 = min(n, a0 + SUBPOINT_CHUNK)
        h = pairwise_distance_m(spots, average.sub_xy[a0:a1])
        for i in range(deepest + 1):
            corr = ground.units[i].correlation
            terms[i] += correlate_unit(corr, h) @ load_avg[a0:a1, i]
    terms /= n
    # loading of each reading on each field: (m, deepest + 1), zero for fields below it
    load_obs = boundary_loadings(fields_obs)[np.arange(obs.size), obs.boundary, : deepest + 1]
    return np.einsum("ml,lm->m", load_obs, terms[:, spot_of])


def element_extent(average: ElementAverage) -> tuple[np.ndarray, np.ndarray]:
    """Corners ``(2,), (2,)`` of the rectangle holding the element's sub-points."""
    return average.sub_xy.min(axis=0), average.sub_xy.max(axis=0)


def condition_average(
    state: PosteriorState, average: ElementAverage, known_cov: np.ndarray | None = None
) -> tuple[float, float]:
    """Posterior mean and variance of the element average in a state.

    Parameters
    ----------
    state : PosteriorState or LocalState
        Its first block holds the known readings (they move the mean); later blocks only
        reduce the variance. A local state (many readings) conditions the average exactly on
        the readings nearest the element (``LocalState.exact_near``; ``known_cov`` unused).
    average : ElementAverage
    known_cov : (m0,) float, optional
        Covariance of the first block with the average, if already computed.

    Returns
    -------
    (mean_m, var_m2) : (float, float)
        With L the state's Cholesky factor and c the covariances of all readings with the
        average: w = L^-1 c, var = prior var - w'w (>= 0), mean = prior mean + w0' r0 (r0 the
        whitened residual of the known readings).
    """
    exact_near = getattr(state, "exact_near", None)
    if exact_near is not None:  # many readings: those nearest the element (docs/model.md)
        return condition_average(exact_near(*element_extent(average)), average)
    blocks = []
    for b, (obs, f_obs) in enumerate(zip(state.observations, state.fields, strict=True)):
        if b == 0 and known_cov is not None:
            blocks.append(np.asarray(known_cov, dtype=float))
        else:
            blocks.append(average_cross_covariance(state.ground, average, obs, f_obs))
    c = np.concatenate(blocks) if blocks else np.zeros(0)
    if c.size == 0:
        return average.prior_mean_m, average.prior_var_m2
    w = solve_triangular(state.chol, c, lower=True, check_finite=False)
    var = max(average.prior_var_m2 - float(w @ w), 0.0)
    m0 = state.observations[0].size
    mean = average.prior_mean_m
    if m0:
        mean += float(state.residual_white @ w[:m0])
    return mean, var
