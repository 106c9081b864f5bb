"""The identification engine against networkx and against the definitions, by brute force.

References: networkx's ``is_d_separator`` (Hagberg, Schult & Swart 2008,
NetworkX 3.x); the adjustment criterion as stated by Shpitser, VanderWeele &
Robins (2010) Definition 3 and Perkovic et al. (2018) Definition 3.3, checked
path by path; instruments as in Brito & Pearl (2002) Definition; front-door
sets as in Pearl (2009) Definition 3.3.3 with the set reading of Jeong, Tian &
Bareinboim (2022); the optimal set's variance property from Henckel,
Perkovic & Maathuis (2022) Theorem 3.10, checked numerically with the
population covariance of random linear Gaussian models.
"""

from __future__ import annotations

import itertools
import random

import networkx as nx
import numpy as np
import pytest

from app.graph.dag import Dag
from app.graph.document import parse_document
from app.graph import identification as ident

from tests.helpers.graph_cases import planted_question, random_dag, random_question


def _subsets(items):
    items = sorted(items)
    for k in range(len(items) + 1):
        yield from (set(c) for c in itertools.combinations(items, k))


# --------------------------------------------------------------- definitions
def _skeleton_paths(graph, xs, ys):
    skeleton = graph.to_undirected()
    for x in xs:
        for y in ys:
            for path in nx.all_simple_paths(skeleton, x, y):
                if not (set(path[1:-1]) & (set(xs) | set(ys))):
                    yield path


def _is_causal(graph, path):
    return all(graph.has_edge(u, v) for u, v in zip(path, path[1:]))


def _is_blocked(graph, path, given):
    for i in range(1, len(path) - 1):
        v = path[i]
        collider = graph.has_edge(path[i - 1], v) and graph.has_edge(path[i + 1], v)
        if collider:
            if v not in given and not (nx.descendants(graph, v) & given):
                return True
        elif v in given:
            return True
    return False


def _forbidden(graph, xs, ys):
    on_causal = set()
    for path in _skeleton_paths(graph, xs, ys):
        if _is_causal(graph, path):
            on_causal |= set(path[1:])
    forb = set(xs)
    for w in on_causal:
        forb |= {w} | nx.descendants(graph, w)
    return forb, on_causal


def _valid_by_definition(graph, xs, ys, zs, observed):
    if zs - observed or zs & (set(xs) | set(ys)):
        return False
    forb, _ = _forbidden(graph, xs, ys)
    if zs & forb:
        return False
    return all(
        _is_blocked(graph, p, zs) for p in _skeleton_paths(graph, xs, ys) if not _is_causal(graph, p)
    )


def _graph(doc):
    g = nx.DiGraph()
    g.add_nodes_from(v["name"] for v in doc["variables"])
    g.add_edges_from((a["from"], a["to"]) for a in doc["arrows"])
    return g


def _as_list(value):
    return [value] if isinstance(value, str) else list(value)


# --------------------------------------------------------------- d-separation
def test_d_separation_agrees_with_networkx_on_200_random_dags():
    """Reference: networkx.is_d_separator on 200 seeded random DAGs, random X, Y, Z."""
    rng = random.Random(20261201)
    checked = 0
    for _ in range(200):
        n = rng.randint(4, 14)
        names, arrows, _ = random_dag(rng, n, rng.uniform(0.1, 0.5))
        graph = nx.DiGraph()
        graph.add_nodes_from(names)
        graph.add_edges_from(arrows)
        dag = Dag(names, arrows)
        for _ in range(5):
            picked = rng.sample(names, rng.randint(2, min(n, 6)))
            cut1 = rng.randint(1, len(picked) - 1)
            cut2 = rng.randint(cut1, len(picked))
            xs, ys, zs = set(picked[:cut1]), set(picked[cut1:cut2]) or {picked[-1]}, set(picked[cut2:])
            if ys & xs:
                continue
            zs -= xs | ys
            assert dag.is_d_separated(xs, ys, zs) == nx.is_d_separator(graph, xs, ys, zs)
            checked += 1
    assert checked > 600


# --------------------------------------------------------------- adjustment sets
def _random_cases(seed, count, n_max=9, latent_share=0.15, sets=True):
    rng = random.Random(seed)
    for _ in range(count):
        yield random_question(rng, rng.randint(3, n_max), rng.uniform(0.15, 0.55), latent_share, sets)


@pytest.mark.parametrize("seed", range(6))
def test_minimal_adjustment_sets_match_brute_force(seed):
    """Every listed set is valid and minimal, and no minimal valid set is missed."""
    for doc in _random_cases(seed, 25):
        diagram = parse_document(doc)
        graph = _graph(doc)
        xs, ys = set(_as_list(doc["treatment"])), set(_as_list(doc["outcome"]))
        observed = set(diagram.observed)
        candidates = observed - xs - ys
        valid = [z for z in _subsets(candidates) if _valid_by_definition(graph, xs, ys, z, observed)]
        minimal = sorted(sorted(z) for z in valid if not any(o < z for o in valid))
        q = ident.Question.of(diagram)
        listed, more = ident.minimal_adjustment_sets(q)
        assert not more
        assert listed == minimal, doc
        for z in _subsets(candidates):
            assert ident.is_adjustment_set(q, z) == (z in valid)
            assert ident.check_adjustment(q, z)["valid"] == (z in valid)


