"""Load and hard-kill run for the live workshop.

Starts the server (uvicorn, loopback only, a fresh SQLite file in a temporary
folder), opens 20 sessions on the cycle-to-work diagram and moves them to the
debating stage. One "big room" gets 60 participants, the other 19 get 3 each;
every participant is a WebSocket client that proposes arrows, votes, moves
and adds variables at random (think time drawn uniformly from --think), and
each room's facilitator settles proposals and now and then undoes.

Phase 1 (--seconds, default 60): steady load. Measured: acknowledged
operations per second, the time from sending an edit in the big room until
every one of its clients has received that revision (p50/p95/p99), server
memory (RSS of the server and its analysis worker, from /proc).

Phase 2 (--kill-seconds, default 30): the same load on the same database;
halfway through, the server's process group gets SIGKILL and is started
again on the same file. Clients notice the drop, reconnect on their own with
the last revision they saw (the server answers with what they missed), and
resend the command that was in flight with the same key (applied at most once).

Checks, after each phase, straight from the SQLite file:
  * every acknowledged operation is stored exactly once, at the revision its ack named;
  * no command key appears twice (nothing applied twice);
  * replaying the stored events from the session's creation through the
    workshop's own command code gives exactly the stored state;
  * every client ends at the stored revision.

Everything is bounded: each wait has a timeout, the whole run stops after
--deadline seconds, and the servers it started are killed on the way out.

The server runs as `arrowmoot serve` runs it (no per-message WebSocket compression);
--server-deflate turns compression on, as a plain `uvicorn.run` would.

Usage: python bench/bench_load.py [--seconds 60] [--kill-seconds 30] [--think 1.5,4.5] [--seed 1]
Prints markdown tables for bench/README.md; exit code 1 if any check fails.
"""

from __future__ import annotations

import argparse
import asyncio
import bisect
import json
import os
import random
import re
import signal
import socket
import sqlite3
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import httpx
import websockets

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

from app.workshop.commands import add_member, apply_command, new_workshop  # noqa: E402
from app.workshop.models import Workshop  # noqa: E402

HEADER = re.compile(r'\{"type": "(state|patch|analysis)", "revision": (\d+)')
DOC = json.loads((ROOT / "sample_data" / "cycle_to_work.json").read_text(encoding="utf-8"))


def percentile(values: list[float], q: float) -> float:
    ordered = sorted(values)
    if not ordered:
        return float("nan")
    k = (len(ordered) - 1) * q
    lo, hi = int(k), min(int(k) + 1, len(ordered) - 1)
    return ordered[lo] + (ordered[hi] - ordered[lo]) * (k - lo)


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


