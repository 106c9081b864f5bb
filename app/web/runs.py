"""Long analyses that run beside the server: one at a time per session and kind,
with progress the page can poll and a stop it can press.

Where the system can fork (Linux), the work runs in a child process forked from
the server, so it shares the table already in memory without copying it, runs at
a lower priority, and never holds the server's interpreter lock: edits keep being
answered at their usual speed meanwhile. The child reports ``progress(done, total,
step)`` and its result through a pipe; stopping ends the child. Elsewhere the
work runs in a thread and checks ``run.stopped()`` at each step.
"""

from __future__ import annotations

import asyncio
import multiprocessing
import os
import secrets
import threading
import time
from dataclasses import dataclass, field
from typing import Any, Awaitable, Callable

from starlette.concurrency import run_in_threadpool

__all__ = ["Run", "Runs", "RUNS", "RunRefused"]

CHILD_NICENESS = 10
PROGRESS_EVERY = 0.1  # seconds between progress messages from a child


class RunRefused(Exception):
    """The work refused its input (the child's DataError or DiagramError, by message)."""

    def __init__(self, message: str):
        super().__init__(message)
        self.message = message


class _Stopped(Exception):
    pass


class _ChildRun:
    """What the work sees of its run inside a child process."""

    def __init__(self, conn):
        self._conn, self._last = conn, 0.0

    def progress(self, done: int, total: int, step: str) -> None:
        now = time.monotonic()
        if now - self._last >= PROGRESS_EVERY or done >= total:
            self._last = now
            self._conn.send(("progress", int(done), int(total), step))

    def stopped(self) -> bool:
        return False  # the parent ends the child instead


def _child(work, conn) -> None:
    try:
        os.nice(CHILD_NICENESS)
    except OSError:
        pass
    try:
        result = work(_ChildRun(conn))
    except BaseException as exc:  # noqa: BLE001 - reported to the parent, which decides
        message = getattr(exc, "message", None)
        conn.send(("refused", message) if isinstance(message, str) else ("error", f"{type(exc).__name__}: {exc}"))
    else:
        conn.send(("done", result))
    finally:
        conn.close()


def _in_child(run: "Run", work):
    """Run ``work`` in a forked child; relay its progress to ``run``; end it when stopped."""
    ctx = multiprocessing.get_context("fork")
    receive, send = ctx.Pipe(duplex=False)
    child = ctx.Process(target=_child, args=(work, send), daemon=True)
    child.start()
    send.close()
    try:
        while True:
            if run.stopped():
                raise _Stopped()
            if not receive.poll(0.1):
                if not child.is_alive() and not receive.poll(0):
                    raise RuntimeError(f"the analysis process ended unexpectedly (exit code {child.exitcode})")
                continue
            try:
                message = receive.recv()
            except EOFError:
                raise RuntimeError("the analysis process ended without an answer") from None
            if message[0] == "progress":
                run.progress(*message[1:])
            elif message[0] == "done":
                return message[1]
            elif message[0] == "refused":
                raise RunRefused(message[1])
            else:
                raise RuntimeError(message[1])
    finally:
        if child.is_alive():
            child.terminate()
        child.join(timeout=5)
        receive.close()


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

        forking = "fork" in multiprocessing.get_all_start_methods()

        async def drive() -> None:
            try:
                result = await run_in_threadpool(_in_child, run, work) if forking else await run_in_threadpool(work, run)
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
