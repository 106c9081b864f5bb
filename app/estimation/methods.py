"""The estimators offered, one entry each.

An entry says everything the rest of the program needs to know about a
method: its name (the ``--method`` / ``"method"`` value), its label, the
identification strategy it serves, what it needs of the treatment and the
outcome columns, the functions that fit it and that give only its point
estimate (by name in :mod:`app.estimation.estimators`, imported when first
used so that reading this table stays cheap), the model assumption shown with
the result, and the sensitivity analysis it supports. Planning, the
estimation service, the command line, the HTTP API and the page all read this
table; adding a method is one entry here, one function in ``estimators`` and
one known-answer test.

Sensitivity kinds
-----------------
``partial-r2``      omitted-variable bounds of the regression (Cinelli & Hazlett 2020)
                    and the E-value of the standardized difference
``partial-r2-of-regression``  the same, shown for the regression on the same set
``risk-ratio-e-value``        the E-value of the estimated risk ratio (VanderWeele & Ding 2017)
``None``            the method's assumptions are not about a hidden common cause of
                    treatment and outcome, so neither applies
"""

from __future__ import annotations

import importlib
from dataclasses import dataclass
from typing import Any, Callable

__all__ = ["Method", "METHODS", "AUTO", "AUTO_LABEL", "find_method", "default_method", "method_names",
           "page_methods"]

AUTO = "auto"
AUTO_LABEL = "Chosen from the diagram and the data"


@dataclass(frozen=True)
class Method:
    name: str
    label: str
    strategy: str                 # "adjustment", "instrument" or "front-door"
    treatment: str                # "binary" (0/1) or "any"
    outcome: str                  # "binary" (0/1) or "any"
    fit_name: str                 # function in estimators: Design -> result dict
    point_name: str               # function in estimators: Design -> float
    model: str                    # the statistical model's assumption, in words
    sensitivity: str | None
    linear_outcome: bool = True   # fits the outcome linearly (a binary outcome reads as a risk difference)
    hint: str = ""                # what to use instead when a need is not met

    @property
    def fit(self) -> Callable[[Any], dict]:
        return getattr(importlib.import_module("app.estimation.estimators"), self.fit_name)

    @property
    def point(self) -> Callable[[Any], float]:
        return getattr(importlib.import_module("app.estimation.estimators"), self.point_name)

    def unmet_needs(self, *, t_binary: bool, y_binary: bool) -> list[str]:
        """What the columns lack for this method, in words (empty when it applies)."""
        out = []
        if self.treatment == "binary" and not t_binary:
            out.append("a binary (0/1) treatment column")
        if self.outcome == "binary" and not y_binary:
            out.append("a binary (0/1) outcome" + (f"; use {self.hint!r}" if self.hint else ""))
        return out

    def to_json(self) -> dict:
        return {"name": self.name, "label": self.label, "strategy": self.strategy,
                "treatment": self.treatment, "outcome": self.outcome, "model": self.model,
                "sensitivity": self.sensitivity}


METHODS: tuple[Method, ...] = (
    Method("regression", "Linear regression with robust standard errors", "adjustment", "any", "any",
           "regression", "point_regression",
           "The outcome is linear in the treatment and the adjustment columns; errors may be "
           "heteroskedastic (robust HC1 standard errors).",
           "partial-r2"),
    Method("standardization", "Standardization over the sample (outcome model per arm)", "adjustment",
           "binary", "binary", "standardization", "point_standardization",
           "A logistic model of the outcome within each arm is correctly specified.",
           "risk-ratio-e-value", linear_outcome=False, hint="regression"),
    Method("weighting", "Inverse probability weighting", "adjustment", "binary", "any",
           "weighting", "point_weighting",
           "The logistic model of the treatment (propensity score) is correctly specified.",
           "partial-r2-of-regression"),
    Method("doubly-robust", "Augmented inverse probability weighting (doubly robust)", "adjustment",
           "binary", "any", "doubly_robust", "point_doubly_robust",
           "Either the propensity model or the linear outcome model per arm is correctly specified.",
           "partial-r2-of-regression"),
    Method("two-stage", "Two-stage least squares with an instrument", "instrument", "any", "any",
           "two_stage", "point_two_stage",
           "Linear first and second stage; robust standard errors.", None),
    Method("front-door", "Front-door product of coefficients", "front-door", "any", "any",
           "front_door", "point_front_door",
           "Linear models for mediator and outcome; bootstrap interval.", None),
)

_BY_NAME = {m.name: m for m in METHODS}


def method_names() -> list[str]:
    return [m.name for m in METHODS]


def find_method(name: str | None) -> Method | None:
    """The entry called ``name``, or None (also for ``auto`` and empty)."""
    return _BY_NAME.get(name or "")


def default_method(strategy: str, *, t_binary: bool, y_binary: bool) -> Method:
    """The first entry serving ``strategy`` whose needs the columns meet, preferring a
    method that models a binary outcome as binary."""
    fitting = [m for m in METHODS if m.strategy == strategy
               and not m.unmet_needs(t_binary=t_binary, y_binary=y_binary)]
    if y_binary:
        fitting.sort(key=lambda m: m.linear_outcome)
    return fitting[0]


def page_methods() -> list[dict]:
    """The menu the page offers: ``auto`` first, then every entry."""
    return [{"name": AUTO, "label": AUTO_LABEL, "strategy": None, "treatment": "any", "outcome": "any",
             "model": None, "sensitivity": None}] + [m.to_json() for m in METHODS]
