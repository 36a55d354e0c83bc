"""Schedule page: the printable schedule, its downloads, the justification; and every link of
the decision pages answers."""

from __future__ import annotations

import csv
import html
import json
from datetime import date

import geopandas
import pytest
from caution_check import assert_caution
from csv_helpers import data_lines
from decision_helpers import attribute_values, import_model
from io_builders import gpkg_description
from pyproj import Transformer
from web_helpers import decoded_png, htmx

from probewise.app.justification import MainBoundary, OptionFigures, justification
from probewise.app.layouts import layout_kind
from probewise.app.to_core import to_core
from probewise.core.evaluate import evaluate_project
from probewise.core.options import rank_options

LEAN = "Lean: CPTu only"


def test_schedule_of_the_demo(client, demo_model):
    page = client.get("/projects/1/schedule", params={"layout": LEAN})
    assert page.status_code == 200
    text = page.text
    assert_caution(text)
    assert date.today().isoformat() in text
    assert "Project revision" in text
    layout = next(lay for lay in demo_model["layouts"] if lay["name"] == LEAN)
    for probe in layout["probes"]:
        assert f'<th scope="row">{probe["id"]}</th>' in text
    assert 'id="justification"' in text and "bits" in text
    assert "paper-a4" in text
    assert '<link rel="stylesheet" href="/static/css/print.css">' in text


def test_schedule_numbers_match_the_core(client, demo_model):
    evaluation = evaluate_project(to_core(demo_model))
    lean = next(r for r in evaluation.layouts if r.name == LEAN)
    text = client.get("/projects/1/schedule", params={"layout": LEAN}).text
    assert f'<dd id="total-cost">{lean.cost:,.0f}' in text
    assert f'<dd id="total-probes">{len(lean.plans)}</dd>' in text
    for plan in lean.plans:
        assert f"{plan.depth_m:.1f}".rstrip("0").rstrip(".") in text


def test_letter_paper_and_the_tiny_model(client, tiny_model):
    pid = import_model(client, tiny_model)
    page = client.get(f"/projects/{pid}/schedule", params={"paper": "letter"})
    assert page.status_code == 200
    assert "paper-letter" in page.text
    assert "local site grid" in page.text


def test_default_option_is_the_best_value(client, demo_model):
    # the demo has design elements: the option of highest net value (expected saving - cost)
    assert demo_model["elements"]
    project = to_core(demo_model)
    kinds = {lay["name"]: layout_kind(lay) for lay in demo_model["layouts"]}
    ranked = rank_options(project, project.layouts, kinds)
    best = max(ranked, key=lambda o: o.expected_saving - o.cost)
    text = client.get("/projects/1/schedule").text
    assert f'<dd class="doc-option">{html.escape(best.name)}</dd>' in text


def test_csv_download(client, demo_model):
    answer = client.get("/projects/1/schedule.csv", params={"layout": LEAN})
    assert answer.status_code == 200
    assert "attachment" in answer.headers["content-disposition"]
    assert ".csv" in answer.headers["content-disposition"]
    rows = list(csv.DictReader(data_lines(answer.text)))
    layout = next(lay for lay in demo_model["layouts"] if lay["name"] == LEAN)
    assert [r["id"] for r in rows] == [p["id"] for p in layout["probes"]]
    assert all(float(r["depth_m"]) > 0 and float(r["cost"]) > 0 for r in rows)


def test_geojson_download(client, demo_model):
    answer = client.get("/projects/1/schedule.geojson", params={"layout": LEAN})
    assert answer.status_code == 200
    assert answer.headers["content-disposition"].count(".geojson") >= 1
    document = json.loads(answer.text)
    assert document["type"] == "FeatureCollection"
    layout = next(lay for lay in demo_model["layouts"] if lay["name"] == LEAN)
    probes = layout["probes"]
    assert [f["properties"]["id"] for f in document["features"]] == [p["id"] for p in probes]
    # EPSG:27700 (British National Grid) to WGS 84, against pyproj's transform of each probe
    to_wgs84 = Transformer.from_crs("EPSG:27700", "EPSG:4326", always_xy=True)
    for feature, probe in zip(document["features"], probes, strict=True):
        want = to_wgs84.transform(probe["x"], probe["y"])
        assert feature["geometry"]["coordinates"] == pytest.approx(want, abs=1e-7)  # ~1 cm
    assert_caution(document["caution"])


