"""Building an app on a fresh SQLite file, and a room of members to act through its API."""

from __future__ import annotations

from pathlib import Path

from fastapi.testclient import TestClient

from app.main import create_app
from app.sessions.keys import TOKEN_HEADER
from app.settings import Settings

__all__ = ["make_app", "Room", "open_room", "TOKEN_HEADER", "ROOT"]

ROOT = Path(__file__).resolve().parents[2]


def make_app(tmp_path: Path, *, demo: bool = False, db: str | None = None):
    """An app on its own database: an SQLite file under ``tmp_path``, or ``db`` (a file or URL)."""
    settings = Settings(db_path=db or tmp_path / "arrowmoot.sqlite3", data_dir=tmp_path / "data",
                        demo_session=demo, analysis_in_process=False)
    return create_app(settings=settings)


class Room:
    """A session with a facilitator and helpers to act as its members."""

    def __init__(self, client: TestClient, created: dict):
        self.client = client
        self.id = created["session_id"]
        self.join_code = created["join_code"]
        self.facilitator = created["token"]

    def join(self, name: str) -> str:
        r = self.client.post("/api/join", json={"code": self.join_code, "name": name})
        assert r.status_code == 201, r.text
        return r.json()["token"]

    def send(self, token: str, command: dict):
        return self.client.post(f"/api/sessions/{self.id}/commands", json=command,
                                headers={TOKEN_HEADER: token})

    def ok(self, token: str, command: dict) -> dict:
        r = self.send(token, command)
        assert r.status_code == 200, r.text
        return r.json()

    def state(self, token: str | None = None) -> dict:
        r = self.client.get(f"/api/sessions/{self.id}", headers={TOKEN_HEADER: token or self.facilitator})
        assert r.status_code == 200, r.text
        return r.json()["state"]

    def analysis(self, token: str | None = None) -> dict:
        r = self.client.get(f"/api/sessions/{self.id}/analysis",
                            headers={TOKEN_HEADER: token or self.facilitator})
        assert r.status_code == 200, r.text
        return r.json()


def open_room(client: TestClient, **body) -> Room:
    body.setdefault("title", "Cycle-to-work workshop")
    r = client.post("/api/sessions", json=body)
    assert r.status_code == 201, r.text
    return Room(client, r.json())
