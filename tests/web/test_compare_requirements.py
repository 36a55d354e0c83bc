"""Compare says whether each option meets the requirements (demo: the CPTu-only option does
not: no cable percussive borehole of its own and no samples for the lab tests)."""

from __future__ import annotations

import re

from web_helpers import htmx


def test_compare_shows_which_options_meet_the_requirements(client):
    answer = client.get("/projects/1/compare/results", headers=htmx())
    assert answer.status_code == 200
    text = answer.text
    assert "Meets requirements" in text
    notes = re.search(r'<div class="requirement-notes".*?</div>', text, re.S).group(0)
    assert "Lean: CPTu only" in notes
    assert "at least 2 CP probes: the layout has 0" in notes
    # the 50 m borehole grid gives enough of everything
    assert "Guidance grid: boreholes at 50 m" not in notes
