"""Sensitivity formulas against their papers' published worked values."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import optimize, stats

from app.estimation import sensitivity as S

# Cinelli & Hazlett (2020), Darfur example, Table 1 (the minimal sensitivity
# report): effect of being directly harmed on attitudes toward peace; estimate
# 0.0973, se 0.0233, df 783, partial R2 of the treatment 2.2%, RV = 13.9%,
# RV(alpha = 0.05) = 7.6%. Values and table number from memory.
DARFUR = {"estimate": 0.09731, "se": 0.02326, "df": 783}


def test_darfur_partial_r2_and_robustness_values():
    t = DARFUR["estimate"] / DARFUR["se"]
    assert S.partial_r2(t, DARFUR["df"]) == pytest.approx(0.022, abs=5e-4)
    assert S.robustness_value(t, DARFUR["df"]) == pytest.approx(0.139, abs=5e-4)
    assert S.robustness_value(t, DARFUR["df"], alpha=0.05) == pytest.approx(0.076, abs=5e-4)


# Cinelli & Hazlett (2020), Darfur example, the bounds table (Table 2 as we recall
# it): a hidden cause 1, 2, 3 times as strong as "female": its share of the
# treatment, of the outcome, the estimate and standard error had it been adjusted
# for. Values and table number from memory.
DARFUR_BOUNDS = [
    (1, 0.0092, 0.1246, 0.0752, 0.0219),
    (2, 0.0183, 0.2493, 0.0529, 0.0204),
    (3, 0.0275, 0.3741, 0.0304, 0.0187),
]


@pytest.mark.parametrize("k, with_t, with_y, adj_est, adj_se", DARFUR_BOUNDS)
def test_darfur_estimates_if_present_for_causes_like_female(k, with_t, with_y, adj_est, adj_se):
    est, se, df = DARFUR["estimate"], DARFUR["se"], DARFUR["df"]
    assert float(S.estimate_if_present(est, se, df, with_t, with_y)) == pytest.approx(adj_est, abs=2e-4)
    assert float(S.std_error_if_present(se, df, with_t, with_y)) == pytest.approx(adj_se, abs=2e-4)


def test_benchmark_bounds_scale_like_the_published_table():
    """Recover female's partial R2 values from the 1x row, then the 2x and 3x rows must follow."""
    cov_r2_t = 0.0092 / (1 + 0.0092)  # inverts with_t = cov_r2_t / (1 - cov_r2_t)
    cov_r2_y = optimize.brentq(lambda v: S.as_strong_as(cov_r2_t, v, times=1)[1] - 0.1246, 1e-6, 0.3)
    for k, with_t, with_y, *_ in DARFUR_BOUNDS[1:]:
        got = S.as_strong_as(cov_r2_t, cov_r2_y, times=k)
        assert got[0] == pytest.approx(with_t, abs=1.5e-4)
        assert got[1] == pytest.approx(with_y, abs=2e-4)


@pytest.mark.parametrize("t_value, df", [(4.18, 783), (2.5, 100), (40.0, 500), (10.0, 10)])
def test_robustness_value_alpha_is_the_smallest_strength_that_loses_significance(t_value, df):
    """Brute-force check of RV(q=1, alpha) against its definition: the least max(with_t, with_y)
    such that the 95% interval of the estimate if present reaches zero (covers the case f_q > 1/f*)."""
    se = 1.0
    est = t_value * se
    tcrit = stats.t.ppf(0.975, df - 1)

    def reaches_zero(with_t, with_y):
        return (S.estimate_if_present(est, se, df, with_t, with_y)
                - tcrit * S.std_error_if_present(se, df, with_t, with_y) <= 0)

    grid = np.linspace(0, 0.999, 1200)
    best = 1.0
    for with_t in grid:
        ok = grid[reaches_zero(with_t, grid)]
        if ok.size:
            best = min(best, max(with_t, ok.min()))
    assert S.robustness_value(t_value, df, alpha=0.05) == pytest.approx(best, abs=2e-3)


