"""GraphML and Graphviz DOT import and export (open standards).

GraphML goes through networkx's reader and writer; DOT through pydot, the
maintained Python DOT parser that networkx also uses. Both carry the
diagram's label, description, latent flag and position on each node, and the
question (names joined by commas), so an export read back gives the same
diagram.

In DOT, Graphviz's own attributes keep their names (``label``, ``pos``); ours
carry the prefix ``arrowmoot_``: ``arrowmoot_latent`` and
``arrowmoot_description`` on nodes, ``arrowmoot_treatment`` and
``arrowmoot_outcome`` on the graph (see ``DOT_ATTRIBUTES``).
Files written before the prefix (bare ``latent``, ``description``,
``treatment``, ``outcome``) are still read.

A file made elsewhere needs only nodes and directed edges; everything else
is optional. Problems (not XML, undirected graph, a multi-edge) are reported
as :class:`~app.graph.errors.MalformedDocument` with the reason.
"""

from __future__ import annotations

import contextlib
import io
import math
import xml.etree.ElementTree as ElementTree
from pathlib import Path

import networkx as nx

from .document import Diagram, parse_document
from .errors import DiagramError, MalformedDocument

__all__ = [
    "to_graphml", "from_graphml", "to_dot", "from_dot", "diagram_from_networkx",
    "read_graph_file", "parse_graph_bytes", "read_file_bytes", "parse_json_bytes",
]

MAX_IMPORT_BYTES = 20 * 1024 * 1024

# Our DOT attributes: diagram field -> attribute written. Reading accepts the
# bare field name as well.
DOT_ATTRIBUTES = {
    "latent": "arrowmoot_latent", "description": "arrowmoot_description",
    "treatment": "arrowmoot_treatment", "outcome": "arrowmoot_outcome",
}


def _to_networkx(diagram: Diagram) -> nx.DiGraph:
    graph = nx.DiGraph()
    graph.graph["treatment"] = ",".join(diagram.treatment)
    graph.graph["outcome"] = ",".join(diagram.outcome)
    for v in diagram.variables:
        attrs: dict = {"latent": v.latent}
        if v.label is not None:
            attrs["label"] = v.label
        if v.description is not None:
            attrs["description"] = v.description
        if v.x is not None:
            attrs["x"] = v.x
        if v.y is not None:
            attrs["y"] = v.y
        graph.add_node(v.name, **attrs)
    graph.add_edges_from((a.source, a.target) for a in diagram.arrows)
    return graph


def to_graphml(diagram: Diagram) -> str:
    buffer = io.BytesIO()
    nx.write_graphml(_to_networkx(diagram), buffer, encoding="utf-8", prettyprint=True)
    return buffer.getvalue().decode("utf-8")


def from_graphml(text: str | bytes) -> Diagram:
    data = text.encode("utf-8") if isinstance(text, str) else text
    _check_size(data)
    try:
        graph = nx.read_graphml(io.BytesIO(data))
    except (ElementTree.ParseError, nx.NetworkXError, KeyError, ValueError, TypeError) as err:
        raise MalformedDocument(f"not a readable GraphML file: {err}") from None
    return diagram_from_networkx(graph, "GraphML")


def to_dot(diagram: Diagram) -> str:
    names = DOT_ATTRIBUTES
    lines = ["digraph arrowmoot {"]
    lines.append(f"  {names['treatment']}={_quote(','.join(diagram.treatment))};")
    lines.append(f"  {names['outcome']}={_quote(','.join(diagram.outcome))};")
    for v in diagram.variables:
        attrs = [f"{names['latent']}={_quote('true' if v.latent else 'false')}"]
        if v.label is not None:
            attrs.append(f"label={_quote(v.label)}")
        if v.description is not None:
            attrs.append(f"{names['description']}={_quote(v.description)}")
        if v.x is not None and v.y is not None:
            # Graphviz "pos" is in points with y pointing up; we keep screen units.
            attrs.append(f"pos={_quote(f'{_num(v.x)},{_num(v.y)}')}")
        lines.append(f"  {_quote(v.name)} [{', '.join(attrs)}];")
    for a in diagram.arrows:
        lines.append(f"  {_quote(a.source)} -> {_quote(a.target)};")
    lines.append("}")
    return "\n".join(lines) + "\n"


