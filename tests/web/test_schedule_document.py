"""The schedule as a document: document control, health and safety notes, the warnings column,
the options considered; the plan's labels and symbols; a new site outline that leaves part of
the project outside."""

from __future__ import annotations

import copy
import re

import numpy as np
from edit_helpers import add_project, error_beside, model_of, notice_of, post, revision_of, text_of
from matplotlib.path import Path as MplPath

from probewise.web.plan_plot import PlanProbe, nice_length_m, plan_with_placement
from probewise.web.plots import SiteShapes
from probewise.web.symbols import SYMBOLS, methods_drawn


def section(page: str, element_id: str) -> str:
    match = re.search(rf'<(\w+)[^>]*\bid="{element_id}".*?</\1>', page, re.S)
    assert match, f"no #{element_id}"
    return match.group(0)


def test_document_control_is_stored_printed_and_undone(client, tiny_id):
    url = f"/projects/{tiny_id}/schedule"
    fields = {
        "reference": "GI-SCH-001",
        "status": "For comment",
        "prepared_by": "A. Field",
        "checked_by": "B. Check",
        "approved_by": "C. Approve",
    }
    answer = post(client, f"{url}/document", {"expected_revision": "1", **fields})
    assert answer.status_code == 200, notice_of(answer.text)
    assert model_of(client, tiny_id)["document"]["checked_by"] == "B. Check"
    printed = text_of(section(answer.text, "document-control"))
    for value in fields.values():
        assert value in printed
    answer = post(
        client,
        f"{url}/issues/add",
        {
            "expected_revision": "2",
            "revision": "P01",
            "date": "2026-02-30",
            "status": "For comment",
        },
    )
    assert answer.status_code == 422
    assert "YYYY-MM-DD" in error_beside(answer.text, "document.issues[0].date")
    assert revision_of(client, tiny_id) == 2
    answer = post(
        client,
        f"{url}/issues/add",
        {
            "expected_revision": "2",
            "revision": "P01",
            "date": "2026-02-20",
            "status": "For comment",
            "description": "First issue",
        },
    )
    assert answer.status_code == 200, notice_of(answer.text)
    history = text_of(section(answer.text, "issue-history"))
    assert "P01" in history and "2026-02-20" in history and "First issue" in history
    answer = post(client, f"{url}/undo", {"expected_revision": "3"})
    assert answer.status_code == 200 and "Undone" in notice_of(answer.text)
    assert model_of(client, tiny_id)["document"]["issues"] == []


def test_safety_notes_print_under_their_headings_and_open_ones_are_flagged(client, tiny_id):
    url = f"/projects/{tiny_id}/schedule"
    page = client.get(url).text
    printed = text_of(section(page, "safety-notes"))
    for heading in (
        "Buried services",
        "Unexploded ordnance",
        "Contamination",
        "Water",
        "Access",
        "Permits",
    ):
        assert heading in printed
    assert printed.count("To be confirmed before work starts") == 6
    answer = post(
        client,
        f"{url}/safety",
        {
            "expected_revision": "1",
            "hazard_buried_services": "Gas main in the east corner",
            "notes": "Site induction at the gate",
        },
    )
    assert answer.status_code == 200, notice_of(answer.text)
    printed = text_of(section(answer.text, "safety-notes"))
    assert "Gas main in the east corner" in printed and "Site induction" in printed
    assert printed.count("To be confirmed before work starts") == 5
    too_long = post(client, f"{url}/safety", {"expected_revision": "2", "notes": "x" * 4001})
    assert too_long.status_code == 422 and error_beside(too_long.text, "safety.notes")


