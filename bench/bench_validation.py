"""Benchmark the checks that can contradict the diagram.

    python bench/bench_validation.py [--rows 100000] [--resamples 200] [--repeats 3] [--probes 200]

1. All checks in this process: a seeded table of --rows rows x 12 columns (binary
   treatment, continuous outcome, nine numeric covariates, one text covariate with
   three levels) and a diagram that accepts exactly 5 valid adjustment sets (4
   minimal and the optimal one) and 3 control exposures; ``service.validate`` with
   --resamples paired resamples (set agreement, control outcomes and exposures,
   each implication and Fisher's C, the verdict). Median wall clock over --repeats
   runs after one warm-up, with the process CPU time.
2. The server keeps answering: a real uvicorn server with the same data attached
   to one session. --probes edits (``move_variable`` on a second session, in
   drafting) are sent one after another and timed from request to answer, first
   with nothing running, then while the checks run in the background on the first
   session (started with POST .../estimation/validation, polled for progress).
   p50 / p95 / max of both, and how long the background run took.

Prints a markdown table for bench/README.md.
"""

from __future__ import annotations

import os

# Small dense problems on a 2-core machine shared with other jobs: one BLAS thread
# (idle OpenBLAS workers spin). Set before numpy is imported; the server inherits it.
os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

import argparse  # noqa: E402
import platform  # noqa: E402
import socket  # noqa: E402
import statistics  # noqa: E402
import subprocess  # noqa: E402
import sys  # noqa: E402
import tempfile  # noqa: E402
import threading  # noqa: E402
import time  # noqa: E402
from pathlib import Path  # noqa: E402

import httpx  # noqa: E402
import numpy as np  # noqa: E402
import pandas as pd  # noqa: E402

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from app.estimation import service  # noqa: E402
from app.graph.document import parse_document  # noqa: E402

# two confounding routes, each blockable at either end (b_i or d_i), three confounders in
# every set, two precision columns: 4 minimal sets and a distinct optimal one
ARROWS = [
    ("b1", "d1"), ("d1", "t"), ("b1", "y"), ("b2", "d2"), ("d2", "t"), ("b2", "y"),
    ("c1", "t"), ("c1", "y"), ("c2", "t"), ("c2", "y"), ("site", "t"), ("site", "y"),
    ("p", "y"), ("w", "y"), ("z", "t"), ("t", "y"),
]
COLUMNS = ["t", "y", "b1", "d1", "b2", "d2", "c1", "c2", "site", "p", "w", "z"]


def make_frame(rows: int, seed: int = 7) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    n = rng.standard_normal
    b1, b2, c1, c2, p, w, z = (n(rows) for _ in range(7))
    d1, d2 = b1 + n(rows), b2 + n(rows)
    site = rng.choice(["north", "south", "east"], size=rows)
    east = site == "east"
    lin = 0.3 * d1 + 0.3 * d2 + 0.3 * c1 - 0.2 * c2 + 0.3 * east + 0.5 * z
    t = rng.binomial(1, 1 / (1 + np.exp(-lin)))
    y = 1.5 * t + 0.4 * b1 + 0.4 * b2 + 0.3 * c1 + 0.3 * c2 - 0.4 * east + 0.5 * p + 0.5 * w + n(rows)
    frame = pd.DataFrame({"t": t, "y": y.round(4), "b1": b1, "d1": d1, "b2": b2, "d2": d2, "c1": c1, "c2": c2,
                          "site": site, "p": p, "w": w, "z": z})
    return frame.round(4)[COLUMNS]


def document() -> dict:
    return {"variables": COLUMNS, "arrows": [{"from": a, "to": b} for a, b in ARROWS],
            "treatment": "t", "outcome": "y"}


def bench_in_process(frame: pd.DataFrame, resamples: int, repeats: int) -> dict:
    diagram = parse_document(document())
    service.validate(diagram, frame.head(5000), resamples=20)  # warm-up: imports and caches
    times, cpus, result = [], [], None
    for _ in range(repeats):
        wall, cpu = time.perf_counter(), time.process_time()
        result = service.validate(diagram, frame, resamples=resamples)
        times.append(time.perf_counter() - wall)
        cpus.append(time.process_time() - cpu)
    by = {i["check"]: i for i in result["items"]}
    compared = [s for s in by["set-agreement"]["sets"] if s["status"] != "not run"]
    return {"wall": statistics.median(times), "cpu": statistics.median(cpus), "sets": len(compared),
            "controls": len(by["control-exposures"].get("controls", [])) + len(by["control-outcomes"].get("controls", [])),
            "verdict": result["verdict"], "run": result["run"]}


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def _probe(client: httpx.Client, sid: str, headers: dict, count: int) -> list[float]:
    out = []
    for i in range(count):
        start = time.perf_counter()
        r = client.post(f"/api/sessions/{sid}/commands", headers=headers,
                        json={"type": "move_variable", "name": "a", "x": 100 + i % 50, "y": 80})
        out.append(time.perf_counter() - start)
        assert r.status_code == 200, r.text
    return out


