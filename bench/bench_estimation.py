"""Benchmark the estimation stage.

    python bench/bench_estimation.py [--rows 1000000] [--repeats 3] [--boot-rows 100000]

1. Upload to estimate: a seeded CSV of 1,000,000 rows x 12 columns (binary
   treatment, continuous outcome, nine numeric covariates and one text
   covariate with three levels) is streamed over HTTP to a real uvicorn
   server (PUT .../estimation/data: written to disk in chunks, read with the
   pyarrow engine, checked and profiled), then estimated (POST
   .../estimate, OLS with HC1 robust standard errors over the adjustment set
   the diagram demands). Wall clock from the first byte sent to the answer.
   Peak memory: the server process's peak resident set (VmHWM, reset through
   /proc/PID/clear_refs just before the upload) above its resident set before
   the upload, compared with the CSV size.
2. Overhead against statsmodels: on the already-loaded frame, in this
   process, our estimate (identification, column checks, complete cases,
   collinearity check, fit) against a direct statsmodels call
   (``sm.OLS(y, add_constant(get_dummies(X))).fit(cov_type="HC1")``). Medians
   over --repeats runs, after one warm-up run of each.
3. Bootstrap: 200 resamples on 100,000 rows, re-estimating the regression
   each time (the resampling behind an interval), and the 200-resample
   bootstrap of the standardization (g-formula) estimate on a binary outcome.

Prints a markdown table for bench/README.md.
"""

from __future__ import annotations

import os

# Small dense problems on a 2-core machine shared with other jobs: OpenBLAS's worker
# threads spin and multiply the cost of every small matrix product (measured 17x for
# a 100,000 x 12 least-squares fit), so pin BLAS to one thread unless told otherwise.
# Set before numpy is imported; the server started below inherits it.
os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

import argparse
import platform
import socket
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import httpx
import numpy as np
import pandas as pd
import statsmodels.api as sm

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from app.estimation import estimators, service  # noqa: E402
from app.estimation.design import build_design  # noqa: E402
from app.estimation.tables import load_table  # noqa: E402
from app.graph.document import parse_document  # noqa: E402

COVARIATES = [f"c{i}" for i in range(9)] + ["site"]


def make_frame(rows: int, seed: int = 1, binary_outcome: bool = False) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    cols = {f"c{i}": rng.normal(size=rows).round(4) for i in range(9)}
    cols["site"] = rng.choice(["north", "south", "east"], size=rows)
    lin = sum(0.2 * cols[f"c{i}"] for i in range(9)) + 0.3 * (cols["site"] == "east")
    t = rng.binomial(1, 1 / (1 + np.exp(-lin)))
    signal = 1.5 * t + sum(0.3 * cols[f"c{i}"] for i in range(9)) - 0.5 * (cols["site"] == "south")
    if binary_outcome:
        y = rng.binomial(1, 1 / (1 + np.exp(-(signal - 1.0) / 2)))
    else:
        y = (signal + rng.normal(size=rows)).round(4)
    return pd.DataFrame({"t": t, "y": y, **cols})


def document() -> dict:
    arrows = [[c, "t"] for c in COVARIATES] + [[c, "y"] for c in COVARIATES] + [["t", "y"]]
    return {"variables": ["t", "y", *COVARIATES], "arrows": arrows, "treatment": "t", "outcome": "y"}


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def _status(pid: int, field: str) -> int:
    for line in Path(f"/proc/{pid}/status").read_text().splitlines():
        if line.startswith(field + ":"):
            return int(line.split()[1]) * 1024
    raise RuntimeError(field)


def _cpu(pid: int) -> float:
    fields = Path(f"/proc/{pid}/stat").read_text().rsplit(")", 1)[1].split()
    return (int(fields[11]) + int(fields[12])) / os.sysconf("SC_CLK_TCK")


def _timed(fn):
    wall, cpu = time.perf_counter(), time.process_time()
    out = fn()
    return out, time.perf_counter() - wall, time.process_time() - cpu


def bench_upload(csv_path: Path, workdir: Path) -> dict:
    port = _free_port()
    env = dict(os.environ, ARROWMOOT_DB_PATH=str(workdir / "db.sqlite3"), ARROWMOOT_DATA_DIR=str(workdir / "data"),
               ARROWMOOT_DEMO_SESSION="0", ARROWMOOT_UPLOAD_LIMIT_BYTES=str(2 * 1024 ** 3))
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
            sid, headers = made["session_id"], {"X-Arrowmoot-Token": made["token"]}
            client.post(f"/api/sessions/{sid}/commands", json={"type": "set_stage", "stage": "agreed"}, headers=headers)
            # warm the estimation code paths on a small file so imports are not timed
            small = workdir / "small.csv"
            make_frame(2000).to_csv(small, index=False)
            client.put(f"/api/sessions/{sid}/estimation/data?name=small.csv", content=small.read_bytes(), headers=headers)
            client.post(f"/api/sessions/{sid}/estimation/estimate", json={"checks": False}, headers=headers)
            before = _status(proc.pid, "VmRSS")
            Path(f"/proc/{proc.pid}/clear_refs").write_text("5")

            def chunks():
                with open(csv_path, "rb") as handle:
                    while block := handle.read(1 << 20):
                        yield block

            cpu0 = _cpu(proc.pid)
            start = time.perf_counter()
            r = client.put(f"/api/sessions/{sid}/estimation/data?name=big.csv", content=chunks(),
                           headers={**headers, "Content-Type": "text/csv"})
            uploaded = time.perf_counter()
            cpu1 = _cpu(proc.pid)
            assert r.status_code == 200, r.text
            r = client.post(f"/api/sessions/{sid}/estimation/estimate", json={"checks": False}, headers=headers)
            done = time.perf_counter()
            cpu2 = _cpu(proc.pid)
            assert r.status_code == 200, r.text
            result = r.json()["result"]
            peak = _status(proc.pid, "VmHWM")
            return {"upload_s": uploaded - start, "estimate_s": done - uploaded, "total_s": done - start,
                    "upload_cpu": cpu1 - cpu0, "estimate_cpu": cpu2 - cpu1,
                    "rss_before": before, "peak_above": peak - before, "estimate": result["estimate"],
                    "se": result["std_error"]}
    finally:
        import signal

        os.killpg(proc.pid, signal.SIGTERM)  # the server and its helper processes
        proc.wait(timeout=20)


