"""The diagram's implications as one test (Fisher's C, Shipley 2000) and as repairs.

References: Fisher's C = −2 Σ ln pᵢ against χ² with 2k degrees of freedom (Shipley 2000,
Structural Equation Modeling 7(2)) held to scipy's ``combine_pvalues`` and ``chi2``; the
single-arrow repairs held to networkx's d-separation on every candidate arrow. Power and
false alarms from simulated truths (tests/validation_truths.py)."""

from __future__ import annotations

import itertools
import random

import networkx as nx
import numpy as np
import pytest
from scipy import stats

from app.estimation import validation
from app.estimation.implications import adjust_p_values, fisher_z_test
from app.estimation.implications import test_implications as run_implication_tests
from app.graph.dag import Dag
from app.graph.identification import Question, answer_question
from app.graph.implications import implied_independencies
from app.graph.repairs import arrows_linking, arrows_splitting_sets

from tests.helpers.graph_cases import random_dag
from tests.helpers.validation_truths import SEEDS, SHARED_RIGHT, SHARED_WRONG, diagram, false_alarm_band, shared_frame

IDENTITY = {v: v for v in "abnty"}


@pytest.mark.parametrize("p_values", [[0.5], [0.01, 0.2, 0.9], [0.04, 0.04, 0.04, 0.04], [1e-12, 0.7]])
def test_fisher_c_matches_scipy(p_values):
    ours = validation.fisher_c(p_values)
    statistic, p = stats.combine_pvalues(p_values, method="fisher")
    assert ours["statistic"] == pytest.approx(statistic, rel=1e-12)
    assert ours["df"] == 2 * len(p_values)
    assert ours["p_value"] == pytest.approx(p, rel=1e-9)
    assert ours["p_value"] == pytest.approx(stats.chi2.sf(-2 * np.sum(np.log(p_values)), 2 * len(p_values)))


def _items(arrows, frame, *, direct=True):
    """The two implication items for one diagram and frame. With ``direct``, the partial
    correlation tests are run straight on the arrays (the same ``fisher_z_test`` and Holm
    step the table path uses, without its per-column type checks, so 200 seeds stay fast)."""
    dg = diagram(arrows)
    dag = Dag.from_diagram(dg)
    listed, total = implied_independencies(dag, dg.observed, 1000)
    if not direct:
        checks = run_implication_tests(frame, IDENTITY, listed, total=total)
    else:
        tests = []
        for imp in listed:
            given = frame[imp["given"]].to_numpy() if imp["given"] else np.empty((len(frame), 0))
            out = fisher_z_test(frame[imp["x"]].to_numpy(), frame[imp["y"]].to_numpy(), given)
            tests.append({**imp, **out})
        for t, p in zip(tests, adjust_p_values([t["p_value"] for t in tests], "holm")):
            t["p_adjusted"], t["verdict"] = p, "fails" if p < 0.05 else "holds"
        failing = sum(t["verdict"] == "fails" for t in tests)
        checks = {"tested": len(tests), "listed": len(listed), "total": total, "tests": tests,
                  "summary": f"{failing} of {len(tests)} tested implications fail"}
    return {i["check"]: i for i in validation.implication_items(checks, 0.05, dag)}


def test_direct_and_table_paths_agree():
    frame = shared_frame(9)
    for arrows in (SHARED_RIGHT, SHARED_WRONG):
        a, b = _items(arrows, frame), _items(arrows, frame, direct=False)
        for check in a:
            assert a[check]["status"] == b[check]["status"]
            assert a[check]["p_value"] == pytest.approx(b[check]["p_value"], rel=1e-9)


def test_wrong_diagram_fails_the_implications_alone_and_together():
    """Simulated truth: a and b each cause t, y and n. The diagram that draws b as a cause of n
    only claims b independent of t and y; over 200 seeds at n = 2,000 both implication checks
    must contradict it with power at least 0.8."""
    runs = [_items(SHARED_WRONG, shared_frame(seed)) for seed in range(SEEDS)]
    for check in ("implications-each", "implications-together"):
        assert np.mean([r[check]["status"] == "contradicted" for r in runs]) >= 0.8, check


