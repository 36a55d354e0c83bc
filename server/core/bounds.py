"""Hard bounds on boundary depths and quantiles of the truncated Gaussian posterior.

Bounds (docs/model.md "Hard bounds"): D_k(x) lies in [sum of unit minima, sum of unit maxima]
of units 1..k (zone overrides applied), intersected with every user bound on boundary k that
applies at x (everywhere, or inside its polygon). Should a user bound not overlap the range
from the thicknesses at all, the user bound is kept: it is the engineer's explicit statement
about that boundary. A history rule (``probewise.core.history``: former surface and settlement)
then bounds the boundary it names; one that leaves no depth at a point is a conflict, raised.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.special import log_ndtr, ndtri_exp

from probewise.core.field import UnitFields, unit_fields
from probewise.core.geometry import points_in_polygon
from probewise.core.history import HistoryBand, history_band
from probewise.core.levels import ground_level_at
from probewise.core.model import GroundModel

UNIT_RANGES = -1  # source code of the bounds from the sums of unit minima and maxima


class BoundsConflictError(ValueError):
    """A history bound that leaves no depth with another bound at some point.

    ``field`` names the history rule in model-file terms (``history[r]``), ``problem`` says
    where and which other bound it misses.
    """

    def __init__(self, field: str, problem: str):
        self.field = field
        self.problem = problem
        super().__init__(f"{field}: {problem}")


@dataclass(frozen=True, eq=False)
class BoundsReport:
    """The hard bounds at ``n`` points and where they come from.

    ``lo``/``hi`` are ``(n, B)`` depths (m); ``lo_source``/``hi_source`` ``(n, B)`` int codes
    of the rule that set each (``UNIT_RANGES``, ``i`` for user bound ``i``, ``len(bounds) + r``
    for history rule ``r``); ``user_applies`` one ``(n,)`` bool per user bound; ``bands``
    one :class:`HistoryBand` per history rule; ``ground_level_m`` ``(n,)`` or None.
    """

    lo: np.ndarray
    hi: np.ndarray
    lo_source: np.ndarray
    hi_source: np.ndarray
    user_applies: tuple[np.ndarray, ...]
    bands: tuple[HistoryBand, ...]
    ground_level_m: np.ndarray | None


def source_label(ground: GroundModel, code: int) -> str:
    """Words for a bound's source code."""
    if code == UNIT_RANGES:
        return "the unit thickness ranges"
    if code < len(ground.bounds):
        return f"bounds[{code}]"
    r = code - len(ground.bounds)
    return f"history[{r}] {ground.history[r].name!r}"


def _apply_history(ground, report_parts, xy, origin, fields):
    """Intersect each history rule's bound with the bounds so far (in place); conflicts raise
    :class:`BoundsConflictError` naming both bounds."""
    lo, hi, lo_src, hi_src = report_parts
    gl = ground_level_at(ground.ground_level, xy, origin)
    bands = []
    for r, rule in enumerate(ground.history):
        band = history_band(rule, gl, fields, xy, origin)
        bands.append(band)
        k, code = rule.boundary, len(ground.bounds) + r
        where = band.bounded
        new_lo = np.where(where, np.maximum(lo[:, k], band.min_depth_m), lo[:, k])
        new_hi = np.where(where, np.minimum(hi[:, k], band.max_depth_m), hi[:, k])
        bad = np.flatnonzero(new_lo > new_hi)
        if bad.size:
            i = int(bad[0])
            other = lo_src[i, k] if band.max_depth_m[i] < lo[i, k] else hi_src[i, k]
            x, y = xy[i, 0] + origin[0], xy[i, 1] + origin[1]
            raise BoundsConflictError(
                f"history[{r}]",
                f"at ({x:.1f}, {y:.1f}) it puts the base of {ground.units[k].name!r} between "
                f"{band.min_depth_m[i]:.2f} and {band.max_depth_m[i]:.2f} m deep, which "
                f"misses {lo[i, k]:.2f}-{hi[i, k]:.2f} m from {source_label(ground, other)}",
            )
        lo_src[:, k] = np.where(where & (band.min_depth_m >= lo[:, k]), code, lo_src[:, k])
        hi_src[:, k] = np.where(where & (band.max_depth_m <= hi[:, k]), code, hi_src[:, k])
        lo[:, k], hi[:, k] = new_lo, new_hi
    return tuple(bands), gl


