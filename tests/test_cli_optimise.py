"""`probewise optimise` and `probewise rank`: the JSON of docs/model-file.md ("CLI output
contract"), readable output, -o, and bad input (exit 2, one line naming the option)."""

from __future__ import annotations

import json
from pathlib import Path

import pytest
from caution_check import assert_caution
from cli_helpers import run_cli

from probewise import cli

ROOT = Path(__file__).resolve().parents[1]
TINY = ROOT / "tests" / "data" / "tiny-model.json"

LAYOUT_KEYS = {
    "name",
    "boundaries",
    "cost",
    "metres",
    "duration_days",
    "rig_days",
    "information_gain_bits",
    "gain_per_cost",
    "pareto",
    "probes",
}
METRIC_KEYS = {"std_mean_m", "width90_mean_m", "uncertain_volume_m3", "confident_fraction"}
PROBE_KEYS = {"id", "method", "x", "y", "depth_m", "observes"}
OPTION_KEYS = {
    "name",
    "kind",
    "n_probes",
    "cost",
    "metres",
    "duration_days",
    "rig_days",
    "information_gain_bits",
    "gain_per_cost",
    "pareto",
}


def test_search_cells_set_the_greedy_grid():
    default = json.loads(run_cli("optimise", str(TINY), "--budget", "9000", "--json").stdout)
    run = run_cli("optimise", str(TINY), "--budget", "9000", "--search-cells", "100", "--json")
    assert run.returncode == 0, run.stderr
    doc = json.loads(run.stdout)
    assert doc["optimisation"]["cells"] <= 100 < default["optimisation"]["cells"]


def test_optimise_json_has_the_documented_fields():
    budget = 9000.0
    run = run_cli("optimise", str(TINY), "--budget", str(budget), "--json")
    assert run.returncode == 0, run.stderr
    doc = json.loads(run.stdout)
    assert {"layout", "curve"} <= set(doc)
    lay = doc["layout"]
    assert set(lay) == LAYOUT_KEYS
    assert lay["name"] == "Optimised for 9000"
    assert 0 < lay["cost"] <= budget
    assert lay["information_gain_bits"] > 0
    assert set(lay["boundaries"]) == {"Made ground", "Alluvial clay", "River gravel"}
    for metrics in lay["boundaries"].values():
        assert set(metrics) == METRIC_KEYS
    for probe in lay["probes"]:
        assert set(probe) == PROBE_KEYS
        assert probe["method"] in {"BH", "CPT", "DMT"}
        assert probe["observes"]
    curve = doc["curve"]
    assert curve and all(set(p) == {"cost", "information_gain_bits"} for p in curve)
    costs = [p["cost"] for p in curve]
    assert costs == sorted(costs) and costs[-1] <= budget
    assert doc["optimisation"]["candidate_spacing_m"] > 0
    # what the exchange refinement added (docs/optimiser.md "Refinement by exchanges")
    ref = doc["refinement"]
    assert {"greedy_gain_bits", "refined_gain_bits", "moves"} <= set(ref)
    assert ref["refined_gain_bits"] == lay["information_gain_bits"]
    assert ref["refined_gain_bits"] >= ref["greedy_gain_bits"]


def test_optimise_options_and_text_summary():
    run = run_cli(
        "optimise",
        str(TINY),
        "--budget",
        "12000",
        "--methods",
        "BH",
        "--candidate-spacing",
        "20",
        "--min-spacing",
        "30",
        "--name",
        "Boreholes only",
    )
    assert run.returncode == 0, run.stderr
    out = run.stdout
    assert "Proposed layout: Boreholes only" in out
    assert "BH-O01" in out and "CPT-O" not in out
    assert "searched" in out and "20 m" in out and "min. spacing 30 m" in out
    assert_caution(out)
    assert run.stderr == ""  # no progress bar when stderr is not a terminal


def test_optimise_writes_the_layout_into_a_model_file(tmp_path):
    out = tmp_path / "with-optimised.json"
    for _ in range(2):
        src = out if out.exists() else TINY
        run = run_cli("optimise", str(src), "--budget", "6000", "-o", str(out), "--json")
        assert run.returncode == 0, run.stderr
    model = json.loads(out.read_text())
    names = [lay["name"] for lay in model["layouts"]]
    assert names[-2:] == ["Optimised for 6000", "Optimised for 6000 (2)"]
    assert json.loads(run.stdout)["layout"]["name"] == "Optimised for 6000 (2)"
    validate = run_cli("validate", str(out))
    assert validate.returncode == 0, validate.stderr
    # the saved layout evaluates to what the optimiser reported
    evaluate = json.loads(run_cli("evaluate", str(out), "--json").stdout)
    saved = next(lay for lay in evaluate["layouts"] if lay["name"] == names[-1])
    reported = json.loads(run.stdout)["layout"]
    assert saved["cost"] == pytest.approx(reported["cost"])
    assert saved["information_gain_bits"] == pytest.approx(reported["information_gain_bits"])


