"""Store fixtures: a fresh database per test, and the model-file validator.

The store calls server.io.model_file.validate_model. Until that module exists in the tree, a
minimal stand-in (same contract: InputError on bad input, normalised copy otherwise) is put in
its place so the store's own behaviour can be tested; once it exists the real one is used.
"""

import importlib.util
import json
import sys
import types
from pathlib import Path

import pytest
from store_helpers import stand_in_validate_model

from server.store import open_db

DATA = Path(__file__).resolve().parents[1] / "data"
TINY_MODEL_PATH = DATA / "tiny-model.json"
REAL_VALIDATOR = importlib.util.find_spec("server.io.model_file") is not None


@pytest.fixture(autouse=True)
def model_validator(monkeypatch):
    if not REAL_VALIDATOR:
        module = types.ModuleType("server.io.model_file")
        module.validate_model = stand_in_validate_model
        monkeypatch.setitem(sys.modules, "server.io.model_file", module)
    from server.io.model_file import validate_model

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
