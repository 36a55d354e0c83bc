"""The Existing information page: probe rows (edit, add, delete), CSV and AGS4 imports."""

from __future__ import annotations

import pytest
from edit_helpers import (
    add_project,
    assert_links_answer,
    error_beside,
    input_value,
    last_message,
    map_data_of,
    model_of,
    notice_of,
    page_form,
    page_text,
    post,
    revision_of,
    text_of,
)
from io_builders import TINY_EXPECTED, TINY_LAYERS, TINY_LOCATIONS, TINY_MAPPING, ags4_text

from probewise.web.ags_mapping import guess_method, guess_unit
from probewise.web.templating import field_id

EXISTING = "/projects/{}/existing"


def probe_form(probe: dict, revision: int, names: list[str], **changes) -> dict:
    fields = {
        "id": probe["id"],
        "method": probe["method"],
        "x": str(probe["x"]),
        "y": str(probe["y"]),
        "final_depth_m": str(probe["final_depth_m"]),
    }
    for j, name in enumerate(names):
        depth = probe["observed"].get(name)
        fields[f"base_{j}"] = "" if depth is None else str(depth)
    return page_form(revision, fields, changes)


TINY_NAMES = ["Made ground", "Alluvial clay", "River gravel"]


# ---------------------------------------------------------------- the page


def test_existing_page_lists_probes_on_a_map(client, shown_project):
    project_id, model = shown_project
    text = page_text(client, EXISTING.format(project_id))
    for probe in model["existing"]:
        assert probe["id"] in text
    assert len(map_data_of(text, "existing-map")["existing"]) == len(model["existing"])
    for unit in model["units"][:-1]:
        assert f"Base of {unit['name']} (m)" in text
    assert_links_answer(client, text)


def test_edit_mode_opens_one_row(client, tiny_id):
    page = client.get(EXISTING.format(tiny_id) + "?edit=1")
    assert page.status_code == 200
    assert input_value(page.text, field_id("existing[1].id")) == "HBH2"
    assert input_value(page.text, field_id("existing[1].observed.Alluvial clay")) == "3.6"
    assert 'form="probe-form-1"' in page.text
    assert field_id("existing[0].id") + '"' not in page.text.replace('id="f-existing-0"', "")


def test_empty_state_when_there_are_no_probes(client, tiny_model):
    tiny_model["existing"] = []
    project_id = add_project(client, tiny_model)
    page = client.get(EXISTING.format(project_id))
    assert page.status_code == 200 and "No existing probes yet" in page.text


# ---------------------------------------------------------------- rows


def test_edit_a_row(client, tiny_id, tiny_model):
    probe = tiny_model["existing"][1]
    data = probe_form(probe, 1, TINY_NAMES, base_2="4.8")
    answer = post(client, f"/projects/{tiny_id}/existing/1", data)
    assert answer.status_code == 200, notice_of(answer.text)
    assert model_of(client, tiny_id)["existing"][1]["observed"]["River gravel"] == 4.8
    assert last_message(client, tiny_id) == "Changed probe HBH2"
    assert "4.8" in answer.text and 'form="probe-form-1"' not in answer.text  # back to reading


@pytest.mark.parametrize(
    ("changes", "path", "words"),
    [
        ({"base_1": "0.5"}, "existing[1].observed.Alluvial clay", "is above the base of"),
        ({"x": "500"}, "existing[1]", "lies outside the site"),
        ({"base_0": "9"}, "existing[1].observed.Made ground", "below the final depth"),
        ({"final_depth_m": "-1"}, "existing[1].final_depth_m", "must be > 0"),
        ({"method": "RC"}, "existing[1].method", "must be one of"),
        ({"id": "HBH1"}, "existing[1].id", "used twice"),
    ],
)
def test_bad_row_is_refused_beside_the_field(client, tiny_id, tiny_model, changes, path, words):
    data = probe_form(tiny_model["existing"][1], 1, TINY_NAMES, **changes)
    answer = post(client, f"/projects/{tiny_id}/existing/1", data)
    assert answer.status_code == 422
    assert words in error_beside(answer.text, path)
    assert 'form="probe-form-1"' in answer.text  # the row stays open with the typed values
    assert revision_of(client, tiny_id) == 1


