"""Test the diagram's implications against the data.

Each implication says two measured variables are independent given a set of
others. Where all three parts are continuous the test is the partial
correlation with Fisher's z transform (Fisher 1924); where a binary or
categorical variable is involved it is a likelihood-ratio test between two
regressions of one variable, with and without the other (OLS for a continuous
response, logistic for binary, multinomial logistic for categorical). The
p-values are corrected for multiple testing with Holm (1979) or, as an option,
Benjamini & Hochberg (1995), via statsmodels.
"""

from __future__ import annotations

import math
import warnings

import numpy as np
import pandas as pd
import statsmodels.api as sm
from scipy import stats
from statsmodels.stats.multitest import multipletests

from .design import MAX_LEVELS
from .estimators import _least_squares

__all__ = ["fisher_z_test", "likelihood_ratio_test", "adjust_p_values", "test_implications", "CORRECTIONS"]

CORRECTIONS = {"holm": "holm", "bh": "fdr_bh", "none": None}


def _kind(series: pd.Series) -> str:
    if pd.api.types.is_bool_dtype(series):
        return "binary"
    if pd.api.types.is_numeric_dtype(series):
        head = series.iloc[:1000].dropna()
        if head.nunique() > 2:  # cheap answer for an ordinary numeric column
            return "continuous"
        return "binary" if series.dropna().nunique() <= 2 else "continuous"
    values = series.dropna()
    n = values.nunique()
    if n <= 2:
        return "binary"
    if n > MAX_LEVELS:
        return "unusable"
    return "categorical"


def _block(series: pd.Series, kind: str, name: str) -> np.ndarray:
    if kind == "continuous":
        return series.to_numpy(dtype=float)[:, None]
    if kind == "binary":
        levels = sorted(series.astype(str).unique())
        return (series.astype(str) == levels[-1]).to_numpy(dtype=float)[:, None]
    dummies = pd.get_dummies(series.astype(str), dtype=float)
    return dummies.to_numpy()[:, 1:]


def fisher_z_test(x: np.ndarray, y: np.ndarray, given: np.ndarray) -> dict:
    """Partial correlation of x and y given the columns of ``given`` (with intercept)."""
    n = len(x)
    z = np.hstack([np.ones((n, 1)), given]) if given.size else np.ones((n, 1))
    rx = x - z @ _least_squares(z, x)[0]
    ry = y - z @ _least_squares(z, y)[0]
    denom = math.sqrt(float(rx @ rx) * float(ry @ ry))
    r = float(rx @ ry) / denom if denom > 0 else 0.0
    r = min(max(r, -0.9999999), 0.9999999)
    k = z.shape[1] - 1
    dof = n - k - 3
    if dof <= 0:
        raise ValueError("too few rows for this conditioning set")
    stat = math.atanh(r) * math.sqrt(dof)
    return {"test": "partial correlation (Fisher z)", "partial_correlation": r,
            "statistic": stat, "df": None, "p_value": float(2 * stats.norm.sf(abs(stat)))}


def likelihood_ratio_test(response: np.ndarray, response_kind: str, predictor: np.ndarray,
                          given: np.ndarray) -> dict:
    """LR test of adding ``predictor`` to a regression of ``response`` on ``given``."""
    n = len(response)
    base = np.hstack([np.ones((n, 1)), given]) if given.size else np.ones((n, 1))
    full = np.hstack([base, predictor])
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        if response_kind == "continuous":  # Gaussian log-likelihood ratio: n log(RSS_small / RSS_big)
            extra = predictor.shape[1]
            rss = [float(np.sum((response - m @ _least_squares(m, response)[0]) ** 2)) for m in (base, full)]
            stat = max(0.0, n * math.log(rss[0] / rss[1])) if rss[1] > 0 else math.inf
            return {"test": "likelihood ratio (linear regression)", "partial_correlation": None,
                    "statistic": float(stat), "df": int(extra), "p_value": float(stats.chi2.sf(stat, extra))}
        elif response_kind == "binary":
            small = sm.Logit(response, base).fit(disp=0, maxiter=100)
            big = sm.Logit(response, full).fit(disp=0, maxiter=100)
            extra = predictor.shape[1]
        else:
            codes = pd.Categorical(response).codes
            small = sm.MNLogit(codes, base).fit(disp=0, maxiter=200)
            big = sm.MNLogit(codes, full).fit(disp=0, maxiter=200)
            extra = predictor.shape[1] * (len(np.unique(codes)) - 1)
    stat = max(0.0, 2 * (big.llf - small.llf))
    return {"test": f"likelihood ratio ({'linear' if response_kind == 'continuous' else 'logistic' if response_kind == 'binary' else 'multinomial'} regression)",
            "partial_correlation": None, "statistic": float(stat), "df": int(extra),
            "p_value": float(stats.chi2.sf(stat, extra))}


