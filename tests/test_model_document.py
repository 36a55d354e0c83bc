"""The model file's optional ``document`` and ``safety`` sections (docs/model-file.md,
"Document control and health and safety notes"); the schedule's warnings on the command line."""

from __future__ import annotations

import copy
import json

import pytest

from probewise.errors import InputError
from probewise.io.model_file import validate_model


def with_sections(model: dict, **sections) -> dict:
    out = copy.deepcopy(model)
    out.update(sections)
    return out


def test_absent_sections_stay_absent(tiny_model):
    normal = validate_model(tiny_model)
    assert "document" not in normal and "safety" not in normal


def test_sections_are_kept_with_their_defaults(tiny_model):
    normal = validate_model(
        with_sections(
            tiny_model,
            document={
                "prepared_by": "A. Field",
                "issues": [{"revision": "P01", "date": "2026-03-01"}],
            },
            safety={"hazards": {"water": "Tidal river to the south"}},
        )
    )
    assert normal["document"]["prepared_by"] == "A. Field"
    assert normal["document"]["issues"][0] == {
        "revision": "P01",
        "date": "2026-03-01",
        "status": "",
        "description": "",
        "by": "",
    }
    assert normal["safety"] == {"notes": "", "hazards": {"water": "Tidal river to the south"}}


@pytest.mark.parametrize(
    ("sections", "field", "words"),
    [
        (
            {"document": {"issues": [{"revision": "P01", "date": "2026-02-30"}]}},
            "document.issues[0].date",
            "YYYY-MM-DD",
        ),
        (
            {"document": {"issues": [{"revision": " ", "date": "2026-02-20"}]}},
            "document.issues[0].revision",
            "must not be empty",
        ),
        ({"safety": {"hazards": {"fire": "x"}}}, "safety.hazards.fire", "not a hazard heading"),
        ({"safety": {"notes": "x" * 4001}}, "safety.notes", "at most 4000"),
        ({"document": {"checked_by": 5}}, "document.checked_by", ""),
    ],
)
def test_broken_sections_name_the_field(tiny_model, sections, field, words):
    with pytest.raises(InputError) as caught:
        validate_model(with_sections(tiny_model, **sections))
    assert caught.value.field == field
    assert words in caught.value.problem


def test_cli_schedule_lists_the_warnings_of_the_printed_schedule(tiny_model, tmp_path):
    from cli_helpers import run_cli

    model = copy.deepcopy(tiny_model)
    model["layouts"][0]["probes"].append({"id": "INX", "method": "BH", "x": 170.0, "y": 100.0})
    path = tmp_path / "model.json"
    path.write_text(json.dumps(model))
    run = run_cli("schedule", str(path), "--layout", model["layouts"][0]["name"])
    assert run.returncode == 0, run.stderr
    warnings = run.stdout.split("Warnings:")[1]
    assert "INX: inside the exclusion Live gas main easement" in " ".join(warnings.split())
