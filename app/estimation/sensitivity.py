"""Sensitivity of an estimate to a hidden common cause of treatment and outcome.

Regression estimates use omitted-variable bias in the partial-R-squared form
of Cinelli & Hazlett (2020), "Making sense of sensitivity: extending omitted
variable bias", JRSS-B 82(1). A hidden cause is described by two shares:
``with_treatment``, the share of the treatment's variance left by the
covariates that it would explain, and ``with_outcome``, the share of the
outcome's variance left by treatment and covariates. With ``se`` and ``df``
the classical (homoskedastic) standard error and residual degrees of freedom
of the least-squares fit, of which these are identities:

    shift = se * sqrt(df) * sqrt(with_outcome * with_treatment / (1 - with_treatment))
    std error if present = se * sqrt((1 - with_outcome) / (1 - with_treatment)) * sqrt(df / (df - 1))

The robustness value RV_q is the strength (equal on both sides) that would
move the estimate by 100q percent; RV_{q,alpha} the strength at which its
interval would reach zero. A cause ``times`` as strong as a measured
covariate has the shares given by :func:`as_strong_as` (their section 6.1).

The room's statements ("twice as strong as age") are turned into shares the
same way and read against the estimate by :func:`room_reading`.

Risk ratios: the E-value of VanderWeele & Ding (2017), "Sensitivity analysis
in observational research: introducing the E-value", Ann Intern Med 167(4).
"""

from __future__ import annotations

import math

import numpy as np
from scipy import stats

__all__ = [
    "partial_r2", "robustness_value", "shift", "estimate_if_present", "std_error_if_present",
    "as_strong_as", "equal_strength", "interval_path", "strength_phrase", "room_reading",
    "e_value", "standardized_e_value", "classical_ols", "regression_sensitivity",
]

STANDINGS = ("holds", "interval reaches zero", "sign changes")


def partial_r2(t_value: float, df: float) -> float:
    """Partial R-squared of the treatment with the outcome: t^2 / (t^2 + df)."""
    return t_value ** 2 / (t_value ** 2 + df)


def robustness_value(t_value: float, df: float, *, share: float = 1.0, alpha: float | None = None) -> float:
    """The robustness value for removing ``share`` of the estimate (q in Cinelli & Hazlett 2020),
    at no level (alpha None) or for the interval at level alpha; a fraction in [0, 1].

    With f_q = share |t| / sqrt(df) and, for alpha, f* = |t_{1-alpha/2, df-1}| / sqrt(df-1):
    RV = (sqrt(g^4 + 4 g^2) - g^2) / 2 with g = f_q - f* (g = f_q without alpha),
    zero when g <= 0, and (f_q^2 - f*^2) / (1 + f_q^2) when f_q >= 1/f*, the
    case where the worst cause is not equally strong on both sides.
    """
    fq = share * abs(t_value) / math.sqrt(df)
    if alpha is None:
        return 0.5 * (math.sqrt(fq ** 4 + 4 * fq ** 2) - fq ** 2)
    fcrit = abs(stats.t.ppf(alpha / 2, df - 1)) / math.sqrt(df - 1)
    g = fq - fcrit
    if g <= 0:
        return 0.0
    if fq >= 1 / fcrit:
        return (fq ** 2 - fcrit ** 2) / (1 + fq ** 2)
    return 0.5 * (math.sqrt(g ** 4 + 4 * g ** 2) - g ** 2)


def shift(se: float, df: float, with_treatment, with_outcome):
    """How far a hidden cause of the given shares moves the estimate (absolute value)."""
    wt, wo = np.asarray(with_treatment, float), np.asarray(with_outcome, float)
    return se * math.sqrt(df) * np.sqrt(wo * wt / (1 - wt))


def estimate_if_present(estimate: float, se: float, df: float, with_treatment, with_outcome):
    """The estimate had the hidden cause been adjusted for, assuming it moved the estimate
    away from zero (so removing it moves the estimate towards zero)."""
    return estimate - math.copysign(1.0, estimate) * shift(se, df, with_treatment, with_outcome)


def std_error_if_present(se: float, df: float, with_treatment, with_outcome):
    wt, wo = np.asarray(with_treatment, float), np.asarray(with_outcome, float)
    return se * np.sqrt((1 - wo) / (1 - wt)) * math.sqrt(df / (df - 1))


def as_strong_as(covariate_r2_treatment: float, covariate_r2_outcome: float,
                 times: float = 1.0) -> tuple[float, float] | None:
    """Shares (with_treatment, with_outcome) of a cause ``times`` as strong as a covariate.

    ``covariate_r2_treatment``: partial R2 of the covariate with the treatment given
    the other covariates; ``covariate_r2_outcome``: with the outcome given treatment
    and the other covariates (Cinelli & Hazlett 2020, section 6.1, the cause taken
    orthogonal to the covariate). None when no such cause can exist with these data.
    """
    r2t, r2o = covariate_r2_treatment, covariate_r2_outcome
    if not (0 <= r2t < 1 and 0 <= r2o < 1) or times <= 0:
        return None
    with_treatment = times * r2t / (1 - r2t)
    if with_treatment >= 1:
        return None
    share = times * r2t ** 2 / ((1 - times * r2t) * (1 - r2t))
    if share >= 1:
        return None
    with_outcome = ((math.sqrt(times) + math.sqrt(share)) / math.sqrt(1 - share)) ** 2 * (r2o / (1 - r2o))
    if with_outcome >= 1:
        return None
    return with_treatment, with_outcome


