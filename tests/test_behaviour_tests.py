"""Test results on existing probes: the model-file rules, the CSV and AGS4 readers, the
domains at a probe by hand, and `probewise behaviour` / `import-tests` on the command line."""

from __future__ import annotations

import copy
import json
from pathlib import Path

import pytest
from cli_helpers import run_cli
from io_builders import ags4_group

from probewise.app.behaviour import behaviour_json, behaviour_report
from probewise.app.project import core_project
from probewise.core import behaviour as core
from probewise.errors import InputError
from probewise.io.model_file import validate_model
from probewise.io.tests_in import read_tests

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "seed_data" / "demo-reclaimed-strip.json"
HISTORY = ROOT / "tests" / "data" / "history-model.json"
FILL = "Hydraulic fill and made ground"


def hand_case() -> dict:
    """The history test model made simple enough to work by hand: ground level 5.0 m, the
    salt marsh (x 0-100) at levels 3.6-4.5 m, no settlement, no user bound. At HBH1 (30, 30)
    the fill base then lies 5.0 - 4.5 = 0.5 to 5.0 - 3.6 = 1.4 m deep (inside the made
    ground's own 0.3-2.0 m); HBH2 (170, 40) lies outside every environment: no bound."""
    model = json.loads(HISTORY.read_text())
    model["ground_level"] = {"datum": "mOD", "level_m": 5.0}
    rule = model["history"][0]
    rule["environments"][0].update(level_min=3.6, level_max=4.5)
    rule.update(settlement=None, outside=None)
    model["bounds"] = []
    hbh1, hbh2 = model["existing"]
    hbh1["tests"] = [
        {"depth_m": z, "parameter": "w", "value": v, "unit": "%"}
        for z, v in ((0.3, 12), (0.5, 40), (1.0, 45), (1.4, 50), (2.0, 60), (5.0, 62))
    ]
    hbh2["tests"] = [{"depth_m": 1.0, "parameter": "w", "value": 30, "unit": "%"}]
    return model


def test_domains_at_a_probe_by_hand():
    model = validate_model(hand_case())
    report = behaviour_report(model, core_project(model), "Made ground")
    band = report.probes[0]
    assert (band.lo_m, band.hi_m) == (pytest.approx(0.5), pytest.approx(1.4))
    assert report.probes[1].lo_m is None
    r = report.readings
    assert r.domain[r.probe == 0].tolist() == [
        core.FILL,
        core.BAND,
        core.BAND,
        core.BAND,
        core.NATURAL,
        core.NATURAL,
    ]
    assert report.domains == {"fill": 1, "band": 3, "natural": 2, "left_out": 1}


def test_demo_json_follows_the_contract():
    answer = run_cli("behaviour", str(DEMO), "--base-of", FILL, "--json")
    assert answer.returncode == 0, answer.stderr
    doc = json.loads(answer.stdout)
    assert doc["boundary"] == FILL
    assert set(doc["domains"]) == {"fill", "band", "natural", "left_out"}
    assert doc["domains"]["left_out"] > 0  # CPT-2011-02 lies east of the mapped environments
    names = [p["name"] for p in doc["parameters"]]
    assert {"qc", "fs", "u2", "Qtn", "Fr", "Bq", "Ic", "N", "w"} <= set(names)
    for p in doc["parameters"]:
        assert {"name", "unit", "n", "median", "mannwhitney_p", "ks_p", "verdict"} <= set(p)
        assert set(p["mannwhitney_p"]) == set(p["ks_p"]) == {"band_vs_fill", "band_vs_natural"}
        for pair, other in (("band_vs_fill", "fill"), ("band_vs_natural", "natural")):
            few = min(p["n"]["band"], p["n"][other]) < 3
            assert (p["mannwhitney_p"][pair] is None) == few
            assert (p["ks_p"][pair] is None) == few
    again = run_cli("behaviour", str(DEMO), "--base-of", FILL, "--json")
    assert json.loads(again.stdout) == doc  # seeded: the same run gives the same intervals


def test_text_output_carries_the_caution():
    from caution_check import assert_caution

    answer = run_cli("behaviour", str(DEMO), "--base-of", FILL)
    assert answer.returncode == 0, answer.stderr
    assert "Verdict" in answer.stdout
    assert_caution(answer.stdout)


