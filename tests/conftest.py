"""Shared fixtures: every test gets its own SQLite file under tmp_path (helpers: tests/helpers/)."""

from __future__ import annotations

import json
from pathlib import Path

import pytest
from fastapi.testclient import TestClient

from tests.helpers.app import Room, make_app, open_room
from tests.helpers.pg_server import db_target, postgres_cluster, pytest_terminal_summary  # noqa: F401  (fixtures, hook)

ROOT = Path(__file__).resolve().parent.parent


@pytest.fixture
def app(tmp_path):
    return make_app(tmp_path)


@pytest.fixture
def client(app):
    with TestClient(app) as c:
        yield c


@pytest.fixture
def room(client) -> Room:
    return open_room(client, treatment="bike_lease", outcome="sick_days")


@pytest.fixture
def demo_document() -> dict:
    return json.loads((ROOT / "sample_data" / "cycle_to_work.json").read_text())
