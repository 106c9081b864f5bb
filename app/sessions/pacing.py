"""How fast one member may change a session, and which moves fold into one entry.

:class:`CommandPacer` is a token bucket per (session, member): a member may send
``burst`` commands at once and ``rate`` a second after that; past it a command is
refused with :class:`TooManyCommands` (429), saying how long to wait, and nothing
of it is applied. A move of the variable the member moved last, within
``MOVE_FOLD_S`` seconds, costs a tenth of a command: dragging and nudging stay
smooth, while a client that fires thousands of moves is still held back.

:func:`folds_into` tells the application layer when a move replaces the member's
previous move of the same variable in the history instead of adding an entry, so a
burst of moves leaves one line in the log.
"""

from __future__ import annotations

import threading
import time
from typing import Any

from ..errors import TooManyRequests

__all__ = ["CommandPacer", "TooManyCommands", "folds_into", "MOVE_FOLD_S"]

MOVE_FOLD_S = 2.0
MOVE_COST = 0.1


class TooManyCommands(TooManyRequests):
    code = "too_many_commands"

    def __init__(self, message: str, retry_after: float):
        super().__init__(message)
        self.retry_after = retry_after


def _is_move(command: Any) -> bool:
    return isinstance(command, dict) and command.get("type") == "move_variable"


def folds_into(previous: dict | None, member_id: str, command: Any, now: float) -> bool:
    """Whether a move by ``member_id`` replaces ``previous`` (the session's last event)."""
    if previous is None or not _is_move(command) or previous.get("kind") != "move_variable":
        return False
    return (previous.get("actor") == member_id
            and previous.get("command", {}).get("name") == command.get("name")
            and now - float(previous.get("at", 0)) <= MOVE_FOLD_S)


class CommandPacer:
    """At most ``burst`` commands at once and ``rate`` a second per member of a session."""

    MAX_MEMBERS = 20000

    def __init__(self, rate: float = 10.0, burst: float = 30.0, clock=time.monotonic):
        self.rate, self.burst, self.clock = rate, burst, clock
        self._buckets: dict[tuple[str, str], list] = {}  # -> [tokens, last refill, last moved]
        self._lock = threading.Lock()

    def take(self, session_id: str, member_id: str, command: Any) -> None:
        """Spend this command's share, or raise TooManyCommands (nothing is spent then)."""
        with self._lock:
            now = self.clock()
            key = (session_id, member_id)
            bucket = self._buckets.get(key)
            if bucket is None:
                if len(self._buckets) > self.MAX_MEMBERS:
                    self._forget_full(now)
                bucket = self._buckets[key] = [self.burst, now, None]
            bucket[0] = min(self.burst, bucket[0] + (now - bucket[1]) * self.rate)
            bucket[1] = now
            moved = command.get("name") if _is_move(command) else None
            cost = MOVE_COST if moved is not None and moved == bucket[2] else 1.0
            if bucket[0] < cost:
                wait = round((cost - bucket[0]) / self.rate, 1) or 0.1
                raise TooManyCommands(
                    f"you are sending changes faster than the room can follow (more than "
                    f"{self.rate:g} a second); this one was not applied. Wait {wait:g} s and send it again",
                    retry_after=wait)
            bucket[0] -= cost
            if moved is not None:
                bucket[2] = moved

    def _forget_full(self, now: float) -> None:
        """Drop members whose bucket has filled up again (they are quiet)."""
        for key, (tokens, last, _) in list(self._buckets.items()):
            if tokens + (now - last) * self.rate >= self.burst:
                del self._buckets[key]
