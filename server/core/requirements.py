"""Requirements a plan must meet, and what a layout delivers towards them.

docs/optimiser.md "Requirements". Three kinds (``probewise.core.model.Requirements``):

- least numbers of probes of a method (the layout's own probes);
- calibration: every planned probe of the calibrated methods has a probe of the calibrating
  method (planned or existing) within a distance, and the planned calibrated probes number at
  most ``per`` x the calibrating probes (planned and existing) (common practice, no source);
- tests per unit: at least ``n`` results of a design parameter in a unit, counting the tests
  recorded by existing probes and those the layout's probes deliver. ``n`` is given, or is the
  number a characteristic value needs (EN 1990:2002 Annex D, D.7.2): the characteristic value
  of a parameter of mean ``m`` and coefficient of variation ``V`` is ``m (1 - k_n V)``; the
  user says how far below the mean (as a share ``delta`` of it) it may fall, and ``n`` is the
  least number of results with ``k_n V <= delta``.

What a probe delivers in a unit (``probewise.core.model.Delivery``) is counted on the unit's
expected band at the probe: from the mean depth of the unit's top to that of its base (the
baseline posterior: existing probes only), cut at the planned depth.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from scipy import stats

from probewise.core.model import Delivery, Method, TestRequirement

MAX_TESTS = 500  # a characteristic value that needs more is refused (the spread is too wide)


def k_n(n: int, v_known: bool) -> float:
    """EN 1990 Annex D fractile factor for the 5% characteristic value of ``n`` results.

    ``k_n = u_0.95 sqrt(1 + 1/n)`` when the coefficient of variation is known beforehand,
    ``k_n = t_0.95(n - 1) sqrt(1 + 1/n)`` when it is estimated from the results (Student's t
    with n - 1 degrees of freedom; Table D1 gives no value for fewer than 3 results, nor do
    we: ``inf``). EN 1990:2002 (D.7.2), Table D1.
    """
    if n < 1 or (not v_known and n < 3):
        return math.inf
    quantile = stats.norm.ppf(0.95) if v_known else stats.t.ppf(0.95, n - 1)
    return float(quantile * math.sqrt(1.0 + 1.0 / n))


def tests_for_characteristic(cov: float, max_reduction: float, v_known: bool) -> int | None:
    """Least ``n`` with ``k_n(n) * cov <= max_reduction``; None when no ``n`` up to
    ``MAX_TESTS`` is enough (``k_n`` never falls below ``u_0.95`` = 1.645)."""
    for n in range(1, MAX_TESTS + 1):
        if k_n(n, v_known) * cov <= max_reduction + 1e-12:
            return n
    return None


def counts_in_unit(
    delivery: Delivery, top_m: np.ndarray, base_m: np.ndarray, depth_m: np.ndarray
) -> np.ndarray:
    """How many results one delivery gives in a unit at each probe.

    Parameters
    ----------
    delivery : Delivery
    top_m, base_m : (n,) float
        Expected top and base of the unit at each probe (base ``inf`` for the basal unit).
    depth_m : (n,) float
        Planned depth of each probe.

    Returns
    -------
    (n,) int
    """
    length = np.clip(np.minimum(base_m, depth_m) - top_m, 0.0, None)
    reached = length > 1e-9
    if delivery.every_m is not None:
        return np.floor(length / delivery.every_m + 1e-9).astype(int)
    each = delivery.per_unit or delivery.per_probe or (1 if delivery.continuous else 0)
    return np.where(reached, each, 0).astype(int)


def delivers_parameter(delivery: Delivery, req: TestRequirement) -> bool:
    """Whether a delivery gives the requirement's parameter in its unit."""
    if delivery.units and req.unit not in delivery.units:
        return False
    wanted = req.parameter.strip().casefold()
    return any(p.strip().casefold() == wanted for p in delivery.parameters)


