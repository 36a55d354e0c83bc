"""Readings page: every existing reading of the demo with its prediction, flags, a verdict
per boundary and the caution; the same numbers as ``probewise readings``."""

from __future__ import annotations

import html

from probewise.app.readings import project_readings
from probewise.app.to_core import to_core
from probewise.web.templating import CAUTION

CAUTION_HTML = html.escape(CAUTION, quote=False)


def test_readings_page_of_the_demo(client, demo_model):
    page = client.get("/projects/1/readings")
    assert page.status_code == 200
    text = page.text
    assert CAUTION_HTML in text
    assert 'href="/projects/1/readings"' in text  # in the navigation
    report = project_readings(to_core(demo_model))
    for name, summary in report.summaries.items():
        assert html.escape(summary.verdict, quote=False) in text
        assert f'<th scope="row">{html.escape(name, quote=False)}</th>' in text
    n_readings = sum(len(p["observed"]) for p in demo_model["existing"])
    assert text.count("<tr") - text.count('<tr><th scope="col"') >= n_readings
    flagged = int(report.checks.flag.sum())
    assert text.count('class="is-flagged"') == flagged
    for z in report.checks.z:
        assert f"{z:.2f}" in text


def test_readings_page_by_stage_and_as_a_fragment(client):
    page = client.get("/projects/1/readings", params={"by_stage": "1"})
    assert page.status_code == 200
    assert "the earlier stages" in page.text
    fragment = client.get("/projects/1/readings", headers={"HX-Request": "true"})
    assert fragment.status_code == 200
    assert 'id="readings"' in fragment.text and "<html" not in fragment.text


def test_readings_page_of_an_unknown_project_is_not_found(client):
    assert client.get("/projects/999/readings").status_code == 404


def test_fit_panel_and_adopting_it_is_one_revision(client):
    from edit_helpers import post

    before = client.get("/api/projects/1").json()["revision"]
    panel = client.get("/projects/1/readings/fit", headers={"HX-Request": "true"})
    assert panel.status_code == 200
    assert 'id="readings-fit"' in panel.text and "Log-likelihood: conceptual" in panel.text
    answer = post(client, "/projects/1/readings/adopt", {"expected_revision": str(before)})
    assert answer.status_code == 200, answer.text
    assert "Adopted the fit to the readings" in answer.text
    project = client.get("/api/projects/1").json()
    assert project["revision"] == before + 1
    model = client.get("/projects/1/export").json()
    assert any("spread_multiplier" in u for u in model["units"][:-1])
    # a stale page is refused and nothing is stored
    stale = post(client, "/projects/1/readings/adopt", {"expected_revision": str(before)})
    assert stale.status_code == 409
    assert client.get("/api/projects/1").json()["revision"] == before + 1
