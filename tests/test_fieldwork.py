"""Recording a planned layout's fieldwork as a stage (server/app/fieldwork.py): absent units,
bases not found, the checks that name their field, and the layout's ``recorded_stage`` in the
model file. Depths are invented."""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from probewise.app.fieldwork import ABSENT, ProbeFound, found_from_probes, record_fieldwork
from probewise.errors import InputError
from probewise.io.model_file import check_model

TINY = Path(__file__).resolve().parent / "data" / "tiny-model.json"
LAYOUT = "Four boreholes"


@pytest.fixture
def model() -> dict:
    return json.loads(TINY.read_text())


def probe(row: int, final: float, **bases) -> ProbeFound:
    names = {"made": "Made ground", "clay": "Alluvial clay", "gravel": "River gravel"}
    ids = ["BH01", "BH02", "BH03", "BH04"]
    return ProbeFound(
        row, ids[row], 50.0 + row, 60.0, final, {names[k]: v for k, v in bases.items()}
    )


def test_absent_units_take_the_base_above_and_missing_bases_stay_out(model):
    found = [
        probe(0, 8.0, made=ABSENT, clay=3.0),  # no made ground: its base at ground level
        probe(1, 9.0, made=1.0, clay=ABSENT, gravel=5.5),
        probe(2, 2.5, made=1.1),  # stopped at 2.5 m in the clay: its base not found
    ]
    out, message = record_fieldwork(model, LAYOUT, "Phase 2", found)
    new = out["existing"][-3:]
    assert [p["observed"] for p in new] == [
        {"Made ground": 0.0, "Alluvial clay": 3.0},
        {"Made ground": 1.0, "Alluvial clay": 1.0, "River gravel": 5.5},
        {"Made ground": 1.1},
    ]
    assert {p["stage"] for p in new} == {"Phase 2"}
    assert [p["method"] for p in new] == ["BH", "BH", "BH"]  # the plan's
    assert new[0]["x"] == 50.0 and new[1]["x"] == 51.0  # as drilled
    assert message.startswith("Recorded the fieldwork of Four boreholes as stage Phase 2")
    valid, problems = check_model(out)
    assert problems == [] and valid is not None
    assert valid.document["layouts"][0]["recorded_stage"] == "Phase 2"
    assert "recorded_stage" not in model["layouts"][0]  # the input is not changed


@pytest.mark.parametrize(
    ("found", "field", "words"),
    [
        ([probe(0, 5.0, made=1.0, clay=6.0)], "found[0].observed.Alluvial clay", "below the final"),
        ([probe(0, 5.0, clay=3.0, gravel=2.0)], "found[0].observed.River gravel", "above the base"),
        ([probe(1, 5.0, clay=ABSENT)], "found[1].observed.Alluvial clay", "is not given"),
        ([probe(0, 5.0, made=-0.5)], "found[0].observed.Made ground", "above ground"),
        ([probe(0, 0.0, made=0.0)], "found[0].final_depth_m", "above 0"),
        ([ProbeFound(0, "BH02", 1, 1, 5.0)], "found[0].id", "not a planned probe"),
        ([probe(0, 5.0), probe(0, 6.0)], "found[0].id", "given twice"),
        ([], "found", "no probe is marked"),
    ],
)
def test_bad_entries_name_their_field(model, found, field, words):
    with pytest.raises(InputError) as caught:
        record_fieldwork(model, LAYOUT, "Phase 2", found)
    assert caught.value.field == field and words in caught.value.problem


def test_stage_names_and_layouts_are_checked(model):
    model["existing"][0]["stage"] = "Desk study"
    for stage, words in [("", "give the stage a name"), ("Desk study", "already the stage")]:
        with pytest.raises(InputError) as caught:
            record_fieldwork(model, LAYOUT, stage, [probe(0, 5.0)])
        assert caught.value.field == "stage" and words in caught.value.problem
    with pytest.raises(InputError) as caught:
        record_fieldwork(model, "No such layout", "Phase 2", [probe(0, 5.0)])
    assert caught.value.field == "layout"
    model["existing"].append({**model["existing"][1], "id": "BH01"})
    with pytest.raises(InputError) as caught:
        record_fieldwork(model, LAYOUT, "Phase 2", [probe(0, 5.0)])
    assert (
        caught.value.field == "found[0].id" and "already an existing probe" in caught.value.problem
    )


def test_imported_probes_are_matched_by_id(model):
    probes = [{"id": "BH03", "x": 150, "y": 61, "final_depth_m": 7, "observed": {"Made ground": 1}}]
    (found,) = found_from_probes(model, LAYOUT, probes, "p.csv")
    assert found.row == 2 and found.y == 61 and found.bases == {"Made ground": 1}
    with pytest.raises(InputError) as caught:
        found_from_probes(model, LAYOUT, [{**probes[0], "id": "XX"}], "p.csv")
    assert caught.value.field == "p.csv: XX"


def test_recorded_stage_must_be_a_name(model):
    model["layouts"][0]["recorded_stage"] = 7
    _, problems = check_model(model)
    assert any(p.field == "layouts[0].recorded_stage" for p in problems)