def adjust_p_values(p_values, correction: str = "holm", alpha: float = 0.05) -> list[float]:
    """Multiplicity-adjusted p-values (statsmodels ``multipletests``)."""
    if correction not in CORRECTIONS:
        raise ValueError(f"unknown correction {correction!r}; use holm, bh or none")
    method = CORRECTIONS[correction]
    p = np.asarray(p_values, dtype=float)
    if not p.size:
        return []
    if method == "holm":  # the same numbers as multipletests, without its full garbage collection
        order = np.argsort(p, kind="stable")
        steps = np.minimum(1.0, np.maximum.accumulate(p[order] * np.arange(len(p), 0, -1)))
        out = np.empty_like(p)
        out[order] = steps
        return [float(v) for v in out]
    return [float(v) for v in (multipletests(p, alpha=alpha, method=method)[1] if method else p)]


def test_implications(frame: pd.DataFrame, mapping: dict[str, str], implications: list[dict], *,
                      correction: str = "holm", alpha: float = 0.05, total: int | None = None) -> dict:
    """Run every implication over the mapped columns; complete cases per test."""
    if correction not in CORRECTIONS:
        raise ValueError(f"unknown correction {correction!r}; use holm, bh or none")
    results = []
    whole: dict[str, str] = {}  # kind of each column on all rows, reused when a test drops none
    for imp in implications:
        names = [imp["x"], imp["y"], *imp["given"]]
        entry = {"x": imp["x"], "y": imp["y"], "given": list(imp["given"]), "text": imp.get("text"),
                 "columns": [mapping.get(v) for v in names], "n": 0,
                 "test": None, "statistic": None, "df": None, "p_value": None,
                 "p_adjusted": None, "verdict": "not tested", "reason": None}
        if any(v not in mapping for v in names):
            entry["reason"] = "a variable in it has no column"
            results.append(entry)
            continue
        cols = [mapping[v] for v in names]
        sub = frame[list(dict.fromkeys(cols))].dropna()
        entry["n"] = int(len(sub))
        if len(sub) == len(frame):
            for col in cols:
                if col not in whole:
                    whole[col] = _kind(sub[col])
            kinds = {v: whole[mapping[v]] for v in names}
        else:
            kinds = {v: _kind(sub[mapping[v]]) for v in names}
        if "unusable" in kinds.values() or len(sub) < len(names) + 5:
            entry["reason"] = "too few complete rows" if len(sub) < len(names) + 5 else "a text column has too many categories"
            results.append(entry)
            continue
        try:
            given = (np.hstack([_block(sub[mapping[v]], kinds[v], v) for v in imp["given"]])
                     if imp["given"] else np.empty((len(sub), 0)))
            kx, ky = kinds[imp["x"]], kinds[imp["y"]]
            if kx == ky == "continuous":
                out = fisher_z_test(sub[mapping[imp["x"]]].to_numpy(float), sub[mapping[imp["y"]]].to_numpy(float), given)
            else:
                order = {"continuous": 0, "binary": 1, "categorical": 2}
                resp, pred = sorted([imp["x"], imp["y"]], key=lambda v: order[kinds[v]])
                rk = kinds[resp]
                r_values = (sub[mapping[resp]].to_numpy(float) if rk == "continuous"
                            else _block(sub[mapping[resp]], "binary", resp)[:, 0] if rk == "binary"
                            else sub[mapping[resp]].astype(str).to_numpy())
                out = likelihood_ratio_test(r_values, rk, _block(sub[mapping[pred]], kinds[pred], pred), given)
        except Exception as exc:  # singular fits, separation
            entry["reason"] = f"the test could not be fitted ({str(exc).splitlines()[0][:120]})"
            results.append(entry)
            continue
        entry.update(out)
        results.append(entry)

    tested = [r for r in results if r["p_value"] is not None]
    if tested:
        adjusted = adjust_p_values([r["p_value"] for r in tested], correction, alpha)
        for r, p in zip(tested, adjusted):
            r["p_adjusted"] = float(p)
            r["verdict"] = "fails" if p < alpha else "holds"
    failing = [r for r in results if r["verdict"] == "fails"]
    return {
        "correction": correction, "alpha": alpha,
        "tested": len(tested), "listed": len(implications),
        "total": total if total is not None else len(implications),
        "failing": len(failing),
        "highlight": [{"variables": [r["x"], r["y"]], "given": r["given"]} for r in failing],
        "tests": results,
        "summary": (
            f"{len(failing)} of {len(tested)} tested implications fail at {alpha:g} after "
            f"{'Holm' if correction == 'holm' else 'Benjamini-Hochberg' if correction == 'bh' else 'no'} correction"
            if tested else "no implication could be tested on the measured variables"
        ),
    }