def test_warnings_column_names_exclusions_deep_pits_and_refusal(client, tiny_model):
    model = copy.deepcopy(tiny_model)
    model["methods"].append(
        {
            **copy.deepcopy(model["methods"][0]),
            "id": "TP",
            "kind": "trial_pit",
            "name": "Trial pit",
            "max_depth_m": 4.0,
        }
    )
    model["layouts"][0]["probes"] += [
        {"id": "INX", "method": "BH", "x": 170.0, "y": 100.0},  # inside the gas easement
        {"id": "TP1", "method": "TP", "x": 60.0, "y": 30.0},  # a trial pit to about 4 m
    ]
    project_id = add_project(client, model)
    page = client.get(
        f"/projects/{project_id}/schedule", params={"layout": model["layouts"][0]["name"]}
    ).text
    rows = {
        m.group(1): text_of(m.group(2))
        for m in re.finditer(
            r'<th scope="row">([^<]+)</th>(.*?)</tr>', section(page, "schedule-table"), re.S
        )
    }
    assert "inside the exclusion Live gas main easement" in rows["INX"]
    assert "No person entry below 1.2 m" in rows["TP1"]  # probewise.app.probe_warnings
    assert "exclusion" not in rows["BH01"] and "trial pit" not in rows["BH01"]
    # the download carries the same warnings as the page
    csv_text = client.get(
        f"/projects/{project_id}/schedule.csv", params={"layout": model["layouts"][0]["name"]}
    ).text
    header, *lines = [line for line in csv_text.splitlines() if not line.startswith("#")]
    assert header.split(",")[-1] == "warnings"
    inx = next(line for line in lines if line.startswith("INX,"))
    assert "inside the exclusion Live gas main easement" in inx


def test_schedule_lists_the_options_with_the_compare_chart(client):
    page = client.get("/projects/1/schedule").text
    table = text_of(section(page, "schedule-ranking"))
    for name in ("Guidance grid: boreholes at 50 m", "Lean: CPTu only"):
        assert name in table
    assert "Cost (GBP)" in table and "scheduled" in table
    assert re.search(r'src="/projects/1/compare/chart\.svg\?[^"]*layout=', page)
    assert "/schedule/plan.png" in page


def test_every_sum_on_the_schedule_carries_the_currency(client):
    page = client.get("/projects/1/schedule").text
    foot = section(page, "method-totals").split("<tfoot>")[1]
    cells = re.findall(r'<td class="num">([^<]*)</td>', foot)
    money = cells[2:6]  # mobilisation, locations, metres, total
    assert money and all(cell.strip().endswith("GBP") for cell in money), money


def test_printed_words_are_for_the_client(client):
    page = client.get("/projects/1/schedule").text
    printed = re.sub(r'<(\w+)[^>]*class="[^"]*screen-only[^"]*".*?</\1>', "", page, flags=re.S)
    for word in ("from memory", "no source", "TODO", "internal", "Options page", "Methods page"):
        assert word.lower() not in text_of(printed).lower(), word
    assert "Appendix: basis and sources" in text_of(printed)


# ---------------------------------------------------------------- the plan


def hundred_probes(model: dict) -> list[PlanProbe]:
    """100 probes on a jittered grid inside the demo site (invented)."""
    ring = MplPath(np.array(model["site"]["coordinates"][0]))
    rng = np.random.default_rng(7)
    xs = np.linspace(451170, 451775, 40)
    ys = np.linspace(283355, 283630, 14)
    points = [(x + rng.uniform(-4, 4), y + rng.uniform(-4, 4)) for y in ys for x in xs]
    inside = [p for p in points if ring.contains_point(p)]
    chosen = [inside[i] for i in np.linspace(0, len(inside) - 1, 100).astype(int)]
    kinds = (("CP", "borehole"), ("CPTu", "cpt"), ("SDMT", "dmt"), ("TP", "trial_pit"))
    return [
        PlanProbe(f"P{i + 1:03d}", x, y, kinds[i % 4][1], kinds[i % 4][0])
        for i, (x, y) in enumerate(chosen)
    ]


def test_plan_labels_never_overlap_with_100_probes(demo_model):
    probes = hundred_probes(demo_model)
    png, placement = plan_with_placement(
        SiteShapes.of_model(demo_model),
        probes,
        title="100 probes",
        crs="EPSG:27700",
        legend_methods=methods_drawn(demo_model, {p.code for p in probes}),
    )
    assert png[:8] == b"\x89PNG\r\n\x1a\n"
    labels = list(placement.labels.values())
    boxes = labels + list(placement.symbols.values())
    for a in labels:
        for b in boxes:
            if b is a:
                continue
            overlap = a[0] < b[2] and b[0] < a[2] and a[1] < b[3] and b[1] < a[3]
            assert not overlap, (a, b)
    # every probe is either labelled or numbered in the key, once
    assert set(placement.labels) | set(placement.numbered.values()) == {p.id for p in probes}
    assert not set(placement.labels) & set(placement.numbered.values())


