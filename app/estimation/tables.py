"""Read an uploaded table (CSV or Parquet) and describe its columns.

:func:`load_table` reads with the pyarrow engine and refuses, with a message
naming the problem, anything that is not a usable table: a binary or empty
file, a file with one column or one row, duplicate column names, or a file
over the size limit. :func:`profile_table` reports, for every column, its kind
(number, binary, text), missing share, distinct values and range.
"""

from __future__ import annotations

import csv
import io
import os
from pathlib import Path

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.csv as pa_csv

from .columns import describe_text
from .errors import EmptyTable, FileTooLarge, NotATable, TooFewRows

__all__ = ["DEFAULT_MAX_BYTES", "load_table", "read_table_bytes", "profile_table", "column_kind"]

DEFAULT_MAX_BYTES = 500 * 1024 * 1024
PARQUET_MAGIC = b"PAR1"
_STRINGS = {pa.string(): pd.StringDtype("pyarrow", na_value=np.nan),
            pa.large_string(): pd.StringDtype("pyarrow", na_value=np.nan)}


def _human(size: int) -> str:
    for unit in ("bytes", "KB", "MB", "GB"):
        if size < 1024 or unit == "GB":
            return f"{size:.0f} {unit}" if unit == "bytes" else f"{size:.1f} {unit}"
        size /= 1024
    return f"{size} bytes"  # pragma: no cover


def check_size(size: int, max_bytes: int | None, name: str = "the file") -> None:
    if max_bytes is not None and size > max_bytes:
        raise FileTooLarge(
            f"{name} is {_human(size)}; the limit is {_human(max_bytes)}",
            item={"size": size, "limit": max_bytes},
        )


def load_table(path: str | os.PathLike, *, max_bytes: int | None = DEFAULT_MAX_BYTES,
               name: str | None = None) -> pd.DataFrame:
    """Read a CSV or Parquet file into a DataFrame, refusing unusable input."""
    path = Path(path)
    shown = name or path.name
    if not path.is_file():
        raise NotATable(f"{shown}: no such file")
    size = path.stat().st_size
    check_size(size, max_bytes, shown)
    if size == 0:
        raise EmptyTable(f"{shown} is empty")
    with open(path, "rb") as handle:
        head = handle.read(8192)
    if head[:4] == PARQUET_MAGIC:
        frame = _read_parquet(path, shown)
    else:
        _refuse_binary(head, shown)
        _refuse_duplicate_header(head, shown)
        frame = _read_csv(path, shown)
    return _checked(frame, shown)


def read_table_bytes(data: bytes, *, name: str = "the upload",
                     max_bytes: int | None = DEFAULT_MAX_BYTES) -> pd.DataFrame:
    """Same as :func:`load_table` for bytes already in memory (tests, small files)."""
    check_size(len(data), max_bytes, name)
    if not data:
        raise EmptyTable(f"{name} is empty")
    if data[:4] == PARQUET_MAGIC:
        frame = _read_parquet(io.BytesIO(data), name)
    else:
        _refuse_binary(data[:8192], name)
        _refuse_duplicate_header(data[:8192], name)
        frame = _read_csv(io.BytesIO(data), name)
    return _checked(frame, name)


def _refuse_binary(head: bytes, shown: str) -> None:
    if b"\x00" in head:
        raise NotATable(
            f"{shown} is not a table: it looks like a binary file; "
            "upload a CSV (comma-separated, header row first) or a Parquet file"
        )
    try:
        head.decode("utf-8")
    except UnicodeDecodeError as exc:
        # a multi-byte character cut at the 8 KB boundary is fine
        if exc.start < len(head) - 4:
            raise NotATable(
                f"{shown} is not UTF-8 text (byte {exc.start + 1} cannot be read); "
                "save the CSV as UTF-8"
            ) from None


def _refuse_duplicate_header(head: bytes, shown: str) -> None:
    # pandas silently renames a repeated header ("a", "a.1"); refuse it instead
    line = head.decode("utf-8", errors="ignore").lstrip("\ufeff").splitlines()[:1]
    if not line:
        return
    names = [n.strip() for n in next(csv.reader(line))]
    dupes = sorted({n for n in names if names.count(n) > 1})
    if dupes:
        raise NotATable(f"{shown} has duplicate column names: {', '.join(dupes)}", item=dupes)


CSV_BLOCK = 16 << 20  # the reader's block; no single line may be longer