def test_estimate_if_present_vanishes_at_the_robustness_value():
    est, se, df = DARFUR["estimate"], DARFUR["se"], DARFUR["df"]
    rv = S.robustness_value(est / se, df)
    assert float(S.estimate_if_present(est, se, df, rv, rv)) == pytest.approx(0.0, abs=1e-9)


def test_interval_path_reaches_zero_at_the_two_robustness_values():
    """Along the path of equally strong causes, the estimate reaches zero at RV and the
    lower interval limit at RV(alpha) (both from Cinelli & Hazlett's closed forms)."""
    est, se, df = DARFUR["estimate"], DARFUR["se"], DARFUR["df"]
    path = S.interval_path(est, se, df, top=0.3, points=3001)
    xs = np.array([p["strength"] for p in path])
    rv, rv_alpha = S.robustness_value(est / se, df), S.robustness_value(est / se, df, alpha=0.05)
    assert np.interp(0.0, -np.array([p["estimate"] for p in path]), xs) == pytest.approx(rv, abs=2e-4)
    assert np.interp(0.0, -np.array([p["low"] for p in path]), xs) == pytest.approx(rv_alpha, abs=2e-4)
    assert path[0]["estimate"] == pytest.approx(est) and path[0]["strength"] == 0


def test_equal_strength_moves_the_estimate_as_far():
    for with_t, with_y in [(0.0092, 0.1246), (0.2, 0.01), (0.05, 0.05)]:
        s = S.equal_strength(with_t, with_y)
        assert float(S.shift(1.0, 100, s, s)) == pytest.approx(float(S.shift(1.0, 100, with_t, with_y)), rel=1e-9)


# VanderWeele & Ding (2017), worked example: observed risk ratio 3.9 with lower
# confidence limit 1.8 gives E-values 7.26 and 3.00. Values from memory.
def test_e_value_reproduces_vanderweele_ding_example():
    out = S.e_value(3.9, 1.8, 8.7)
    assert out["e_value"] == pytest.approx(7.26, abs=0.01)
    assert out["e_value_ci"] == pytest.approx(3.0, abs=0.01)


def test_e_value_protective_and_null_interval():
    out = S.e_value(0.8, 0.6, 1.1)
    assert out["e_value"] == pytest.approx(1 / 0.8 + math.sqrt(1 / 0.8 * (1 / 0.8 - 1)))
    assert out["e_value_ci"] == 1.0


def test_benchmark_partial_r2_match_statsmodels_t_statistics():
    """For a one-column covariate, partial R2 = t^2 / (t^2 + df) of its coefficient
    (Cinelli & Hazlett 2020, eq. for partial R2 from t-values), with the t-values
    from statsmodels OLS of the treatment and of the outcome."""
    import json
    from pathlib import Path

    import pandas as pd
    import statsmodels.api as sm

    from app.estimation import service
    from app.graph.document import parse_document

    sample = Path(__file__).resolve().parents[1] / "sample_data"
    diagram = parse_document(json.loads((sample / "cycle_to_work.json").read_text()))
    frame = pd.read_csv(sample / "cycle_to_work.csv")
    reg = service.sensitivity(diagram, frame)["regression"]
    age = next(b for b in reg["benchmarks"] if b["variable"] == "age" and b["k"] == 1)
    assert (age["r2_with_treatment"], age["r2_with_outcome"]) == pytest.approx(
        S.as_strong_as(age["covariate_r2_treatment"], age["covariate_r2_outcome"]))
    covs = pd.get_dummies(frame[["age", "commute_km", "department", "fitness"]], drop_first=True, dtype=float)
    d_fit = sm.OLS(frame.bike_lease, sm.add_constant(covs)).fit()
    y_fit = sm.OLS(frame.sick_days, sm.add_constant(pd.concat([frame.bike_lease, covs], axis=1))).fit()
    assert age["covariate_r2_treatment"] == pytest.approx(S.partial_r2(d_fit.tvalues["age"], d_fit.df_resid), rel=1e-8)
    assert age["covariate_r2_outcome"] == pytest.approx(S.partial_r2(y_fit.tvalues["age"], y_fit.df_resid), rel=1e-8)


