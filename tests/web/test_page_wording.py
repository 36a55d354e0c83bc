"""Details a user reads on the pages: the guidance spacings as the code of practice words
them, and the section line handed to the map script intact."""

from __future__ import annotations

import json
import re

from decision_helpers import attribute_values
from web_helpers import htmx


def test_guidance_panel_keeps_not_more_than_for_the_large_area_spacing(client):
    # EN 1997-2:2007 Annex B.3 (from memory): large-area structures, spacing not more than 60 m
    page = client.get("/projects/1/options")
    assert page.status_code == 200
    text = re.sub(r"\s+", " ", page.text)
    assert "Large-area structures (grid): not more than 60 m" in text
    assert "15&ndash;40 m" in text or "15\u201340 m" in text


def test_section_line_reaches_the_map_script_whole(client):
    params = {"x1": "451150.5", "y1": "283400", "x2": "451600", "y2": "283460.25"}
    answer = client.get("/projects/1/compare/section", params=params, headers=htmx())
    assert answer.status_code == 200, answer.text
    [raw] = attribute_values(answer.text, "data-section")
    line = json.loads(raw)  # the whole object, not cut at its first quote
    assert line == {"x1": "451150.50", "y1": "283400.00", "x2": "451600.00", "y2": "283460.25"}
