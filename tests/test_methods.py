"""The estimator registry: every reader (planning, the command line, the page's
menu) takes the same entries, the default rule and the refusals follow each
entry's needs, and every entry's point function gives its fit's estimate.

The known answers of each method (statsmodels, linearmodels, textbook
examples) are in test_estimation_reference.py; the data here is simulated and
only checks that the entries are wired to the right functions."""

from __future__ import annotations

import argparse

import numpy as np
import pandas as pd
import pytest

from app.estimation import cli, methods
from app.estimation.design import build_design
from app.estimation.errors import BadMethod
from app.estimation.planning import choose_method, make_plan
from app.graph.document import parse_document

CONFOUNDED = {"variables": ["c", "t", "y"], "arrows": [["c", "t"], ["c", "y"], ["t", "y"]],
              "treatment": "t", "outcome": "y"}
INSTRUMENT = {"variables": ["z", "t", "y", {"name": "u", "latent": True}],
              "arrows": [["z", "t"], ["t", "y"], ["u", "t"], ["u", "y"]], "treatment": "t", "outcome": "y"}
FRONT_DOOR = {"variables": ["t", "m", "y", {"name": "u", "latent": True}],
              "arrows": [["t", "m"], ["m", "y"], ["u", "t"], ["u", "y"]], "treatment": "t", "outcome": "y"}
DIAGRAMS = {"adjustment": CONFOUNDED, "instrument": INSTRUMENT, "front-door": FRONT_DOOR}


def _frame(binary_outcome: bool, seed: int = 5, n: int = 1500) -> pd.DataFrame:
    """Simulated: c confounds, z moves t only, m carries t's effect."""
    rng = np.random.default_rng(seed)
    c, z = rng.normal(size=n), rng.normal(size=n)
    t = rng.binomial(1, 1 / (1 + np.exp(-(c + z))))
    m = 0.7 * t + rng.normal(size=n)
    latent = m + c
    y = rng.binomial(1, 1 / (1 + np.exp(-latent))) if binary_outcome else latent + rng.normal(size=n)
    return pd.DataFrame({"c": c, "z": z, "t": t, "m": m, "y": y})


def _plan_and_design(strategy: str, binary_outcome: bool):
    diagram = parse_document(DIAGRAMS[strategy])
    frame = _frame(binary_outcome)
    mapping = {v: v for v in diagram.names if not diagram.variable(v).latent}
    plan = make_plan(diagram, mapping)
    design = build_design(frame, mapping, treatment="t", outcome="y",
                          adjust=plan.adjustment_set if plan.strategy == "adjustment" else plan.given,
                          instruments=[plan.instrument] if plan.instrument else [], mediators=plan.mediators)
    return plan, design


@pytest.mark.parametrize("entry", methods.METHODS, ids=lambda m: m.name)
def test_point_function_gives_the_fit_estimate(entry):
    plan, design = _plan_and_design(entry.strategy, binary_outcome=entry.outcome == "binary")
    assert plan.strategy == entry.strategy
    fitted = entry.fit(design)
    assert fitted["method"] == entry.name
    assert entry.point(design) == pytest.approx(fitted["estimate"], rel=1e-6, abs=1e-9)


def test_command_line_and_page_offer_the_registry():
    parser = argparse.ArgumentParser()
    sub = cli.add_parser(parser.add_subparsers())
    method_action = next(a for a in sub._actions if a.dest == "method")
    names = [m.name for m in methods.METHODS]
    assert method_action.choices == ["auto", *names]
    assert [m["name"] for m in methods.page_methods()] == ["auto", *names]
    assert {m["strategy"] for m in methods.page_methods()[1:]} == set(DIAGRAMS)


@pytest.mark.parametrize("strategy, binary_outcome, expected", [
    ("adjustment", False, "regression"),
    ("adjustment", True, "standardization"),
    ("instrument", False, "two-stage"),
    ("front-door", False, "front-door"),
])
def test_default_method_follows_strategy_and_columns(strategy, binary_outcome, expected):
    plan, design = _plan_and_design(strategy, binary_outcome)
    assert choose_method(plan, t_binary=design.t_binary, y_binary=design.y_binary, method=None) == expected


def test_default_for_continuous_treatment_and_binary_outcome_is_regression():
    plan, _ = _plan_and_design("adjustment", True)
    assert choose_method(plan, t_binary=False, y_binary=True, method="auto") == "regression"


@pytest.mark.parametrize("method, t_binary, y_binary, message", [
    ("weighting", False, False, "method 'weighting' needs a binary (0/1) treatment column"),
    ("doubly-robust", False, True, "method 'doubly-robust' needs a binary (0/1) treatment column"),
    ("standardization", True, False, "method 'standardization' needs a binary (0/1) outcome; use 'regression'"),
    ("two-stage", True, False, "method 'two-stage' needs the instrument strategy, but this estimate uses adjustment"),
    ("lasso", True, False, "unknown method 'lasso'; choose one of: auto, regression, standardization"),
])
def test_unmet_needs_are_refused_by_name(method, t_binary, y_binary, message):
    plan, _ = _plan_and_design("adjustment", False)
    with pytest.raises(BadMethod) as caught:
        choose_method(plan, t_binary=t_binary, y_binary=y_binary, method=method)
    assert caught.value.message.startswith(message)
