"""Time the dispute analysis on seeded 50-variable diagrams, by kind of dispute.

Run: python bench/bench_disputes.py [--sizes 50] [--disputed 10] [--seeds 1,2,3] [--repeats 3]

For each seed it builds the same random diagram as bench_workshop.py, picks drawn arrows
at random and disputes them in one of three ways: whether the arrow exists (the
facilitator marks it disputed), which way it points (a proposal to reverse it), or a mix
of both (half each). It then times the whole dispute analysis (each dispute alone, every
combination, the sets valid in every combination) and prints a table of medians and
maxima over seeds and repeats, and whether the list of sets valid everywhere is exact.
In-process; no server is started.
"""

from __future__ import annotations

import argparse
import os
import random
import statistics
import sys
import time

sys.path.insert(0, os.path.join(os.path.dirname(__file__), ".."))
sys.path.insert(0, os.path.dirname(__file__))

from bench_workshop import random_document  # noqa: E402


def one_case(n: int, seed: int, disputed: int, kind: str, repeats: int) -> dict:
    from app.graph.identification import analyze
    from app.workshop.commands import apply_command, new_workshop
    from app.workshop.disputes import dispute_report
    from app.workshop.voting import disputed_items

    doc = random_document(n=n, seed=seed)
    w, _ = new_workshop(session_id="bench", title="bench", join_code="BENCH1", facilitator_id="f",
                        facilitator_name="F", document=doc, now=0.0)
    fac = w.members["f"]
    apply_command(w, fac, {"type": "set_stage", "stage": "debating"}, now=1.0)
    rng = random.Random(seed)
    for i, (a, b) in enumerate(rng.sample(sorted(w.arrows), disputed)):
        direction = kind == "direction" or (kind == "mixed" and i % 2 == 0)
        if direction:
            apply_command(w, fac, {"type": "propose", "kind": "reverse", "from": a, "to": b}, now=1.0)
        else:
            apply_command(w, fac, {"type": "flag_arrow", "from": a, "to": b, "flag": "disputed"}, now=1.0)
    diagram = w.diagram()
    items = disputed_items(w)
    base = analyze(diagram)
    runs, report = [], None
    for _ in range(repeats):
        t0 = time.perf_counter()
        report = dispute_report(diagram, items, base)
        runs.append((time.perf_counter() - t0) * 1000)
    return {"ms": runs, "exact": report["robust_complete"], "method": report["robust_method"],
            "sets": len(report["robust_sets"]), "combos": report["combinations_checked"],
            "items": len(items)}


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", default="50")
    parser.add_argument("--disputed", type=int, default=10)
    parser.add_argument("--seeds", default="1,2,3")
    parser.add_argument("--repeats", type=int, default=3)
    args = parser.parse_args()
    seeds = [int(s) for s in args.seeds.split(",")]
    print(f"### Dispute analysis by kind of dispute: {args.disputed} disputed arrows, seeds {args.seeds}, "
          f"{args.repeats} runs each\n")
    print("| variables | disputes over | combinations | median ms | max ms | sets valid everywhere: exact | how | target |")
    print("|---:|---|---:|---:|---:|---|---|---|")
    for n in [int(s) for s in args.sizes.split(",")]:
        for kind in ("presence", "direction", "mixed"):
            cases = [one_case(n, s, args.disputed, kind, args.repeats) for s in seeds]
            ms = [t for c in cases for t in c["ms"]]
            exact = sum(c["exact"] for c in cases)
            how = ", ".join(sorted({c["method"] for c in cases}))
            combos = "/".join(str(c["combos"]) for c in cases)
            print(f"| {n} | {kind} | {combos} | {statistics.median(ms):.0f} | {max(ms):.0f} | "
                  f"{exact} of {len(cases)} | {how} | < 1000 |")


if __name__ == "__main__":
    main()
