"""Compare page: the fast shell, the comparison fragment (ranking numbers agree with the core),
the chart, the uncertainty maps and the section along a line."""

from __future__ import annotations

import copy
import html
import re

import pytest
from decision_helpers import attribute_values, import_model, stored
from web_helpers import htmx

from server.app.layouts import layout_kind
from server.app.to_core import to_core
from server.core.evaluate import evaluate_project
from server.core.options import rank_options
from server.web.templating import CAUTION, format_money_whole

CAUTION_HTML = html.escape(CAUTION, quote=False)
PNG = b"\x89PNG\r\n\x1a\n"


def results(client, pid: int, **params) -> str:
    answer = client.get(f"/projects/{pid}/compare/results", params=params, headers=htmx())
    assert answer.status_code == 200, answer.text
    return answer.text


def test_shell_answers_without_the_heavy_part(client):
    page = client.get("/projects/1/compare")
    assert page.status_code == 200
    assert CAUTION_HTML in page.text
    [loader] = [u for u in attribute_values(page.text, "hx-get") if "/compare/results" in u]
    assert 'hx-trigger="load"' in page.text
    assert "ranking-table" not in page.text  # loaded afterwards
    assert client.get(html.unescape(loader), headers=htmx()).status_code == 200


def test_ranking_numbers_agree_with_the_core(client, demo_model):
    text = results(client, 1)
    project = to_core(demo_model)
    kinds = {lay["name"]: layout_kind(lay) for lay in demo_model["layouts"]}
    ranked = rank_options(project, project.layouts, kinds)
    rows = re.findall(r'<tr class="[^"]*" data-option="([^"]+)">(.*?)</tr>', text, re.S)
    assert [html.unescape(name) for name, _ in rows] == [o.name for o in ranked]
    for (_, row), option in zip(rows, ranked, strict=True):
        assert f'<td class="num cost">{format_money_whole(option.cost)}</td>' in row
        assert f'<td class="num gain">{option.information_gain_bits:.2f}' in row
        assert ("pareto-yes" in row) == option.pareto


def test_default_option_is_the_best_value_pareto_option(client, demo_model):
    project = to_core(demo_model)
    evaluation = evaluate_project(project)
    efficient = [r for r in evaluation.layouts if r.pareto]
    best = max(efficient, key=lambda r: r.gain_per_cost)
    text = results(client, 1)
    assert re.search(
        r'class="is-chosen[^"]*" data-option="' + re.escape(html.escape(best.name)), text
    )


def test_boundary_table_before_and_after(client, demo_model):
    project = to_core(demo_model)
    evaluation = evaluate_project(project)
    chosen = evaluation.layouts[0]
    text = results(client, 1, layout=chosen.name)
    table = text[text.index('id="boundary-compare"') :]
    for name, metrics in evaluation.baseline.boundaries.items():
        assert html.escape(name) in table
        assert f"{metrics.width90_mean_m:.2f}".rstrip("0").rstrip(".") in table
    for metrics in chosen.boundaries.values():
        assert f"{metrics.std_mean_m:.2f}".rstrip("0").rstrip(".") in table


def test_comparison_on_the_tiny_model(client, tiny_model):
    pid = import_model(client, tiny_model)
    text = results(client, pid, layout="Four boreholes", quantity="width")
    assert "Four boreholes" in text and "Two boreholes and six CPTs" in text
    srcs = attribute_values(text, "src")
    assert any("/compare/chart.svg" in s for s in srcs)
    maps = [s for s in srcs if "/compare/map.png" in s]
    assert len(maps) == len(tiny_model["units"]) - 1
    for src in srcs:
        answer = client.get(html.unescape(src))
        assert answer.status_code == 200, src
        assert answer.headers["content-type"].startswith("image/")


def test_chart_is_an_svg_with_the_options(client, demo_model):
    answer = client.get("/projects/1/compare/chart.svg")
    assert answer.status_code == 200
    assert answer.headers["content-type"].startswith("image/svg+xml")
    assert b"<svg" in answer.content[:400]
    for layout in demo_model["layouts"]:
        assert html.escape(layout["name"][:20]).encode() in answer.content