@pytest.mark.parametrize(
    ("args", "field"),
    [
        (["--budget", "lots"], "--budget"),
        (["--budget", "-5"], "--budget"),
        (["--budget", "0"], "--budget"),
        (["--budget", "inf"], "--budget"),
        (["--budget", "100"], "--budget"),  # below every mobilisation
        (["--budget", "9000", "--methods", "BH,XX"], "--methods"),
        (["--budget", "9000", "--methods", ","], "--methods"),
        (["--budget", "9000", "--candidate-spacing", "0"], "--candidate-spacing"),
        (["--budget", "9000", "--candidate-spacing", "9999"], "--candidate-spacing"),
        (["--budget", "9000", "--min-spacing", "-1"], "--min-spacing"),
        (["--budget", "9000", "--name", " "], "--name"),
        (["--budget", "9000", "--search-cells", "50"], "--search-cells"),
        (["--budget", "9000", "--search-cells", "200.5"], "--search-cells"),
        (["--budget", "9000", "--search-cells", "many"], "--search-cells"),
    ],
)
def test_optimise_bad_input_exits_2_with_one_line(args, field):
    run = run_cli("optimise", str(TINY), *args)
    assert run.returncode == 2
    lines = run.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith(f"{field}: "), run.stderr
    assert "Traceback" not in run.stderr


def test_optimise_missing_model_exits_2(tmp_path):
    run = run_cli("optimise", str(tmp_path / "nothing.json"), "--budget", "9000")
    assert run.returncode == 2
    assert len(run.stderr.strip().splitlines()) == 1


def test_ctrl_c_cancels_with_status_130(monkeypatch, capsys):
    # Ctrl-C arrives as KeyboardInterrupt in the optimiser; the CLI says so and exits 130.
    import probewise.core.optimise as core_optimise

    def interrupted(*args, **kwargs):
        raise KeyboardInterrupt

    monkeypatch.setattr(core_optimise, "optimise", interrupted)
    assert cli.main(["optimise", str(TINY), "--budget", "9000"]) == 130
    assert capsys.readouterr().err.strip() == "cancelled"


def test_progress_bar_draws_on_a_terminal(monkeypatch, capsys):
    from probewise.commands.options import ProgressBar

    bar = ProgressBar(True)
    bar(0.0, "start")
    bar(1.0, "done")
    bar.close()
    err = capsys.readouterr().err
    assert "100%" in err and "done" in err and err.endswith("\n")
    silent = ProgressBar(False)
    silent(0.5, "half")
    silent.close()
    assert capsys.readouterr().err == ""


def test_rank_json_and_table():
    run = run_cli("rank", str(TINY), "--guidance", "BH:50", "--guidance", "CPT:25", "--json")
    assert run.returncode == 0, run.stderr
    doc = json.loads(run.stdout)
    opts = doc["options"]
    assert all(set(o) == OPTION_KEYS for o in opts)
    kinds = [o["kind"] for o in opts]
    assert kinds.count("hand") == 2 and kinds.count("guidance") == 2
    assert kinds.count("optimised") == len(doc["budgets"]) == 2  # one per hand-made cost
    assert [o["cost"] for o in opts] == sorted(o["cost"] for o in opts)
    hand = [o for o in opts if o["kind"] == "hand"]
    best_opt = max(o["information_gain_bits"] for o in opts if o["kind"] == "optimised")
    assert all(best_opt >= h["information_gain_bits"] for h in hand)
    assert any(o["pareto"] for o in opts)
    text = run_cli("rank", str(TINY), "--budgets", "5000,9000")
    assert text.returncode == 0, text.stderr
    assert "Optimised for 5000" in text.stdout and "Optimised for 9000" in text.stdout
    assert "Pareto" in text.stdout
    assert_caution(text.stdout)


@pytest.mark.parametrize(
    ("args", "field"),
    [
        (["--guidance", "BH"], "--guidance"),
        (["--guidance", "XX:20"], "--guidance"),
        (["--guidance", "BH:abc"], "--guidance"),
        (["--guidance", "BH:1000"], "--guidance"),
        (["--budgets", "a,b"], "--budgets"),
        (["--budgets", "100"], "--budgets"),
        (["--methods", "ZZ"], "--methods"),
    ],
)
def test_rank_bad_input_exits_2_with_one_line(args, field):
    run = run_cli("rank", str(TINY), *args)
    assert run.returncode == 2
    lines = run.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith(f"{field}: "), run.stderr
