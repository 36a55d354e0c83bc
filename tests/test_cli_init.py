"""`probewise init`: a new model file from a starting point, valid and usable at once."""

from __future__ import annotations

import json

import pytest
from cli_helpers import run_cli

from probewise.io.model_file import validate_model


def test_init_writes_a_model_that_evaluates(tmp_path):
    out = tmp_path / "new.json"
    run = run_cli(
        "init", "Quarry lane", "--template", "embankment", "--crs", "EPSG:27700",
        "--currency", "GBP", "--box", "451000,283000,451400,283200", "-o", str(out),
    )  # fmt: skip
    assert run.returncode == 0, run.stderr
    model = json.loads(out.read_text())
    validate_model(model)
    assert model["name"] == "Quarry lane" and model["crs"] == "EPSG:27700"
    assert [u["name"] for u in model["units"]][-1] == "Mudstone"
    evaluate = run_cli("evaluate", str(out), "--json")
    assert evaluate.returncode == 0, evaluate.stderr
    assert set(json.loads(evaluate.stdout)["baseline"]["boundaries"]) == {
        "Topsoil and made ground",
        "Soft alluvial clay",
        "Sand and gravel",
    }


@pytest.mark.parametrize(
    ("args", "field"),
    [
        (["", "-o", "{out}"], "name:"),
        (["A", "--crs", "EPSG:99999", "-o", "{out}"], "crs:"),
        (["A", "--box", "1,2,3", "-o", "{out}"], "--box:"),
        (["A", "--box", "5,5,1,1", "-o", "{out}"], "--box:"),
    ],
)
def test_bad_input_exits_2_naming_the_field_and_writes_nothing(tmp_path, args, field):
    out = tmp_path / "new.json"
    run = run_cli("init", *(a.format(out=out) for a in args))
    assert run.returncode == 2
    assert run.stderr.startswith(field), run.stderr
    assert not out.exists()
