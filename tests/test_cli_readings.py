"""`probewise readings`: the JSON of docs/model-file.md ("CLI output contract"), stages in
the order first met, the table, and the prediction against `posterior` without the probe."""

from __future__ import annotations

import json
import math
from pathlib import Path

from cli_helpers import run_cli

ROOT = Path(__file__).resolve().parents[1]
TINY = ROOT / "tests" / "data" / "tiny-model.json"
READING_KEYS = {
    "probe",
    "stage",
    "boundary",
    "reading_m",
    "predicted_mean_m",
    "predicted_std_m",
    "precision_m",
    "z",
    "flag",
}


def staged_model(tmp_path: Path) -> Path:
    """The tiny model with two more boreholes and stage labels (invented)."""
    model = json.loads(TINY.read_text())
    more = [
        {
            "id": "S2-1",
            "method": "BH",
            "x": 100,
            "y": 60,
            "final_depth_m": 12,
            "observed": {"Made ground": 1.3, "Alluvial clay": 7.0, "River gravel": 9.0},
        },
        {
            "id": "S2-2",
            "method": "CPT",
            "x": 60,
            "y": 90,
            "final_depth_m": 8,
            "observed": {"Made ground": 0.9, "Alluvial clay": 4.4},
        },
    ]
    model["existing"] += more
    model["existing"][0]["stage"] = "Desk study"
    model["existing"][2]["stage"] = "Phase 2"
    model["existing"][3]["stage"] = "Phase 2"
    path = tmp_path / "staged.json"
    path.write_text(json.dumps(model))
    return path


def test_readings_json_has_the_documented_fields(tmp_path):
    run = run_cli("readings", str(staged_model(tmp_path)), "--json")
    assert run.returncode == 0, run.stderr
    doc = json.loads(run.stdout)
    assert set(doc) == {"readings", "boundaries"}
    assert len(doc["readings"]) == 3 + 2 + 3 + 2
    for r in doc["readings"]:
        assert set(r) == READING_KEYS
        assert r["flag"] == (abs(r["z"]) > 1.96)
        denom = math.sqrt(r["predicted_std_m"] ** 2 + r["precision_m"] ** 2)
        assert r["z"] == (r["reading_m"] - r["predicted_mean_m"]) / denom or math.isclose(
            r["z"], (r["reading_m"] - r["predicted_mean_m"]) / denom, rel_tol=1e-9
        )
    stages = {r["probe"]: r["stage"] for r in doc["readings"]}
    assert stages == {"HBH1": "Desk study", "HBH2": None, "S2-1": "Phase 2", "S2-2": "Phase 2"}
    assert set(doc["boundaries"]) == {"Made ground", "Alluvial clay", "River gravel"}
    made = doc["boundaries"]["Made ground"]
    assert made["n"] == 4 and {"share_within_90", "mean_z2", "verdict"} <= set(made)


def test_leave_one_out_prediction_is_posterior_of_the_model_without_the_probe(tmp_path):
    # Independent route: drop the probe from the file and ask `probewise posterior` there.
    path = staged_model(tmp_path)
    doc = json.loads(run_cli("readings", str(path), "--json").stdout)
    model = json.loads(path.read_text())
    probe = model["existing"].pop(2)  # S2-1
    without = tmp_path / "without.json"
    without.write_text(json.dumps(model))
    run = run_cli("posterior", str(without), "--at", f"{probe['x']},{probe['y']}", "--json")
    assert run.returncode == 0, run.stderr
    post = json.loads(run.stdout)["points"][0]["boundaries"]
    for r in (r for r in doc["readings"] if r["probe"] == "S2-1"):
        assert math.isclose(r["predicted_mean_m"], post[r["boundary"]]["mean_m"], rel_tol=1e-7)
        assert math.isclose(r["predicted_std_m"], post[r["boundary"]]["std_m"], rel_tol=1e-6)


def test_by_stage_predicts_the_first_stage_from_unstaged_probes_only(tmp_path):
    path = staged_model(tmp_path)
    doc = json.loads(run_cli("readings", str(path), "--by-stage", "--json").stdout)
    model = json.loads(path.read_text())
    model["existing"] = [model["existing"][1]]  # HBH2: the only probe without a stage
    only = tmp_path / "unstaged.json"
    only.write_text(json.dumps(model))
    post = json.loads(run_cli("posterior", str(only), "--at", "30,30", "--json").stdout)
    post = post["points"][0]["boundaries"]
    for r in (r for r in doc["readings"] if r["probe"] == "HBH1"):
        assert math.isclose(r["predicted_mean_m"], post[r["boundary"]]["mean_m"], rel_tol=1e-7)


def test_readings_table_names_each_boundary_and_carries_the_caution():
    run = run_cli("readings", str(TINY))
    assert run.returncode == 0, run.stderr
    assert "Per boundary" in run.stdout and "Alluvial clay: n 2" in run.stdout
    assert "Caution:" in run.stdout


def test_import_with_a_stage_records_one_stage_of_fieldwork(tmp_path):
    # Recording results: the new probes come in with a stage label, and by stage they are
    # predicted from the earlier (unlabelled) probes only.
    data = tmp_path / "phase2.csv"
    data.write_text(
        "id,method,x,y,final_depth_m,base:Made ground,base:Alluvial clay\n"
        "P2-1,BH,100,60,9,1.2,6.5\nP2-2,BH,60,90,9,0.9,4.1\n"
    )
    out = tmp_path / "out.json"
    run = run_cli("import-probes", str(TINY), str(data), "--stage", "Phase 2", "-o", str(out))
    assert run.returncode == 0, run.stderr
    model = json.loads(out.read_text())
    assert [p.get("stage") for p in model["existing"]] == [None, None, "Phase 2", "Phase 2"]
    doc = json.loads(run_cli("readings", str(out), "--by-stage", "--json").stdout)
    assert {r["stage"] for r in doc["readings"] if r["probe"].startswith("P2")} == {"Phase 2"}
    blank = run_cli("import-probes", str(TINY), str(data), "--stage", " ", "-o", str(out))
    assert blank.returncode == 2 and blank.stderr.startswith("--stage:")