def test_geopackage_download(client, demo_model, tmp_path):
    answer = client.get("/projects/1/schedule.gpkg", params={"layout": LEAN})
    assert answer.status_code == 200
    path = tmp_path / "schedule.gpkg"
    path.write_bytes(answer.content)
    frame = geopandas.read_file(path, layer="schedule")
    probes = next(lay for lay in demo_model["layouts"] if lay["name"] == LEAN)["probes"]
    assert frame.crs.to_epsg() == 27700
    assert list(frame["id"]) == [p["id"] for p in probes]
    assert list(zip(frame.geometry.x, frame.geometry.y, strict=True)) == [
        (p["x"], p["y"]) for p in probes
    ]
    assert_caution(gpkg_description(path, "schedule"))


def test_site_plan_image(client):
    answer = client.get("/projects/1/schedule/plan.png", params={"layout": LEAN})
    assert answer.status_code == 200
    decoded_png(answer.content)


def test_empty_state_and_missing_downloads(client, tiny_model):
    pid = import_model(client, dict(tiny_model, layouts=[]))
    page = client.get(f"/projects/{pid}/schedule")
    assert page.status_code == 200
    assert "Nothing to schedule yet" in page.text
    assert_caution(page.text)
    assert client.get(f"/projects/{pid}/schedule.csv").status_code == 400


# ---------------------------------------------------------------- justification


def figures(name, cost, gain, width=2.0, confident=0.2, n=5):
    return OptionFigures(name, cost, 3.2, n, 80.0, gain, width, confident)


def test_justification_against_the_cheapest_alternative():
    main = MainBoundary("Alluvial clay", 0.5, 3.04, 0.0)
    chosen = figures("Mixed", 35174.0, 2.58, width=2.31, confident=0.12)
    cheap = figures("Lean", 7928.0, 2.07, width=2.54)
    text = " ".join(justification(chosen, main, [cheap], "GBP"))
    assert "Mixed costs about GBP 35,170" in text  # to the nearest 10 above 1,000
    assert "about 3.2 days" in text  # as the tables show it: one decimal
    assert "from 3.04 m to 2.31 m" in text
    assert "from 0% to 12%" in text
    assert "gains 2.58 bits" in text
    assert "The cheapest alternative, Lean at GBP 7,930, gains 2.07 bits" in text
    assert "buys 0.51 bits more for GBP 27,250 more" in text
    assert "Pareto-efficient" in text


def test_justification_of_the_cheapest_and_of_a_dominated_option():
    chosen = figures("A", 5000.0, 1.0)
    other = figures("B", 4000.0, 1.5)
    text = " ".join(justification(chosen, None, [other], ""))
    assert "not Pareto-efficient: B gains 1.50 bits for 4,000" in text
    text = " ".join(justification(other, None, [chosen], ""))
    assert "It is the cheapest of the 2 options compared" in text


# ---------------------------------------------------------------- links


@pytest.mark.parametrize("page", ["options", "compare", "schedule"])
def test_every_link_of_the_decision_pages_answers(client, page):
    urls = [f"/projects/1/{page}"]
    if page == "compare":
        urls.append("/projects/1/compare/results")
    seen: set[str] = set()
    for url in urls:
        text = client.get(url, headers=htmx() if "results" in url else {}).text
        for attr in ("href", "src"):
            for link in attribute_values(text, attr):
                link = html.unescape(link)
                if not link.startswith("/") or link in seen:
                    continue
                seen.add(link)
                answer = client.get(link)
                assert answer.status_code < 400, f"{link} from {url}: {answer.status_code}"
    assert seen
