"""The application layer: every way a session is opened, entered or changed.

:class:`Sessions` owns the live workshops (read from the store on first use),
one asyncio lock per session, the members' keys and the analysis runner. A
change is applied to the live workshop, written to the store (state and log
event in one transaction) and only then handed to the subscribers (the live
hub pushes it to every page) and the analysis scheduled. When the store
refuses a change, the changed copy is dropped and read again from the store
when next used, so memory never holds what the store does not.

The web routes, the WebSocket, the command line, the record import and the
app factory all come through here; nothing above this layer writes the store.
"""

from __future__ import annotations

import asyncio
import shutil
import threading
import time
from pathlib import Path
from typing import Any, Callable

from ..errors import (
    AppError, BadKey, SessionBusy, BadRequest, ExpiredKey, NoKey, NotFound, UnknownJoinCode, UnknownSession, WrongSession, WrongStage,
)
from ..estimation.design import propose_mapping
from ..estimation.tables import load_table
from ..graph.errors import DiagramError
from ..reporting.bundle import BundleError, attachments_from_bundle, restore_workshop
from ..storage import StaleRevision, Store
from ..workshop.commands import add_member, apply_command, new_workshop, read_document
from ..workshop.events import Event, new_event
from ..workshop.models import Member, Role, Workshop
from . import keys
from .analysis import AnalysisRunner
from .data import DATA_KEY, data_info, stored_name
from .pacing import CommandPacer, folds_into

__all__ = ["Sessions", "SOURCE_KEY", "IMPORT_MODES"]

# Older databases marked a read-only session with this attachment; loading one
# turns it into readers (see Sessions.workshop).
READ_ONLY_KEY = "record.read_only"
SOURCE_KEY = "record.source"
IMPORT_MODES = ("new", "read-only")
MAX_COMMAND_KEY = 100
# Times a change is redone on a fresh copy when another server process stored a
# change to the same session first (the database decides the order).
STALE_RETRIES = 20

Listener = Callable[[Workshop, "Event | None"], None]


