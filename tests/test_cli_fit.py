"""`probewise fit`: the JSON of docs/model-file.md ("CLI output contract"), and adopting the
fit (``-o``) gives a model whose own likelihood is the fitted one."""

from __future__ import annotations

import json
import math
from pathlib import Path

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
