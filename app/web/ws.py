"""The WebSocket: live state for one session.

Protocol (JSON text frames):

client -> {"type": "hello", "token": "...", "revision": <last seen or null>}   (first frame)
server -> {"type": "welcome", "member": {...}, "online": [...]}
server -> {"type": "state", "revision": n, "state": {...}, "missed": [events after the client's revision]}
server -> {"type": "patch", "revision": n, "base": n-1, "event": {...}, <parts>}   for moves, arrows,
          votes, proposals and new variables: only what changed (the parts are listed above
          ``change_patch`` in app/workshop/views.py); a client not at ``base`` sends a resync
server -> {"type": "analysis", "revision": n, "analysis": {...} | null, "problem": str | null, ...}
client -> {"type": "command", "id": <any>, "key": "<optional, unique per member>", "command": {"type": "add_arrow", ...}}
server -> {"type": "ack", "id": <same>, "revision": n}   (+ "replayed": true when the key was applied before: nothing changed)  or  {"type": "error", "id": ..., "error": ..., "code": ..., "status": ...}
client -> {"type": "resync", "revision": n}   server answers with a state message
client -> {"type": "ping"}                    server -> {"type": "pong"}
server -> {"type": "presence", "online": [member ids]}
"""

from __future__ import annotations

import asyncio
import json
from urllib.parse import urlparse

from fastapi import APIRouter, WebSocket, WebSocketDisconnect

from ..errors import AppError, BadMessage, MessageTooLarge
from ..sessions import Sessions
from ..workshop.events import public_event
from .errors import error_extra, status_of
from .live import Connection, Hub

router = APIRouter()

HELLO_TIMEOUT = 15.0
MISSED_LIMIT = 200


def _origin_allowed(websocket: WebSocket) -> bool:
    origin = websocket.headers.get("origin")
    if origin is None:
        return True  # not a browser
    allowed = websocket.app.state.settings.allowed_origins
    if origin in allowed or "*" in allowed:
        return True
    return urlparse(origin).netloc == websocket.headers.get("host")


def _error(exc: AppError, msg_id=None) -> str:
    return json.dumps({"type": "error", "id": msg_id, "ok": False, "error": exc.message,
                       "status": status_of(exc), "code": exc.code, **error_extra(exc)})


@router.websocket("/ws/sessions/{session_id}")
async def session_socket(websocket: WebSocket, session_id: str) -> None:
    hub: Hub = websocket.app.state.hub
    sessions: Sessions = websocket.app.state.sessions
    if not _origin_allowed(websocket):
        await websocket.close(code=4403)
        return
    await websocket.accept()
    try:
        hello = json.loads(await asyncio.wait_for(websocket.receive_text(), HELLO_TIMEOUT))
        if not isinstance(hello, dict) or hello.get("type") != "hello":
            raise BadMessage("the first message must be {\"type\": \"hello\", \"token\": ...}",
                             code="no_hello")
        sessions.workshop(session_id)
        member = sessions.authenticate(session_id, hello.get("token"))
    except (asyncio.TimeoutError, WebSocketDisconnect, json.JSONDecodeError, AppError) as exc:
        if isinstance(exc, AppError):
            await websocket.send_text(_error(exc))
            await websocket.close(code=4000 + status_of(exc))
        elif isinstance(exc, json.JSONDecodeError):
            await websocket.send_text(_error(BadMessage("messages must be JSON", code="bad_json")))
            await websocket.close(code=4400)
        else:
            try:
                await websocket.close(code=4408)
            except (RuntimeError, OSError):  # the client is already gone
                pass
        return

    limit = websocket.app.state.settings.request_limit_bytes
    conn = Connection(websocket, member.id)
    # No await between building the state and registering the connection, so no
    # change can slip between them.
    w = sessions.workshop(session_id)
    conn.send(json.dumps({"type": "welcome", "member": member.to_public(),
                          "online": sorted(set(hub.online(session_id)) | {member.id})}))
    conn.send(_state_with_missed(hub, session_id, hello.get("revision")))
    hub.connect(session_id, conn)
    try:
        cached = sessions.analysis.cached(session_id)
        if cached is not None:
            conn.send(hub.analysis_message(cached))
        else:
            sessions.analysis.schedule(session_id)
        while True:
            try:
                text = await websocket.receive_text()
            except RuntimeError:
                # The connection was closed from this side (its send queue overflowed,
                # so the page reconnects and resyncs): nothing more to read.
                if conn.closed:
                    break
                raise
            if len(text) > limit:
                conn.send(_error(MessageTooLarge(f"a message is limited to {limit // 1024} KB; this one "
                                                 f"is {len(text) // 1024} KB and was ignored")))
                continue
            try:
                message = json.loads(text)
            except json.JSONDecodeError:
                conn.send(_error(BadMessage("messages must be JSON", code="bad_json")))
                continue
            if not isinstance(message, dict):
                conn.send(_error(BadMessage("a message must be a JSON object")))
                continue
            kind = message.get("type")
            if kind == "command":
                msg_id = message.get("id")
                try:
                    event = await sessions.submit(session_id, member, message.get("command"),
                                             key=message.get("key"))
                except AppError as exc:
                    conn.send(_error(exc, msg_id))
                    continue
                conn.send(json.dumps({"type": "ack", "id": msg_id, "revision": event["revision"],
                                      "event": public_event(event),
                                      **({"replayed": True} if event.get("replayed") else {})}))
            elif kind == "resync":
                conn.send(_state_with_missed(hub, session_id, message.get("revision")))
            elif kind == "ping":
                conn.send(json.dumps({"type": "pong", "revision": w.revision}))
            else:
                conn.send(_error(BadMessage(f"unknown message type {kind!r}")))
    except WebSocketDisconnect:
        pass
    finally:
        await hub.disconnect(session_id, conn)


def _state_with_missed(hub: Hub, session_id: str, revision) -> str:
    w = hub.sessions.workshop(session_id)
    missed = []
    if isinstance(revision, int) and not isinstance(revision, bool) and revision < w.revision:
        missed = [public_event(e) for e in w.log if e["revision"] > revision][-MISSED_LIMIT:]
    return hub.state_message(w, missed=missed, since=revision if isinstance(revision, int) else None)
