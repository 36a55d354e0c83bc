"""Compare page: the fast shell, the comparison fragment (ranking numbers agree with the core),
the chart, the uncertainty maps and the section along a line."""

from __future__ import annotations

import copy
import html
import re

import numpy as np
import pytest
from caution_check import assert_caution
from decision_helpers import attribute_values, import_model, stored
from web_helpers import decoded_png, htmx

from probewise.app.layouts import layout_kind
from probewise.app.to_core import to_core
from probewise.core.evaluate import evaluate_project
from probewise.core.options import rank_options
from probewise.web.templating import format_money_whole, format_number


def results(client, pid: int, **params) -> str:
    answer = client.get(f"/projects/{pid}/compare/results", params=params, headers=htmx())
    assert answer.status_code == 200, answer.text
    return answer.text


def test_shell_answers_without_the_heavy_part(client):
    page = client.get("/projects/1/compare")
    assert page.status_code == 200
    assert_caution(page.text)
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
        # the page drops trailing zeros (1.30 shows as 1.3)
        assert f'<td class="num gain">{format_number(option.information_gain_bits)}<' in row
        assert f'<td class="num">{format_number(option.rig_days, 1)}</td>' in row
        assert ("pareto-yes" in row) == option.pareto


def test_ranking_shows_saving_and_net_value_of_the_design_elements(client, demo_model):
    """The demo has design elements: options come by net value with the core's figures."""
    assert demo_model["elements"]
    text = results(client, 1)
    assert "Options ranked by net value" in text
    project = to_core(demo_model)
    kinds = {lay["name"]: layout_kind(lay) for lay in demo_model["layouts"]}
    ranked = rank_options(project, project.layouts, kinds)
    rows = re.findall(r'<tr class="[^"]*" data-option="([^"]+)">(.*?)</tr>', text, re.S)
    for (_, row), option in zip(rows, ranked, strict=True):
        saving = format_money_whole(option.expected_saving)
        assert f'<td class="num saving">{saving}</td>' in row
        assert f'<td class="num net-value">{format_money_whole(option.net_value)}</td>' in row
        [(name, chance)] = option.p_cheaper_allowed  # the culvert bed is the demo's choice
        assert f"{html.escape(name)}: {100 * chance:.0f}%" in row


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
def test_maps_are_pngs(client, demo_model, quantity):
    lean, other = "Lean: CPTu only", demo_model["layouts"][0]["name"]
    assert other != lean
    for boundary in range(4):
        pixels = {}
        for layout in (lean, other):
            answer = client.get(
                "/projects/1/compare/map.png",
                params={"boundary": boundary, "quantity": quantity, "layout": layout},
            )
            assert answer.status_code == 200
            pixels[layout] = decoded_png(answer.content)
        # left panel: existing information only, the same whatever the layout; right panel:
        # with the layout, its colour field differs between layouts over far more than the
        # title and probe symbols, which differ over about 2% of the half (measured)
        a, b = pixels[lean], pixels[other]
        assert a.shape == b.shape
        half = a.shape[1] // 2
        np.testing.assert_array_equal(a[:, :half], b[:, :half])
        changed = np.any(np.abs(a[:, half:] - b[:, half:]) > 0.02, axis=-1).mean()
        assert changed > 0.05, (boundary, changed)


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
    assert image.status_code == 200
    decoded_png(image.content)


def test_default_section_image(client):
    answer = client.get("/projects/1/compare/section.png")
    assert answer.status_code == 200
    decoded_png(answer.content)


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


def test_with_design_elements_the_option_shown_first_has_the_highest_net_value(
    client, demo_model, tiny_model
):
    """Money leads: the demo (with elements) shows its highest net value first; the tiny
    model (no elements) the Pareto-efficient option with the most bits per unit cost."""
    for pid, model in ((1, demo_model), (None, tiny_model)):
        if pid is None:
            pid = import_model(client, model)
        project = to_core(model)
        kinds = {lay["name"]: layout_kind(lay) for lay in model["layouts"]}
        ranked = rank_options(project, project.layouts, kinds)
        if model.get("elements"):
            # worked from the table's own columns: net value = expected saving - cost
            best = max(ranked, key=lambda o: o.expected_saving - o.cost).name
        else:
            best = max((o for o in ranked if o.pareto), key=lambda o: o.gain_per_cost).name
        rows = re.findall(r'data-option="([^"]+)">(.*?)</tr>', results(client, pid), re.S)
        chosen = [html.unescape(name) for name, row in rows if "shown below" in row]
        assert chosen == [best]
    page = client.get("/projects/1/compare").text
    assert "Best value: the option of highest net value" in page