def test_chart_draws_a_saved_optimiser_curve(client, tiny_model):
    model = copy.deepcopy(tiny_model)
    curve = [
        {"cost": 3000.0, "information_gain_bits": 0.4},
        {"cost": 6000, "information_gain_bits": 0.9},
    ]
    model["layouts"][0].update(origin="optimised", optimiser_curve=curve)
    pid = import_model(client, model)
    answer = client.get(f"/projects/{pid}/compare/chart.svg")
    assert answer.status_code == 200
    assert b"Optimiser" in answer.content


@pytest.mark.parametrize("quantity", ["std", "width"])
def test_maps_are_pngs(client, quantity):
    for boundary in range(4):
        answer = client.get(
            "/projects/1/compare/map.png",
            params={"boundary": boundary, "quantity": quantity, "layout": "Lean: CPTu only"},
        )
        assert answer.status_code == 200
        assert answer.content.startswith(PNG)


def test_map_of_a_missing_boundary_is_refused(client):
    answer = client.get("/projects/1/compare/map.png", params={"boundary": 9})
    assert answer.status_code == 400
    assert "boundary" in answer.text


def test_section_fragment_and_image(client):
    params = {
        "layout": "Lean: CPTu only",
        "x1": "451200",
        "y1": "283440",
        "x2": "451740",
        "y2": "283560",
    }
    answer = client.get("/projects/1/compare/section", params=params, headers=htmx())
    assert answer.status_code == 200
    [src] = [s for s in attribute_values(answer.text, "src") if "section.png" in s]
    image = client.get(html.unescape(src))
    assert image.status_code == 200 and image.content.startswith(PNG)


def test_default_section_image(client):
    answer = client.get("/projects/1/compare/section.png")
    assert answer.status_code == 200 and answer.content.startswith(PNG)


@pytest.mark.parametrize(
    ("params", "words"),
    [
        ({"x1": "1", "y1": "2", "x2": "1", "y2": "2"}, "at least 1 m apart"),
        ({"x1": "a", "y1": "2", "x2": "3", "y2": "4"}, "not a number"),
        ({"x1": "1", "y1": "", "x2": "3", "y2": "4"}, "is required"),
    ],
)
def test_bad_section_is_refused_with_a_message(client, params, words):
    answer = client.get("/projects/1/compare/section", params=params, headers=htmx())
    assert answer.status_code == 400
    assert words in answer.text
    image = client.get("/projects/1/compare/section.png", params=params)
    assert image.status_code == 400


def test_comparison_numbers_follow_a_thickness_change(client, demo_model):
    pid = import_model(client, demo_model)
    before = results(client, pid, layout="Lean: CPTu only")
    project = stored(client, pid)
    model = copy.deepcopy(project["model"])
    unit = model["units"][1]
    unit["thickness_m"] = {"min": 0.5, "likely": 6.0, "max": 14.0, "shape": "pert"}
    answer = client.put(
        f"/api/projects/{pid}", json={"model": model, "expected_revision": project["revision"]}
    )
    assert answer.status_code == 200, answer.text
    after = results(client, pid, layout="Lean: CPTu only")
    gains = lambda text: re.findall(r'<td class="num gain">([^<]+)</td>', text)  # noqa: E731
    assert gains(before) != gains(after)


def test_empty_states_without_layouts(client, tiny_model):
    pid = import_model(client, dict(tiny_model, layouts=[]))
    page = client.get(f"/projects/{pid}/compare")
    assert page.status_code == 200 and "No options to compare yet" in page.text
    assert "No options to compare yet" in results(client, pid)
    assert client.get(f"/projects/{pid}/compare/chart.svg").status_code == 200
    assert client.get(f"/projects/{pid}/compare/map.png", params={"boundary": 0}).status_code == 400
