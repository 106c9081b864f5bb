"""Estimators and tests checked against outside references: published
certified values, textbook examples on datasets that PyPI packages ship, and
direct calls of statsmodels / linearmodels / scipy on the same data."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from linearmodels.datasets import mroz
from linearmodels.iv import IV2SLS
from scipy import stats
from statsmodels.stats.multitest import multipletests

from app.estimation import estimators
from app.estimation.design import build_design
from app.estimation.implications import adjust_p_values, fisher_z_test, likelihood_ratio_test


SAMPLE = Path(__file__).resolve().parents[1] / "sample_data"


@pytest.fixture(name="demo_frame", scope="module")
def fixture_demo_frame():
    return pd.read_csv(SAMPLE / "cycle_to_work.csv")


def _identity(frame):
    return {c: c for c in frame.columns}


# -- regression --------------------------------------------------------------

# NIST StRD "Longley" certified values (Longley 1967), from memory.
LONGLEY_CERTIFIED = {
    "GNPDEFL": 15.0618722713733, "GNP": -0.358191792925910e-01, "UNEMP": -2.02022980381683,
    "ARMED": -1.03322686717359, "POP": -0.511041056535807e-01, "YEAR": 1829.15146461355,
}


@pytest.mark.parametrize("treatment", ["UNEMP", "ARMED", "YEAR"])
def test_regression_matches_nist_longley_certified_coefficients(treatment):
    """NIST StRD Longley (ill-conditioned): the treatment coefficient to 7 significant digits."""
    frame = sm.datasets.longley.load_pandas().data
    others = [c for c in LONGLEY_CERTIFIED if c != treatment]
    design = build_design(frame, _identity(frame), treatment=treatment, outcome="TOTEMP", adjust=others)
    result = estimators.regression(design)
    assert result["estimate"] == pytest.approx(LONGLEY_CERTIFIED[treatment], rel=1e-7)


def test_regression_robust_se_matches_direct_statsmodels(demo_frame):
    """Same point estimate, HC1 standard error and interval as a direct statsmodels formula fit."""
    design = build_design(demo_frame, _identity(demo_frame), treatment="bike_lease", outcome="sick_days",
                          adjust=["age", "commute_km", "department", "fitness"])
    ours = estimators.regression(design)
    direct = sm.OLS.from_formula("sick_days ~ bike_lease + age + commute_km + C(department) + fitness",
                                 demo_frame).fit(cov_type="HC1")
    assert ours["estimate"] == pytest.approx(direct.params["bike_lease"], rel=1e-10)
    assert ours["std_error"] == pytest.approx(direct.bse["bike_lease"], rel=1e-10)
    assert ours["ci"] == pytest.approx(list(direct.conf_int().loc["bike_lease"]), rel=1e-10)


# -- standardization ----------------------------------------------------------

def test_standardization_matches_logit_per_arm_on_spector_data():
    """Spector & Mazzeo (1980) data shipped with statsmodels: effect of PSI teaching on GRADE,
    standardized over GPA and TUCE. Reference: per-arm statsmodels Logit averaged by hand."""
    frame = sm.datasets.spector.load_pandas().data
    design = build_design(frame, _identity(frame), treatment="PSI", outcome="GRADE", adjust=["GPA", "TUCE"])
    ours = estimators.standardization(design, resamples=50)
    x = sm.add_constant(frame[["GPA", "TUCE"]])
    risks = []
    for arm in (0, 1):
        rows = frame["PSI"] == arm
        fit = sm.Logit(frame.loc[rows, "GRADE"], x[rows]).fit(disp=0)
        risks.append(fit.predict(x).mean())
    assert ours["risk_untreated"] == pytest.approx(risks[0], rel=1e-6)
    assert ours["risk_treated"] == pytest.approx(risks[1], rel=1e-6)
    assert ours["estimate"] == pytest.approx(risks[1] - risks[0], rel=1e-6)
    assert ours["risk_ratio"] == pytest.approx(risks[1] / risks[0], rel=1e-6)
    assert ours["ci"][0] < ours["estimate"] < ours["ci"][1]


def test_standardization_without_covariates_is_difference_in_proportions():
    frame = sm.datasets.spector.load_pandas().data
    design = build_design(frame, _identity(frame), treatment="PSI", outcome="GRADE")
    ours = estimators.standardization(design, resamples=30)
    p1 = frame.loc[frame.PSI == 1, "GRADE"].mean()
    p0 = frame.loc[frame.PSI == 0, "GRADE"].mean()
    assert ours["estimate"] == pytest.approx(p1 - p0, abs=1e-6)
    assert ours["odds_ratio"] == pytest.approx((p1 / (1 - p1)) / (p0 / (1 - p0)), rel=1e-5)


# -- weighting and doubly robust ----------------------------------------------

def _confounded(n=3000, seed=6, effect=2.0):
    rng = np.random.default_rng(seed)
    c1, c2 = rng.normal(size=n), rng.normal(size=n)
    t = rng.binomial(1, 1 / (1 + np.exp(-(0.8 * c1 - 0.5 * c2))))
    y = effect * t + 1.5 * c1 + 1.0 * c2 + rng.normal(size=n)
    return pd.DataFrame({"c1": c1, "c2": c2, "t": t, "y": y})


def test_weighting_matches_hajek_formula_and_recovers_truth():
    """Normalised IPW (Lunceford & Davidian 2004, eq. for the ratio estimator) with a statsmodels Logit score."""
    frame = _confounded()
    design = build_design(frame, _identity(frame), treatment="t", outcome="y", adjust=["c1", "c2"])
    ours = estimators.weighting(design)
    x = sm.add_constant(frame[["c1", "c2"]])
    p = sm.Logit(frame.t, x).fit(disp=0).predict(x)
    t, y = frame.t.to_numpy(), frame.y.to_numpy()
    hajek = np.sum(t * y / p) / np.sum(t / p) - np.sum((1 - t) * y / (1 - p)) / np.sum((1 - t) / (1 - p))
    assert ours["estimate"] == pytest.approx(hajek, rel=1e-6)
    assert ours["ci"][0] < 2.0 < ours["ci"][1]
    naive = y[t == 1].mean() - y[t == 0].mean()
    assert not (ours["ci"][0] < naive < ours["ci"][1])
    assert all(abs(b["smd_after"]) < abs(b["smd_before"]) for b in ours["balance"])
    assert sum(ours["overlap"]["treated_counts"]) == t.sum()


def test_doubly_robust_matches_aipw_formula():
    """AIPW (Robins, Rotnitzky & Zhao 1994; Lunceford & Davidian 2004) with OLS outcome models per arm."""
    frame = _confounded(seed=9)
    design = build_design(frame, _identity(frame), treatment="t", outcome="y", adjust=["c1", "c2"])
    ours = estimators.doubly_robust(design)
    x = sm.add_constant(frame[["c1", "c2"]]).to_numpy()
    t, y = frame.t.to_numpy(), frame.y.to_numpy()
    p = sm.Logit(t, x).fit(disp=0).predict(x)
    m1 = x @ sm.OLS(y[t == 1], x[t == 1]).fit().params
    m0 = x @ sm.OLS(y[t == 0], x[t == 0]).fit().params
    aipw = np.mean(m1 - m0 + t * (y - m1) / p - (1 - t) * (y - m0) / (1 - p))
    assert ours["estimate"] == pytest.approx(aipw, rel=1e-6)
    assert ours["ci"][0] < 2.0 < ours["ci"][1]


# -- instrument ---------------------------------------------------------------

@pytest.fixture(name="mroz_frame", scope="module")
def fixture_mroz():
    return mroz.load()[["lwage", "educ", "fatheduc", "exper"]]


def test_two_stage_reproduces_wooldridge_example_15_1(mroz_frame):
    """Wooldridge, Introductory Econometrics, Example 15.1 (Mroz 1987 data, married working women):
    return to education with father's education as instrument, 0.059 (se 0.035); OLS gives 0.109.
    Values from memory; point estimates do not depend on the variance choice."""
    design = build_design(mroz_frame, _identity(mroz_frame), treatment="educ", outcome="lwage",
                          instruments=["fatheduc"])
    assert design.n == 428 and design.n_dropped == 325
    ours = estimators.two_stage(design)
    assert ours["estimate"] == pytest.approx(0.0591, abs=5e-4)
    ols = estimators.regression(design)
    assert ols["estimate"] == pytest.approx(0.109, abs=1e-3)


def test_two_stage_matches_direct_linearmodels_call(mroz_frame):
    data = mroz_frame.dropna()
    design = build_design(data, _identity(data), treatment="educ", outcome="lwage",
                          adjust=["exper"], instruments=["fatheduc"])
    ours = estimators.two_stage(design)
    direct = IV2SLS.from_formula("lwage ~ 1 + exper + [educ ~ fatheduc]", data).fit(cov_type="robust")
    assert ours["estimate"] == pytest.approx(direct.params["educ"], rel=1e-10)
    assert ours["std_error"] == pytest.approx(direct.std_errors["educ"], rel=1e-10)
    first = direct.first_stage.diagnostics.loc["educ"]
    assert ours["first_stage_f"] == pytest.approx(first["f.stat"], rel=1e-8)
    assert not ours["weak_instrument"]


def test_two_stage_warns_on_weak_instrument():
    rng = np.random.default_rng(3)
    n = 400
    z, u = rng.normal(size=n), rng.normal(size=n)
    t = 0.05 * z + u + rng.normal(size=n)
    y = t + u + rng.normal(size=n)
    frame = pd.DataFrame({"z": z, "t": t, "y": y})
    ours = estimators.two_stage(build_design(frame, _identity(frame), treatment="t", outcome="y", instruments=["z"]))
    assert ours["first_stage_f"] < 10 and ours["weak_instrument"]
    assert "Staiger & Stock" in ours["warnings"][0]


# -- front door ---------------------------------------------------------------

def test_front_door_product_matches_statsmodels_and_recovers_truth():
    """Linear front-door: T -> M -> Y with U confounding T and Y; truth 0.8 x 1.5 = 1.2."""
    rng = np.random.default_rng(21)
    n = 3000
    u = rng.normal(size=n)
    t = u + rng.normal(size=n)
    m = 0.8 * t + rng.normal(size=n)
    y = 1.5 * m + 2 * u + rng.normal(size=n)
    frame = pd.DataFrame({"t": t, "m": m, "y": y})
    design = build_design(frame, _identity(frame), treatment="t", outcome="y", mediators=["m"])
    ours = estimators.front_door(design, resamples=200)
    a = sm.OLS(m, sm.add_constant(t)).fit().params[1]
    b = sm.OLS(y, sm.add_constant(np.column_stack([m, t]))).fit().params[1]
    assert ours["estimate"] == pytest.approx(a * b, rel=1e-8)
    assert ours["ci"][0] < 1.2 < ours["ci"][1]
    naive = sm.OLS(y, sm.add_constant(t)).fit().params[1]
    assert not (ours["ci"][0] < naive < ours["ci"][1])


# -- implication tests ---------------------------------------------------------

def test_fisher_z_partial_correlation_matches_ols_t_identity(demo_frame):
    """partial r = t / sqrt(t^2 + df) for the coefficient of x in OLS(y ~ x + given) (e.g. Greene)."""
    given = demo_frame[["fitness", "bike_lease"]].to_numpy(float)
    x, y = demo_frame["age"].to_numpy(float), demo_frame["active_minutes"].to_numpy(float)
    ours = fisher_z_test(x, y, given)
    fit = sm.OLS(y, sm.add_constant(np.column_stack([x, given]))).fit()
    t = fit.tvalues[1]
    assert ours["partial_correlation"] == pytest.approx(t / np.sqrt(t ** 2 + fit.df_resid), rel=1e-9)
    n = len(x)
    z = np.arctanh(ours["partial_correlation"]) * np.sqrt(n - 2 - 3)
    assert ours["p_value"] == pytest.approx(2 * stats.norm.sf(abs(z)), rel=1e-9)


def test_fisher_z_without_conditioning_matches_scipy_pearson(demo_frame):
    x, y = demo_frame["age"].to_numpy(float), demo_frame["fitness"].to_numpy(float)
    ours = fisher_z_test(x, y, np.empty((len(x), 0)))
    assert ours["partial_correlation"] == pytest.approx(stats.pearsonr(x, y).statistic, rel=1e-9)


def test_likelihood_ratio_matches_statsmodels_logit_llr():
    """With no conditioning set, our LR statistic is statsmodels' Logit llr against the null model."""
    frame = sm.datasets.spector.load_pandas().data
    ours = likelihood_ratio_test(frame.GRADE.to_numpy(), "binary", frame[["GPA"]].to_numpy(), np.empty((32, 0)))
    fit = sm.Logit(frame.GRADE, sm.add_constant(frame[["GPA"]])).fit(disp=0)
    assert ours["statistic"] == pytest.approx(fit.llr, rel=1e-6)
    assert ours["p_value"] == pytest.approx(fit.llr_pvalue, rel=1e-5)


