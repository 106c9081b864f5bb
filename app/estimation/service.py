"""One call per question the analyst asks: estimate, the checks against the data, sensitivity,
and the estimate under each combination of disputed arrows.

Each function takes a :class:`~app.graph.document.Diagram`, a DataFrame and a
``{variable: column}`` mapping (``None`` proposes exact-name matches) and
returns a JSON-ready dict. Bad input raises :class:`~app.estimation.errors.DataError`
or :class:`~app.graph.errors.DiagramError`, both with a message for the analyst.
"""

from __future__ import annotations

import math
from dataclasses import replace
from itertools import product

import numpy as np
import pandas as pd

from app.graph.document import Arrow, Diagram
from app.graph.errors import DiagramError

from . import estimators, validation
from .design import build_design, check_mapping, propose_mapping
from .errors import BadMapping, BadMethod, DataError, NotIdentified
from .implications import test_implications
from .methods import AUTO, find_method
from .planning import Plan, _observed_except, choose_method, make_plan
from .sensitivity import e_value, regression_sensitivity, standardized_e_value

__all__ = ["CAUTIONS", "resolve_mapping", "estimate", "validate", "sensitivity", "disputed_estimates", "MAX_DISPUTES"]

CAUTIONS = [
    "This is an observational estimate: it is causal only if the agreed diagram is right, "
    "in particular if no unmeasured common cause of treatment and outcome is missing from it.",
    "The statistical model's assumptions (listed with the result) must also hold.",
    "It is not a substitute for a randomised trial or for professional judgement; decisions "
    "about people's health or livelihood need both.",
]
MAX_DISPUTES = 6


def resolve_mapping(diagram: Diagram, frame: pd.DataFrame, mapping: dict | None) -> dict[str, str]:
    if mapping is None:
        return propose_mapping(diagram.names, frame.columns)
    return check_mapping(mapping, diagram.names, frame.columns)


def _prepare(diagram: Diagram, frame: pd.DataFrame, mapping: dict | None, method: str | None,
             adjust: list[str] | None):
    mapping = resolve_mapping(diagram, frame, mapping)
    entry = find_method(method)
    strategy = entry.strategy if entry else ("adjustment" if method not in (None, "", AUTO) else None)
    plan = make_plan(diagram, mapping, adjust=adjust, strategy=strategy)
    if not plan.identifiable:
        fixes = "; ".join("{" + ", ".join(g) + "}" for g in plan.fixes)
        raise NotIdentified(
            "with the measured variables, the diagram does not identify the effect of "
            f"{plan.treatment} on {plan.outcome}: {plan.analysis['summary']}"
            + (f" Measuring one of these groups would fix that: {fixes}." if fixes else ""),
            item={"fixes": plan.fixes, "unmeasured": plan.unmeasured},
        )
    design = build_design(
        frame, mapping, treatment=plan.treatment, outcome=plan.outcome,
        adjust=plan.adjustment_set if plan.strategy == "adjustment" else plan.given,
        instruments=[plan.instrument] if plan.instrument else [],
        mediators=plan.mediators,
    )
    chosen = choose_method(plan, t_binary=design.t_binary, y_binary=design.y_binary, method=method)
    return mapping, plan, design, chosen


def prepare(diagram: Diagram, frame: pd.DataFrame, mapping: dict | None, method: str | None = None,
            adjust: list[str] | None = None) -> tuple:
    """Check the inputs of an estimate: (mapping, plan, design, method), or DataError / DiagramError."""
    return _prepare(diagram, frame, mapping, method, adjust)


def _fit(design, method: str) -> dict:
    result = find_method(method).fit(design)
    for key in ("estimate", "std_error"):
        if not math.isfinite(result[key]):
            raise DataError(f"the {method} estimate is not a finite number; the data cannot support it")
    return result


def _contrast(column, t_col: str) -> str:
    """The two values of a two-valued treatment compared, in the data's own words."""
    high = column.treated_level if column is not None and column.treated_level is not None else "1"
    low = column.reference_level if column is not None and column.reference_level is not None else "0"
    if (low, high) == ("0", "1"):
        return f"{t_col} = 1 compared with {t_col} = 0"
    return f"{t_col} = {high!r} (coded 1) compared with {t_col} = {low!r} (coded 0)"