def from_dot(text: str | bytes) -> Diagram:
    import pydot  # imported here: only DOT import needs it

    data = text.decode("utf-8", errors="replace") if isinstance(text, bytes) else text
    _check_size(data.encode("utf-8"))
    try:
        with contextlib.redirect_stdout(io.StringIO()):  # pydot prints parse errors
            parsed = pydot.graph_from_dot_data(data)
    except Exception as err:  # pydot raises assorted parser errors
        raise MalformedDocument(f"not a readable DOT file: {_first_line(err)}") from None
    if not parsed:
        raise MalformedDocument("not a readable DOT file: no graph found")
    if len(parsed) > 1:
        raise MalformedDocument(f"the DOT file holds {len(parsed)} graphs; give one")
    dot = parsed[0]
    if dot.get_type() != "digraph":
        raise MalformedDocument("the DOT graph is undirected; a causal diagram needs a digraph")
    graph = nx.DiGraph()
    graph.graph.update(_dot_fields({k: _unquote(v) for k, v in dot.get_attributes().items()}))
    for node in _all_nodes(dot):
        name = _unquote(node.get_name())
        if name in ("node", "edge", "graph", ""):
            continue
        attrs = _dot_fields({k: _unquote(v) for k, v in node.get_attributes().items()})
        graph.add_node(name, **{**graph.nodes.get(name, {}), **attrs})
    for edge in _all_edges(dot):
        source, target = _unquote(edge.get_source()), _unquote(edge.get_destination())
        if graph.has_edge(source, target):
            raise MalformedDocument(f"arrow {source} -> {target} is listed twice")
        graph.add_edge(source, target)
    return diagram_from_networkx(graph, "DOT")


def _dot_fields(attrs: dict) -> dict:
    """DOT attributes under the diagram's field names; a prefixed one wins over a bare one."""
    out = dict(attrs)
    for field, written in DOT_ATTRIBUTES.items():
        if written in out:
            out[field] = out.pop(written)
    return out


def diagram_from_networkx(graph: nx.Graph, source: str) -> Diagram:
    if not graph.is_directed():
        raise MalformedDocument(f"the {source} graph is undirected; a causal diagram needs arrows")
    if graph.is_multigraph():
        raise MalformedDocument(f"the {source} graph has repeated arrows between the same pair")
    variables = []
    for name, attrs in graph.nodes(data=True):
        variable: dict = {"name": str(name), "latent": _bool(attrs.get("latent", False), name)}
        for key in ("label", "description"):
            if attrs.get(key) not in (None, ""):
                variable[key] = str(attrs[key])
        x, y = attrs.get("x"), attrs.get("y")
        if (x is None or y is None) and attrs.get("pos"):
            x, y = _pos(attrs["pos"], name)
        if x is not None and y is not None:
            variable["x"], variable["y"] = _float(x, name, "x"), _float(y, name, "y")
        variables.append(variable)
    document = {
        "variables": variables,
        "arrows": [{"from": str(u), "to": str(v)} for u, v in graph.edges()],
        "treatment": _names(graph.graph.get("treatment")),
        "outcome": _names(graph.graph.get("outcome")),
    }
    try:
        return parse_document(document)
    except DiagramError as err:
        err.message = f"in the {source} file: {err.message}"
        err.args = (err.message,)
        raise err from None


def _all_nodes(dot):
    yield from dot.get_nodes()
    for sub in dot.get_subgraphs():
        yield from _all_nodes(sub)
    # Nodes that appear only in edges still need to exist.
    for edge in dot.get_edges():
        for end in (edge.get_source(), edge.get_destination()):
            yield _Bare(end)


def _all_edges(dot):
    yield from dot.get_edges()
    for sub in dot.get_subgraphs():
        yield from _all_edges(sub)