def test_add_and_delete_a_probe(client, tiny_id):
    data = {
        "expected_revision": "1",
        "form_id": "new_probe",
        "id": "TP9",
        "method": "BH",
        "x": "100",
        "y": "50",
        "final_depth_m": "3",
        "base_0": "0.7",
        "base_1": "",
        "base_2": "",
    }
    answer = post(client, f"/projects/{tiny_id}/existing/add", data)
    assert answer.status_code == 200, notice_of(answer.text)
    added = model_of(client, tiny_id)["existing"][-1]
    assert added == {
        "id": "TP9",
        "method": "BH",
        "x": 100.0,
        "y": 50.0,
        "final_depth_m": 3.0,
        "observed": {"Made ground": 0.7},
        "precision_m": {},
    }
    answer = post(client, f"/projects/{tiny_id}/existing/2/remove", {"expected_revision": "2"})
    assert answer.status_code == 200
    assert [p["id"] for p in model_of(client, tiny_id)["existing"]] == ["HBH1", "HBH2"]
    assert last_message(client, tiny_id) == "Deleted existing probe TP9"


def test_bad_new_probe_keeps_the_draft(client, tiny_id):
    data = {
        "expected_revision": "1",
        "form_id": "new_probe",
        "id": "TP9",
        "method": "BH",
        "x": "100",
        "y": "five",
        "final_depth_m": "3",
    }
    answer = post(client, f"/projects/{tiny_id}/existing/add", data)
    assert answer.status_code == 422
    assert "'five' is not a number" in error_beside(answer.text, "new_probe.y")
    assert input_value(answer.text, field_id("new_probe.id")) == "TP9"
    assert revision_of(client, tiny_id) == 1


def test_stale_row_edit_changes_nothing(client, tiny_id, tiny_model):
    data = probe_form(tiny_model["existing"][0], 7, TINY_NAMES, base_0="1.3")
    answer = post(client, f"/projects/{tiny_id}/existing/0", data)
    assert answer.status_code == 409 and "Reload the page" in notice_of(answer.text)
    assert model_of(client, tiny_id)["existing"][0]["observed"]["Made ground"] == 1.1


# ---------------------------------------------------------------- CSV import

CSV = (
    "id,method,x,y,final_depth_m,base:Made ground,base:Alluvial clay,base:River gravel,notes\n"
    "BH201,BH,20,20,10,1.2,4.5,6.8,invented\n"
    "CPT202,CPT,60,80,6,0.9,3.9,,invented\n"
)


def csv_files(text: str, name: str = "probes.csv") -> dict:
    return {"csv_file": (name, text.encode(), "text/csv")}


def test_csv_preview_then_import(client, tiny_id):
    form = {"expected_revision": "1", "mode": "append", "default_method": ""}
    preview = post(client, f"/projects/{tiny_id}/existing/import/csv/preview", form, csv_files(CSV))
    assert preview.status_code == 200
    assert 'id="csv-preview"' in preview.text and "<html" not in preview.text
    assert "BH201" in preview.text and "CPT202" in preview.text and "notes" in preview.text
    assert revision_of(client, tiny_id) == 1  # a preview stores nothing
    answer = post(client, f"/projects/{tiny_id}/existing/import/csv", form, csv_files(CSV))
    assert answer.status_code == 200, notice_of(answer.text)
    probes = {p["id"]: p for p in model_of(client, tiny_id)["existing"]}
    assert probes["BH201"]["observed"] == {
        "Made ground": 1.2,
        "Alluvial clay": 4.5,
        "River gravel": 6.8,
    }
    assert probes["CPT202"]["observed"] == {"Made ground": 0.9, "Alluvial clay": 3.9}
    assert last_message(client, tiny_id) == "Imported 2 existing probes from probes.csv"


