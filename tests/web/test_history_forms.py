"""The Levels and site history page's forms: building the invented reclaimed-strip demo's
levels and history field by field gives the very sections its model file holds; bad input is
refused beside its field with nothing stored; every edit is one revision that undo takes back;
ground-level points import from CSV with a preview; the schedule shows the target level."""

from __future__ import annotations

import json
import re
from pathlib import Path

from edit_helpers import add_project, model_of, post, revision_of

from probewise.io.model_file import validate_model
from probewise.web.history_form import points_text
from probewise.web.polygon_text import polygon_text

DEMO = Path(__file__).resolve().parents[2] / "seed_data" / "demo-reclaimed-strip.json"
SECTIONS = ("ground_level", "reference_levels", "history")


def bare_demo() -> tuple[dict, dict]:
    """The demo without its levels and history, and its validated sections (the target)."""
    model = json.loads(DEMO.read_text())
    target = {k: v for k, v in validate_model(model).items() if k in SECTIONS}
    for key in SECTIONS:
        model.pop(key)
    return model, target


def send(client, pid: int, route: str, fields: dict, files=None):
    data = {"expected_revision": str(revision_of(client, pid)), **fields}
    return post(client, f"/projects/{pid}/history{route}", data, files=files)


def test_forms_build_the_same_sections_as_the_model_file(empty_client):
    model, target = bare_demo()
    pid = add_project(empty_client, model)
    start = revision_of(empty_client, pid)
    gl = target["ground_level"]
    answer = send(empty_client, pid, "/ground-level", {
        "datum": gl["datum"], "source": "points", "points": points_text(gl["points"]),
    })  # fmt: skip
    assert answer.status_code == 200, answer.text[:500]
    ref = target["reference_levels"]
    fields = {"datum_shift_m": "-2,9", "rows": str(len(ref["levels"]) + 1)}  # decimal comma
    for i, r in enumerate(ref["levels"]):
        fields.update({f"name_{i}": r["name"], f"level_{i}": str(r["level_m"])})
    assert send(empty_client, pid, "/reference-levels", fields).status_code == 200
    rule = target["history"][0]
    new_rule = {"name": rule["name"], "base_of": rule["base_of"]}
    answer = send(empty_client, pid, "/rules/add", new_rule)
    assert answer.status_code == 200, answer.text[:500]
    for env in rule["environments"]:
        answer = send(empty_client, pid, "/rules/0/environments/add", {
            "form_id": "new_env_0", "name": env["name"], "polygon": polygon_text(env["geometry"]),
            "level_min": env["level_min"], "level_max": env["level_max"],
        })  # fmt: skip
        assert answer.status_code == 200, answer.text[:500]
    s = rule["settlement"]
    answer = send(empty_client, pid, "/rules/0", {
        "name": rule["name"], "base_of": rule["base_of"], "outside_min": "", "outside_max": "",
        "settles": "1", "compressible_unit": s["compressible_unit"], "cc_min": "0.25",
        "cc_max": "0.6", "e0": "1.6", "unit_weight_kn_m3": "16.5",
        "fill_unit_weight_kn_m3": "18.5", "surcharge_kpa": "0", "sublayer_m": "",
    })  # fmt: skip
    assert answer.status_code == 200, answer.text[:500]
    saved = model_of(empty_client, pid)
    assert {k: saved[k] for k in SECTIONS} == target
    assert revision_of(empty_client, pid) == start + 6  # one revision per edit
    # undo takes the last edit back: the settlement block goes
    answer = send(empty_client, pid, "/undo", {})
    assert answer.status_code == 200
    assert model_of(empty_client, pid)["history"][0]["settlement"] is None


def refused(answer, path_id: str, words: str) -> None:
    assert answer.status_code == 422, answer.text[:300]
    block = re.search(rf'id="{path_id}-error">(.*?)</p>', answer.text, re.S)
    assert block and words in block.group(1), answer.text[:2000]


