"""The live hub: the WebSocket connections of each session and what is pushed to them.

The application layer (:class:`app.sessions.Sessions`) applies and stores each
change, then hands it here: frequent changes go out as a ``patch`` against the
previous revision, the others as the full ``state``. The analysis runner hands
each finished analysis here too, pushed as an ``analysis`` message carrying
the revision it belongs to. Each connection has its own send queue, so a slow
client never stalls the others.
"""

from __future__ import annotations

import asyncio
import json
import logging
from typing import Any

from ..sessions import Sessions
from ..sessions.keys import TOKEN_HEADER
from .push import slim_for_push
from ..workshop.events import public_event
from ..workshop.models import Workshop
from ..workshop.views import change_patch, public_state

__all__ = ["Hub", "Connection", "TOKEN_HEADER"]

log = logging.getLogger("arrowmoot")

SEND_QUEUE_LIMIT = 200
MEMBER_EVENTS = frozenset({"create", "join", "grant_role"})


class Connection:
    """One WebSocket client with its own send queue, so a slow client never stalls the others."""

    def __init__(self, websocket, member_id: str):
        self.websocket = websocket
        self.member_id = member_id
        self.queue: asyncio.Queue[str | None] = asyncio.Queue()
        self.task: asyncio.Task | None = None
        self.closed = False
        self.overflowed = False

    def start(self) -> None:
        self.task = asyncio.create_task(self._pump())

    async def _pump(self) -> None:
        try:
            while True:
                text = await self.queue.get()
                if text is None:
                    if self.overflowed:
                        # Too far behind: close, so the page reconnects and resyncs.
                        await self.websocket.close(code=1013)
                    return
                await self.websocket.send_text(text)
        except Exception:  # the client went away, however the socket says so: stop sending to it
            self.closed = True

    def send(self, text: str) -> None:
        if self.closed:
            return
        if self.queue.qsize() > SEND_QUEUE_LIMIT:
            # A client this far behind will resync from its revision on reconnect.
            self.closed = True
            self.overflowed = True
            self.queue.put_nowait(None)
            return
        self.queue.put_nowait(text)

    async def stop(self) -> None:
        self.closed = True
        self.queue.put_nowait(None)
        if self.task is not None:
            try:
                await asyncio.wait_for(self.task, timeout=2)
            except asyncio.TimeoutError:
                self.task.cancel()


class Hub:
    """Connections per session; pushes every stored change and every finished analysis."""

    def __init__(self, sessions: Sessions):
        self.sessions = sessions
        self._connections: dict[str, set[Connection]] = {}
        sessions.subscribe(self._publish)
        sessions.analysis.subscribe(self._publish_analysis)

    # -- pushing ---------------------------------------------------------------------
    def state_message(self, w: Workshop, *, members: bool = True, **extra: Any) -> str:
        """A full state push; ``members=False`` leaves out the member list (the page keeps
        the one it has), which only changes when someone joins or gets a role."""
        state = public_state(w, compact=True)
        if not members:
            del state["members"]
        return json.dumps({"type": "state", "revision": w.revision, "state": state, **extra})

    def _publish(self, w: Workshop, event: dict[str, Any] | None = None) -> None:
        conns = self._connections.get(w.id)
        if conns:
            shown = public_event(event) if event else None
            text = self.patch_message(w, event) if event else None
            if text is None:
                text = self.state_message(w, event=shown,
                                          members=event is None or event.get("kind") in MEMBER_EVENTS)
            for conn in list(conns):
                conn.send(text)

    def _publish_analysis(self, session_id: str, payload: dict[str, Any]) -> None:
        self._broadcast(session_id, self.analysis_message(payload))

    def patch_message(self, w: Workshop, event: dict[str, Any]) -> str | None:
        """A frequent change (a move, a vote, a proposal, an arrow, a new variable) as a
        patch against the previous revision, or None: then the full state goes out. A
        client that is not at the previous revision asks for a resync."""
        try:
            patch = change_patch(w, event)
        except Exception:  # a patch that cannot be built must never cost a push
            log.exception("could not build the patch for a %s; sending the full state",
                          event.get("kind"))
            return None
        if patch is None:
            return None
        return json.dumps({"type": "patch", "revision": w.revision, "base": w.revision - 1,
                           **patch, "event": public_event(event)})

    def _broadcast(self, session_id: str, text: str) -> None:
        for conn in list(self._connections.get(session_id, ())):
            conn.send(text)

    def connect(self, session_id: str, conn: Connection) -> None:
        self._connections.setdefault(session_id, set()).add(conn)
        conn.start()
        self._broadcast_presence(session_id)

    async def disconnect(self, session_id: str, conn: Connection) -> None:
        self._connections.get(session_id, set()).discard(conn)
        await conn.stop()
        self._broadcast_presence(session_id)

    def online(self, session_id: str) -> list[str]:
        return sorted({c.member_id for c in self._connections.get(session_id, ()) if not c.closed})

    def _broadcast_presence(self, session_id: str) -> None:
        self._broadcast(session_id, json.dumps({"type": "presence",
                                                "online": self.online(session_id)}))

    def connection_count(self, session_id: str) -> int:
        return len(self._connections.get(session_id, ()))

    def analysis_message(self, payload: dict[str, Any]) -> str:
        return json.dumps({"type": "analysis", "revision": payload.get("revision"),
                           **slim_for_push(payload)})

    async def close(self) -> None:
        for conns in self._connections.values():
            for conn in list(conns):
                try:
                    await conn.websocket.close(code=1001)
                except Exception:  # a socket can fail to close in many ways; close the others all the same
                    pass
                await conn.stop()