def test_right_diagram_false_alarms_stay_near_five_percent():
    """Same simulated truth with the right diagram: false alarms of Fisher's C over 200 seeds
    within the 99 % binomial band for a 5 % test (the tests of the basis set are independent
    under the right diagram, Shipley 2000)."""
    low, high = false_alarm_band()
    alarms = [_items(SHARED_RIGHT, shared_frame(500 + seed))["implications-together"]["status"] == "contradicted"
              for seed in range(SEEDS)]
    assert low <= sum(alarms) <= high


def test_contradicted_implication_lists_the_arrows_that_remove_it():
    item = _items(SHARED_WRONG, shared_frame(2))["implications-each"]
    assert item["status"] == "contradicted"
    arrows = {(r["from"], r["to"]) for r in item["repairs"]}
    assert ("b", "t") in arrows and ("b", "y") in arrows  # the two arrows the diagram left out
    assert all(r["kind"] == "add" and len(r["evidence"]) <= validation.EVIDENCE_LIMIT for r in item["repairs"])


def test_no_implication_is_not_run_with_reason():
    items = validation.implication_items({"tested": 0, "listed": 0, "total": 0, "tests": [], "summary": ""})
    assert [i["status"] for i in items] == ["not run", "not run"]
    assert "implies no independence" in items[0]["why"]


# -- the repairs against networkx ---------------------------------------------------

def _nx_linking(g: nx.DiGraph, x, y, given):
    found = []
    for u, v in itertools.permutations(g.nodes, 2):
        if g.has_edge(u, v) or nx.has_path(g, v, u):
            continue
        h = g.copy()
        h.add_edge(u, v)
        if not nx.is_d_separator(h, {x}, {y}, set(given)):
            found.append((u, v))
    return sorted(found)


@pytest.mark.parametrize("seed", range(12))
def test_arrows_linking_matches_networkx_on_random_diagrams(seed):
    names, arrows, _ = random_dag(random.Random(seed), 8, 0.3)
    dag = Dag(names, arrows)
    g = nx.DiGraph()
    g.add_nodes_from(names)
    g.add_edges_from(arrows)
    listed, _ = implied_independencies(dag, frozenset(names), 50)
    assert listed
    for imp in listed[:6]:
        assert arrows_linking(dag, imp["x"], imp["y"], imp["given"]) == _nx_linking(g, imp["x"], imp["y"], imp["given"])


def test_arrows_splitting_sets_names_the_missing_arrow():
    """Two routes around the treatment: with d -> t missing, {a} and {a, b} both look valid;
    adding d -> t leaves only {a, b} valid."""
    dg = diagram(["a->t", "a->y", "b->d", "b->y", "t->y"])
    found = arrows_splitting_sets(dg, ["a", "b"], ["a"])
    assert {"arrow": ["d", "t"], "change": "added", "still_valid": "first"}.items() <= next(
        e for e in found if e["arrow"] == ["d", "t"]).items()
    q = Question.of(dg)
    assert answer_question(q)["minimal_adjustment_sets"] == [["a"]]


def test_continuous_likelihood_ratio_matches_statsmodels():
    """The linear-regression LR statistic n log(RSS_small / RSS_big) is statsmodels' compare_lr_test."""
    import statsmodels.api as sm

    from app.estimation.implications import likelihood_ratio_test

    frame = shared_frame(4, n=800)
    given = frame[["a"]].to_numpy()
    small = sm.OLS(frame["y"], sm.add_constant(given)).fit()
    big = sm.OLS(frame["y"], sm.add_constant(np.column_stack([given, frame[["b", "n"]].to_numpy()]))).fit()
    statistic, p, df = big.compare_lr_test(small)
    ours = likelihood_ratio_test(frame["y"].to_numpy(), "continuous", frame[["b", "n"]].to_numpy(), given)
    assert ours["statistic"] == pytest.approx(statistic, rel=1e-9)
    assert ours["p_value"] == pytest.approx(p, rel=1e-6) and ours["df"] == df == 2
