"""Existing probes in from CSV/XLSX tables and AGS4 files (server/io/probes_in.py).

Every file is built by the test. AGS4 text follows the published AGS4 layout (GROUP, HEADING,
UNIT, TYPE and DATA rows) and is read back with the python-ags4 library itself.
"""

from __future__ import annotations

import io
import json

import openpyxl
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from io_builders import (
    TINY_EXPECTED,
    TINY_LAYERS,
    TINY_LOCATIONS,
    TINY_MAPPING,
    ags4_group,
    ags4_text,
)

from probewise.errors import InputError
from probewise.io.model_file import validate_model
from probewise.io.probes_in import (
    ags4_legends,
    ags4_to_existing,
    merge_existing,
    parse_csv,
    preview_csv,
    read_ags4,
)

TYPES = {"CP": "BH", "TP": "BH"}  # CPT maps to the method of the same id


def csv_bytes(text: str) -> bytes:
    return text.strip().replace("\n", "\r\n").encode("utf-8")


# ------------------------------------------------------------------------------ wide tables

WIDE = """
id,method,x,y,final_depth_m,base:Made ground,Alluvial clay,base:River gravel,remarks
BH201,BH,20,20,10,1.2,4.5,6.8,logged by invented firm
CPT202,cpt,60,80,6,0.9,3.9,,
BH203,BH,150,30,3,0.7,,,
"""


def test_wide_csv_reads_documented_columns(tiny_model):
    preview = preview_csv(csv_bytes(WIDE), tiny_model, filename="probes.csv")
    assert preview.format == "wide"
    assert preview.columns["base:Made ground"] == "base of Made ground (m)"
    assert preview.columns["Alluvial clay"] == "base of Alluvial clay (m)"
    assert preview.columns["remarks"] == "ignored"
    assert preview.problems == [] and preview.outside_site == []
    probes = parse_csv(csv_bytes(WIDE), tiny_model)
    assert [p["id"] for p in probes] == ["BH201", "CPT202", "BH203"]
    assert probes[0]["observed"] == {"Made ground": 1.2, "Alluvial clay": 4.5, "River gravel": 6.8}
    assert probes[1]["method"] == "CPT"  # method ids match case-insensitively
    assert probes[1]["observed"] == {"Made ground": 0.9, "Alluvial clay": 3.9}
    assert probes[2]["observed"] == {"Made ground": 0.7}
    merged = merge_existing(tiny_model, probes)
    assert len(merged["existing"]) == len(tiny_model["existing"]) + 3
    validate_model(merged)
    assert tiny_model["existing"][0]["id"] == "HBH1"  # the input model is not changed
    assert len(tiny_model["existing"]) == 2


def test_text_in_a_numeric_cell_names_row_and_column(tiny_model):
    bad = WIDE.strip() + "\nBH204,BH,40,40,abc,1.0,,,\n"
    preview = preview_csv(csv_bytes(bad), tiny_model, filename="probes.csv")
    assert len(preview.probes) == 3
    assert preview.problems == ["probes.csv row 5, column final_depth_m: 'abc' is not a number"]
    with pytest.raises(InputError) as err:
        parse_csv(csv_bytes(bad), tiny_model, filename="probes.csv")
    assert err.value.field == "probes.csv row 5, column final_depth_m"
    assert "'abc' is not a number" in err.value.problem


@pytest.mark.parametrize(
    ("row", "field", "words"),
    [
        ("BH9,BH,40,40,5,2.0,1.5,,", "column Alluvial clay", "bases must not rise"),
        ("BH9,BH,40,40,5,1.0,6.0,,", "column Alluvial clay", "below the final depth"),
        ("BH9,XX,40,40,5,1.0,,,", "column method", "not a method of the model"),
        ("BH9,BH,40,40,-2,1.0,,,", "column final_depth_m", "not > 0"),
        (",BH,40,40,5,1.0,,,", "column id", "empty"),
        ("BH201,BH,40,40,5,1.0,,,", "column id", "repeats row 2"),
    ],
)
def test_rows_breaking_the_model_rules_are_problems(tiny_model, row, field, words):
    preview = preview_csv(csv_bytes(WIDE.strip() + "\n" + row), tiny_model)
    assert len(preview.problems) == 1
    assert f"row 5, {field}" in preview.problems[0]
    assert words in preview.problems[0]
    with pytest.raises(InputError):
        parse_csv(csv_bytes(WIDE.strip() + "\n" + row), tiny_model)