def _linear_model(graph, rng):
    nodes = list(nx.topological_sort(graph))
    index = {v: i for i, v in enumerate(nodes)}
    n = len(nodes)
    b = np.zeros((n, n))
    for u, v in graph.edges:
        b[index[v], index[u]] = rng.uniform(0.5, 1.5) * rng.choice([-1, 1])
    inverse = np.linalg.inv(np.eye(n) - b)
    noise = np.diag([rng.uniform(0.5, 1.5) for _ in range(n)])
    return index, inverse, inverse @ noise @ inverse.T


def _regression(cov, index, y, regressors):
    cols = [index[r] for r in regressors]
    s_xx = cov[np.ix_(cols, cols)]
    s_xy = cov[np.ix_(cols, [index[y]])]
    coef = np.linalg.solve(s_xx, s_xy).ravel()
    residual = cov[index[y], index[y]] - float(s_xy.ravel() @ coef)
    return coef, residual


def test_valid_sets_recover_the_total_effect_in_linear_models():
    """Semantics, not just graphs: in a random linear Gaussian model the population
    regression coefficient of y on (x, Z) equals the total effect exactly when Z is
    a valid adjustment set (Shpitser et al. 2010; generic parameters)."""
    rng = random.Random(7)
    checked = 0
    for doc in _random_cases(99, 60, n_max=8, latent_share=0.0, sets=False):
        diagram = parse_document(doc)
        graph = _graph(doc)
        (x,), (y,) = doc["treatment"], doc["outcome"]
        index, inverse, cov = _linear_model(graph, rng)
        effect = inverse[index[y], index[x]]
        q = ident.Question.of(diagram)
        for z in _subsets(set(graph) - {x, y}):
            coef, _ = _regression(cov, index, y, [x, *sorted(z)])
            unbiased = abs(coef[0] - effect) < 1e-9
            assert ident.is_adjustment_set(q, z) == unbiased, (doc, z)
            checked += 1
    assert checked > 500


def test_optimal_set_has_the_smallest_asymptotic_variance():
    """Henckel, Perkovic & Maathuis (2022), Theorem 3.10: among valid sets the O-set
    minimises the asymptotic variance of the OLS coefficient, which is
    sigma^2(y | x, Z) / sigma^2(x | Z) in population terms."""
    rng = random.Random(11)
    compared = 0
    for doc in _random_cases(5, 80, n_max=8, latent_share=0.0, sets=False):
        diagram = parse_document(doc)
        graph = _graph(doc)
        (x,), (y,) = doc["treatment"], doc["outcome"]
        q = ident.Question.of(diagram)
        optimal, _ = ident.optimal_adjustment_set(q)
        valid = [z for z in _subsets(set(graph) - {x, y}) if ident.is_adjustment_set(q, z)]
        if optimal is None:
            assert not valid or not q.cn
            continue
        assert ident.is_adjustment_set(q, optimal)
        index, _, cov = _linear_model(graph, rng)

        def variance(z, cov=cov, index=index, x=x, y=y):
            _, res_y = _regression(cov, index, y, [x, *sorted(z)])
            if z:
                _, res_x = _regression(cov, index, x, sorted(z))
            else:
                res_x = cov[index[x], index[x]]
            return res_y / res_x

        best = variance(set(optimal))
        for z in valid:
            assert best <= variance(z) + 1e-9
            compared += 1
    assert compared > 100


# --------------------------------------------------------------- instruments and front door
def _pbd(graph, x, y):
    _, on_causal = _forbidden(graph, [x], [y])
    g = graph.copy()
    g.remove_edges_from([(x, w) for w in list(graph.successors(x)) if w in on_causal])
    return g


def _mixed_cases(seed, count):
    """Random DAGs and DAGs with a planted unmeasured confounder, alternating."""
    rng = random.Random(seed)
    for i in range(count):
        if i % 2:
            yield planted_question(rng, rng.randint(4, 8), rng.uniform(0.1, 0.4))
        else:
            yield random_question(rng, rng.randint(3, 8), rng.uniform(0.15, 0.55), 0.25, i % 4 == 0)


