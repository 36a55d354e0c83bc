"""Absent units kept by every probe reader (server/io/probes_common.py and the readers).

The model file says equal depths record an absent unit: where a probe passed a unit's position
without meeting it (it met a deeper unit), the unit's thickness there is a reading of 0 m, not
a gap. Each test writes its own file; the expected depths are worked out by hand from the
layers written in the test.
"""

from __future__ import annotations

import io

import pytest
from io_builders import ags4_text

from probewise.io.model_file import validate_model
from probewise.io.probes_in import (
    ags4_to_existing,
    merge_existing,
    parse_csv,
    preview_csv,
    read_ags4,
)

# tiny model units, top down: Made ground, Alluvial clay, River gravel, Mudstone (basal)


def csv_bytes(text: str) -> bytes:
    return text.strip().replace("\n", "\r\n").encode("utf-8")


WIDE_ABSENT = """
id,method,x,y,final_depth_m,base:Made ground,base:Alluvial clay,base:River gravel
BH1,BH,20,20,10,1.2,,6.8
BH2,BH,40,20,10,,3.0,5.0
BH3,BH,60,20,10,1.5,1.5,4.0
BH4,BH,80,20,10,1.0,,
"""


def test_wide_empty_cell_above_a_given_base_is_an_absent_unit(tiny_model):
    preview = preview_csv(csv_bytes(WIDE_ABSENT), tiny_model)
    assert preview.problems == []
    by_id = {p["id"]: p["observed"] for p in preview.probes}
    # BH1 met no clay: its base is the base of Made ground (equal depths)
    assert by_id["BH1"] == {"Made ground": 1.2, "Alluvial clay": 1.2, "River gravel": 6.8}
    # BH2 met no made ground: its base is ground level
    assert by_id["BH2"] == {"Made ground": 0.0, "Alluvial clay": 3.0, "River gravel": 5.0}
    # equal depths written in the file are accepted
    assert by_id["BH3"] == {"Made ground": 1.5, "Alluvial clay": 1.5, "River gravel": 4.0}
    # nothing deeper was given: the empty cells say nothing (not found, not absent)
    assert by_id["BH4"] == {"Made ground": 1.0}
    assert "BH1: no Alluvial clay met: absent, its base recorded at 1.2 m" in " | ".join(
        preview.notes
    )
    validate_model(merge_existing(tiny_model, preview.probes))


def test_wide_rising_depths_still_refused(tiny_model):
    text = WIDE_ABSENT.strip() + "\nBH5,BH,90,20,10,2.0,1.9,4.0\n"
    preview = preview_csv(csv_bytes(text), tiny_model)
    assert len(preview.problems) == 1
    assert "row 6, column base:Alluvial clay" in preview.problems[0]
    assert "must not rise" in preview.problems[0]


def test_wide_without_the_column_above_infers_nothing(tiny_model):
    # no clay column: an empty gravel cell cannot be placed (the base above is unknown)
    text = "id,method,x,y,final_depth_m,base:Made ground,base:River gravel\nBH1,BH,20,20,10,,\n"
    probes = parse_csv(csv_bytes(text), tiny_model)
    assert probes[0]["observed"] == {}
    text = "id,method,x,y,final_depth_m,base:Made ground,base:River gravel\nBH1,BH,20,20,10,,5\n"
    assert parse_csv(csv_bytes(text), tiny_model)[0]["observed"] == {
        "Made ground": 0.0,
        "River gravel": 5.0,
    }


def test_xlsx_keeps_absent_units(tiny_model):
    openpyxl = pytest.importorskip("openpyxl")
    book = openpyxl.Workbook()
    sheet = book.active
    for line in WIDE_ABSENT.strip().splitlines():
        sheet.append(
            [float(v) if v.replace(".", "").isdigit() else (v or None) for v in line.split(",")]
        )
    buf = io.BytesIO()
    book.save(buf)
    probes = parse_csv(buf.getvalue(), tiny_model, filename="probes.xlsx")
    assert probes[0]["observed"]["Alluvial clay"] == 1.2
    assert probes[1]["observed"]["Made ground"] == 0.0