# -- the formulas are identities of the classical least-squares fit ----------------

def _confounded_by_z(n=1500, seed=3):
    """Simulated: a confounder z of d and y, and errors whose spread grows with x1
    (so robust and classical standard errors differ clearly)."""
    import pandas as pd

    rng = np.random.default_rng(seed)
    x1, x2, z = rng.normal(size=n), rng.normal(size=n), rng.normal(size=n)
    d = 0.6 * x1 - 0.4 * x2 + 0.5 * z + rng.normal(size=n)
    y = 1.0 * d + 0.8 * x1 + 0.3 * x2 + 0.7 * z + rng.normal(size=n) * (0.5 + np.abs(x1))
    return pd.DataFrame({"x1": x1, "x2": x2, "z": z, "d": d, "y": y})


def test_bias_and_standard_error_formulas_reproduce_the_longer_regression():
    """Cinelli & Hazlett (2020), section 4: with with_t, with_y the partial R2 of the omitted
    z with treatment and outcome, the short regression's estimate moved by the shift is
    the long regression's estimate and the adjusted se its classical se, exactly. The short-regression figures are
    taken from our sensitivity result; the long regression and the partial R2 of z from
    statsmodels OLS."""
    import statsmodels.api as sm

    from app.estimation.design import build_design

    frame = _confounded_by_z()
    design = build_design(frame, {c: c for c in frame}, treatment="d", outcome="y", adjust=["x1", "x2"])
    reg = S.regression_sensitivity(design)
    long = sm.OLS(frame.y, sm.add_constant(frame[["d", "x1", "x2", "z"]])).fit()
    treat = sm.OLS(frame.d, sm.add_constant(frame[["x1", "x2", "z"]])).fit()
    with_y = S.partial_r2(long.tvalues["z"], long.df_resid)
    with_t = S.partial_r2(treat.tvalues["z"], treat.df_resid)
    est, se, df = reg["estimate"], reg["classical_std_error"], reg["df"]
    assert float(S.estimate_if_present(est, se, df, with_t, with_y)) == pytest.approx(long.params["d"], rel=1e-9)
    assert float(S.std_error_if_present(se, df, with_t, with_y)) == pytest.approx(long.bse["d"], rel=1e-9)
    short = sm.OLS(frame.y, sm.add_constant(frame[["d", "x1", "x2"]])).fit()
    assert se == pytest.approx(short.bse["d"], rel=1e-10)
    robust = short.get_robustcov_results("HC1").bse[1]
    assert abs(float(S.std_error_if_present(robust, df, with_t, with_y)) - long.bse["d"]) > 0.05 * long.bse["d"]


def test_robustness_value_uses_the_classical_t_on_mroz_wage_regression():
    """Mroz (1987) data shipped by linearmodels, the 428 women with a wage: log wage on
    education, experience and its square (a textbook wage equation). RV and the
    treatment's partial R2 from the classical OLS t of statsmodels; the HC1 t would give
    an RV about 0.02 higher."""
    import statsmodels.api as sm
    from linearmodels.datasets import mroz

    from app.estimation.design import build_design

    frame = mroz.load().dropna(subset=["lwage"])
    design = build_design(frame, {c: c for c in frame}, treatment="educ", outcome="lwage",
                          adjust=["exper", "expersq"])
    reg = S.regression_sensitivity(design)
    fit = sm.OLS.from_formula("lwage ~ educ + exper + expersq", frame).fit()
    t, df = fit.tvalues["educ"], fit.df_resid
    assert reg["robustness_value"] == pytest.approx(S.robustness_value(t, df), rel=1e-9)
    assert reg["robustness_value_alpha"] == pytest.approx(S.robustness_value(t, df, alpha=0.05), rel=1e-9)
    assert reg["partial_r2_treatment"] == pytest.approx(S.partial_r2(t, df), rel=1e-9)
    robust_t = fit.get_robustcov_results("HC1").tvalues[1]
    assert abs(reg["robustness_value"] - S.robustness_value(robust_t, df)) > 0.01


