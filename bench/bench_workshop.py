"""Benchmark the live workshop.

1. Fan-out: 30 participants connected over WebSockets to one session on a
   50-variable diagram. One of them submits edits; we time from the moment an
   edit is sent until every one of the 30 clients holds the new state (and,
   separately, the analysis of that revision). Runs a real uvicorn server on
   loopback.
2. Dispute analysis: 10 disputed arrows on a 50-variable diagram (2^10 = 1024
   combinations), timed in-process.

Usage: python bench/bench_workshop.py [--clients 30] [--edits 200] [--seed 1]
Prints markdown tables for bench/README.md.
"""

from __future__ import annotations

import argparse
import asyncio
import json
import os
import random
import re
import socket
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import httpx
import websockets

ROOT = Path(__file__).resolve().parent.parent
HEADER = re.compile(r'\{"type": "(\w+)", "revision": (\d+)')
COMPRESSION = "deflate"  # what browsers offer; --no-deflate declines it
sys.path.insert(0, str(ROOT))


def random_document(n: int = 50, seed: int = 1, parents: int = 2, latent: int = 4) -> dict:
    """A seeded random DAG in topological order, with a causal path from treatment to outcome."""
    rng = random.Random(seed)
    names = [f"v{i:02d}" for i in range(n)]
    arrows = set()
    for i in range(1, n):
        for j in rng.sample(range(i), min(i, rng.randint(1, parents + 1))):
            arrows.add((names[j], names[i]))
    treatment, outcome = names[n // 3], names[n - 3]
    arrows.add((treatment, names[n // 2]))
    arrows.add((names[n // 2], outcome))
    hidden = set(rng.sample([m for m in names if m not in (treatment, outcome)], latent))
    variables = [{"name": m, "latent": m in hidden, "x": 100 + 180 * (i % 8), "y": 100 + 90 * (i // 8)}
                 for i, m in enumerate(names)]
    return {"format": "arrowmoot-graph", "version": 1, "variables": variables,
            "arrows": [{"from": a, "to": b} for a, b in sorted(arrows)],
            "treatment": [treatment], "outcome": [outcome]}


def percentile(values: list[float], q: float) -> float:
    ordered = sorted(values)
    k = (len(ordered) - 1) * q
    lo, hi = int(k), min(int(k) + 1, len(ordered) - 1)
    return ordered[lo] + (ordered[hi] - ordered[lo]) * (k - lo)


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


class Client:
    def __init__(self, ws):
        self.ws = ws
        self.state_at: dict[int, float] = {}
        self.analysis_at: dict[int, float] = {}
        self.acks: dict[int, asyncio.Future] = {}

    async def run(self):
        async for text in self.ws:
            now = time.perf_counter()
            # Each simulated client would parse on its own machine; here we read only the
            # header so the 30 clients sharing this process do not distort the timing.
            head = HEADER.match(text)
            if head and head.group(1) in ("state", "patch", "analysis"):
                message = {"type": head.group(1), "revision": int(head.group(2))}
            else:
                message = json.loads(text)
            kind = message["type"]
            if kind in ("state", "patch"):
                self.state_at.setdefault(message["revision"], now)
            elif kind == "analysis":
                self.analysis_at.setdefault(message["revision"], now)
            elif kind in ("ack", "error"):
                future = self.acks.pop(message.get("id"), None)
                if future is not None and not future.done():
                    future.set_result(message)


async def fan_out(base: str, clients: int, edits: int, seed: int) -> dict:
    http = httpx.AsyncClient(base_url=base, timeout=30)
    doc = random_document(seed=seed)
    created = (await http.post("/api/sessions", json={"title": "bench", "document": doc})).json()
    sid, code = created["session_id"], created["join_code"]
    tokens = [created["token"]]
    for i in range(clients - 1):
        tokens.append((await http.post("/api/join", json={"code": code, "name": f"p{i}"})).json()["token"])
    ws_base = base.replace("http://", "ws://")
    conns = []
    for token in tokens:
        ws = await websockets.connect(f"{ws_base}/ws/sessions/{sid}", max_size=None, compression=COMPRESSION)
        await ws.send(json.dumps({"type": "hello", "token": token, "revision": None}))
        conns.append(Client(ws))
    tasks = [asyncio.create_task(c.run()) for c in conns]
    await asyncio.sleep(1.0)
    submitter = conns[0]
    rng = random.Random(seed)
    names = [v["name"] for v in doc["variables"]]
    existing = {(a["from"], a["to"]) for a in doc["arrows"]}
    state_ms, analysis_ms, kinds = [], [], []
    for i in range(edits):
        if i % 3 == 0:
            v = rng.choice(names)
            command = {"type": "move_variable", "name": v, "x": rng.randint(0, 1400), "y": rng.randint(0, 800)}
        elif i % 3 == 2 and existing:
            a, b = rng.choice(sorted(existing))
            # agree / unsure only: a vote against makes the arrow disputed, and the dispute
            # analysis is timed on its own below
            command = {"type": "vote", "from": a, "to": b, "choice": rng.choice(["agree", "unsure"]),
                       "reason": "bench"}
        else:
            # a structural edit: add a forward arrow (keeps it acyclic), or remove one we added
            a, b = sorted(rng.sample(range(len(names)), 2))
            pair = (names[a], names[b])
            if pair in existing:
                command = {"type": "delete_arrow", "from": pair[0], "to": pair[1]}
                existing.discard(pair)
            else:
                command = {"type": "add_arrow", "from": pair[0], "to": pair[1]}
                existing.add(pair)
        future = asyncio.get_running_loop().create_future()
        submitter.acks[i] = future
        sent = time.perf_counter()
        await submitter.ws.send(json.dumps({"type": "command", "id": i, "command": command}))
        answer = await asyncio.wait_for(future, 10)
        if answer["type"] != "ack":
            raise RuntimeError(answer)
        revision = answer["revision"]
        deadline = time.perf_counter() + 10
        while any(revision not in c.state_at for c in conns):
            if time.perf_counter() > deadline:
                raise RuntimeError("a client never got the new state")
            await asyncio.sleep(0.0005)
        state_ms.append((max(c.state_at[revision] for c in conns) - sent) * 1000)
        if command["type"] not in ("move_variable", "vote"):
            while any(revision not in c.analysis_at for c in conns):
                if time.perf_counter() > deadline:
                    raise RuntimeError("a client never got the analysis")
                await asyncio.sleep(0.0005)
            analysis_ms.append((max(c.analysis_at[revision] for c in conns) - sent) * 1000)
        kinds.append(command["type"])
        await asyncio.sleep(0.01)
    for c in conns:
        await c.ws.close()
    for t in tasks:
        t.cancel()
    await http.aclose()
    return {"state_ms": state_ms, "analysis_ms": analysis_ms, "arrows": len(doc["arrows"]),
            "move_ms": [t for t, k in zip(state_ms, kinds) if k == "move_variable"],
            "arrow_ms": [t for t, k in zip(state_ms, kinds) if k in ("add_arrow", "delete_arrow")],
            "vote_ms": [t for t, k in zip(state_ms, kinds) if k == "vote"]}


def dispute_timing(seed: int, disputed: int = 10, repeats: int = 5) -> dict:
    from app.graph.identification import analyze
    from app.workshop.commands import apply_command, new_workshop
    from app.workshop.disputes import absent_arrow_report, dispute_report
    from app.workshop.voting import disputed_items

    doc = random_document(seed=seed)
    w, _ = new_workshop(session_id="bench", title="bench", join_code="BENCH1", facilitator_id="f",
                        facilitator_name="F", document=doc, now=0.0)
    fac = w.members["f"]
    rng = random.Random(seed)
    for a, b in rng.sample(sorted(w.arrows), disputed):
        apply_command(w, fac, {"type": "flag_arrow", "from": a, "to": b, "flag": "disputed"}, now=1.0)
    diagram = w.diagram()
    items = disputed_items(w)
    t0 = time.perf_counter()
    base = analyze(diagram)
    analyze_ms = (time.perf_counter() - t0) * 1000
    dispute_runs, absent_runs = [], []
    report = None
    for _ in range(repeats):
        t0 = time.perf_counter()
        report = dispute_report(diagram, items, base)
        dispute_runs.append((time.perf_counter() - t0) * 1000)
        t0 = time.perf_counter()
        absent = absent_arrow_report(diagram, base)
        absent_runs.append((time.perf_counter() - t0) * 1000)
    return {"analyze_ms": analyze_ms, "dispute_ms": dispute_runs, "absent_ms": absent_runs,
            "combinations": report["combinations_checked"], "decisive": sum(i["decisive"] for i in report["items"]),
            "absent_checked": absent["checked"], "arrows": len(diagram.arrows)}


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--clients", type=int, default=30)
    parser.add_argument("--edits", type=int, default=200)
    parser.add_argument("--seed", type=int, default=1)
    parser.add_argument("--no-deflate", action="store_true",
                        help="clients decline per-message compression")
    parser.add_argument("--server-deflate", action="store_true",
                        help="leave uvicorn's per-message compression on (its default)")
    args = parser.parse_args()
    global COMPRESSION
    if args.no_deflate:
        COMPRESSION = None

    with tempfile.TemporaryDirectory() as tmp:
        port = free_port()
        env = dict(os.environ, ARROWMOOT_DB_PATH=str(Path(tmp) / "bench.sqlite3"),
                   ARROWMOOT_DATA_DIR=tmp, ARROWMOOT_DEMO_SESSION="0")
        deflate = "" if args.server_deflate else ", ws_per_message_deflate=False"
        code = ("import uvicorn; from app.main import create_app; "
                f"uvicorn.run(create_app(), host='127.0.0.1', port={port}, log_level='warning'{deflate})")
        server = subprocess.Popen([sys.executable, "-c", code], cwd=ROOT, env=env)
        base = f"http://127.0.0.1:{port}"
        try:
            for _ in range(200):
                try:
                    httpx.get(base + "/", timeout=0.5)
                    break
                except httpx.HTTPError:
                    time.sleep(0.1)
            result = asyncio.run(fan_out(base, args.clients, args.edits, args.seed))
        finally:
            server.terminate()
            server.wait(timeout=10)
    disputes = dispute_timing(args.seed)

    s, a = result["state_ms"], result["analysis_ms"]
    compression = "on" if args.server_deflate and not args.no_deflate else "off"
    print(f"### Fan-out: {args.clients} WebSocket clients, 50 variables / {result['arrows']} arrows, "
          f"{len(s)} edits (a third each: moves, arrows drawn or removed, votes), per-message compression {compression}\n")
    print("| measure | p50 ms | p95 ms | max ms | target |")
    print("|---|---|---|---|---|")
    print(f"| edit sent → every client has the new state | {percentile(s, .5):.1f} | {percentile(s, .95):.1f} | {max(s):.1f} | p95 < 50 |")
    mv, ar, vo = result["move_ms"], result["arrow_ms"], result["vote_ms"]
    print(f"| … moves (a one-line patch) | {percentile(mv, .5):.1f} | {percentile(mv, .95):.1f} | {max(mv):.1f} | |")
    print(f"| … arrows drawn or removed (a small patch) | {percentile(ar, .5):.1f} | {percentile(ar, .95):.1f} | {max(ar):.1f} | |")
    print(f"| … votes (a patch: the arrow's votes and the disputed list) | {percentile(vo, .5):.1f} | {percentile(vo, .95):.1f} | {max(vo):.1f} | |")
    print(f"| arrow edit sent → every client has its analysis | {percentile(a, .5):.1f} | {percentile(a, .95):.1f} | {max(a):.1f} | (none) |")
    d = disputes
    print(f"\n### Dispute analysis: 10 disputed arrows ({d['combinations']} combinations), "
          f"50 variables / {d['arrows']} arrows, {len(d['dispute_ms'])} runs\n")
    print("| measure | median ms | max ms | target |")
    print("|---|---|---|---|")
    print(f"| full analysis of the diagram (engine) | {d['analyze_ms']:.1f} | {d['analyze_ms']:.1f} | (none) |")
    print(f"| dispute analysis (decisive check + every combination) | {statistics.median(d['dispute_ms']):.1f} | {max(d['dispute_ms']):.1f} | < 1000 |")
    print(f"| absent-arrow check ({d['absent_checked']} candidate arrows) | {statistics.median(d['absent_ms']):.1f} | {max(d['absent_ms']):.1f} | (none) |")
    print(f"\n{d['decisive']} of 10 disputes were decisive on this graph (seed {args.seed}).")


if __name__ == "__main__":
    main()
