"""AGS3 files in (server/io/probes_ags3.py, server/io/probes_ags.py) and ground levels.

The AGS3 text is written here by hand in the layout of the AGS3 format (Association of
Geotechnical and Geoenvironmental Specialists, "Electronic transfer of geotechnical and
geoenvironmental data", edition 3.1, 2004): "**GROUP" names, "*HEADING" rows (a long heading
row going on on the next line), a "<UNITS>" row, quoted data rows and "<CONT>" rows that carry
on the fields of the row above. Site, holes and layers are invented.
"""

from __future__ import annotations

import json

import pytest
from io_builders import ags4_text

from probewise.cli import main
from probewise.errors import InputError
from probewise.io.model_file import load_model_file, validate_model
from probewise.io.probes_ags3 import group_records, looks_like_ags3, parse_ags3
from probewise.io.probes_in import (
    ags4_legends,
    ags4_to_existing,
    merge_existing,
    read_ags,
    read_ags3,
)

AGS3 = "\r\n".join(
    [
        '"**PROJ"',
        '"*PROJ_ID","*PROJ_NAME"',
        '"<UNITS>",""',
        '"PW3","Invented reclaimed plot, for tests (invented)"',
        "",
        '"**HOLE"',
        '"*HOLE_ID","*HOLE_TYPE","*HOLE_NATE","*HOLE_NATN",',
        '"*HOLE_GL","*HOLE_FDEP","*?HOLE_REMARK"',
        '"<UNITS>","","m","m","m","m",""',
        '"BH1","CP","30.00","30.00","4.50","12.00",""',
        '"BH2","CP","80.00","40.00","4.20","9.00","said ""dry"", then wet"',
        '"CPT3","SCPT","120.00","60.00","","7.50",""',
        "",
        '"**GEOL"',
        '"*HOLE_ID","*GEOL_TOP","*GEOL_BASE","*GEOL_DESC","*GEOL_LEG","*GEOL_GEOL"',
        '"<UNITS>","m","m","","",""',
        '"BH1","0.00","1.10","Loose brown SAND, gravelly (FILL)","101","FILL"',
        '"BH1","1.10","4.00","Very soft grey silty CLAY with","201","ALL"',
        '"<CONT>","",""," shell fragments (ALLUVIUM)","",""',
        '"BH1","4.00","6.20","Dense GRAVEL (RIVER TERRACE)","401","GRAV"',
        '"BH1","6.20","12.00","Weak MUDSTONE","801","MDST"',
        '"BH2","0.00","2.00","Soft CLAY (ALLUVIUM)","201","ALL"',
        '"BH2","2.00","9.00","Weak MUDSTONE","801","MDST"',
        '"CPT3","0.00","0.90","Inferred FILL","101","FILL"',
        '"CPT3","0.90","7.50","Inferred soft CLAY","201","ALL"',
    ]
)
MAPPING = {
    "FILL": "Made ground",
    "ALL": "Alluvial clay",
    "GRAV": "River gravel",
    "MDST": "Mudstone",
}


def test_ags3_groups_headings_units_and_continuations():
    assert looks_like_ags3(AGS3) and not looks_like_ags3(ags4_text())
    groups = parse_ags3(AGS3, "gi.ags")
    assert set(groups) == {"PROJ", "HOLE", "GEOL"}
    hole = groups["HOLE"]
    # the heading row went on on the next line; the user-defined heading lost its "?"
    assert hole.headings == [
        "HOLE_ID",
        "HOLE_TYPE",
        "HOLE_NATE",
        "HOLE_NATN",
        "HOLE_GL",
        "HOLE_FDEP",
        "HOLE_REMARK",
    ]
    records = dict(group_records(hole))
    # quoted commas and doubled quotes (RFC 4180 quoting) survive; the units row is no data
    assert records["HOLE row 2 (line 11)"]["HOLE_REMARK"] == 'said "dry", then wet'
    assert len(records) == 3
    geol = dict(group_records(groups["GEOL"]))
    assert len(geol) == 8  # the <CONT> row is no row of its own
    assert geol["GEOL row 2 (line 18)"]["GEOL_DESC"] == (
        "Very soft grey silty CLAY with shell fragments (ALLUVIUM)"
    )


def test_ags3_holes_import_with_ground_level(tiny_model):
    holes = read_ags(AGS3.encode("utf-8"), filename="gi.ags")
    assert holes.format == "AGS3"
    assert {h.id: h.ground_level_m for h in holes.holes} == {"BH1": 4.5, "BH2": 4.2, "CPT3": None}
    assert [c for c, _d, _n in ags4_legends(holes)] == ["FILL", "ALL", "GRAV", "MDST"]
    result = ags4_to_existing(holes, tiny_model, MAPPING, {"CP": "BH"}, default_method="CPT")
    assert result.problems == [] and result.outside_site == []
    by_id = {p["id"]: p for p in result.probes}
    assert by_id["BH1"]["observed"] == {
        "Made ground": 1.1,
        "Alluvial clay": 4.0,
        "River gravel": 6.2,
    }
    # BH2: no fill (ground level) and no gravel (the base of the clay)
    assert by_id["BH2"]["observed"] == {
        "Made ground": 0.0,
        "Alluvial clay": 2.0,
        "River gravel": 2.0,
    }
    assert by_id["CPT3"]["observed"] == {"Made ground": 0.9}
    assert by_id["BH1"]["ground_level_m"] == 4.5 and "ground_level_m" not in by_id["CPT3"]
    assert by_id["CPT3"]["method"] == "CPT" and by_id["BH1"]["method"] == "BH"
    merged = merge_existing(tiny_model, result.probes)
    assert validate_model(merged)["existing"][-3]["ground_level_m"] == 4.5


