"""Shared fixtures: paths to the project's own test data and the optional ../shared folder."""

import json
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
DATA = Path(__file__).resolve().parent / "data"
SHARED = ROOT.parent / "shared"


@pytest.fixture
def tiny_model() -> dict:
    """The small invented floodplain model (tests/data)."""
    return json.loads((DATA / "tiny-model.json").read_text())


@pytest.fixture
def demo_model() -> dict:
    """The invented demo project shipped in seed_data/."""
    return json.loads((ROOT / "seed_data" / "demo-project.json").read_text())


@pytest.fixture
def shared_dir() -> Path:
    """../shared when present; tests that need it skip cleanly on a user's clone."""
    if not SHARED.is_dir():
        pytest.skip("../shared is absent (a user's clone)")
    return SHARED
