"""A small room diagram and a way to wait on a page, for the browser tests."""

from __future__ import annotations

import time

__all__ = ["DOCUMENT", "TOKEN_HEADER", "wait"]

TOKEN_HEADER = "X-Arrowmoot-Token"
# age confounds bike_lease -> sick_days: one back-door path, blocked by { age }.
DOCUMENT = {
    "format": "arrowmoot-graph", "version": 1,
    "variables": [{"name": n, "x": x, "y": y} for n, x, y in (
        ("age", 120, 80), ("bike_lease", 120, 320), ("fitness", 420, 200), ("sick_days", 720, 320),
        ("commute", 420, 460))],
    "arrows": [{"from": a, "to": b} for a, b in (
        ("age", "bike_lease"), ("age", "sick_days"), ("bike_lease", "fitness"), ("fitness", "sick_days"))],
    "treatment": ["bike_lease"], "outcome": ["sick_days"],
}


def wait(page, expression, what, seconds=20.0):
    """Poll ``expression`` (the page's policy forbids the eval that wait_for_function uses)."""
    deadline = time.monotonic() + seconds
    while not page.evaluate(expression):
        if time.monotonic() > deadline:
            raise AssertionError(f"the page never got {what}")
        page.wait_for_timeout(25)
