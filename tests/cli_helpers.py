"""Run the ``probewise`` command line in a child process, as a user would."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def run_cli(*args: str, timeout: float = 300) -> subprocess.CompletedProcess:
    """``probewise ARGS`` (through ``python -m probewise.cli``) from the repository root."""
    return subprocess.run(
        [sys.executable, "-m", "probewise.cli", *args],
        capture_output=True,
        text=True,
        cwd=ROOT,
        timeout=timeout,
    )
