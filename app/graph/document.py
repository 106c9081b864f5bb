"""The graph document: Arrowmoot's own versioned JSON format for a causal diagram.

A document looks like this (every field but ``name``, ``from`` and ``to`` is
optional)::

    {"format": "arrowmoot-graph", "version": 1,
     "variables": [{"name": "age", "label": "Age in years", "latent": false,
                    "x": 120, "y": 80, "description": "..."}],
     "arrows": [{"from": "age", "to": "fitness"}],
     "treatment": ["bike_lease"], "outcome": ["sick_days"]}

``treatment`` and ``outcome`` may also be bare strings. :func:`parse_document`
validates everything up front and raises a :class:`~app.graph.errors.DiagramError`
whose message names the offending item; :meth:`Diagram.to_document` writes the
canonical form back.
"""

from __future__ import annotations

import math
import unicodedata
from dataclasses import dataclass, field, replace
from typing import Any, Iterable, Mapping

import networkx as nx

from .errors import (
    BadQuestion,
    DiagramHasCycle,
    DiagramTooLarge,
    DuplicateArrow,
    DuplicateVariable,
    InvalidName,
    MalformedDocument,
    SelfLoop,
    UnknownVariable,
)

__all__ = [
    "FORMAT_NAME",
    "FORMAT_VERSION",
    "MAX_NAME_LENGTH",
    "MAX_VARIABLES",
    "MAX_ARROWS",
    "Variable",
    "Arrow",
    "Diagram",
    "parse_document",
    "check_name",
    "find_cycle",
]

FORMAT_NAME = "arrowmoot-graph"
FORMAT_VERSION = 1
MAX_NAME_LENGTH = 64
MAX_LABEL_LENGTH = 200
MAX_DESCRIPTION_LENGTH = 2000
MAX_VARIABLES = 500
MAX_ARROWS = 5000


@dataclass(frozen=True)
class Variable:
    name: str
    label: str | None = None
    description: str | None = None
    latent: bool = False
    x: float | None = None
    y: float | None = None

    def to_document(self) -> dict[str, Any]:
        out: dict[str, Any] = {"name": self.name}
        if self.label is not None:
            out["label"] = self.label
        if self.description is not None:
            out["description"] = self.description
        out["latent"] = self.latent
        if self.x is not None:
            out["x"] = self.x
        if self.y is not None:
            out["y"] = self.y
        return out


@dataclass(frozen=True)
class Arrow:
    source: str
    target: str

    def to_document(self) -> dict[str, str]:
        return {"from": self.source, "to": self.target}

    def __str__(self) -> str:
        return f"{self.source} -> {self.target}"


@dataclass(frozen=True)
class Diagram:
    """A validated, immutable causal diagram with its question."""

    variables: tuple[Variable, ...] = ()
    arrows: tuple[Arrow, ...] = ()
    treatment: tuple[str, ...] = ()
    outcome: tuple[str, ...] = ()
    _index: dict[str, Variable] = field(init=False, repr=False, compare=False)

    def __post_init__(self) -> None:
        object.__setattr__(self, "_index", {v.name: v for v in self.variables})

    # -- lookups ---------------------------------------------------------
    @property
    def names(self) -> list[str]:
        return [v.name for v in self.variables]

    def variable(self, name: str) -> Variable:
        try:
            return self._index[name]
        except KeyError:
            raise UnknownVariable(f"unknown variable {name!r}", item=name) from None

    def has_variable(self, name: str) -> bool:
        return name in self._index

    @property
    def latent(self) -> frozenset[str]:
        return frozenset(v.name for v in self.variables if v.latent)

    @property
    def observed(self) -> frozenset[str]:
        return frozenset(v.name for v in self.variables if not v.latent)

    def has_arrow(self, source: str, target: str) -> bool:
        return Arrow(source, target) in set(self.arrows)

    def to_networkx(self) -> nx.DiGraph:
        graph = nx.DiGraph()
        for v in self.variables:
            graph.add_node(v.name, latent=v.latent)
        graph.add_edges_from((a.source, a.target) for a in self.arrows)
        return graph

    # -- changes (each returns a new, re-validated diagram) ---------------
    def with_question(self, treatment: Iterable[str], outcome: Iterable[str]) -> "Diagram":
        return _validated(replace(self, treatment=tuple(treatment), outcome=tuple(outcome)))

    def with_latent(self, names: Iterable[str]) -> "Diagram":
        """The same diagram with the given variables marked unmeasured."""
        hide = set(names)
        for name in hide:
            self.variable(name)
        variables = tuple(replace(v, latent=True) if v.name in hide else v for v in self.variables)
        return replace(self, variables=variables)

    def to_document(self) -> dict[str, Any]:
        return {
            "format": FORMAT_NAME,
            "version": FORMAT_VERSION,
            "variables": [v.to_document() for v in self.variables],
            "arrows": [a.to_document() for a in self.arrows],
            "treatment": list(self.treatment),
            "outcome": list(self.outcome),
        }