def equal_strength(with_treatment: float, with_outcome: float) -> float:
    """The strength s (same share on both sides) that moves the estimate as far:
    s^2 / (1 - s) = with_outcome * with_treatment / (1 - with_treatment)."""
    b = with_outcome * with_treatment / (1 - with_treatment)
    return 0.5 * (math.sqrt(b * b + 4 * b) - b)


def _interval(est: float, se: float, df: float, alpha: float) -> list[float]:
    half = stats.t.ppf(1 - alpha / 2, df - 1) * se
    return [est - half, est + half]


def _at(estimate: float, se: float, df: float, wt: float, wo: float, alpha: float) -> dict:
    est = float(estimate_if_present(estimate, se, df, wt, wo))
    err = float(std_error_if_present(se, df, wt, wo))
    low, high = _interval(est, err, df, alpha)
    if math.copysign(1.0, est) != math.copysign(1.0, estimate) or est == 0:
        standing = "sign changes"
    elif low <= 0 <= high:
        standing = "interval reaches zero"
    else:
        standing = "holds"
    return {"estimate_if_present": est, "std_error_if_present": err,
            "interval_if_present": [low, high], "standing": standing}


def interval_path(estimate: float, se: float, df: float, *, top: float, points: int = 80,
                  alpha: float = 0.05) -> list[dict]:
    """The estimate and its interval as a cause of equal strength s on both sides grows
    from 0 to ``top`` (shares of remaining variance)."""
    out = []
    for s in np.linspace(0.0, top, points):
        s = float(min(s, 0.999))
        row = _at(estimate, se, df, s, s, alpha)
        out.append({"strength": s, "estimate": row["estimate_if_present"],
                    "low": row["interval_if_present"][0], "high": row["interval_if_present"][1]})
    return out


def strength_phrase(times: float, variable: str) -> str:
    """'3 times as strong as age' (the room's own words come with each statement)."""
    return f"{times:g} times as strong as {variable}"


def _standing_words(standing: str, sign: str) -> str:
    return {
        "holds": f"stays {sign} and its interval stays away from zero",
        "interval reaches zero": f"stays {sign} but its interval reaches zero",
        "sign changes": "changes sign",
    }[standing]