def bounds_report(
    ground: GroundModel,
    xy: np.ndarray,
    origin: tuple[float, float] = (0.0, 0.0),
    fields: UnitFields | None = None,
) -> BoundsReport:
    """Hard bounds on every boundary depth at points, with their sources.

    Sums of unit minima and maxima first; each user bound that applies intersects them (a
    user bound that misses them entirely is kept: it is the engineer's statement); then each
    history rule intersects its boundary, and one that leaves no depth raises
    :class:`BoundsConflictError`.

    Parameters
    ----------
    ground : GroundModel
    xy : (n, 2) float
        Points relative to ``origin``.
    origin : (float, float)
        Project coordinates of the local origin (polygons are in project coordinates).
    fields : UnitFields, optional
        Thickness priors at ``xy`` if already computed.

    Returns
    -------
    BoundsReport
    """
    xy = np.asarray(xy, dtype=float).reshape(-1, 2)
    if fields is None:
        fields = unit_fields(ground, xy, origin)
    lo = np.cumsum(fields.min_m, axis=1)
    hi = np.cumsum(fields.max_m, axis=1)
    lo_src = np.full(lo.shape, UNIT_RANGES, dtype=int)
    hi_src = np.full(hi.shape, UNIT_RANGES, dtype=int)
    applies = []
    for i, bound in enumerate(ground.bounds):
        k = bound.boundary
        where = (
            np.ones(len(xy), dtype=bool)
            if bound.polygon is None
            else points_in_polygon(xy, bound.polygon, origin)
        )
        applies.append(where)
        new_lo = np.maximum(lo[:, k], bound.min_depth_m)
        new_hi = np.minimum(hi[:, k], bound.max_depth_m)
        disjoint = new_lo > new_hi
        new_lo = np.where(disjoint, bound.min_depth_m, new_lo)
        new_hi = np.where(disjoint, bound.max_depth_m, new_hi)
        lo_src[:, k] = np.where(where & (new_lo == bound.min_depth_m), i, lo_src[:, k])
        hi_src[:, k] = np.where(where & (new_hi == bound.max_depth_m), i, hi_src[:, k])
        lo[:, k] = np.where(where, new_lo, lo[:, k])
        hi[:, k] = np.where(where, new_hi, hi[:, k])
    bands, gl = (), None
    if ground.history:
        bands, gl = _apply_history(ground, (lo, hi, lo_src, hi_src), xy, origin, fields)
    return BoundsReport(lo, hi, lo_src, hi_src, tuple(applies), bands, gl)


def depth_bounds(
    ground: GroundModel,
    xy: np.ndarray,
    origin: tuple[float, float] = (0.0, 0.0),
    fields: UnitFields | None = None,
) -> tuple[np.ndarray, np.ndarray]:
    """Hard lower and upper bounds on every boundary depth at points (every rule of
    :func:`bounds_report`).

    Parameters
    ----------
    ground : GroundModel
    xy : (n, 2) float
        Points relative to ``origin``.
    origin : (float, float)
        Project coordinates of the local origin (bound polygons are in project coordinates).
    fields : UnitFields, optional
        Thickness priors at ``xy`` if already computed.

    Returns
    -------
    (lo, hi) : ((n, B) float, (n, B) float)
        Depths (m), ``lo <= hi``.
    """
    report = bounds_report(ground, xy, origin, fields)
    return report.lo, report.hi


def truncated_quantiles(
    mean: np.ndarray, std: np.ndarray, lo: np.ndarray, hi: np.ndarray, q: float
) -> np.ndarray:
    """Quantile ``q`` of N(mean, std^2) truncated to [lo, hi], elementwise.

    Parameters
    ----------
    mean, std, lo, hi : array of float, broadcastable
        ``std >= 0``, ``lo <= hi`` (infinite bounds allowed).
    q : float
        Probability in (0, 1).

    Returns
    -------
    array of float
        The quantile, inside [lo, hi]. Where ``std == 0`` it is ``clip(mean, lo, hi)``.

    Notes
    -----
    With a = (lo - mean)/std and b = (hi - mean)/std the quantile is
    mean + std Phi^-1(q Phi(b) + (1 - q) Phi(a)). It is evaluated in log space,
    log p = log Phi(b) + log(q + (1 - q) exp(log Phi(a) - log Phi(b))), inverted with
    ``ndtri_exp``, so an interval far in a tail (mean far outside the bounds) stays exact.
    When the interval lies mostly above the mean (a + b > 0) the problem is mirrored
    (x -> -x, q -> 1 - q) so the lower tail is always the one used.
    """
    mean, std, lo, hi = np.broadcast_arrays(
        *(np.asarray(v, dtype=float) for v in (mean, std, lo, hi))
    )
    out = np.array(np.clip(mean, lo, hi), dtype=float)
    live = (std > 0) & (lo < hi)
    if not live.any():
        return out
    m, s = mean[live], std[live]
    a, b = (lo[live] - m) / s, (hi[live] - m) / s
    with np.errstate(invalid="ignore"):  # -inf + inf (no bounds): no mirror
        mirror = (a + b) > 0
    a2 = np.where(mirror, -b, a)
    b2 = np.where(mirror, -a, b)
    q2 = np.where(mirror, 1.0 - q, q)
    log_pa, log_pb = log_ndtr(a2), log_ndtr(b2)
    with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
        ratio = np.exp(log_pa - log_pb)  # in [0, 1] since a2 <= b2
        log_p = log_pb + np.log(q2 + (1.0 - q2) * ratio)
    z = ndtri_exp(log_p)
    z = np.where(mirror, -z, z)
    out[live] = np.clip(m + s * z, lo[live], hi[live])
    return out