# -- the server ---------------------------------------------------------------------
class Server:
    """uvicorn in its own process group (so SIGKILL takes its analysis worker too)."""

    def __init__(self, folder: Path, port: int):
        self.folder, self.port = folder, port
        self.proc: subprocess.Popen | None = None
        self.profile: Path | None = None
        self.deflate = False  # as `arrowmoot serve` runs it
        self.log = open(folder / "server.log", "ab")

    def start(self) -> None:
        env = dict(os.environ, ARROWMOOT_DB_PATH=str(self.folder / "load.sqlite3"),
                   ARROWMOOT_DATA_DIR=str(self.folder / "data"), ARROWMOOT_DEMO_SESSION="0",
                   PYTHONPATH=str(ROOT))
        code = ("import uvicorn; from app.main import create_app; "
                f"uvicorn.run(create_app(), host='127.0.0.1', port={self.port}, "
                f"log_level='warning', access_log=False, ws_per_message_deflate={self.deflate})")
        if self.profile:  # cProfile the server; the stats are written when it stops
            # uvicorn re-raises SIGTERM after its clean shutdown; a handler that exits
            # lets the profile be written first.
            code = ("import cProfile, signal, sys; "
                    "signal.signal(signal.SIGTERM, lambda *a: sys.exit(0)); "
                    f"p = cProfile.Profile(); p.enable()\ntry:\n    {code.replace('; ', chr(10) + '    ')}\n"
                    f"finally:\n    p.disable(); p.dump_stats({str(self.profile)!r})")
            self.profile = None  # only the first server: the second one is killed anyway
        self.proc = subprocess.Popen([sys.executable, "-c", code], cwd=str(ROOT), env=env,
                                     stdout=self.log, stderr=self.log, start_new_session=True)
        deadline = time.monotonic() + 90
        while time.monotonic() < deadline:
            try:
                if httpx.get(f"http://127.0.0.1:{self.port}/api/join/NOPE00", timeout=1).status_code:
                    return
            except httpx.HTTPError:
                time.sleep(0.1)
        raise RuntimeError("the server did not start within 90 s; see server.log")

    def pids(self) -> list[int]:
        """The server and its children (the analysis worker)."""
        if self.proc is None:
            return []
        out = [self.proc.pid]
        try:
            for task in os.listdir(f"/proc/{self.proc.pid}/task"):
                text = Path(f"/proc/{self.proc.pid}/task/{task}/children").read_text()
                out += [int(p) for p in text.split()]
        except OSError:
            pass
        return out

    def rss_mb(self) -> tuple[float, float]:
        """(server RSS, children RSS) in MB, from /proc/<pid>/status."""
        values = []
        for pid in self.pids():
            try:
                for line in Path(f"/proc/{pid}/status").read_text().splitlines():
                    if line.startswith("VmRSS:"):
                        values.append(int(line.split()[1]) / 1024)
            except OSError:
                values.append(0.0)
        return (values[0] if values else 0.0), sum(values[1:])

    def cpu_s(self) -> float:
        """CPU seconds (user + system) used so far by the server and its children."""
        total = 0.0
        for pid in self.pids():
            try:
                fields = Path(f"/proc/{pid}/stat").read_text().rsplit(")", 1)[1].split()
                total += (int(fields[11]) + int(fields[12])) / os.sysconf("SC_CLK_TCK")
            except (OSError, IndexError, ValueError):
                pass
        return total

    def kill_hard(self) -> None:
        if self.proc is not None and self.proc.poll() is None:
            os.killpg(self.proc.pid, signal.SIGKILL)
            self.proc.wait(10)

    def stop(self) -> None:
        if self.proc is not None and self.proc.poll() is None:
            os.killpg(self.proc.pid, signal.SIGTERM)
            try:
                self.proc.wait(15)
            except subprocess.TimeoutExpired:
                self.kill_hard()


def apply_view_patch(view: dict, patch: dict) -> None:
    """Keep the facilitator's view (what the clients choose their commands from) current.

    Only the parts ``choose`` reads: variables, drawn arrows (a reversed one keeps its
    place) and proposals. The page's own, complete version is static/js/live.js.
    """
    doc = view["document"]
    positions = {m["name"]: m for m in patch.get("moves", [])}
    for v in doc["variables"]:
        if v["name"] in positions:
            v["x"], v["y"] = positions[v["name"]]["x"], positions[v["name"]]["y"]
    doc["variables"] += patch.get("variables_added", [])
    removed = {tuple(a) for a in patch.get("arrows_removed", [])}
    added = [tuple(a) for a in patch.get("arrows_added", [])]
    in_place = {(b, a): (a, b) for a, b in added if (b, a) in removed}
    arrows = []
    for arrow in doc["arrows"]:
        pair = (arrow["from"], arrow["to"])
        if pair in in_place:
            arrows.append(dict(zip(("from", "to"), in_place[pair])))
        elif pair not in removed:
            arrows.append(arrow)
    doc["arrows"] = arrows + [{"from": a, "to": b} for a, b in added if (a, b) not in in_place.values()]
    by_id = {p["id"]: p for p in view["proposals"]}
    for p in patch.get("proposals", []):
        by_id[p["id"]] = p
    view["proposals"] = sorted(by_id.values(), key=lambda p: p["id"])


