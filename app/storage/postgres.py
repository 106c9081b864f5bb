"""PostgreSQL storage: one database shared by several server processes.

The same tables as the SQLite file (see ``migrations/postgres``), reached through
psycopg 3 with a connection pool. Every function is one transaction on a
pooled connection: committed when it returns, rolled back when it raises.
Attached files live under ``data_dir``, a folder every server process must
see (a shared mount when the servers run on several machines).

Tokens are never stored: ``tokens`` keeps their SHA-256 digests.
"""

from __future__ import annotations

import json
import logging
import threading
import time
from pathlib import Path
from typing import Any, Iterator

import psycopg
from psycopg.rows import dict_row
from psycopg_pool import ConnectionPool

from .base import ChangeListener, StaleRevision, StorageError, StoreUnavailable, StoredEvent, redact_url, session_folder
from .migrations import VERSION_TABLE_SQL, check_not_newer, migrations_for

__all__ = ["PostgresStore"]

# Held (per transaction) while migrations run, so two servers starting at once
# upgrade the schema one after the other.
_MIGRATION_LOCK = 0x4172726F  # any fixed number; "Arro" in ASCII
CONNECT_TIMEOUT = 5  # seconds
# Every stored change is announced on this channel as "<session id> <revision>",
# delivered by PostgreSQL to every listening connection when the transaction commits.
CHANNEL = "arrowmoot_changes"
RECONNECT_PAUSE = 1.0  # seconds between attempts to listen again

log = logging.getLogger("arrowmoot")


def _first_line(exc: BaseException) -> str:
    return (str(exc).strip().splitlines() or [type(exc).__name__])[0]


