"""Implication tests from sufficient statistics (one pass of centred
cross-products) against row-based statsmodels and scipy, to 1e-9 relative:

- the wage and schooling data of Mroz (1987) as shipped by linearmodels
  (the textbook data of Wooldridge, Introductory Econometrics, example 15.1),
  with city (0/1) and a three-level schooling band made from educ;
- simulated designs with badly scaled columns (values near 1e6 beside values
  near 1e-3), simulated;
- and the whole set of tests on data with missing values, where some tests run
  on their own complete rows, equal to the tests computed on each subset."""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from linearmodels.datasets import mroz
from scipy import stats

from app.estimation import implications as checks
from app.estimation.implications import SharedDesign
from app.estimation.moments import accumulate

REL = 1e-9


@pytest.fixture(name="wages", scope="module")
def fixture_wages():
    frame = mroz.load()[["lwage", "educ", "exper", "age", "kidslt6", "huswage", "city", "motheduc"]].dropna()
    frame["schooling"] = pd.cut(frame.educ, [0, 11, 12, 30], labels=["under 12", "12", "over 12"]).astype(str)
    return frame.reset_index(drop=True)


def _ols(y, columns):
    return sm.OLS(y, sm.add_constant(np.column_stack(columns)) if columns else np.ones((len(y), 1))).fit()


def _partial_r(frame, x, y, given):
    cols = [frame[g].to_numpy(float) for g in given]
    rx = _ols(frame[x].to_numpy(float), cols).resid
    ry = _ols(frame[y].to_numpy(float), cols).resid
    return float(stats.pearsonr(rx, ry).statistic)


@pytest.mark.parametrize("x, y, given", [
    ("lwage", "exper", []),
    ("lwage", "age", ["educ", "exper"]),
    ("huswage", "motheduc", ["educ", "age", "kidslt6"]),
])
def test_fisher_z_matches_residual_correlation_on_wage_data(wages, x, y, given):
    shared = SharedDesign(wages, list(wages.columns))
    ours = shared.test(x, y, given)
    r = _partial_r(wages, x, y, given)
    assert ours["partial_correlation"] == pytest.approx(r, rel=REL)
    z = np.arctanh(r) * np.sqrt(len(wages) - len(given) - 3)
    assert ours["p_value"] == pytest.approx(2 * stats.norm.sf(abs(z)), rel=REL)


def test_linear_likelihood_ratio_matches_statsmodels_on_wage_data(wages):
    """lwage and schooling band (indicators) given exper and age: compare_lr_test."""
    shared = SharedDesign(wages, list(wages.columns))
    ours = shared.test("lwage", "schooling", ["exper", "age"])
    dummies = pd.get_dummies(wages.schooling, dtype=float).to_numpy()[:, 1:]
    small = _ols(wages.lwage.to_numpy(), [wages.exper, wages.age])
    big = _ols(wages.lwage.to_numpy(), [wages.exper, wages.age, *dummies.T])
    stat, p, df = big.compare_lr_test(small)
    assert ours["statistic"] == pytest.approx(stat, rel=REL)
    assert ours["p_value"] == pytest.approx(p, rel=REL)
    assert ours["df"] == df == 2


def test_logistic_test_uses_the_shared_design(wages):
    """city (0/1) and schooling given exper: the logistic fits on the shared columns."""
    shared = SharedDesign(wages, list(wages.columns))
    ours = shared.test("city", "schooling", ["exper"])
    dummies = pd.get_dummies(wages.schooling, dtype=float).to_numpy()[:, 1:]
    small = sm.Logit(wages.city, sm.add_constant(wages[["exper"]].to_numpy(float))).fit(disp=0)
    big = sm.Logit(wages.city, sm.add_constant(np.column_stack([wages.exper, dummies]))).fit(disp=0)
    assert ours["statistic"] == pytest.approx(2 * (big.llf - small.llf), rel=1e-6)


def _badly_scaled(seed: int, n: int = 5000) -> pd.DataFrame:
    """Simulated: columns around 1e6 (small spread) beside columns near 1e-3."""
    rng = np.random.default_rng(seed)
    a = 1e6 + 50 * rng.normal(size=n)
    b = 1e-3 * rng.normal(size=n)
    c = 3e5 * rng.normal(size=n) + 0.4e8 * b
    d = 2e-3 * rng.normal(size=n) + 1e-9 * (a - 1e6) + 0.001 * c / 3e5
    e = 7.0 + 1e-3 * (c / 3e5) + 1e-4 * rng.normal(size=n)
    return pd.DataFrame({"a": a, "b": b, "c": c, "d": d, "e": e})


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_badly_scaled_designs_match_statsmodels(seed):
    frame = _badly_scaled(seed)
    shared = SharedDesign(frame, list(frame.columns))
    for x, y, given in [("a", "d", ["b", "c"]), ("d", "e", ["a", "b"]), ("b", "e", ["a", "c", "d"])]:
        assert shared.test(x, y, given)["partial_correlation"] == pytest.approx(_partial_r(frame, x, y, given), rel=REL)
    rss = shared.moments.residual_ss(shared.slots["e"][0], [shared.slots[g][0] for g in "abcd"])
    assert rss == pytest.approx(_ols(frame.e.to_numpy(), [frame[g] for g in "abcd"]).ssr, rel=REL)


def test_chunked_accumulation_equals_numpy_on_shifted_columns():
    """Merged chunks give the same means and centred cross-products as numpy's two-pass
    covariance, also for a column offset by 1e9 (simulated)."""
    rng = np.random.default_rng(8)
    x = np.column_stack([1e9 + rng.normal(size=100_003), 1e-3 * rng.normal(size=100_003)])
    m = accumulate(x, chunk=4096)
    assert m.n == len(x)
    exact = np.array([math.fsum(col) for col in x.T]) / len(x)  # correctly rounded sums
    np.testing.assert_allclose(m.mean, exact, rtol=1e-14, atol=1e-15)
    np.testing.assert_allclose(m.cross, np.cov(x.T, ddof=0) * len(x), rtol=1e-9)


def test_missing_values_fall_back_to_each_test_complete_rows(wages):
    """Tests whose variables miss values on some rows use their own complete rows;
    every result equals the same test run on its subset alone."""
    frame = wages.copy()
    frame.loc[::7, "huswage"] = np.nan
    mapping = {c: c for c in frame.columns}
    implications = [{"x": "lwage", "y": "age", "given": ["educ"]},
                    {"x": "huswage", "y": "age", "given": ["educ"]},
                    {"x": "lwage", "y": "schooling", "given": ["exper"]}]
    out = checks.test_implications(frame, mapping, implications)
    for imp, row in zip(implications, out["tests"]):
        cols = [imp["x"], imp["y"], *imp["given"]]
        alone = checks.test_implications(frame[cols].dropna(), mapping, [imp])["tests"][0]
        assert row["n"] == alone["n"] and row["statistic"] == pytest.approx(alone["statistic"], rel=REL)
    assert [r["n"] for r in out["tests"]] == [len(frame), int(frame.huswage.notna().sum()), len(frame)]
