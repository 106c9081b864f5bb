"""Full re-analysis time after a single-arrow edit, on random DAGs.

    python bench/bench_identify.py [--edits 40] [--sizes 20,50,100,200,400]

For each size n, builds a seeded random DAG with about 2.5 arrows per node
and a treatment/outcome pair joined by a causal path, then repeatedly adds
or removes one arrow (keeping the graph acyclic) and times parse + analyze
(every part: paths, adjustment sets, optimal set, front door, instruments,
implications, roles). Prints median and p95 per size (wall clock, and CPU time of this process,
which is steadier on a shared machine), and the ratio against
a brute-force baseline for the minimal adjustment sets (validity of every
subset of the candidate variables, keeping the minimal ones) against our
listing of the same sets (uncapped), where the baseline finishes within its
time limit.
"""

from __future__ import annotations

import argparse
import itertools
import random
import statistics
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from app.graph.document import parse_document  # noqa: E402
from app.graph.identification import Question, analyze, is_adjustment_set, minimal_adjustment_sets  # noqa: E402

BRUTE_LIMIT_SECONDS = 20.0


def random_document(rng: random.Random, n: int, per_node: float = 2.5, latent_share: float = 0.05):
    names = [f"v{i:03d}" for i in range(n)]
    # Arrows only go forward in this order; each node gets ~per_node parents on average.
    arrows = set()
    target = int(per_node * n)
    while len(arrows) < target:
        i, j = sorted(rng.sample(range(n), 2))
        if j - i <= max(3, n // 4):  # keep paths local, as drawn diagrams are
            arrows.add((names[i], names[j]))
    x = names[n // 5]
    children = {}
    for a, b in arrows:
        children.setdefault(a, set()).add(b)
    reach, stack = set(), [x]
    while stack:
        for c in children.get(stack.pop(), ()):
            if c not in reach:
                reach.add(c)
                stack.append(c)
    y = max(reach) if reach else names[-1]
    latent = {v for v in names if v not in (x, y) and rng.random() < latent_share}
    return names, arrows, latent, x, y


def to_doc(names, arrows, latent, x, y):
    return {
        "variables": [{"name": v, "latent": v in latent} for v in names],
        "arrows": [{"from": a, "to": b} for a, b in sorted(arrows)],
        "treatment": [x],
        "outcome": [y],
    }


def edit(rng: random.Random, names, arrows):
    arrows = set(arrows)
    if arrows and rng.random() < 0.5:
        arrows.remove(rng.choice(sorted(arrows)))
    else:
        while True:
            i, j = sorted(rng.sample(range(len(names)), 2))
            if (names[i], names[j]) not in arrows:
                arrows.add((names[i], names[j]))
                break
    return arrows


def brute_force(doc) -> float | None:
    start = time.perf_counter()
    q = Question.of(parse_document(doc))
    area = q.dag.ancestors(q.xs | q.ys)
    candidates = sorted((area & q.observed) - q.xs - q.ys - q.forb)
    valid = []
    for k in range(len(candidates) + 1):
        for combo in itertools.combinations(candidates, k):
            if time.perf_counter() - start > BRUTE_LIMIT_SECONDS:
                return None
            z = set(combo)
            if any(v <= z for v in valid):
                continue
            if is_adjustment_set(q, z):
                valid.append(z)
    return time.perf_counter() - start


def percentile(values, p):
    values = sorted(values)
    k = min(len(values) - 1, max(0, round(p / 100 * (len(values) - 1))))
    return values[k]


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--edits", type=int, default=40)
    parser.add_argument("--sizes", default="20,50,100,200,400")
    parser.add_argument("--seed", type=int, default=1)
    parser.add_argument("--brute-up-to", type=int, default=50,
                        help="run the brute-force listing only up to this many variables")
    args = parser.parse_args()
    print("| nodes | arrows | edits | median ms | p95 ms | max ms | CPU median ms | CPU p95 ms | brute-force sets ms | ratio to our set listing |")
    print("|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|")
    for n in (int(s) for s in args.sizes.split(",")):
        rng = random.Random(args.seed * 1000 + n)
        names, arrows, latent, x, y = random_document(rng, n)
        analyze(parse_document(to_doc(names, arrows, latent, x, y)))  # warm up
        times, cpu, ours = [], [], []
        brute_times = []
        for i in range(args.edits):
            arrows = edit(rng, names, arrows)
            doc = to_doc(names, arrows, latent, x, y)
            start, cpu_start = time.perf_counter(), time.process_time()
            analyze(parse_document(doc))
            times.append((time.perf_counter() - start) * 1000)
            cpu.append((time.process_time() - cpu_start) * 1000)
            if n <= args.brute_up_to and i < 3 and (not brute_times or brute_times[-1] is not None):
                brute_times.append(brute_force(doc))
                if brute_times[-1] is not None:  # the full listing can be huge otherwise
                    start = time.perf_counter()
                    minimal_adjustment_sets(Question.of(parse_document(doc)), cap=10**9)
                    ours.append(time.perf_counter() - start)
        done = [b for b in brute_times if b is not None]
        if not brute_times:
            brute_cell, ratio = "not run", "-"
        elif len(done) == len(brute_times):
            brute = statistics.median(done) * 1000
            brute_cell = f"{brute:.0f}"
            ratio = f"{brute / (statistics.median(ours) * 1000):.0f}x"
        else:
            brute_cell, ratio = f"> {BRUTE_LIMIT_SECONDS:.0f} s (did not finish)", "-"
        print(
            f"| {n} | {len(arrows)} | {len(times)} | {statistics.median(times):.1f} | "
            f"{percentile(times, 95):.1f} | {max(times):.1f} | {statistics.median(cpu):.1f} | "
            f"{percentile(cpu, 95):.1f} | {brute_cell} | {ratio} |",
            flush=True,
        )


if __name__ == "__main__":
    main()
