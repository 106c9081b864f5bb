"""Recognise the data files shipped in sample_data/ (invented, for the demo only) by their
SHA-256 digest, so pages and reports can say plainly when a number comes from them."""

from __future__ import annotations

import hashlib
from functools import lru_cache
from pathlib import Path

__all__ = ["SAMPLE_DIR", "is_sample_digest", "is_sample_file"]

SAMPLE_DIR = Path(__file__).resolve().parents[2] / "sample_data"


def _digest(path: Path) -> str:
    digest = hashlib.sha256()
    with open(path, "rb") as handle:
        for chunk in iter(lambda: handle.read(1 << 20), b""):
            digest.update(chunk)
    return digest.hexdigest()


@lru_cache(maxsize=1)
def _shipped() -> dict[int, frozenset[str]]:
    """File size -> digests of the shipped data files of that size."""
    out: dict[int, set[str]] = {}
    for path in sorted(SAMPLE_DIR.glob("*")):
        if path.suffix in (".csv", ".parquet") and path.is_file():
            out.setdefault(path.stat().st_size, set()).add(_digest(path))
    return {size: frozenset(found) for size, found in out.items()}


def is_sample_digest(sha256: str | None) -> bool:
    return bool(sha256) and any(sha256 in found for found in _shipped().values())


def is_sample_file(path: str | Path) -> bool:
    """True when the file has the bytes of a shipped sample (sizes compared first, so a large
    upload is never hashed for this)."""
    path = Path(path)
    found = _shipped().get(path.stat().st_size) if path.is_file() else None
    return bool(found) and _digest(path) in found
