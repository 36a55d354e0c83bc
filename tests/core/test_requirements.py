"""Requirements a plan must meet (server/core/requirements.py) and the optimiser's hook.

Checks, each against an independent computation:
- k_n of EN 1990:2002 Annex D, Table D1 (values from memory) against the code's k_n and
  against the formulas of (D.7.2) computed here with scipy.stats: V known
  k_n = u_0.95 sqrt(1 + 1/n), V unknown k_n = t_0.95(n - 1) sqrt(1 + 1/n);
- the number of results a characteristic value needs against a search written here;
- what a delivery counts in a unit (intervals, per unit, continuous) against hand counts;
- the optimiser's layouts meet every requirement at three budgets on the tiny model, bench S
  and the demo, checked here from the evaluated plans (probe counts, distances, the unit band
  from the point posterior): not with the code's own tracker;
- a budget that cannot meet a requirement raises RequirementsUnmetError naming it.
"""

from __future__ import annotations

import json
import math
import sys
from pathlib import Path

import numpy as np
import pytest
from core_helpers import tiny_dict
from scipy import stats

from probewise.app.to_core import to_core
from probewise.core.analysis import ProjectAnalysis
from probewise.core.evaluate import GridEvaluator
from probewise.core.model import Delivery
from probewise.core.optimise import OptimiseOptions, RequirementsUnmetError, optimise
from probewise.core.requirements import (
    counts_in_unit,
    k_n,
    requirement_status,
)
from probewise.core.requirements import (
    tests_for_characteristic as least_results,  # not collected as a test by pytest
)
from probewise.io.model_file import validate_model

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT / "benchmarks"))
from make_case import make  # noqa: E402

# EN 1990:2002 Annex D, Table D1: k_n for the 5% characteristic value (from memory).
TABLE_D1_N = (1, 2, 3, 4, 5, 6, 8, 10, 20, 30)
TABLE_D1_KNOWN = (2.31, 2.01, 1.89, 1.83, 1.80, 1.77, 1.74, 1.72, 1.68, 1.67)
TABLE_D1_UNKNOWN = (None, None, 3.37, 2.63, 2.33, 2.18, 2.00, 1.92, 1.76, 1.73)


def test_k_n_matches_table_d1_and_the_formulas():
    for n, known, unknown in zip(TABLE_D1_N, TABLE_D1_KNOWN, TABLE_D1_UNKNOWN, strict=True):
        formula_known = stats.norm.ppf(0.95) * math.sqrt(1 + 1 / n)
        assert k_n(n, True) == pytest.approx(formula_known, rel=1e-9)
        assert k_n(n, True) == pytest.approx(known, abs=0.02)  # the table rounds down
        if unknown is None:
            assert k_n(n, False) == math.inf  # the table gives no value below 3 results
            continue
        formula = stats.t.ppf(0.95, n - 1) * math.sqrt(1 + 1 / n)
        assert k_n(n, False) == pytest.approx(formula, rel=1e-9)
        assert k_n(n, False) == pytest.approx(unknown, abs=0.02)


@pytest.mark.parametrize(
    ("cov", "reduction", "known"), [(0.3, 0.6, False), (0.2, 0.4, True), (0.1, 0.3, False)]
)
def test_tests_for_characteristic_is_the_least_n(cov, reduction, known):
    def kn(n):  # (D.7.2), written again here
        if known:
            return stats.norm.ppf(0.95) * math.sqrt(1 + 1 / n)
        return math.inf if n < 3 else stats.t.ppf(0.95, n - 1) * math.sqrt(1 + 1 / n)

    expected = next(n for n in range(1, 500) if kn(n) * cov <= reduction)
    assert least_results(cov, reduction, known) == expected


def test_never_enough_results_when_the_spread_is_too_wide():
    # k_n >= 1.645 for every n: a 40% reduction can never cover V = 0.3 (1.645 * 0.3 = 0.49)
    assert least_results(0.3, 0.4, True) is None


def test_counts_in_unit_by_hand():
    top, base = np.array([1.0, 1.0, 1.0]), np.array([4.5, 4.5, 4.5])
    depth = np.array([10.0, 3.2, 0.5])  # through, part way, short of the unit
    every = Delivery("sample", "tube", ("su",), every_m=1.0)
    assert counts_in_unit(every, top, base, depth).tolist() == [3, 2, 0]
    per = Delivery("in_situ", "dissipation", ("ch",), per_unit=2)
    assert counts_in_unit(per, top, base, depth).tolist() == [2, 2, 0]
    prof = Delivery("in_situ", "cone", ("qt",), continuous=True)
    assert counts_in_unit(prof, top, base, depth).tolist() == [1, 1, 0]


