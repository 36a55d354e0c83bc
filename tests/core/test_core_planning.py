"""Planned depth and observed set of planned probes (docs/model.md "Probability model": "Observed
set of a planned probe" and "Planned depth"), checked rule by rule on the tiny model with the
P95 depths read from the existing-probes posterior at the same spot."""

from __future__ import annotations

import math

import numpy as np
import pytest
from core_helpers import tiny_dict
from dense_reference import Dense

from probewise.app.to_core import to_core
from probewise.core.analysis import ProjectAnalysis
from probewise.core.model import Layout, PlannedProbe

SPOT = (100.0, 60.0)


def _plan(model: dict, method: str, depth_m=None):
    analysis = ProjectAnalysis(to_core(model))
    probe = PlannedProbe("P1", method, *SPOT, depth_m=depth_m)
    (plan,) = analysis.plan(Layout("one", (probe,)))
    p95 = analysis.at_points(np.array([SPOT])).p95_m[0]
    return plan, p95


def test_borehole_goes_to_p95_of_deepest_boundary_of_interest_plus_embedment():
    plan, p95 = _plan(tiny_dict(), "BH")
    assert plan.target == 2  # base of River gravel, the deepest boundary of interest
    assert plan.depth_m == pytest.approx(p95[2] + 1.5, abs=1e-12)
    assert plan.observes == (0, 1, 2)
    assert not plan.refuses


def test_refusal_caps_at_p95_of_top_of_refusing_unit_and_sees_nothing_below():
    # CPT cannot penetrate River gravel: it stops at the P95 of its top (base of Alluvial
    # clay), sees that boundary and nothing below.
    plan, p95 = _plan(tiny_dict(), "CPT")
    assert plan.target == 1
    assert plan.depth_m == pytest.approx(p95[1], abs=1e-12)
    assert plan.observes == (0, 1)
    assert plan.refuses


def test_refusal_with_a_resolving_method_still_sees_nothing_below():
    model = tiny_dict()
    cpt = next(m for m in model["methods"] if m["id"] == "CPT")
    cpt["precision_m"]["River gravel"] = 0.2  # resolves it, but cannot get there
    plan, p95 = _plan(model, "CPT")
    assert plan.observes == (0, 1)
    assert plan.depth_m == pytest.approx(p95[1], abs=1e-12)


def test_max_depth_caps_the_planned_depth():
    model = tiny_dict()
    _, p95 = _plan(model, "BH")
    bh = next(m for m in model["methods"] if m["id"] == "BH")
    bh["max_depth_m"] = float(p95[1] + 0.5)  # between the P95s of boundaries 1 and 2
    plan, p95 = _plan(model, "BH")
    assert plan.target == 1  # boundary 2 is out of reach
    assert plan.depth_m == pytest.approx(bh["max_depth_m"], abs=1e-12)  # p95 + 1.5 capped
    assert plan.observes == (0, 1)


def test_nothing_reachable_goes_to_max_depth():
    model = tiny_dict()
    bh = next(m for m in model["methods"] if m["id"] == "BH")
    bh["max_depth_m"] = 0.4
    plan, _ = _plan(model, "BH")
    assert plan.target is None
    assert plan.depth_m == pytest.approx(0.4)
    assert plan.observes == ()


def test_without_a_boundary_of_interest_the_deepest_resolved_one_is_the_target():
    model = tiny_dict()
    dmt = next(m for m in model["methods"] if m["id"] == "DMT")
    dmt["precision_m"] = {"Made ground": 0.2}
    plan, p95 = _plan(model, "DMT")
    assert plan.target == 0
    assert plan.depth_m == pytest.approx(p95[0] + 0.5, abs=1e-12)
    assert plan.observes == (0,)


def test_depth_override_is_used_and_limits_what_is_seen():
    plan, p95 = _plan(tiny_dict(), "BH", depth_m=float(p95_between()))
    assert plan.depth_m == p95_between()
    assert plan.observes == tuple(k for k in range(3) if p95[k] <= p95_between())
    assert plan.target is None


def p95_between() -> float:
    _, p95 = _plan(tiny_dict(), "BH")
    return float((p95[0] + p95[1]) / 2)


def test_cannot_penetrate_the_top_unit_means_no_depth():
    model = tiny_dict()
    cpt = next(m for m in model["methods"] if m["id"] == "CPT")
    cpt["cannot_penetrate"] = ["Made ground", "River gravel"]
    plan, _ = _plan(model, "CPT")
    assert plan.depth_m == 0.0
    assert plan.observes == ()
    assert plan.refuses


def test_existing_probes_shape_the_plan():
    """A planned borehole 0.5 m from HBH1 (base of River gravel found at 6.2 m) plans to the
    P95 of that boundary given the existing probes, plus the method's 1.5 m embedment.

    The expected depth is derived here from docs/model.md with the dense reference
    (tests/core/dense_reference.py: covariance entry by entry, np.linalg.solve, and
    scipy.stats.truncnorm), not read from the core; it sits near 6.2 + 1.5 m, far from the
    prior P95 plus embedment.
    """
    model = tiny_dict()
    spot = (30.5, 30.0)
    analysis = ProjectAnalysis(to_core(model))
    (near,) = analysis.plan(Layout("n", (PlannedProbe("N", "BH", *spot),)))

    dense = Dense(model)
    gravel = 2  # base of River gravel, the deepest boundary of interest a borehole reaches
    mean, var = dense.posterior([spot])
    lo, hi = dense.bounds(gravel, *spot)
    p95 = dense.quantile(mean[0, gravel], math.sqrt(var[0, gravel]), lo, hi, 0.95)
    assert near.depth_m == pytest.approx(p95 + 1.5, abs=1e-9)

    prior_mean = dense.prior_mean(gravel, *spot)
    prior_std = math.sqrt(dense.cov((*spot, gravel), (*spot, gravel)))
    prior_p95 = dense.quantile(prior_mean, prior_std, lo, hi, 0.95)
    # the reading, not the prior, governs: the mean sits on 6.2 m, the prior P95 is metres deeper
    assert abs(mean[0, gravel] - 6.2) < 0.05 and prior_p95 - p95 > 2.0
