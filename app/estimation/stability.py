"""Stability checks: re-estimate under controlled disturbances.

Four checks, each reported as the original estimate, the new (average)
estimate, a p-value and a verdict:

``resampled-rows``
    Re-estimate on bootstrap resamples of the rows. The p-value is the
    two-sided share of resample estimates beyond the original; the check
    passes when the resamples centre on the original.
``split-halves``
    Re-estimate on random halves of the rows (without replacement). Same
    p-value and verdict rule; a large spread warns that a few rows drive it.
``shuffled-treatment``
    Re-estimate with the treatment column randomly permuted, which breaks any
    effect. The new estimate should be near zero; the p-value is the
    permutation p-value of the original estimate (the share of shuffled
    estimates at least as far from zero). The check passes when the shuffled
    estimates centre on zero.
``invented-common-cause``
    Re-estimate with an extra simulated covariate, drawn independently of
    everything, added to the adjustment. A correct adjustment should not
    move; the p-value compares the original with the spread of the new ones.
"""

from __future__ import annotations

from typing import Callable

import numpy as np

from .design import Design

__all__ = ["run_stability", "CHECK_NAMES"]

CHECK_NAMES = {
    "resampled-rows": "Resampled rows",
    "split-halves": "Split halves",
    "shuffled-treatment": "Shuffled treatment",
    "invented-common-cause": "Invented common cause",
}


def _two_sided_share(draws: np.ndarray, value: float) -> float:
    below = (np.sum(draws <= value) + 1) / (len(draws) + 1)
    above = (np.sum(draws >= value) + 1) / (len(draws) + 1)
    return float(min(1.0, 2 * min(below, above)))


def _safe(point: Callable[[Design], float], design: Design) -> float | None:
    try:
        value = point(design)
    except Exception:
        return None
    return value if np.isfinite(value) else None


def _collect(point, designs) -> np.ndarray:
    out = [v for v in (_safe(point, d) for d in designs) if v is not None]
    return np.array(out, dtype=float)


def run_stability(design: Design, point: Callable[[Design], float], original: float, *,
                  repeats: int = 100, seed: int = 2024, alpha: float = 0.05,
                  checks: tuple[str, ...] = tuple(CHECK_NAMES)) -> list[dict]:
    rng = np.random.default_rng(seed)
    n = design.n
    out = []
    for name in checks:
        if name == "resampled-rows":
            draws = _collect(point, (design.take(rng.integers(0, n, n)) for _ in range(repeats)))
            p = _two_sided_share(draws, original) if draws.size else None
            passed = p is not None and p >= alpha
            detail = "bootstrap resamples of the rows; they should centre on the original estimate"
        elif name == "split-halves":
            draws = _collect(point, (design.take(np.sort(rng.permutation(n)[: n // 2])) for _ in range(repeats)))
            p = _two_sided_share(draws, original) if draws.size else None
            passed = p is not None and p >= alpha
            detail = "random halves of the rows; a large spread means a few rows drive the estimate"
        elif name == "shuffled-treatment":
            draws = _collect(point, (design.with_treatment(rng.permutation(design.t)) for _ in range(repeats)))
            if draws.size:
                p = float((np.sum(np.abs(draws) >= abs(original)) + 1) / (len(draws) + 1))
                centre_se = draws.std(ddof=1) / np.sqrt(len(draws)) if len(draws) > 1 else 0.0
                passed = abs(draws.mean()) <= 3 * centre_se + 1e-12
            else:
                p, passed = None, False
            detail = "treatment randomly permuted; the estimate should vanish"
        elif name == "invented-common-cause":
            draws = _collect(point, (design.with_covariate(rng.standard_normal(n), "_invented") for _ in range(repeats)))
            p = _two_sided_share(draws, original) if draws.size else None
            passed = p is not None and p >= alpha
            detail = "an independent simulated covariate added to the adjustment; the estimate should not move"
        else:
            raise ValueError(f"unknown stability check {name!r}")
        out.append({
            "check": name,
            "label": CHECK_NAMES[name],
            "original": float(original),
            "new": float(draws.mean()) if draws.size else None,
            "spread": float(draws.std(ddof=1)) if draws.size > 1 else None,
            "runs": int(draws.size),
            "p_value": p,
            "verdict": "passes" if passed else "warns",
            "detail": detail,
        })
    return out