def test_file_level_faults_raise(tiny_model):
    with pytest.raises(InputError, match="missing column"):
        preview_csv(b"id,x,y\nA,1,2\n", tiny_model)
    with pytest.raises(InputError, match="'Peat' is not a unit"):
        preview_csv(b"id,method,x,y,final_depth_m,base:Peat\nA,BH,1,2,3,1\n", tiny_model)
    with pytest.raises(InputError, match="basal unit"):
        preview_csv(b"id,method,x,y,final_depth_m,base:Mudstone\nA,BH,1,2,3,1\n", tiny_model)
    with pytest.raises(InputError, match="is empty"):
        preview_csv(b"  \n", tiny_model)
    with pytest.raises(InputError, match="no probe rows"):
        parse_csv(b"id,method,x,y,final_depth_m\n", tiny_model)


def test_outside_site_listed_not_dropped(tiny_model):
    text = WIDE.strip() + "\nBH299,BH,500,500,5,1.0,,,\n"
    preview = preview_csv(csv_bytes(text), tiny_model)
    assert preview.outside_site == ["BH299"]
    assert [p["id"] for p in preview.importable] == ["BH201", "CPT202", "BH203"]
    with pytest.raises(InputError, match="outside the site: BH299"):
        parse_csv(csv_bytes(text), tiny_model)
    kept = parse_csv(csv_bytes(text), tiny_model, leave_outside=True)
    assert [p["id"] for p in kept] == ["BH201", "CPT202", "BH203"]


def test_default_method_precision_columns_and_semicolons(tiny_model):
    # Semicolon-separated with decimal commas, as some spreadsheet locales write CSV
    text = "id;x;y;final_depth_m;base:Made ground;precision:Made ground\nA1;10;10;4,5;1,25;0,05\n"
    probes = parse_csv(text.encode("cp1252"), tiny_model, method_default="DMT")
    assert probes == [
        {
            "id": "A1",
            "method": "DMT",
            "x": 10.0,
            "y": 10.0,
            "final_depth_m": 4.5,
            "observed": {"Made ground": 1.25},
            "precision_m": {"Made ground": 0.05},
        }
    ]
    validate_model(merge_existing(tiny_model, probes))
    with pytest.raises(InputError, match="default method"):
        parse_csv(text.encode(), tiny_model, method_default="NOPE")


def test_xlsx_sheet_reads_like_csv(tiny_model, tmp_path):
    book = openpyxl.Workbook()
    sheet = book.active
    for line in WIDE.strip().splitlines():
        sheet.append([_cell(v) for v in line.split(",")])
    buf = io.BytesIO()
    book.save(buf)
    probes = parse_csv(buf.getvalue(), tiny_model, filename="probes.xlsx")
    assert [p["id"] for p in probes] == ["BH201", "CPT202", "BH203"]
    assert probes[0]["observed"]["River gravel"] == 6.8


def _cell(text: str):
    try:
        return float(text)
    except ValueError:
        return text or None


# ------------------------------------------------------------------------------ long tables

LONG = """
id,method,x,y,final_depth_m,unit,top_m,base_m
BH301,BH,20,20,9,MG,0,0.5
BH301,,,,,MG,0.5,1.3
BH301,,,,,Alluvial clay,1.3,4.1
BH301,,,,,River gravel,4.1,6.0
BH301,,,,,Mudstone,6.0,9.0
CPT302,CPT,90,40,5,Made ground,0,1.0
CPT302,CPT,90,40,5,Alluvial clay,1.0,5.0
"""


def test_long_csv_merges_layers_and_maps_codes(tiny_model):
    preview = preview_csv(csv_bytes(LONG), tiny_model, mapping={"MG": "Made ground"})
    assert preview.format == "long"
    assert preview.problems == []
    by_id = {p["id"]: p for p in preview.probes}
    # two MG rows merge: the base of the deeper one is the base of Made ground
    assert by_id["BH301"]["observed"] == {
        "Made ground": 1.3,
        "Alluvial clay": 4.1,
        "River gravel": 6.0,
    }
    # CPT302 ended in the clay: its base is not an observation
    assert by_id["CPT302"]["observed"] == {"Made ground": 1.0}
    assert any("CPT302: ended in Alluvial clay" in n for n in preview.notes)


def test_long_csv_reports_order_and_conflicts(tiny_model):
    text = LONG.strip() + "\nCPT303,CPT,50,50,5,Alluvial clay,0,2\nCPT303,,,,,Made ground,2,3\n"
    text += "CPT304,CPT,60,60,5,Made ground,0,1\nCPT304,CPT,61,60,5,Alluvial clay,1,2\n"
    preview = preview_csv(csv_bytes(text), tiny_model, mapping={"MG": "Made ground"})
    ids = {p["id"] for p in preview.probes}
    assert ids == {"BH301", "CPT302"}
    joined = " | ".join(preview.problems)
    assert "against the unit order" in joined
    assert "row 12, column x: 61 differs from 60 on row 11" in joined and "differs" in joined