def _describe(plan: Plan, design, method: str, result: dict) -> tuple[str, list[str]]:
    t_col, y_col = plan.mapping[plan.treatment], plan.mapping[plan.outcome]
    unit = _contrast(design.columns.get(plan.treatment), t_col) if design.t_binary else f"one unit more of {t_col}"
    scale = result.get("scale") or ("difference in the mean of " + y_col)
    if plan.strategy == "adjustment":
        how = ("adjusting for " + ", ".join(plan.adjustment_set)) if plan.adjustment_set else "with no adjustment (none is needed)"
    elif plan.strategy == "instrument":
        how = f"using {plan.instrument} as an instrument" + (f", given {', '.join(plan.given)}" if plan.given else "")
    else:
        how = "through the mediator(s) " + ", ".join(plan.mediators) + " (front-door)"
    text = (
        f"Average effect of {plan.treatment} on {plan.outcome}: the {scale} for {unit}, "
        f"estimated by {find_method(method).label.lower()}, {how}, on {design.n} rows "
        f"({design.n_dropped} dropped for missing values)."
    )
    assumptions = {
        "adjustment": [
            "The diagram is right: the adjustment set blocks every back-door path and contains no "
            "descendant of the treatment.",
            "Every level of the adjustment variables has both treated and untreated people (positivity).",
        ],
        "instrument": [
            "The instrument moves the treatment and reaches the outcome only through the treatment.",
            "Nothing unmeasured causes both the instrument and the outcome.",
            "The effect is linear and the same for everyone (or the estimate is a local average).",
        ],
        "front-door": [
            "The mediators carry the whole effect, nothing unmeasured confounds treatment and mediators, "
            "and the treatment blocks every back-door path from mediators to outcome.",
            "The relations are linear (product of coefficients).",
        ],
    }[plan.strategy]
    model = find_method(method).model
    return text, assumptions + [model]


def _valid_sets(plan: Plan) -> list[list[str]]:
    """The sets the analyst may pick from: the optimal one (if measurable) and the minimal ones."""
    sets = [list(s) for s in plan.analysis.get("minimal_adjustment_sets") or []]
    best = plan.analysis.get("optimal_adjustment_set")
    if best is not None and sorted(best) not in [sorted(s) for s in sets]:
        sets.insert(0, list(best))
    if plan.adjustment_set and sorted(plan.adjustment_set) not in [sorted(s) for s in sets]:
        sets.insert(0, list(plan.adjustment_set))
    return sets


def estimate(diagram: Diagram, frame: pd.DataFrame, mapping: dict | None = None, *,
             method: str | None = None, adjust: list[str] | None = None, checks: bool = True,
             correction: str = "holm", alpha: float = 0.05) -> dict:
    """Estimate the effect the diagram identifies, and test its implications."""
    mapping, plan, design, chosen = _prepare(diagram, frame, mapping, method, adjust)
    result = _fit(design, chosen)
    result.pop("_fit", None)
    text, assumptions = _describe(plan, design, chosen, result)
    out = {
        "estimate": result["estimate"],
        "std_error": result["std_error"],
        "ci": result["ci"],
        "ci_level": 0.95,
        "method": chosen,
        "method_label": find_method(chosen).label,
        "strategy": plan.strategy,
        "adjustment_set": plan.adjustment_set if plan.strategy == "adjustment" else None,
        "instrument": plan.instrument,
        "given": plan.given if plan.strategy == "instrument" else None,
        "mediators": plan.mediators or None,
        "treatment": plan.treatment,
        "outcome": plan.outcome,
        "columns": {v: c.to_json() for v, c in design.columns.items()},
        "n_used": design.n,
        "n_dropped": design.n_dropped,
        "mapping": mapping,
        "unmeasured": plan.unmeasured,
        "identification_summary": plan.analysis["summary"],
        "other_valid_sets": _valid_sets(plan),
        "fixes": plan.fixes,
        "notes": plan.notes,
        "explanation": text,
        "assumptions": assumptions,
        "cautions": CAUTIONS,
        "warnings": result.get("warnings", []),
        "details": {k: v for k, v in result.items()
                    if k not in ("estimate", "std_error", "ci", "method", "warnings")},
        "checks": None,
    }
    if design.y_binary and find_method(chosen).linear_outcome:
        out["warnings"].append(
            "the outcome is binary and this method fits it linearly: read the estimate as a difference "
            "in risk" + ("" if design.t_binary else " per unit of treatment (a linear probability model)"))
    if checks:
        out["checks"] = test_implications(
            frame, mapping, plan.analysis["implications"], correction=correction, alpha=alpha,
            total=plan.analysis.get("implications_total"),
        )
    return out


