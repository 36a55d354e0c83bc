"""The Behaviour check page, the test results on the Existing page and the schedule's
appendix, on the invented reclaimed strip demo."""

from __future__ import annotations

import json
from pathlib import Path

from caution_check import assert_caution
from edit_helpers import add_project, model_of, revision_of

DEMO = Path(__file__).resolve().parents[2] / "seed_data" / "demo-reclaimed-strip.json"
FILL = "Hydraulic fill and made ground"


def demo() -> dict:
    return json.loads(DEMO.read_text())


def test_page_shows_domains_table_figure_and_caution(empty_client):
    pid = add_project(empty_client, demo())
    page = empty_client.get(f"/projects/{pid}/behaviour")
    assert page.status_code == 200, page.text
    assert_caution(page.text)
    assert "Readings by domain: base of Hydraulic fill and made ground" in page.text
    assert "Mann-Whitney p band" in page.text and "Normalised cone resistance Qtn" in page.text
    assert "Where tests in the band would settle it" in page.text
    assert "BH-1974-02" in page.text  # thick band with no result in it
    assert f'href="/projects/{pid}/behaviour"' in page.text  # in the navigation bar
    figure = empty_client.get(f"/projects/{pid}/behaviour/strips.svg")
    assert figure.status_code == 200
    assert figure.headers["content-type"].startswith("image/svg+xml")
    assert b"n=" in figure.content


def test_page_without_history_says_what_is_missing(empty_client):
    model = demo()
    for key in ("history",):
        model.pop(key)
    pid = add_project(empty_client, model)
    page = empty_client.get(f"/projects/{pid}/behaviour")
    assert page.status_code == 200
    assert "No site history bounds a boundary" in page.text


def test_unknown_boundary_is_refused(empty_client):
    pid = add_project(empty_client, demo())
    answer = empty_client.get(f"/projects/{pid}/behaviour", params={"base_of": "Glacial till"})
    assert 400 <= answer.status_code < 500
    assert "base_of" in answer.text and "Glacial till" in answer.text


def test_existing_page_lists_tests_per_probe_with_a_profile(empty_client):
    pid = add_project(empty_client, demo())
    page = empty_client.get(f"/projects/{pid}/existing")
    assert f"/projects/{pid}/existing/tests" in page.text
    fragment = empty_client.get(f"/projects/{pid}/existing/tests")
    assert fragment.status_code == 200
    assert "CPT-2011-01" in fragment.text and "qc" in fragment.text
    profile = empty_client.get(f"/projects/{pid}/existing/tests/0.svg")
    assert profile.status_code == 200
    assert profile.headers["content-type"].startswith("image/svg+xml")


def _post_tests(client, pid: int, name: str, data: bytes, revision: int):
    return client.post(
        f"/projects/{pid}/existing/tests/import",
        data={"expected_revision": str(revision), "mode": "append"},
        files={"tests_file": (name, data, "text/csv")},
    )


def test_import_csv_stores_results(empty_client):
    pid = add_project(empty_client, demo())
    before = revision_of(empty_client, pid)
    body = b"probe,depth_m,parameter,value,unit\nCPT-2011-02,1.0,qc,2.5,MPa\n"
    answer = _post_tests(empty_client, pid, "more.csv", body, before)
    assert answer.status_code == 200, answer.text
    assert revision_of(empty_client, pid) == before + 1
    probe = next(p for p in model_of(empty_client, pid)["existing"] if p["id"] == "CPT-2011-02")
    assert probe["tests"][-1] == {"depth_m": 1.0, "parameter": "qc", "value": 2.5, "unit": "MPa"}


def test_bad_csv_names_the_line_and_stores_nothing(empty_client):
    pid = add_project(empty_client, demo())
    before = revision_of(empty_client, pid)
    cases = {
        b"probe,depth_m,parameter,value,unit\nCPT-2011-01,1,qc,2,MPa\nNOPE,1,qc,2,MPa\n": (
            "line 3, probe"
        ),
        b"probe,depth_m,parameter,value,unit\nCPT-2011-01,40,qc,2,MPa\n": "line 2, depth",
        b"probe,depth_m,parameter,value,unit\nCPT-2011-01,1,qz,2,MPa\n": "line 2, parameter",
        b"probe,depth_m,parameter,value,unit\nCPT-2011-01,1,qc,2,psi\n": "line 2, unit",
        b"probe,depth_m,parameter,value,unit\nCPT-2011-01,1,qc,soft,MPa\n": "line 2, value",
    }
    for body, where in cases.items():
        answer = _post_tests(empty_client, pid, "bad.csv", body, before)
        assert answer.status_code == 422, (where, answer.text)
        assert where in answer.text
    assert revision_of(empty_client, pid) == before


def test_schedule_carries_the_appendix(empty_client):
    model = demo()
    model["layouts"] = [
        {
            "name": "Two CPTs",
            "probes": [
                {"id": "C1", "method": "CPT", "x": 100.0, "y": 40.0},
                {"id": "C2", "method": "CPT", "x": 260.0, "y": 60.0},
            ],
        }
    ]
    pid = add_project(empty_client, model)
    page = empty_client.get(f"/projects/{pid}/schedule")
    assert page.status_code == 200, page.text
    assert f"Appendix: behaviour of the potential band of the base of {FILL}" in page.text
    assert_caution(page.text)


def test_ags4_group_without_its_headings_is_refused_on_the_page(empty_client):
    from io_builders import ags4_group

    pid = add_project(empty_client, demo())
    before = revision_of(empty_client, pid)
    text = ags4_group(
        "SCPT",
        ["LOCA_ID", "SCPT_DPTH", "SCPT_FRES"],
        ["", "m", "MPa"],
        ["ID", "2DP", "3DP"],
        [["CPT-2011-01", "1.00", "0.030"]],
    )
    answer = _post_tests(empty_client, pid, "gi.ags", text.encode(), before)
    assert answer.status_code == 422
    assert "gi.ags SCPT: missing heading(s) SCPT_RES" in answer.text
    assert revision_of(empty_client, pid) == before