# -- one participant ------------------------------------------------------------------
class Participant:
    def __init__(self, bench: "Bench", room: "Room", token: str, member_id: str, name: str,
                 facilitator: bool = False, observer: bool = False):
        self.bench, self.room = bench, room
        self.token, self.member_id, self.name = token, member_id, name
        self.facilitator, self.observer = facilitator, observer
        self.rng = random.Random(f"{bench.seed}-{member_id}")
        self.revision: int | None = None
        self.seen: list[tuple[int, float]] = []  # (revision, first arrival), increasing
        self.waiting: dict[int, asyncio.Future] = {}
        self.next_id = 0
        self.ws = None
        self.connected = asyncio.Event()
        self.reconnects = 0
        self.counter = 0

    async def keep_connected(self, leave: asyncio.Event) -> None:
        """Connect, read, and on any drop reconnect from the last revision seen."""
        delay = 0.2
        while not leave.is_set():
            try:
                ws = await websockets.connect(self.bench.ws_url(self.room.id), max_size=None,
                                              compression=self.bench.compression, open_timeout=5)
            except (OSError, websockets.WebSocketException, asyncio.TimeoutError):
                await asyncio.sleep(delay)
                delay = min(delay * 2, 2.0)
                continue
            delay = 0.2
            await ws.send(json.dumps({"type": "hello", "token": self.token, "revision": self.revision}))
            self.ws = ws
            try:
                async for text in ws:
                    self.receive(text)
            except websockets.WebSocketException:
                pass
            finally:
                self.ws = None
                self.connected.clear()
                for fut in self.waiting.values():
                    if not fut.done():
                        fut.set_result({"type": "dropped"})
                self.waiting.clear()
            if not leave.is_set():
                self.reconnects += 1

    def receive(self, text: str) -> None:
        now = time.perf_counter()
        head = HEADER.match(text)
        if head and not self.observer:
            kind, rev = head.group(1), int(head.group(2))
            message = None
        else:
            message = json.loads(text)
            kind, rev = message["type"], message.get("revision")
        if message is not None and self.room.big and kind in self.bench.push_sizes:
            self.bench.push_sizes[kind].append(len(text))
        if kind == "state":
            self._advance(rev, now)
            if message is not None:
                self.room.view = message["state"]
        elif kind == "patch":
            base = int(re.search(r'"base": (\d+)', text).group(1))
            if self.revision is not None and base == self.revision:
                if message is not None and self.room.view is not None:
                    apply_view_patch(self.room.view, message)
                self._advance(rev, now)
            elif self.revision is None or rev > self.revision:
                asyncio.ensure_future(self._send({"type": "resync", "revision": self.revision}))
        elif kind == "welcome":
            self.connected.set()
        elif kind in ("ack", "error"):
            fut = self.waiting.pop(message.get("id"), None)
            if fut is not None and not fut.done():
                fut.set_result(message)

    def _advance(self, rev: int, now: float) -> None:
        if self.revision is None or rev > self.revision:
            self.revision = rev
            self.seen.append((rev, now))

    def arrival(self, revision: int) -> float | None:
        """When this client first held ``revision`` (or a later one)."""
        i = bisect.bisect_left(self.seen, (revision, -1.0))
        return self.seen[i][1] if i < len(self.seen) else None

    async def _send(self, message: dict) -> None:
        try:
            if self.ws is not None:
                await self.ws.send(json.dumps(message))
        except websockets.WebSocketException:
            pass

    def choose(self) -> dict | None:
        view, rng = self.room.view, self.rng
        if not view:
            return None
        names = [v["name"] for v in view["document"]["variables"]]
        arrows = [(a["from"], a["to"]) for a in view["document"]["arrows"]]
        open_props = [p for p in view["proposals"] if p["status"] in ("open", "disputed")]
        if self.facilitator:
            roll = rng.random()
            if open_props and roll < 0.8:
                p = rng.choice(open_props)
                return {"type": "settle", "proposal": p["id"],
                        "decision": rng.choice(["accept", "reject", "dispute"])}
            if roll < 0.9:
                return {"type": "undo"}
            return {"type": "move_variable", "name": rng.choice(names),
                    "x": rng.randint(40, 1200), "y": rng.randint(40, 700)}
        roll = rng.random()
        if roll < 0.30:
            return {"type": "move_variable", "name": rng.choice(names),
                    "x": rng.randint(40, 1200), "y": rng.randint(40, 700)}
        if roll < 0.50:
            kind = rng.choice(["add", "remove", "reverse"])
            if kind == "add" or not arrows:
                a, b = rng.sample(names, 2)
                return {"type": "propose", "kind": "add", "from": a, "to": b,
                        "reason": f"{self.name} thinks {a} affects {b}"}
            a, b = rng.choice(arrows)
            return {"type": "propose", "kind": kind, "from": a, "to": b}
        if roll < 0.80:
            if open_props and rng.random() < 0.6:
                return {"type": "vote", "proposal": rng.choice(open_props)["id"],
                        "choice": rng.choice(["agree", "disagree", "unsure"])}
            a, b = rng.choice(arrows)
            return {"type": "vote", "from": a, "to": b, "choice": rng.choice(["agree", "disagree", "unsure"])}
        if roll < 0.88 and arrows:
            a, b = rng.choice(arrows)
            return {"type": "withdraw_vote", "from": a, "to": b}
        self.counter += 1
        return {"type": "add_variable", "name": f"{self.name} idea {self.counter}",
                "x": rng.randint(40, 1200), "y": rng.randint(40, 700)}

    async def act(self, stop: asyncio.Event, think: tuple[float, float]) -> None:
        await asyncio.sleep(self.rng.uniform(0, think[1]))
        while not stop.is_set():
            command = self.choose()
            if command is not None:
                await self.submit(command, stop)
            await asyncio.sleep(self.rng.uniform(*think))

    async def submit(self, command: dict, stop: asyncio.Event) -> None:
        """Send until answered; after a drop, resend with the same key once reconnected."""
        self.next_id += 1
        key = f"{self.member_id}-{self.next_id}"
        attempts = 0
        while attempts < 20 and not (stop.is_set() and not self.connected.is_set()):
            attempts += 1
            try:
                await asyncio.wait_for(self.connected.wait(), 15)
            except asyncio.TimeoutError:
                continue
            msg_id = self.next_id * 100 + attempts
            fut = asyncio.get_running_loop().create_future()
            self.waiting[msg_id] = fut
            sent = time.perf_counter()
            await self._send({"type": "command", "id": msg_id, "key": key, "command": command})
            try:
                answer = await asyncio.wait_for(fut, 15)
            except asyncio.TimeoutError:
                self.waiting.pop(msg_id, None)
                self.bench.timeouts += 1
                continue
            if answer["type"] == "dropped":
                self.bench.resent += 1
                continue
            self.bench.record(self, key, command, answer, sent, time.perf_counter())
            return
        self.bench.gave_up += 1