def validate(diagram: Diagram, frame: pd.DataFrame, mapping: dict | None = None, *,
             method: str | None = None, adjust: list[str] | None = None, correction: str = "holm",
             alpha: float = 0.05, resamples: int = validation.RESAMPLES, set_cap: int = validation.SET_CAP,
             seed: int = validation.SEED, implication_checks: dict | None = None,
             prepared: tuple | None = None, progress=None, stop=None) -> dict:
    """Every check that can contradict the diagram, and one verdict (:mod:`.validation`).

    ``prepared`` is what :func:`prepare` returned for the same arguments (so a caller can
    refuse bad input at once and run the checks later)."""
    mapping, plan, design, chosen = prepared or prepare(diagram, frame, mapping, method, adjust)
    if implication_checks is None:
        implication_checks = test_implications(
            frame, mapping, plan.analysis["implications"], correction=correction, alpha=alpha,
            total=plan.analysis.get("implications_total"))
    in_use = plan.adjustment_set if plan.strategy == "adjustment" else None
    sets = _valid_sets(plan)
    if in_use is not None:
        sets = [sorted(in_use)] + [s for s in sets if sorted(s) != sorted(in_use)]
    working = _observed_except(diagram, set(plan.unmeasured))
    return validation.run_checks(
        working, frame, mapping, treatment=plan.treatment, outcome=plan.outcome, adjustment_set=in_use,
        sets=sets, more_sets=bool(plan.analysis.get("more_sets_exist")), method=chosen,
        implication_checks=implication_checks, resamples=resamples, set_cap=set_cap, seed=seed, alpha=alpha,
        progress=progress, stop=stop)


def sensitivity(diagram: Diagram, frame: pd.DataFrame, mapping: dict | None = None, *,
                method: str | None = None, adjust: list[str] | None = None, share: float = 1.0,
                alpha: float = 0.05, statements: list[dict] | None = None) -> dict:
    """How strong a hidden common cause would have to be, and what the room's stated
    ones (``[{"by", "variable", "times"}]``) would do to the estimate."""
    mapping, plan, design, chosen = _prepare(diagram, frame, mapping, method, adjust)
    out: dict = {"method": chosen, "regression": None, "e_value": None, "not_applicable": {}}
    kind = find_method(chosen).sensitivity
    if kind == "partial-r2-of-regression":
        chosen, kind = "regression", "partial-r2"
        out["method"] = chosen
        out["note"] = ("the partial R-squared sensitivity is defined for the regression estimate; "
                       "it is shown for the regression with the same adjustment set")
    if kind == "partial-r2":
        fit = estimators.regression(design)
        out["regression"] = regression_sensitivity(design, share=share, alpha=alpha, statements=statements)
        sd = float(np.std(design.y, ddof=1))
        out["e_value"] = standardized_e_value(fit["estimate"], fit["ci"][0], fit["ci"][1], sd)
    elif kind == "risk-ratio-e-value":
        fit = find_method(chosen).fit(design)
        out["e_value"] = e_value(fit["risk_ratio"], *fit["risk_ratio_ci"])
        out["not_applicable"]["regression"] = (
            "the partial R-squared bounds are identities of a linear regression; this estimate "
            "comes from logistic models, so the E-value of its risk ratio is given instead")
    else:
        why = (f"the {chosen} estimate rests on other assumptions than a missing common cause "
               "of treatment and outcome (see its list)")
        out["not_applicable"] = {"regression": why, "e_value": why}
    if out["e_value"]:
        ev = out["e_value"]
        out["e_value"]["reading"] = (
            f"To explain the estimate away, a hidden common cause would need a risk ratio of at least "
            f"{ev['e_value']:.2f} with the treatment and with the outcome; to bring the interval to no "
            f"effect, {ev['e_value_ci']:.2f}." if ev["e_value_ci"] is not None else ""
        )
    return out


