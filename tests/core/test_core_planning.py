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


# ---------------------------------------------------------------- refusal rules and proof
# (docs/model.md "Refusal and pre-drilling"; constructed cases on the tiny model)


def _cpt(model: dict) -> dict:
    return next(m for m in model["methods"] if m["id"] == "CPT")


def test_a_stop_that_does_not_prove_the_unit_top_is_not_a_reading():
    # The tiny CPT stops on River gravel (cannot_penetrate). With proves_refusal false the
    # stop at the top of River gravel (the base of Alluvial clay) is not a reading: neither
    # the target nor observed, and the layout learns less about that boundary.
    model = tiny_dict()
    proven, p95 = _plan(model, "CPT")
    _cpt(model)["proves_refusal"] = False
    unproven, _ = _plan(model, "CPT")
    assert 1 in proven.observes and 1 not in unproven.observes
    assert unproven.observes == (0,) and unproven.target == 0
    assert unproven.refuses is False  # planned for the base of Made ground, short of the stop
    from probewise.core.evaluate import evaluate_project

    layout = Layout("one", (PlannedProbe("P1", "CPT", *SPOT),))
    std = {}
    for flag in (True, False):
        _cpt(model)["proves_refusal"] = flag
        result = evaluate_project(to_core(model), [layout]).layouts[0]
        std[flag] = result.boundaries["Alluvial clay"].std_mean_m
    assert std[False] > std[True]


def test_a_likely_refusal_without_pre_drilling_stops_like_cannot_penetrate():
    model = tiny_dict()
    _cpt(model)["cannot_penetrate"] = []
    _cpt(model)["refusal"] = [{"unit": "River gravel", "chance": 0.7}]
    plan, p95 = _plan(model, "CPT")
    assert plan.refuses and plan.refusal_unit == 2
    assert plan.depth_m == pytest.approx(p95[1], abs=1e-12)
    assert plan.observes == (0, 1)  # a probe that may refuse in a unit has entered it


def test_a_small_chance_of_refusal_is_planned_through_and_reported_as_a_risk():
    model = tiny_dict()
    cpt = _cpt(model)
    cpt["cannot_penetrate"] = []
    cpt["precision_m"]["River gravel"] = 0.3
    cpt["refusal"] = [{"unit": "River gravel", "chance": 0.3}]
    plan, p95 = _plan(model, "CPT")
    assert not plan.refuses and plan.target == 2
    assert plan.risks == ((2, 0.3),)
    assert plan.observes == (0, 1, 2)


def test_pre_drilling_passes_the_unit_but_does_not_read_its_base():
    # Constructed: the CPT must pre-drill Alluvial clay (unit 1) to reach the base of River
    # gravel: it reads the base of Made ground and of River gravel, not that of the clay, and
    # pre-drills from the clay's P5 top to its P95 base.
    model = tiny_dict()
    cpt = _cpt(model)
    cpt["cannot_penetrate"] = []
    cpt["precision_m"]["River gravel"] = 0.3
    cpt["refusal"] = [
        {
            "unit": "Alluvial clay",
            "chance": 1.0,
            "predrill": {"per_metre": 40, "metres_per_day": 20},
        }
    ]
    plan, p95 = _plan(model, "CPT")
    p05 = ProjectAnalysis(to_core(model)).at_points(np.array([SPOT])).p05_m[0]
    assert plan.target == 2 and plan.observes == (0, 2)
    assert plan.predrilled == (1,)
    assert plan.predrill_m == pytest.approx(p95[1] - p05[0], abs=1e-12)
    assert plan.depth_m == pytest.approx(p95[2] + 0.5, abs=1e-12)


def test_pre_drilling_is_not_paid_when_the_target_is_above_the_unit():
    # The same rule on River gravel: the CPT's targets end in the gravel, so it need not pass
    # it and stops there (a likely refusal), with no pre-drilling priced.
    model = tiny_dict()
    cpt = _cpt(model)
    cpt["cannot_penetrate"] = []
    cpt["refusal"] = [
        {"unit": "River gravel", "chance": 0.9, "predrill": {"per_metre": 40, "metres_per_day": 20}}
    ]
    plan, p95 = _plan(model, "CPT")
    assert plan.refuses and plan.refusal_unit == 2 and plan.predrill_m == 0.0
    assert plan.observes == (0, 1)
