"""Sensitivity of an estimate to unmeasured confounding.

Regression estimates: the omitted-variable-bias framework of Cinelli &
Hazlett (2020), "Making sense of sensitivity: extending omitted variable
bias", JRSS-B 82(1). A confounder Z is described by two partial R-squared
values: with the treatment given the covariates (``r2dz``) and with the
outcome given treatment and covariates (``r2yz``). Then

    |bias| = se * sqrt(df) * sqrt(r2yz * r2dz / (1 - r2dz))
    adjusted se = se * sqrt((1 - r2yz) / (1 - r2dz)) * sqrt(df / (df - 1))

The robustness value RV_q is the strength (equal on both sides) that would
reduce the estimate by 100q percent; RV_{q,alpha} the strength that would make
it lose significance at level alpha. Benchmarks bound a confounder k times as
strong as a measured covariate (their section 6).

Risk ratios: the E-value of VanderWeele & Ding (2017), "Sensitivity analysis
in observational research: introducing the E-value", Ann Intern Med 167(4).
"""

from __future__ import annotations

import math

import numpy as np
from scipy import stats

__all__ = [
    "partial_r2", "robustness_value", "bias", "adjusted_estimate", "adjusted_se",
    "benchmark_bounds", "contour_lines", "e_value", "regression_sensitivity",
]


def partial_r2(t_value: float, df: float) -> float:
    """Partial R-squared of the treatment with the outcome: t^2 / (t^2 + df)."""
    return t_value ** 2 / (t_value ** 2 + df)


def robustness_value(t_value: float, df: float, *, q: float = 1.0, alpha: float | None = None) -> float:
    """RV_q (alpha None) or RV_{q,alpha}; a fraction in [0, 1].

    With f_q = q |t| / sqrt(df) and, for alpha, f* = |t_{1-alpha/2, df-1}| / sqrt(df-1):
    RV = (sqrt(g^4 + 4 g^2) - g^2) / 2 with g = f_q - f* (g = f_q without alpha),
    zero when g <= 0, and (f_q^2 - f*^2) / (1 + f_q^2) when f_q >= 1/f*, the
    case where the worst confounder is not equally strong on both sides.
    """
    fq = q * abs(t_value) / math.sqrt(df)
    if alpha is None:
        return 0.5 * (math.sqrt(fq ** 4 + 4 * fq ** 2) - fq ** 2)
    fcrit = abs(stats.t.ppf(alpha / 2, df - 1)) / math.sqrt(df - 1)
    g = fq - fcrit
    if g <= 0:
        return 0.0
    if fq >= 1 / fcrit:
        return (fq ** 2 - fcrit ** 2) / (1 + fq ** 2)
    return 0.5 * (math.sqrt(g ** 4 + 4 * g ** 2) - g ** 2)


def bias(se: float, df: float, r2dz, r2yz):
    r2dz, r2yz = np.asarray(r2dz, float), np.asarray(r2yz, float)
    return se * math.sqrt(df) * np.sqrt(r2yz * r2dz / (1 - r2dz))


def adjusted_estimate(estimate: float, se: float, df: float, r2dz, r2yz):
    """The estimate after removing the bias, in the direction that shrinks it."""
    return estimate - math.copysign(1.0, estimate) * bias(se, df, r2dz, r2yz)


def adjusted_se(se: float, df: float, r2dz, r2yz):
    r2dz, r2yz = np.asarray(r2dz, float), np.asarray(r2yz, float)
    return se * np.sqrt((1 - r2yz) / (1 - r2dz)) * math.sqrt(df / (df - 1))


def benchmark_bounds(r2dxj: float, r2yxj: float, *, kd: float = 1.0, ky: float | None = None) -> tuple[float, float]:
    """Bounds on (r2dz, r2yz) for a confounder kd (ky) times as strong as covariate X_j.

    ``r2dxj``: partial R2 of X_j with the treatment given the other covariates;
    ``r2yxj``: partial R2 of X_j with the outcome given treatment and other
    covariates (Cinelli & Hazlett 2020, section 6.1, assuming Z orthogonal to X_j).
    """
    ky = kd if ky is None else ky
    r2dz = kd * r2dxj / (1 - r2dxj)
    if r2dz >= 1:
        return 1.0, 1.0
    r2zxj = kd * r2dxj ** 2 / ((1 - kd * r2dxj) * (1 - r2dxj))
    if r2zxj >= 1:
        return r2dz, 1.0
    r2yz = ((math.sqrt(ky) + math.sqrt(r2zxj)) / math.sqrt(1 - r2zxj)) ** 2 * (r2yxj / (1 - r2yxj))
    return r2dz, min(r2yz, 1.0)


def contour_lines(estimate: float, se: float, df: float, *, r2_max: float = 0.5,
                  levels: list[float] | None = None, points: int = 60) -> dict:
    """Curves of equal adjusted estimate over (r2dz, r2yz) in [0, r2_max]^2.

    Solved in closed form: for level L, r2yz = ((estimate - L) / (se sqrt(df)))^2 (1 - r2dz) / r2dz.
    """
    scale = se * math.sqrt(df)
    if levels is None:
        worst = float(adjusted_estimate(estimate, se, df, r2_max, r2_max))
        low, high = sorted((estimate, worst))
        step = _nice_step(abs(high - low) / 6)
        levels = [round(v, 10) for v in np.arange(math.ceil(low / step) * step, high + step / 2, step)
                  if abs(v - estimate) > step / 4]
        if (estimate > 0) != (worst > 0) and 0.0 not in levels:
            levels.append(0.0)
    xs = np.linspace(r2_max / points, r2_max, points)
    lines = []
    for level in sorted(set(levels)):
        gap = abs(estimate - level)
        if (estimate >= 0 and level > estimate) or (estimate < 0 and level < estimate):
            continue
        ys = (gap / scale) ** 2 * (1 - xs) / xs
        keep = ys <= r2_max
        lines.append({"level": level, "critical": level == 0.0,
                      "points": [[float(a), float(b)] for a, b in zip(xs[keep], ys[keep])]})
    return {"r2_max": r2_max, "estimate": estimate, "lines": lines}


