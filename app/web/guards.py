"""Guards in front of every route: request size, cross-origin requests, join-code guessing.

* :class:`BodyLimit` refuses a request body over ``settings.request_limit_bytes``
  with 413 before the app reads it (the data upload and record-bundle routes
  have their own, larger limits and stream, so they are left to those routes).
* :class:`OriginGuard` refuses a browser request whose ``Origin`` is neither this
  server nor one of ``settings.allowed_origins`` (403), and answers the
  browser's pre-flight for the allowed ones. Requests without an ``Origin``
  header (scripts, curl) are not browsers acting for someone else and pass.
* :class:`JoinLimiter` counts wrong join codes per client address in a sliding
  window; past the allowance that address's join requests wait their turn, slower
  with every further wrong code, and a right code is still let in.
"""

from __future__ import annotations

import asyncio
import contextlib
import json
import re
import threading
import time
from urllib.parse import urlparse

from ..errors import NotFound, TooManyAttempts
from .errors import HTTP_STATUS, error_body

__all__ = ["BodyLimit", "OriginGuard", "JoinLimiter", "TooManyAttempts", "origin_allowed",
           "guarded_join_lookup"]

TOO_LARGE, FORBIDDEN = HTTP_STATUS["too_large"], HTTP_STATUS["forbidden"]
# Routes that stream their body to their own, larger limit: data uploads and record bundles.
UPLOAD_PATH = re.compile(r"^(/api/sessions/[^/]+/estimation/data|/api/records/(import|report)|/records/(import|report))$")



async def _send_json(send, status: int, body: dict, headers: list | None = None) -> None:
    raw = json.dumps(body).encode("utf-8")
    await send({"type": "http.response.start", "status": status,
                "headers": [(b"content-type", b"application/json"),
                            (b"content-length", str(len(raw)).encode())] + (headers or [])})
    await send({"type": "http.response.body", "body": raw})


class BodyLimit:
    """ASGI middleware: at most ``limit`` bytes of request body (declared or streamed)."""

    def __init__(self, app, limit: int):
        self.app = app
        self.limit = limit

    async def __call__(self, scope, receive, send):
        if scope["type"] != "http" or UPLOAD_PATH.match(scope.get("path", "")):
            return await self.app(scope, receive, send)
        limit = self.limit
        message = (f"the request body is over the limit of {limit // 1024} KB; "
                   "send a smaller document")
        for name, value in scope.get("headers", ()):
            if name == b"content-length":
                if not value.isdigit() or int(value) > limit:
                    return await _send_json(send, TOO_LARGE, error_body(message, TOO_LARGE, "body_too_large"))
        if any(name == b"content-length" for name, _ in scope.get("headers", ())):
            return await self.app(scope, receive, send)
        # No declared length (chunked): read up to the limit here, then hand it on whole.
        parts, seen = [], 0
        while True:
            event = await receive()
            if event["type"] != "http.request":
                return  # the client went away
            parts.append(event.get("body", b""))
            seen += len(parts[-1])
            if seen > limit:
                return await _send_json(send, TOO_LARGE, error_body(message, TOO_LARGE, "body_too_large"))
            if not event.get("more_body", False):
                break
        body, handed = b"".join(parts), False

        async def replay():
            nonlocal handed
            if handed:
                return await receive()
            handed = True
            return {"type": "http.request", "body": body, "more_body": False}

        await self.app(scope, replay, send)


def origin_allowed(origin: str | None, host: str | None, allowed: tuple[str, ...]) -> bool:
    """Same origin (the Origin's host:port is the Host header), listed, or not a browser."""
    if origin is None:
        return True
    if origin in allowed or "*" in allowed:
        return True
    return bool(host) and urlparse(origin).netloc == host


