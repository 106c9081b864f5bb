"""What every store offers, and the errors it raises when it cannot open."""

from __future__ import annotations

import re
from pathlib import Path
from typing import Any, Callable, Iterator, Protocol
from urllib.parse import urlsplit, urlunsplit

__all__ = ["Store", "StoredEvent", "StorageError", "StoreUnavailable", "SchemaTooNew", "StaleRevision",
           "ChangeListener",
           "is_database_url", "redact_url", "session_folder"]

StoredEvent = dict[str, Any]
# Called with (session_id, revision) after another process stored a change, and with
# (None, 0) after notifications may have been missed (catch up on every session).
ChangeListener = Callable[[str | None, int], None]

URL_SCHEMES = ("postgresql://", "postgres://")
_SAFE_ID = re.compile(r"^[A-Za-z0-9_-]{1,64}$")


class StorageError(Exception):
    """The database cannot be used; the message says why and what to do."""


class StoreUnavailable(StorageError):
    """The database cannot be reached or opened."""


class StaleRevision(Exception):
    """Another writer stored a change to the session first: read it again and redo the change."""


class SchemaTooNew(StorageError):
    """The database's schema was written by a newer version of Arrowmoot."""


def is_database_url(target: object) -> bool:
    return isinstance(target, str) and target.startswith(URL_SCHEMES)


def redact_url(url: str) -> str:
    """The URL without its password (for messages and logs)."""
    parts = urlsplit(url)
    if parts.password is None:
        return url
    host = parts.hostname or ""
    if parts.port:
        host = f"{host}:{parts.port}"
    return urlunsplit(parts._replace(netloc=f"{parts.username or ''}:***@{host}"))


def session_folder(data_dir: Path, session_id: str) -> Path:
    """A folder of the session's own under ``data_dir`` (created on first use)."""
    if not isinstance(session_id, str) or not _SAFE_ID.match(session_id):
        raise ValueError(f"not a session id: {session_id!r}")
    path = data_dir / "sessions" / session_id
    path.mkdir(parents=True, exist_ok=True)
    return path


class Store(Protocol):
    """Sessions, their members' key digests, their event log and per-session JSON values.

    Every write is one transaction: an acknowledged change is stored before anyone
    is told about it. Functions that change several rows take keyword arguments."""

    data_dir: Path
    kind: str  # "sqlite" or "postgresql"

    def close(self) -> None: ...
    def release(self) -> None: ...  # let go of pooled connections; made again on next use
    def schema_version(self) -> int: ...
    def is_ready(self) -> bool: ...

    def create_session(self, *, session_id: str, title: str, join_code: str, state: dict, revision: int,
                       event: dict | None = None, token_hash: str | None = None,
                       member_id: str | None = None) -> None: ...
    def save_change(self, *, session_id: str, state: dict, revision: int, event: dict,
                    token_hash: str | None = None, member_id: str | None = None,
                    mark_undone: int | None = None, replaces: int | None = None,
                    expected_revision: int | None = None) -> None: ...
    def listen(self, listener: ChangeListener) -> None: ...  # changes stored by other processes
    def load_session(self, session_id: str) -> tuple[dict, int] | None: ...
    def session_exists(self, session_id: str) -> bool: ...
    def count_sessions(self) -> int: ...
    def list_sessions(self) -> list[dict]: ...
    def find_session_by_join_code(self, join_code: str) -> str | None: ...
    def join_code_taken(self, join_code: str) -> bool: ...

    def find_member_token(self, member_id: str) -> tuple[str, str] | None: ...
    def find_token(self, token_hash: str) -> tuple[str, str] | None: ...
    def replace_member_token(self, *, session_id: str, member_id: str, token_hash: str,
                             now: float | None = None) -> None: ...
    def token_created(self, token_hash: str) -> float | None: ...

    def list_events(self, *, session_id: str, after_revision: int = 0,
                    limit: int | None = None) -> list[StoredEvent]: ...

    def put_attachment(self, session_id: str, key: str, value: Any) -> None: ...
    def get_attachment(self, session_id: str, key: str, default: Any = None) -> Any: ...
    def delete_attachment(self, session_id: str, key: str) -> bool: ...
    def list_attachment_keys(self, session_id: str) -> list[str]: ...

    def session_data_dir(self, session_id: str) -> Path: ...
    def iter_session_ids(self) -> Iterator[str]: ...