class _Bare:
    def __init__(self, name):
        self._name = name

    def get_name(self):
        return self._name

    def get_attributes(self):
        return {}


def _names(value) -> list[str]:
    if not value:
        return []
    return [part.strip() for part in str(value).split(",") if part.strip()]


def _bool(value, name) -> bool:
    if isinstance(value, bool):
        return value
    text = str(value).strip().lower()
    if text in ("true", "1", "yes"):
        return True
    if text in ("false", "0", "no", ""):
        return False
    raise MalformedDocument(f"'latent' of variable {name!r} must be true or false, got {value!r}")


def _pos(value, name):
    parts = str(value).rstrip("!").split(",")
    if len(parts) < 2:
        raise MalformedDocument(f"position of variable {name!r} must be 'x,y', got {value!r}")
    return parts[0], parts[1]


def _float(value, name, axis) -> float:
    try:
        number = float(value)
    except (TypeError, ValueError):
        raise MalformedDocument(f"'{axis}' of variable {name!r} must be a number, got {value!r}") from None
    if not math.isfinite(number):
        raise MalformedDocument(f"'{axis}' of variable {name!r} must be finite")
    return number


def _quote(text: str) -> str:
    return '"' + text.replace("\\", "\\\\").replace('"', '\\"').replace("\n", "\\n") + '"'


def _unquote(text) -> str:
    text = str(text)
    if len(text) >= 2 and text[0] == text[-1] == '"':
        body, out, i = text[1:-1], [], 0
        while i < len(body):
            ch = body[i]
            if ch == "\\" and i + 1 < len(body):
                nxt = body[i + 1]
                out.append({"n": "\n", '"': '"', "\\": "\\"}.get(nxt, "\\" + nxt))
                i += 2
                continue
            out.append(ch)
            i += 1
        return "".join(out)
    return text


def _num(value: float) -> str:
    return str(int(value)) if float(value).is_integer() else repr(float(value))


def _check_size(data: bytes) -> None:
    if len(data) > MAX_IMPORT_BYTES:
        raise MalformedDocument(
            f"the file is {len(data) // (1024 * 1024)} MB; graph files are limited to "
            f"{MAX_IMPORT_BYTES // (1024 * 1024)} MB"
        )


def _first_line(err: Exception) -> str:
    text = str(err).strip().splitlines()
    return text[0] if text else type(err).__name__


def read_file_bytes(path: str | Path, error: type[Exception] = MalformedDocument) -> bytes:
    """The bytes of a file the user named; a missing or unreadable file raises ``error``."""
    try:
        return Path(path).read_bytes()
    except FileNotFoundError:
        raise error(f"no such file: {path}") from None
    except IsADirectoryError:
        raise error(f"{path} is a folder, not a file") from None
    except OSError as err:
        raise error(f"cannot read {path}: {err.strerror}") from None


def parse_json_bytes(raw: bytes, name: str, error: type[Exception] = MalformedDocument) -> object:
    """Decode UTF-8 JSON; text that is not raises ``error`` naming the line and column."""
    import json

    try:
        return json.loads(raw.decode("utf-8"))
    except UnicodeDecodeError:
        raise error(f"{name} is not UTF-8 text; give a JSON file") from None
    except json.JSONDecodeError as err:
        raise error(f"{name} is not valid JSON (line {err.lineno}, column {err.colno}: {err.msg})") from None


def parse_graph_bytes(raw: bytes, name: str) -> Diagram:
    """A diagram from file contents, the format judged by the file name's ending:
    .graphml/.xml GraphML, .dot/.gv DOT, anything else a JSON graph document."""
    suffix = Path(name).suffix.lower()
    if suffix in (".graphml", ".xml"):
        return from_graphml(raw)
    if suffix in (".dot", ".gv"):
        return from_dot(raw)
    _check_size(raw)
    return parse_document(parse_json_bytes(raw, name))


def read_graph_file(path: str | Path) -> Diagram:
    """Read a graph file in any supported format; problems raise MalformedDocument."""
    return parse_graph_bytes(read_file_bytes(path), str(path))