class Room:
    def __init__(self, sid: str, code: str, big: bool):
        self.id, self.code, self.big = sid, code, big
        self.view: dict | None = None
        self.people: list[Participant] = []
        self.created: dict = {}


# -- the run -------------------------------------------------------------------------
class Bench:
    def __init__(self, args, folder: Path):
        self.seed = args.seed
        self.port = free_port()
        self.server = Server(folder, self.port)
        self.folder = folder
        self.rooms: list[Room] = []
        self.acked: dict[str, dict] = {}   # key -> {"revision", "room", "kind"}
        self.replayed = self.resent = self.timeouts = self.gave_up = 0
        self.refused: dict[str, int] = {}
        self.latency_jobs: list[tuple[Room, int, float]] = []
        self.ack_ms: list[float] = []
        self.push_sizes: dict[str, list[int]] = {"state": [], "patch": [], "analysis": []}
        self.load_avg = os.getloadavg()
        self.compression = "deflate" if args.deflate else None

    def ws_url(self, sid: str) -> str:
        return f"ws://127.0.0.1:{self.port}/ws/sessions/{sid}"

    def record(self, who: Participant, key: str, command: dict, answer: dict, sent: float,
               answered: float) -> None:
        if answer["type"] == "ack":
            if answer.get("replayed"):
                self.replayed += 1
            self.acked[key] = {"revision": answer["revision"], "room": who.room.id,
                               "kind": command["type"], "member": who.member_id}
            if who.room.big and not answer.get("replayed"):
                self.latency_jobs.append((who.room, answer["revision"], sent))
                self.ack_ms.append((answered - sent) * 1000)
        else:
            self.refused[answer.get("code", "?")] = self.refused.get(answer.get("code", "?"), 0) + 1

    async def setup(self, rooms: int, big: int, small: int) -> None:
        async with httpx.AsyncClient(base_url=f"http://127.0.0.1:{self.port}", timeout=30) as http:
            for i in range(rooms):
                r = (await http.post("/api/sessions", json={
                    "title": f"Cycle-to-work room {i + 1}", "name": f"Facilitator {i + 1}",
                    "document": DOC})).json()
                room = Room(r["session_id"], r["join_code"], big=(i == 0))
                room.created = {"title": f"Cycle-to-work room {i + 1}", "name": f"Facilitator {i + 1}"}
                fac = r["token"]
                await http.post(f"/api/sessions/{room.id}/commands", headers={"X-Arrowmoot-Token": fac},
                                json={"type": "set_stage", "stage": "debating"})
                room.people.append(Participant(self, room, fac, r["member"]["id"], f"Facilitator {i + 1}",
                                               facilitator=True, observer=True))
                for j in range(big if room.big else small):
                    name = f"P{i + 1}.{j + 1}"
                    joined = (await http.post("/api/join", json={"code": room.code, "name": name})).json()
                    room.people.append(Participant(self, room, joined["token"], joined["member"]["id"], name))
                self.rooms.append(room)

    def everyone(self) -> list[Participant]:
        return [p for room in self.rooms for p in room.people]

    async def load(self, seconds: float, think: tuple[float, float], kill_at: float | None = None) -> dict:
        stop, leave = asyncio.Event(), asyncio.Event()
        readers = [asyncio.create_task(p.keep_connected(leave)) for p in self.everyone()]
        await asyncio.wait_for(asyncio.gather(*(p.connected.wait() for p in self.everyone())), 60)
        start_acks, start = len(self.acked), time.perf_counter()
        cpu0, own0 = self.server.cpu_s(), time.process_time()
        self.latency_jobs.clear()
        self.ack_ms.clear()
        for sizes in self.push_sizes.values():
            sizes.clear()
        actors = [asyncio.create_task(p.act(stop, think)) for p in self.everyone()]
        rss, down_s = [], None
        end = start + seconds
        killed = False
        while time.perf_counter() < end:
            await asyncio.sleep(1.0)
            rss.append(self.server.rss_mb())
            if kill_at is not None and not killed and time.perf_counter() - start >= kill_at:
                killed = True
                t0 = time.perf_counter()
                self.server.kill_hard()
                await asyncio.to_thread(self.server.start)
                down_s = time.perf_counter() - t0
                if os.environ.get("LOAD_DEBUG"):
                    await asyncio.sleep(3)
                    print("after restart: connected", sum(p.connected.is_set() for p in self.everyone()),
                          "of", len(self.everyone()), file=sys.stderr)
        stop.set()
        server_cpu, own_cpu = self.server.cpu_s() - cpu0, time.process_time() - own0
        await asyncio.wait_for(asyncio.gather(*actors, return_exceptions=True), 40)
        elapsed = time.perf_counter() - start
        try:  # a client cut off by the kill comes back on its own; give it the time
            await asyncio.wait_for(asyncio.gather(*(p.connected.wait() for p in self.everyone())), 60)
        except asyncio.TimeoutError:
            pass
        await asyncio.sleep(1.5)  # let the last pushes arrive
        # Each client asks once more for anything it missed, as the page does on focus.
        for p in self.everyone():
            await p._send({"type": "resync", "revision": p.revision})
        await asyncio.sleep(1.5)
        leave.set()
        for p in self.everyone():
            if p.ws is not None:
                await p.ws.close()
        await asyncio.wait_for(asyncio.gather(*readers, return_exceptions=True), 20)
        latency = []
        big = self.rooms[0]
        for room, rev, sent in self.latency_jobs:
            arrivals = [p.arrival(rev) for p in room.people]
            if all(a is not None for a in arrivals):
                latency.append((max(arrivals) - sent) * 1000)
        return {"ops": len(self.acked) - start_acks, "elapsed": elapsed, "latency": latency,
                "missing_arrivals": len(self.latency_jobs) - len(latency), "rss": rss,
                "down_s": down_s, "big_clients": len(big.people), "ack_ms": list(self.ack_ms),
                "server_cpu": server_cpu, "own_cpu": own_cpu,
                "push_kb": {k: (max(v, default=0) / 1024, percentile(v, .5) / 1024, len(v))
                            for k, v in self.push_sizes.items()}}

    # -- verification straight from the database -------------------------------------
    def verify(self) -> list[str]:
        problems = []
        db = sqlite3.connect(self.folder / "load.sqlite3")
        db.row_factory = sqlite3.Row
        for room in self.rooms:
            events = [json.loads(r["data"]) for r in db.execute(
                "SELECT data FROM events WHERE session_id = ? ORDER BY seq", (room.id,))]
            row = db.execute("SELECT state, revision FROM sessions WHERE id = ?", (room.id,)).fetchone()
            stored, stored_rev = json.loads(row["state"]), row["revision"]
            keys: dict[str, int] = {}
            for e in events:
                if "key" in e:
                    keys[e["key"]] = keys.get(e["key"], 0) + 1
            twice = [k for k, n in keys.items() if n > 1]
            if twice:
                problems.append(f"room {room.id}: {len(twice)} command(s) applied twice")
            by_key = {e["key"]: e for e in events if "key" in e}
            for key, info in self.acked.items():
                if info["room"] != room.id:
                    continue
                full = f"{info['member']}:{key}"
                e = by_key.get(full)
                if e is None:
                    problems.append(f"room {room.id}: acknowledged {info['kind']} {key} is not stored")
                elif e["revision"] != info["revision"]:
                    problems.append(f"room {room.id}: {key} acked at {info['revision']}, stored at {e['revision']}")
            revisions = [e["revision"] for e in events]
            if revisions != list(range(len(events))):
                problems.append(f"room {room.id}: stored revisions are not 0..n without gaps")
            try:
                replayed = replay(room, events).to_state()
            except Exception as exc:  # a stored command the code refuses on replay
                replayed = None
                problems.append(f"room {room.id}: replay failed: {exc}")
            stored["revision"] = stored_rev
            if replayed is not None and replayed != stored:
                problems.append(f"room {room.id}: replaying the stored events does not give the stored state")
            behind = [p.name for p in room.people if p.revision != stored_rev]
            if behind:
                problems.append(f"room {room.id}: {len(behind)} client(s) not at revision {stored_rev}")
        db.close()
        return problems


