"""benchmarks/load.py runs end to end (a one-second run with two users): it starts the
server, drives every kind of request and writes its report. No timing is asserted here; the
figures come from running the script itself (README)."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2]


@pytest.mark.slow
def test_load_script_reports_every_kind_without_errors(tmp_path):
    out = tmp_path / "load.json"
    run = subprocess.run(
        [
            sys.executable,
            str(ROOT / "benchmarks" / "load.py"),
            "--clients", "2", "--seconds", "1", "--think-ms", "50", "-o", str(out),
        ],
        capture_output=True,
        text=True,
        cwd=ROOT,
        timeout=300,
    )  # fmt: skip
    assert run.returncode == 0, run.stdout + run.stderr
    doc = json.loads(out.read_text())
    assert doc["errors"] == 0
    assert set(doc["kinds"]) == {"page", "edit", "evaluate"}
    assert doc["requests"] == sum(k["requests"] for k in doc["kinds"].values())
    assert doc["machine"]["cpus"] >= 1 and len(doc["machine"]["load_average_before"]) == 3
    assert "requests/s" in run.stdout
