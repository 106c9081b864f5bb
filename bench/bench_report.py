"""Time to build the record bundle and render the report, on the demo and on larger diagrams.

    python bench/bench_report.py [--repeats 20] [--sizes 10,50,100]

The demo row uses a full workshop (sample_data/cycle_to_work.json with the
estimation results the HTTP fixture makes). The other rows use seeded random
diagrams of n variables (about 2 arrows per node, a treatment and an outcome
joined by a causal path) with proposals, votes and a history of n events, and
no estimation results. Each row reports median and p95 wall-clock times of
``build_bundle`` (from an analysed workshop), ``render_report`` (from the
bundle: validation, the engine's path check for the adjustment set, the
diagram SVG, the charts and the template) and the report's size.
"""

from __future__ import annotations

import argparse
import json
import random
import statistics
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from app.reporting.bundle import build_bundle  # noqa: E402
from app.reporting.report import render_report  # noqa: E402
from app.workshop.disputes import analyse_workshop  # noqa: E402
from app.workshop.models import Member, Proposal, Vote, Workshop  # noqa: E402


def random_workshop(n: int, seed: int = 7) -> Workshop:
    rng = random.Random(seed)
    names = [f"v{i:03d}" for i in range(n)]
    arrows = {(names[0], names[-1])}
    while len(arrows) < 2 * n:
        a, b = sorted(rng.sample(range(n), 2))
        arrows.add((names[a], names[b]))
    w = Workshop(id="bench", title=f"Random diagram of {n}", join_code="BENCH1", stage="estimation")
    w.variables = [{"name": v, "latent": rng.random() < 0.05 and v not in (names[0], names[-1]),
                    "x": 120.0 * (i % 10), "y": 110.0 * (i // 10)} for i, v in enumerate(names)]
    w.arrows = sorted(arrows)
    w.treatment, w.outcome = [names[0]], [names[-1]]
    w.members = {f"m{i}": Member(id=f"m{i}", name=f"Member {i}", role="facilitator" if i == 0 else "participant")
                 for i in range(6)}
    for pid in range(1, 6):
        a, b = w.arrows[rng.randrange(len(w.arrows))]
        w.proposals[pid] = Proposal(id=pid, kind="remove", source=a, target=b, by="m1", reason="doubtful",
                                    status=rng.choice(["rejected", "disputed"]), created=1.0, settled_by="m0",
                                    settled_at=2.0)
        w.votes[f"proposal:{pid}"] = {f"m{i}": Vote(choice=rng.choice(["agree", "disagree"]), reason="because",
                                                    at=3.0) for i in range(1, 6)}
    w.log = [{"revision": i, "at": float(i), "actor": "m0", "actor_name": "Member 0", "kind": "settle",
              "summary": f"event {i}", "command": {"type": "settle"}, "undoable": False, "undone": False}
             for i in range(n)]
    w.revision = n
    return w


def demo_case():
    from fastapi.testclient import TestClient

    from tests.helpers.app import make_app
    from tests.helpers.workshop import build_workshop

    app = make_app(Path(tempfile.mkdtemp()))
    with TestClient(app) as client:
        made = build_workshop(client)
        sessions = app.state.sessions
        store = sessions.store
        attachments = {k: store.get_attachment(made.session_id, k) for k in store.list_attachment_keys(made.session_id)}
        return sessions.workshop(made.session_id), sessions.analysis.now(made.session_id), attachments


def time_case(label: str, workshop: Workshop, analysis: dict, attachments: dict, repeats: int) -> dict:
    build, render = [], []
    size = 0
    for _ in range(repeats):
        t0 = time.perf_counter()
        bundle = build_bundle(workshop, analysis=analysis, attachments=attachments, data_sha256=None,
                              exported_at=time.time())
        bundle = json.loads(json.dumps(bundle))  # as an import would see it
        t1 = time.perf_counter()
        html = render_report(bundle)
        t2 = time.perf_counter()
        build.append((t1 - t0) * 1000)
        render.append((t2 - t1) * 1000)
        size = len(html.encode("utf-8"))

    def p95(xs):
        return sorted(xs)[max(0, int(round(0.95 * len(xs))) - 1)]

    return {"case": label, "build_med": statistics.median(build), "build_p95": p95(build),
            "render_med": statistics.median(render), "render_p95": p95(render), "kb": size / 1024}


def main() -> int:
    parser = argparse.ArgumentParser()
    parser.add_argument("--repeats", type=int, default=20)
    parser.add_argument("--sizes", default="10,50,100")
    args = parser.parse_args()
    rows = [time_case("demo workshop (10 variables, with estimates)", *demo_case(), args.repeats)]
    for n in [int(s) for s in args.sizes.split(",") if s]:
        w = random_workshop(n)
        rows.append(time_case(f"random, {n} variables", w, analyse_workshop(w), {}, args.repeats))
    print("| case | bundle median ms | bundle p95 ms | report median ms | report p95 ms | report KB |")
    print("|---|---:|---:|---:|---:|---:|")
    for r in rows:
        print(f"| {r['case']} | {r['build_med']:.1f} | {r['build_p95']:.1f} | {r['render_med']:.1f} | "
              f"{r['render_p95']:.1f} | {r['kb']:.0f} |")
    return 0


if __name__ == "__main__":
    sys.exit(main())