def unit_band_m(mean_m: np.ndarray, unit: int) -> tuple[np.ndarray, np.ndarray]:
    """Expected top and base of unit ``unit`` from boundary means ``(n, B)``: ``(n,)`` each."""
    n, B = mean_m.shape
    top = np.zeros(n) if unit == 0 else np.maximum(mean_m[:, unit - 1], 0.0)
    base = np.full(n, np.inf) if unit >= B else np.maximum(mean_m[:, unit], top)
    return top, base


def test_counts(
    methods: Sequence[Method],
    tests: Sequence[TestRequirement],
    mean_m: np.ndarray,
    depth_m: np.ndarray,
) -> np.ndarray:
    """Results each probe delivers towards each test requirement.

    Parameters
    ----------
    methods : sequence of Method, length J
    tests : sequence of TestRequirement, length R
    mean_m : (n, B) float
        Expected boundary depths at the probes' locations.
    depth_m : (n, J) float
        Planned depth of each location with each method.

    Returns
    -------
    (n, J, R) int
    """
    out = np.zeros((len(mean_m), len(methods), len(tests)), dtype=int)
    for r, req in enumerate(tests):
        top, base = unit_band_m(mean_m, req.unit)
        for j, method in enumerate(methods):
            for d in method.delivers:
                if delivers_parameter(d, req):
                    out[:, j, r] += counts_in_unit(d, top, base, depth_m[:, j])
    return out


def existing_test_counts(project, mean_m: np.ndarray) -> np.ndarray:
    """``(R,)`` results the existing probes recorded towards each test requirement; a test
    is in the unit whose expected band at the probe (``mean_m`` ``(n_existing, B)``) holds
    its depth."""
    req = project.requirements
    out = np.zeros(len(req.tests), dtype=int)
    for i, probe in enumerate(project.existing):
        for depth, parameter in probe.tests:
            for r, t in enumerate(req.tests):
                if t.parameter.strip().casefold() != parameter.strip().casefold():
                    continue
                top, base = unit_band_m(mean_m[i : i + 1], t.unit)
                if top[0] <= depth < base[0] or (t.unit == 0 and depth == 0):
                    out[r] += 1
    return out


@dataclass(frozen=True)
class RequirementStatus:
    """Whether a layout meets the requirements, and in words what it misses."""

    met: bool
    unmet: tuple[str, ...]
    tests: tuple[int, ...] = ()  # results per test requirement (existing + planned)