def _option_text(pair: list[str], option) -> str:
    if option is None:
        return f"no {pair[0]}\u2013{pair[1]} arrow"
    return f"{option[0]}\u2192{option[1]}"


def _normalise_disputes(diagram: Diagram, disputed: list) -> list[dict]:
    """Accept arrows ({"from","to"} or pairs: present or absent) or items with options."""
    items = []
    for raw in disputed:
        if isinstance(raw, dict) and "options" in raw:
            pair = [str(v) for v in raw.get("pair") or []]
            options = [None if o is None else [str(o[0]), str(o[1])] for o in raw["options"]]
        else:
            source, target = (raw.get("from"), raw.get("to")) if isinstance(raw, dict) else raw
            pair, options = [str(source), str(target)], [[str(source), str(target)], None]
        for name in pair + [n for o in options if o for n in o]:
            if not diagram.has_variable(name):
                raise BadMapping(f"disputed arrow names {name!r}, which is not a variable of the diagram", item=name)
        if len(options) < 2:
            continue
        items.append({"pair": pair, "options": options})
    return items


def disputed_estimates(diagram: Diagram, frame: pd.DataFrame, mapping: dict | None, disputed: list,
                       *, method: str | None = None) -> dict:
    """The default estimate under each combination of the disputed arrows.

    ``disputed`` lists arrows (each either present or absent) or items
    ``{"pair": [a, b], "options": [None | [from, to], ...]}`` (each option one
    way to settle the dispute between a and b).
    """
    items = _normalise_disputes(diagram, disputed)
    if len(items) > MAX_DISPUTES:
        raise BadMethod(f"{len(items)} disputed arrows are too many to combine; the limit is {MAX_DISPUTES}")
    mapping = resolve_mapping(diagram, frame, mapping)
    from app.graph.document import find_cycle, parse_document

    rows = []
    for choice in product(*[item["options"] for item in items]):
        arrows = list(diagram.arrows)
        for item, option in zip(items, choice):
            a, b = item["pair"]
            arrows = [x for x in arrows if {x.source, x.target} != {a, b}]
            if option is not None:
                arrows.append(Arrow(option[0], option[1]))
        variant = replace(diagram, arrows=tuple(arrows))
        label = ", ".join(_option_text(item["pair"], option) for item, option in zip(items, choice)) or "as agreed"
        as_drawn = all(
            (option is None and not any({x.source, x.target} == set(item["pair"]) for x in diagram.arrows))
            or (option is not None and diagram.has_arrow(*option))
            for item, option in zip(items, choice)
        )
        row = {"label": label, "choice": [{"pair": item["pair"], "arrow": option} for item, option in zip(items, choice)],
               "as_drawn": as_drawn, "estimate": None, "ci": None, "std_error": None, "strategy": None,
               "adjustment_set": None, "instrument": None, "method": None, "problem": None}
        try:
            cycle = find_cycle(variant.names, ((x.source, x.target) for x in variant.arrows))
            if cycle:
                raise DataError("this combination makes a cycle: " + " -> ".join(cycle + cycle[:1]))
            variant = parse_document(variant.to_document())
            res = estimate(variant, frame, mapping, method=method, checks=False)
            row.update({k: res[k] for k in ("estimate", "ci", "std_error", "strategy", "adjustment_set", "instrument", "method")})
        except (DataError, DiagramError) as exc:
            row["problem"] = exc.message
        rows.append(row)
    return {"disputed": items, "rows": rows}


def json_ready(value):
    """Replace NaN and infinities by None and numpy scalars by Python ones, recursively."""
    if isinstance(value, dict):
        return {str(k): json_ready(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [json_ready(v) for v in value]
    if isinstance(value, np.generic):
        value = value.item()
    if isinstance(value, float) and not math.isfinite(value):
        return None
    return value
