"""A data file attached to a session: where it is kept and what is recorded about it.

The file itself lives in the session's data folder as ``data.csv`` or
``data.parquet`` (whatever name it was sent under); the attachment
``estimation.data`` records its shown name, size, columns, profile and the
mapping of columns to variables.
"""

from __future__ import annotations

import time
from pathlib import Path
from typing import Any

from ..estimation.service import json_ready
from ..estimation.tables import profile_table

__all__ = ["DATA_KEY", "RESULT_KEYS", "stored_name", "data_info"]

DATA_KEY = "estimation.data"
RESULT_KEYS = ("estimation.estimate", "estimation.validation", "estimation.sensitivity",
               "estimation.disputes")


def stored_name(path: str | Path) -> str:
    """``data.parquet`` for a Parquet file (by its magic bytes), else ``data.csv``."""
    with open(path, "rb") as handle:
        return "data.parquet" if handle.read(4) == b"PAR1" else "data.csv"


def data_info(frame, *, name: str, stored: str, size: int, mapping: dict | None,
              profile: dict | None = None) -> dict[str, Any]:
    """What the session records about attached data (``profile`` is computed when not given)."""
    return {"name": name, "stored": stored, "bytes": size, "rows": int(len(frame)),
            "columns": list(map(str, frame.columns)),
            "profile": json_ready(profile_table(frame) if profile is None else profile),
            "mapping": mapping, "uploaded_at": time.time()}
