"""Choose what to estimate: identification with the unmeasured variables
latent, the adjustment set (or instrument, or front-door mediators), and the
method that fits the column types.

When nothing measured identifies the effect, :func:`find_fixing_groups`
searches the smallest groups of unmeasured variables that would identify it
if they were measured.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from itertools import combinations

from app.graph.document import Diagram
from app.graph.identification import analyze

from .errors import BadMapping, BadMethod
from .methods import AUTO, default_method, find_method, method_names

__all__ = ["Plan", "make_plan", "find_fixing_groups", "choose_method"]


@dataclass
class Plan:
    treatment: str
    outcome: str
    mapping: dict[str, str]
    unmeasured: list[str]
    analysis: dict
    strategy: str | None
    adjustment_set: list[str] = field(default_factory=list)
    instrument: str | None = None
    given: list[str] = field(default_factory=list)
    mediators: list[str] = field(default_factory=list)
    fixes: list[list[str]] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)

    @property
    def identifiable(self) -> bool:
        return self.strategy is not None


def _question(diagram: Diagram) -> tuple[str, str]:
    if len(diagram.treatment) != 1 or len(diagram.outcome) != 1:
        raise BadMapping(
            "estimation needs exactly one treatment and one outcome in the diagram "
            f"(it has {len(diagram.treatment)} treatment(s) and {len(diagram.outcome)} outcome(s))"
        )
    return diagram.treatment[0], diagram.outcome[0]


def find_fixing_groups(diagram: Diagram, unmeasured: list[str], *, max_size: int = 3,
                       budget: int = 300) -> list[list[str]]:
    """Smallest groups of unmeasured variables whose measurement identifies the effect."""
    calls = 0
    for size in range(1, min(max_size, len(unmeasured)) + 1):
        found = []
        for group in combinations(sorted(unmeasured), size):
            calls += 1
            if calls > budget:
                return found
            rest = set(unmeasured) - set(group)
            result = analyze(_observed_except(diagram, rest))
            if result["identifiable"] and result["strategy"] == "adjustment":
                found.append(list(group))
        if found:
            return found
    return []


def _observed_except(diagram: Diagram, hidden: set[str]) -> Diagram:
    """All variables measured except ``hidden`` (so a latent node that now has a column counts)."""
    from dataclasses import replace

    variables = tuple(replace(v, latent=v.name in hidden) for v in diagram.variables)
    return replace(diagram, variables=variables)


def make_plan(diagram: Diagram, mapping: dict[str, str], *, adjust: list[str] | None = None,
              strategy: str | None = None) -> Plan:
    """Identify the effect over the mapped variables and pick what to estimate."""
    treatment, outcome = _question(diagram)
    for role, var in (("treatment", treatment), ("outcome", outcome)):
        if var not in mapping:
            raise BadMapping(f"the {role} {var!r} has no column; map it before estimating", item=var)
    unmeasured = sorted(set(diagram.names) - set(mapping))
    working = _observed_except(diagram, set(unmeasured))
    analysis = analyze(working, adjust=adjust) if adjust is not None else analyze(working)
    plan = Plan(treatment, outcome, dict(mapping), unmeasured, analysis, None)

    wanted = strategy or analysis["strategy"]
    if adjust is not None:
        check = analysis["adjustment_check"]
        if not check["valid"]:
            raise BadMethod(
                "the chosen adjustment set {" + ", ".join(check["set"]) + "} does not identify the effect: "
                + "; ".join(check["reasons"]),
                item=check["set"],
            )
        missing = [v for v in adjust if v not in mapping]
        if missing:
            raise BadMapping(f"adjustment variable(s) {', '.join(missing)} have no column", item=missing)
        plan.strategy, plan.adjustment_set = "adjustment", sorted(adjust)
    elif wanted == "adjustment" and analysis["strategy"] == "adjustment":
        plan.strategy = "adjustment"
        if analysis["optimal_adjustment_set"] is not None:
            plan.adjustment_set = list(analysis["optimal_adjustment_set"])
            plan.notes.append("adjusting for the optimal set (smallest variance among valid sets)")
        elif analysis.get("best_minimal_set") is not None:
            plan.adjustment_set = list(analysis["best_minimal_set"])
            plan.notes.append(analysis["optimal_note"])
            plan.notes.append("adjusting for the minimal set with the smallest variance among the minimal sets")
        else:
            plan.adjustment_set = list(analysis["minimal_adjustment_sets"][0])
            if analysis.get("optimal_note"):
                plan.notes.append(analysis["optimal_note"])
    elif wanted == "front-door" and analysis["front_door_sets"]:
        plan.strategy, plan.mediators = "front-door", list(analysis["front_door_sets"][0])
    elif wanted == "instrument" and analysis["instruments"]:
        first = analysis["instruments"][0]
        plan.strategy, plan.instrument, plan.given = "instrument", first["instrument"], list(first["given"])
    elif wanted is not None:
        raise BadMethod(f"the diagram offers no {wanted} strategy for this question", item=wanted)

    if analysis["strategy"] != "adjustment" and unmeasured:
        plan.fixes = find_fixing_groups(diagram, unmeasured)
    return plan


def choose_method(plan: Plan, *, t_binary: bool, y_binary: bool, method: str | None) -> str:
    """The default method for the plan and the column types, or check the requested one."""
    if method in (None, "", AUTO):
        return default_method(plan.strategy, t_binary=t_binary, y_binary=y_binary).name
    entry = find_method(method)
    if entry is None:
        raise BadMethod(f"unknown method {method!r}; choose one of: {AUTO}, {', '.join(method_names())}", item=method)
    if entry.strategy != plan.strategy:
        raise BadMethod(f"method {method!r} needs the {entry.strategy} strategy, but this estimate uses {plan.strategy}",
                        item=method)
    unmet = entry.unmet_needs(t_binary=t_binary, y_binary=y_binary)
    if unmet:
        raise BadMethod(f"method {method!r} needs {unmet[0]}", item=method)
    return method
