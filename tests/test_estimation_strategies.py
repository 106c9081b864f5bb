"""Strategy and method choice end to end through the service, on simulated
data with a known effect (the structural models are in each test)."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from app.estimation import service
from app.graph.document import parse_document


def test_front_door_is_used_when_the_confounder_is_unmeasured():
    """T -> M -> Y with U -> T, U -> Y (U unmeasured): Pearl's front-door case; truth 0.8 x 1.5."""
    rng = np.random.default_rng(31)
    n = 4000
    u = rng.normal(size=n)
    t = u + rng.normal(size=n)
    m = 0.8 * t + rng.normal(size=n)
    y = 1.5 * m + 2 * u + rng.normal(size=n)
    frame = pd.DataFrame({"t": t, "m": m, "y": y})
    diagram = parse_document({"variables": ["t", "m", "y", {"name": "u", "latent": True}],
                              "arrows": [["t", "m"], ["m", "y"], ["u", "t"], ["u", "y"]],
                              "treatment": "t", "outcome": "y"})
    result = service.estimate(diagram, frame, checks=False)
    assert result["strategy"] == "front-door" and result["mediators"] == ["m"]
    assert result["ci"][0] < 1.2 < result["ci"][1]
    assert result["fixes"] == [["u"]]


def _binary_frame(seed=41, n=6000):
    rng = np.random.default_rng(seed)
    c = rng.normal(size=n)
    t = rng.binomial(1, 1 / (1 + np.exp(-c)))
    logit0 = -1 + 0.8 * c
    p0, p1 = 1 / (1 + np.exp(-logit0)), 1 / (1 + np.exp(-(logit0 + 1.0)))
    y = np.where(t == 1, rng.binomial(1, p1), rng.binomial(1, p0))
    truth_rd = float(np.mean(p1 - p0))  # sample average risk difference from the model
    return pd.DataFrame({"c": c, "t": t, "y": y}), truth_rd


def test_binary_outcome_defaults_to_standardization_and_reports_ratios():
    frame, truth = _binary_frame()
    diagram = parse_document({"variables": ["c", "t", "y"], "arrows": [["c", "t"], ["c", "y"], ["t", "y"]],
                              "treatment": "t", "outcome": "y"})
    result = service.estimate(diagram, frame, checks=False)
    assert result["method"] == "standardization"
    assert result["ci"][0] < truth < result["ci"][1]
    details = result["details"]
    assert details["risk_ratio"] == pytest.approx(details["risk_treated"] / details["risk_untreated"])
    assert details["risk_ratio_ci"][0] < details["risk_ratio"] < details["risk_ratio_ci"][1]
    sens = service.sensitivity(diagram, frame)
    assert sens["regression"] is None and sens["e_value"]["e_value"] > 1


def test_instrument_with_conditioning_set_is_passed_as_controls():
    """Z -> T -> Y, W -> Z, W -> Y, U -> T, U -> Y (U unmeasured): Z is an instrument given W."""
    rng = np.random.default_rng(52)
    n = 5000
    w, u = rng.normal(size=n), rng.normal(size=n)
    z = w + rng.normal(size=n)
    t = z + u + rng.normal(size=n)
    y = 2.0 * t + 1.5 * w + 2 * u + rng.normal(size=n)
    frame = pd.DataFrame({"w": w, "z": z, "t": t, "y": y})
    diagram = parse_document({"variables": ["w", "z", "t", "y", {"name": "u", "latent": True}],
                              "arrows": [["w", "z"], ["w", "y"], ["z", "t"], ["t", "y"], ["u", "t"], ["u", "y"]],
                              "treatment": "t", "outcome": "y"})
    result = service.estimate(diagram, frame, checks=False)
    assert result["strategy"] == "instrument" and result["instrument"] == "z" and result["given"] == ["w"]
    assert result["ci"][0] < 2.0 < result["ci"][1]


def test_standardization_point_function_matches_the_full_estimate():
    from app.estimation import estimators
    from app.estimation.design import build_design

    frame, _ = _binary_frame(seed=43, n=3000)
    design = build_design(frame, {c: c for c in frame.columns}, treatment="t", outcome="y", adjust=["c"])
    full = estimators.standardization(design, resamples=20)
    assert estimators.point_standardization(design) == pytest.approx(full["estimate"], rel=1e-7)