@pytest.mark.parametrize(
    "unit, why", [("Glacial till", "not a unit with a base"), ("Estuarine sand", "no site history")]
)
def test_bad_base_of_exits_2(unit, why):
    answer = run_cli("behaviour", str(DEMO), "--base-of", unit, "--json")
    assert answer.returncode == 2
    assert answer.stderr.startswith("--base-of: ") and why in answer.stderr


BAD_TESTS = [
    ({"depth_m": 1.0, "parameter": "qz", "value": 1.0, "unit": "MPa"}, "tests[0].parameter"),
    ({"depth_m": 1.0, "parameter": "Ic", "value": 1.0, "unit": "-"}, "tests[0].parameter"),
    ({"depth_m": 1.0, "parameter": "qc", "value": 1.0, "unit": "psi"}, "tests[0].unit"),
    ({"depth_m": 1.0, "parameter": "qc", "value": "soft", "unit": "MPa"}, "tests[0].value"),
    ({"depth_m": 99.0, "parameter": "qc", "value": 1.0, "unit": "MPa"}, "tests[0].depth_m"),
    ({"depth_m": 1.0, "parameter": "qc", "value": 1.0}, "tests[0].unit"),
]


@pytest.mark.parametrize("test, field", BAD_TESTS)
def test_model_file_refuses_bad_results_naming_the_field(test, field):
    model = json.loads(DEMO.read_text())
    model["existing"][0]["tests"] = [test]
    with pytest.raises(InputError) as caught:
        validate_model(model)
    assert caught.value.field == f"existing[0].{field}"


def test_model_file_refuses_bad_settings():
    model = json.loads(DEMO.read_text())
    model["behaviour"]["natural_unit_weight_kn_m3"] = 9.0
    with pytest.raises(InputError) as caught:
        validate_model(model)
    assert caught.value.field == "behaviour.natural_unit_weight_kn_m3"


def _write(tmp_path: Path, name: str, text: str) -> Path:
    path = tmp_path / name
    path.write_text(text)
    return path


BAD_CSV = [
    ("NOPE,1,qc,2,MPa", "line 3, probe: 'NOPE' is not an existing probe"),
    ("CPT-2011-01,13,qc,2,MPa", "line 3, depth: 13 m is below the final depth"),
    ("CPT-2011-01,1,qz,2,MPa", "line 3, parameter:"),
    ("CPT-2011-01,1,qc,2,psi", "line 3, unit:"),
    ("CPT-2011-01,1,qc,firm,MPa", "line 3, value: 'firm' is not a number"),
]


@pytest.mark.parametrize("row, message", BAD_CSV)
def test_import_tests_bad_csv_names_the_line_and_writes_nothing(tmp_path, row, message):
    path = _write(
        tmp_path, "t.csv", f"probe,depth_m,parameter,value,unit\nCPT-2011-01,1,qc,2,MPa\n{row}\n"
    )
    out = tmp_path / "out.json"
    answer = run_cli("import-tests", str(DEMO), str(path), "-o", str(out))
    assert answer.returncode == 2
    assert message in answer.stderr
    assert not out.exists()


def test_import_tests_csv_appends(tmp_path):
    path = _write(
        tmp_path, "t.csv", "probe;depth_m;parameter;value;unit\nCPT-2011-02;1,5;fs;20;kPa\n"
    )
    out = tmp_path / "out.json"
    answer = run_cli("import-tests", str(DEMO), str(path), "-o", str(out))
    assert answer.returncode == 0, answer.stderr
    probe = next(p for p in json.loads(out.read_text())["existing"] if p["id"] == "CPT-2011-02")
    assert probe["tests"][-1] == {"depth_m": 1.5, "parameter": "fs", "value": 20.0, "unit": "kPa"}


