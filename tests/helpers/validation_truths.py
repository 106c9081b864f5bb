"""Simulated truths for the checks against the data (all invented, seeded).

Each builder returns a frame drawn from a known linear structure; the
diagrams beside them are the right one and a named wrong one. The seeds and
sizes are stated where they are used.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from scipy import stats

from app.graph.document import parse_document

SEEDS = 200
ROWS = 2000


def diagram(arrows: list[str], *, treatment="t", outcome="y", latent=()):
    pairs = [a.split("->") for a in arrows]
    names = sorted({v for p in pairs for v in p})
    return parse_document({
        "variables": [{"name": n, **({"latent": True} if n in latent else {})} for n in names],
        "arrows": [{"from": a, "to": b} for a, b in pairs], "treatment": [treatment], "outcome": [outcome]})


def false_alarm_band(seeds: int = SEEDS, level: float = 0.05) -> tuple[int, int]:
    """Counts of false alarms a 5 % test gives with probability 99 % over ``seeds`` runs
    (binomial quantiles, scipy)."""
    dist = stats.binom(seeds, level)
    return int(dist.ppf(0.005)), int(dist.isf(0.005))


# -- two routes around the treatment: sets {a, b} and {a, d} --------------------
# truth: a -> t, a -> y, b -> d, d -> t, b -> y, t -> y
DETOUR_RIGHT = ["a->t", "a->y", "b->d", "d->t", "b->y", "t->y"]
# wrong: the arrow d -> t left out, so {a} looks valid and is not
DETOUR_WRONG = ["a->t", "a->y", "b->d", "b->y", "t->y"]


def detour_frame(seed: int, n: int = ROWS) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    a, b = rng.standard_normal(n), rng.standard_normal(n)
    d = b + rng.standard_normal(n)
    t = 0.5 * a + 0.5 * d + rng.standard_normal(n)
    y = 1.0 * t + a + 0.8 * b + rng.standard_normal(n)
    return pd.DataFrame({"a": a, "b": b, "d": d, "t": t, "y": y})


# -- a shared cause the wrong diagram keeps away from treatment and outcome -----------
# truth: a and b each cause t, y and n; t -> y
SHARED_RIGHT = ["a->t", "a->y", "a->n", "b->t", "b->y", "b->n", "t->y"]
# wrong: b drawn as a cause of n only (b -> t and b -> y left out)
SHARED_WRONG = ["a->t", "a->y", "a->n", "b->n", "t->y"]


def shared_frame(seed: int, n: int = ROWS) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    a, b = rng.standard_normal(n), rng.standard_normal(n)
    t = 0.5 * a + 0.4 * b + rng.standard_normal(n)
    y = 1.0 * t + 0.5 * a + 0.4 * b + rng.standard_normal(n)
    c = 0.5 * a + 0.5 * b + rng.standard_normal(n)
    return pd.DataFrame({"a": a, "b": b, "t": t, "y": y, "n": c})
