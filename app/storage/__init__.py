"""Storage: the only package that touches a database.

Two implementations of one interface (:class:`~app.storage.base.Store`):
:class:`~app.storage.sqlite.SQLiteStore`, one file beside the server (the
default), and :class:`~app.storage.postgres.PostgresStore`, one PostgreSQL
database shared by several server processes. :func:`open_store` picks one from
the target: a ``postgresql://`` URL selects PostgreSQL, anything else is a file
path. Both create and upgrade their schema with the numbered SQL files in
``migrations/`` (see :mod:`app.storage.migrations`).
"""

from __future__ import annotations

from pathlib import Path

from .base import (ChangeListener, SchemaTooNew, StaleRevision, StorageError, Store, StoreUnavailable, StoredEvent,
                   is_database_url, redact_url)

__all__ = ["Store", "StoredEvent", "StorageError", "StoreUnavailable", "SchemaTooNew", "StaleRevision",
           "ChangeListener",
           "open_store", "is_database_url", "redact_url"]


def open_store(target: str | Path, *, data_dir: str | Path | None = None) -> Store:
    """The store for ``target``: PostgreSQL for a ``postgresql://`` URL, else an SQLite file.

    Raises StoreUnavailable when the database cannot be reached or opened, and
    SchemaTooNew when it was upgraded by a newer Arrowmoot."""
    if is_database_url(target):
        from .postgres import PostgresStore  # the driver is imported only when used

        return PostgresStore(str(target), data_dir=data_dir)
    from .sqlite import SQLiteStore

    return SQLiteStore(target, data_dir=data_dir)