def test_likelihood_ratio_matches_statsmodels_compare_lr_test(demo_frame):
    given = demo_frame[["fitness"]].to_numpy(float)
    dummies = pd.get_dummies(demo_frame.department, dtype=float).to_numpy()[:, 1:]
    ours = likelihood_ratio_test(demo_frame.active_minutes.to_numpy(float), "continuous", dummies, given)
    small = sm.OLS(demo_frame.active_minutes, sm.add_constant(given)).fit()
    big = sm.OLS(demo_frame.active_minutes, sm.add_constant(np.column_stack([given, dummies]))).fit()
    stat, p, df = big.compare_lr_test(small)
    assert ours["statistic"] == pytest.approx(stat, rel=1e-8)
    assert ours["df"] == df == 2


# Benjamini & Hochberg (1995), section 4 example: 15 p-values; at 0.05 the step-up
# procedure rejects 4 and Bonferroni-type procedures reject 3. Values from memory.
BH_EXAMPLE = [0.0001, 0.0004, 0.0019, 0.0095, 0.0201, 0.0278, 0.0298, 0.0344, 0.0459,
              0.3240, 0.4262, 0.5719, 0.6528, 0.7590, 1.000]


def test_multiple_testing_reproduces_benjamini_hochberg_example():
    bh = adjust_p_values(BH_EXAMPLE, "bh")
    holm = adjust_p_values(BH_EXAMPLE, "holm")
    assert sum(p < 0.05 for p in bh) == 4
    assert sum(p < 0.05 for p in holm) == 3
    assert holm == pytest.approx(list(multipletests(BH_EXAMPLE, method="holm")[1]))
    # Holm's adjusted p-value for the smallest: 15 x 0.0001 (Holm 1979)
    assert holm[0] == pytest.approx(0.0015)


