"""Numbered schema migrations, one folder of plain SQL files per database kind.

``sqlite/0001_initial.sql``, ``sqlite/0002_...sql`` and so on: each file is
applied once, in order, in one transaction together with the row in
``schema_migrations`` that records its version, so a database is always at
exactly one known version. A database whose recorded version is above the
newest file here was upgraded by a newer Arrowmoot and is refused (SchemaTooNew)
rather than written with an older idea of its tables.
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from pathlib import Path

from ..base import SchemaTooNew

__all__ = ["Migration", "migrations_for", "latest_version", "check_not_newer", "VERSION_TABLE_SQL"]

_FOLDER = Path(__file__).resolve().parent
_NAME = re.compile(r"^(\d{4})_([a-z0-9_]+)\.sql$")

# Created before any migration runs (the same text works in SQLite and PostgreSQL).
VERSION_TABLE_SQL = (
    "CREATE TABLE IF NOT EXISTS schema_migrations ("
    " version INTEGER PRIMARY KEY, name TEXT NOT NULL, applied DOUBLE PRECISION NOT NULL)"
)


@dataclass(frozen=True)
class Migration:
    version: int
    name: str
    sql: str


def migrations_for(kind: str) -> list[Migration]:
    """The migrations of ``kind`` ("sqlite" or "postgresql"), in version order."""
    folder = _FOLDER / ("postgres" if kind == "postgresql" else kind)
    found = []
    for path in sorted(folder.glob("*.sql")):
        match = _NAME.match(path.name)
        if match is None:
            raise RuntimeError(f"migration file {path.name} is not named NNNN_name.sql")
        found.append(Migration(int(match.group(1)), match.group(2), path.read_text(encoding="utf-8")))
    versions = [m.version for m in found]
    if versions != list(range(1, len(found) + 1)):
        raise RuntimeError(f"{kind} migrations are not numbered 1, 2, 3, ...: {versions}")
    return found


def latest_version(kind: str) -> int:
    return len(migrations_for(kind))


def check_not_newer(current: int, kind: str, where: str) -> None:
    latest = latest_version(kind)
    if current > latest:
        raise SchemaTooNew(
            f"the database {where} is at schema version {current}, but this Arrowmoot knows versions "
            f"up to {latest}: it was upgraded by a newer Arrowmoot. Run that version (or restore a "
            "backup taken before the upgrade); this one will not write to it.")
