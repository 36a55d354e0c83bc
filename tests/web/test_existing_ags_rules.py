"""The AGS import of the Existing information page: AGS3 files, text rules, absent units."""

from __future__ import annotations

from ags3_builders import FILE, RULES, reclaimed_model_of
from edit_helpers import add_project, model_of, post, revision_of, text_of


def _files() -> dict:
    return {"ags4_file": ("reclaimed.ags", FILE, "text/plain")}


def _form(step: str, rules: list[str], **extra) -> dict:
    data = {"expected_revision": "1", "mode": "append", "step": step}
    data["text_rules"] = "\n".join(r.replace("=", " = ") if "/" not in r else r for r in rules)
    for n, code in enumerate(["TOPS", "SAND", "CLAY", "GRAN"]):
        data[f"code_{n}"] = code
        data[f"unit_{n}"] = "-" if code == "TOPS" else ""
    data["type_0"], data["method_0"] = "CP", "BH"
    data.update(extra)
    return data


def test_text_rules_preview_then_import_an_ags3_file(client, tiny_model):
    pid = add_project(client, reclaimed_model_of(tiny_model))
    url = f"/projects/{pid}/existing/import/ags4"
    preview = post(client, url + "/preview", _form("preview", RULES), _files())
    assert preview.status_code == 200, preview.text
    shown = text_of(preview.text)
    assert "2 locations in reclaimed.ags (AGS3)" in shown
    assert "What each text rule caught" in shown
    assert "BH1 4-6.5 m: Very soft dark grey clayey SAND (MARINE DEPOSIT)" in shown
    assert "By text rules" in shown and "2 probes ready to import" in shown
    assert "no Marine deposit met: absent" in shown
    assert revision_of(client, pid) == 1
    answer = post(client, url, _form("import", RULES), _files())
    assert answer.status_code == 200, answer.text
    stored = {p["id"]: p for p in model_of(client, pid)["existing"]}
    assert stored["BH2"]["observed"] == {"Fill": 5.0, "Marine deposit": 5.0, "Alluvium": 11.0}
    assert stored["BH1"]["ground_level_m"] == 4.0


def test_layers_left_unplaced_or_a_bad_rule_store_nothing(client, tiny_model):
    pid = add_project(client, reclaimed_model_of(tiny_model))
    url = f"/projects/{pid}/existing/import/ags4"
    answer = post(client, url, _form("import", RULES[:1]), _files())
    assert answer.status_code == 422
    assert "SAND (1 layer(s))" in text_of(answer.text)
    answer = post(client, url, _form("import", ["(FILL)=Fill", "/(/=Fill"]), _files())
    assert answer.status_code == 422
    assert "text_rules line 2" in text_of(answer.text)
    assert "not a valid regular expression" in text_of(answer.text)
    assert revision_of(client, pid) == 1


def test_previews_show_the_thickness_in_the_holes(client, tiny_model):
    pid = add_project(client, reclaimed_model_of(tiny_model))
    url = f"/projects/{pid}/existing/import/ags4/preview"
    shown = text_of(post(client, url, _form("preview", RULES), _files()).text)
    assert "Thickness in these holes (m)" in shown
    # marine deposit: met in BH1 (2.5 m) and absent in BH2, so 1 of 2 and a mean of 1.25 m
    assert "Marine deposit 1 of 2 (0.50) 2.50 / 2.50 / 2.50 / 2.50 / 2.50 1.25" in shown
    rows = "\n".join(
        ["id,method,x,y,final_depth_m,base:Fill,base:Marine deposit,base:Alluvium"]
        + [f"H{i},BH,{10 + 8 * i},20,20,{2 + 0.1 * i},{2 + 0.1 * i},9" for i in range(19)]
        + ["DEEP,BH,170,20,20,14,14,16"]
    )
    files = {"csv_file": ("holes.csv", rows.encode(), "text/csv")}
    answer = post(
        client, f"/projects/{pid}/existing/import/csv/preview", {"expected_revision": "1"}, files
    )
    shown = text_of(answer.text)
    assert "DEEP alone sets the max (14.00 m" in shown
    assert "Marine deposit 0 of 20 (0.00)" in shown
    assert revision_of(client, pid) == 1


def test_rules_given_before_reading_leave_codes_to_the_rules(client, tiny_model):
    pid = add_project(client, reclaimed_model_of(tiny_model))
    url = f"/projects/{pid}/existing/import/ags4/preview"
    form = {"expected_revision": "1", "step": "read", "text_rules": "\n".join(RULES)}
    shown = post(client, url, form, _files()).text
    # SAND, CLAY and GRAN are placed by the rules: no unit guessed for them
    assert shown.count('<option value="" selected>By text rules</option>') == 3
    # the topsoil matches no rule: it still needs a choice
    assert 'class="needs-choice"' in shown and "<code>TOPS</code>" in shown
    page = client.get(f"/projects/{pid}/existing").text
    assert 'name="text_rules"' in page  # the rules box sits in the form, beside the file