# ------------------------------------------------------------------------------ AGS4


def test_ags4_file_is_read_by_python_ags4(tmp_path):
    from python_ags4 import AGS4

    path = tmp_path / "tiny.ags"
    path.write_text(ags4_text(), newline="")
    tables, _headings = AGS4.AGS4_to_dataframe(str(path))
    assert {"PROJ", "TRAN", "ABBR", "UNIT", "TYPE", "LOCA", "GEOL"} <= set(tables)
    assert (tables["LOCA"]["HEADING"] == "DATA").sum() == 5
    # python-ags4's own checker finds no breach of the AGS4 format rules in the built file
    report = AGS4.check_file(str(path))
    assert not [k for k in report if k.startswith("AGS Format Rule")], report


def test_ags4_five_locations_import_with_mapped_depths(tiny_model):
    """Acceptance: an AGS4 file with 5 locations imports 5 probes with the mapped depths."""
    holes = read_ags4(ags4_text().encode(), filename="tiny.ags")
    assert len(holes.holes) == 5
    codes = [c for c, _d, _n in ags4_legends(holes)]
    assert set(codes) == {"MG", "TS", "ALV", "RTD", "MDST"}
    result = ags4_to_existing(holes, tiny_model, TINY_MAPPING, TYPES)
    assert result.problems == [] and result.outside_site == []
    assert len(result.probes) == 5
    for probe in result.probes:
        assert probe["observed"] == pytest.approx(TINY_EXPECTED[probe["id"]])
    methods = {p["id"]: p["method"] for p in result.probes}
    assert methods == {"BH101": "BH", "BH102": "BH", "CPT103": "CPT", "TP104": "BH", "BH105": "BH"}
    merged = merge_existing(tiny_model, result.probes)
    assert len(merged["existing"]) == 7
    validate_model(merged)


def test_ags4_legends_count_layers_and_describe():
    holes = read_ags4(ags4_text().encode())
    legends = {c: (d, n) for c, d, n in ags4_legends(holes)}
    n_alv = sum(1 for ls in TINY_LAYERS.values() for layer in ls if layer[4] == "ALV")
    assert legends["ALV"][1] == n_alv
    assert "CLAY" in legends["ALV"][0]


def test_ags4_unmapped_codes_and_unknown_units_refused(tiny_model):
    holes = read_ags4(ags4_text().encode())
    partial = {k: v for k, v in TINY_MAPPING.items() if k != "RTD"}
    with pytest.raises(InputError, match="no unit for geology code.*RTD"):
        ags4_to_existing(holes, tiny_model, partial, TYPES)
    with pytest.raises(InputError) as err:
        ags4_to_existing(holes, tiny_model, {**TINY_MAPPING, "RTD": "Gravel"}, TYPES)
    assert err.value.field == "mapping RTD"
    with pytest.raises(InputError, match="no method for location type.*CP"):
        ags4_to_existing(holes, tiny_model, TINY_MAPPING)
    default = ags4_to_existing(holes, tiny_model, TINY_MAPPING, default_method="DMT")
    assert {p["method"] for p in default.probes} == {"DMT", "CPT"}


def test_ags4_geol_legend_codes_when_no_geology_code(tiny_model):
    layers = {k: [(t, b, d, leg, "") for t, b, d, leg, _g in v] for k, v in TINY_LAYERS.items()}
    holes = read_ags4(ags4_text(TINY_LOCATIONS, layers).encode())
    codes = {c for c, _d, _n in ags4_legends(holes)}
    assert codes == {"001", "101", "201", "401", "801"}
    mapping = {"001": "-", "101": "Made ground", "201": "Alluvial clay", "401": "River gravel"}
    mapping["801"] = "Mudstone"
    result = ags4_to_existing(holes, tiny_model, mapping, TYPES)
    assert {p["id"]: p["observed"] for p in result.probes} == TINY_EXPECTED


def test_ags4_layers_against_unit_order_are_problems(tiny_model):
    layers = dict(TINY_LAYERS)
    layers["BH102"] = [
        (0.0, 0.8, "CLAY", "201", "ALV"),
        (0.8, 2.0, "MADE GROUND", "101", "MG"),
        (2.0, 5.0, "GRAVEL", "401", "RTD"),
    ]
    holes = read_ags4(ags4_text(TINY_LOCATIONS, layers).encode(), filename="x.ags")
    result = ags4_to_existing(holes, tiny_model, TINY_MAPPING, TYPES)
    assert [p["id"] for p in result.probes] == ["BH101", "CPT103", "TP104", "BH105"]
    assert len(result.problems) == 1
    assert "x.ags GEOL row" in result.problems[0] and "BH102 left out" in result.problems[0]


