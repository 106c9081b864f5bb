"""Estimators. Each takes a :class:`~app.estimation.design.Design` and returns
a plain dict with at least ``estimate``, ``std_error``, ``ci``, ``method``.

The statistics come from maintained libraries: statsmodels (OLS with
heteroskedasticity-robust errors, logistic models) and linearmodels
(two-stage least squares). Written here: standardization over the sample,
the weighting and doubly robust means with the analytic sandwich of their
estimating equations, overlap and balance summaries, the front-door product
and the bootstrap loops.

Every estimator also has a *point* function (``point_<method>``) that
returns only the estimate, fast, for the resampling checks.
"""

from __future__ import annotations

import math
import warnings
from typing import Callable

import numpy as np
import statsmodels.api as sm
from scipy import stats

from .design import Design
from .errors import FitFailed
from .methods import method_names as _method_names

__all__ = [
    "regression", "standardization", "weighting", "doubly_robust", "two_stage", "front_door",
    "point_regression", "point_standardization", "point_weighting", "point_doubly_robust",
    "point_two_stage", "point_front_door", "point_function", "fit_function", "METHODS", "ROBUST_COV",
]

ROBUST_COV = "HC1"
Z95 = stats.norm.ppf(0.975)


def _with_const(*blocks: np.ndarray) -> np.ndarray:
    n = blocks[0].shape[0]
    cols = [np.ones((n, 1))] + [b.reshape(n, -1) for b in blocks if b.size]
    return np.hstack(cols)


# -- adjustment, continuous outcome ------------------------------------------

LARGE_ROWS = 200_000  # above this, the memory-bounded path below


def regression(design: Design) -> dict:
    """OLS of outcome on treatment and adjustment columns, robust (HC1) errors.

    Up to ``LARGE_ROWS`` rows this is statsmodels' OLS with ``cov_type="HC1"``.
    Above, the same estimator is computed in row chunks (see :func:`_chunked_hc1`)
    so memory stays at the design matrix plus one chunk; tests hold both paths to
    the same numbers.
    """
    x = design.x
    if x.shape[0] <= x.shape[1] + 1:
        raise FitFailed(f"{x.shape[0]} rows are too few for {x.shape[1]} coefficients")
    if x.shape[0] > LARGE_ROWS:
        return _chunked_hc1(x, design.y)
    fit = sm.OLS(design.y, x).fit(cov_type=ROBUST_COV)
    low, high = fit.conf_int()[1]
    return {
        "method": "regression",
        "estimate": float(fit.params[1]),
        "std_error": float(fit.bse[1]),
        "ci": [float(low), float(high)],
        "statistic": float(fit.tvalues[1]),
        "p_value": float(fit.pvalues[1]),
        "df_resid": float(fit.df_resid),
        "r_squared": float(fit.rsquared),
        "_fit": fit,
    }


def _least_squares(x: np.ndarray, y: np.ndarray, chunk: int = 65536) -> tuple[np.ndarray, np.ndarray]:
    """Coefficients and R (X = QR) by CholeskyQR2 on the column-scaled matrix, in row chunks."""
    from scipy.linalg import solve_triangular

    n, k = x.shape
    chunks = [(a, min(a + chunk, n)) for a in range(0, n, chunk)]
    gram = np.zeros((k, k))
    for a, b in chunks:
        gram += x[a:b].T @ x[a:b]
    scale = np.sqrt(np.diag(gram))
    scale[scale == 0] = 1.0
    try:
        r1 = np.linalg.cholesky(gram / np.outer(scale, scale)).T
        to_q1 = solve_triangular(r1, np.eye(k)) / scale[:, None]  # X @ to_q1 = Q1
        gram2 = np.zeros((k, k))
        qy = np.zeros(k)
        for a, b in chunks:
            q1 = x[a:b] @ to_q1
            gram2 += q1.T @ q1
            qy += q1.T @ y[a:b]
        r2 = np.linalg.cholesky(gram2).T
    except np.linalg.LinAlgError:
        raise FitFailed("the adjustment columns are too close to collinear for a stable fit") from None
    r = r2 @ r1 * scale[None, :]  # X = Q R
    beta = solve_triangular(r, solve_triangular(r2, qy, trans="T"))
    return beta, r