def test_scale_bar_lengths_are_round_numbers():
    # 1-2-5 series (common drafting practice, no source)
    assert nice_length_m(620.0) == 100.0
    assert nice_length_m(260.0) == 50.0
    assert nice_length_m(90.0) == 10.0
    assert nice_length_m(11.0) == 2.0


def test_screen_maps_draw_the_method_code_in_the_kind_shape(client):
    page = client.get("/projects/1").text  # the overview's SVG site plan
    plan = section(page, "site-map")
    borehole_path = SYMBOLS["borehole"].svg_path()
    assert f'<path class="probe-shape" d="{borehole_path}"' in plan
    assert re.search(r'<text class="probe-code"[^>]*>CP</text>', plan)
    legend = text_of(plan.split('<ul class="map-legend">')[1])
    assert "Existing Borehole: CP" in legend and "Existing CPT: CPTu" in legend
    site_page = client.get("/projects/1/site").text
    assert '"symbols"' in site_page.replace("&#34;", '"')


# ---------------------------------------------------------------- a new outline


def test_outline_leaving_probes_outside_lists_them_then_moves_or_drops(client, tiny_id):
    url = f"/projects/{tiny_id}/site/outline"
    half = "0, 0\n120, 0\n120, 120\n0, 120"  # the east half goes: HBH2, BH03, the easement
    first = post(
        client, url, {"expected_revision": "1", "form_id": "outline", "geometry_text": half}
    )
    assert first.status_code == 422 and revision_of(client, tiny_id) == 1
    listed = text_of(section(first.text, "outline-outside"))
    assert "HBH2" in listed and "BH03" in listed and "Live gas main easement" in listed
    second = post(
        client,
        url,
        {
            "expected_revision": "1",
            "form_id": "outline-outside",
            "geometry_text": half,
            "outside_confirmed": "1",
            "outside_planned": "move",
            "outside_features": "drop",
        },
    )
    assert second.status_code == 200, notice_of(second.text)
    model = model_of(client, tiny_id)
    assert [p["id"] for p in model["existing"]] == ["HBH1"]
    moved = {p["id"]: p for p in model["layouts"][0]["probes"]}["BH03"]
    assert moved["x"] <= 120 and moved["y"] == 60.0  # nearest point inside, same northing
    assert model.get("exclusions") == []
    assert "moved" in notice_of(second.text) and "dropped" in notice_of(second.text)


def test_imported_outline_lists_what_it_leaves_outside_and_applies_the_choice(client):
    import json

    west = [
        [[451150, 283340], [451450, 283340], [451450, 283600], [451150, 283600], [451150, 283340]]
    ]  # the demo's western part (invented)
    content = json.dumps(
        {
            "type": "FeatureCollection",
            "crs": {"type": "name", "properties": {"name": "EPSG:27700"}},
            "features": [
                {
                    "type": "Feature",
                    "properties": {"name": "West"},
                    "geometry": {"type": "Polygon", "coordinates": west},
                }
            ],
        }
    )
    files = {"gis_file": ("west.geojson", content.encode(), "application/geo+json")}
    form = {"expected_revision": "1", "role": "site", "mode": "replace"}
    preview = post(client, "/projects/1/site/import/preview", form, files=files)
    assert preview.status_code == 200, text_of(preview.text)[:600]
    listed = text_of(section(preview.text, "import-outline-outside"))
    assert "existing probe" in listed and "planned probe" in listed
    assert revision_of(client, 1) == 1  # a preview stores nothing
    answer = post(
        client, "/projects/1/site/import", {**form, "outside_planned": "drop"}, files=files
    )
    assert answer.status_code == 200, notice_of(answer.text)
    model = model_of(client, 1)
    planned = [p for layout in model["layouts"] for p in layout["probes"]]
    assert planned and all(p["x"] <= 451450 for p in planned)
    assert all(p["x"] <= 451450 for p in model["existing"])
    assert "dropped" in notice_of(answer.text)