class RequirementTracker:
    """The requirements against a growing set of candidate probes (the optimiser's hook).

    Built once per candidate set; :meth:`copy` for each run, :meth:`add` after each pick.
    :meth:`mask` says which candidates may join: with ``complete`` False, those that keep
    every calibration rule (the greedy builds up to the counts); with ``complete`` True,
    those after which every requirement is met (an exchange of a layout that met them).

    Parameters
    ----------
    requirements : Requirements
    method_ids : tuple of str, length J
        Methods of the candidates.
    local : (L, 2) float
        Candidate locations (local coordinates).
    counts : (L, J, R) int
        Results each candidate delivers towards each test requirement.
    existing : sequence of (method id, (2,) local xy)
        Existing probes (they calibrate and count towards calibration ratios).
    existing_tests : (R,) int
        Results the existing probes recorded towards each test requirement.
    """

    def __init__(self, requirements, method_ids, local, counts, existing, existing_tests):
        self.req = requirements
        self.method_ids = tuple(method_ids)
        self.local = local
        self.counts = counts
        self.n_method = dict.fromkeys(self.method_ids, 0)
        self.tests = np.asarray(existing_tests, dtype=int).copy()
        L = len(local)
        cal = requirements.calibration
        self.covered = np.zeros((len(cal), L), dtype=bool)
        self.calibrators = np.zeros(len(cal), dtype=int)
        self.calibrated = np.zeros(len(cal), dtype=int)
        self.uncovered: list[list[np.ndarray]] = [[] for _ in cal]
        self.calibrator_xy = [np.zeros((0, 2)) for _ in cal]
        self.for_cols = [
            np.array([m in c.for_methods for m in self.method_ids], dtype=bool) for c in cal
        ]
        for mid, xy in existing:
            for c, rule in enumerate(cal):
                if mid == rule.method:
                    self._cover(c, np.asarray(xy, dtype=float))

    def copy(self) -> RequirementTracker:
        new = object.__new__(RequirementTracker)
        new.__dict__.update(self.__dict__)
        new.n_method = dict(self.n_method)
        new.tests = self.tests.copy()
        new.covered = self.covered.copy()
        new.calibrators = self.calibrators.copy()
        new.calibrated = self.calibrated.copy()
        new.uncovered = [list(u) for u in self.uncovered]
        new.calibrator_xy = list(self.calibrator_xy)
        return new

    def _cover(self, c: int, xy: np.ndarray) -> None:
        within = self.req.calibration[c].within_m
        self.covered[c] |= np.hypot(*(self.local - xy).T) <= within + 1e-9
        self.calibrators[c] += 1
        self.calibrator_xy[c] = np.vstack([self.calibrator_xy[c], xy[None, :]])
        self.uncovered[c] = [p for p in self.uncovered[c] if np.hypot(*(p - xy)) > within + 1e-9]

    def add(self, l: int, j: int) -> None:
        """Take candidate ``(l, j)`` into the layout."""
        self.add_probe(self.method_ids[j], self.local[l], self.counts[l, j])

    def add_probe(self, mid: str, xy: np.ndarray, tests: np.ndarray) -> None:
        """Take a probe of method ``mid`` at local ``xy`` delivering ``tests`` ``(R,)``."""
        xy = np.asarray(xy, dtype=float)
        self.n_method[mid] = self.n_method.get(mid, 0) + 1
        self.tests += tests
        for c, rule in enumerate(self.req.calibration):
            if mid in rule.for_methods:
                self.calibrated[c] += 1
                within = np.hypot(*(self.calibrator_xy[c] - xy).T) <= rule.within_m + 1e-9
                if not within.any():
                    self.uncovered[c].append(xy.copy())
            if mid == rule.method:
                self._cover(c, xy)

    def add_plans(self, analysis, plans) -> None:
        """Take planned probes (``probewise.core.planning.ProbePlan``, e.g. a hand-made
        start layout) into the layout."""
        if not plans:
            return
        xy = analysis.to_local(np.array([(p.probe.x, p.probe.y) for p in plans]))
        mean = analysis.baseline.predict(xy).mean_m if self.req.tests else None
        for n, plan in enumerate(plans):
            tests = np.zeros(len(self.req.tests), dtype=int)
            if mean is not None:
                depth = np.array([[plan.depth_m]])
                method = analysis.methods[plan.probe.method]
                tests = test_counts([method], self.req.tests, mean[n : n + 1], depth)[0, 0]
            self.add_probe(plan.probe.method, xy[n], tests)

    def unmet(self) -> list[int]:
        """Indices of the unmet rules: ``("min", i)``, ``("cal", c)``, ``("test", r)``."""
        out = []
        for i, (mid, n) in enumerate(self.req.min_probes):
            if self.n_method.get(mid, 0) < n:
                out.append(("min", i))
        for c, rule in enumerate(self.req.calibration):
            if self.uncovered[c] or self.calibrated[c] > rule.per * self.calibrators[c]:
                out.append(("cal", c))
        for r, t in enumerate(self.req.tests):
            if self.tests[r] < t.count:
                out.append(("test", r))
        return out

    def meets(self) -> bool:
        return not self.unmet()

    def mask(self, complete: bool = False) -> np.ndarray:
        """``(L, J)`` bool: candidates that may join (see the class docstring)."""
        L, J = len(self.local), len(self.method_ids)
        ok = np.ones((L, J), dtype=bool)
        for c, rule in enumerate(self.req.calibration):
            cols = self.for_cols[c]
            room = self.calibrated[c] + 1 <= rule.per * self.calibrators[c]
            ok[:, cols] &= self.covered[c][:, None] & room
        if not complete:
            return ok
        for kind, i in self.unmet():
            if kind == "min":
                mid, n = self.req.min_probes[i]
                short = n - self.n_method.get(mid, 0)
                ok &= (np.array(self.method_ids) == mid)[None, :] & (short <= 1)
            elif kind == "test":
                ok &= self.counts[:, :, i] >= self.req.tests[i].count - self.tests[i]
            else:
                rule = self.req.calibration[i]
                cal_col = np.array(self.method_ids) == rule.method
                fix = np.ones(L, dtype=bool)
                for p in self.uncovered[i]:
                    fix &= np.hypot(*(self.local - p).T) <= rule.within_m + 1e-9
                enough = self.calibrated[i] <= rule.per * (self.calibrators[i] + 1)
                ok &= fix[:, None] & cal_col[None, :] & enough
        return ok