def _chunked_hc1(x: np.ndarray, y: np.ndarray, chunk: int = 65536, column: int = 1) -> dict:
    """OLS with HC1 errors from row chunks, memory bounded by one chunk.

    The coefficients come from a Cholesky QR done twice ("CholeskyQR2",
    Fukaya et al. 2014) on the column-scaled matrix, which is as accurate as a
    Householder QR for any matrix that is not near-singular (perfectly
    collinear columns are refused before this point); only Gram matrices of
    chunks are formed, which BLAS computes fast. A last pass accumulates the
    sandwich meat sum(e_i^2 x_i x_i'). HC1 = n/(n-k) (X'X)^-1 meat (X'X)^-1, with
    inference on the normal distribution, as statsmodels does for HC1.
    """
    from scipy.linalg import solve_triangular

    n, k = x.shape
    chunks = [(a, min(a + chunk, n)) for a in range(0, n, chunk)]
    beta, r = _least_squares(x, y, chunk)
    rinv = solve_triangular(r, np.eye(k))
    bread = rinv @ rinv.T
    meat = np.zeros((k, k))
    rss = 0.0
    for a, b in chunks:
        xc = x[a:b]
        e = y[a:b] - xc @ beta
        rss += float(e @ e)
        meat += (xc * (e * e)[:, None]).T @ xc
    cov = n / (n - k) * bread @ meat @ bread
    se = float(np.sqrt(cov[column, column]))
    est = float(beta[column])
    z = est / se
    tss = float(np.sum((y - y.mean()) ** 2))
    return {
        "method": "regression",
        "estimate": est,
        "std_error": se,
        "ci": [est - Z95 * se, est + Z95 * se],
        "statistic": z,
        "p_value": float(2 * stats.norm.sf(abs(z))),
        "df_resid": float(n - k),
        "r_squared": 1 - rss / tss if tss > 0 else float("nan"),
        "_fit": None,
    }


def point_regression(design: Design) -> float:
    return float(_least_squares(design.x, design.y)[0][1])


# -- adjustment, binary outcome: standardization (g-formula) ------------------

def _arm_models(design: Design, start: list | None = None):
    """Logistic outcome model in each arm; ``start`` holds starting values (from the full sample)."""
    x = _with_const(design.covariates)
    treated = design.t == 1
    fits = []
    for i, (arm, mask) in enumerate((("not treated", ~treated), ("treated", treated))):
        yy = design.y[mask]
        if yy.min() == yy.max():
            raise FitFailed(
                f"in the {arm} arm every outcome is {yy[0]:g}; the outcome model cannot be fitted "
                "(try a coarser adjustment set or more data)"
            )
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            try:
                fit = sm.Logit(yy, x[mask]).fit(disp=0, maxiter=100,
                                                start_params=None if start is None else start[i])
            except Exception as exc:  # perfect separation, singular matrix
                raise FitFailed(f"the outcome model in the {arm} arm failed: {exc}") from None
        fits.append(fit)
    return x, fits


def _risks(design: Design, start: list | None = None) -> tuple[float, float, list]:
    x, (fit0, fit1) = _arm_models(design, start)
    with np.errstate(over="ignore"):
        return float(np.mean(fit0.predict(x))), float(np.mean(fit1.predict(x))), [fit0.params, fit1.params]


def _logit_newton(x: np.ndarray, y: np.ndarray, start: np.ndarray, *, max_iter: int = 30,
                  tol: float = 1e-10) -> np.ndarray:
    """Maximum-likelihood logistic coefficients by Newton steps from ``start``.

    Used only for bootstrap refits, warm-started at statsmodels' fit on the
    full sample (a handful of steps); tests hold it to statsmodels' Logit.
    """
    from scipy.linalg import cho_factor, cho_solve
    from scipy.special import expit

    beta = np.array(start, dtype=float)
    for _ in range(max_iter):
        p = expit(x @ beta)
        w = p * (1 - p)
        try:
            step = cho_solve(cho_factor((x * w[:, None]).T @ x), x.T @ (y - p))
        except np.linalg.LinAlgError:
            raise FitFailed("the outcome model has no unique fit on this resample") from None
        beta += step
        if np.max(np.abs(step)) < tol * (1 + np.max(np.abs(beta))):
            return beta
    raise FitFailed("the outcome model did not converge on this resample (separation?)")


def _quick_risks(design: Design, start: list) -> tuple[float, float]:
    from scipy.special import expit

    x = _with_const(design.covariates)
    treated = design.t == 1
    risks = []
    for params, mask in zip(start, (~treated, treated)):
        if design.y[mask].min() == design.y[mask].max():
            raise FitFailed("an arm has a single outcome value on this resample")
        beta = _logit_newton(x[mask], design.y[mask], params)
        risks.append(float(np.mean(expit(x @ beta))))
    return risks[0], risks[1]


