"""Speaking the WebSocket protocol from a test client."""

from __future__ import annotations

__all__ = ["hello", "receive_until"]


def hello(ws, token, revision=None):
    ws.send_json({"type": "hello", "token": token, "revision": revision})
    welcome = ws.receive_json()
    assert welcome["type"] == "welcome", welcome
    state = ws.receive_json()
    assert state["type"] == "state"
    return welcome, state


def receive_until(ws, kind, predicate=lambda m: True, limit=20):
    """Read messages until one of ``kind`` matches (the test client blocks if none comes)."""
    for _ in range(limit):
        message = ws.receive_json()
        if message["type"] == kind and predicate(message):
            return message
    raise AssertionError(f"no {kind} message")
