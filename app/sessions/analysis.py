"""The analysis runner: what the current diagram implies, computed off the event loop.

Each change schedules an analysis of the session's newest revision. It runs in
a child process (``python -m app.sessions.worker``) when ``use_processes`` is
on, else in a thread, always on a snapshot of the workshop, so an edit that
arrives meanwhile never changes what is being analysed. When edits arrive
faster than the analysis, only the newest revision is analysed. Results are
cached twice: by revision (the current one), and by the analysis key (what the
analysis depends on), so a move or a rename back finds the earlier answer.
Whoever subscribed (the live hub) is handed each result to push.
"""

from __future__ import annotations

import asyncio
import json
import logging
import os
import sys
from pathlib import Path
from typing import Any, Callable

from ..errors import AnalysisFailed, AppError
from ..workshop.disputes import analyse_workshop, analysis_key
from ..workshop.models import Workshop

__all__ = ["AnalysisRunner", "AnalysisWorker"]

log = logging.getLogger("arrowmoot")

ROOT = Path(__file__).resolve().parent.parent.parent
WORKER_TIMEOUT = 60.0
FAILED_PUSH = {"analysis": None, "problem": "the analysis failed on this diagram",
               "disputes": None, "absent": None}



class AnalysisWorker:
    """A child process (``python -m app.sessions.worker``) that runs the analysis, one state at a time."""

    def __init__(self):
        self.process: asyncio.subprocess.Process | None = None
        self.lock: asyncio.Lock | None = None

    async def _ensure(self) -> asyncio.subprocess.Process:
        if self.process is None or self.process.returncode is not None:
            env = dict(os.environ)
            env["PYTHONPATH"] = os.pathsep.join(p for p in (str(ROOT), env.get("PYTHONPATH")) if p)
            self.process = await asyncio.create_subprocess_exec(
                sys.executable, "-m", "app.sessions.worker", cwd=str(ROOT), env=env,
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
                raise RuntimeError("the analysis worker did not answer") from None
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
        except (asyncio.TimeoutError, OSError):
            proc.kill()


def _failed(exc: Exception) -> AppError:
    if isinstance(exc, AppError):
        return exc
    log.error("analysis failed for a session: %s: %s", type(exc).__name__, exc)
    return AnalysisFailed(f"the analysis of this diagram failed ({type(exc).__name__}); the session "
                          "is unchanged; try again after the next edit")


class AnalysisRunner:
    """Analyses of each session's current revision; ``workshop(session_id)`` gives the live copy."""

    def __init__(self, workshop: Callable[[str], Workshop], *, use_processes: bool = True):
        self._workshop = workshop
        self.worker = AnalysisWorker() if use_processes else None
        self._by_revision: dict[str, dict[str, Any]] = {}
        self._by_key: dict[str, tuple[str, dict[str, Any]]] = {}
        self._tasks: dict[str, asyncio.Task] = {}
        self._dirty: set[str] = set()
        self._listeners: list[Callable[[str, dict[str, Any]], None]] = []

    def subscribe(self, listener: Callable[[str, dict[str, Any]], None]) -> None:
        """Call ``listener(session_id, payload)`` with each scheduled analysis when it is ready."""
        self._listeners.append(listener)

    def forget(self, session_id: str) -> None:
        """Drop the cached analyses of a session (the next request computes afresh)."""
        self._by_revision.pop(session_id, None)
        self._by_key.pop(session_id, None)

    def cached(self, session_id: str) -> dict[str, Any] | None:
        w = self._workshop(session_id)
        cached = self._by_revision.get(session_id)
        if cached is not None and cached["revision"] == w.revision:
            return cached
        key = analysis_key(w)
        hit = self._by_key.get(session_id)
        if hit is not None and hit[0] == key:
            payload = dict(hit[1], revision=w.revision)
            self._by_revision[session_id] = payload
            return payload
        return None

    def now(self, session_id: str) -> dict[str, Any]:
        """The analysis of the current revision, computed here (in this thread) if not cached."""
        cached = self.cached(session_id)
        if cached is not None:
            return cached
        snapshot = Workshop.from_state(self._workshop(session_id).to_state())
        try:
            result = analyse_workshop(snapshot)
        except Exception as exc:  # any failure of the numerics becomes one clear message
            raise _failed(exc) from None
        return self._keep(session_id, snapshot, result)

    async def soon(self, session_id: str) -> dict[str, Any]:
        """:meth:`now` for async code: computed off the event loop on a snapshot."""
        cached = self.cached(session_id)
        if cached is not None:
            return cached
        state = self._workshop(session_id).to_state()
        snapshot = Workshop.from_state(state)
        try:
            result = await self._compute(state, snapshot)
        except Exception as exc:  # any failure of the numerics becomes one clear message
            raise _failed(exc) from None
        return self._keep(session_id, snapshot, result)

    def _keep(self, session_id: str, snapshot: Workshop, result: dict) -> dict[str, Any]:
        payload = dict(result, revision=snapshot.revision)
        self._by_key[session_id] = (analysis_key(snapshot), payload)
        if snapshot.revision == self._workshop(session_id).revision:
            self._by_revision[session_id] = payload
        return payload

    def schedule(self, session_id: str) -> None:
        """Analyse the newest revision in the background and hand it to the listeners."""
        try:
            loop = asyncio.get_running_loop()
        except RuntimeError:
            return
        task = self._tasks.get(session_id)
        if task is not None and not task.done():
            self._dirty.add(session_id)
            return
        self._tasks[session_id] = loop.create_task(self._run(session_id))

    async def _run(self, session_id: str) -> None:
        while True:
            self._dirty.discard(session_id)
            cached = self.cached(session_id)
            if cached is None:
                state = self._workshop(session_id).to_state()
                snapshot = Workshop.from_state(state)
                try:
                    result = await self._compute(state, snapshot)
                except Exception:  # a background push must go out even when the analysis fails
                    log.exception("analysis failed for a session")
                    result = dict(FAILED_PUSH)
                payload = self._keep(session_id, snapshot, result)
                cached = self.cached(session_id) or payload
            for listener in list(self._listeners):
                listener(session_id, cached)
            if session_id not in self._dirty:
                return

    async def _compute(self, state: dict, snapshot: Workshop) -> dict:
        if self.worker is not None:
            try:
                return await self.worker.analyse(state)
            except (RuntimeError, OSError, ValueError) as exc:
                log.warning("analysis worker failed (%s); analysing in a thread instead", exc)
        return await asyncio.to_thread(analyse_workshop, snapshot)

    async def wait(self, session_id: str) -> None:
        """Until the scheduled analyses of a session have finished (for tests and scripts)."""
        task = self._tasks.get(session_id)
        while task is not None and not task.done():
            await task
            task = self._tasks.get(session_id)

    async def close(self) -> None:
        for task in self._tasks.values():
            task.cancel()
        if self.worker is not None:
            await self.worker.stop()
