"""The ranking's sensitivity as lazy fragments of Compare and Schedule (app/sensitivity.py)."""

from __future__ import annotations

import html

from probewise.app.sensitivity import ranking_sensitivity
from probewise.app.to_core import to_core


def test_compare_and_schedule_load_the_sensitivity_lazily(client, tiny_id):
    results = client.get(f"/projects/{tiny_id}/compare/results").text
    assert f'hx-get="/projects/{tiny_id}/compare/sensitivity" hx-trigger="load"' in results
    schedule = client.get(f"/projects/{tiny_id}/schedule").text
    assert f'hx-get="/projects/{tiny_id}/schedule/sensitivity" hx-trigger="load"' in schedule


def test_the_fragment_shows_the_best_option_of_every_case(client, tiny_id, tiny_model):
    fragment = client.get(f"/projects/{tiny_id}/compare/sensitivity")
    assert fragment.status_code == 200
    text = html.unescape(fragment.text)
    assert text.lstrip().startswith('<section id="compare-sensitivity"')
    kinds = {lay["name"]: "hand" for lay in tiny_model["layouts"]}
    sens = ranking_sensitivity(to_core(tiny_model), kinds)
    for s in sens.scenarios:
        assert f'data-scenario="{s.key}"' in text
        row = text[text.index(f'data-scenario="{s.key}"') :]
        assert f'<td class="best">{s.best}</td>' in row[: row.index("</tr>")]
    assert "Add the model fitted to the readings" in text  # the tiny model has probes
    fitted = client.get(f"/projects/{tiny_id}/schedule/sensitivity", params={"fit": "1"})
    assert fitted.status_code == 200
    assert 'data-scenario="fitted"' in fitted.text and 'id="schedule-sensitivity"' in fitted.text
