"""`probewise evaluate` and `probewise posterior`: the JSON of docs/model-file.md ("CLI output
contract"), readable tables, and bad input (exit 2, one line naming the field)."""

from __future__ import annotations

import json
import math
import subprocess
from pathlib import Path

import pytest
from caution_check import assert_caution
from cli_helpers import run_cli
from scipy.stats import truncnorm

ROOT = Path(__file__).resolve().parents[1]
TINY = ROOT / "tests" / "data" / "tiny-model.json"

METRIC_KEYS = {"std_mean_m", "width90_mean_m", "uncertain_volume_m3", "confident_fraction"}
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
PROBE_KEYS = {"id", "method", "x", "y", "depth_m", "observes"}
POINT_KEYS = {"prior_mean_m", "prior_std_m", "mean_m", "std_m", "p05_m", "p50_m", "p95_m"}
BOUNDARIES = ["Made ground", "Alluvial clay", "River gravel"]


def cli(*args: str) -> subprocess.CompletedProcess:
    return run_cli(*args, timeout=120)


def test_evaluate_json_has_the_documented_fields():
    run = cli("evaluate", str(TINY), "--json")
    assert run.returncode == 0, run.stderr
    doc = json.loads(run.stdout)
    assert set(doc) == {"baseline", "layouts", "conditioning"}
    assert doc["conditioning"]["method"] == "exact"  # a handful of readings
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
    from probewise.app.contract import evaluation_json
    from probewise.app.to_core import to_core
    from probewise.core.evaluate import evaluate_project

    run = cli("evaluate", str(TINY), "--json")
    expected = evaluation_json(evaluate_project(to_core(json.loads(TINY.read_text()))))
    assert json.loads(run.stdout) == expected


def test_posterior_json_has_the_documented_fields():
    run = cli(
        "posterior", str(TINY), "--layout", "Four boreholes", "--at", "100,60", "--at=-20.5,7"
    )
    assert run.returncode == 0, run.stderr
    assert "(outside the site)" in run.stdout
    assert_caution(run.stdout)
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
        in_channel = 80 <= point["x"] <= 120 and 0 <= point["y"] <= 120  # the zone's polygon
        for name, b in point["boundaries"].items():
            assert set(b) == POINT_KEYS
            want = hand_prior(name, in_channel)
            assert b["prior_mean_m"] == pytest.approx(want["mean"], abs=1e-9)
            assert b["prior_std_m"] == pytest.approx(want["std"], abs=1e-9)
            assert b["std_m"] <= b["prior_std_m"] + 1e-12
            # P5 and P95: the posterior Gaussian truncated to the hard bounds (scipy.stats)
            lo, hi = want["bounds"]
            m, s = b["mean_m"], b["std_m"]
            for key, q in (("p05_m", 0.05), ("p95_m", 0.95)):
                ref = truncnorm.ppf(q, (lo - m) / s, (hi - m) / s, loc=m, scale=s)
                assert b[key] == pytest.approx(ref, abs=1e-6), (name, key)


# The tiny model's thickness ranges (tests/data/tiny-model.json) with the moments of
# docs/model.md: PERT mean (a+4b+c)/6, variance (mean-a)(c-mean)/7; triangular mean (a+b+c)/3,
# variance (a^2+b^2+c^2-ab-ac-bc)/18; uniform mean (a+c)/2, variance (c-a)^2/12.
TINY_RANGES = {
    "Made ground": ("pert", 0.3, 1.0, 2.0),
    "Alluvial clay": ("triangular", 1.0, 3.0, 6.0),
    "River gravel": ("uniform", 0.5, 2.0, 4.0),
}
CHANNEL_CLAY = ("pert", 3.0, 6.0, 9.0)  # the "Old channel" zone's range for Alluvial clay
MADE_GROUND_BOUND = (0.5, 1.8)  # the model's user bound on the base of Made ground


def hand_moments(shape, a, b, c):
    if shape == "pert":
        mean = (a + 4 * b + c) / 6
        return mean, (mean - a) * (c - mean) / 7
    if shape == "triangular":
        return (a + b + c) / 3, (a * a + b * b + c * c - a * b - a * c - b * c) / 18
    return (a + c) / 2, (c - a) ** 2 / 12


def hand_prior(boundary: str, in_channel: bool) -> dict:
    """Prior mean, std and hard bounds of a boundary: sums over the units above (independent)."""
    mean = var = lo = hi = 0.0
    for name, rng in TINY_RANGES.items():
        if in_channel and name == "Alluvial clay":
            rng = CHANNEL_CLAY
        m, v = hand_moments(*rng)
        mean, var, lo, hi = mean + m, var + v, lo + rng[1], hi + rng[3]
        if name == boundary:
            break
    if boundary == "Made ground":
        lo, hi = max(lo, MADE_GROUND_BOUND[0]), min(hi, MADE_GROUND_BOUND[1])
    return {"mean": mean, "std": math.sqrt(var), "bounds": (lo, hi)}


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
    assert_caution(run.stdout)


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
