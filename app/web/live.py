"""The live hub: one place that applies changes, stores them and tells every client.

Per session there is one asyncio lock; a change is applied to the in-memory
workshop, written to SQLite (state + log event in one transaction), and only
then acknowledged and pushed to every connected client: frequent changes
as a ``patch`` against the previous revision, the others as the full
``state``. The analysis of the new diagram is computed in a worker process
(or thread) and pushed afterwards as an ``analysis`` message carrying the
revision it belongs to; when edits arrive faster than the analysis, only the
newest revision is analysed.
"""

from __future__ import annotations

import asyncio
import hashlib
import hmac
import json
import logging
import os
import secrets
import sys
import threading
import time
from pathlib import Path
from typing import Any

from ..errors import AppError, BadRequest, Forbidden, NotFound, Unauthorized
from ..store import Store
from ..workshop.commands import add_member, apply_command, new_workshop, public_event, read_document
from ..workshop.disputes import analyse_workshop, analysis_key
from .push import slim_for_push
from ..workshop.models import Member, Workshop
from ..workshop.views import change_patch, public_state

__all__ = ["Hub", "hash_token", "TOKEN_HEADER"]

log = logging.getLogger("arrowmoot")

TOKEN_HEADER = "X-Arrowmoot-Token"
JOIN_ALPHABET = "ABCDEFGHJKLMNPQRSTUVWXYZ23456789"
SEND_QUEUE_LIMIT = 200
MEMBER_EVENTS = frozenset({"create", "join", "grant_role"})


ROOT = Path(__file__).resolve().parent.parent.parent
WORKER_TIMEOUT = 60.0


class AnalysisWorker:
    """A child process (``python -m app.web.worker``) that runs the analysis, one state at a time."""

    def __init__(self):
        self.process: asyncio.subprocess.Process | None = None
        self.lock: asyncio.Lock | None = None

    async def _ensure(self) -> asyncio.subprocess.Process:
        if self.process is None or self.process.returncode is not None:
            env = dict(os.environ)
            env["PYTHONPATH"] = os.pathsep.join(p for p in (str(ROOT), env.get("PYTHONPATH")) if p)
            self.process = await asyncio.create_subprocess_exec(
                sys.executable, "-m", "app.web.worker", cwd=str(ROOT), env=env,
                stdin=asyncio.subprocess.PIPE, stdout=asyncio.subprocess.PIPE, limit=64 * 1024 * 1024,
            )
        return self.process

    async def analyse(self, state: dict) -> dict:
        if self.lock is None:
            self.lock = asyncio.Lock()
        async with self.lock:
            proc = await self._ensure()
            try:
                proc.stdin.write((json.dumps(state) + "\n").encode())
                await proc.stdin.drain()
                line = await asyncio.wait_for(proc.stdout.readline(), WORKER_TIMEOUT)
            except (asyncio.TimeoutError, ConnectionError, BrokenPipeError):
                await self.stop()
                raise RuntimeError("the analysis worker did not answer")
            if not line:
                await self.stop()
                raise RuntimeError("the analysis worker stopped")
            answer = json.loads(line)
            if not answer["ok"]:
                raise RuntimeError(answer["error"])
            return answer["result"]

    async def stop(self) -> None:
        proc, self.process = self.process, None
        if proc is None or proc.returncode is not None:
            return
        try:
            proc.stdin.close()
            await asyncio.wait_for(proc.wait(), 3)
        except Exception:
            proc.kill()


def _analysis_failed(exc: Exception) -> AppError:
    """A failure inside the analysis (a numerical error, say) as a message; nothing is kept."""
    if isinstance(exc, AppError):
        return exc
    log.error("analysis failed for a session: %s: %s", type(exc).__name__, exc)
    return AppError(f"the analysis of this diagram failed ({type(exc).__name__}); the session "
                    "is unchanged; try again after the next edit", code="analysis_failed", status=422)


def hash_token(token: str) -> str:
    return hashlib.sha256(token.encode("utf-8")).hexdigest()


def _new_token(member_id: str) -> str:
    return f"{member_id}.{secrets.token_urlsafe(24)}"


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
        except Exception:
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
            except Exception:
                pass


