"""Layers mapped by description: ordered text rules (server/io/probes_mapping.py).

An invented reclaimed-land file in AGS3: fill over, in some holes only, marine deposit, over
alluvium, over weathered rock. The legend codes are too coarse to tell the units apart (SAND is
used for fill and marine deposit alike); the unit is written in the description.
"""

from __future__ import annotations

import json

import pytest
from ags3_builders import FILE, RULES, reclaimed_model_of

from probewise.cli import main
from probewise.errors import InputError
from probewise.io.model_file import load_model_file
from probewise.io.probes_in import ags4_to_existing, parse_text_rules, read_ags
from probewise.io.probes_mapping import decide_layers


@pytest.fixture
def reclaimed_model(tiny_model) -> dict:
    return reclaimed_model_of(tiny_model)


def test_text_rules_place_layers_that_codes_cannot(reclaimed_model):
    holes = read_ags(FILE, filename="reclaimed.ags")
    rules = parse_text_rules(RULES, reclaimed_model, "--mapping-text")
    result = ags4_to_existing(holes, reclaimed_model, {"TOPS": "-"}, {"CP": "BH"}, text_rules=rules)
    assert result.problems == []
    by_id = {p["id"]: p["observed"] for p in result.probes}
    assert by_id["BH1"] == {"Fill": 4.0, "Marine deposit": 6.5, "Alluvium": 12.0}
    # BH2 met no marine deposit: absent, recorded at the base of the fill
    assert by_id["BH2"] == {"Fill": 5.0, "Marine deposit": 5.0, "Alluvium": 11.0}
    counts = {h.rule.pattern: h.layers for h in result.rule_hits}
    assert counts == {
        "(FILL)": 2,
        "/\\(marine\\s+deposits?\\)/": 1,
        "alluvium": 2,
        "(rock)": 2,
    }
    assert result.layers_by_code == 1  # the topsoil, left out by its code
    assert result.rule_hits[1].examples == [
        "BH1 4-6.5 m: Very soft dark grey clayey SAND (MARINE DEPOSIT)"
    ]


def test_first_matching_rule_wins_and_dash_leaves_out(reclaimed_model):
    holes = read_ags(FILE, filename="reclaimed.ags")
    # "sand" matches the fill and the marine deposit of BH1: placed first, it takes them all
    greedy = parse_text_rules(["sand=Fill", *RULES, "topsoil=-"], reclaimed_model, "r")
    decided = decide_layers(holes, {}, greedy, reclaimed_model)
    assert decided.hits[0].layers == 3 and decided.hits[2].layers == 0
    placed_last = parse_text_rules([*RULES, "sand=Fill", "topsoil=-"], reclaimed_model, "r")
    decided = decide_layers(holes, {}, placed_last, reclaimed_model)
    assert decided.hits[-2].layers == 0 and decided.hits[1].layers == 1
    assert decided.unit_of[("BH2", 0)] is None and decided.hits[-1].layers == 1
    assert decided.undecided == {}


def test_code_mapping_decides_before_rules(reclaimed_model):
    holes = read_ags(FILE, filename="reclaimed.ags")
    rules = parse_text_rules(RULES, reclaimed_model, "r")
    decided = decide_layers(holes, {"CLAY": 1, "TOPS": None}, rules, reclaimed_model)
    # the CLAY layers go to the unit of their code, not the (ALLUVIUM) rule
    assert decided.unit_of[("BH1", 2)] == 1 and decided.hits[2].layers == 0


def test_layers_no_rule_places_are_refused(reclaimed_model):
    holes = read_ags(FILE, filename="reclaimed.ags")
    rules = parse_text_rules(RULES[:1], reclaimed_model, "r")
    with pytest.raises(InputError) as err:
        ags4_to_existing(holes, reclaimed_model, {}, {"CP": "BH"}, text_rules=rules)
    assert err.value.field == "mapping"
    assert "SAND (1 layer)" in err.value.problem and "TOPS (1 layer)" in err.value.problem


@pytest.mark.parametrize(
    ("item", "words"),
    [
        ("=Fill", "with a pattern before the last '='"),
        ("FILL", "with a pattern before the last '='"),
        ("/(fill/=Fill", "is not a valid regular expression"),
        ("(FILL)=Made ground", "'Made ground' is not a unit of the model"),
    ],
)
def test_bad_text_rules_name_the_rule(reclaimed_model, item, words):
    with pytest.raises(InputError) as err:
        parse_text_rules([item], reclaimed_model, "--mapping-text")
    assert err.value.field == f"--mapping-text {item!r}"
    assert words in err.value.problem


def test_cli_mapping_text(reclaimed_model, tmp_path, capsys):
    model = tmp_path / "model.json"
    model.write_text(json.dumps(reclaimed_model))
    data = tmp_path / "reclaimed.ags"
    data.write_bytes(FILE)
    out = tmp_path / "out.json"
    args = ["import-probes", str(model), str(data), "--mapping", "TOPS=-", "--default-method", "BH"]
    rules = [a for r in RULES for a in ("--mapping-text", r)]
    assert main([*args, *rules, "-o", str(out)]) == 0
    written = load_model_file(out)
    assert written["existing"][-1]["observed"]["Marine deposit"] == 5.0
    assert main([*args, *rules, "--preview"]) == 0
    shown = capsys.readouterr().out
    assert "text rules" in shown and "(MARINE DEPOSIT)" in shown and "by text rules" in shown
    # a bad rule: exit 2, one line naming the rule, nothing written
    bad = tmp_path / "bad.json"
    assert main([*args, "--mapping-text", "/(/=Fill", "-o", str(bad)]) == 2
    assert capsys.readouterr().err.startswith("--mapping-text '/(/=Fill': is not a valid")
    assert not bad.exists()
    # rules not enough: exit 2 naming the codes left
    assert main([*args, "--mapping-text", "(FILL)=Fill", "-o", str(bad)]) == 2
    assert "no unit for geology code(s) SAND (1 layer(s))" in capsys.readouterr().err
