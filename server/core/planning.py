"""Planned depth and observed set of planned probes (docs/model.md "Probability model").

"Current" below means conditioned on the existing probes only; P95 is the quantile of the
truncated posterior (``probewise.core.bounds``).

- Refusal: a method cannot pass the top of the shallowest unit it cannot penetrate
  (``Method.refusal_unit`` = r). For planning, that cap is the current P95 depth of the top of
  unit r (boundary r-1; the ground surface when r is the top unit), so the probe sees that
  boundary, when it resolves it, and nothing below.
- A boundary k can be reached when it is not below the refusal surface (k < r) and its
  current P95 is no deeper than the method's maximum depth.
- Planned depth, unless the probe gives ``depth_m``: the deepest boundary of interest the
  method resolves and can reach (else the deepest boundary it resolves and can reach); its
  P95 plus the method's embedment; capped by the maximum depth and the refusal cap. With
  nothing to reach: the maximum depth, capped by refusal.
- Observed set: boundaries the method resolves, not below the refusal surface, whose current
  P95 is no deeper than the planned depth.
- Refusal rules (``Method.refusals``): a chance of refusal in a unit of at least
  ``LIKELY_REFUSAL`` is planned as a refusal (the likelier outcome), capped like
  ``cannot_penetrate``, unless the rule pre-drills and the probe must pass the unit (its
  depth planned with the pre-drilling is below the unit's current P95 base): then the probe
  is pre-drilled from the unit's current P5 top to its P95 base, and the method does not read
  the base of that unit (it resumes below it). A smaller chance is planned as passing and
  reported as a risk. A probe that may refuse in a unit has entered it, so its record reads
  the unit's top.
- A stop on a unit it cannot penetrate at all (``cannot_penetrate``) proves that unit's top
  only when the method proves refusal (``Method.proves_refusal``: coring reaches rock; a
  cone stopped by a boulder looks the same as one stopped by rock). Otherwise that boundary
  is neither a target nor observed.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from probewise.core.bounds import depth_bounds, truncated_quantiles
from probewise.core.model import GroundModel, Method, PlannedProbe, RefusalRule
from probewise.core.posterior import Observations, PosteriorState, Prediction

LIKELY_REFUSAL = 0.5  # a chance of refusal at least this is planned as a refusal


@dataclass(frozen=True)
class ProbePlan:
    """One planned probe: where, how deep, what it will see.

    Attributes
    ----------
    probe : PlannedProbe
        As given (project coordinates).
    depth_m : float
        Planned depth (the probe's ``depth_m`` when given).
    observes : tuple of int
        Boundary indices it is expected to read, top down.
    target : int or None
        Boundary the depth was planned for (None when ``depth_m`` was given or nothing is
        reachable).
    refuses : bool
        True when the planned depth reaches the refusal cap (the probe is expected to stop on
        the unit it cannot penetrate).
    refusal_unit : int or None
        The unit it is expected to stop on (when ``refuses``).
    predrill_m : float
        Metres pre-drilled to get through units the method would likely refuse in.
    predrilled : tuple of int
        Units pre-drilled.
    risks : tuple of (int, float)
        Units the probe is planned into with a smaller chance of refusal: (unit, chance).
    """

    probe: PlannedProbe
    depth_m: float
    observes: tuple[int, ...]
    target: int | None
    refuses: bool
    refusal_unit: int | None = None
    predrill_m: float = 0.0
    predrilled: tuple[int, ...] = ()
    risks: tuple[tuple[int, float], ...] = ()


@dataclass(frozen=True)
class RefusalOutcomes:
    """What planning assumes of a method's refusals: the unit it stops on (None: none),
    whether that stop reads the unit's top, the rules it pre-drills through (above the stop)
    and those it may refuse in (above it)."""

    stop_unit: int | None
    stop_reads_top: bool
    predrill: tuple[RefusalRule, ...]
    possible: tuple[RefusalRule, ...]

    def stopped_at(self, unit: int) -> RefusalOutcomes:
        """The same with a stop in ``unit`` (a refusal rule's unit, above the stop)."""
        return RefusalOutcomes(
            unit,
            True,
            tuple(r for r in self.predrill if r.unit < unit),
            tuple(r for r in self.possible if r.unit < unit),
        )


def refusal_outcomes(method: Method) -> RefusalOutcomes:
    """The likelier outcome of each of a method's refusal rules (module docstring)."""
    likely = [r.unit for r in method.refusals if r.chance >= LIKELY_REFUSAL and not r.predrills]
    stops = likely + ([method.refusal_unit] if method.refusal_unit is not None else [])
    stop = min(stops) if stops else None
    above = [r for r in method.refusals if stop is None or r.unit < stop]
    return RefusalOutcomes(
        stop,
        method.proves_refusal or stop != method.refusal_unit,
        tuple(r for r in above if r.chance >= LIKELY_REFUSAL and r.predrills),
        tuple(r for r in above if r.chance < LIKELY_REFUSAL),
    )


def plan_probes(
    ground: GroundModel,
    methods: dict[str, Method],
    current: PosteriorState,
    probes: Sequence[PlannedProbe],
    current_prediction: Prediction | None = None,
) -> tuple[ProbePlan, ...]:
    """Plan the depth and observed set of each probe.

    Parameters
    ----------
    ground : GroundModel
    methods : dict of str to Method
        By method id; every probe's method must be present.
    current : PosteriorState
        The state conditioned on existing probes only (its origin localises the probes).
    probes : sequence of PlannedProbe
        In project coordinates.
    current_prediction : Prediction, optional
        ``current.predict`` at the probes' local points, if already computed.

    Returns
    -------
    tuple of ProbePlan, one per probe, in order.
    """
    if not probes:
        return ()
    ox, oy = current.origin
    xy = np.array([(p.x - ox, p.y - oy) for p in probes], dtype=float)
    pred = current_prediction if current_prediction is not None else current.predict(xy)
    lo, hi = depth_bounds(ground, xy, current.origin, pred.fields)
    p95 = truncated_quantiles(pred.mean_m, pred.std_m, lo, hi, 0.95)  # (n, B)
    p05 = truncated_quantiles(pred.mean_m, pred.std_m, lo, hi, 0.05)
    of_interest = {b.boundary for b in ground.boundaries_of_interest}
    outcomes = {mid: refusal_outcomes(methods[mid]) for mid in {p.method for p in probes}}
    plans = []
    for j, probe in enumerate(probes):
        plans.append(
            _plan_one(
                ground,
                methods[probe.method],
                outcomes[probe.method],
                probe,
                p95[j],
                p05[j],
                of_interest,
            )
        )
    return tuple(plans)


def _plan_one(
    ground: GroundModel,
    method: Method,
    outcome: RefusalOutcomes,
    probe: PlannedProbe,
    p95: np.ndarray,
    p05: np.ndarray,
    of_interest: set[int],
) -> ProbePlan:
    """One probe's plan from the current P95 and P5 depths ``(B,)`` at its spot."""
    B = ground.n_boundaries
    r = outcome.stop_unit
    above_refusal = B if r is None else min(r, B)  # boundaries 0..above_refusal-1
    cap = np.inf if r is None else (0.0 if r == 0 else float(p95[r - 1]))
    unread = {u for u in (p.unit for p in outcome.predrill) if u < B}  # bases not read
    if r is not None and r > 0 and not outcome.stop_reads_top:
        unread.add(r - 1)  # a stop there does not prove the top of unit r
    resolved = [k for k in range(above_refusal) if method.resolves(k) and k not in unread]
    reachable = [k for k in resolved if p95[k] <= method.max_depth_m]
    target = None
    if probe.depth_m is not None:
        depth = float(probe.depth_m)
    else:
        wanted = [k for k in reachable if k in of_interest] or reachable
        if wanted:
            target = max(wanted)
            depth = min(float(p95[target]) + method.embedment_m, method.max_depth_m, cap)
        else:
            depth = min(float(method.max_depth_m), cap)
    observes = tuple(k for k in resolved if p95[k] <= depth)

    def top_m(unit: int) -> float:
        return 0.0 if unit == 0 else float(p05[unit - 1])

    predrill_m, predrilled = 0.0, []
    for rule in sorted(outcome.predrill, key=lambda r: r.unit):
        if rule.unit < B and depth <= p95[rule.unit]:  # need not pass it: a refusal there
            return _plan_one(
                ground, method, outcome.stopped_at(rule.unit), probe, p95, p05, of_interest
            )
        top = top_m(rule.unit)
        base = float(p95[rule.unit]) if rule.unit < B else depth
        predrill_m += max(min(base, depth) - top, 0.0)
        predrilled.append(rule.unit)
    risks = tuple((rule.unit, rule.chance) for rule in outcome.possible if depth > top_m(rule.unit))
    refuses = bool(depth >= cap)
    return ProbePlan(
        probe,
        depth,
        observes,
        target,
        refuses,
        r if refuses else None,
        predrill_m,
        tuple(predrilled),
        risks,
    )


def planned_observations(
    plans: Sequence[ProbePlan], methods: dict[str, Method], origin: tuple[float, float]
) -> Observations:
    """The readings a set of planned probes will make (values unknown).

    Returns
    -------
    Observations
        One entry per (probe, observed boundary), noise = the method's precision for that
        boundary, ``probe`` = index into ``plans``.
    """
    xy, bnd, tau, idx = [], [], [], []
    for j, plan in enumerate(plans):
        method = methods[plan.probe.method]
        for k in plan.observes:
            xy.append((plan.probe.x - origin[0], plan.probe.y - origin[1]))
            bnd.append(k)
            tau.append(method.precision_m[k])
            idx.append(j)
    return Observations.build(np.array(xy, dtype=float).reshape(-1, 2), bnd, tau, probe=idx)