def bench_overhead(csv_path: Path, repeats: int) -> dict:
    frame = load_table(csv_path, max_bytes=None)
    diagram = parse_document(document())

    def ours():
        return service.estimate(diagram, frame, checks=False)

    def direct():
        x = sm.add_constant(pd.get_dummies(frame[["t", *COVARIATES]], columns=["site"], drop_first=True, dtype=float))
        return sm.OLS(frame["y"], x).fit(cov_type="HC1")

    ours(), direct()
    times = {"ours": [], "direct": [], "ours_cpu": [], "direct_cpu": []}
    for _ in range(repeats):
        for name, fn in (("ours", ours), ("direct", direct)):
            _, wall, cpu = _timed(fn)
            times[name].append(wall)
            times[name + "_cpu"].append(cpu)
    check = direct()
    mine = ours()
    assert abs(mine["estimate"] - check.params["t"]) < 1e-9 and abs(mine["std_error"] - check.bse["t"]) < 1e-9
    return {k: statistics.median(v) for k, v in times.items()}


def bench_bootstrap(rows: int) -> dict:
    frame = make_frame(rows, seed=3)
    mapping = {c: c for c in frame.columns}
    design = build_design(frame, mapping, treatment="t", outcome="y", adjust=COVARIATES)
    def regression_boot():
        rng = np.random.default_rng(2024)
        return [estimators.point_regression(design.take(rng.integers(0, design.n, design.n))) for _ in range(200)]

    draws, regression_s, regression_cpu = _timed(regression_boot)
    binary = make_frame(rows, seed=4, binary_outcome=True)
    design_b = build_design(binary, mapping, treatment="t", outcome="y", adjust=COVARIATES)
    g, g_s, g_cpu = _timed(lambda: estimators.standardization(design_b, resamples=200))
    return {"regression_s": regression_s, "regression_cpu": regression_cpu, "runs": len(draws),
            "g_formula_s": g_s, "g_formula_cpu": g_cpu, "g_interval": g["interval"]}


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rows", type=int, default=1_000_000)
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--boot-rows", type=int, default=100_000)
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        workdir = Path(tmp)
        csv_path = workdir / "bench.csv"
        make_frame(args.rows).to_csv(csv_path, index=False)
        size = csv_path.stat().st_size
        print(f"wrote {size / 1e6:.1f} MB", file=sys.stderr, flush=True)
        up = bench_upload(csv_path, workdir)
        print("upload done", up, file=sys.stderr, flush=True)
        over = bench_overhead(csv_path, args.repeats)
        print("overhead done", over, file=sys.stderr, flush=True)
    boot = bench_bootstrap(args.boot_rows)
    ratio = over["ours"] / over["direct"]
    mb = 1024 ** 2
    load = os.getloadavg()[0]
    print(f"Machine: {platform.machine()}, {os.cpu_count()} CPUs, Python {platform.python_version()}, "
          f"OPENBLAS_NUM_THREADS={os.environ.get('OPENBLAS_NUM_THREADS')}, "
          f"load average {load:.1f} at the end of the run\n")
    print("| measure | wall clock | CPU time | target |")
    print("|---|---|---|---|")
    print(f"| CSV size ({args.rows:,} rows x 12 columns) | {size / mb:.1f} MB | | |")
    print(f"| upload over HTTP (stream to disk, read, check, profile) | {up['upload_s']:.2f} s | {up['upload_cpu']:.2f} s | |")
    print(f"| estimate over HTTP (OLS, HC1 robust SE) | {up['estimate_s']:.2f} s | {up['estimate_cpu']:.2f} s | |")
    print(f"| upload to estimate, total | {up['total_s']:.2f} s | {up['upload_cpu'] + up['estimate_cpu']:.2f} s | < 5 s |")
    print(f"| server peak memory above idle | {up['peak_above'] / mb:.0f} MB = {up['peak_above'] / size:.2f} x CSV | | < 4 x CSV |")
    print(f"| our estimate on the loaded frame (median of {args.repeats}) | {over['ours']:.2f} s | {over['ours_cpu']:.2f} s | |")
    print(f"| direct statsmodels call on the loaded frame (median of {args.repeats}) | {over['direct']:.2f} s | {over['direct_cpu']:.2f} s | |")
    print(f"| ratio ours / direct | {ratio:.2f} | {over['ours_cpu'] / over['direct_cpu']:.2f} | <= 1.3 |")
    print(f"| 200 bootstrap resamples of the regression, {args.boot_rows:,} rows | {boot['regression_s']:.2f} s | {boot['regression_cpu']:.2f} s | < 15 s |")
    print(f"| 200 bootstrap resamples of standardization (two logistic fits each), {args.boot_rows:,} rows | {boot['g_formula_s']:.2f} s | {boot['g_formula_cpu']:.2f} s | |")


if __name__ == "__main__":
    main()