def _summary(values: list[float]) -> tuple[float, float, float]:
    ms = sorted(v * 1000 for v in values)
    return ms[len(ms) // 2], ms[int(0.95 * (len(ms) - 1))], ms[-1]


def bench_server(csv_path: Path, workdir: Path, resamples: int, probes: int) -> dict:
    port = _free_port()
    env = dict(os.environ, ARROWMOOT_DB_PATH=str(workdir / "db.sqlite3"), ARROWMOOT_DATA_DIR=str(workdir / "data"),
               ARROWMOOT_DEMO_SESSION="0")
    proc = subprocess.Popen([sys.executable, "-m", "uvicorn", "app.main:create_app", "--factory", "--port", str(port),
                             "--log-level", "warning"], cwd=ROOT, env=env, start_new_session=True)
    base = f"http://127.0.0.1:{port}"
    try:
        for _ in range(200):
            try:
                httpx.get(base + "/", timeout=0.5)
                break
            except httpx.HTTPError:
                time.sleep(0.1)
        with httpx.Client(base_url=base, timeout=120) as client:
            made = client.post("/api/sessions", json={"title": "bench", "name": "B", "document": document()}).json()
            sid, head = made["session_id"], {"X-Arrowmoot-Token": made["token"]}
            client.post(f"/api/sessions/{sid}/commands", json={"type": "set_stage", "stage": "agreed"}, headers=head)
            r = client.put(f"/api/sessions/{sid}/estimation/data?name=bench.csv", content=csv_path.read_bytes(),
                           headers={**head, "Content-Type": "text/csv"})
            assert r.status_code == 200, r.text
            other = client.post("/api/sessions", json={"title": "edits", "name": "E",
                                                       "document": {"variables": ["a", "b"], "arrows": []}}).json()
            osid, ohead = other["session_id"], {"X-Arrowmoot-Token": other["token"]}
            _probe(client, osid, ohead, 20)  # warm-up
            idle = _probe(client, osid, ohead, probes)
            base_url = f"/api/sessions/{sid}/estimation/validation"
            start = time.perf_counter()
            r = client.post(base_url, json={"resamples": resamples}, headers=head)
            assert r.status_code == 202, r.text
            busy: list[float] = []
            state = {"done": None}

            def watch():
                with httpx.Client(base_url=base, timeout=120) as watcher:
                    while True:
                        run = watcher.get(base_url + "/run", headers=head).json()["run"]
                        if run["state"] != "running":
                            state["done"] = (time.perf_counter() - start, run["state"])
                            return
                        time.sleep(0.2)

            watcher = threading.Thread(target=watch)
            watcher.start()
            while state["done"] is None and len(busy) < 10 * probes:
                busy += _probe(client, osid, ohead, 10)
            watcher.join()
            return {"idle": _summary(idle), "busy": _summary(busy), "busy_n": len(busy),
                    "run_s": state["done"][0], "run_state": state["done"][1]}
    finally:
        proc.terminate()
        proc.wait(timeout=20)


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--rows", type=int, default=100_000)
    parser.add_argument("--resamples", type=int, default=200)
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--probes", type=int, default=200)
    args = parser.parse_args()
    frame = make_frame(args.rows)
    local = bench_in_process(frame, args.resamples, args.repeats)
    with tempfile.TemporaryDirectory() as tmp:
        csv = Path(tmp) / "bench.csv"
        frame.to_csv(csv, index=False)
        live = bench_server(csv, Path(tmp), args.resamples, args.probes)
    print(f"machine: {platform.machine()}, {os.cpu_count()} cores, Python {platform.python_version()}, "
          f"load average {os.getloadavg()[0]:.1f}")
    print()
    print("| measure | value | target |")
    print("|---|---|---|")
    print(f"| all checks, {args.rows:,} rows x 12 columns, {local['sets']} valid sets, {local['controls']} controls, "
          f"{args.resamples} resamples (median of {args.repeats}) | {local['wall']:.2f} s wall, {local['cpu']:.2f} s CPU "
          f"({local['run']} checks ran: {local['verdict']}) | < 10 s |")
    print(f"| the same run in the background on the server | {live['run_s']:.2f} s ({live['run_state']}) | (none) |")
    print(f"| edit answered, nothing running: p50 / p95 / max | {live['idle'][0]:.1f} / {live['idle'][1]:.1f} / "
          f"{live['idle'][2]:.1f} ms ({args.probes} edits) | (baseline) |")
    print(f"| edit answered while the checks run: p50 / p95 / max | {live['busy'][0]:.1f} / {live['busy'][1]:.1f} / "
          f"{live['busy'][2]:.1f} ms ({live['busy_n']} edits) | p95 near the baseline |")


if __name__ == "__main__":
    main()
