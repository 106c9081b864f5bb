"""Health checks: /healthz answers while the process serves, /readyz only while the database answers."""

from __future__ import annotations

from fastapi.testclient import TestClient

from tests.helpers.app import make_app


def _lose_the_database(store, db_target: str, cluster) -> None:
    if store.kind == "sqlite":
        store.close()
        return
    import psycopg

    name = db_target.rsplit("/", 1)[1]
    with psycopg.connect(cluster.url(), autocommit=True) as conn:
        conn.execute(f'DROP DATABASE "{name}" WITH (FORCE)'.encode())


def test_readiness_follows_the_database(tmp_path, db_target, request):
    with TestClient(make_app(tmp_path, db=db_target)) as client:
        assert client.get("/healthz").json() == {"ok": True}
        ready = client.get("/readyz")
        assert ready.status_code == 200
        store = client.app.state.store
        assert ready.json() == {"ok": True, "store": store.kind, "schema_version": store.schema_version()}
        cluster = request.getfixturevalue("postgres_cluster") if store.kind == "postgresql" else None
        _lose_the_database(store, db_target, cluster)
        lost = client.get("/readyz")
        assert lost.status_code == 503
        assert lost.json()["code"] == "database_unreachable"
        assert lost.json()["error"] == f"the {store.kind} database does not answer"
        assert client.get("/healthz").status_code == 200  # alive, only not ready