def add_requirements(model: dict, soft: str, coarse: str, bh="BH", cpt="CPT") -> dict:
    """Deliveries and requirements on a model (invented)."""
    for method in model["methods"]:
        if method["id"] == bh:
            method["delivers"] = [
                {"kind": "sample", "name": "Thin-wall tube", "quality_class": 1,
                 "category": "A", "every_m": 1.0, "units": [soft], "parameters": ["su"]},
                {"kind": "sample", "name": "Bulk bag", "quality_class": 3, "category": "B",
                 "every_m": 1.5, "units": [coarse], "parameters": ["PSD"]},
            ]  # fmt: skip
    model["requirements"] = {
        "min_probes": {bh: 2},
        "calibration": [{"method": bh, "for": [cpt], "per": 4, "within_m": 60.0}],
        "tests": [
            {"unit": soft, "parameter": "su", "characteristic": {"cov": 0.3, "max_reduction": 0.6}},
            {"unit": soft, "parameter": "PSD", "count": 0},
        ],
    }
    return validate_model(model)


def independent_check(project, result, soft_index: int, bh="BH", cpt="CPT") -> list[str]:
    """What the layout misses, computed here from its plans and the point posterior."""
    req = project.requirements
    plans = result.plans
    problems = []
    n_bh = sum(p.probe.method == bh for p in plans)
    if n_bh < dict(req.min_probes)[bh]:
        problems.append("min")
    bh_xy = [(p.probe.x, p.probe.y) for p in plans if p.probe.method == bh]
    bh_xy += [(e.x, e.y) for e in project.existing if e.method == bh]
    rule = req.calibration[0]
    cpts = [(p.probe.x, p.probe.y) for p in plans if p.probe.method == cpt]
    for x, y in cpts:
        if min(math.hypot(x - a, y - b) for a, b in bh_xy) > rule.within_m + 1e-6:
            problems.append("distance")
    if len(cpts) > rule.per * len(bh_xy):
        problems.append("ratio")
    analysis = ProjectAnalysis(project)
    holes = [p for p in plans if p.probe.method == bh]
    if holes:
        post = analysis.at_points(np.array([(p.probe.x, p.probe.y) for p in holes]))
        top = post.mean_m[:, soft_index - 1] if soft_index else np.zeros(len(holes))
        base = post.mean_m[:, soft_index]
        depth = np.array([p.depth_m for p in holes])
        length = np.clip(np.minimum(base, depth) - np.maximum(top, 0), 0, None)
        samples = int(np.floor(length / 1.0 + 1e-9).sum())
    else:
        samples = 0
    if samples < req.tests[0].count:
        problems.append("tests")
    return problems


FAST = {"target_locations": 150, "refine_sweeps": 1, "max_cells": 600, "refine_cells": 600}


@pytest.mark.slow
@pytest.mark.parametrize("budget", [12000.0, 20000.0, 35000.0])
def test_optimiser_meets_every_requirement_on_the_tiny_model(budget):
    model = add_requirements(tiny_dict(), "Alluvial clay", "River gravel")
    project = to_core(model)
    out = optimise(project, OptimiseOptions(budget=budget, **FAST))
    assert out.result.cost <= budget + 1e-6
    assert independent_check(project, out.result, 1) == []
    assert any(p.method == "BH" for p in out.layout.probes)


@pytest.mark.slow
@pytest.mark.parametrize("budget", [15000.0, 25000.0, 40000.0])
def test_optimiser_meets_every_requirement_on_bench_s(budget):
    model = add_requirements(make("S", 1), "Soft alluvium", "Sand and gravel")
    project = to_core(model)
    out = optimise(project, OptimiseOptions(budget=budget, **FAST))
    assert out.result.cost <= budget + 1e-6
    assert independent_check(project, out.result, 1) == []


def demo_project():
    text = (ROOT / "seed_data" / "demo-project.json").read_text()
    return to_core(validate_model(json.loads(text)))


@pytest.mark.slow
@pytest.mark.parametrize("budget", [40000.0, 60000.0, 80000.0])  # the demo with its cost items
def test_optimiser_meets_the_demo_requirements_with_boreholes(budget):
    project = demo_project()  # five methods: mixes of at most two keep the test short
    out = optimise(project, OptimiseOptions(budget=budget, max_methods_per_mix=2, **FAST))
    methods = [p.method for p in out.layout.probes]
    assert methods.count("CP") >= 2  # the demo asks for two cable percussive boreholes
    # checked here: calibration distance and ratio, from the plans
    bh = [(p.probe.x, p.probe.y) for p in out.result.plans if p.probe.method == "CP"]
    bh += [(e.x, e.y) for e in project.existing if e.method == "CP"]
    calibrated = [p for p in out.result.plans if p.probe.method in ("CPTu", "SDMT")]
    for p in calibrated:
        assert min(math.hypot(p.probe.x - a, p.probe.y - b) for a, b in bh) <= 150 + 1e-6
    assert len(calibrated) <= 6 * len(bh)
    assert requirement_status(GridEvaluator(project).analysis, out.result.plans).met


def test_a_budget_too_small_names_the_requirement():
    model = add_requirements(tiny_dict(), "Alluvial clay", "River gravel")
    project = to_core(model)
    with pytest.raises(RequirementsUnmetError) as info:
        optimise(project, OptimiseOptions(budget=5000.0, **FAST))
    text = " ".join(info.value.unmet)
    assert "at least 2 BH" in text
    assert "su in Alluvial clay" in text
    assert info.value.field == "requirements"
