"""Every valid adjustment set gives the same answer: the paired comparison of sets.

References: the paired-bootstrap differences are held to direct statsmodels
OLS fits on the same resampled rows; Holm (1979) to statsmodels'
``multipletests``. Power and false alarms come from simulated truths
(tests/validation_truths.py).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from scipy import stats
from statsmodels.stats.multitest import multipletests

from app.estimation import validation
from app.estimation.design import build_design
from app.graph.identification import Question, answer_question

from tests.helpers.validation_truths import (DETOUR_RIGHT, DETOUR_WRONG, SEEDS, detour_frame, diagram,
                                false_alarm_band)

IDENTITY = {v: v for v in "abdty"}


def _sets(arrows):
    found = answer_question(Question.of(diagram(arrows)))
    in_use = found["optimal_adjustment_set"]
    return [in_use] + [s for s in found["minimal_adjustment_sets"] if s != in_use]


def _agreement(frame, sets, **kw):
    return validation.set_agreement(frame, IDENTITY, treatment="t", outcome="y", sets=sets,
                                    method="regression", **kw)


def test_sets_come_from_the_engine():
    """The right diagram offers {a, b} (in use) and {a, d}; the wrong one {a, b} and {a}."""
    assert _sets(DETOUR_RIGHT) == [["a", "b"], ["a", "d"]]
    assert _sets(DETOUR_WRONG) == [["a", "b"], ["a"]]


def test_paired_differences_match_direct_statsmodels_fits():
    """Each resample's coefficients equal statsmodels OLS on the rows repeated by their Poisson
    counts, and the difference's standard error and p-value follow from those fits."""
    frame = detour_frame(3, n=3000)
    sets = [["a", "b"], ["a"], ["a", "d"]]
    designs = [build_design(frame, IDENTITY, treatment="t", outcome="y", adjust=s) for s in sets]
    full, draws = validation._regression_draws(designs, 40, seed=11, tick=lambda _: None)
    direct = np.empty((40, 3))
    counts = validation.poisson_counts(len(frame), 40, 11)
    for b in range(40):
        rows = np.repeat(np.arange(len(frame)), counts[b])
        for s, cols in enumerate(sets):
            x = sm.add_constant(frame[["t", *cols]].to_numpy()[rows])
            direct[b, s] = sm.OLS(frame["y"].to_numpy()[rows], x).fit().params[1]
    for s, cols in enumerate(sets):
        whole = sm.OLS(frame["y"], sm.add_constant(frame[["t", *cols]])).fit().params["t"]
        assert full[s] == pytest.approx(whole, rel=1e-9)
    assert draws == pytest.approx(direct, rel=1e-8)
    rows = validation.paired_differences(full, draws)
    for row in rows:
        s = row["index"]
        se = np.std(direct[:, s] - direct[:, 0], ddof=1)
        z = (full[s] - full[0]) / se
        assert row["difference_se"] == pytest.approx(se, rel=1e-6)
        assert row["p_value"] == pytest.approx(2 * stats.norm.sf(abs(z)), rel=1e-6)
    holm = multipletests([r["p_value"] for r in rows], method="holm")[1]
    assert [r["p_adjusted"] for r in rows] == pytest.approx(list(holm))


def _alarms(arrows, seeds=SEEDS):
    sets = _sets(arrows)
    out = []
    for seed in range(seeds):
        result = _agreement(detour_frame(seed), sets, resamples=100, seed=seed)
        assert result["status"] in ("holds", "contradicted")
        out.append(result["status"] == "contradicted")
    return out


def test_wrong_diagram_without_d_to_t_is_contradicted():
    """Simulated truth (a → t, a → y, b → d → t, b → y, t → y): the diagram that leaves out
    d → t calls {a} valid; {a} and the set in use {a, b} differ. Power at n = 2,000 over 200
    seeds (100 paired resamples each) must be at least 0.8."""
    alarms = _alarms(DETOUR_WRONG)
    assert np.mean(alarms) >= 0.8