def check_name(name: object, *, what: str = "variable name") -> str:
    """Return ``name`` if it is a usable variable name, else raise InvalidName."""
    if not isinstance(name, str):
        raise InvalidName(f"{what} must be a string, got {_show(name)}", item=name)
    if not name.strip():
        raise InvalidName(f"{what} is empty", item=name)
    if len(name) > MAX_NAME_LENGTH:
        raise InvalidName(
            f"{what} {name[:20]!r}... is {len(name)} characters long; "
            f"the limit is {MAX_NAME_LENGTH}",
            item=name[:MAX_NAME_LENGTH],
        )
    bad = [ch for ch in name if unicodedata.category(ch) in ("Cc", "Cf", "Zl", "Zp")]
    if bad:
        raise InvalidName(
            f"{what} {name!r} holds a control character ({ascii(bad[0])}); "
            "use letters, digits, spaces and punctuation",
            item=name,
        )
    return name


def find_cycle(names: Iterable[str], arrows: Iterable[tuple[str, str]]) -> list[str] | None:
    """Return the nodes of one directed cycle in order, or None if acyclic.

    Kahn's algorithm peels off nodes without incoming arrows in O(n + m);
    only when something is left (a cycle exists) is one cycle traced.
    """
    children: dict[str, list[str]] = {n: [] for n in names}
    indegree = dict.fromkeys(children, 0)
    for u, v in arrows:
        children[u].append(v)
        indegree[v] += 1
    queue = [n for n, d in indegree.items() if d == 0]
    removed = 0
    while queue:
        u = queue.pop()
        removed += 1
        for v in children[u]:
            indegree[v] -= 1
            if indegree[v] == 0:
                queue.append(v)
    if removed == len(children):
        return None
    # Every remaining node has a remaining parent: walk backwards until a repeat.
    remaining = {n for n, d in indegree.items() if d > 0}
    parent_of: dict[str, str] = {}
    for u in remaining:
        for v in children[u]:
            if v in remaining:
                parent_of.setdefault(v, u)
    node = min(remaining)
    seen: dict[str, int] = {}
    walk: list[str] = []
    while node not in seen:
        seen[node] = len(walk)
        walk.append(node)
        node = parent_of[node]
    cycle = walk[seen[node]:]
    cycle.reverse()
    return cycle


def parse_document(data: object) -> Diagram:
    """Validate a graph document (a parsed JSON value) and build a Diagram."""
    if not isinstance(data, Mapping):
        raise MalformedDocument(
            f"a graph document must be a JSON object, got {_show(data)}"
        )
    fmt = data.get("format", FORMAT_NAME)
    if fmt != FORMAT_NAME:
        raise MalformedDocument(f"'format' must be {FORMAT_NAME!r}, got {_show(fmt)}")
    version = data.get("version", FORMAT_VERSION)
    if version != FORMAT_VERSION:
        raise MalformedDocument(
            f"this is graph document version {_show(version)}; "
            f"this Arrowmoot reads version {FORMAT_VERSION}"
        )
    raw_variables = data.get("variables", [])
    raw_arrows = data.get("arrows", [])
    if not isinstance(raw_variables, list):
        raise MalformedDocument(f"'variables' must be a list, got {_show(raw_variables)}")
    if not isinstance(raw_arrows, list):
        raise MalformedDocument(f"'arrows' must be a list, got {_show(raw_arrows)}")
    if len(raw_variables) > MAX_VARIABLES:
        raise DiagramTooLarge(
            f"the diagram has {len(raw_variables)} variables; the limit is {MAX_VARIABLES}"
        )
    if len(raw_arrows) > MAX_ARROWS:
        raise DiagramTooLarge(
            f"the diagram has {len(raw_arrows)} arrows; the limit is {MAX_ARROWS}"
        )

    variables = tuple(_parse_variable(raw, i) for i, raw in enumerate(raw_variables))
    arrows = tuple(_parse_arrow(raw, i) for i, raw in enumerate(raw_arrows))
    diagram = Diagram(
        variables=variables,
        arrows=arrows,
        treatment=_parse_question_part(data.get("treatment"), "treatment"),
        outcome=_parse_question_part(data.get("outcome"), "outcome"),
    )
    return _validated(diagram)


