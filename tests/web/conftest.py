"""Fixtures for the web tests: an app over a fresh database in tmp_path, and its client.

The client talks to http://127.0.0.1 so the Host check (DNS-rebinding guard) is exercised as
in real use; ``lifespan`` runs (``with TestClient``) so the demo project is seeded.
"""

from __future__ import annotations

from collections.abc import Iterator
from pathlib import Path

import pytest
from fastapi.testclient import TestClient
from web_helpers import BASE_URL

from probewise.web.app import create_app

DATA = Path(__file__).resolve().parents[1] / "data"


@pytest.fixture
def db_path(tmp_path: Path) -> Path:
    return tmp_path / "probewise.db"


@pytest.fixture
def client(db_path: Path) -> Iterator[TestClient]:
    """A client of an app whose fresh database holds the invented demo project."""
    with TestClient(create_app(db_path), base_url=BASE_URL) as test_client:
        yield test_client


@pytest.fixture
def empty_client(db_path: Path) -> Iterator[TestClient]:
    """A client of an app over an empty database (no demo)."""
    with TestClient(create_app(db_path, seed=False), base_url=BASE_URL) as test_client:
        yield test_client


@pytest.fixture
def tiny_bytes() -> bytes:
    return (DATA / "tiny-model.json").read_bytes()


# ---------------------------------------------------------------- model-editing pages


@pytest.fixture
def tiny_id(client: TestClient, tiny_model: dict) -> int:
    """Id of a fresh project holding tests/data/tiny-model.json (the demo is project 1)."""
    from edit_helpers import add_project

    return add_project(client, tiny_model)


@pytest.fixture(params=["demo", "tiny"])
def shown_project(request: pytest.FixtureRequest, client: TestClient, demo_model, tiny_model):
    """(id, model) of the seeded demo project, then of a fresh tiny project."""
    from edit_helpers import add_project

    if request.param == "demo":
        return 1, demo_model
    return add_project(client, tiny_model), tiny_model
