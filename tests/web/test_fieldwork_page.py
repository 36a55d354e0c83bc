"""Fieldwork page: a planned layout turned into existing probes of a new stage (one revision,
undo takes it back), the schedule's section on that stage against `probewise readings
--by-stage` and `probewise posterior`, files that fill the table, and bad input (4xx, nothing
stored). The probes and their depths are invented."""

from __future__ import annotations

import html
import json
import math
import re

import pytest
from cli_helpers import run_cli
from edit_helpers import add_project, model_of, post, revision_of
from io_builders import ags4_text

# A row of the schedule's stage table: probe, boundary, found, P50, P5-P95, z.
ROW = re.compile(
    r'<th scope="row">([^<]+)</th><td>([^<]+)</td>\s*<td class="num">([^<]+)</td>\s*'
    r'<td class="num">([^<]+)</td>\s*<td class="num">([^&]+)&ndash;([^<]+)</td>\s*'
    r'<td class="num">([^<]+)</td>'
)
LAYOUT = "Four boreholes"  # tests/data/tiny-model.json: BH01..BH04 at (50,60) (100,60) ...
UNITS = ["Made ground", "Alluvial clay", "River gravel"]


@pytest.fixture
def staged_id(client, tiny_model) -> int:
    """The tiny model with its two probes labelled as the first stage."""
    model = json.loads(json.dumps(tiny_model))
    for probe in model["existing"]:
        probe["stage"] = "Desk study"
    return add_project(client, model)


def entry_form(revision: int, stage: str, rows: dict[int, dict]) -> dict:
    """The fieldwork form: ``rows`` maps a probe's row to its fields (ticked)."""
    ids = ["BH01", "BH02", "BH03", "BH04"]
    xy = [(50, 60), (100, 60), (150, 60), (100, 100)]
    form = {"expected_revision": str(revision), "layout": LAYOUT, "stage": stage}
    for i, fields in rows.items():
        form |= {f"id_{i}": ids[i], f"x_{i}": str(xy[i][0]), f"y_{i}": str(xy[i][1])}
        form[f"done_{i}"] = "on"
        form[f"final_{i}"] = str(fields["final"])
        for j, value in enumerate(fields.get("bases", [])):
            form[f"base_{i}_{j}"] = str(value)
    return form


GOOD_ROWS = {
    0: {"final": 5, "bases": [1.2, 4.4, ""]},  # the gravel not found above 5 m
    1: {"final": 12, "bases": [0.9, "absent", 6.0]},  # no alluvial clay there
    3: {"final": 10, "bases": [1.4, 5.1, 7.3]},  # BH03 not drilled
}


def test_page_lists_the_planned_probes_at_their_planned_depth(client, staged_id):
    page = client.get(f"/projects/{staged_id}/fieldwork", params={"layout": LAYOUT})
    assert page.status_code == 200
    assert "judgement of a qualified" in page.text  # the caution
    for i, pid in enumerate(["BH01", "BH02", "BH03", "BH04"]):
        assert f'name="id_{i}" value="{pid}"' in page.text
        assert f'name="done_{i}" aria-label="{pid} drilled" checked' in page.text
    assert "/fieldwork" in client.get(f"/projects/{staged_id}/existing").text