def room_reading(statements: list[dict], yardsticks: dict[str, tuple[float, float]], *,
                 estimate: float, se: float, df: float, alpha: float = 0.05) -> dict:
    """The room's stated hidden causes read against the estimate.

    ``statements``: ``[{"by", "variable", "times"}]``; ``yardsticks``: for each
    adjustment variable, its (covariate_r2_treatment, covariate_r2_outcome).
    The median and the strongest usable statement (by how far they move the
    estimate; the lower of the two middle ones for an even count) are judged.
    """
    sign = "positive" if estimate > 0 else "negative"
    rows = []
    for s in statements:
        var, times = s.get("variable"), float(s.get("times") or 0)
        row = {"by": s.get("by"), "variable": var, "times": times,
               "phrase": s.get("words") or strength_phrase(times, var), "usable": False, "why": None}
        if var not in yardsticks:
            row["why"] = (f"{var} is not among the adjustment columns of this estimate, "
                          "so it cannot serve as a yardstick")
        else:
            shares = as_strong_as(*yardsticks[var], times=times)
            if shares is None:
                row["why"] = (f"a cause {row['phrase']} would explain all that the covariates leave of "
                              "the treatment or the outcome; the data rule it out")
            else:
                row.update({"usable": True, "r2_with_treatment": shares[0], "r2_with_outcome": shares[1],
                            "equal_strength": equal_strength(*shares)})
                row.update(_at(estimate, se, df, shares[0], shares[1], alpha))
        rows.append(row)
    usable = sorted((r for r in rows if r["usable"]), key=lambda r: r["equal_strength"])
    out = {"statements": rows, "counted": len(usable), "median": None, "strongest": None}
    if not rows:
        out["reading"] = "Nobody in the room has stated how strong a hidden common cause could be."
        return out
    if not usable:
        out["reading"] = "None of the room's statements can be read against this estimate (see each one's reason)."
        return out
    out["median"], out["strongest"] = usable[(len(usable) - 1) // 2], usable[-1]
    base = _interval(estimate, se, df, alpha)
    prefix = ("The interval already includes zero with no hidden cause at all. "
              if base[0] <= 0 <= base[1] else "")

    def said(r: dict) -> str:
        return f"{r['phrase']}, stated by {r['by']}" if r.get("by") else r["phrase"]

    med, top = out["median"], out["strongest"]
    if med is top:
        text = (f"Under the room's one usable statement ({said(top)}) the estimate "
                f"{_standing_words(top['standing'], sign)}.")
    elif med["standing"] == top["standing"]:
        text = (f"Under the room's median statement ({said(med)}) and under its strongest ({said(top)}) "
                f"the estimate {_standing_words(top['standing'], sign)}.")
    else:
        text = (f"Under the room's median statement ({said(med)}) the estimate "
                f"{_standing_words(med['standing'], sign)}; under its strongest ({said(top)}) it "
                f"{_standing_words(top['standing'], sign)}.")
    out["reading"] = prefix + text + " This assumes the hidden cause pushed the estimate away from zero."
    return out


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


def standardized_e_value(estimate: float, low: float, high: float, sd_outcome: float) -> dict:
    """Approximate E-value for a difference in means: RR ~ exp(0.91 d) (VanderWeele & Ding 2017)."""
    d, dl, dh = (v / sd_outcome for v in (estimate, low, high))
    out = e_value(math.exp(0.91 * d), math.exp(0.91 * dl), math.exp(0.91 * dh))
    out["approximation"] = "risk ratio approximated as exp(0.91 x standardized difference)"
    return out


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


def _yardsticks(design) -> dict[str, tuple[float, float]]:
    """For each adjustment variable, its partial R2 with the treatment (given the other
    covariates) and with the outcome (given treatment and the other covariates).

    Every residual sum of squares is a small solve on the centred cross-products of
    [treatment, covariates, outcome], computed in one pass (:mod:`.moments`)."""
    from .moments import accumulate

    x = design.x  # [1, treatment, covariates]; centring stands for the constant
    k = x.shape[1]
    moments = accumulate(np.column_stack([x[:, 1:], design.y]))
    t_at, y_at = 0, k - 1
    covariates = list(range(1, k - 1))
    rss_d = moments.residual_ss(t_at, covariates)
    rss_y = moments.residual_ss(y_at, [t_at, *covariates])
    out = {}
    for var, idx in design.groups.items():
        if var.startswith("_"):
            continue
        drop = {1 + i for i in idx}
        kept = [c for c in covariates if c not in drop]
        rss_d_red = moments.residual_ss(t_at, kept)
        rss_y_red = moments.residual_ss(y_at, [t_at, *kept])
        out[var] = (max(0.0, (rss_d_red - rss_d) / rss_d_red) if rss_d_red > 0 else 0.0,
                    max(0.0, (rss_y_red - rss_y) / rss_y_red) if rss_y_red > 0 else 0.0)
    return out


def regression_sensitivity(design, *, share: float = 1.0, alpha: float = 0.05,
                           ks: tuple[float, ...] = (1.0, 2.0, 3.0),
                           statements: list[dict] | None = None) -> dict:
    """Sensitivity of the OLS estimate of a design: robustness values, a cause k times as
    strong as each covariate, the room's statements and the path of the interval."""
    est, se, df = classical_ols(design.x, design.y)
    t_value = est / se
    yardsticks = _yardsticks(design)
    benchmarks = []
    for var, (r2t, r2o) in yardsticks.items():
        for k in ks:
            shares = as_strong_as(r2t, r2o, times=k)
            if shares is None:
                continue
            at = _at(est, se, df, shares[0], shares[1], alpha)
            benchmarks.append({
                "variable": var, "k": k, "covariate_r2_treatment": r2t, "covariate_r2_outcome": r2o,
                "r2_with_treatment": shares[0], "r2_with_outcome": shares[1],
                "estimate_if_present": at["estimate_if_present"],
                "std_error_if_present": at["std_error_if_present"],
            })
    room = room_reading(statements or [], yardsticks, estimate=est, se=se, df=df, alpha=alpha)
    rv = robustness_value(t_value, df, share=share)
    rv_alpha = robustness_value(t_value, df, share=share, alpha=alpha)
    reach = [rv * 1.25, 0.05] + [r["equal_strength"] * 1.2 for r in room["statements"] if r["usable"]]
    top = float(min(0.95, max(reach)))
    return {
        "method_reference": "Cinelli & Hazlett (2020)",
        "estimate": est, "classical_std_error": se, "df": df,
        "partial_r2_treatment": partial_r2(t_value, df),
        "robustness_value": rv,
        "robustness_value_alpha": rv_alpha,
        "share_removed": share, "alpha": alpha,
        "benchmarks": benchmarks,
        "room": room,
        "path": interval_path(est, se, df, top=top, alpha=alpha),
        "reading": (
            f"To bring the estimate to zero, a hidden common cause would have to account for at least "
            f"{100 * rv:.1f}% of what the adjustment set leaves unexplained in both the treatment and the "
            f"outcome; for its {100 * (1 - alpha):g}% interval to reach zero, {100 * rv_alpha:.1f}%."
        ),
    }