@pytest.mark.parametrize("frame_name", ["demo", "longley"])
def test_chunked_regression_path_matches_statsmodels(frame_name, demo_frame):
    """The memory-bounded path used above LARGE_ROWS rows gives statsmodels' OLS/HC1 numbers."""
    from app.estimation.estimators import _chunked_hc1

    if frame_name == "demo":
        frame, treatment, others = demo_frame, "bike_lease", ["age", "commute_km", "department", "fitness"]
        outcome = "sick_days"
    else:
        frame = sm.datasets.longley.load_pandas().data
        treatment, others, outcome = "UNEMP", [c for c in LONGLEY_CERTIFIED if c != "UNEMP"], "TOTEMP"
    design = build_design(frame, _identity(frame), treatment=treatment, outcome=outcome, adjust=others)
    direct = sm.OLS(design.y, design.x).fit(cov_type="HC1")
    ours = _chunked_hc1(design.x, design.y, chunk=7)
    assert ours["estimate"] == pytest.approx(direct.params[1], rel=1e-8)
    assert ours["std_error"] == pytest.approx(direct.bse[1], rel=1e-6)
    assert ours["ci"] == pytest.approx(list(direct.conf_int()[1]), rel=1e-6)
    assert ours["p_value"] == pytest.approx(direct.pvalues[1], rel=1e-6, abs=1e-300)