def test_instruments_match_brute_force():
    """Brito & Pearl (2002): z is an instrument given W (no descendants of x) when
    z is d-separated from y given W once the causal arrows out of x are cut, and
    d-connected to x given W. The engine lists z exactly when such a W exists inside
    an(z u y) of the cut graph (ancestral instruments, van der Zander, Textor &
    Liskiewicz 2015), and lists some instrument whenever any z has any such W."""
    positives = conditional = 0
    for doc in _mixed_cases(100, 160):
        if len(_as_list(doc["treatment"])) > 1:
            continue
        diagram = parse_document(doc)
        graph = _graph(doc)
        (x,), (y,) = doc["treatment"], doc["outcome"]
        q = ident.Question.of(diagram)
        if not q.cn:
            continue
        observed = set(diagram.observed)
        cut = _pbd(graph, x, y)
        desc = nx.descendants(graph, x) | {x}
        expected, anywhere = set(), set()
        for z in observed - desc - {y}:
            pool = observed - desc - {y, z}
            area = nx.ancestors(cut, z) | nx.ancestors(cut, y)
            works = [w for w in _subsets(pool)
                     if nx.is_d_separator(cut, {z}, {y}, w) and not nx.is_d_separator(graph, {z}, {x}, w)]
            anywhere |= {z} if works else set()
            expected |= {z} if any(set(w) <= area for w in works) else set()
        found = ident.instruments(q)
        assert {f["instrument"] for f in found} == expected, doc
        assert bool(found) == bool(anywhere), doc
        positives += bool(found)
        conditional += any(f["given"] for f in found)
        for f in found:
            assert nx.is_d_separator(cut, {f["instrument"]}, {y}, set(f["given"]))
            assert not nx.is_d_separator(graph, {f["instrument"]}, {x}, set(f["given"]))
    assert positives >= 10 and conditional >= 2  # the check is not vacuous


def _front_door_by_definition(graph, xs, ys, zs):
    rest = graph.copy()
    rest.remove_nodes_from(zs)
    if any(nx.has_path(rest, x, y) for x in xs for y in ys):
        return False
    no_out_x = graph.copy()
    no_out_x.remove_edges_from(list(graph.out_edges(xs)))
    if not nx.is_d_separator(no_out_x, set(xs), set(zs), set()):
        return False
    no_out_z = graph.copy()
    no_out_z.remove_edges_from(list(graph.out_edges(zs)))
    return nx.is_d_separator(no_out_z, set(zs), set(ys), set(xs))


def test_front_door_sets_match_brute_force():
    positives = 0
    for doc in _mixed_cases(200, 160):
        diagram = parse_document(doc)
        graph = _graph(doc)
        xs, ys = set(_as_list(doc["treatment"])), set(_as_list(doc["outcome"]))
        q = ident.Question.of(diagram)
        if not q.cn:
            continue  # no causal path: the effect is zero and "intercepting" is vacuous
        pool = set(diagram.observed) - xs - ys
        valid = [z for z in _subsets(pool) if z and _front_door_by_definition(graph, xs, ys, z)]
        minimal = sorted(sorted(z) for z in valid if not any(o < z for o in valid))
        listed, more = ident.front_door_sets(q)
        assert not more
        assert listed == minimal, doc
        positives += bool(listed)
    assert positives >= 30  # the check is not vacuous


# --------------------------------------------------------------- roles and implications
def test_colliders_match_path_enumeration():
    """A variable has the collider role exactly when it is a collider on some proper
    path between treatment and outcome (Pearl 2009, Definition 1.2.3), found here by
    listing every path with networkx."""
    positives = 0
    for doc in _mixed_cases(300, 120):
        diagram = parse_document(doc)
        graph = _graph(doc)
        xs, ys = set(_as_list(doc["treatment"])), set(_as_list(doc["outcome"]))
        expected = set()
        for path in _skeleton_paths(graph, xs, ys):
            for i in range(1, len(path) - 1):
                if graph.has_edge(path[i - 1], path[i]) and graph.has_edge(path[i + 1], path[i]):
                    expected.add(path[i])
        roles = ident.analyze(diagram)["roles"]
        assert {v for v, r in roles.items() if "collider" in r} == expected, doc
        positives += bool(expected)
    assert positives >= 30


def test_implications_match_brute_force_separability():
    """Every listed statement holds by networkx.is_d_separator in the full diagram
    (unmeasured variables included), and every pair of measured variables that some
    measured set separates is listed once (Richardson 2003; Richardson & Spirtes 2002)."""
    with_latent = 0
    for doc in _mixed_cases(400, 120):
        diagram = parse_document(doc)
        graph = _graph(doc)
        observed = set(diagram.observed)
        listed, total, capped = ident.implications(diagram)
        assert not capped and total == len(listed)
        for statement in listed:
            assert nx.is_d_separator(graph, {statement["x"]}, {statement["y"]}, set(statement["given"])), statement
            assert set(statement["given"]) <= observed
        separable = set()
        for u, v in itertools.combinations(sorted(observed), 2):
            if any(nx.is_d_separator(graph, {u}, {v}, w) for w in _subsets(observed - {u, v})):
                separable.add((u, v))
        assert {(s["x"], s["y"]) for s in listed} == separable, doc
        with_latent += bool(set(diagram.latent)) and bool(separable)
    assert with_latent >= 20
