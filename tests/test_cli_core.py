"""`probewise evaluate` and `probewise posterior`: the JSON of docs/model-file.md ("CLI output
contract"), readable tables, and bad input (exit 2, one line naming the field)."""

from __future__ import annotations

import json
import subprocess
from pathlib import Path

import pytest
from cli_helpers import run_cli

ROOT = Path(__file__).resolve().parents[1]
TINY = ROOT / "tests" / "data" / "tiny-model.json"

METRIC_KEYS = {"std_mean_m", "width90_mean_m", "uncertain_volume_m3", "confident_fraction"}
LAYOUT_KEYS = {
    "name",
    "boundaries",
    "cost",
    "metres",
    "duration_days",
    "information_gain_bits",
    "gain_per_cost",
    "pareto",
    "probes",
}
PROBE_KEYS = {"id", "method", "x", "y", "depth_m", "observes"}
POINT_KEYS = {"prior_mean_m", "prior_std_m", "mean_m", "std_m", "p05_m", "p50_m", "p95_m"}
BOUNDARIES = ["Made ground", "Alluvial clay", "River gravel"]


def cli(*args: str) -> subprocess.CompletedProcess:
    return run_cli(*args, timeout=120)


def test_evaluate_json_has_the_documented_fields():
    run = cli("evaluate", str(TINY), "--json")
    assert run.returncode == 0, run.stderr
    doc = json.loads(run.stdout)
    assert set(doc) == {"baseline", "layouts"}
    assert set(doc["baseline"]) == {"boundaries"}
    assert list(doc["baseline"]["boundaries"]) == BOUNDARIES
    for metrics in doc["baseline"]["boundaries"].values():
        assert set(metrics) == METRIC_KEYS
    assert doc["baseline"]["boundaries"]["Made ground"]["confident_fraction"] is None
    assert [lay["name"] for lay in doc["layouts"]] == [
        "Four boreholes",
        "Two boreholes and six CPTs",
    ]
    for lay in doc["layouts"]:
        assert set(lay) == LAYOUT_KEYS
        assert isinstance(lay["pareto"], bool)
        assert lay["cost"] > 0 and lay["metres"] > 0 and lay["information_gain_bits"] > 0
        for metrics in lay["boundaries"].values():
            assert set(metrics) == METRIC_KEYS
        for probe in lay["probes"]:
            assert set(probe) == PROBE_KEYS
            assert set(probe["observes"]) <= set(BOUNDARIES)
    cpt = next(p for p in doc["layouts"][1]["probes"] if p["id"] == "CPT01")
    assert cpt["observes"] == ["Made ground", "Alluvial clay"]  # refuses on River gravel


def test_evaluate_json_round_trips_the_core_numbers():
    from server.app.contract import evaluation_json
    from server.app.to_core import to_core
    from server.core.evaluate import evaluate_project

    run = cli("evaluate", str(TINY), "--json")
    expected = evaluation_json(evaluate_project(to_core(json.loads(TINY.read_text()))))
    assert json.loads(run.stdout) == expected


def test_posterior_json_has_the_documented_fields():
    run = cli(
        "posterior", str(TINY), "--layout", "Four boreholes", "--at", "100,60", "--at=-20.5,7"
    )
    assert run.returncode == 0, run.stderr
    assert "Caution" in run.stdout and "(outside the site)" in run.stdout
    run = cli(
        "posterior",
        str(TINY),
        "--layout",
        "Four boreholes",
        "--at",
        "100,60",
        "--at=-20.5,7",
        "--json",
    )
    assert run.returncode == 0, run.stderr
    doc = json.loads(run.stdout)
    assert set(doc) == {"points"} and len(doc["points"]) == 2
    first, second = doc["points"]
    assert (first["x"], first["y"], second["x"], second["y"]) == (100.0, 60.0, -20.5, 7.0)
    for point in doc["points"]:
        assert set(point) == {"x", "y", "boundaries"}
        assert list(point["boundaries"]) == BOUNDARIES
        for b in point["boundaries"].values():
            assert set(b) == POINT_KEYS
            assert b["p05_m"] <= b["mean_m"] + 1.0 and b["p05_m"] <= b["p95_m"]
            assert b["std_m"] <= b["prior_std_m"] + 1e-12


def test_posterior_without_layout_uses_existing_probes_only():
    with_layout = json.loads(
        cli("posterior", str(TINY), "--at", "100,60", "--layout", "Four boreholes", "--json").stdout
    )
    without = json.loads(cli("posterior", str(TINY), "--at", "100,60", "--json").stdout)
    a = with_layout["points"][0]["boundaries"]["Alluvial clay"]
    b = without["points"][0]["boundaries"]["Alluvial clay"]
    assert a["mean_m"] == b["mean_m"] and a["std_m"] < b["std_m"]


def test_evaluate_table_is_readable():
    run = cli("evaluate", str(TINY))
    assert run.returncode == 0, run.stderr
    assert "Cost (GBP)" in run.stdout and "Four boreholes" in run.stdout
    assert "Caution" in run.stdout


@pytest.mark.parametrize(
    "args,field",
    [
        (["posterior", str(TINY), "--at", "100,60", "--layout", "Nope"], "--layout"),
        (["posterior", str(TINY), "--at", "100"], "--at"),
        (["posterior", str(TINY), "--at", "a,b"], "--at"),
        (["posterior", str(TINY), "--at", "nan,1"], "--at"),
        (["posterior", str(TINY)], "--at"),
        (["evaluate", "no/such/file.json", "--json"], "MODEL"),
    ],
)
def test_bad_arguments_exit_2_with_one_line(args, field):
    run = cli(*args)
    assert run.returncode == 2
    lines = run.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith(field), run.stderr
    assert "Traceback" not in run.stderr and run.stdout == ""


def _broken(tmp_path: Path, change) -> str:
    model = json.loads(TINY.read_text())
    change(model)
    path = tmp_path / "broken.json"
    path.write_text(json.dumps(model))
    return str(path)


@pytest.mark.parametrize(
    "change,word",
    [
        (lambda m: m["units"][0].pop("thickness_m"), "units"),
        (lambda m: m.__setitem__("grid_spacing_m", -5), "grid_spacing_m"),
        (lambda m: m["existing"][0].__setitem__("method", "XX"), "existing"),
        (lambda m: m["layouts"][0]["probes"][0].__setitem__("x", "east"), "layouts"),
    ],
)
@pytest.mark.parametrize("command", ["evaluate", "posterior"])
def test_malformed_model_exits_2_naming_the_field(tmp_path, change, word, command):
    path = _broken(tmp_path, change)
    args = [command, path, "--json"] + (["--at", "1,1"] if command == "posterior" else [])
    run = cli(*args)
    assert run.returncode == 2, run.stdout
    lines = run.stderr.strip().splitlines()
    assert len(lines) == 1 and word in lines[0].split(":")[0], run.stderr
    assert "Traceback" not in run.stderr


def test_not_json_exits_2(tmp_path):
    path = tmp_path / "bad.json"
    path.write_text("{not json")
    run = cli("evaluate", str(path))
    assert run.returncode == 2 and len(run.stderr.strip().splitlines()) == 1
