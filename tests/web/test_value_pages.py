"""The value of an investigation on the Compare and Schedule pages (docs/model.md "The value of
an investigation"): the saving and net value chart with the optimum marked, the chance each
choice element's cheaper design holds per option, the design level maps, and a schedule whose
justification quotes its design value table. Without design elements both pages keep their
information-only form."""

from __future__ import annotations

import html
import re

import pytest
from decision_helpers import import_model
from web_helpers import decoded_png

from probewise.app.to_core import to_core
from probewise.app.value import project_values


def text_of(fragment: str) -> str:
    return " ".join(html.unescape(re.sub(r"<[^>]+>", " ", fragment)).split())


def attribute(page: str, name: str) -> list[str]:
    return [html.unescape(v) for v in re.findall(rf'\b{name}="([^"]*)"', page)]


@pytest.fixture(scope="module")
def demo_values(demo_model_module):
    """The demo's layouts valued through ``probewise value``'s path (not the ranking's)."""
    report = project_values(to_core(demo_model_module))
    return {v.name: v for v in report.layouts}


@pytest.fixture(scope="module")
def demo_model_module():
    import json
    from pathlib import Path

    path = Path(__file__).resolve().parents[2] / "seed_data" / "demo-project.json"
    return json.loads(path.read_text())


def test_compare_leads_with_money_and_marks_the_highest_net_value(client, demo_values):
    page = client.get("/projects/1/compare/results").text
    assert 'id="compare-value"' in page
    # the optimum, computed here from the ranking's rows: net value = expected saving - cost
    nets = {}
    for name, row in re.findall(r'<tr [^>]*data-option="([^"]*)">(.*?)</tr>', page, re.S):
        cost = _cells(row, "cost")[0]
        saving = _cells(row, "saving")[0]
        nets[html.unescape(name)] = float(saving.replace(",", "")) - float(cost.replace(",", ""))
    assert set(nets) == set(demo_values)
    best = max(nets, key=nets.get)
    assert best == max(demo_values, key=lambda n: demo_values[n].net_value)
    assert attribute(page, "data-optimum") == [best]
    chart = next(src for src in attribute(page, "src") if "/value/chart.png" in src)
    answer = client.get(chart)
    assert answer.status_code == 200 and answer.headers["content-type"] == "image/png"
    decoded_png(answer.content)


def test_compare_shows_the_chance_of_each_cheaper_design_per_option(client, demo_values):
    page = client.get("/projects/1/compare/results").text
    table = re.search(r'<table class="data value-choices".*?</table>', page, re.S).group(0)
    for name, value in demo_values.items():
        row = re.search(
            rf"<th scope=\"row\">{re.escape(html.escape(name))}</th>(.*?)</tr>", table, re.S
        )
        assert row, name
        shown = [int(p) for p in re.findall(r"(\d+)%", row.group(1))]
        expected = [round(100 * e.p_cheaper_allowed) for e in value.elements if e.kind == "choice"]
        assert shown == expected, name


def test_compare_maps_the_design_level_of_every_element(client, demo_model_module):
    page = client.get("/projects/1/compare/results").text
    maps = [src for src in attribute(page, "src") if "/value/design.png" in src]
    assert len(maps) == len(demo_model_module["elements"])
    for src in maps:
        answer = client.get(src)
        assert answer.status_code == 200, src
        decoded_png(answer.content)
    assert 400 <= client.get(maps[0].replace("element=0", "element=9")).status_code < 500


def test_bits_are_said_in_plain_words(client):
    page = client.get("/projects/1/compare/results").text
    assert "1 bit = the uncertainty (standard deviation) of a boundary of interest halved" in page


def _cells(page: str, cls: str) -> list[str]:
    return [text_of(v) for v in re.findall(rf'<td class="num {cls}">(.*?)</td>', page, re.S)]


def test_schedule_justification_quotes_its_design_value_table(client, demo_values):
    page = client.get("/projects/1/schedule").text
    letter = text_of(re.search(r'id="justification">(.*?)</p>', page, re.S).group(1))
    table = re.search(r'<table class="data value-table" id="value-table">.*?</table>', page, re.S)
    assert table, "the design value table"
    table = table.group(0)
    names = [
        text_of(n)
        for n in re.findall(r'<tr data-element="[^"]*">\s*<th scope="row">(.*?)</th>', table, re.S)
    ]
    assert names
    sentences = re.split(r"(?<=\.) (?=[A-Z])", letter)
    columns = (
        "v-width",
        "v-level-now",
        "v-level-after",
        "v-cost-now",
        "v-cost-expected",
        "v-saving",
    )
    values = {c: _cells(table, c) for c in columns}
    for i, name in enumerate(names):
        about = " ".join(s for s in sentences if name in s)
        for column in columns:
            assert values[column][i].split()[0] in about, (name, column, values[column][i])
        threshold = _cells(table, "v-threshold")[i]
        if threshold != "\u2014":  # a choice element: its threshold and its chance
            assert threshold in about, (name, threshold)
            chance = re.findall(r'<td class="v-chance">(.*?)</td>', table, re.S)[i]
            for percent in re.findall(r"\d+%", chance):
                assert f"{percent} chance" in about, (name, percent)
    for cls in ("v-total-now", "v-total-expected", "v-total-saving", "v-gi-cost", "v-net-value"):
        (figure,) = _cells(table, cls)
        assert figure in letter, (cls, figure)
    # the figures are the option's own: net value = saving less the GI cost (probewise value)
    chosen = html.unescape(re.search(r'<dd class="doc-option">(.*?)</dd>', page).group(1))
    value = demo_values[chosen]
    (net,) = _cells(table, "v-net-value")
    assert float(net.replace(",", "")) == pytest.approx(value.net_value, abs=10)
    (saving,) = _cells(table, "v-total-saving")
    assert float(saving.replace(",", "")) == pytest.approx(value.expected_saving, abs=10)
    # money leads: the letter opens with the design, bits come after
    assert letter.index("net value") < letter.index("bits")


def test_schedule_carries_the_value_chart(client):
    page = client.get("/projects/1/schedule").text
    chart = next(src for src in attribute(page, "src") if "/value/chart.png" in src)
    decoded_png(client.get(chart).content)


def test_without_elements_the_pages_keep_their_information_form(client, tiny_model):
    pid = import_model(client, tiny_model)
    compare = client.get(f"/projects/{pid}/compare/results").text
    assert 'id="compare-value"' not in compare
    schedule = client.get(f"/projects/{pid}/schedule").text
    assert 'id="value-table"' not in schedule
    letter = text_of(re.search(r'id="justification">(.*?)</p>', schedule, re.S).group(1))
    assert "net value" not in letter and "bits" in letter
    assert "1 bit = " in schedule  # the bits still say what they mean
    assert 400 <= client.get(f"/projects/{pid}/value/chart.png").status_code < 500
