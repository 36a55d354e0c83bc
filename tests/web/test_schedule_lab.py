"""The laboratory testing schedule on the Schedule page and as CSV (demo project)."""

from __future__ import annotations

import csv
import math

from csv_helpers import caution_line, data_lines

MIXED = "Mixed: boreholes + CPTu along the culvert and approach"


def test_lab_schedule_on_the_page(client):
    text = client.get("/projects/1/schedule", params={"layout": MIXED}).text
    assert "Laboratory testing schedule" in text
    assert "UU triaxial (su)" in text
    assert "short by" in text  # two boreholes cannot give the nine su results the demo asks


def test_lab_schedule_csv_has_caution_holes_and_depths_inside_the_band(client, demo_model):
    answer = client.get("/projects/1/schedule-lab.csv", params={"layout": MIXED})
    assert answer.status_code == 200
    assert "lab-schedule.csv" in answer.headers["content-disposition"]
    caution_line(answer.text)
    rows = list(csv.DictReader(data_lines(answer.text)))
    layout = next(lay for lay in demo_model["layouts"] if lay["name"] == MIXED)
    holes = {p["id"] for p in layout["probes"] if p["method"] == "CP"}
    filled = [r for r in rows if r["probe"]]
    assert filled and {r["probe"] for r in filled} <= holes  # samples come from boreholes
    for r in filled:
        depths = [float(d) for d in r["target_depths_m"].split("; ")]
        assert len(depths) == int(r["samples"])
        top, base = float(r["band_top_m"]), float(r["band_base_m"])
        assert all(top - 0.01 <= d <= base + 0.01 for d in depths)
        assert depths == sorted(depths) and not any(math.isnan(d) for d in depths)
    su = [r for r in rows if r["parameter"] == "su"]
    # the requirement: 9 results (EN 1990 Annex D with V = 0.3 unknown, 60% below the mean)
    scheduled = sum(int(r["samples"]) for r in su if r["probe"])
    short = next(r for r in su if not r["probe"])
    assert scheduled + int(short["band"].split("short by ")[1].split(":")[0]) == 9
