"""Ids, keys and join codes: how they are made, hashed, compared and expired.

A member's key is ``<member id>.<secret>``; only its SHA-256 digest is stored.
The member id in front lets the store find the one digest to compare, so the
lookup never depends on the secret part, and the comparison is constant-time.
A join code is six characters from an alphabet without look-alikes (no I/1,
O/0), unique among the open sessions.
"""

from __future__ import annotations

import hashlib
import hmac
import secrets
import time

__all__ = [
    "JOIN_ALPHABET", "JOIN_CODE_LENGTH", "new_session_id", "new_member_id", "new_key",
    "new_join_code", "hash_key", "key_member_id", "key_matches", "is_expired", "normalise_join_code",
    "TOKEN_HEADER",
]

JOIN_ALPHABET = "ABCDEFGHJKLMNPQRSTUVWXYZ23456789"
JOIN_CODE_LENGTH = 6
JOIN_CODE_TRIES = 50


def new_session_id() -> str:
    return secrets.token_urlsafe(9)


def new_member_id() -> str:
    return "m" + secrets.token_hex(6)


def new_key(member_id: str) -> str:
    """A fresh key for ``member_id`` (shown once, never stored)."""
    return f"{member_id}.{secrets.token_urlsafe(24)}"


def hash_key(key: str) -> str:
    return hashlib.sha256(key.encode("utf-8")).hexdigest()


def key_member_id(key: str) -> str:
    """The member id a key names (empty for text that is not a key)."""
    member_id, _, _ = key.partition(".")
    return member_id


def key_matches(stored_digest: str, key: str) -> bool:
    """Whether ``key`` hashes to ``stored_digest``, compared in constant time."""
    return hmac.compare_digest(stored_digest, hash_key(key))


def is_expired(issued_at: float | None, lifetime: float | None, *, now: float | None = None) -> bool:
    """A key issued at ``issued_at`` has expired after ``lifetime`` seconds (None or 0: never)."""
    if not lifetime or issued_at is None:
        return False
    return (time.time() if now is None else now) - issued_at > lifetime


def new_join_code(is_taken) -> str:
    """A join code for which ``is_taken(code)`` is false (after 50 tries, the last one drawn)."""
    code = ""
    for _ in range(JOIN_CODE_TRIES):
        code = "".join(secrets.choice(JOIN_ALPHABET) for _ in range(JOIN_CODE_LENGTH))
        if not is_taken(code):
            break
    return code


def normalise_join_code(code: str) -> str:
    """A join code as typed (any case, spaces) in the form it is stored."""
    return code.strip().upper().replace(" ", "")

# The HTTP header that carries a key (named in the messages of every layer that asks for one).
TOKEN_HEADER = "X-Arrowmoot-Token"