def test_two_stages_end_to_end(client, staged_id, tmp_path):
    before = revision_of(client, staged_id)
    answer = post(
        client, f"/projects/{staged_id}/fieldwork", entry_form(before, "Phase 2", GOOD_ROWS)
    )
    assert answer.status_code == 200, answer.text
    assert revision_of(client, staged_id) == before + 1  # one revision
    model = model_of(client, staged_id)
    new = {p["id"]: p for p in model["existing"] if p.get("stage") == "Phase 2"}
    assert set(new) == {"BH01", "BH02", "BH04"}
    assert new["BH01"]["observed"] == {"Made ground": 1.2, "Alluvial clay": 4.4}
    assert new["BH01"]["final_depth_m"] == 5
    # absent: recorded at the base of the unit above (equal depths, docs/model-file.md)
    assert new["BH02"]["observed"] == {"Made ground": 0.9, "Alluvial clay": 0.9, "River gravel": 6}
    assert new["BH04"]["method"] == "BH"
    layout = next(lay for lay in model["layouts"] if lay["name"] == LAYOUT)
    assert layout["recorded_stage"] == "Phase 2" and len(layout["probes"]) == 4
    assert "recorded as stage" in answer.text

    # Readings by stage on the web equal `probewise readings --by-stage`.
    path = tmp_path / "two-stages.json"
    path.write_text(json.dumps(model))
    run = run_cli("readings", str(path), "--by-stage", "--json")
    assert run.returncode == 0, run.stderr
    cli = [r for r in json.loads(run.stdout)["readings"] if r["stage"] == "Phase 2"]
    assert len(cli) == 2 + 3 + 3
    page = client.get(f"/projects/{staged_id}/readings", params={"by_stage": "1"}).text
    for r in json.loads(run.stdout)["readings"]:
        assert f"{r['z']:.2f}" in page

    # The schedule of the next stage sets each Phase 2 reading against its prediction made
    # without Phase 2: the P5/P50/P95 of `probewise posterior` on the model without it.
    schedule = client.get(
        f"/projects/{staged_id}/schedule", params={"layout": "Two boreholes and six CPTs"}
    ).text
    assert 'id="schedule-stage"' in schedule
    earlier = dict(model, existing=[p for p in model["existing"] if p.get("stage") != "Phase 2"])
    earlier_path = tmp_path / "earlier.json"
    earlier_path.write_text(json.dumps(earlier))
    ats = [x for p in new.values() for x in ("--at", f"{p['x']},{p['y']}")]
    post_run = run_cli("posterior", str(earlier_path), *ats, "--json")
    assert post_run.returncode == 0, post_run.stderr
    points = json.loads(post_run.stdout)["points"]
    at = {(pt["x"], pt["y"]): pt["boundaries"] for pt in points}
    section = schedule[schedule.index('id="schedule-stage"') :]
    section = section[: section.index("</section>")]
    shown = {
        (m[0], html.unescape(m[1])): [float(v.replace("\u2212", "-")) for v in m[2:]]
        for m in re.findall(ROW, section)
    }
    assert len(shown) == len(cli)
    for r in cli:
        p = new[r["probe"]]
        b = at[(p["x"], p["y"])][r["boundary"]]
        assert math.isclose(b["mean_m"], r["predicted_mean_m"], abs_tol=1e-6)
        found, p50, p05, p95, z = shown[(r["probe"], r["boundary"])]
        expected = (r["reading_m"], b["p50_m"], b["p05_m"], b["p95_m"], r["z"])
        for got, want in zip((found, p50, p05, p95, z), expected, strict=True):
            assert abs(got - want) <= 0.0051, (r, got, want)  # shown to 2 decimals
    assert "within the predicted 90% band" in section and "mean z\u00b2" in section

    # Undo takes the whole record back.
    undo = post(
        client,
        f"/projects/{staged_id}/fieldwork/undo",
        {"expected_revision": str(before + 1), "layout": LAYOUT},
    )
    assert undo.status_code == 200, undo.text
    model = model_of(client, staged_id)
    assert [p["id"] for p in model["existing"]] == ["HBH1", "HBH2"]
    assert "recorded_stage" not in next(lay for lay in model["layouts"] if lay["name"] == LAYOUT)


@pytest.mark.parametrize(
    ("stage", "rows", "field", "words"),
    [
        ("Phase 2", {0: {"final": 5, "bases": ["abc"]}}, "found[0].observed.Made ground", ""),
        (
            "Phase 2",
            {0: {"final": 5, "bases": [1.0, 7.0]}},
            "found[0].observed.Alluvial clay",
            "below the final depth",
        ),
        ("Phase 2", {0: {"final": "deep", "bases": [1.0]}}, "found[0].final_depth_m", ""),
        (
            "Phase 2",
            {0: {"final": 5, "bases": [2.0, 1.0]}},
            "found[0].observed.Alluvial clay",
            "above the base of",
        ),
        ("Desk study", GOOD_ROWS, "stage", "already the stage"),
        ("  ", GOOD_ROWS, "stage", "give the stage a name"),
        ("Phase 2", {}, "found", "no probe is marked"),
    ],
)
def test_bad_entries_name_the_field_and_store_nothing(client, staged_id, stage, rows, field, words):
    before = revision_of(client, staged_id)
    answer = post(client, f"/projects/{staged_id}/fieldwork", entry_form(before, stage, rows))
    assert answer.status_code == 422, answer.text
    text = html.unescape(answer.text)
    assert f"Not saved: {field}:" in text
    assert words in text
    assert revision_of(client, staged_id) == before