def _nice_step(raw: float) -> float:
    if raw <= 0:
        return 1.0
    mag = 10 ** math.floor(math.log10(raw))
    return next(m * mag for m in (1, 2, 2.5, 5, 10) if m * mag >= raw)


def e_value(rr: float, low: float | None = None, high: float | None = None) -> dict:
    """E-value for a risk ratio and for the confidence limit closest to 1."""
    def one(value: float) -> float:
        if value <= 0 or not math.isfinite(value):
            return float("nan")
        value = 1 / value if value < 1 else value
        return value + math.sqrt(value * (value - 1))

    out = {"risk_ratio": rr, "e_value": one(rr), "e_value_ci": None}
    if low is not None and high is not None:
        if low <= 1 <= high:
            out["e_value_ci"] = 1.0
        else:
            out["e_value_ci"] = one(low if rr > 1 else high)
    return out


def _rss(x: np.ndarray, y: np.ndarray) -> float:
    from .estimators import _least_squares

    beta, _ = _least_squares(x, y)
    return float(np.sum((y - x @ beta) ** 2))


def classical_ols(x: np.ndarray, y: np.ndarray, column: int = 1) -> tuple[float, float, float]:
    """Coefficient, classical (homoskedastic) standard error and residual df of one column.

    The omitted-variable-bias formulas are identities of the least-squares fit with
    this standard error, not with a heteroskedasticity-robust one.
    """
    from scipy.linalg import solve_triangular

    from .estimators import _least_squares

    n, k = x.shape
    beta, r = _least_squares(x, y)
    df = n - k
    rss = float(np.sum((y - x @ beta) ** 2))
    rinv = solve_triangular(r, np.eye(k))
    se = math.sqrt(rss / df * float(rinv[column] @ rinv[column]))
    return float(beta[column]), se, float(df)


def regression_sensitivity(design, *, q: float = 1.0, alpha: float = 0.05,
                           ks: tuple[float, ...] = (1.0, 2.0, 3.0), r2_max: float | None = None) -> dict:
    """Cinelli & Hazlett sensitivity for the OLS fit of a design, with benchmarks from each covariate."""
    x = design.x  # [1, treatment, covariates]
    est, se, df = classical_ols(x, design.y)
    t_value = est / se
    k = x.shape[1]
    # full models once: treatment on covariates, outcome on treatment and covariates
    d_cols = [0] + list(range(2, k))
    xd = x[:, d_cols]
    rss_d = _rss(xd, design.t)
    rss_y = _rss(x, design.y)
    benchmarks = []
    for var, idx in design.groups.items():
        if var.startswith("_"):
            continue
        drop = {2 + i for i in idx}
        rss_d_red = _rss(x[:, [c for c in d_cols if c not in drop]], design.t)
        rss_y_red = _rss(x[:, [c for c in range(k) if c not in drop]], design.y)
        r2dxj = max(0.0, (rss_d_red - rss_d) / rss_d_red) if rss_d_red > 0 else 0.0
        r2yxj = max(0.0, (rss_y_red - rss_y) / rss_y_red) if rss_y_red > 0 else 0.0
        for kk in ks:
            r2dz, r2yz = benchmark_bounds(r2dxj, r2yxj, kd=kk)
            if r2dz >= 1 or r2yz >= 1:
                continue
            benchmarks.append({
                "variable": var, "k": kk, "r2dz": r2dz, "r2yz": r2yz,
                "covariate_r2_treatment": r2dxj, "covariate_r2_outcome": r2yxj,
                "adjusted_estimate": float(adjusted_estimate(est, se, df, r2dz, r2yz)),
                "adjusted_se": float(adjusted_se(se, df, r2dz, r2yz)),
            })
    top = max([0.1] + [max(b["r2dz"], b["r2yz"]) * 1.15 for b in benchmarks if b["k"] == 1.0]
              + [robustness_value(t_value, df, q=q) * 1.3])
    r2_max = r2_max or float(min(0.95, top))
    return {
        "framework": "Cinelli & Hazlett (2020)",
        "estimate": est, "std_error": se, "df": df,
        "partial_r2_treatment": partial_r2(t_value, df),
        "robustness_value": robustness_value(t_value, df, q=q),
        "robustness_value_alpha": robustness_value(t_value, df, q=q, alpha=alpha),
        "q": q, "alpha": alpha,
        "benchmarks": benchmarks,
        "contour": contour_lines(est, se, df, r2_max=r2_max),
        "reading": (
            f"An unmeasured confounder explaining {100 * robustness_value(t_value, df, q=q):.1f}% of the "
            "remaining variance of both the treatment and the outcome would bring the estimate to zero; "
            f"one explaining {100 * robustness_value(t_value, df, q=q, alpha=alpha):.1f}% of both would make "
            f"it lose significance at the {alpha:g} level."
        ),
    }


def standardized_e_value(estimate: float, low: float, high: float, sd_outcome: float) -> dict:
    """Approximate E-value for a difference in means: RR ~ exp(0.91 d) (VanderWeele & Ding 2017)."""
    d, dl, dh = (v / sd_outcome for v in (estimate, low, high))
    out = e_value(math.exp(0.91 * d), math.exp(0.91 * dl), math.exp(0.91 * dh))
    out["approximation"] = "risk ratio approximated as exp(0.91 x standardized difference)"
    return out