def test_ags4_location_outside_site_is_listed(tiny_model):
    locations = list(TINY_LOCATIONS)
    locations[1] = ("BH102", "CP", 900.0, 40.0, 5.0)
    holes = read_ags4(ags4_text(locations).encode())
    result = ags4_to_existing(holes, tiny_model, TINY_MAPPING, TYPES)
    assert result.outside_site == ["BH102"]
    assert len(result.probes) == 5 and len(result.importable) == 4
    validate_model(merge_existing(tiny_model, result.importable))
    with pytest.raises(InputError, match="outside the site"):
        merge_existing(tiny_model, result.probes)


@pytest.mark.parametrize(
    ("kwargs", "words"),
    [
        ({"with_loca": False}, "no LOCA group"),
        ({"with_geol": False}, "no GEOL group"),
    ],
)
def test_ags4_missing_groups_refused(kwargs, words):
    with pytest.raises(InputError, match=words):
        read_ags4(ags4_text(**kwargs).encode(), filename="site.ags")


def test_ags4_text_in_numeric_field_names_group_heading_row():
    text = ags4_text().replace('"BH102","CP","","170.00"', '"BH102","CP","","about 170"')
    with pytest.raises(InputError) as err:
        read_ags4(text.encode(), filename="site.ags")
    assert err.value.field.startswith("site.ags LOCA row 2 (line ")
    assert err.value.field.endswith(", LOCA_NATE")
    assert err.value.problem == "'about 170' is not a number"
    text = ags4_text().replace('"BH101","1.10","4.00"', '"BH101","1.10","4,0m"')
    with pytest.raises(InputError, match="'4,0m' is not a number") as err:
        read_ags4(text.encode(), filename="site.ags")
    assert "GEOL row 3" in err.value.field and err.value.field.endswith("GEOL_BASE")


def test_ags4_unreadable_files_refused():
    with pytest.raises(InputError, match="is empty"):
        read_ags4(b"")
    with pytest.raises(InputError, match="no AGS4 GROUP"):
        read_ags4(b"just some text\r\nwith lines\r\n")
    ragged = ags4_text().replace('"DATA","BH101","CP"', '"DATA","BH101","CP","extra"')
    with pytest.raises(InputError, match="not a readable AGS4 file"):
        read_ags4(ragged.encode())
    missing_heading = ags4_group("LOCA", ["LOCA_ID", "LOCA_TYPE"], ["", ""], ["ID", "PA"], [])
    geol = ags4_group(
        "GEOL", ["LOCA_ID", "GEOL_TOP", "GEOL_BASE"], ["", "m", "m"], ["ID", "2DP", "2DP"], []
    )
    with pytest.raises(InputError, match="missing heading"):
        read_ags4((missing_heading + "\r\n" + geol).encode())


def test_ags4_reads_byte_order_mark_and_lf_endings(tiny_model):
    text = "\ufeff" + ags4_text().replace("\r\n", "\n")
    holes = read_ags4(text.encode("utf-8"))
    assert len(holes.holes) == 5


# ------------------------------------------------------------------------------ merging


def test_merge_refuses_duplicate_ids(tiny_model):
    probe = {"id": "HBH1", "method": "BH", "x": 50, "y": 50, "final_depth_m": 3, "observed": {}}
    with pytest.raises(InputError, match="already in the model"):
        merge_existing(tiny_model, [probe])
    replaced = merge_existing(tiny_model, [probe], mode="replace")
    assert [p["id"] for p in replaced["existing"]] == ["HBH1"]
    with pytest.raises(InputError, match="appears twice"):
        merge_existing(tiny_model, [{**probe, "id": "N1"}, {**probe, "id": "N1"}])


@settings(
    max_examples=40, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture]
)
@given(
    thicknesses=st.lists(st.floats(0.1, 5.0), min_size=1, max_size=4),
    extra=st.floats(0.0, 3.0),
)
def test_wide_round_trip_of_valid_depths(tiny_model, thicknesses, extra):
    """Invariant: increasing depths within the final depth import unchanged and validate."""
    names = [u["name"] for u in tiny_model["units"][:-1]]
    depths = []
    total = 0.0
    for t in thicknesses[: len(names)]:
        total += round(t, 2)
        depths.append(round(total, 2))
    final = round(depths[-1] + extra + 0.01, 2)
    header = "id,method,x,y,final_depth_m," + ",".join(f"base:{n}" for n in names[: len(depths)])
    line = f"P1,BH,50,50,{final}," + ",".join(str(d) for d in depths)
    probes = parse_csv((header + "\n" + line + "\n").encode(), tiny_model)
    assert probes[0]["observed"] == dict(zip(names, depths, strict=False))
    validate_model(merge_existing(tiny_model, probes))
    json.dumps(probes)  # plain JSON values only
