"""How each attached column will be read, said before anything is estimated.

:func:`describe_text` adds to a column's profile what the estimate will do
with text: the levels of a category column (the first, in sorted order, is the
reference level of its indicator columns), or, for a column that is mostly
numbers, how many rows hold text instead. :func:`mapping_warnings` names each
variable whose column will not be read as a number: a warning when the
estimate needs a number there (treatment, outcome) or when a text column
measures a variable of another name, a note when a category variable is
measured by its own column. :func:`blank_text_cells` turns those text cells into missing values
when the analyst has chosen so.
"""

from __future__ import annotations

import re
from typing import Iterable, Mapping

import pandas as pd

__all__ = ["describe_text", "mapping_warnings", "blank_text_cells", "NUMBER_ROLES"]

MAX_SHOWN_LEVELS = 50
# Variables in these roles enter every estimate as one number per row.
NUMBER_ROLES = ("treatment", "outcome")


def describe_text(series: pd.Series) -> dict:
    """For a text column: its levels, or the count and examples of text cells among numbers."""
    values = series.dropna()
    text = values.astype(str).str.strip()
    parsed = pd.to_numeric(text, errors="coerce")
    numbers = int(parsed.notna().sum())
    if len(text) and numbers / len(text) >= 0.5 and numbers < len(text):
        bad = text[parsed.isna()]
        return {"text_cells": int(len(bad)), "text_values": [str(v) for v in bad.value_counts().index[:3]]}
    levels = sorted(set(text))
    return {"levels": levels[:MAX_SHOWN_LEVELS], "level_count": len(levels)}


def mapping_warnings(profile: Iterable[dict], mapping: Mapping[str, str],
                     roles: Mapping[str, str | None]) -> list[dict]:
    """One warning per mapped variable whose column holds text the estimate cannot read as a number."""
    by_name = {p["name"]: p for p in profile}
    out = []
    for var, col in mapping.items():
        p = by_name.get(col)
        if p is None or p.get("kind") != "text":
            continue
        role = roles.get(var)
        if p.get("text_cells"):
            text = (f"column {col!r} (for {var!r}) holds numbers, but {p['text_cells']} row(s) hold text "
                    f"such as {', '.join(repr(v) for v in p['text_values'])}; estimates refuse it and the "
                    "checks leave it out until those cells are fixed or treated as missing")
        elif role in NUMBER_ROLES:
            text = (f"column {col!r} holds {p.get('level_count')} text categories, but {var!r} is the "
                    f"{role} and must be a number (or two categories); map a numeric column")
        else:
            levels = p.get("levels") or []
            text = (f"column {col!r} holds text, so {var!r} will be read as {p.get('level_count')} categories "
                    f"(one indicator per level, {levels[0]!r} the reference level), not as a number")
            if _plain(var) == _plain(col):  # a category variable measured by its own column: said, not warned
                out.append({"variable": var, "column": col, "role": role, "text": text, "text_cells": 0,
                            "severity": "note"})
                continue
            text += f"; if {var!r} is a quantity or a score, map a numeric column"
        out.append({"variable": var, "column": col, "role": role, "text": text,
                    "text_cells": p.get("text_cells", 0), "severity": "warning"})
    return out


def _plain(name: str) -> str:
    return re.sub(r"[^0-9a-z]", "", name.lower())


def blank_text_cells(frame: pd.DataFrame, columns: Iterable[str]) -> pd.DataFrame:
    """The table with the text cells of the named (mostly numeric) columns made missing."""
    columns = [c for c in columns if c in frame.columns]
    if not columns:
        return frame
    frame = frame.copy()
    for col in columns:
        frame[col] = pd.to_numeric(frame[col].astype(str).str.strip().where(frame[col].notna()), errors="coerce")
    return frame
