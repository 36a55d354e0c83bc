"""The project's benchmark case builder reproduces the shared benchmark cases exactly."""

import subprocess
import sys
from pathlib import Path

import pytest

OURS = Path(__file__).resolve().parents[1] / "benchmarks" / "make_case.py"


@pytest.mark.parametrize("size", ["S", "M", "L"])
def test_case_matches_shared_generator(shared_dir, size):
    theirs = shared_dir / "bench" / "make_case.py"
    if not theirs.is_file():
        pytest.skip("shared bench generator absent")
    a = subprocess.run([sys.executable, str(OURS), size], capture_output=True, check=True)
    b = subprocess.run([sys.executable, str(theirs), size], capture_output=True, check=True)
    assert a.stdout == b.stdout
