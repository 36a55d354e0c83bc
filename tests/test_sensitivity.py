"""Sensitivity of the ranking (server/app/sensitivity.py): constructed cases where the best
option provably changes with the practical ranges doubled, and where it holds in every case.

"Provably": each changed model is also written as a model file with the figures changed by
hand and evaluated from scratch (`probewise evaluate`, or the model file read again), so the
best option there does not depend on the scaling code under test. The ground and the layouts
are invented.
"""

from __future__ import annotations

import copy
import json
from pathlib import Path

from cli_helpers import run_cli

from probewise.app.sensitivity import ranking_sensitivity, sensitivity_sentence
from probewise.app.to_core import to_core
from probewise.core.options import rank_options

TINY = Path(__file__).resolve().parent / "data" / "tiny-model.json"
ONE, FOUR = "One borehole", "Four boreholes"


def one_or_four(range_m: float) -> dict:
    """The tiny site without existing probes, every unit exponential with ``range_m``; one
    borehole in the middle against four spread over the site (same method)."""
    model = json.loads(TINY.read_text())
    model["existing"] = []
    for unit in model["units"][:-1]:
        unit["correlation"] = {"model": "exponential", "range_m": range_m}
    corners = [(50, 30), (150, 30), (50, 90), (150, 90)]
    model["layouts"] = [
        {"name": ONE, "probes": [{"id": "B1", "method": "BH", "x": 100, "y": 60}]},
        {
            "name": FOUR,
            "probes": [
                {"id": f"B{i}", "method": "BH", "x": x, "y": y} for i, (x, y) in enumerate(corners)
            ],
        },
    ]
    return model


def kinds(model: dict) -> dict[str, str]:
    return {lay["name"]: "hand" for lay in model["layouts"]}


def best_by_hand(model: dict) -> str:
    """The Pareto option of most gain per unit cost, from the model file read afresh."""
    ranked = rank_options(to_core(model), to_core(model).layouts, kinds(model))
    return max((o for o in ranked if o.pareto), key=lambda o: o.gain_per_cost).name


def changed(model: dict, *, range_factor: float = 1.0, spread: float = 1.0) -> dict:
    """The model file with its figures changed by hand."""
    out = copy.deepcopy(model)
    for unit in out["units"][:-1]:
        unit["correlation"]["range_m"] *= range_factor
        unit["spread_multiplier"] = spread
    return out


def test_the_best_option_changes_when_the_ranges_double(tmp_path):
    model = one_or_four(40.0)
    sens = ranking_sensitivity(to_core(model), kinds(model))
    by_key = {s.key: s for s in sens.scenarios}
    assert sens.best == ONE and by_key["ranges_x2"].best == FOUR
    assert not sens.holds
    assert [s.key for s in sens.changes] == ["ranges_x2"]
    assert by_key["ranges_x2"].base_best_place == 2
    # Outside the code under test: the file with the ranges doubled by hand, through
    # `probewise evaluate`; gain per cost of each layout from its JSON.
    doubled = tmp_path / "doubled.json"
    doubled.write_text(json.dumps(changed(model, range_factor=2.0)))
    run = run_cli("evaluate", str(doubled), "--json")
    assert run.returncode == 0, run.stderr
    per_cost = {lay["name"]: lay["gain_per_cost"] for lay in json.loads(run.stdout)["layouts"]}
    assert per_cost[FOUR] > per_cost[ONE]
    assert abs(1000 * per_cost[FOUR] - 1000 * by_key["ranges_x2"].measure) < 1e-9
    assert best_by_hand(model) == ONE
    sentence = sensitivity_sentence(sens)
    assert "not in every case" in sentence and f"practical ranges \u00d72: {FOUR}" in sentence


def test_the_best_option_holds_in_every_case():
    model = one_or_four(120.0)
    sens = ranking_sensitivity(to_core(model), kinds(model))
    assert sens.holds and sens.best == FOUR
    assert all(s.base_best_place == 1 for s in sens.scenarios)
    by_key = {s.key: s for s in sens.scenarios}
    for key, by_hand in [
        ("ranges_x0.5", changed(model, range_factor=0.5)),
        ("ranges_x2", changed(model, range_factor=2.0)),
        ("spreads_x0.5", changed(model, spread=0.5)),
        ("spreads_x2", changed(model, spread=2.0)),
    ]:
        assert best_by_hand(by_hand) == by_key[key].best == FOUR, key
    assert "stays the best option" in sensitivity_sentence(sens)


def test_a_fitted_model_is_one_more_case():
    model = one_or_four(120.0)
    fitted = changed(model, range_factor=0.5, spread=0.5)
    sens = ranking_sensitivity(to_core(model), kinds(model), fitted=to_core(fitted))
    assert sens.scenarios[-1].key == "fitted"
    assert sens.scenarios[-1].best == best_by_hand(fitted)


def test_with_design_elements_the_best_is_the_highest_net_value():
    demo = json.loads((TINY.parents[2] / "seed_data" / "demo-project.json").read_text())
    project = to_core(demo)
    sens = ranking_sensitivity(project, kinds(demo))
    assert sens.by_value
    for s in sens.scenarios:
        values = dict(s.order)
        assert s.best == max(values, key=lambda n: values[n])
        assert s.measure == values[s.best]