def ags4_tests_text(scpt_headings=("LOCA_ID", "SCPG_TESN", "SCPT_DPTH", "SCPT_RES", "SCPT_FRES")):
    """An invented AGS4 file: SCPT results at CPT-2011-01 (qc and fs in MPa, as AGS4 gives
    them) and LLPL results at BH-1974-01 with a non-plastic PL."""
    cells = {"LOCA_ID": "CPT-2011-01", "SCPG_TESN": "1", "SCPT_DPTH": "{z}", "SCPT_RES": "{q}"}
    cells["SCPT_FRES"] = "{f}"
    units = {"SCPT_DPTH": "m", "SCPT_RES": "MPa", "SCPT_FRES": "MPa"}
    rows = [
        [cells[h].format(z=z, q=q, f=f) for h in scpt_headings]
        for z, q, f in ((0.5, 6.1, 0.040), (1.0, 5.2, 0.035), (2.5, 0.4, 0.009))
    ]
    scpt = ags4_group(
        "SCPT",
        list(scpt_headings),
        [units.get(h, "") for h in scpt_headings],
        ["ID" if h == "LOCA_ID" else "X" if h == "SCPG_TESN" else "2DP" for h in scpt_headings],
        rows,
    )
    llpl = ags4_group(
        "LLPL",
        ["LOCA_ID", "SAMP_TOP", "SPEC_DPTH", "LLPL_LL", "LLPL_PL", "LLPL_PI"],
        ["", "m", "m", "%", "%", ""],
        ["ID", "2DP", "2DP", "0DP", "XN", "0DP"],
        [
            ["BH-1974-01", "3.0", "3.0", "84", "NP", "NP"],
            ["BH-1974-01", "9.5", "9.5", "31", "17", "14"],
        ],
    )
    return scpt + llpl


def test_ags4_results_in_canonical_groups():
    model = validate_model(json.loads(DEMO.read_text()))
    read = read_tests(ags4_tests_text().encode(), model, filename="gi.ags")
    cpt = read.by_probe["CPT-2011-01"]
    assert cpt[0] == {"depth_m": 0.5, "parameter": "qc", "value": 6.1, "unit": "MPa"}
    assert cpt[1] == {"depth_m": 0.5, "parameter": "fs", "value": 0.04, "unit": "MPa"}
    bh = read.by_probe["BH-1974-01"]
    assert [t["parameter"] for t in bh] == ["LL", "LL", "PL", "PI"]  # "NP" is no result
    assert read.counts == {"SCPT qc": 3, "SCPT fs": 3, "LLPL LL": 2, "LLPL PL": 1, "LLPL PI": 1}


def test_ags4_group_without_required_heading_is_refused(tmp_path):
    text = ags4_tests_text(scpt_headings=("LOCA_ID", "SCPG_TESN", "SCPT_DPTH", "SCPT_FRES"))
    path = _write(tmp_path, "gi.ags", text)
    out = tmp_path / "out.json"
    answer = run_cli("import-tests", str(DEMO), str(path), "-o", str(out))
    assert answer.returncode == 2
    assert "gi.ags SCPT: missing heading(s) SCPT_RES" in answer.stderr
    assert not out.exists()


def test_ags4_text_in_a_numeric_field_names_row_and_line():
    model = validate_model(json.loads(DEMO.read_text()))
    text = ags4_tests_text().replace('"6.1"', '"dense"')
    with pytest.raises(InputError) as caught:
        read_tests(text.encode(), model, filename="gi.ags")
    assert caught.value.field.startswith("gi.ags SCPT row 1 (line ")
    assert caught.value.field.endswith("SCPT_RES")


def test_replace_mode_replaces_only_the_named_probes():
    from probewise.io.tests_in import merge_tests

    model = validate_model(json.loads(DEMO.read_text()))
    read = read_tests(ags4_tests_text().encode(), model, filename="gi.ags")
    merged = merge_tests(copy.deepcopy(model), read, "replace")
    by_id = {p["id"]: p for p in merged["existing"]}
    assert len(by_id["CPT-2011-01"]["tests"]) == 6
    assert (
        by_id["CPT-2011-02"]["tests"]
        == next(p for p in model["existing"] if p["id"] == "CPT-2011-02")["tests"]
    )
    assert behaviour_json(behaviour_report(validate_model(merged), core_project(model)))


def test_seed_moves_the_intervals_not_the_tests():
    model = validate_model(json.loads(DEMO.read_text()))
    project = core_project(model)
    one = behaviour_json(behaviour_report(model, project, FILL, seed=0))
    two = behaviour_json(behaviour_report(model, project, FILL, seed=1))
    assert [p["mannwhitney_p"] for p in one["parameters"]] == [
        p["mannwhitney_p"] for p in two["parameters"]
    ]
    assert [p["median_ci95"] for p in one["parameters"]] != [
        p["median_ci95"] for p in two["parameters"]
    ]
