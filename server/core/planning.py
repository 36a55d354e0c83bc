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
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from probewise.core.bounds import depth_bounds, truncated_quantiles
from probewise.core.model import GroundModel, Method, PlannedProbe
from probewise.core.posterior import Observations, PosteriorState, Prediction


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
    """

    probe: PlannedProbe
    depth_m: float
    observes: tuple[int, ...]
    target: int | None
    refuses: bool


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
    of_interest = {b.boundary for b in ground.boundaries_of_interest}
    B = ground.n_boundaries
    plans = []
    for j, probe in enumerate(probes):
        method = methods[probe.method]
        r = method.refusal_unit
        above_refusal = B if r is None else min(r, B)  # boundaries 0..above_refusal-1
        if r is None:
            cap = np.inf
        elif r == 0:
            cap = 0.0
        else:
            cap = float(p95[j, r - 1])
        resolved = [k for k in range(above_refusal) if method.resolves(k)]
        reachable = [k for k in resolved if p95[j, k] <= method.max_depth_m]
        target = None
        if probe.depth_m is not None:
            depth = float(probe.depth_m)
        else:
            wanted = [k for k in reachable if k in of_interest] or reachable
            if wanted:
                target = max(wanted)
                depth = min(float(p95[j, target]) + method.embedment_m, method.max_depth_m, cap)
            else:
                depth = min(float(method.max_depth_m), cap)
        observes = tuple(k for k in resolved if p95[j, k] <= depth)
        plans.append(ProbePlan(probe, depth, observes, target, bool(depth >= cap)))
    return tuple(plans)


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