class Sessions:
    """Create, join, authenticate, submit (idempotently), note, import and attach data."""

    def __init__(self, store: Store, *, key_lifetime: float | None = None,
                 use_processes: bool = True):
        self.store = store
        self.key_lifetime = key_lifetime  # seconds; None or 0: keys never expire
        self.analysis = AnalysisRunner(self.workshop, use_processes=use_processes)
        self._workshops: dict[str, Workshop] = {}
        self._locks: dict[str, asyncio.Lock] = {}
        self._keyed: dict[str, tuple[int, dict[str, Event]]] = {}
        self._listeners: list[Listener] = []
        self._load_lock = threading.Lock()
        self.pacer = CommandPacer()

    def subscribe(self, listener: Listener) -> None:
        """Call ``listener(workshop, event)`` after every stored change."""
        self._listeners.append(listener)

    # -- loading ----------------------------------------------------------------------
    def workshop(self, session_id: str) -> Workshop:
        """The live workshop (read from the store on first use) or NotFound."""
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
                        raise UnknownSession("there is no session with that id")
                    state, revision = loaded
                    state["revision"] = revision
                    log_events = self.store.list_events(session_id=session_id, after_revision=-1)
                    w = Workshop.from_state(state, log_events)
                    if self.store.get_attachment(session_id, READ_ONLY_KEY):
                        _make_read_only(w)
                    self._workshops[session_id] = w
        return w

    def _lock(self, session_id: str) -> asyncio.Lock:
        lock = self._locks.get(session_id)
        if lock is None:
            lock = self._locks[session_id] = asyncio.Lock()
        return lock

    def _drop(self, session_id: str) -> None:
        """Forget the live copy; the next use reads the session from the store, as after a restart."""
        self._workshops.pop(session_id, None)
        self._keyed.pop(session_id, None)

    def _save(self, w: Workshop, event: Event, before: int, **extra: Any) -> bool:
        """Store the change just made to ``w`` (at revision ``before`` until then); if the store
        refuses it, drop the changed copy. False when another process stored a change to the
        session first: the copy is dropped and the change must be made again on a fresh one."""
        stored = False
        try:
            self.store.save_change(session_id=w.id, state=w.to_state(), revision=w.revision,
                                   event=event, expected_revision=before, **extra)
            stored = True
        except StaleRevision:
            return False
        finally:
            if not stored:
                # Nothing was stored (one transaction), so the store still holds the
                # session as it was. (No copy of the whole state is kept per edit for
                # this rare case.)
                self._drop(w.id)
        return True

    @staticmethod
    def _too_busy() -> AppError:
        return SessionBusy("the session changed many times while this change was being stored; send it again")

    def _changed(self, w: Workshop, event: Event | None) -> None:
        for listener in list(self._listeners):
            listener(w, event)
        if not (event and event.get("kind") == "move_variable"):
            self.analysis.schedule(w.id)  # positions do not change the analysis

    # -- changes stored by other server processes -------------------------------------
    def follow_other_processes(self) -> None:
        """Hear of changes other server processes store (PostgreSQL), and publish them here too.

        Called once the event loop runs; the store's listener thread hands each notice
        to the loop. With SQLite (one process) there is nothing to hear."""
        loop = asyncio.get_running_loop()

        def heard(session_id: str | None, revision: int) -> None:
            loop.call_soon_threadsafe(self._catch_up, session_id, revision)

        self.store.listen(heard)

    def _catch_up(self, session_id: str | None, revision: int) -> None:
        """Read again a live session another process changed (every live one for ``None``,
        after notices may have been missed) and publish what changed: the one new event
        as itself, several as the full state."""
        for sid in [session_id] if session_id else list(self._workshops):
            old = self._workshops.get(sid)
            if old is None or (session_id and old.revision >= revision):
                continue  # not live here, or this process's own change
            if self._lock(sid).locked():  # a change is being made here; look again just after it
                asyncio.get_running_loop().call_later(0.05, self._catch_up, sid, revision)
                continue
            self._drop(sid)
            try:
                w = self.workshop(sid)
            except NotFound:
                continue
            if w.revision == old.revision:
                continue
            new = [e for e in w.log if e["revision"] > old.revision]
            self._changed(w, new[0] if len(new) == 1 and w.revision == old.revision + 1 else None)

    # -- keys -------------------------------------------------------------------------
    def authenticate(self, session_id: str, key: str | None) -> Member:
        """The member whose key this is, or Unauthorized / Forbidden."""
        if not key:
            raise NoKey(f"this needs your session key; send it in the {keys.TOKEN_HEADER} header")
        member_id = keys.key_member_id(key)
        found = self.store.find_member_token(member_id) if member_id else None
        if found is None or not keys.key_matches(found[1], key):
            raise BadKey("that session key is not valid")
        if found[0] != session_id:
            raise WrongSession("that key belongs to another session")
        if keys.is_expired(self.store.token_created(found[1]), self.key_lifetime):
            raise ExpiredKey("that session key has expired; join again with the join code, or "
                             "ask the facilitator; a facilitator's key is re-issued on the server's "
                             "machine with `arrowmoot key SESSION_ID`")
        member = self.workshop(session_id).members.get(member_id)
        if member is None:
            raise BadKey("that session key is not valid")
        return member

    def reissue_key(self, session_id: str, member_name: str | None = None) -> tuple[Member, str]:
        """A new key for the facilitator (or the member of that display name); the old one stops working."""
        loaded = self.store.load_session(session_id)
        if loaded is None:
            raise UnknownSession(f"no session {session_id!r} in this database; `arrowmoot sessions` lists them")
        members = list(Workshop.from_state(loaded[0]).members.values())
        if member_name:
            wanted = member_name.strip().casefold()
            chosen = [m for m in members if m.name.strip().casefold() == wanted]
            who = f"no member named {member_name!r}"
        else:
            chosen = [m for m in members if m.is_facilitator]
            who = "no facilitator"
        if len(chosen) != 1:
            names = ", ".join(sorted(m.name for m in members)) or "none"
            problem = who if not chosen else f"{len(chosen)} members match {member_name or 'facilitator'!r}"
            raise NotFound(f"{problem} in session {session_id!r} (members: {names})",
                           code="unknown_member")
        member = chosen[0]
        key = keys.new_key(member.id)
        self.store.replace_member_token(session_id=session_id, member_id=member.id,
                                        token_hash=keys.hash_key(key))
        return member, key

    def storage_status(self) -> dict[str, Any]:
        """Whether the database answers, its kind and its schema version (for a readiness check)."""
        ready = self.store.is_ready()
        return {"ready": ready, "store": self.store.kind,
                "schema_version": self.store.schema_version() if ready else None}

    def list_sessions(self) -> list[tuple[dict[str, Any], list[Member]]]:
        """Every stored session's row with its members (for the command line)."""
        out = []
        for row in self.store.list_sessions():
            loaded = self.store.load_session(row["id"])
            members = list(Workshop.from_state(loaded[0]).members.values()) if loaded else []
            out.append((row, members))
        return out

    # -- opening and joining ------------------------------------------------------------
    def create(self, *, title: Any, facilitator_name: Any = None, document: Any = None,
               treatment: Any = None, outcome: Any = None, document_text: Any = None,
               document_format: Any = None) -> tuple[Workshop, str]:
        """Open a session; return it and the facilitator's key (shown once)."""
        session_id = keys.new_session_id()
        member_id = keys.new_member_id()
        join_code = keys.new_join_code(self.store.join_code_taken)
        if document_text is not None:
            document = dict(read_document(None, document_text, document_format), _validated=True)
        w, event = new_workshop(
            session_id=session_id, title=title if isinstance(title, str) else "",
            join_code=join_code, facilitator_id=member_id,
            facilitator_name=facilitator_name if isinstance(facilitator_name, str) else "",
            document=document, treatment=treatment, outcome=outcome, now=time.time(),
        )
        key = keys.new_key(member_id)
        self.store.create_session(session_id=session_id, title=w.title, join_code=join_code,
                                  state=w.to_state(), revision=w.revision, event=event,
                                  token_hash=keys.hash_key(key), member_id=member_id)
        self._workshops[session_id] = w
        return w, key

    def find_by_join_code(self, code: Any) -> Workshop:
        if not isinstance(code, str) or not code.strip():
            raise BadRequest("enter the join code the facilitator gave you", code="no_join_code")
        session_id = self.store.find_session_by_join_code(keys.normalise_join_code(code))
        if session_id is None:
            raise UnknownJoinCode("no session has that join code; check it with the facilitator")
        return self.workshop(session_id)

    async def join(self, code: Any, name: Any) -> tuple[Workshop, Member, str]:
        """Join with a join code and a display name; return the member and their key."""
        w = self.find_by_join_code(code)
        for _ in range(STALE_RETRIES):
            async with self._lock(w.id):
                w = self.workshop(w.id)  # the live copy, should a failed store have replaced it
                before = w.revision
                member_id = keys.new_member_id()
                member, event = add_member(w, member_id=member_id, name=name, now=time.time())
                key = keys.new_key(member_id)
                if self._save(w, event, before, token_hash=keys.hash_key(key), member_id=member_id):
                    break
        else:
            raise self._too_busy()
        self._changed(w, event)
        return w, member, key

    def import_record(self, bundle: dict[str, Any], *, mode: str, name: str) -> tuple[Workshop, Member, str]:
        """Open a (validated) record bundle as a fresh session with its full history.

        ``new`` makes the importer its facilitator; ``read-only`` makes the
        importer, and whoever joins, a reader, whose every change is refused."""
        session_id = keys.new_session_id()
        join_code = keys.new_join_code(self.store.join_code_taken)
        w = restore_workshop(bundle, session_id=session_id, join_code=join_code)
        now = time.time()
        member_id = keys.new_member_id()
        if mode == "new":
            w.join_role = Role.PARTICIPANT
        else:
            _make_read_only(w)
        member = Member(id=member_id, name=name, role=Role.FACILITATOR if mode == "new" else Role.READER,
                        joined=now)
        w.members[member_id] = member
        events = list(w.log)
        w.revision = max([w.revision] + [e["revision"] for e in events]) + 1
        original = bundle["session"]
        how = "as a new session" if mode == "new" else "read-only"
        event = new_event(
            revision=w.revision, at=now, actor=member, kind="import_record",
            summary=f"reopened the record of {original.get('title')!r} {how} (exported with Arrowmoot "
                    f"{(bundle.get('software') or {}).get('version', '?')})",
            command={"type": "import_record", "mode": mode})
        w.log.append(event)
        events.append(event)
        key = keys.new_key(member_id)
        try:
            w.diagram()
        except DiagramError as exc:
            raise BundleError(f"the bundle's diagram is not valid: {exc.message}",
                              code="bundle_bad_graph") from None
        state = w.to_state()
        # The session row with the first event and the importer's key, then each
        # later event in order.
        self.store.create_session(session_id=session_id, title=w.title, join_code=join_code,
                                  state=state, revision=w.revision, event=events[0],
                                  token_hash=keys.hash_key(key), member_id=member_id)
        for e in events[1:]:
            self.store.save_change(session_id=session_id, state=state, revision=w.revision, event=e)
        for name_, value in attachments_from_bundle(bundle).items():
            self.store.put_attachment(session_id, name_, value)
        self.store.put_attachment(session_id, SOURCE_KEY, {
            "session_id": original.get("id"), "title": original.get("title"),
            "exported_at": bundle.get("exported_at"), "software": bundle.get("software"),
            "data_sha256": (bundle.get("data") or {}).get("sha256"), "mode": mode, "imported_at": now})
        return self.workshop(session_id), member, key

    # -- changes ----------------------------------------------------------------------
    def is_read_only(self, session_id: str) -> bool:
        """Whether the session is a record reopened read-only: whoever joins is a reader."""
        return self.workshop(session_id).join_role == Role.READER

    async def submit(self, session_id: str, member: Member, command: Any,
                     key: Any = None) -> Event:
        """Apply, store and publish one command; return its event.

        ``key`` (optional, text of at most 100 characters, unique per member) makes a
        resent command harmless: a key already applied returns the event it made,
        marked ``"replayed": True``, and changes nothing. Keys are kept in the stored
        events, so they still match after a restart.
        """
        if key is not None and (not isinstance(key, str) or not 0 < len(key) <= MAX_COMMAND_KEY):
            raise BadRequest("a command key must be text of 1 to 100 characters",
                             code="invalid_key")
        self.workshop(session_id)  # NotFound for an unknown session
        for attempt in range(STALE_RETRIES):
            async with self._lock(session_id):
                # Fetched under the lock: a change that failed to store while this one waited
                # has dropped the copy it had changed.
                w = self.workshop(session_id)
                if key is not None:  # looked up again on a fresh copy: another process may have applied it
                    earlier = self._find_keyed(session_id, f"{member.id}:{key}")
                    if earlier is not None:
                        return dict(earlier, replayed=True)  # type: ignore[return-value]
                if attempt == 0:
                    self.pacer.take(session_id, member.id, command)
                now = time.time()
                before = w.revision
                previous = w.log[-1] if w.log else None
                event = apply_command(w, w.members.get(member.id, member), command, now=now)
                if key is not None:
                    event["key"] = f"{member.id}:{key}"
                replaces = None
                if folds_into(previous, member.id, command, now):
                    # One history entry for a burst of moves of one variable by one member.
                    replaces = previous["revision"]
                    event["keys"] = previous.get("keys", []) + ([previous["key"]] if "key" in previous else [])
                    w.log.remove(previous)
                    self._keyed.pop(session_id, None)
                if self._save(w, event, before, mark_undone=event.get("undoes"), replaces=replaces):
                    break
        else:
            raise self._too_busy()
        self._changed(w, event)
        return event

    def _find_keyed(self, session_id: str, full_key: str) -> Event | None:
        w = self.workshop(session_id)
        keyed = self._keyed.get(session_id)
        if keyed is None or keyed[0] > len(w.log):
            keyed = (0, {})
        seen_len, table = keyed
        for event in w.log[seen_len:]:
            if "key" in event:
                table[event["key"]] = event
            for folded in event.get("keys", ()):  # keys of moves folded into this one
                table[folded] = event
        self._keyed[session_id] = (len(w.log), table)
        return table.get(full_key)

    async def note(self, session_id: str, member: Member | None, summary: str,
                   kind: str = "note", **extra: Any) -> Event:
        """Log an event from another part of the app (data attached, say) and publish it."""
        self.workshop(session_id)
        for _ in range(STALE_RETRIES):
            async with self._lock(session_id):
                w = self.workshop(session_id)
                before = w.revision
                w.revision += 1
                event = new_event(revision=w.revision, at=time.time(), actor=member, kind=kind,
                                  summary=summary, **extra)
                w.log.append(event)
                if self._save(w, event, before):
                    break
        else:
            raise self._too_busy()
        self._changed(w, event)
        return event

    def require_stage(self, session_id: str, *stages: str) -> Workshop:
        w = self.workshop(session_id)
        if w.stage not in stages:
            raise WrongStage(f"this needs the session in the {' or '.join(stages)} stage; it is in {w.stage}")
        return w

    # -- data ---------------------------------------------------------------------------
    def attach_data(self, session_id: str, path: str | Path, *, name: str | None = None,
                    variables: list[str] | None = None) -> dict[str, Any]:
        """Attach a data file outside a request (the demo session at start-up, say).

        The file is copied into the session's data folder, checked and profiled
        as an upload is. With ``variables`` (the diagram's names) the mapping of
        same-named columns is saved, as after an upload; without, it is proposed
        when the panel first reads it. Raises DataError if the file is unusable,
        and then nothing is attached."""
        self.workshop(session_id)
        source = Path(path)
        frame = load_table(source, max_bytes=None, name=name or source.name)
        stored = stored_name(source)
        shutil.copyfile(source, self.store.session_data_dir(session_id) / stored)
        mapping = None if variables is None else propose_mapping(variables, frame.columns)
        info = data_info(frame, name=name or source.name, stored=stored,
                         size=source.stat().st_size, mapping=mapping)
        self.store.put_attachment(session_id, DATA_KEY, info)
        return info

    async def close(self) -> None:
        await self.analysis.close()


def _make_read_only(w: Workshop) -> None:
    """Every member, and whoever joins later, becomes a reader."""
    for m in w.members.values():
        m.role, m.analyst = Role.READER, False
    w.join_role = Role.READER
