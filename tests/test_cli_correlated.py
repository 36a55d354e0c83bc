"""Correlated unit thicknesses at the command line: evaluate and rank score layouts on cells
(docs/model.md "Model structure"); the optimiser refuses them, naming the field."""

from __future__ import annotations

import json
from pathlib import Path

import pytest
from cli_helpers import run_cli

DATA = Path(__file__).resolve().parent / "data"


@pytest.fixture(scope="module")
def correlated(tmp_path_factory) -> Path:
    model = json.loads((DATA / "tiny-model.json").read_text())
    model["thickness_correlation"] = [{"units": ["Made ground", "Alluvial clay"], "rho": -0.6}]
    path = tmp_path_factory.mktemp("coreg") / "model.json"
    path.write_text(json.dumps(model))
    return path


def test_evaluate_scores_layouts_with_correlated_thicknesses(correlated):
    done = run_cli("evaluate", str(correlated), "--json")
    assert done.returncode == 0, done.stderr
    names = {lay["name"] for lay in json.loads(done.stdout)["layouts"]}
    assert names == {"Four boreholes", "Two boreholes and six CPTs"}


def test_rank_leaves_out_optimised_options_and_says_why(correlated):
    done = run_cli("rank", str(correlated), "--json")
    assert done.returncode == 0, done.stderr
    kinds = {opt["kind"] for opt in json.loads(done.stdout)["options"]}
    assert kinds == {"hand"}
    assert "thickness_correlation" in done.stderr


@pytest.mark.parametrize(
    "command", [["optimise", "--budget", "5000"], ["rank", "--budgets", "5000"]]
)
def test_optimiser_refuses_correlated_thicknesses_naming_the_field(correlated, command):
    done = run_cli(command[0], str(correlated), *command[1:])
    assert done.returncode == 2
    assert done.stderr.startswith("thickness_correlation:")