def test_csv_probes_outside_the_site_are_listed_not_dropped(client, tiny_id):
    text = CSV + "BH203,BH,900,900,5,1,,,outside\n"
    form = {"expected_revision": "1", "mode": "append", "default_method": ""}
    preview = post(
        client, f"/projects/{tiny_id}/existing/import/csv/preview", form, csv_files(text)
    )
    assert preview.status_code == 200
    assert "1 probe outside the site: BH203" in preview.text
    refused = post(client, f"/projects/{tiny_id}/existing/import/csv", form, csv_files(text))
    assert refused.status_code == 422 and "BH203" in refused.text
    assert revision_of(client, tiny_id) == 1
    form["leave_outside"] = "1"
    answer = post(client, f"/projects/{tiny_id}/existing/import/csv", form, csv_files(text))
    assert answer.status_code == 200, notice_of(answer.text)
    assert "Left out: 1 outside the site (BH203)" in notice_of(answer.text)
    ids = [p["id"] for p in model_of(client, tiny_id)["existing"]]
    assert "BH203" not in ids and "BH201" in ids


@pytest.mark.parametrize(
    ("text", "words"),
    [
        ("id,x,y\nA,1,2\n", "missing column(s) method, final_depth_m"),
        ("id,method,x,y,final_depth_m,base:Peat\nA,BH,1,2,3,1\n", "is not a unit of the model"),
        ("id,method,x,y,final_depth_m\nA,BH,1,two,3\n", "'two' is not a number"),
        ("id,method,x,y,final_depth_m\nHBH1,BH,10,10,3\n", "already in the model"),
        ("", "is empty"),
    ],
)
def test_bad_csv_gives_a_clear_message_and_stores_nothing(client, tiny_id, text, words):
    form = {"expected_revision": "1", "mode": "append"}
    answer = post(client, f"/projects/{tiny_id}/existing/import/csv", form, csv_files(text))
    assert answer.status_code == 422
    assert answer.headers["HX-Retarget"] == "#csv-preview"
    assert words in answer.text.replace("&#39;", "'")
    assert revision_of(client, tiny_id) == 1


# ---------------------------------------------------------------- AGS4 import


def ags_files() -> dict:
    return {"ags4_file": ("site.ags", ags4_text().encode(), "text/plain")}


def mapping_form(step: str, revision: int = 1, **extra) -> dict:
    codes = ["TS", "MG", "ALV", "RTD", "MDST"]
    data = {"expected_revision": str(revision), "mode": "append", "step": step}
    for n, code in enumerate(codes):
        data[f"code_{n}"] = code
        data[f"unit_{n}"] = TINY_MAPPING[code]
    for n, (loca_type, method) in enumerate((("CP", "BH"), ("CPT", "CPT"), ("TP", "BH"))):
        data[f"type_{n}"] = loca_type
        data[f"method_{n}"] = method
    data.update(extra)
    return data


def test_ags4_read_lists_codes_with_counts_and_guesses(client, tiny_id):
    answer = post(
        client,
        f"/projects/{tiny_id}/existing/import/ags4/preview",
        {"expected_revision": "1", "step": "read"},
        ags_files(),
    )
    assert answer.status_code == 200
    text = answer.text
    assert 'id="ags4-preview"' in text and "5 locations in site.ags" in text_of(text)
    counts = {}
    for layers in TINY_LAYERS.values():
        for layer in layers:
            counts[layer[4]] = counts.get(layer[4], 0) + 1
    for code, count in counts.items():
        assert f"<code>{code}</code>" in text
        assert f'<td class="num">{count}</td>' in text
    for loca_type in {loc[1] for loc in TINY_LOCATIONS}:
        assert 'name="type_' in text and f'value="{loca_type}"' in text
    assert revision_of(client, tiny_id) == 1