# -- the room's stated hidden causes ------------------------------------------------

def _hidden_u(n=2000, seed=5):
    """Simulated truth: the effect of d on y is -0.1, but an unmeasured u drives both
    (about 1.4 times as strongly as x1 does), so adjusting for x1 and x2 alone gives a
    clearly positive estimate."""
    import pandas as pd

    rng = np.random.default_rng(seed)
    x1, x2, u = rng.normal(size=(3, n))
    d = 0.5 * x1 + 0.3 * x2 + 0.6 * u + rng.normal(size=n)
    y = -0.1 * d + 0.5 * x1 + 0.3 * x2 + 0.6 * u + rng.normal(size=n)
    return pd.DataFrame({"x1": x1, "x2": x2, "u": u, "d": d, "y": y})


def test_room_reading_says_the_sign_changes_under_the_rooms_median_cause():
    import statsmodels.api as sm

    from app.estimation.design import build_design

    frame = _hidden_u()
    design = build_design(frame, {c: c for c in frame}, treatment="d", outcome="y", adjust=["x1", "x2"])
    statements = [{"by": "Ana", "variable": "x1", "times": 0.5, "words": "half as strong as x1"},
                  {"by": "Ben", "variable": "x1", "times": 2.0, "words": "twice as strong as x1"},
                  {"by": "Cy", "variable": "x1", "times": 3.0, "words": "three times as strong as x1"},
                  {"by": "Di", "variable": "u", "times": 1.0}]
    reg = S.regression_sensitivity(design, statements=statements)
    room = reg["room"]
    assert reg["estimate"] > 0.1
    assert room["counted"] == 3
    assert room["median"]["by"] == "Ben" and room["strongest"]["by"] == "Cy"
    assert room["median"]["standing"] == "sign changes" and room["median"]["estimate_if_present"] < 0
    by = {r["by"]: r for r in room["statements"]}
    assert by["Ana"]["standing"] == "holds"
    assert not by["Di"]["usable"] and "not among the adjustment columns" in by["Di"]["why"]
    assert ("median statement (twice as strong as x1, stated by Ben) and under its strongest "
            "(three times as strong as x1, stated by Cy) the estimate changes sign") in room["reading"]
    mixed = S.regression_sensitivity(design, statements=[statements[0], dict(statements[1], times=1.0,
                                                                             words="about as strong as x1"),
                                                         statements[2]])["room"]
    assert ("median statement (about as strong as x1, stated by Ben) the estimate stays positive and its "
            "interval stays away from zero; under its strongest (three times as strong as x1, stated by Cy) "
            "it changes sign") in mixed["reading"]
    # and the simulated truth agrees: adjusting for u as well turns the estimate negative
    full = sm.OLS(frame.y, sm.add_constant(frame[["d", "x1", "x2", "u"]])).fit()
    assert full.params["d"] < 0


def test_room_reading_holds_under_weak_statements_and_says_when_nobody_spoke():
    from app.estimation.design import build_design

    frame = _hidden_u()
    design = build_design(frame, {c: c for c in frame}, treatment="d", outcome="y", adjust=["x1", "x2"])
    reg = S.regression_sensitivity(design, statements=[{"by": "Ana", "variable": "x2", "times": 0.5}])
    assert reg["room"]["median"] is reg["room"]["strongest"]
    assert reg["room"]["strongest"]["standing"] == "holds"
    assert "stays positive and its interval stays away from zero" in reg["room"]["reading"]
    silent = S.regression_sensitivity(design)["room"]
    assert silent["median"] is None and "Nobody in the room" in silent["reading"]


def test_a_cause_stronger_than_the_data_allow_is_set_aside_with_a_reason():
    assert S.as_strong_as(0.4, 0.1, times=3) is None  # 3 x 0.4 / 0.6 >= 1
    reading = S.room_reading([{"by": "A", "variable": "x", "times": 3}], {"x": (0.4, 0.1)},
                             estimate=1.0, se=0.1, df=500)
    assert reading["counted"] == 0 and "rule it out" in reading["statements"][0]["why"]