def test_ags4_ground_level_read_from_loca_gl(tiny_model):
    holes = read_ags(ags4_text().encode(), filename="gi.ags")
    assert holes.format == "AGS4"
    assert {h.ground_level_m for h in holes.holes} == {5.0}  # the builder writes LOCA_GL 5.00


def test_ags3_location_outside_site_is_listed(tiny_model):
    text = AGS3.replace('"BH2","CP","80.00"', '"BH2","CP","980.00"')
    result = ags4_to_existing(
        read_ags3(text.encode(), filename="gi.ags"), tiny_model, MAPPING, default_method="BH"
    )
    assert result.outside_site == ["BH2"]
    assert [p["id"] for p in result.importable] == ["BH1", "CPT3"]


@pytest.mark.parametrize(
    ("edit", "field", "words"),
    [
        (
            ('"BH1","CP","30.00"', '"BH1","CP","about 30"'),
            "gi.ags HOLE row 1 (line 10), HOLE_NATE",
            "not a number",
        ),
        (
            ('"BH2","0.00","2.00"', '"BH2","0.00","2.00","x","y","z","extra"'),
            "gi.ags line 22",
            "has 10 fields; group GEOL has 6 headings",
        ),
        (('"**HOLE"', '"**LOCATIONS"'), "gi.ags", "has no HOLE group"),
        (
            ('"*HOLE_ID","*HOLE_TYPE","*HOLE_NATE"', '"*HOLE_ID","*HOLE_TYPE","*HOLE_EAST"'),
            "gi.ags HOLE",
            "missing heading(s) HOLE_NATE",
        ),
        (
            ('"BH1","1.10","4.00"', '"BH1","1.10",""'),
            "gi.ags GEOL row 2 (line 18), GEOL_BASE",
            "empty",
        ),
        (('"**PROJ"', '"PW3","stray"\r\n"**PROJ"'), "gi.ags line 1", "before any group name"),
    ],
)
def test_ags3_bad_input_names_the_place(edit, field, words):
    text = AGS3.replace(*edit)
    with pytest.raises(InputError) as err:
        read_ags3(text.encode(), filename="gi.ags")
    assert err.value.field == field
    assert words in err.value.problem


def test_cli_imports_an_ags3_file(tiny_model, tmp_path, capsys):
    model = tmp_path / "model.json"
    model.write_text(json.dumps(tiny_model))
    data = tmp_path / "gi.ags"
    data.write_bytes(AGS3.encode())
    out = tmp_path / "out.json"
    pairs = [a for code, unit in MAPPING.items() for a in ("--mapping", f"{code}={unit}")]
    args = ["import-probes", str(model), str(data), *pairs, "--default-method", "BH"]
    assert main([*args, "-o", str(out)]) == 0
    written = load_model_file(out)
    assert {p["id"]: p.get("ground_level_m") for p in written["existing"][2:]} == {
        "BH1": 4.5,
        "BH2": 4.2,
        "CPT3": None,
    }
    assert "imported 3 probe(s)" in capsys.readouterr().out
    # read as AGS4 on request, an AGS3 file is refused with the reason
    assert main([*args, "--format", "ags4", "-o", str(tmp_path / "no.json")]) == 2
    assert "looks like AGS3" in capsys.readouterr().err
    assert not (tmp_path / "no.json").exists()
    ags4 = tmp_path / "four.ags"
    ags4.write_text(ags4_text(), newline="")
    assert main(["import-probes", str(model), str(ags4), "--format", "ags3", "--preview"]) == 2
    assert "is an AGS4 file" in capsys.readouterr().err


def test_a_group_written_twice_gathers_both_blocks():
    text = (
        AGS3
        + "\r\n\r\n"
        + "\r\n".join(
            [
                '"**GEOL"',
                '"*HOLE_ID","*GEOL_TOP","*GEOL_DESC","*GEOL_BASE"',
                '"<UNITS>","m","","m"',
                '"BH9","0.00","Stray layer written in a second block","1.00"',
            ]
        )
    )
    geol = parse_ags3(text, "gi.ags")["GEOL"]
    records = group_records(geol)
    assert len(records) == 9
    where, last = records[-1]
    # the second block's own heading order is used for its rows
    assert where == "GEOL row 9 (line 30)" and last["GEOL_BASE"] == "1.00"
    assert last["GEOL_DESC"] == "Stray layer written in a second block"
    with pytest.raises(InputError) as err:
        first_row = '"BH1","0.00","1.10","Loose brown SAND, gravelly (FILL)","101","FILL"'
        parse_ags3(AGS3.replace(first_row, first_row + '\r\n"*GEOL_REM"'), "gi.ags")
    assert err.value.field == "gi.ags line 18" and "headings after the data" in err.value.problem