def test_ags4_mapping_preview_then_import(client, tiny_id):
    url = f"/projects/{tiny_id}/existing/import/ags4"
    preview = post(client, url + "/preview", mapping_form("preview"), ags_files())
    assert preview.status_code == 200
    assert "5 probes ready to import" in text_of(preview.text)
    assert revision_of(client, tiny_id) == 1
    answer = post(client, url, mapping_form("import"), ags_files())
    assert answer.status_code == 200, notice_of(answer.text)
    probes = {p["id"]: p for p in model_of(client, tiny_id)["existing"]}
    for hole_id, observed in TINY_EXPECTED.items():
        assert probes[hole_id]["observed"] == pytest.approx(observed)
    assert probes["CPT103"]["method"] == "CPT" and probes["TP104"]["method"] == "BH"
    assert last_message(client, tiny_id) == "Imported 5 existing probes from site.ags (AGS4)"


def test_ags4_import_needs_every_code_mapped(client, tiny_id):
    form = mapping_form("import", unit_0="")
    answer = post(client, f"/projects/{tiny_id}/existing/import/ags4", form, ags_files())
    assert answer.status_code == 422
    assert "choose a unit" in answer.text and "TS" in answer.text
    assert revision_of(client, tiny_id) == 1


def test_ags4_outside_locations_are_listed(client, tiny_id):
    text = ags4_text(offset=(150.0, 0.0))  # some locations fall east of the 200 m site
    files = {"ags4_file": ("east.ags", text.encode(), "text/plain")}
    url = f"/projects/{tiny_id}/existing/import/ags4"
    preview = post(client, url + "/preview", mapping_form("preview"), files)
    assert preview.status_code == 200 and "outside the site" in preview.text
    refused = post(client, url, mapping_form("import"), files)
    assert refused.status_code == 422 and "lie outside the site" in refused.text
    assert revision_of(client, tiny_id) == 1
    answer = post(client, url, mapping_form("import", leave_outside="1"), files)
    assert answer.status_code == 200, notice_of(answer.text)
    assert "Left out" in notice_of(answer.text)


def test_bad_ags4_file_stores_nothing(client, tiny_id):
    files = {"ags4_file": ("broken.ags", b'"GROUP","PROJ"\r\n"DATA","x"\r\n', "text/plain")}
    answer = post(
        client, f"/projects/{tiny_id}/existing/import/ags4", mapping_form("import"), files
    )
    assert answer.status_code == 422
    assert "broken.ags" in answer.text
    assert revision_of(client, tiny_id) == 1


def test_guesses_for_the_mapping_step():
    units = [
        "Made ground and topsoil",
        "Soft alluvial clay and peat",
        "Sand and gravel",
        "Stiff clay",
        "Mudstone",
    ]
    assert guess_unit("MG", "MADE GROUND: brick rubble", units) == "Made ground and topsoil"
    assert (
        guess_unit("ALV", "Soft grey organic CLAY and PEAT", units) == "Soft alluvial clay and peat"
    )
    assert guess_unit("MDST", "Weak grey MUDSTONE", units) == "Mudstone"
    assert guess_unit("X", "Unknown stuff", units) == ""
    methods = [
        {"id": "CP", "kind": "borehole"},
        {"id": "CPTu", "kind": "cpt"},
        {"id": "TP", "kind": "trial_pit"},
    ]
    assert guess_method("CP", methods) == "CP"
    assert guess_method("CPT", methods) == "CPTu"
    assert guess_method("WS", methods) == "CP"
    assert guess_method("ZZ", methods) == ""


def test_existing_undo(client, tiny_id):
    post(client, f"/projects/{tiny_id}/existing/1/remove", {"expected_revision": "1"})
    answer = post(client, f"/projects/{tiny_id}/existing/undo", {"expected_revision": "2"})
    assert answer.status_code == 200 and 'id="existing"' in answer.text
    assert len(model_of(client, tiny_id)["existing"]) == 2