def _read_csv(source, shown: str) -> pd.DataFrame:
    # pyarrow reads in parallel; converting with split_blocks + self_destruct hands
    # numeric buffers to pandas without a second copy (peak memory ~ one table)
    try:
        table = pa_csv.read_csv(source, read_options=pa_csv.ReadOptions(block_size=CSV_BLOCK))
    except pa.ArrowInvalid as exc:
        text = str(exc).splitlines()[0] if str(exc) else type(exc).__name__
        too_long = (f"{shown} has a line longer than {_human(CSV_BLOCK)}, which no table of "
                    "measurements needs; check that it is a CSV file with one row per line")
        if "straddl" in text:
            raise NotATable(too_long) from None
        if "Empty CSV file" in text:
            if _has_content(source):
                raise NotATable(too_long.replace("a line", "a first line (the header)")) from None
            raise EmptyTable(f"{shown} is empty") from None
        raise NotATable(f"{shown} could not be read as a CSV table: {text}") from None
    except Exception as exc:
        text = str(exc).splitlines()[0] if str(exc) else type(exc).__name__
        raise NotATable(f"{shown} could not be read as a CSV table: {text}") from None
    frame = table.to_pandas(split_blocks=True, self_destruct=True, types_mapper=_STRINGS.get)
    del table
    pa.default_memory_pool().release_unused()  # hand the parser's buffers back to the system
    return frame


def _has_content(source) -> bool:
    """Does the file or buffer hold anything but white space? (Read in small pieces.)"""
    handle = open(source, "rb") if isinstance(source, (str, os.PathLike)) else source
    try:
        handle.seek(0)
        while piece := handle.read(1 << 20):
            if piece.strip():
                return True
        return False
    finally:
        if handle is not source:
            handle.close()


def _read_parquet(source, shown: str) -> pd.DataFrame:
    try:
        return pd.read_parquet(source, engine="pyarrow")
    except Exception as exc:
        text = str(exc).splitlines()[0] if str(exc) else type(exc).__name__
        raise NotATable(f"{shown} could not be read as a Parquet table: {text}") from None


def _checked(frame: pd.DataFrame, shown: str) -> pd.DataFrame:
    frame.columns = [str(c).strip() for c in frame.columns]
    if frame.shape[1] == 0:
        raise EmptyTable(f"{shown} has no columns")
    dupes = sorted({c for c in frame.columns if list(frame.columns).count(c) > 1})
    if dupes:
        raise NotATable(f"{shown} has duplicate column names: {', '.join(dupes)}", item=dupes)
    if frame.shape[1] < 2:
        raise NotATable(
            f"{shown} has a single column ({frame.columns[0]!r}); a table needs a header row "
            "and at least two comma-separated columns",
            item=list(frame.columns),
        )
    if len(frame) == 0:
        raise EmptyTable(f"{shown} has a header row but no data rows", item=list(frame.columns))
    if len(frame) == 1:
        raise TooFewRows(f"{shown} has only one data row; estimation needs many rows")
    return frame


def column_kind(series: pd.Series, distinct: int | None = None) -> str:
    """'binary', 'number' or 'text' (booleans count as binary)."""
    if pd.api.types.is_bool_dtype(series):
        return "binary"
    values = series.dropna()
    distinct = values.nunique() if distinct is None else distinct
    if pd.api.types.is_numeric_dtype(series):
        return "binary" if distinct == 2 and set(np.unique(values)) <= {0, 1} else "number"
    if distinct == 2:
        return "binary"
    return "text"


def profile_table(frame: pd.DataFrame, *, examples: int = 3) -> list[dict]:
    """One entry per column: kind, missing share, distinct values, range."""
    rows = len(frame)
    out = []
    for name in frame.columns:
        series = frame[name]
        missing = int(series.isna().sum())
        values = series.dropna() if missing else series
        distinct = int(values.nunique())
        kind = column_kind(series, distinct) if distinct else "empty"
        entry: dict = {
            "name": name,
            "kind": kind,
            "dtype": str(series.dtype),
            "missing": missing,
            "missing_share": round(missing / rows, 4) if rows else 0.0,
            "distinct": distinct,
            "binary": kind == "binary",
            "min": None,
            "max": None,
            "mean": None,
            "examples": [],
        }
        if distinct and pd.api.types.is_numeric_dtype(series) and not pd.api.types.is_bool_dtype(series):
            entry["min"] = _plain(values.min())
            entry["max"] = _plain(values.max())
            entry["mean"] = _plain(values.mean())
        else:
            top = values.value_counts().head(examples)
            entry["examples"] = [str(v) for v in top.index]
            if kind == "text":
                entry.update(describe_text(values))
        out.append(entry)
    return out


def _plain(value) -> float | int | None:
    if value is None or (isinstance(value, float) and not np.isfinite(value)):
        return None
    if isinstance(value, (np.integer, int)):
        return int(value)
    return round(float(value), 6)
