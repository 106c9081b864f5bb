"""Test the diagram's implications against the data.

Each implication says two measured variables are independent given a set of
others. Where all three parts are continuous the test is the partial
correlation with Fisher's z transform (Fisher 1924); where a binary or
categorical variable is involved it is a likelihood-ratio test between two
regressions of one variable, with and without the other (OLS for a continuous
response, logistic for binary, multinomial logistic for categorical). The
p-values are corrected for multiple testing with Holm (1979) or, as an option,
Benjamini & Hochberg (1995), via statsmodels.

The rows are read once: the columns of every variable in an implication are
built into one design (0/1 and indicator columns for binary and categorical
ones; each column's kind decided once for the table) and one pass gives its
means and centred cross-products (:mod:`.moments`). Every Fisher z test is
then a small solve on that matrix and every linear likelihood-ratio test a
comparison of two residual sums of squares from it; the logistic tests fit on
columns of the same design. A test whose variables have missing values on
rows the others use is computed on its own complete rows instead.
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
from .moments import Moments, accumulate

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


def _fisher_z_from(r: float, n: int, k: int) -> dict:
    r = min(max(r, -0.9999999), 0.9999999)
    dof = n - k - 3
    if dof <= 0:
        raise ValueError("too few rows for this conditioning set")
    stat = math.atanh(r) * math.sqrt(dof)
    return {"test": "partial correlation (Fisher z)", "partial_correlation": r,
            "statistic": stat, "df": None, "p_value": float(2 * stats.norm.sf(abs(stat)))}


def _linear_lr_from(rss_small: float, rss_big: float, n: int, extra: int) -> dict:
    stat = max(0.0, n * math.log(rss_small / rss_big)) if rss_big > 0 else math.inf
    return {"test": "likelihood ratio (linear regression)", "partial_correlation": None,
            "statistic": float(stat), "df": int(extra), "p_value": float(stats.chi2.sf(stat, extra))}


class SharedDesign:
    """The design of every column the implications use, on the rows complete in all
    of them: each column's kind (once), its block of design columns, and the
    sufficient statistics of the whole design from one chunked pass."""

    def __init__(self, frame: pd.DataFrame, columns: list[str]):
        sub = frame[columns].dropna()
        self.n = int(len(sub))
        self.kinds = {c: _kind(sub[c]) for c in columns}
        self.slots: dict[str, list[int]] = {}
        self.codes: dict[str, np.ndarray] = {}
        blocks = []
        width = 0
        for c in columns:
            if self.kinds[c] == "unusable":
                continue
            block = _block(sub[c], self.kinds[c], c)
            self.slots[c] = list(range(width, width + block.shape[1]))
            width += block.shape[1]
            blocks.append(block)
            if self.kinds[c] == "categorical":
                self.codes[c] = pd.Categorical(sub[c].astype(str)).codes
        self.x = np.hstack(blocks) if blocks else np.empty((self.n, 0))
        self.moments: Moments = accumulate(self.x)

    def test(self, x: str, y: str, given: list[str]) -> dict:
        """Fisher z or likelihood-ratio test of x and y independent given ``given`` (columns)."""
        kinds = {c: self.kinds[c] for c in (x, y, *given)}
        g = [i for c in given for i in self.slots[c]]
        if kinds[x] == kinds[y] == "continuous":
            rc = self.moments.residual_cross([self.slots[x][0], self.slots[y][0]], g)
            denom = math.sqrt(max(rc[0, 0], 0.0) * max(rc[1, 1], 0.0))
            return _fisher_z_from(float(rc[0, 1]) / denom if denom > 0 else 0.0, self.n, len(g))
        order = {"continuous": 0, "binary": 1, "categorical": 2}
        resp, pred = sorted([x, y], key=lambda c: order[kinds[c]])
        if kinds[resp] == "continuous":
            r = self.slots[resp][0]
            return _linear_lr_from(self.moments.residual_ss(r, g), self.moments.residual_ss(r, g + self.slots[pred]),
                                   self.n, len(self.slots[pred]))
        r_values = self.x[:, self.slots[resp][0]] if kinds[resp] == "binary" else self.codes[resp]
        return likelihood_ratio_test(r_values, kinds[resp], self.x[:, self.slots[pred]], self.x[:, g])


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
    used = list(dict.fromkeys(mapping[v] for imp in implications for v in (imp["x"], imp["y"], *imp["given"])
                              if v in mapping))
    present = {c: frame[c].notna().to_numpy() for c in used}
    shared = SharedDesign(frame, used) if used else None
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
        complete = np.logical_and.reduce([present[c] for c in cols])
        if shared is not None and int(complete.sum()) == shared.n:  # the shared rows: from the statistics
            entry["n"] = shared.n
            kinds = {v: shared.kinds[mapping[v]] for v in names}
            if "unusable" in kinds.values() or shared.n < len(names) + 5:
                entry["reason"] = ("too few complete rows" if shared.n < len(names) + 5
                                   else "a text column has too many categories")
            else:
                try:
                    entry.update(shared.test(mapping[imp["x"]], mapping[imp["y"]], [mapping[v] for v in imp["given"]]))
                except Exception as exc:  # singular fits, separation
                    entry["reason"] = f"the test could not be fitted ({str(exc).splitlines()[0][:120]})"
            results.append(entry)
            continue
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
