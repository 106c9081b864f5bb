"""Diagrams from the literature and random DAGs shared by the engine tests.

Each builder names its source. Builders return graph documents (dicts), so
the tests also exercise the document parser.
"""

from __future__ import annotations

import random


def document(arrows, treatment, outcome, latent=(), extra=()):
    names = sorted({n for arrow in arrows for n in arrow} | set(extra))
    return {
        "variables": [{"name": n, "latent": n in latent} for n in names],
        "arrows": [{"from": a, "to": b} for a, b in arrows],
        "treatment": treatment,
        "outcome": outcome,
    }


def confounding_graph():
    """A single common cause (Pearl 2009, Causality 2nd ed., Section 3.3.1)."""
    return document([("c", "x"), ("c", "y"), ("x", "y")], "x", "y")


def m_bias_graph():
    """M-bias (Greenland, Pearl & Robins 1999, Epidemiology 10(1), Figure 6; Ding & Miratrix 2015)."""
    return document([("a", "x"), ("a", "m"), ("b", "m"), ("b", "y"), ("x", "y")], "x", "y")


def butterfly_graph():
    """Butterfly bias: m is both a collider and a confounder (Ding & Miratrix 2015, J. Causal Inference 3(1), Figure 2)."""
    return document(
        [("a", "x"), ("a", "m"), ("b", "m"), ("b", "y"), ("m", "x"), ("m", "y"), ("x", "y")], "x", "y"
    )


def pearl_figure_3_4():
    """Pearl 2009, Causality 2nd ed., Figure 3.4 (back-door example; edges from memory).

    Pearl states that {X3, X4} and {X4, X5} satisfy the back-door criterion
    and {X4} alone does not.
    """
    return document(
        [
            ("X1", "X3"), ("X1", "X4"), ("X2", "X4"), ("X2", "X5"),
            ("X3", "Xi"), ("X4", "Xi"), ("X4", "Xj"), ("X5", "Xj"),
            ("Xi", "X6"), ("X6", "Xj"),
        ],
        "Xi", "Xj",
    )


def front_door_graph():
    """Smoking -> tar -> cancer with an unmeasured genotype (Pearl 1995, Biometrika 82(4); Pearl 2009 Figure 3.5)."""
    return document(
        [("genotype", "smoking"), ("genotype", "cancer"), ("smoking", "tar"), ("tar", "cancer")],
        "smoking", "cancer", latent=["genotype"],
    )


def instrument_graph():
    """The classic instrument: z -> x -> y with unmeasured u confounding x and y (Pearl 2009, Figure 5.9(a), from memory)."""
    return document([("z", "x"), ("x", "y"), ("u", "x"), ("u", "y")], "x", "y", latent=["u"])


def conditional_instrument_graph():
    """z is an instrument only given w (Brito & Pearl 2002, UAI, Figure 2(b) style; from memory)."""
    return document(
        [("w", "z"), ("w", "y"), ("z", "x"), ("x", "y"), ("u", "x"), ("u", "y")],
        "x", "y", latent=["u"],
    )


def bow_graph():
    """The bow pattern: x -> y with an unmeasured common cause; not identified (Pearl 2009, Section 3.5, Figure 3.9(a))."""
    return document([("x", "y"), ("u", "x"), ("u", "y")], "x", "y", latent=["u"])


def random_dag(rng: random.Random, n: int, p: float, latent_share: float = 0.0):
    names = [f"v{i}" for i in range(n)]
    order = names[:]
    rng.shuffle(order)
    arrows = [
        (order[i], order[j]) for i in range(n) for j in range(i + 1, n) if rng.random() < p
    ]
    latent = [v for v in names if rng.random() < latent_share]
    return names, arrows, latent


def random_question(rng: random.Random, n: int, p: float, latent_share: float = 0.0, sets: bool = False):
    """A random DAG document with a random treatment/outcome (observed) question."""
    names, arrows, latent = random_dag(rng, n, p, latent_share)
    observed = [v for v in names if v not in latent]
    if len(observed) < 2:
        latent = latent[:-2]
        observed = [v for v in names if v not in latent]
    if sets and len(observed) >= 4 and rng.random() < 0.5:
        chosen = rng.sample(observed, 4)
        treatment, outcome = chosen[:2], chosen[2:]
    else:
        treatment, outcome = [[v] for v in rng.sample(observed, 2)]
    return {
        "variables": [{"name": v, "latent": v in latent} for v in names],
        "arrows": [{"from": a, "to": b} for a, b in arrows],
        "treatment": treatment,
        "outcome": outcome,
    }


def planted_question(rng: random.Random, n: int, p: float):
    """A random DAG with an unmeasured x-y confounder and an x -> m -> y chain planted.

    Such graphs often have no adjustment set, so front-door sets and
    (conditional) instruments show up; pure random DAGs rarely have them.
    """
    order = [f"v{i}" for i in range(n)]
    rng.shuffle(order)
    ix, im, iy = sorted(rng.sample(range(1, n), 3))
    x, m, y = order[ix], order[im], order[iy]
    arrows = {(order[i], order[j]) for i in range(n) for j in range(i + 1, n) if rng.random() < p}
    arrows |= {("u", x), ("u", y), (x, m), (m, y)}
    if rng.random() < 0.7:
        arrows.discard((x, y))
    names = order + ["u"]
    if rng.random() < 0.5:  # an instrument candidate, sometimes needing a conditioning set
        names.append("z")
        arrows.add(("z", x))
        if rng.random() < 0.5:
            names.append("w")
            arrows |= {("w", "z"), ("w", y)}
    latent = {"u"} | {v for v in order if v not in (x, y, m) and rng.random() < 0.15}
    return {
        "variables": [{"name": v, "latent": v in latent} for v in names],
        "arrows": [{"from": a, "to": b} for a, b in sorted(arrows)],
        "treatment": [x],
        "outcome": [y],
    }
