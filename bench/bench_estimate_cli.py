"""Whole-process timings of the command line, side by side in one run.

    python bench/bench_estimate_cli.py [--rows 1000000] [--repeats 3]

Writes (in a temporary folder, removed afterwards) the seeded 1,000,000 x 12 CSV of
bench_estimation.py (binary treatment, continuous outcome, nine numeric covariates
and one three-level text covariate; the diagram's adjustment set has ten
variables) and its graph document, then times, alternating the commands in each
round so that the machine's load falls on all of them alike:

- ``arrowmoot estimate GRAPH DATA --no-validation``: the estimate with every
  implication test (and the sensitivity analysis the command always adds);
- the same with ``--no-implication-tests``;
- a plain script: pandas ``read_csv`` (pyarrow engine) and statsmodels
  ``OLS(...).fit(cov_type="HC1")`` on the same columns with indicator columns;
- ``arrowmoot --version`` and ``arrowmoot identify`` on the demo diagram.

Wall clock, CPU time (user + system) and peak resident memory come from the
child process's own resource usage (``os.wait4``). Medians over --repeats
rounds. The load average at the start and end is printed beside the table:
other jobs share this machine.
"""

from __future__ import annotations

import argparse
import json
import os
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
# The data is written by a child process, so this process stays small and the children's
# peak memory (inherited at fork) is their own.
WRITE = """
import json, sys
sys.path.insert(0, "bench")
from bench_estimation import document, make_frame
make_frame(int(sys.argv[1])).to_csv(sys.argv[2], index=False)
open(sys.argv[3], "w").write(json.dumps(document()))
"""

PLAIN = """
import sys
import pandas as pd
import statsmodels.api as sm
frame = pd.read_csv(sys.argv[1], engine="pyarrow")
x = pd.get_dummies(frame.drop(columns=["y"]), columns=["site"], drop_first=True, dtype=float)
fit = sm.OLS(frame["y"], sm.add_constant(x)).fit(cov_type="HC1")
print(fit.params["t"], fit.bse["t"])
"""


def run(argv: list[str]) -> dict:
    """Wall, CPU and peak memory of one child process (resource usage from wait4)."""
    start = time.perf_counter()
    proc = subprocess.Popen(argv, cwd=ROOT, stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    out = proc.stdout.read()
    err = proc.stderr.read()
    _, status, usage = os.wait4(proc.pid, 0)
    wall = time.perf_counter() - start
    if status:
        raise SystemExit(f"{' '.join(argv)} failed:\n{err.decode()[-2000:]}")
    return {"wall": wall, "cpu": usage.ru_utime + usage.ru_stime, "rss": usage.ru_maxrss * 1024,
            "out": out.decode()}


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--rows", type=int, default=1_000_000)
    parser.add_argument("--repeats", type=int, default=3)
    args = parser.parse_args()
    load_before = os.getloadavg()
    with tempfile.TemporaryDirectory(prefix="arrowmoot-bench-") as tmp:
        data, graph = Path(tmp) / "wide.csv", Path(tmp) / "wide.json"
        subprocess.run([sys.executable, "-c", WRITE, str(args.rows), str(data), str(graph)], cwd=ROOT, check=True)
        cli = [sys.executable, "-m", "app.cli"]
        commands = {
            "arrowmoot estimate (every implication test)": cli + ["estimate", str(graph), str(data), "--no-validation"],
            "arrowmoot estimate --no-implication-tests": cli + ["estimate", str(graph), str(data), "--no-validation",
                                                               "--no-implication-tests"],
            "plain pandas + statsmodels OLS (HC1)": [sys.executable, "-c", PLAIN, str(data)],
            "arrowmoot --version": cli + ["--version"],
            "arrowmoot identify (demo diagram)": cli + ["identify", "sample_data/cycle_to_work.json"],
        }
        runs: dict[str, list[dict]] = {name: [] for name in commands}
        for _ in range(args.repeats):
            for name, argv in commands.items():
                runs[name].append(run(argv))
        first = json.loads(runs["arrowmoot estimate (every implication test)"][0]["out"])
        plain_est, plain_se = map(float, runs["plain pandas + statsmodels OLS (HC1)"][0]["out"].split())
        assert abs(first["estimate"] - plain_est) <= 1e-9 * abs(plain_est), (first["estimate"], plain_est)
        assert abs(first["std_error"] - plain_se) <= 1e-9 * abs(plain_se), (first["std_error"], plain_se)
        tests = first["checks"]["tested"]
    load_after = os.getloadavg()
    plain = statistics.median(r["wall"] for r in runs["plain pandas + statsmodels OLS (HC1)"])
    print(f"{args.rows:,} rows x 12 columns, {tests} implication tests; medians of {args.repeats} rounds; "
          f"load average {load_before[0]:.1f} at the start, {load_after[0]:.1f} at the end (2 cores)\n")
    plain_cpu = statistics.median(r["cpu"] for r in runs["plain pandas + statsmodels OLS (HC1)"])
    print("| command | wall s | CPU s | peak memory MB | wall / plain script | CPU / plain script |")
    print("|---|---|---|---|---|---|")
    for name, rs in runs.items():
        wall = statistics.median(r["wall"] for r in rs)
        cpu = statistics.median(r["cpu"] for r in rs)
        rss = max(r["rss"] for r in rs) / 1e6
        print(f"| {name} | {wall:.2f} | {cpu:.2f} | {rss:.0f} | {wall / plain:.2f} | {cpu / plain_cpu:.2f} |")


if __name__ == "__main__":
    main()