def test_bootstrap_logistic_refit_matches_statsmodels_logit():
    """The warm-started Newton refit used inside the standardization bootstrap gives
    statsmodels' Logit maximum-likelihood coefficients (Spector & Mazzeo 1980 data)."""
    from app.estimation.estimators import _logit_newton

    frame = sm.datasets.spector.load_pandas().data
    x = sm.add_constant(frame[["GPA", "TUCE", "PSI"]]).to_numpy()
    y = frame.GRADE.to_numpy()
    reference = sm.Logit(y, x).fit(disp=0).params
    ours = _logit_newton(x, y, np.zeros(4))
    assert ours == pytest.approx(reference, rel=1e-6)
    # Greene's published logit coefficients for these data: -13.021, 2.826, 0.095, 2.379 (from memory)
    assert ours == pytest.approx([-13.021, 2.826, 0.095, 2.379], abs=2e-3)


def test_weighting_warns_when_arms_barely_overlap():
    """Near-deterministic treatment: scores pile up at 0 and 1 and the result says so."""
    rng = np.random.default_rng(12)
    n = 2000
    c = rng.normal(size=n)
    t = rng.binomial(1, 1 / (1 + np.exp(-6 * c)))
    y = t + c + rng.normal(size=n)
    frame = pd.DataFrame({"c": c, "t": t, "y": y})
    ours = estimators.weighting(build_design(frame, _identity(frame), treatment="t", outcome="y", adjust=["c"]))
    assert ours["overlap"]["near_zero_or_one"] > 0
    assert any("barely overlap" in w for w in ours["warnings"])