def test_an_unknown_probe_id_and_a_stale_page_are_refused(client, staged_id):
    before = revision_of(client, staged_id)
    form = entry_form(before, "Phase 2", GOOD_ROWS) | {"id_0": "ZZ9"}
    answer = post(client, f"/projects/{staged_id}/fieldwork", form)
    assert answer.status_code == 422
    assert "found[0].id" in html.unescape(answer.text)
    stale = post(client, f"/projects/{staged_id}/fieldwork", entry_form(before - 1, "P", GOOD_ROWS))
    assert stale.status_code == 409
    assert revision_of(client, staged_id) == before


CSV = (
    "id,method,x,y,final_depth_m,base:Made ground,base:Alluvial clay,base:River gravel\n"
    "BH01,BH,51,61,9.5,1.3,4.2,6.6\n"
    "BH04,BH,100,100,6,1.1,3.9,\n"
)


def test_a_table_fills_the_form_and_stores_nothing(client, staged_id):
    before = revision_of(client, staged_id)
    answer = client.post(
        f"/projects/{staged_id}/fieldwork/import",
        data={"expected_revision": str(before), "layout": LAYOUT, "stage": "Phase 2"},
        files={"file": ("phase2.csv", CSV.encode(), "text/csv")},
    )
    assert answer.status_code == 200, answer.text
    text = answer.text
    assert 'name="done_0" aria-label="BH01 drilled" checked' in text
    assert 'name="done_1" aria-label="BH02 drilled">' in text  # not in the file: unticked
    assert 'name="x_0" aria-label="BH01 x" value="51"' in text  # as drilled
    assert 'name="base_0_2" aria-label="BH01 base of River gravel" value="6.6"' in text
    assert 'name="base_3_2" aria-label="BH04 base of River gravel" value=""' in text
    assert revision_of(client, staged_id) == before


def test_an_ags4_file_fills_the_form_matched_by_location_id(client, staged_id):
    locations = [("BH02", "CP", 100.0, 60.0, 8.0)]
    layers = {
        "BH02": [
            (0.0, 0.7, "MADE GROUND (invented)", "101", "MG"),
            (0.7, 3.9, "Soft CLAY (invented)", "201", "ALV"),
            (3.9, 8.0, "Dense GRAVEL (invented)", "401", "RTD"),
        ]
    }
    data = ags4_text(locations, layers).encode()
    mapping = "MG = Made ground\nALV = Alluvial clay\nRTD = River gravel"
    answer = client.post(
        f"/projects/{staged_id}/fieldwork/import",
        data={"expected_revision": "1", "layout": LAYOUT, "mapping": mapping},
        files={"file": ("phase2.ags", data, "text/plain")},
    )
    assert answer.status_code == 200, answer.text
    assert 'name="base_1_1" aria-label="BH02 base of Alluvial clay" value="3.9"' in answer.text
    # the gravel's base is the final depth: not reached, so not recorded
    assert 'name="base_1_2" aria-label="BH02 base of River gravel" value=""' in answer.text


def test_a_file_with_a_probe_the_layout_does_not_plan_is_refused(client, staged_id):
    before = revision_of(client, staged_id)
    bad = CSV + "BH99,BH,20,20,6,1.0,3.0,\n"
    answer = client.post(
        f"/projects/{staged_id}/fieldwork/import",
        data={"expected_revision": str(before), "layout": LAYOUT},
        files={"file": ("phase2.csv", bad.encode(), "text/csv")},
    )
    assert answer.status_code == 422
    assert "phase2.csv: BH99" in html.unescape(answer.text)
    assert "not planned probes" in answer.text
    assert revision_of(client, staged_id) == before


def test_a_recorded_layout_is_not_recorded_twice(client, staged_id):
    before = revision_of(client, staged_id)
    ok = post(client, f"/projects/{staged_id}/fieldwork", entry_form(before, "Phase 2", GOOD_ROWS))
    assert ok.status_code == 200
    again = post(
        client, f"/projects/{staged_id}/fieldwork", entry_form(before + 1, "Phase 3", GOOD_ROWS)
    )
    assert again.status_code == 422
    assert "already recorded as stage" in html.unescape(again.text)
    assert revision_of(client, staged_id) == before + 1
    copied = post(
        client,
        f"/projects/{staged_id}/options/layouts/duplicate",
        {"expected_revision": str(before + 1), "layout": LAYOUT},
    )
    assert copied.status_code == 200, copied.text
    layouts = model_of(client, staged_id)["layouts"]
    copy = next(lay for lay in layouts if lay["name"].startswith(f"{LAYOUT} (copy"))
    assert "recorded_stage" not in copy  # a copy is a plan not yet drilled
