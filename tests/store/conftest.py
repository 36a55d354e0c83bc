"""Store fixtures: a fresh database per test, and the model-file validator the store calls
(probewise.io.model_file.validate_model, the real one: a stored model is its normalised copy)."""

import json
from pathlib import Path

import pytest

from probewise.io.model_file import validate_model
from probewise.store import open_db

DATA = Path(__file__).resolve().parents[1] / "data"
TINY_MODEL_PATH = DATA / "tiny-model.json"


@pytest.fixture
def model_validator():
    return validate_model


@pytest.fixture
def tiny_path() -> Path:
    return TINY_MODEL_PATH


@pytest.fixture
def tiny() -> dict:
    return json.loads(TINY_MODEL_PATH.read_text())


@pytest.fixture
def db(tmp_path):
    database = open_db(tmp_path / "store" / "probewise.db")
    yield database
    database.close()
