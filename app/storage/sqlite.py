"""SQLite storage: one file beside the server, the embedded default.

One file holds every session. Each session row keeps the workshop state as
JSON plus its revision; every change appends one row to ``events`` in the
same transaction, so an acknowledged edit or vote is on disk before anyone
is told about it. The database runs in WAL mode so readers never wait for
the writer.

Tokens are never stored: ``tokens`` keeps their SHA-256 digests.
"""

from __future__ import annotations

import json
import sqlite3
import threading
import time
from pathlib import Path
from typing import Any, Iterator

from .base import ChangeListener, StaleRevision, StorageError, StoreUnavailable, StoredEvent, session_folder
from .migrations import VERSION_TABLE_SQL, check_not_newer, migrations_for

__all__ = ["SQLiteStore", "StoredEvent"]


def _statements(sql: str) -> Iterator[str]:
    """The statements of a migration file, one at a time (comments stay with the next one)."""
    pending = ""
    for line in sql.splitlines(keepends=True):
        pending += line
        if sqlite3.complete_statement(pending):
            yield pending
            pending = ""


class SQLiteStore:
    """A thread-safe handle on the database file. Functions take keyword arguments."""

    kind = "sqlite"

    def __init__(self, db_path: str | Path, *, data_dir: str | Path | None = None,
                 upgrade_to: int | None = None):
        self.db_path = Path(db_path)
        self.data_dir = Path(data_dir) if data_dir is not None else self.db_path.parent
        self._lock = threading.RLock()
        try:
            self.db_path.parent.mkdir(parents=True, exist_ok=True)
            self._conn = sqlite3.connect(self.db_path, check_same_thread=False, isolation_level=None)
            self._conn.row_factory = sqlite3.Row
            self._conn.execute("PRAGMA journal_mode=WAL")
            # NORMAL in WAL mode survives an application crash; only an OS crash
            # or power cut can lose the last transactions.
            self._conn.execute("PRAGMA synchronous=NORMAL")
            self._conn.execute("PRAGMA foreign_keys=ON")
            self._conn.execute(VERSION_TABLE_SQL)
        except (OSError, sqlite3.Error) as exc:
            raise StoreUnavailable(f"cannot open the SQLite database {self.db_path}: {exc}") from exc
        self._migrate(upgrade_to)

    def _migrate(self, upgrade_to: int | None) -> None:
        """Apply every migration the file lacks (up to ``upgrade_to``), each in one transaction."""
        where = str(self.db_path)
        for migration in migrations_for(self.kind)[:upgrade_to]:
            with self._lock:
                current = 0
                self._conn.execute("BEGIN IMMEDIATE")  # re-read under the write lock: another
                try:                                     # process may have just upgraded it
                    current = self.schema_version()
                    check_not_newer(current, self.kind, where)
                    if migration.version <= current:
                        self._conn.execute("ROLLBACK")
                        continue
                    for statement in _statements(migration.sql):
                        self._conn.execute(statement)
                    self._conn.execute("INSERT INTO schema_migrations (version, name, applied) VALUES (?, ?, ?)",
                                       (migration.version, migration.name, time.time()))
                    self._conn.execute("COMMIT")
                except sqlite3.Error as exc:
                    self._conn.execute("ROLLBACK")
                    raise StorageError(
                        f"upgrading the SQLite database {where} to schema version {migration.version} "
                        f"({migration.name}) failed: {exc}; it was left at version {current}") from exc
                except BaseException:
                    if self._conn.in_transaction:
                        self._conn.execute("ROLLBACK")
                    raise
        with self._lock:
            check_not_newer(self.schema_version(), self.kind, where)

    def listen(self, listener: ChangeListener) -> None:
        """Nothing to listen to: one file is served by one process."""

    def schema_version(self) -> int:
        with self._lock:
            return self._conn.execute("SELECT COALESCE(MAX(version), 0) FROM schema_migrations").fetchone()[0]

    def is_ready(self) -> bool:
        try:
            with self._lock:
                self._conn.execute("SELECT 1").fetchone()
            return True
        except sqlite3.Error:
            return False

    def close(self) -> None:
        with self._lock:
            self._conn.close()

    def release(self) -> None:
        """Nothing to let go of: the one connection stays open while the store is used."""

    def journal_mode(self) -> str:
        with self._lock:
            return self._conn.execute("PRAGMA journal_mode").fetchone()[0]

    # -- transactions -------------------------------------------------------
    def _transaction(self):
        store = self

        class _Tx:
            def __enter__(self_inner):
                store._lock.acquire()
                store._conn.execute("BEGIN IMMEDIATE")
                return store._conn

            def __exit__(self_inner, exc_type, exc, tb):
                try:
                    if exc_type is None:
                        store._conn.execute("COMMIT")
                    else:
                        store._conn.execute("ROLLBACK")
                finally:
                    store._lock.release()
                return False

        return _Tx()

    # -- sessions -----------------------------------------------------------
    def create_session(
        self, *, session_id: str, title: str, join_code: str, state: dict, revision: int,
        event: dict | None = None, token_hash: str | None = None, member_id: str | None = None,
    ) -> None:
        now = time.time()
        with self._transaction() as conn:
            conn.execute(
                "INSERT INTO sessions (id, title, join_code, created, updated, revision, state)"
                " VALUES (?, ?, ?, ?, ?, ?, ?)",
                (session_id, title, join_code, now, now, revision, json.dumps(state)),
            )
            if token_hash is not None:
                conn.execute(
                    "INSERT INTO tokens (token_hash, session_id, member_id, created) VALUES (?, ?, ?, ?)",
                    (token_hash, session_id, member_id, now),
                )
            if event is not None:
                self._insert_event(conn, session_id, event)

    def save_change(
        self, *, session_id: str, state: dict, revision: int, event: dict,
        token_hash: str | None = None, member_id: str | None = None,
        mark_undone: int | None = None, replaces: int | None = None,
        expected_revision: int | None = None,
    ) -> None:
        """Store the new state and its event (and a new member's token) atomically.

        ``replaces`` names the revision of an event the new one stands for (a burst of
        moves folded into one history entry): that event is removed. With
        ``expected_revision`` the change is stored only while the session is still at
        that revision (the row is locked meanwhile); else StaleRevision, nothing stored."""
        now = time.time()
        with self._transaction() as conn:
            cur = conn.execute(
                "UPDATE sessions SET state = ?, revision = ?, updated = ?, title = ? WHERE id = ?"
                + ("" if expected_revision is None else " AND revision = ?"),
                (json.dumps(state), revision, now, state.get("title", ""), session_id)
                + (() if expected_revision is None else (expected_revision,)),
            )
            if cur.rowcount != 1:
                if expected_revision is not None and conn.execute(
                        "SELECT 1 FROM sessions WHERE id = ?", (session_id,)).fetchone() is not None:
                    raise StaleRevision(session_id)
                raise KeyError(session_id)
            if token_hash is not None:
                conn.execute(
                    "INSERT INTO tokens (token_hash, session_id, member_id, created) VALUES (?, ?, ?, ?)",
                    (token_hash, session_id, member_id, now),
                )
            if mark_undone is not None:
                row = conn.execute(
                    "SELECT seq, data FROM events WHERE session_id = ? AND revision = ?",
                    (session_id, mark_undone),
                ).fetchone()
                if row is not None:
                    data = json.loads(row["data"])
                    data["undone"] = True
                    conn.execute("UPDATE events SET data = ? WHERE seq = ?",
                                 (json.dumps(data), row["seq"]))
            if replaces is not None:
                conn.execute("DELETE FROM events WHERE session_id = ? AND revision = ?",
                             (session_id, replaces))
            self._insert_event(conn, session_id, event)

    @staticmethod
    def _insert_event(conn: sqlite3.Connection, session_id: str, event: dict) -> None:
        conn.execute(
            "INSERT INTO events (session_id, revision, at, actor, kind, data) VALUES (?, ?, ?, ?, ?, ?)",
            (session_id, event["revision"], event["at"], event.get("actor"), event["kind"],
             json.dumps(event)),
        )

    def load_session(self, session_id: str) -> tuple[dict, int] | None:
        with self._lock:
            row = self._conn.execute(
                "SELECT state, revision FROM sessions WHERE id = ?", (session_id,)
            ).fetchone()
        if row is None:
            return None
        return json.loads(row["state"]), row["revision"]

    def session_exists(self, session_id: str) -> bool:
        with self._lock:
            return self._conn.execute(
                "SELECT 1 FROM sessions WHERE id = ?", (session_id,)
            ).fetchone() is not None

    def count_sessions(self) -> int:
        with self._lock:
            return self._conn.execute("SELECT COUNT(*) FROM sessions").fetchone()[0]

    def list_sessions(self) -> list[dict]:
        with self._lock:
            rows = self._conn.execute(
                "SELECT id, title, created, updated, revision FROM sessions ORDER BY created"
            ).fetchall()
        return [dict(r) for r in rows]

    def find_session_by_join_code(self, join_code: str) -> str | None:
        with self._lock:
            row = self._conn.execute(
                "SELECT id FROM sessions WHERE join_code = ?", (join_code,)
            ).fetchone()
        return row["id"] if row else None

    def join_code_taken(self, join_code: str) -> bool:
        return self.find_session_by_join_code(join_code) is not None

    # -- tokens -------------------------------------------------------------
    def find_member_token(self, member_id: str) -> tuple[str, str] | None:
        """Return (session_id, token_hash) for a member id, or None."""
        with self._lock:
            row = self._conn.execute(
                "SELECT token_hash, session_id FROM tokens WHERE member_id = ?", (member_id,)
            ).fetchone()
        if row is None:
            return None
        return row["session_id"], row["token_hash"]

    def find_token(self, token_hash: str) -> tuple[str, str] | None:
        """Return (session_id, member_id) for a token digest, or None."""
        with self._lock:
            row = self._conn.execute(
                "SELECT token_hash, session_id, member_id FROM tokens WHERE token_hash = ?",
                (token_hash,),
            ).fetchone()
        if row is None:
            return None
        return row["session_id"], row["member_id"]

    def replace_member_token(self, *, session_id: str, member_id: str, token_hash: str,
                             now: float | None = None) -> None:
        """Issue a member a new key: the old one stops working at once."""
        now = time.time() if now is None else now
        with self._transaction() as conn:
            conn.execute("DELETE FROM tokens WHERE member_id = ?", (member_id,))
            conn.execute(
                "INSERT INTO tokens (token_hash, session_id, member_id, created) VALUES (?, ?, ?, ?)",
                (token_hash, session_id, member_id, now),
            )

    def token_created(self, token_hash: str) -> float | None:
        """When the key with this digest was issued (seconds since the epoch), or None."""
        with self._lock:
            row = self._conn.execute(
                "SELECT created FROM tokens WHERE token_hash = ?", (token_hash,)
            ).fetchone()
        return row["created"] if row else None

    # -- events -------------------------------------------------------------
    def list_events(self, *, session_id: str, after_revision: int = 0,
                    limit: int | None = None) -> list[StoredEvent]:
        sql = "SELECT data FROM events WHERE session_id = ? AND revision > ? ORDER BY seq"
        args: list[Any] = [session_id, after_revision]
        if limit is not None:
            sql += " LIMIT ?"
            args.append(limit)
        with self._lock:
            rows = self._conn.execute(sql, args).fetchall()
        return [json.loads(r["data"]) for r in rows]

    # -- attachments (a generic per-session JSON store) -----------------------
    def put_attachment(self, session_id: str, key: str, value: Any) -> None:
        """Store any JSON-ready value under ``key`` for the session (replacing it)."""
        text = json.dumps(value)
        with self._transaction() as conn:
            conn.execute(
                "INSERT INTO attachments (session_id, key, value, updated) VALUES (?, ?, ?, ?)"
                " ON CONFLICT(session_id, key) DO UPDATE SET value = excluded.value,"
                " updated = excluded.updated",
                (session_id, key, text, time.time()),
            )

    def get_attachment(self, session_id: str, key: str, default: Any = None) -> Any:
        with self._lock:
            row = self._conn.execute(
                "SELECT value FROM attachments WHERE session_id = ? AND key = ?", (session_id, key)
            ).fetchone()
        return json.loads(row["value"]) if row else default

    def delete_attachment(self, session_id: str, key: str) -> bool:
        with self._transaction() as conn:
            cur = conn.execute(
                "DELETE FROM attachments WHERE session_id = ? AND key = ?", (session_id, key)
            )
            return cur.rowcount > 0

    def list_attachment_keys(self, session_id: str) -> list[str]:
        with self._lock:
            rows = self._conn.execute(
                "SELECT key FROM attachments WHERE session_id = ? ORDER BY key", (session_id,)
            ).fetchall()
        return [r["key"] for r in rows]

    # -- files ----------------------------------------------------------------
    def session_data_dir(self, session_id: str) -> Path:
        """A directory of the session's own (created on first use)."""
        return session_folder(self.data_dir, session_id)

    def iter_session_ids(self) -> Iterator[str]:
        with self._lock:
            rows = self._conn.execute("SELECT id FROM sessions ORDER BY created").fetchall()
        for r in rows:
            yield r["id"]