def replay(room: Room, events: list[dict]) -> Workshop:
    """Rebuild a session from its stored events with the workshop's own command code."""
    first = events[0]
    if first["kind"] != "create":
        raise AssertionError("the first stored event is not the session's creation")
    w, _ = new_workshop(session_id=room.id, title=room.created["title"], join_code=room.code,
                        facilitator_id=first["actor"], facilitator_name=room.created["name"],
                        document=DOC, now=first["at"])
    for e in events[1:]:
        if e["kind"] == "join":
            add_member(w, member_id=e["actor"], name=e["actor_name"], now=e["at"])
            continue
        apply_command(w, w.members[e["actor"]], e["command"], now=e["at"])
    return w


async def run(args) -> int:
    think = tuple(float(x) for x in args.think.split(","))
    wall_deadline = time.monotonic() + args.deadline
    with tempfile.TemporaryDirectory(prefix="arrowmoot-load-") as tmp:
        bench = Bench(args, Path(tmp))
        bench.server.deflate = args.server_deflate
        if args.profile:
            bench.server.profile = Path(args.profile).resolve()
        bench.server.start()
        try:
            await bench.setup(args.rooms, args.big, args.small)
            steady = await asyncio.wait_for(bench.load(args.seconds, think),
                                            max(10, wall_deadline - time.monotonic()))
            problems1 = bench.verify()
            if args.profile:  # a clean stop writes the first server's profile
                bench.server.stop()
                bench.server.start()
            kill = await asyncio.wait_for(bench.load(args.kill_seconds, think, kill_at=args.kill_seconds / 2),
                                          max(10, wall_deadline - time.monotonic()))
            problems2 = bench.verify()
        finally:
            bench.server.stop()
        report(args, bench, steady, kill, problems1, problems2)
        return 1 if problems1 or problems2 or steady["missing_arrivals"] else 0