class OriginGuard:
    """ASGI middleware: refuse cross-origin browser requests unless the origin is allowed."""

    ALLOW_HEADERS = b"content-type, x-arrowmoot-token, idempotency-key"
    ALLOW_METHODS = b"GET, POST, PUT, DELETE"

    def __init__(self, app, allowed: tuple[str, ...]):
        self.app = app
        self.allowed = tuple(allowed)

    async def __call__(self, scope, receive, send):
        if scope["type"] != "http":
            return await self.app(scope, receive, send)
        headers = dict(scope.get("headers", ()))
        raw_origin = headers.get(b"origin")
        origin = raw_origin.decode("latin-1") if raw_origin is not None else None
        host = headers.get(b"host", b"").decode("latin-1")
        if not origin_allowed(origin, host, self.allowed):
            return await _send_json(send, FORBIDDEN, error_body(
                f"requests from {origin[:100]} are refused: this server only answers pages it "
                "served itself (see the allowed_origins setting)", FORBIDDEN, "cross_origin"))
        same = origin is None or urlparse(origin).netloc == host
        if same:
            return await self.app(scope, receive, send)
        # An origin the operator listed: answer the pre-flight and label the response.
        cors = [(b"access-control-allow-origin", raw_origin), (b"vary", b"Origin")]
        if scope["method"] == "OPTIONS" and b"access-control-request-method" in headers:
            await send({"type": "http.response.start", "status": 204,
                        "headers": cors + [(b"access-control-allow-methods", self.ALLOW_METHODS),
                                           (b"access-control-allow-headers", self.ALLOW_HEADERS),
                                           (b"access-control-max-age", b"600")]})
            await send({"type": "http.response.body", "body": b""})
            return

        async def labelled_send(event):
            if event["type"] == "http.response.start":
                event = dict(event, headers=list(event.get("headers", [])) + cors)
            await send(event)

        await self.app(scope, receive, labelled_send)


class JoinLimiter:
    """Slows join-code guessing from one address; never refuses a right code for it.

    An address may try ``limit`` different wrong codes per ``window`` seconds at full
    speed (the same wrong code typed again counts once: a person retrying a typo is
    not guessing). Past that allowance its join requests take turns, one at a time,
    each after a pause of ``step`` seconds per wrong code beyond the allowance, at
    most ``max_wait``. A right code waits its turn like any other and is then let in,
    so a room behind one router is slowed by a guesser, never locked out, while the
    guesser gets one try per pause. Only a flood (``max_queue`` requests from the
    address waiting at once) is turned away with 429.
    """

    MAX_ADDRESSES = 10000

    def __init__(self, limit: int = 10, window: float = 60.0, *, step: float = 1.0,
                 max_wait: float = 10.0, max_queue: int = 64, clock=time.monotonic, sleep=None):
        self.limit, self.window, self.step, self.max_wait, self.max_queue = limit, window, step, max_wait, max_queue
        self.clock = clock
        self.sleep = sleep or asyncio.sleep
        self._failures: dict[str, dict[str, float]] = {}  # address -> wrong code -> last tried
        self._turns: dict[str, asyncio.Lock] = {}
        self._waiting: dict[str, int] = {}
        self._lock = threading.Lock()

    def _recent(self, address: str, now: float) -> dict[str, float]:
        codes = self._failures.setdefault(address, {})
        for code in [c for c, at in codes.items() if at <= now - self.window]:
            del codes[code]
        return codes

    def pause(self, address: str) -> float:
        """Seconds a join request from ``address`` waits now (0 within the allowance)."""
        with self._lock:
            now = self.clock()
            excess = len(self._recent(address, now)) - self.limit + 1
            if len(self._failures) > self.MAX_ADDRESSES:  # forget addresses quiet for a window
                for key in [k for k in self._failures if not self._recent(k, now)]:
                    del self._failures[key]
            return 0.0 if excess <= 0 else min(self.max_wait, self.step * excess)

    @contextlib.asynccontextmanager
    async def turn(self, address: str):
        """Hold the address's turn for one join request, after its pause."""
        if self.pause(address) == 0:
            yield
            return
        if self._waiting.get(address, 0) >= self.max_queue:
            raise TooManyAttempts("too many join requests are waiting from this address at once; "
                                  "try again in a few seconds", code="too_many_attempts")
        self._waiting[address] = self._waiting.get(address, 0) + 1
        try:
            async with self._turns.setdefault(address, asyncio.Lock()):
                await self.sleep(self.pause(address))
                yield
        finally:
            self._waiting[address] -= 1
            if not self._waiting[address]:
                del self._waiting[address]
                self._turns.pop(address, None)

    def failed(self, address: str, code: str = "") -> None:
        with self._lock:
            self._recent(address, self.clock())[str(code).strip().upper()] = self.clock()


async def guarded_join_lookup(request, sessions, code):
    """Find the session of a join code; wrong codes slow the caller's address down."""
    limiter = request.app.state.join_limiter
    address = request.client.host if request.client else "unknown"
    async with limiter.turn(address):
        try:
            return sessions.find_by_join_code(code)
        except NotFound:
            limiter.failed(address, code if isinstance(code, str) else "")
            raise