def _contrasts(p0: float, p1: float) -> dict:
    def odds(p: float) -> float:
        return p / (1 - p)

    return {
        "risk_difference": p1 - p0,
        "risk_ratio": p1 / p0 if p0 > 0 else float("inf"),
        "odds_ratio": odds(p1) / odds(p0) if 0 < p0 < 1 and p1 < 1 else float("inf"),
    }


def standardization(design: Design, *, resamples: int = 200, seed: int = 7) -> dict:
    """Logistic outcome model within each arm, averaged over the whole sample.

    The risk difference is the headline; risk ratio and odds ratio sit beside
    it. Intervals are percentile bootstrap intervals over ``resamples``
    resamples of the rows (standard error: the bootstrap standard deviation).
    """
    _require_binary(design, "standardization")
    p0, p1, start = _risks(design)
    main = _contrasts(p0, p1)
    rng = np.random.default_rng(seed)
    draws = {k: [] for k in main}
    failures = 0
    for _ in range(resamples):
        idx = rng.integers(0, design.n, design.n)
        try:
            sample = design.take(idx)
            try:
                b0, b1 = _quick_risks(sample, start)
            except FitFailed:  # no interior maximum on this resample: let statsmodels decide
                b0, b1, _ = _risks(sample, start)
        except FitFailed:
            failures += 1
            continue
        for k, v in _contrasts(b0, b1).items():
            draws[k].append(v)
    if len(draws["risk_difference"]) < max(20, resamples // 2):
        raise FitFailed("the outcome model failed on most bootstrap resamples; too little data in an arm")
    intervals = {k: [float(np.percentile(v, 2.5)), float(np.percentile(v, 97.5))] for k, v in draws.items()}
    return {
        "method": "standardization",
        "estimate": main["risk_difference"],
        "std_error": float(np.std(draws["risk_difference"], ddof=1)),
        "ci": intervals["risk_difference"],
        "scale": "risk difference",
        "risk_untreated": p0,
        "risk_treated": p1,
        "risk_ratio": main["risk_ratio"],
        "risk_ratio_ci": intervals["risk_ratio"],
        "odds_ratio": main["odds_ratio"],
        "odds_ratio_ci": intervals["odds_ratio"],
        "interval": f"percentile bootstrap, {resamples - failures} resamples",
    }


def point_standardization(design: Design) -> float:
    start = [np.zeros(1 + design.covariates.shape[1])] * 2
    try:
        p0, p1 = _quick_risks(design, start)
    except FitFailed:
        p0, p1, _ = _risks(design)
    return p1 - p0


# -- weighting and doubly robust --------------------------------------------

def _require_binary(design: Design, method: str) -> None:
    if not design.t_binary:
        from .errors import BadMethod

        raise BadMethod(f"{method} needs a binary (0/1) treatment; this treatment is continuous")
    if method == "standardization" and not design.y_binary:
        from .errors import BadMethod

        raise BadMethod("standardization here needs a binary (0/1) outcome; use regression")


def _propensity(design: Design):
    x = _with_const(design.covariates)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        try:
            fit = sm.Logit(design.t, x).fit(disp=0, maxiter=100)
        except Exception as exc:
            raise FitFailed(f"the treatment (propensity) model failed: {exc}") from None
    return x, fit


def overlap_summary(t: np.ndarray, score: np.ndarray, bins: int = 20) -> dict:
    """Propensity score distribution per arm and the extreme weights."""
    edges = np.linspace(0, 1, bins + 1)
    treated = t == 1
    weights = np.where(treated, 1 / score, 1 / (1 - score))

    def kish(w):
        return float(w.sum() ** 2 / (w ** 2).sum()) if w.size else 0.0

    return {
        "bin_edges": edges.tolist(),
        "treated_counts": np.histogram(score[treated], edges)[0].tolist(),
        "untreated_counts": np.histogram(score[~treated], edges)[0].tolist(),
        "treated_range": [float(score[treated].min()), float(score[treated].max())],
        "untreated_range": [float(score[~treated].min()), float(score[~treated].max())],
        "near_zero_or_one": int(((score < 0.01) | (score > 0.99)).sum()),
        "largest_weight": float(weights.max()),
        "largest_weight_share": float(weights.max() / weights.sum()),
        "effective_n_treated": kish(weights[treated]),
        "effective_n_untreated": kish(weights[~treated]),
    }


def balance_table(design: Design, score: np.ndarray) -> list[dict]:
    """Standardized mean differences before and after inverse probability weighting.

    SMD = (mean treated - mean untreated) / sqrt((var treated + var untreated) / 2),
    with the unweighted variances in the denominator both times (Austin 2009).
    |SMD| below 0.1 is the usual rule of thumb for balance (common practice).
    """
    treated = design.t == 1
    w = np.where(treated, 1 / score, 1 / (1 - score))
    out = []
    for i, name in enumerate(design.covariate_names):
        col = design.covariates[:, i]
        a, b = col[treated], col[~treated]
        pooled = np.sqrt((a.var(ddof=1) + b.var(ddof=1)) / 2)
        if pooled == 0:
            continue
        before = (a.mean() - b.mean()) / pooled
        after = (np.average(a, weights=w[treated]) - np.average(b, weights=w[~treated])) / pooled
        out.append({"column": name, "smd_before": float(before), "smd_after": float(after),
                    "balanced_after": bool(abs(after) < 0.1)})
    return out


def _standardized(design: Design) -> np.ndarray:
    """[1, covariates centred and scaled]: the same fitted values as the raw columns
    (an invertible linear change of coordinates), but a well-conditioned matrix even
    when a column holds squares of values in the thousands."""
    cov = design.covariates.reshape(design.n, -1)
    if not cov.size:
        return np.ones((design.n, 1))
    sd = cov.std(axis=0)
    sd[sd == 0] = 1.0
    return _with_const((cov - cov.mean(axis=0)) / sd)


def _sandwich_se(moments: np.ndarray, jacobian: np.ndarray, gradient: np.ndarray) -> float:
    """Standard error of gradient' theta for an exactly identified M-estimator.

    ``moments``: the n x p estimating functions at the solution; ``jacobian``:
    the p x p sum over rows of their derivatives. Var = J^-1 (Psi'Psi) J^-T
    (Stefanski & Boos 2002), so the variance of g'theta is |Psi J^-T g|^2.
    """
    try:
        u = np.linalg.solve(jacobian.T, gradient)
    except np.linalg.LinAlgError:
        raise FitFailed("the weighting estimating equations are singular; an arm may be empty") from None
    return float(np.sqrt(np.sum((moments @ u) ** 2)))


def _ipw_parts(x: np.ndarray, t: np.ndarray, y: np.ndarray, p: np.ndarray) -> dict:
    """Normalised (Hajek) inverse probability weighting with its analytic sandwich.

    Parameters (beta, mu1, mu0): the logistic propensity score and the weighted
    mean outcome in each arm. Estimating functions
    x (t - p),  t/p (y - mu1),  (1-t)/(1-p) (y - mu0);
    their derivatives are written out below (dp/dbeta = p (1-p) x).
    """
    k = x.shape[1]
    w1, w0 = t / p, (1 - t) / (1 - p)
    mu1, mu0 = np.sum(w1 * y) / np.sum(w1), np.sum(w0 * y) / np.sum(w0)
    moments = np.column_stack([x * (t - p)[:, None], w1 * (y - mu1), w0 * (y - mu0)])
    jac = np.zeros((k + 2, k + 2))
    jac[:k, :k] = -(x * (p * (1 - p))[:, None]).T @ x
    jac[k, :k] = -(w1 * (y - mu1) * (1 - p)) @ x
    jac[k, k] = -np.sum(w1)
    jac[k + 1, :k] = (w0 * (y - mu0) * p) @ x
    jac[k + 1, k + 1] = -np.sum(w0)
    gradient = np.zeros(k + 2)
    gradient[k], gradient[k + 1] = 1.0, -1.0
    return {"estimate": mu1 - mu0, "mean_treated": mu1, "mean_untreated": mu0,
            "std_error": _sandwich_se(moments, jac, gradient)}


def _aipw_parts(x: np.ndarray, t: np.ndarray, y: np.ndarray, p: np.ndarray) -> dict:
    """Augmented IPW with a linear outcome model per arm, and its analytic sandwich.

    Parameters (beta, gamma1, gamma0, mu1, mu0). Estimating functions
    x (t - p),  t x (y - x gamma1),  (1-t) x (y - x gamma0),
    m1 + t (y - m1)/p - mu1,  m0 + (1-t)(y - m0)/(1-p) - mu0  with m_a = x gamma_a.
    """
    k = x.shape[1]
    tr = t == 1
    gamma1 = np.linalg.lstsq(x[tr], y[tr], rcond=None)[0]
    gamma0 = np.linalg.lstsq(x[~tr], y[~tr], rcond=None)[0]
    m1, m0 = x @ gamma1, x @ gamma0
    r1, r0 = t * (y - m1) / p, (1 - t) * (y - m0) / (1 - p)
    mu1, mu0 = float(np.mean(m1 + r1)), float(np.mean(m0 + r0))
    moments = np.column_stack([x * (t - p)[:, None], x * (t * (y - m1))[:, None],
                               x * ((1 - t) * (y - m0))[:, None], m1 + r1 - mu1, m0 + r0 - mu0])
    b, g1, g0, a1, a0 = slice(0, k), slice(k, 2 * k), slice(2 * k, 3 * k), 3 * k, 3 * k + 1
    jac = np.zeros((3 * k + 2, 3 * k + 2))
    jac[b, b] = -(x * (p * (1 - p))[:, None]).T @ x
    jac[g1, g1] = -(x * t[:, None]).T @ x
    jac[g0, g0] = -(x * (1 - t)[:, None]).T @ x
    jac[a1, b] = -(r1 * (1 - p)) @ x
    jac[a1, g1] = (1 - t / p) @ x
    jac[a1, a1] = -len(y)
    jac[a0, b] = (r0 * p) @ x
    jac[a0, g0] = (1 - (1 - t) / (1 - p)) @ x
    jac[a0, a0] = -len(y)
    gradient = np.zeros(3 * k + 2)
    gradient[a1], gradient[a0] = 1.0, -1.0
    return {"estimate": mu1 - mu0, "mean_treated": mu1, "mean_untreated": mu0,
            "std_error": _sandwich_se(moments, jac, gradient)}


def _treatment_effect(design: Design, kind: str) -> dict:
    """Weighting or doubly robust estimate; standard error from the analytic sandwich
    of the stacked estimating equations (propensity model included), computed on
    standardized covariate columns."""
    _require_binary(design, "weighting" if kind == "ipw" else "the doubly robust estimator")
    tr = design.t == 1
    if np.ptp(design.y[tr]) == 0 and np.ptp(design.y[~tr]) == 0:
        raise FitFailed("the outcome takes a single value in each arm, so it carries no information "
                        "beyond the treatment itself; no standard error or interval can be given")
    x, ps_fit = _propensity(design)
    score = np.asarray(ps_fit.predict(x), dtype=float)
    xs = _standardized(design)
    parts = (_ipw_parts if kind == "ipw" else _aipw_parts)(xs, design.t.astype(float), design.y, score)
    if not (math.isfinite(parts["estimate"]) and math.isfinite(parts["std_error"]) and parts["std_error"] > 0):
        raise FitFailed(f"the {'weighting' if kind == 'ipw' else 'doubly robust'} fit gave no finite estimate")
    est, se = parts["estimate"], parts["std_error"]
    overlap = overlap_summary(design.t, score)
    balance = balance_table(design, score)
    notes = []
    if overlap["near_zero_or_one"]:
        notes.append(f"{overlap['near_zero_or_one']} row(s) have an estimated probability of treatment below 0.01 "
                     "or above 0.99: the arms barely overlap there and the weights are extreme")
    if overlap["largest_weight_share"] > 0.05:
        notes.append(f"one row carries {100 * overlap['largest_weight_share']:.0f}% of the total weight; "
                     "the estimate leans on very few people")
    unbalanced = [b["column"] for b in balance if not b["balanced_after"]]
    if unbalanced:
        notes.append("after weighting, these columns still differ between the arms (|SMD| >= 0.1): "
                     + ", ".join(unbalanced))
    return {
        "method": "weighting" if kind == "ipw" else "doubly-robust",
        "warnings": notes,
        "estimate": est,
        "std_error": se,
        "ci": [est - Z95 * se, est + Z95 * se],
        "mean_untreated": parts["mean_untreated"],
        "mean_treated": parts["mean_treated"],
        "interval": "sandwich standard error of the stacked estimating equations (propensity model included)",
        "overlap": overlap,
        "balance": balance,
    }


def weighting(design: Design) -> dict:
    """Inverse probability weighting with normalised weights (Hajek), statsmodels Logit propensity."""
    return _treatment_effect(design, "ipw")


def doubly_robust(design: Design) -> dict:
    """Augmented IPW, linear outcome model per arm, statsmodels Logit propensity."""
    return _treatment_effect(design, "aipw")


def point_weighting(design: Design) -> float:
    x, fit = _propensity(design)
    p = fit.predict(x)
    tr = design.t == 1
    return float(np.average(design.y[tr], weights=1 / p[tr]) - np.average(design.y[~tr], weights=1 / (1 - p[~tr])))


def point_doubly_robust(design: Design) -> float:
    x, fit = _propensity(design)
    p = fit.predict(x)
    tr = design.t == 1
    m1 = x @ np.linalg.lstsq(x[tr], design.y[tr], rcond=None)[0]
    m0 = x @ np.linalg.lstsq(x[~tr], design.y[~tr], rcond=None)[0]
    t, y = design.t, design.y
    return float(np.mean(m1 - m0 + t * (y - m1) / p - (1 - t) * (y - m0) / (1 - p)))


# -- instrument --------------------------------------------------------------

WEAK_F = 10.0  # Staiger & Stock (1997) rule of thumb


def two_stage(design: Design) -> dict:
    """Two-stage least squares (linearmodels IV2SLS), robust errors, controls = conditioning set."""
    from linearmodels.iv import IV2SLS

    if not design.instruments.size:
        raise FitFailed("two-stage least squares needs an instrument column")
    exog = _with_const(design.covariates)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        try:
            fit = IV2SLS(design.y, exog, design.t.reshape(-1, 1), design.instruments).fit(cov_type="robust")
        except Exception as exc:
            raise FitFailed(f"two-stage least squares failed: {exc}") from None
    names = list(fit.params.index)
    treat = names[-1]
    diag = fit.first_stage.diagnostics
    q = design.instruments.shape[1]
    first_f = float(diag["f.stat"].iloc[0]) / (q if "chi2" in str(diag["f.dist"].iloc[0]) else 1)
    low, high = fit.conf_int().loc[treat]
    warnings_out = []
    if first_f < WEAK_F:
        warnings_out.append(
            f"weak instrument: first-stage F = {first_f:.1f} is below 10 (Staiger & Stock 1997); "
            "the estimate and its interval are unreliable"
        )
    return {
        "method": "two-stage",
        "estimate": float(fit.params[treat]),
        "std_error": float(fit.std_errors[treat]),
        "ci": [float(low), float(high)],
        "first_stage_f": first_f,
        "first_stage_partial_r2": float(diag["partial.rsquared"].iloc[0]),
        "weak_instrument": first_f < WEAK_F,
        "warnings": warnings_out,
    }


def point_two_stage(design: Design) -> float:
    exog = _with_const(design.covariates)
    z = np.hstack([exog, design.instruments])
    first = z @ np.linalg.lstsq(z, design.t, rcond=None)[0]
    second = np.hstack([exog, first[:, None]])
    return float(np.linalg.lstsq(second, design.y, rcond=None)[0][-1])


# -- front door --------------------------------------------------------------

def point_front_door(design: Design) -> float:
    """Sum over mediators of (treatment -> mediator) x (mediator -> outcome given treatment)."""
    m = design.mediators
    xa = _with_const(design.t)
    a = np.linalg.lstsq(xa, m, rcond=None)[0][1]
    xb = _with_const(m, design.t)
    b = np.linalg.lstsq(xb, design.y, rcond=None)[0][1:1 + m.shape[1]]
    return float(np.dot(a, b))


def front_door(design: Design, *, resamples: int = 500, seed: int = 11) -> dict:
    """Linear front-door estimate (product of coefficients) with a percentile bootstrap interval."""
    if not design.mediators.size:
        raise FitFailed("the front-door estimate needs the mediator columns")
    estimate = point_front_door(design)
    rng = np.random.default_rng(seed)
    draws = np.array([point_front_door(design.take(rng.integers(0, design.n, design.n)))
                      for _ in range(resamples)])
    return {
        "method": "front-door",
        "estimate": estimate,
        "std_error": float(draws.std(ddof=1)),
        "ci": [float(np.percentile(draws, 2.5)), float(np.percentile(draws, 97.5))],
        "interval": f"percentile bootstrap, {resamples} resamples",
    }


def point_function(method: str) -> Callable[[Design], float]:
    """The point-estimate function of the method called ``method`` (see :mod:`.methods`)."""
    from .methods import find_method

    return find_method(method).point


def fit_function(method: str) -> Callable[[Design], dict]:
    """The fitting function of the method called ``method`` (see :mod:`.methods`)."""
    from .methods import find_method

    return find_method(method).fit


# Fit functions by method name, read from the registry (for callers that loop over methods).
METHODS: dict[str, Callable[[Design], dict]] = {name: fit_function(name) for name in _method_names()}