def report(args, bench, steady, kill, problems1, problems2) -> None:
    lat = steady["latency"]
    rss = steady["rss"]
    people = sum(len(r.people) for r in bench.rooms)
    print(f"\n### Steady load: {len(bench.rooms)} sessions, {people} WebSocket clients "
          f"({steady['big_clients']} in the big room), {args.seconds:.0f} s, think time {args.think} s\n")
    print(f"Load average of the machine (1 min) at the start / end: {bench.load_avg[0]:.1f} / "
          f"{os.getloadavg()[0]:.1f} on {os.cpu_count()} CPUs; per-message compression: "
          f"{'on' if bench.compression and args.server_deflate else 'off'}.\n")
    print("| measure | value | target |\n|---|---|---|")
    print(f"| acknowledged operations (all rooms) | {steady['ops']} ({steady['ops'] / steady['elapsed']:.1f}/s) | |")
    print(f"| big room: edit sent → all {steady['big_clients']} clients hold it, p50 / p95 / p99 ms | "
          f"{percentile(lat, .5):.1f} / {percentile(lat, .95):.1f} / {percentile(lat, .99):.1f} "
          f"(n = {len(lat)}) | p95 < 100 |")
    print(f"| big room: edit sent → its ack, p50 / p95 ms | {percentile(steady['ack_ms'], .5):.1f} / "
          f"{percentile(steady['ack_ms'], .95):.1f} | |")
    print(f"| CPU seconds per second: server (+ worker) / this load generator | "
          f"{steady['server_cpu'] / steady['elapsed']:.2f} / {steady['own_cpu'] / steady['elapsed']:.2f} | |")
    for kind, (largest, median, count) in steady["push_kb"].items():
        print(f"| big room: {kind} pushes to one client, count / median / largest KB | "
              f"{count} / {median:.1f} / {largest:.0f} | |")
    print(f"| server RSS, start → end (max) MB | {rss[0][0]:.0f} → {rss[-1][0]:.0f} ({max(r[0] for r in rss):.0f}) | |")
    print(f"| analysis worker RSS, max MB | {max(r[1] for r in rss):.0f} | |")
    print(f"| acknowledged operations lost / applied twice / stored state ≠ replay | "
          f"{'none' if not problems1 else '; '.join(problems1[:5])} | none |")
    print(f"\n### Hard kill: SIGKILL {args.kill_seconds / 2:.0f} s into a {args.kill_seconds:.0f} s run, restart on the same file\n")
    print("| measure | value | target |\n|---|---|---|")
    print(f"| acknowledged operations in this run | {kill['ops']} | |")
    print(f"| server down (kill → answering again) s | {kill['down_s']:.2f} | |")
    print(f"| client reconnects (all clients, whole run) | {sum(p.reconnects for p in bench.everyone())} | |")
    print(f"| commands resent after the drop / answered as already applied | {bench.resent} / {bench.replayed} | |")
    print(f"| acknowledged operations lost / applied twice / stored state ≠ replay / client behind | "
          f"{'none' if not problems2 else '; '.join(problems2[:5])} | none |")
    refused = ", ".join(f"{k} {v}" for k, v in sorted(bench.refused.items(), key=lambda kv: -kv[1]))
    print(f"\nRefused as the rules say (random commands that conflict with the room): {refused or 'none'}; "
          f"timeouts {bench.timeouts}, gave up {bench.gave_up}, edits whose arrival was not seen by every client "
          f"{steady['missing_arrivals']}.")
    for p in problems1 + problems2:
        print(f"PROBLEM: {p}", file=sys.stderr)


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--seconds", type=float, default=60)
    parser.add_argument("--kill-seconds", type=float, default=30)
    parser.add_argument("--rooms", type=int, default=20)
    parser.add_argument("--big", type=int, default=60, help="participants in the big room")
    parser.add_argument("--small", type=int, default=3, help="participants in each other room")
    parser.add_argument("--think", default="1.5,4.5", help="seconds between one client's actions (min,max)")
    parser.add_argument("--seed", type=int, default=1)
    parser.add_argument("--profile", help="write cProfile stats of the (first) server to this file")
    parser.add_argument("--no-deflate", dest="deflate", action="store_false",
                        help="clients decline per-message compression (browsers always offer it)")
    parser.add_argument("--server-deflate", action="store_true",
                        help="let the server accept per-message compression (plain uvicorn's "
                        "default; `arrowmoot serve` turns it off)")
    parser.add_argument("--deadline", type=float, default=420, help="hard stop for the whole run, seconds")
    return asyncio.run(run(parser.parse_args()))


if __name__ == "__main__":
    sys.exit(main())
