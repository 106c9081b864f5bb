"""Several treatments and outcomes at once: joint adjustment sets by the generalised adjustment
criterion, held to networkx and to the joint interventional effects of linear models."""

from __future__ import annotations

import itertools
import random

import networkx as nx
import numpy as np

from app.graph import identification as ident
from app.graph.document import parse_document


def _case(rng):
    n = rng.randint(4, 8)
    names = [f"v{i}" for i in range(n)]
    p = rng.uniform(0.2, 0.6)
    edges = [(names[i], names[j]) for i in range(n) for j in range(i + 1, n) if rng.random() < p]
    xs = sorted(rng.sample(names[:-1], 2))
    ys = [names[-1]] if rng.random() < 0.7 else sorted(rng.sample([v for v in names if v not in xs], 2))
    others = [v for v in names if v not in xs + ys]
    latent = set(rng.sample(others, min(len(others), rng.randint(0, 1))))
    return names, edges, xs, ys, latent


def _nx_valid(names, edges, xs, ys, z):
    """The generalised adjustment criterion for sets in a DAG (Perkovic, Textor, Kalisch &
    Maathuis 2018, Definition 3.3 with Theorem 5 of van der Zander, Liskiewicz & Textor
    2019): Z avoids forb(X, Y), and d-separates X and Y once the first arrow of every
    proper causal path is removed; networkx calls only."""
    g = nx.DiGraph(edges)
    g.add_nodes_from(names)
    no_in, no_out = g.copy(), g.copy()
    no_in.remove_edges_from([e for x in xs for e in g.in_edges(x)])
    no_out.remove_edges_from([e for x in xs for e in g.out_edges(x)])
    down = set().union(*(nx.descendants(no_in, x) for x in xs)) - set(xs)
    up = set().union(*(nx.ancestors(no_out, y) | {y} for y in ys))
    cn = down & up
    forb = set().union(*(nx.descendants(g, c) | {c} for c in cn)) | set(xs)
    if set(z) & forb:
        return False
    pbd = g.copy()
    pbd.remove_edges_from([(x, c) for x in xs for c in g.successors(x) if c in cn])
    return nx.is_d_separator(pbd, set(xs), set(ys), set(z))


def test_joint_minimal_sets_match_brute_force_for_several_treatments_and_outcomes():
    """Every minimal joint adjustment set the engine lists passes the criterion and none is
    missing (every subset of the measured variables tried)."""
    rng = random.Random(21)
    checked = 0
    for _ in range(150):
        names, edges, xs, ys, latent = _case(rng)
        doc = {"variables": [{"name": n, "latent": n in latent} for n in names],
               "arrows": [{"from": a, "to": b} for a, b in edges], "treatment": xs, "outcome": ys}
        q = ident.Question.of(parse_document(doc))
        listed, more = ident.minimal_adjustment_sets(q)
        rest = [v for v in names if v not in xs + ys and v not in latent]
        valid = [set(z) for k in range(len(rest) + 1) for z in itertools.combinations(rest, k)
                 if _nx_valid(names, edges, xs, ys, z)]
        expected = sorted(sorted(z) for z in valid if not any(o < z for o in valid))
        assert not more and listed == expected, (doc, listed, expected)
        checked += bool(expected)
    assert checked > 50


def test_joint_regression_on_a_valid_set_recovers_each_treatments_effect():
    """In random linear Gaussian models (simulated truths), the population regression of y on
    (X1, X2, Z) gives, for each treatment, its effect under a joint intervention on both
    (entries of (I - B)^-1 with the arrows into X1 and X2 cut) exactly when Z is a valid joint
    adjustment set for generic coefficients (Perkovic et al. 2018)."""
    rng = random.Random(22)
    agreed = 0
    for _ in range(80):
        names, edges, xs, ys, _ = _case(rng)
        y = ys[0]
        index = {v: i for i, v in enumerate(names)}
        b = np.zeros((len(names), len(names)))
        for u, v in edges:
            b[index[v], index[u]] = rng.uniform(0.5, 1.5) * rng.choice([-1, 1])
        inverse = np.linalg.inv(np.eye(len(names)) - b)
        cov = inverse @ np.diag([rng.uniform(0.5, 1.5) for _ in names]) @ inverse.T
        cut = b.copy()
        for x in xs:
            cut[index[x], :] = 0.0
        joint = np.linalg.inv(np.eye(len(names)) - cut)[index[y], [index[x] for x in xs]]
        doc = {"variables": [{"name": n} for n in names], "arrows": [{"from": a, "to": c} for a, c in edges],
               "treatment": xs, "outcome": [y]}
        q = ident.Question.of(parse_document(doc))
        rest = [v for v in names if v not in xs + [y]]
        for k in range(len(rest) + 1):
            for z in itertools.combinations(rest, k):
                cols = [index[v] for v in xs + list(z)]
                coef = np.linalg.solve(cov[np.ix_(cols, cols)], cov[np.ix_(cols, [index[y]])]).ravel()
                unbiased = np.allclose(coef[:len(xs)], joint, atol=1e-9)
                assert ident.is_adjustment_set(q, z) == unbiased, (doc, z)
                agreed += unbiased
    assert agreed > 100
