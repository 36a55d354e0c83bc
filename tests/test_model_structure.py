"""The optional structure fields of the model file: accepted, carried into the core, and the
optimiser's refusal of correlated thicknesses (bad values: tests/reliability/corpus.py)."""

from __future__ import annotations

import json
from pathlib import Path

from cli_helpers import run_cli

from probewise.app.to_core import to_core
from probewise.io.model_file import dump_model, validate_model

TINY = Path(__file__).resolve().parent / "data" / "tiny-model.json"


def structured() -> dict:
    model = json.loads(TINY.read_text())
    model["units"][0].update(nugget=0.3, spread_multiplier=1.4, mean_shift_m=-0.2)
    model["units"][1]["correlation"]["model"] = "matern52"
    model["thickness_correlation"] = [{"units": ["Alluvial clay", "Made ground"], "rho": -0.6}]
    model["existing"][1]["stage"] = "Phase 2"
    return model


def test_structure_fields_are_valid_kept_and_carried_into_the_core():
    normal = validate_model(structured())
    again = validate_model(json.loads(dump_model(normal)))
    assert again["thickness_correlation"] == normal["thickness_correlation"]
    assert again["units"][0]["nugget"] == 0.3
    ground = to_core(normal).ground
    assert ground.units[0].correlation.nugget == 0.3
    assert ground.units[1].correlation.nugget == 0.0
    assert ground.units[1].correlation.model == "matern52"
    assert (ground.units[0].spread_multiplier, ground.units[0].mean_shift_m) == (1.4, -0.2)
    assert ground.thickness_correlation == ((0, 1, -0.6),)  # sorted unit indices
    assert to_core(normal).existing[1].stage == "Phase 2"


def test_optimise_refuses_correlated_thicknesses_naming_the_field(tmp_path):
    path = tmp_path / "m.json"
    path.write_text(json.dumps(structured()))
    run = run_cli("optimise", str(path), "--budget", "20000", "--json")
    assert run.returncode == 2
    assert run.stderr.startswith("thickness_correlation:"), run.stderr
    # without the pairs the same model optimises
    model = structured()
    del model["thickness_correlation"]
    path.write_text(json.dumps(model))
    assert run_cli("optimise", str(path), "--budget", "20000", "--json").returncode == 0