def _validated(diagram: Diagram) -> Diagram:
    seen: set[str] = set()
    for v in diagram.variables:
        if v.name in seen:
            raise DuplicateVariable(f"variable {v.name!r} is listed twice", item=v.name)
        seen.add(v.name)
    arrows_seen: set[Arrow] = set()
    for a in diagram.arrows:
        for end in (a.source, a.target):
            if end not in seen:
                raise UnknownVariable(
                    f"arrow {a} refers to unknown variable {end!r}", item=a.to_document()
                )
        if a.source == a.target:
            raise SelfLoop(
                f"arrow {a} points from a variable to itself", item=a.to_document()
            )
        if a in arrows_seen:
            raise DuplicateArrow(f"arrow {a} is listed twice", item=a.to_document())
        arrows_seen.add(a)
    cycle = find_cycle(seen, ((a.source, a.target) for a in diagram.arrows))
    if cycle:
        raise DiagramHasCycle(cycle)
    for part in ("treatment", "outcome"):
        for name in getattr(diagram, part):
            if name not in seen:
                raise BadQuestion(f"{part} {name!r} is not a variable of the diagram", item=name)
    overlap = sorted(set(diagram.treatment) & set(diagram.outcome))
    if overlap:
        raise BadQuestion(
            f"{', '.join(map(repr, overlap))} cannot be both treatment and outcome",
            item=overlap,
        )
    return diagram


def _parse_variable(raw: object, index: int) -> Variable:
    where = f"variable #{index + 1}"
    if isinstance(raw, str):
        return Variable(name=check_name(raw, what=f"name of {where}"))
    if not isinstance(raw, Mapping):
        raise MalformedDocument(f"{where} must be an object with a 'name', got {_show(raw)}")
    if "name" not in raw:
        raise MalformedDocument(f"{where} has no 'name'")
    name = check_name(raw["name"], what=f"name of {where}")
    where = f"variable {name!r}"
    latent = raw.get("latent", False)
    if not isinstance(latent, bool):
        raise MalformedDocument(f"'latent' of {where} must be true or false, got {_show(latent)}")
    return Variable(
        name=name,
        label=_optional_text(raw.get("label"), f"'label' of {where}", MAX_LABEL_LENGTH),
        description=_optional_text(
            raw.get("description"), f"'description' of {where}", MAX_DESCRIPTION_LENGTH,
            allow_newlines=True,
        ),
        latent=latent,
        x=_optional_number(raw.get("x"), f"'x' of {where}"),
        y=_optional_number(raw.get("y"), f"'y' of {where}"),
    )


def _parse_arrow(raw: object, index: int) -> Arrow:
    where = f"arrow #{index + 1}"
    if isinstance(raw, (list, tuple)) and len(raw) == 2:
        source, target = raw
    elif isinstance(raw, Mapping):
        if "from" not in raw or "to" not in raw:
            raise MalformedDocument(f"{where} needs both 'from' and 'to'")
        source, target = raw["from"], raw["to"]
    else:
        raise MalformedDocument(
            f"{where} must be an object with 'from' and 'to', got {_show(raw)}"
        )
    for end in (source, target):
        if not isinstance(end, str):
            raise MalformedDocument(f"{where} must name variables with strings, got {_show(end)}")
    return Arrow(source, target)


def _parse_question_part(raw: object, part: str) -> tuple[str, ...]:
    if raw is None:
        return ()
    if isinstance(raw, str):
        raw = [raw]
    if not isinstance(raw, list) or not all(isinstance(n, str) for n in raw):
        raise BadQuestion(f"{part} must be a variable name or a list of names, got {_show(raw)}")
    if len(set(raw)) != len(raw):
        raise BadQuestion(f"{part} lists a variable twice: {raw}")
    return tuple(raw)


def _optional_text(raw: object, what: str, limit: int, allow_newlines: bool = False) -> str | None:
    if raw is None:
        return None
    if not isinstance(raw, str):
        raise MalformedDocument(f"{what} must be text, got {_show(raw)}")
    if len(raw) > limit:
        raise MalformedDocument(f"{what} is {len(raw)} characters long; the limit is {limit}")
    allowed = {"\n", "\t"} if allow_newlines else set()
    for ch in raw:
        if ch not in allowed and unicodedata.category(ch) in ("Cc", "Cf"):
            raise MalformedDocument(f"{what} holds a control character ({ascii(ch)})")
    return raw


def _optional_number(raw: object, what: str) -> float | None:
    if raw is None:
        return None
    if isinstance(raw, bool) or not isinstance(raw, (int, float)) or not math.isfinite(raw):
        raise MalformedDocument(f"{what} must be a finite number, got {_show(raw)}")
    return float(raw)


def _show(value: object) -> str:
    text = repr(value)
    return text if len(text) <= 40 else text[:37] + "..."