def test_bad_input_is_named_beside_its_field_and_nothing_is_stored(empty_client):
    model = json.loads(DEMO.read_text())
    pid = add_project(empty_client, model)
    rev = revision_of(empty_client, pid)
    two = "0, 0, 4\n10, 0, 4.2\n"
    refused(send(empty_client, pid, "/ground-level", {"source": "points", "points": two}),
            "f-ground_level-points", "at least 3")  # fmt: skip
    line = "0, 0, 4\n10, 10, 4.2\n20, 20, 4.1\n"
    refused(send(empty_client, pid, "/ground-level", {"source": "points", "points": line}),
            "f-ground_level-points", "one line")  # fmt: skip
    refused(send(empty_client, pid, "/ground-level", {"source": "constant", "level_m": "high"}),
            "f-ground_level-level_m", "number")  # fmt: skip
    fields = {"name": "R", "base_of": "Hydraulic fill and made ground", "settles": "1",
              "compressible_unit": "Soft estuarine clay", "cc_min": "0.25", "cc_max": "0.6",
              "e0": "1.6", "unit_weight_kn_m3": "9", "fill_unit_weight_kn_m3": "18.5"}  # fmt: skip
    answer = send(empty_client, pid, "/rules/0", fields)
    refused(answer, "f-history-0-settlement-unit_weight_kn_m3", "not above water")
    answer = send(
        empty_client,
        pid,
        "/rules/0",
        {**fields, "unit_weight_kn_m3": "16.5", "cc_min": "0.6", "cc_max": "0.25"},
    )
    refused(answer, "f-history-0-settlement-cc-min", "above max")
    answer = send(
        empty_client,
        pid,
        "/rules/0",
        {**fields, "unit_weight_kn_m3": "16.5", "compressible_unit": "Glacial till"},
    )
    refused(answer, "f-history-0-settlement-compressible_unit", "basal unit")
    answer = send(empty_client, pid, "/rules/0/environments/0", {
        "form_id": "env-0-0", "name": "Marsh", "polygon": "0, 0\n170, 0\n170, 120",
        "level_min": "MHWN", "level_max": "SPRING",
    })  # fmt: skip
    refused(answer, "f-history-0-environments-0-level_max", "is not a reference level")
    assert revision_of(empty_client, pid) == rev


CSV = "Easting,Northing,Level (mOD)\n0,0,4.3\n400,0,4.0\n0,120,4.1\n400,120,3.8\n"


def test_ground_points_csv_preview_then_import(empty_client):
    model, _ = bare_demo()
    pid = add_project(empty_client, model)
    rev = revision_of(empty_client, pid)
    files = {"points_file": ("survey.csv", CSV.encode(), "text/csv")}
    answer = send(empty_client, pid, "/ground-level/import/preview", {}, files=files)
    assert answer.status_code == 200 and "4 points in survey.csv" in answer.text
    assert "levels 3.80 to 4.30 m" in answer.text
    assert revision_of(empty_client, pid) == rev  # a preview stores nothing
    bad = {"points_file": ("survey.csv", b"x,y,level\n0,0,1\n5,5,2\n9,9,3\n", "text/csv")}
    answer = send(empty_client, pid, "/ground-level/import", {}, files=bad)
    assert answer.status_code == 422 and "one line" in answer.text
    assert revision_of(empty_client, pid) == rev
    answer = send(empty_client, pid, "/ground-level/import", {"datum": "mOD"}, files=files)
    assert answer.status_code == 200, answer.text[:500]
    saved = model_of(empty_client, pid)["ground_level"]
    assert saved["datum"] == "mOD"
    assert [(p["x"], p["y"], p["level_m"]) for p in saved["points"]] == [
        (0, 0, 4.3), (400, 0, 4.0), (0, 120, 4.1), (400, 120, 3.8)
    ]  # fmt: skip


def test_schedule_shows_target_levels(empty_client, tiny_model):
    model = json.loads(json.dumps(tiny_model))
    model["ground_level"] = {"datum": "mOD", "level_m": 5.0}
    model["layouts"][0]["probes"][0]["depth_m"] = 7.25
    pid = add_project(empty_client, model)
    name = model["layouts"][0]["name"]
    page = empty_client.get(f"/projects/{pid}/schedule", params={"layout": name})
    assert page.status_code == 200
    assert "Target level, mOD (m)" in page.text
    assert ">-2.25<" in page.text  # 5.00 - 7.25, by hand


def test_environments_imported_from_a_gis_file(empty_client, tmp_path):
    import geopandas
    from shapely.geometry import box

    model = json.loads(DEMO.read_text())  # a site grid: a file without CRS is taken as it is
    pid = add_project(empty_client, model)
    frame = geopandas.GeoDataFrame(
        {"name": ["Old creek", "Old dock"]}, geometry=[box(330, 0, 360, 120), box(360, 0, 400, 60)]
    )
    path = tmp_path / "old.gpkg"
    frame.to_file(path, layer="old", driver="GPKG")
    files = {"env_file": ("old.gpkg", path.read_bytes(), "application/geopackage+sqlite3")}
    fields = {"form_id": "import_env_0", "level_min": "MLWS", "level_max": "-1.5"}
    answer = send(empty_client, pid, "/rules/0/environments/import", fields, files=files)
    assert answer.status_code == 200, answer.text[:500]
    envs = model_of(empty_client, pid)["history"][0]["environments"]
    assert [e["name"] for e in envs[-2:]] == ["Old creek", "Old dock"]
    assert envs[-1]["geometry"]["coordinates"][0][0] in ([360, 0], [400, 0], [400, 60], [360, 60])
    assert (envs[-1]["level_min"], envs[-1]["level_max"]) == ("MLWS", -1.5)
    # a band the wrong way up is refused beside the import's field; nothing stored
    rev = revision_of(empty_client, pid)
    bad = {**fields, "level_min": "2", "level_max": "1"}
    answer = send(empty_client, pid, "/rules/0/environments/import", bad, files=files)
    refused(answer, "f-import_env_0-level_min", "above level_max")
    assert revision_of(empty_client, pid) == rev
