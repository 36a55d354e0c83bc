"""`probewise validate MODEL.json` run as a user runs it: exit 0 and a count line when the
file is valid; exit 2 and exactly one stderr line `field: problem` when it is not."""

from __future__ import annotations

import copy
import json
import subprocess
from pathlib import Path

import pytest
from cli_helpers import run_cli

ROOT = Path(__file__).resolve().parents[1]
DATA = Path(__file__).resolve().parent / "data"
TINY = json.loads((DATA / "tiny-model.json").read_text())


def run_validate(path: Path) -> subprocess.CompletedProcess:
    return run_cli("validate", str(path), timeout=120)


def write_model(tmp_path: Path, model: object, name: str = "model.json") -> Path:
    path = tmp_path / name
    path.write_text(json.dumps(model))
    return path


def test_tiny_model_is_valid():
    done = run_validate(DATA / "tiny-model.json")
    assert done.returncode == 0, done.stderr
    assert done.stdout.splitlines()[0] == (
        f"{DATA / 'tiny-model.json'}: valid (4 units, 3 methods, 2 existing probes, 2 layouts)"
    )
    assert done.stderr == ""


def test_demo_project_is_valid():
    path = ROOT / "seed_data" / "demo-project.json"
    done = run_validate(path)
    assert done.returncode == 0, done.stderr
    assert done.stdout.startswith(f"{path}: valid (5 units, 5 methods, 10 existing probes, ")


def test_shared_example_is_valid(shared_dir):
    path = shared_dir / "examples" / "tiny-model.json"
    if not path.is_file():
        pytest.skip("the shared folder has no examples/tiny-model.json")
    done = run_validate(path)
    assert done.returncode == 0, done.stderr
    assert ": valid (" in done.stdout


def _min_above_max(m):
    m["units"][2]["thickness_m"].update(min=4.0, likely=3.5, max=3.0)


def _unknown_base_of(m):
    m["boundaries_of_interest"][0]["base_of"] = "Peat"


def _geographic_crs(m):
    m["crs"] = "EPSG:4326"


def _probe_outside_site(m):
    m["existing"][1]["x"] = 260.0


# Error cases of the model-file contract (docs/model-file.md): (id, change, the exact stderr line).
ACCEPTANCE = [
    ("min-above-max", _min_above_max, "units[2].thickness_m: min 4.0 is above max 3.0"),
    (
        "unknown-unit-in-base-of",
        _unknown_base_of,
        'boundaries_of_interest[0].base_of: "Peat" is not one of the units '
        "(Made ground, Alluvial clay, River gravel, Mudstone)",
    ),
    (
        "geographic-crs",
        _geographic_crs,
        "crs: EPSG:4326 is geographic (degrees); use a projected CRS in metres such as the "
        "local UTM zone",
    ),
    (
        "probe-outside-site",
        _probe_outside_site,
        'existing[1]: probe "HBH2" at (260, 40) lies outside the site',
    ),
]


@pytest.mark.parametrize(
    ("change", "line"), [c[1:] for c in ACCEPTANCE], ids=[c[0] for c in ACCEPTANCE]
)
def test_broken_file_exits_2_with_one_line(tmp_path, change, line):
    model = copy.deepcopy(TINY)
    change(model)
    done = run_validate(write_model(tmp_path, model))
    assert done.returncode == 2
    assert done.stdout == ""
    assert done.stderr == line + "\n"  # exactly one line, naming the field first


def test_missing_file_exits_2(tmp_path):
    done = run_validate(tmp_path / "absent.json")
    assert done.returncode == 2
    assert done.stderr.count("\n") == 1
    assert done.stderr.startswith("MODEL: file not found: ")


def test_bad_json_exits_2_naming_line_and_column(tmp_path):
    path = tmp_path / "bad.json"
    path.write_text('{"schema": "probewise/1",\n "name": }\n')
    done = run_validate(path)
    assert done.returncode == 2
    assert done.stderr.count("\n") == 1
    assert done.stderr.startswith("MODEL: is not valid JSON")
    assert "line 2 column" in done.stderr
    assert "Traceback" not in done.stderr


def test_nan_in_file_exits_2(tmp_path):
    path = tmp_path / "nan.json"
    path.write_text(json.dumps(TINY).replace('"grid_spacing_m": 5', '"grid_spacing_m": NaN'))
    done = run_validate(path)
    assert done.returncode == 2
    assert done.stderr == "grid_spacing_m: must be a finite number (not NaN or Infinity)\n"


def test_planned_probe_in_an_exclusion_is_valid_with_a_note(tmp_path):
    model = copy.deepcopy(TINY)
    model["layouts"][0]["probes"][2]["y"] = 100.0  # (150, 100) lies in the gas main easement
    done = run_validate(write_model(tmp_path, model))
    assert done.returncode == 0, done.stderr
    lines = done.stdout.splitlines()
    assert lines[0].endswith(": valid (4 units, 3 methods, 2 existing probes, 2 layouts)")
    assert lines[1] == (
        'note: layouts[0].probes[2]: planned probe "BH03" lies in exclusion '
        '"Live gas main easement"'
    )