def test_right_diagram_false_alarms_stay_near_five_percent():
    """Same simulated truth, the right diagram: {a, b} against {a, d}. Over 200 seeds the false
    alarms must lie in the 99 % binomial band for a 5 % test."""
    low, high = false_alarm_band()
    assert low <= sum(_alarms(DETOUR_RIGHT)) <= high


def test_disagreement_names_sets_variables_and_arrows():
    frame = detour_frame(1)
    dg = diagram(DETOUR_WRONG)
    from app.graph.repairs import arrows_splitting_sets

    result = _agreement(frame, _sets(DETOUR_WRONG), explain=lambda a, b: arrows_splitting_sets(dg, a, b))
    assert result["status"] == "contradicted"
    d = result["disagreements"][0]
    assert d["sets"] == [["a", "b"], ["a"]] and d["only_in_use"] == ["b"] and d["only_other"] == []
    arrows = [tuple(e["arrow"]) for e in d["explained_by"]]
    assert ("d", "t") in arrows  # the arrow the diagram left out
    assert all(e["still_valid"] == "first" for e in d["explained_by"] if tuple(e["arrow"]) == ("d", "t"))
    assert "{a}" in result["why"] and "d → t" in result["why"]


# -- what cannot run says why -----------------------------------------------------

def test_one_valid_set_is_not_run_with_reason():
    result = _agreement(detour_frame(0), [["a", "b"]])
    assert result["status"] == "not run" and "only one adjustment set" in result["why"]


def test_sets_beyond_the_cap_are_listed_as_not_run():
    result = _agreement(detour_frame(0), [["a", "b"], ["a", "d"], ["a", "b", "d"]], cap=2)
    skipped = [s for s in result["sets"] if s["status"] == "not run"]
    assert skipped == [{"set": ["a", "b", "d"], "status": "not run", "why": "beyond the cap of 2 sets compared"}]
    assert result["status"] in ("holds", "contradicted")


def test_singular_design_in_one_set_is_not_run_and_others_compared():
    frame = detour_frame(0)
    frame["e"] = 2 * frame["a"] - frame["b"]  # exactly collinear with a and b
    mapping = {**IDENTITY, "e": "e"}
    result = validation.set_agreement(frame, mapping, treatment="t", outcome="y",
                                      sets=[["a", "b"], ["a", "b", "e"], ["a", "d"]], method="regression")
    by = {tuple(s["set"]): s for s in result["sets"]}
    assert by[("a", "b", "e")]["status"] == "not run"
    assert "collinear" in by[("a", "b", "e")]["why"]
    assert by[("a", "d")]["status"] in ("agrees", "differs")


def test_singular_set_in_use_stops_the_check_with_reason():
    frame = detour_frame(0)
    frame["e"] = frame["a"].copy()
    mapping = {**IDENTITY, "e": "e"}
    result = validation.set_agreement(frame, mapping, treatment="t", outcome="y",
                                      sets=[["a", "e"], ["a", "d"]], method="regression")
    assert result["status"] == "not run" and "set in use could not be estimated" in result["why"]


def test_other_methods_use_the_same_resamples():
    """Weighting (binary treatment) goes through the general path and still compares."""
    rng = np.random.default_rng(5)
    n = 1500
    a, b = rng.standard_normal(n), rng.standard_normal(n)
    d = b + rng.standard_normal(n)
    t = (rng.random(n) < 1 / (1 + np.exp(-(0.5 * a + 0.5 * d)))).astype(float)
    y = t + a + 0.8 * b + rng.standard_normal(n)
    frame = pd.DataFrame({"a": a, "b": b, "d": d, "t": t, "y": y})
    result = validation.set_agreement(frame, IDENTITY, treatment="t", outcome="y",
                                      sets=[["a", "b"], ["a", "d"]], method="weighting", resamples=60)
    assert result["status"] in ("holds", "contradicted")
    assert result["sets"][1]["resamples_used"] == 60