class PostgresStore:
    """A pooled handle on one PostgreSQL database. Functions take keyword arguments."""

    kind = "postgresql"

    def __init__(self, url: str, *, data_dir: str | Path | None = None, upgrade_to: int | None = None,
                 pool_size: int = 8):
        if data_dir is None:
            raise StorageError("a PostgreSQL store needs a data folder for attached files (ARROWMOOT_DATA_DIR)")
        self.url = url
        self.where = redact_url(url)
        self.data_dir = Path(data_dir)
        try:
            with psycopg.connect(url, autocommit=True, connect_timeout=CONNECT_TIMEOUT) as conn:
                self._migrate(conn, upgrade_to)
        except psycopg.OperationalError as exc:
            raise StoreUnavailable(
                f"cannot reach the PostgreSQL database {self.where}: {_first_line(exc)}. Check that the "
                "server is running and accepts connections there, and that the database exists "
                "(createdb NAME)") from exc
        self._pool_size = pool_size
        self._stop_listening = threading.Event()
        self._pool = self._new_pool()

    def _new_pool(self) -> ConnectionPool:
        pool = ConnectionPool(self.url, min_size=1, max_size=self._pool_size, open=False, max_idle=60,
                              kwargs={"row_factory": dict_row, "connect_timeout": CONNECT_TIMEOUT})
        try:
            pool.open(wait=True, timeout=CONNECT_TIMEOUT * 2)
        except Exception as exc:
            pool.close()
            raise StoreUnavailable(f"cannot reach the PostgreSQL database {self.where}: {_first_line(exc)}") from exc
        return pool

    def _connection(self):
        if self._pool.closed:  # released at the end of a server's life; made again on use
            self._pool = self._new_pool()
        return self._pool.connection()

    def release(self) -> None:
        """Stop listening and close the pooled connections (made again on the next use)."""
        self._stop_listening.set()
        self._pool.close()

    def _migrate(self, conn: psycopg.Connection, upgrade_to: int | None) -> None:
        """Apply every migration the database lacks (up to ``upgrade_to``), each in one transaction."""
        for migration in migrations_for(self.kind)[:upgrade_to]:
            current = 0
            try:
                with conn.transaction():
                    conn.execute("SELECT pg_advisory_xact_lock(%s)", (_MIGRATION_LOCK,))
                    conn.execute(VERSION_TABLE_SQL)
                    current = self._version(conn)
                    check_not_newer(current, self.kind, self.where)
                    if migration.version <= current:
                        continue
                    conn.execute(migration.sql.encode())  # several statements, no parameters
                    conn.execute("INSERT INTO schema_migrations (version, name, applied) VALUES (%s, %s, %s)",
                                 (migration.version, migration.name, time.time()))
            except psycopg.OperationalError:
                raise
            except psycopg.Error as exc:
                raise StorageError(
                    f"upgrading the PostgreSQL database {self.where} to schema version {migration.version} "
                    f"({migration.name}) failed: {_first_line(exc)}; it was left at version {current}") from exc
        with conn.transaction():
            conn.execute(VERSION_TABLE_SQL)
            check_not_newer(self._version(conn), self.kind, self.where)

    @staticmethod
    def _version(conn: psycopg.Connection) -> int:
        row: Any = conn.execute("SELECT COALESCE(MAX(version), 0) AS version FROM schema_migrations").fetchone()
        if row is None:
            return 0
        return int(row["version"] if isinstance(row, dict) else row[0])

    def close(self) -> None:
        self._stop_listening.set()
        self._pool.close()

    # -- changes made by other processes ---------------------------------------------
    def listen(self, listener: ChangeListener) -> None:
        """Call ``listener(session_id, revision)`` (in a thread of its own) for every change
        any process stores, and ``listener(None, 0)`` each time listening starts again after
        the connection was lost, since notifications sent meanwhile are gone: the listener
        then catches up from the stored sessions."""
        self._stop_listening = threading.Event()
        thread = threading.Thread(target=self._listen_loop, args=(listener,), name="arrowmoot-listen",
                                  daemon=True)
        thread.start()

    def _listen_loop(self, listener: ChangeListener) -> None:
        first = True
        stop = self._stop_listening
        while not stop.is_set():
            try:
                with psycopg.connect(self.url, autocommit=True, connect_timeout=CONNECT_TIMEOUT) as conn:
                    conn.execute(f"LISTEN {CHANNEL}".encode())
                    if not first:
                        log.info("listening for changes again; catching up from the stored sessions")
                        listener(None, 0)
                    first = False
                    while not stop.is_set():
                        for note in conn.notifies(timeout=1.0):
                            session_id, _, revision = note.payload.partition(" ")
                            listener(session_id, int(revision or 0))
            except psycopg.Error as exc:
                if stop.is_set():
                    return
                log.warning("lost the change notifications from %s (%s); trying again", self.where,
                            _first_line(exc))
                first = False
                stop.wait(RECONNECT_PAUSE)
            except Exception:  # a failing listener must not end the thread
                log.exception("a change notification could not be handled")

    def schema_version(self) -> int:
        with self._connection() as conn:
            return self._version(conn)

    def is_ready(self) -> bool:
        try:
            if self._pool.closed:
                self._pool = self._new_pool()
            with self._pool.connection(timeout=CONNECT_TIMEOUT) as conn:
                conn.execute("SELECT 1").fetchone()
            return True
        except Exception:  # any failure to answer means not ready
            return False

    def _one(self, sql: str, args: tuple | list = ()) -> dict | None:
        with self._connection() as conn:
            return conn.execute(sql, args).fetchone()

    def _all(self, sql: str, args: tuple | list = ()) -> list[dict]:
        with self._connection() as conn:
            return conn.execute(sql, args).fetchall()

    # -- sessions -----------------------------------------------------------
    def create_session(
        self, *, session_id: str, title: str, join_code: str, state: dict, revision: int,
        event: dict | None = None, token_hash: str | None = None, member_id: str | None = None,
    ) -> None:
        now = time.time()
        with self._connection() as conn:
            conn.execute(
                "INSERT INTO sessions (id, title, join_code, created, updated, revision, state)"
                " VALUES (%s, %s, %s, %s, %s, %s, %s)",
                (session_id, title, join_code, now, now, revision, json.dumps(state)),
            )
            if token_hash is not None:
                conn.execute(
                    "INSERT INTO tokens (token_hash, session_id, member_id, created) VALUES (%s, %s, %s, %s)",
                    (token_hash, session_id, member_id, now),
                )
            if event is not None:
                self._insert_event(conn, session_id, event)
            self._announce(conn, session_id, revision)

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
        with self._connection() as conn:
            cur = conn.execute(
                "UPDATE sessions SET state = %s, revision = %s, updated = %s, title = %s WHERE id = %s"
                + ("" if expected_revision is None else " AND revision = %s"),
                (json.dumps(state), revision, now, state.get("title", ""), session_id)
                + (() if expected_revision is None else (expected_revision,)),
            )
            if cur.rowcount != 1:
                if expected_revision is not None and conn.execute(
                        "SELECT 1 FROM sessions WHERE id = %s", (session_id,)).fetchone() is not None:
                    raise StaleRevision(session_id)
                raise KeyError(session_id)
            if token_hash is not None:
                conn.execute(
                    "INSERT INTO tokens (token_hash, session_id, member_id, created) VALUES (%s, %s, %s, %s)",
                    (token_hash, session_id, member_id, now),
                )
            if mark_undone is not None:
                row = conn.execute(
                    "SELECT seq, data FROM events WHERE session_id = %s AND revision = %s",
                    (session_id, mark_undone),
                ).fetchone()
                if row is not None:
                    data = json.loads(row["data"])
                    data["undone"] = True
                    conn.execute("UPDATE events SET data = %s WHERE seq = %s",
                                 (json.dumps(data), row["seq"]))
            if replaces is not None:
                conn.execute("DELETE FROM events WHERE session_id = %s AND revision = %s",
                             (session_id, replaces))
            self._insert_event(conn, session_id, event)
            self._announce(conn, session_id, revision)

    @staticmethod
    def _announce(conn: psycopg.Connection, session_id: str, revision: int) -> None:
        conn.execute("SELECT pg_notify(%s, %s)", (CHANNEL, f"{session_id} {revision}"))

    @staticmethod
    def _insert_event(conn: psycopg.Connection, session_id: str, event: dict) -> None:
        conn.execute(
            "INSERT INTO events (session_id, revision, at, actor, kind, data) VALUES (%s, %s, %s, %s, %s, %s)",
            (session_id, event["revision"], event["at"], event.get("actor"), event["kind"],
             json.dumps(event)),
        )

    def load_session(self, session_id: str) -> tuple[dict, int] | None:
        row = self._one("SELECT state, revision FROM sessions WHERE id = %s", (session_id,))
        if row is None:
            return None
        return json.loads(row["state"]), row["revision"]

    def session_exists(self, session_id: str) -> bool:
        return self._one("SELECT 1 AS found FROM sessions WHERE id = %s", (session_id,)) is not None

    def count_sessions(self) -> int:
        row = self._one("SELECT COUNT(*) AS n FROM sessions")
        return int(row["n"]) if row else 0

    def list_sessions(self) -> list[dict]:
        return self._all("SELECT id, title, created, updated, revision FROM sessions ORDER BY created")

    def find_session_by_join_code(self, join_code: str) -> str | None:
        row = self._one("SELECT id FROM sessions WHERE join_code = %s", (join_code,))
        return row["id"] if row else None

    def join_code_taken(self, join_code: str) -> bool:
        return self.find_session_by_join_code(join_code) is not None

    # -- tokens -------------------------------------------------------------
    def find_member_token(self, member_id: str) -> tuple[str, str] | None:
        """Return (session_id, token_hash) for a member id, or None."""
        row = self._one("SELECT token_hash, session_id FROM tokens WHERE member_id = %s", (member_id,))
        return None if row is None else (row["session_id"], row["token_hash"])

    def find_token(self, token_hash: str) -> tuple[str, str] | None:
        """Return (session_id, member_id) for a token digest, or None."""
        row = self._one("SELECT session_id, member_id FROM tokens WHERE token_hash = %s", (token_hash,))
        return None if row is None else (row["session_id"], row["member_id"])

    def replace_member_token(self, *, session_id: str, member_id: str, token_hash: str,
                             now: float | None = None) -> None:
        """Issue a member a new key: the old one stops working at once."""
        now = time.time() if now is None else now
        with self._connection() as conn:
            conn.execute("DELETE FROM tokens WHERE member_id = %s", (member_id,))
            conn.execute(
                "INSERT INTO tokens (token_hash, session_id, member_id, created) VALUES (%s, %s, %s, %s)",
                (token_hash, session_id, member_id, now),
            )

    def token_created(self, token_hash: str) -> float | None:
        """When the key with this digest was issued (seconds since the epoch), or None."""
        row = self._one("SELECT created FROM tokens WHERE token_hash = %s", (token_hash,))
        return row["created"] if row else None

    # -- events -------------------------------------------------------------
    def list_events(self, *, session_id: str, after_revision: int = 0,
                    limit: int | None = None) -> list[StoredEvent]:
        sql = "SELECT data FROM events WHERE session_id = %s AND revision > %s ORDER BY seq"
        args: list[Any] = [session_id, after_revision]
        if limit is not None:
            sql += " LIMIT %s"
            args.append(limit)
        return [json.loads(r["data"]) for r in self._all(sql, args)]

    # -- attachments (a generic per-session JSON store) -----------------------
    def put_attachment(self, session_id: str, key: str, value: Any) -> None:
        """Store any JSON-ready value under ``key`` for the session (replacing it)."""
        text = json.dumps(value)
        with self._connection() as conn:
            conn.execute(
                "INSERT INTO attachments (session_id, key, value, updated) VALUES (%s, %s, %s, %s)"
                " ON CONFLICT (session_id, key) DO UPDATE SET value = EXCLUDED.value,"
                " updated = EXCLUDED.updated",
                (session_id, key, text, time.time()),
            )

    def get_attachment(self, session_id: str, key: str, default: Any = None) -> Any:
        row = self._one("SELECT value FROM attachments WHERE session_id = %s AND key = %s", (session_id, key))
        return json.loads(row["value"]) if row else default

    def delete_attachment(self, session_id: str, key: str) -> bool:
        with self._connection() as conn:
            cur = conn.execute("DELETE FROM attachments WHERE session_id = %s AND key = %s", (session_id, key))
            return cur.rowcount > 0

    def list_attachment_keys(self, session_id: str) -> list[str]:
        rows = self._all("SELECT key FROM attachments WHERE session_id = %s ORDER BY key", (session_id,))
        return [r["key"] for r in rows]

    # -- files ----------------------------------------------------------------
    def session_data_dir(self, session_id: str) -> Path:
        """A directory of the session's own (created on first use)."""
        return session_folder(self.data_dir, session_id)

    def iter_session_ids(self) -> Iterator[str]:
        for r in self._all("SELECT id FROM sessions ORDER BY created"):
            yield r["id"]
