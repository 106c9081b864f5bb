"""Control outcomes and control exposures the diagram supplies (Lipsitch, Tchetgen
Tchetgen & Cohen 2010): which variables qualify, and that their "effects" expose a
wrong diagram. Power and false alarms from simulated truths (tests/validation_truths.py)."""

from __future__ import annotations

import networkx as nx
import numpy as np
import pytest

from app.estimation import validation
from app.graph.controls import control_exposures, control_outcomes
from app.graph.dag import Dag

from tests.helpers.validation_truths import SEEDS, SHARED_RIGHT, SHARED_WRONG, diagram, false_alarm_band, shared_frame

IDENTITY = {v: v for v in "abnty"}


def _dag(arrows):
    return Dag.from_diagram(diagram(arrows))


def test_controls_follow_d_separation_in_networkx():
    """Each control outcome is a non-descendant of t that the set separates from t, and each
    control exposure a non-descendant of y separated from y given t and the set (networkx)."""
    for arrows, zs in ((SHARED_RIGHT, {"a", "b"}), (SHARED_WRONG, {"a"})):
        g = nx.DiGraph([a.split("->") for a in arrows])
        measured = set(g)
        outcomes = control_outcomes(_dag(arrows), "t", "y", zs, measured)
        exposures = control_exposures(_dag(arrows), "t", "y", zs, measured)
        for v in measured - zs - {"t", "y"}:
            is_outcome = v not in nx.descendants(g, "t") and nx.is_d_separator(g, {"t"}, {v}, zs)
            is_exposure = v not in nx.descendants(g, "y") and nx.is_d_separator(g, {v}, {"y"}, zs | {"t"})
            assert (v in outcomes) == is_outcome and (v in exposures) == is_exposure, (arrows, v)
    assert control_outcomes(_dag(SHARED_WRONG), "t", "y", {"a"}, set("abnty")) == ["n", "b"]


def _check(kind, arrows, zs, frame):
    finder = control_outcomes if kind == "outcome" else control_exposures
    candidates = finder(_dag(arrows), "t", "y", zs, sorted(IDENTITY))
    return validation.controls_check(kind, frame, IDENTITY, treatment="t", outcome="y", adjustment_set=sorted(zs),
                                     candidates=candidates, method="regression")


@pytest.mark.parametrize("kind", ["outcome", "exposure"])
def test_wrong_diagram_is_contradicted_by_its_controls(kind):
    """Simulated truth: a and b each cause t, y and n. The diagram that draws b as a cause of n
    only uses {a} and offers b and n as controls; over 200 seeds at n = 2,000 the power to
    contradict it must be at least 0.8."""
    alarms = [_check(kind, SHARED_WRONG, {"a"}, shared_frame(seed))["status"] == "contradicted"
              for seed in range(SEEDS)]
    assert np.mean(alarms) >= 0.8


@pytest.mark.parametrize("kind", ["outcome", "exposure"])
def test_right_diagram_false_alarms_stay_near_five_percent(kind):
    """Same simulated truth, the right diagram (set {a, b}, control n): false alarms over 200
    seeds within the 99 % binomial band for a 5 % test."""
    low, high = false_alarm_band()
    alarms = [_check(kind, SHARED_RIGHT, {"a", "b"}, shared_frame(1000 + seed))["status"] == "contradicted"
              for seed in range(SEEDS)]
    assert low <= sum(alarms) <= high


def test_contradicted_control_names_the_back_door_path_and_proposes_arrows():
    dg = diagram(SHARED_WRONG)
    explain = validation._link_explainer(dg, "t", "y", ["a"], "outcome")
    frame = shared_frame(3)
    result = validation.controls_check("outcome", frame, IDENTITY, treatment="t", outcome="y", adjustment_set=["a"],
                                       candidates=["n", "b"], method="regression", explain=explain)
    assert result["status"] == "contradicted"
    b = next(c for c in result["controls"] if c["variable"] == "b")
    assert b["explained_by"][0]["arrow"] == ["b", "t"]  # the arrow the diagram left out, between the two
    n = next(c for c in result["controls"] if c["variable"] == "n")
    assert {("b", "t"), ("n", "t"), ("t", "n")} <= {tuple(e["arrow"]) for e in n["explained_by"]}
    assert any((r["kind"], r["from"], r["to"]) == ("add", "b", "t") for r in result["repairs"])
    assert all(len(r["evidence"]) <= validation.EVIDENCE_LIMIT for r in result["repairs"])


# -- what cannot run says why -----------------------------------------------------------

def test_no_control_in_the_diagram_is_not_run_with_reason():
    frame = shared_frame(0)[["a", "t", "y"]]
    result = validation.controls_check("outcome", frame, IDENTITY, treatment="t", outcome="y", adjustment_set=["a"],
                                       candidates=[], method="regression")
    assert result["status"] == "not run"
    assert "supplies no measured variable" in result["why"]


def test_control_without_variation_is_not_run_with_reason():
    frame = shared_frame(0)
    frame["n"] = 4.0
    result = validation.controls_check("outcome", frame, IDENTITY, treatment="t", outcome="y", adjustment_set=["a", "b"],
                                       candidates=["n"], method="regression")
    assert result["status"] == "not run"
    assert "single value" in result["why"] and result["controls"][0]["status"] == "not run"


def test_a_constant_control_does_not_hide_the_others():
    frame = shared_frame(0)
    frame["n"] = 4.0
    result = validation.controls_check("outcome", frame, IDENTITY, treatment="t", outcome="y", adjustment_set=["a"],
                                       candidates=["n", "b"], method="regression")
    by = {c["variable"]: c for c in result["controls"]}
    assert by["n"]["status"] == "not run" and by["b"]["status"] == "contradicted"
    assert result["status"] == "contradicted"