LONG_ABSENT = """
id,method,x,y,final_depth_m,unit,top_m,base_m
BH1,BH,20,20,9,Made ground,0,1.3
BH1,,,,,River gravel,1.3,6.0
BH1,,,,,Mudstone,6.0,9.0
BH2,BH,40,20,9,Alluvial clay,0,2.0
BH2,,,,,Mudstone,2.0,9.0
BH3,BH,60,20,5,Made ground,0,1.0
BH3,,,,,Alluvial clay,1.0,5.0
"""


def test_long_layout_records_absent_units(tiny_model):
    preview = preview_csv(csv_bytes(LONG_ABSENT), tiny_model)
    assert preview.problems == []
    by_id = {p["id"]: p["observed"] for p in preview.probes}
    assert by_id["BH1"] == {"Made ground": 1.3, "Alluvial clay": 1.3, "River gravel": 6.0}
    # no made ground (ground level) and no gravel (base of the clay) above the mudstone
    assert by_id["BH2"] == {"Made ground": 0.0, "Alluvial clay": 2.0, "River gravel": 2.0}
    # ended in the clay: nothing said about the gravel
    assert by_id["BH3"] == {"Made ground": 1.0}
    validate_model(merge_existing(tiny_model, preview.probes))


def test_ags4_records_absent_units(tiny_model):
    locations = [("BH1", "CP", 30.0, 30.0, 12.0), ("BH2", "CP", 60.0, 30.0, 8.0)]
    layers = {
        "BH1": [
            (0.0, 0.3, "TOPSOIL (invented)", "001", "TS"),
            (0.3, 1.1, "MADE GROUND (invented)", "101", "MG"),
            (1.1, 6.2, "Weak grey MUDSTONE (invented)", "801", "MDST"),
            (6.2, 12.0, "Weak grey MUDSTONE (invented)", "801", "MDST"),
        ],
        "BH2": [
            (0.0, 2.0, "Soft CLAY (invented)", "201", "ALV"),
            (2.0, 8.0, "Dense GRAVEL (invented)", "401", "RTD"),
        ],
    }
    holes = read_ags4(ags4_text(locations, layers).encode(), filename="absent.ags")
    mapping = {"TS": "-", "MG": "Made ground", "MDST": "Mudstone", "ALV": "Alluvial clay"}
    mapping["RTD"] = "River gravel"
    result = ags4_to_existing(holes, tiny_model, mapping, {"CP": "BH"})
    assert result.problems == []
    by_id = {p["id"]: p["observed"] for p in result.probes}
    assert by_id["BH1"] == {"Made ground": 1.1, "Alluvial clay": 1.1, "River gravel": 1.1}
    # BH2 ended in the gravel: made ground absent (at ground level), the clay's base read
    assert by_id["BH2"] == {"Made ground": 0.0, "Alluvial clay": 2.0}
    assert any("BH1: no River gravel met" in n for n in result.notes)


def test_a_stretch_with_no_layer_is_not_read_as_an_absent_unit(tiny_model):
    text = """
id,method,x,y,final_depth_m,unit,top_m,base_m
G1,BH,20,20,9,Alluvial clay,1.5,4.0
G1,,,,,Mudstone,4.0,9.0
G2,BH,40,20,9,Made ground,0,1.0
G2,,,,,Alluvial clay,1.0,3.0
G2,,,,,River gravel,3.5,5.0
G2,,,,,Mudstone,5.0,9.0
G3,BH,60,20,9,Made ground,0,1.0
G3,,,,,Mudstone,2.0,9.0
"""
    preview = preview_csv(csv_bytes(text), tiny_model)
    assert preview.problems == []
    by_id = {p["id"]: p["observed"] for p in preview.probes}
    # G1: nothing logged above 1.5 m, so made ground may be there: not recorded as absent;
    # the gravel, between the clay and the mudstone with no gap, is absent
    assert by_id["G1"] == {"Alluvial clay": 4.0, "River gravel": 4.0}
    # G2: a gap between the clay and the gravel does not matter: no unit is absent there
    assert by_id["G2"] == {"Made ground": 1.0, "Alluvial clay": 3.0, "River gravel": 5.0}
    # G3: 1-2 m not logged: neither the clay nor the gravel is recorded
    assert by_id["G3"] == {"Made ground": 1.0}
    notes = " | ".join(preview.notes)
    assert "G1: no layer logged from 0 to 1.5 m, so Made ground is not recorded as absent" in notes
    assert "G3: no layer logged from 1 to 2 m, so Alluvial clay is not recorded" in notes
