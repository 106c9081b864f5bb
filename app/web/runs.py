"""Long analyses that run beside the server: one at a time per session and kind,
with progress the page can poll and a stop it can press.

The work runs in a worker thread (numpy releases the interpreter lock in its
inner loops, and the work yields it between steps), so the event loop keeps
serving edits and pushes meanwhile. The work calls ``run.progress(done,
total, step)``; when the analyst stops it, ``run.stopped()`` turns true and the
work ends itself at its next step.
"""

from __future__ import annotations

import asyncio
import secrets
import threading
import time
from dataclasses import dataclass, field
from typing import Any, Awaitable, Callable

from starlette.concurrency import run_in_threadpool

__all__ = ["Run", "Runs", "RUNS"]


@dataclass
class Run:
    kind: str
    id: str = field(default_factory=lambda: secrets.token_hex(6))
    state: str = "running"  # running | finished | stopped | failed
    done: int = 0
    total: int = 1
    step: str = "starting"
    message: str | None = None
    started: float = field(default_factory=time.time)
    finished: float | None = None
    _stop: threading.Event = field(default_factory=threading.Event, repr=False)
    _task: asyncio.Task | None = field(default=None, repr=False)

    def progress(self, done: int, total: int, step: str) -> None:
        self.done, self.total, self.step = int(done), max(1, int(total)), step

    def stopped(self) -> bool:
        return self._stop.is_set()

    def to_json(self) -> dict:
        return {"id": self.id, "kind": self.kind, "state": self.state, "done": self.done, "total": self.total,
                "share": round(self.done / self.total, 4), "step": self.step, "message": self.message,
                "started": self.started, "finished": self.finished,
                "seconds": round((self.finished or time.time()) - self.started, 2)}


class Runs:
    """The runs of every session, by (session id, kind); finished runs stay until replaced."""

    def __init__(self) -> None:
        self._runs: dict[tuple[str, str], Run] = {}

    def get(self, session_id: str, kind: str) -> Run | None:
        return self._runs.get((session_id, kind))

    def is_running(self, session_id: str, kind: str) -> bool:
        run = self.get(session_id, kind)
        return run is not None and run.state == "running"

    def start(self, session_id: str, kind: str, work: Callable[[Run], Any],
              finish: Callable[[Run, Any], Awaitable[None]],
              fail: Callable[[Run, BaseException], str | None]) -> Run:
        """Start ``work(run)`` in a thread; ``finish(run, result)`` runs on the event loop after it.

        ``fail(run, exc)`` turns an exception into the message shown (None: re-raise it)."""
        run = Run(kind)
        self._runs[(session_id, kind)] = run

        async def drive() -> None:
            try:
                result = await run_in_threadpool(work, run)
            except BaseException as exc:  # noqa: BLE001 - every ending is recorded on the run
                run.finished = time.time()
                if run.stopped():
                    run.state, run.message = "stopped", "stopped by the analyst; nothing was changed"
                    return
                message = fail(run, exc)
                run.state = "failed"
                run.message = message or "the run failed unexpectedly; the server log has the details"
                if message is None:
                    raise
                return
            await finish(run, result)
            run.finished = time.time()
            run.state = "finished"

        run._task = asyncio.get_running_loop().create_task(drive())
        return run

    async def wait(self, run: Run) -> None:
        if run._task is not None:
            try:
                await asyncio.shield(run._task)
            except Exception:  # noqa: BLE001 - the state on the run says what happened
                pass

    def stop(self, session_id: str, kind: str) -> Run | None:
        run = self.get(session_id, kind)
        if run is not None and run.state == "running":
            run._stop.set()
        return run


RUNS = Runs()
