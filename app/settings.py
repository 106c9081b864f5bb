"""Server settings: one place for every knob, each with its default and help.

Values come from keyword arguments to :class:`Settings`, or from environment
variables named ``ARROWMOOT_<NAME>`` (for example ``ARROWMOOT_DB_PATH``).
"""

from __future__ import annotations

import os
import sys
from dataclasses import dataclass, field, fields
from pathlib import Path

from .resources import resource_dir

__all__ = ["Settings", "SETTING_HELP", "user_data_dir"]

SETTING_HELP = {
    "db_path": "SQLite database file holding every session (created if missing; default "
    "arrowmoot.sqlite3 in the per-user data folder), or a PostgreSQL URL "
    "(postgresql://USER@HOST:PORT/DBNAME) for a database several servers share.",
    "data_dir": "Directory for per-session files such as attached data sets (default: the "
    "database's folder; with PostgreSQL, the per-user data folder). Every server process "
    "sharing a PostgreSQL database must see the same directory.",
    "upload_limit_bytes": "Largest data upload accepted, in bytes (default 500 MB).",
    "allowed_origins": "Origins allowed to open the WebSocket and call the API from a browser; "
    "empty means same origin only.",
    "request_limit_bytes": "Largest request body accepted other than a data upload, in bytes "
    "(default 2 MB); a bigger one gets 413 before it is read.",
    "join_attempts_per_minute": "Different wrong join codes one address may try per minute at full "
    "speed (default 10); past that its join requests wait their turn, a second longer for each "
    "further wrong code (at most 10 s), and a right code is still let in.",
    "key_lifetime_days": "Days a session key stays valid after it is issued (default 30; 0 means "
    "keys never expire). An expired key gets 401 'expired_token'.",
    "demo_session": "Create the cycle-to-work demo session when the database has no sessions.",
    "demo_document": "Graph document used for the demo session.",
    "analysis_in_process": "Run the diagram analysis in a child process (true) so it never slows "
    "the live updates, or in a thread of the server (false).",
}


def user_data_dir() -> Path:
    """The per-user folder for the database and attached files, by the platform's custom:
    ``$XDG_DATA_HOME/arrowmoot`` (else ``~/.local/share/arrowmoot``) on Linux and other
    Unix systems, ``~/Library/Application Support/arrowmoot`` on macOS, and
    ``%LOCALAPPDATA%\\arrowmoot`` on Windows."""
    if sys.platform == "win32":
        base = Path(os.environ.get("LOCALAPPDATA") or Path.home() / "AppData" / "Local")
    elif sys.platform == "darwin":
        base = Path.home() / "Library" / "Application Support"
    else:
        base = Path(os.environ.get("XDG_DATA_HOME") or Path.home() / ".local" / "share")
    return base / "arrowmoot"


def _is_database_url(value: object) -> bool:
    # The same test as app.storage.is_database_url (kept here so settings import nothing).
    return isinstance(value, str) and value.startswith(("postgresql://", "postgres://"))


def _optional_path(value: str) -> Path | None:
    return Path(value) if value else None


def _env(name: str, default: str) -> str:
    return os.environ.get(f"ARROWMOOT_{name.upper()}", default)


@dataclass
class Settings:
    db_path: Path | str = field(default_factory=lambda: _env("db_path", str(user_data_dir() / "arrowmoot.sqlite3")))
    data_dir: Path | None = field(default_factory=lambda: _optional_path(_env("data_dir", "")))
    upload_limit_bytes: int = field(
        default_factory=lambda: int(_env("upload_limit_bytes", str(500 * 1024 * 1024)))
    )
    allowed_origins: tuple[str, ...] = field(
        default_factory=lambda: tuple(
            o.strip() for o in _env("allowed_origins", "").split(",") if o.strip()
        )
    )
    request_limit_bytes: int = field(
        default_factory=lambda: int(_env("request_limit_bytes", str(2 * 1024 * 1024)))
    )
    join_attempts_per_minute: int = field(
        default_factory=lambda: int(_env("join_attempts_per_minute", "10"))
    )
    key_lifetime_days: float = field(
        default_factory=lambda: float(_env("key_lifetime_days", "30"))
    )
    demo_session: bool = field(
        default_factory=lambda: _env("demo_session", "1") not in ("0", "false", "no")
    )
    demo_document: Path = field(
        default_factory=lambda: Path(
            _env("demo_document", str(resource_dir("sample_data") / "cycle_to_work.json"))
        )
    )

    analysis_in_process: bool = field(
        default_factory=lambda: _env("analysis_in_process", "1") not in ("0", "false", "no")
    )

    def __post_init__(self) -> None:
        if not _is_database_url(self.db_path):
            self.db_path = Path(self.db_path)
        self.data_dir = Path(self.data_dir) if self.data_dir is not None else None
        self.demo_document = Path(self.demo_document)
        if self.upload_limit_bytes <= 0:
            raise ValueError("upload_limit_bytes must be positive")
        if self.request_limit_bytes <= 0 or self.join_attempts_per_minute <= 0:
            raise ValueError("request_limit_bytes and join_attempts_per_minute must be positive")

    def shared_data_dir(self) -> Path | None:
        """The folder for attached files: as set, else beside an SQLite file (None), else the per-user folder."""
        if self.data_dir is not None or not _is_database_url(self.db_path):
            return self.data_dir
        return user_data_dir() / "files"

    @classmethod
    def names(cls) -> list[str]:
        return [f.name for f in fields(cls)]