def describe_unmet(project, kind: str, i: int, tracker: RequirementTracker) -> str:
    """One unmet rule in words, with what the layout has."""
    req = project.requirements
    if kind == "min":
        mid, n = req.min_probes[i]
        return f"at least {n} {mid} probes: the layout has {tracker.n_method.get(mid, 0)}"
    if kind == "test":
        t = req.tests[i]
        unit = project.ground.units[t.unit].name
        return (
            f"{t.count} results of {t.parameter} in {unit}: the layout and the existing "
            f"probes give {int(tracker.tests[i])}"
        )
    rule = req.calibration[i]
    names = "/".join(rule.for_methods)
    parts = []
    if tracker.uncovered[i]:
        parts.append(
            f"{len(tracker.uncovered[i])} {names} probes have no {rule.method} "
            f"within {rule.within_m:g} m"
        )
    if tracker.calibrated[i] > rule.per * tracker.calibrators[i]:
        parts.append(
            f"{tracker.calibrated[i]} {names} probes for {tracker.calibrators[i]} "
            f"{rule.method}, more than {rule.per} per {rule.method}"
        )
    return f"one {rule.method} per {rule.per} {names} within {rule.within_m:g} m: " + "; ".join(
        parts
    )


def build_tracker(analysis, method_ids, xy_project: np.ndarray, depth_m: np.ndarray):
    """A :class:`RequirementTracker` for candidate probes at ``xy_project`` ``(L, 2)`` with
    methods ``method_ids`` and planned depths ``depth_m`` ``(L, J)``; None without
    requirements."""
    project = analysis.project
    req = project.requirements
    if req is None or req.empty:
        return None
    methods = [analysis.methods[m] for m in method_ids]
    local = analysis.to_local(xy_project)
    counts = np.zeros((len(local), len(methods), len(req.tests)), dtype=int)
    if req.tests and len(local):
        mean = analysis.baseline.predict(local).mean_m
        counts = test_counts(methods, req.tests, mean, depth_m)
    existing_tests = np.zeros(len(req.tests), dtype=int)
    if req.tests and project.existing:
        ex_xy = np.array([(p.x, p.y) for p in project.existing])
        mean_ex = analysis.baseline.predict(analysis.to_local(ex_xy)).mean_m
        existing_tests = existing_test_counts(project, mean_ex)
    existing = [(p.method, analysis.to_local(np.array([[p.x, p.y]]))[0]) for p in project.existing]
    return RequirementTracker(req, method_ids, local, counts, existing, existing_tests)


def requirement_status(analysis, plans) -> RequirementStatus | None:
    """Whether the planned probes ``plans`` (``probewise.core.planning.ProbePlan``) meet the
    project's requirements; None when it has none."""
    project = analysis.project
    req = project.requirements
    if req is None or req.empty:
        return None
    method_ids = tuple(project.methods)
    xy = np.array([(p.probe.x, p.probe.y) for p in plans], dtype=float).reshape(-1, 2)
    depth = np.repeat(np.array([p.depth_m for p in plans], float)[:, None], len(method_ids), 1)
    tracker = build_tracker(analysis, method_ids, xy, depth)
    for n, plan in enumerate(plans):
        tracker.add(n, method_ids.index(plan.probe.method))
    unmet = tuple(describe_unmet(project, kind, i, tracker) for kind, i in tracker.unmet())
    return RequirementStatus(not unmet, unmet, tuple(int(v) for v in tracker.tests))
