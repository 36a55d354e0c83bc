"""`probewise fit`: the JSON of docs/model-file.md ("CLI output contract"), and adopting the
fit (``-o``) gives a model whose own likelihood is the fitted one."""

from __future__ import annotations

import json
import math
from pathlib import Path

import pytest
from cli_helpers import run_cli

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "seed_data" / "demo-project.json"
UNIT_KEYS = {
    "name",
    "spread_multiplier",
    "range_m",
    "nugget",
    "mean_shift_m",
    "conceptual_range_m",
    "fitted",
}


def test_fit_json_and_adopting_it(tmp_path):
    out = tmp_path / "adopted.json"
    run = run_cli("fit", str(DEMO), "--json", "-o", str(out))
    assert run.returncode == 0, run.stderr
    doc = json.loads(run.stdout)
    assert {"units", "thickness_correlation", "log_likelihood", "log_likelihood_conceptual"} <= set(
        doc
    )
    assert all(set(u) == UNIT_KEYS for u in doc["units"])
    demo = json.loads(DEMO.read_text())
    assert [u["name"] for u in doc["units"]] == [u["name"] for u in demo["units"][:-1]]
    assert doc["log_likelihood"] >= doc["log_likelihood_conceptual"]
    adopted = json.loads(out.read_text())
    assert run_cli("validate", str(out)).returncode == 0
    for unit, got in zip(adopted["units"], doc["units"], strict=False):
        assert unit["correlation"]["range_m"] == got["range_m"]
        assert unit["spread_multiplier"] == got["spread_multiplier"]
    again = json.loads(run_cli("fit", str(out), "--json").stdout)
    # the adopted model's own likelihood is the fitted one (and a refit cannot do worse)
    assert math.isclose(again["log_likelihood_conceptual"], doc["log_likelihood"], rel_tol=1e-7)
    assert again["log_likelihood"] >= again["log_likelihood_conceptual"] - 1e-9


def test_fit_table_carries_the_caution():
    run = run_cli("fit", str(DEMO))
    assert run.returncode == 0, run.stderr
    assert "Log-likelihood: conceptual" in run.stdout and "Caution:" in run.stdout


def test_sensitivity_best_layout_matches_evaluate_on_scaled_ranges(tmp_path):
    # Independent route: write the model with every range scaled and ask `evaluate` which
    # layout has the most gain per cost.
    run = run_cli("fit", str(DEMO), "--json", "--sensitivity")
    assert run.returncode == 0, run.stderr
    sens = json.loads(run.stdout)["sensitivity"]
    assert set(sens["best"]) == {"0.5", "1", "2"}
    for factor in (0.5, 2.0):
        model = json.loads(DEMO.read_text())
        for unit in model["units"]:
            if "correlation" in unit:
                unit["correlation"]["range_m"] *= factor
        path = tmp_path / f"x{factor:g}.json"
        path.write_text(json.dumps(model))
        layouts = json.loads(run_cli("evaluate", str(path), "--json").stdout)["layouts"]
        valued = [lay for lay in layouts if lay["gain_per_cost"] is not None]
        best = max(valued, key=lambda lay: (lay["gain_per_cost"], [-ord(c) for c in lay["name"]]))
        assert sens["best"][f"{factor:g}"] == best["name"]
        ours = {o["name"]: o["gain_per_cost"] for o in sens["order"][f"{factor:g}"]}
        assert ours == pytest.approx({lay["name"]: lay["gain_per_cost"] for lay in valued})
    assert sens["holds"] == (len(set(sens["best"].values())) == 1)