class Hub:
    def __init__(self, store: Store, *, use_processes: bool = True,
                 key_lifetime: float | None = None):
        self.store = store
        self.key_lifetime = key_lifetime  # seconds; None or 0: keys never expire
        self.worker = AnalysisWorker() if use_processes else None
        self._workshops: dict[str, Workshop] = {}
        self._locks: dict[str, asyncio.Lock] = {}
        self._connections: dict[str, set[Connection]] = {}
        self._analysis: dict[str, dict[str, Any]] = {}
        self._analysis_by_key: dict[str, tuple[str, dict[str, Any]]] = {}
        self._analysis_tasks: dict[str, asyncio.Task] = {}
        self._analysis_dirty: set[str] = set()
        self._keyed: dict[str, tuple[int, dict[str, dict[str, Any]]]] = {}
        self._load_lock = threading.Lock()

    # -- loading ----------------------------------------------------------------
    def workshop(self, session_id: str) -> Workshop:
        """The live workshop (load from the store on first use) or NotFound."""
        w = self._workshops.get(session_id)
        if w is None:
            # A lock so two threads loading the same session cannot end up editing
            # two different copies of it.
            with self._load_lock:
                w = self._workshops.get(session_id)
                if w is None:
                    loaded = (self.store.load_session(session_id)
                              if isinstance(session_id, str) else None)
                    if loaded is None:
                        raise NotFound("there is no session with that id", code="unknown_session")
                    state, revision = loaded
                    state["revision"] = revision
                    log_events = self.store.list_events(session_id=session_id, after_revision=-1)
                    w = Workshop.from_state(state, log_events)
                    self._workshops[session_id] = w
        return w

    def _lock(self, session_id: str) -> asyncio.Lock:
        lock = self._locks.get(session_id)
        if lock is None:
            lock = self._locks[session_id] = asyncio.Lock()
        return lock

    # -- members and tokens --------------------------------------------------------
    def authenticate(self, session_id: str, token: str | None) -> Member:
        if not token:
            raise Unauthorized(
                f"this needs your session key; send it in the {TOKEN_HEADER} header",
                code="no_token",
            )
        member_id, _, _ = token.partition(".")
        found = self.store.find_member_token(member_id) if member_id else None
        digest = hash_token(token)
        if found is None or not hmac.compare_digest(found[1], digest):
            raise Unauthorized("that session key is not valid", code="bad_token")
        if found[0] != session_id:
            raise Forbidden("that key belongs to another session", code="wrong_session")
        if self.key_lifetime:
            issued = self.store.token_created(digest)
            if issued is not None and time.time() - issued > self.key_lifetime:
                raise Unauthorized("that session key has expired; join again with the join code, or "
                                   "ask the facilitator; a facilitator's key is re-issued on the server's "
                                   "machine with `arrowmoot key SESSION_ID`", code="expired_token")
        member = self.workshop(session_id).members.get(member_id)
        if member is None:
            raise Unauthorized("that session key is not valid", code="bad_token")
        return member

    def create_session(self, *, title: Any, facilitator_name: Any = None, document: Any = None,
                       treatment: Any = None, outcome: Any = None, document_text: Any = None,
                       document_format: Any = None) -> tuple[Workshop, str]:
        """Create a session; return it and the facilitator's token (shown once)."""
        session_id = secrets.token_urlsafe(9)
        member_id = "m" + secrets.token_hex(6)
        for _ in range(50):
            join_code = "".join(secrets.choice(JOIN_ALPHABET) for _ in range(6))
            if not self.store.join_code_taken(join_code):
                break
        now = time.time()
        if document_text is not None:
            document = dict(read_document(None, document_text, document_format), _validated=True)
        w, event = new_workshop(
            session_id=session_id, title=title if isinstance(title, str) else "",
            join_code=join_code, facilitator_id=member_id,
            facilitator_name=facilitator_name if isinstance(facilitator_name, str) else "",
            document=document, treatment=treatment, outcome=outcome, now=now,
        )
        token = _new_token(member_id)
        self.store.create_session(session_id=session_id, title=w.title, join_code=join_code,
                                  state=w.to_state(), revision=w.revision, event=event,
                                  token_hash=hash_token(token), member_id=member_id)
        self._workshops[session_id] = w
        return w, token

    def find_by_join_code(self, code: Any) -> Workshop:
        if not isinstance(code, str) or not code.strip():
            raise BadRequest("enter the join code the facilitator gave you", code="no_join_code")
        session_id = self.store.find_session_by_join_code(code.strip().upper().replace(" ", ""))
        if session_id is None:
            raise NotFound("no session has that join code; check it with the facilitator",
                           code="unknown_join_code")
        return self.workshop(session_id)

    async def join(self, code: Any, name: Any) -> tuple[Workshop, Member, str]:
        w = self.find_by_join_code(code)
        async with self._lock(w.id):
            w = self.workshop(w.id)  # the live copy, should a failed store have replaced it
            member_id = "m" + secrets.token_hex(6)
            backup = (dict(w.members), w.revision, len(w.log))
            member, event = add_member(w, member_id=member_id, name=name, now=time.time())
            token = _new_token(member_id)
            try:
                self.store.save_change(session_id=w.id, state=w.to_state(), revision=w.revision,
                                       event=event, token_hash=hash_token(token),
                                       member_id=member_id)
            except Exception:
                w.members, w.revision = backup[0], backup[1]
                del w.log[backup[2]:]
                raise
        await self._publish(w, event)
        return w, member, token

    # -- changes ------------------------------------------------------------------
    async def submit(self, session_id: str, member: Member, command: Any,
                     key: Any = None) -> dict[str, Any]:
        """Apply, store and broadcast one command; return its event.

        ``key`` (optional, text of at most 100 characters, unique per member) makes a
        resent command harmless: a key already applied returns the event it made,
        marked ``"replayed": True``, and changes nothing. Keys are kept in the stored
        events, so they still match after a restart.
        """
        if key is not None and (not isinstance(key, str) or not 0 < len(key) <= 100):
            raise BadRequest("a command key must be text of 1 to 100 characters",
                             code="invalid_key")
        self.workshop(session_id)  # NotFound for an unknown session
        if self.store.get_attachment(session_id, "record.read_only"):
            # reopened read-only from a record bundle (app.web.routes.records)
            raise AppError("this session was reopened read-only from a record; import the bundle "
                           "as a new session to change it", code="read_only", status=409)
        async with self._lock(session_id):
            # Fetched under the lock: a change that failed to store while this one waited
            # has dropped the copy it had changed.
            w = self.workshop(session_id)
            if key is not None:
                earlier = self._find_keyed(session_id, f"{member.id}:{key}")
                if earlier is not None:
                    return dict(earlier, replayed=True)
            event = apply_command(w, w.members.get(member.id, member), command, now=time.time())
            if key is not None:
                event["key"] = f"{member.id}:{key}"
            try:
                self.store.save_change(session_id=session_id, state=w.to_state(),
                                       revision=w.revision, event=event,
                                       mark_undone=event.get("undoes"))
            except Exception:
                # Nothing was stored (one transaction), so the store still holds the
                # session as it was: drop the changed copy and read it again from there
                # when next used, as after a restart. (No copy of the whole state is
                # kept per edit for this rare case.)
                self._workshops.pop(session_id, None)
                self._keyed.pop(session_id, None)
                raise
        await self._publish(w, event)
        return event

    def _find_keyed(self, session_id: str, full_key: str) -> dict[str, Any] | None:
        w = self.workshop(session_id)
        keyed = self._keyed.get(session_id)
        if keyed is None or keyed[0] > len(w.log):
            keyed = (0, {})
        seen_len, table = keyed
        for event in w.log[seen_len:]:
            if "key" in event:
                table[event["key"]] = event
        self._keyed[session_id] = (len(w.log), table)
        return table.get(full_key)

    async def note(self, session_id: str, member: Member | None, summary: str,
                   kind: str = "note", **extra: Any) -> dict[str, Any]:
        """Log an event from another part of the app (e.g. data attached) and push it."""
        w = self.workshop(session_id)
        async with self._lock(session_id):
            w = self.workshop(session_id)
            w.revision += 1
            event = {"revision": w.revision, "at": time.time(),
                     "actor": member.id if member else None,
                     "actor_name": member.name if member else "the server", "kind": kind,
                     "summary": summary, "command": {"type": kind}, "undoable": False,
                     "undone": False, **extra}
            w.log.append(event)
            try:
                self.store.save_change(session_id=session_id, state=w.to_state(),
                                       revision=w.revision, event=event)
            except Exception:
                w.revision -= 1
                w.log.pop()
                raise
        await self._publish(w, event)
        return event

    # -- pushing ---------------------------------------------------------------------
    def state_message(self, w: Workshop, *, members: bool = True, **extra: Any) -> str:
        """A full state push; ``members=False`` leaves out the member list (the page keeps
        the one it has), which only changes when someone joins or gets a role."""
        state = public_state(w, compact=True)
        if not members:
            del state["members"]
        return json.dumps({"type": "state", "revision": w.revision, "state": state, **extra})

    async def _publish(self, w: Workshop, event: dict[str, Any] | None = None) -> None:
        conns = self._connections.get(w.id)
        if conns:
            shown = public_event(event) if event else None
            text = self.patch_message(w, event) if event else None
            if text is None:
                text = self.state_message(w, event=shown,
                                          members=event is None or event.get("kind") in MEMBER_EVENTS)
            for conn in list(conns):
                conn.send(text)
        if not (event and event.get("kind") == "move_variable"):
            self.schedule_analysis(w.id)  # positions do not change the analysis

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

    # -- analysis ------------------------------------------------------------------------
    def cached_analysis(self, session_id: str) -> dict[str, Any] | None:
        w = self.workshop(session_id)
        cached = self._analysis.get(session_id)
        if cached is not None and cached["revision"] == w.revision:
            return cached
        key = analysis_key(w)
        hit = self._analysis_by_key.get(session_id)
        if hit is not None and hit[0] == key:
            payload = dict(hit[1], revision=w.revision)
            self._analysis[session_id] = payload
            return payload
        return None

    def analysis_now(self, session_id: str) -> dict[str, Any]:
        """The analysis of the current revision, computed here (in this thread) if not cached."""
        cached = self.cached_analysis(session_id)
        if cached is not None:
            return cached
        w = self.workshop(session_id)
        snapshot = Workshop.from_state(w.to_state())
        try:
            result = analyse_workshop(snapshot)
        except Exception as exc:
            raise _analysis_failed(exc) from None
        return self._store_analysis(session_id, snapshot, result)

    async def analysis_soon(self, session_id: str) -> dict[str, Any]:
        """:meth:`analysis_now` for async code: computed off the event loop on a snapshot."""
        cached = self.cached_analysis(session_id)
        if cached is not None:
            return cached
        w = self.workshop(session_id)
        state = w.to_state()
        snapshot = Workshop.from_state(state)
        try:
            result = await self._compute(state, snapshot)
        except Exception as exc:
            raise _analysis_failed(exc) from None
        return self._store_analysis(session_id, snapshot, result)

    def _store_analysis(self, session_id: str, snapshot: Workshop, result: dict) -> dict[str, Any]:
        payload = dict(result, revision=snapshot.revision)
        self._analysis_by_key[session_id] = (analysis_key(snapshot), payload)
        if snapshot.revision == self.workshop(session_id).revision:
            self._analysis[session_id] = payload
        return payload

    def schedule_analysis(self, session_id: str) -> None:
        try:
            loop = asyncio.get_running_loop()
        except RuntimeError:
            return
        task = self._analysis_tasks.get(session_id)
        if task is not None and not task.done():
            self._analysis_dirty.add(session_id)
            return
        self._analysis_tasks[session_id] = loop.create_task(self._run_analysis(session_id))

    async def _run_analysis(self, session_id: str) -> None:
        while True:
            self._analysis_dirty.discard(session_id)
            w = self.workshop(session_id)
            cached = self.cached_analysis(session_id)
            if cached is None:
                state = w.to_state()
                snapshot = Workshop.from_state(state)
                key = analysis_key(snapshot)
                try:
                    result = await self._compute(state, snapshot)
                except Exception:
                    log.exception("analysis failed for a session")
                    result = {"analysis": None, "problem": "the analysis failed on this diagram",
                              "disputes": None, "absent": None}
                payload = dict(result, revision=snapshot.revision)
                self._analysis_by_key[session_id] = (key, payload)
                if snapshot.revision == self.workshop(session_id).revision:
                    self._analysis[session_id] = payload
                cached = self.cached_analysis(session_id) or payload
            self._broadcast(session_id, self.analysis_message(cached))
            if session_id not in self._analysis_dirty:
                return

    async def _compute(self, state: dict, snapshot: Workshop) -> dict:
        if self.worker is not None:
            try:
                return await self.worker.analyse(state)
            except Exception as exc:
                log.warning("analysis worker failed (%s); analysing in a thread instead", exc)
        return await asyncio.to_thread(analyse_workshop, snapshot)

    def analysis_message(self, payload: dict[str, Any]) -> str:
        return json.dumps({"type": "analysis", "revision": payload.get("revision"),
                           **slim_for_push(payload)})

    async def wait_analysis(self, session_id: str) -> None:
        task = self._analysis_tasks.get(session_id)
        while task is not None and not task.done():
            await task
            task = self._analysis_tasks.get(session_id)

    async def close(self) -> None:
        for conns in self._connections.values():
            for conn in list(conns):
                try:
                    await conn.websocket.close(code=1001)
                except Exception:
                    pass
                await conn.stop()
        for task in self._analysis_tasks.values():
            task.cancel()
        if self.worker is not None:
            await self.worker.stop()

    # -- helpers for others -------------------------------------------------------------
    def require_stage(self, session_id: str, *stages: str) -> Workshop:
        w = self.workshop(session_id)
        if w.stage not in stages:
            raise AppError(
                f"this needs the session in the {' or '.join(stages)} stage; it is in {w.stage}",
                code="wrong_stage", status=409,
            )
        return w
