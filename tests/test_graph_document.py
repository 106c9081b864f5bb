"""Every bad graph document gets a message naming what is wrong."""

from __future__ import annotations

import json
import subprocess
import sys

import pytest

from app.graph.document import MAX_ARROWS, MAX_VARIABLES, parse_document
from app.graph.errors import DiagramError
from app.graph.formats import from_dot, from_graphml, to_dot, to_graphml
from app.graph.identification import analyze

from tests.helpers.graph_cases import butterfly_graph


def var(*names):
    return [{"name": n} for n in names]


BAD_DOCUMENTS = [
    ({"variables": var("a"), "arrows": [{"from": "a", "to": "b"}]}, "unknown_variable", "unknown variable 'b'"),
    ({"variables": var("a", "a")}, "duplicate_variable", "variable 'a' is listed twice"),
    ({"variables": var("a"), "arrows": [{"from": "a", "to": "a"}]}, "self_loop", "a -> a points from a variable to itself"),
    ({"variables": var("a", "b"), "arrows": [["a", "b"], ["a", "b"]]}, "duplicate_arrow", "arrow a -> b is listed twice"),
    ({"variables": var("a", "b", "c"), "arrows": [["a", "b"], ["b", "c"], ["c", "a"]]}, "cycle", "cycle: "),
    ({"variables": var("a"), "treatment": "zz"}, "bad_question", "treatment 'zz' is not a variable"),
    ({"variables": var("a"), "outcome": ["q"]}, "bad_question", "outcome 'q' is not a variable"),
    ({"variables": var("a", "b"), "treatment": "a", "outcome": ["a", "b"]}, "bad_question", "'a' cannot be both treatment and outcome"),
    ({"variables": [{"name": ""}]}, "invalid_name", "is empty"),
    ({"variables": [{"name": "   "}]}, "invalid_name", "is empty"),
    ({"variables": [{"name": "x" * 65}]}, "invalid_name", "is 65 characters long; the limit is 64"),
    ({"variables": [{"name": "bad\x07name"}]}, "invalid_name", "holds a control character"),
    ({"variables": [{"name": "new\nline"}]}, "invalid_name", "holds a control character"),
    ({"variables": var(*[f"v{i}" for i in range(MAX_VARIABLES + 1)])}, "too_large", "501 variables; the limit is 500"),
    ({"variables": var("a", "b"), "arrows": [["a", "b"]] * (MAX_ARROWS + 1)}, "too_large", "5001 arrows; the limit is 5000"),
    ([1, 2], "malformed_document", "must be a JSON object"),
    ({"variables": "a,b"}, "malformed_document", "'variables' must be a list"),
    ({"variables": [{"label": "no name"}]}, "malformed_document", "variable #1 has no 'name'"),
    ({"variables": [{"name": "a", "latent": "yes"}]}, "malformed_document", "'latent' of variable 'a' must be true or false"),
    ({"variables": [{"name": "a", "x": "left"}]}, "malformed_document", "'x' of variable 'a' must be a finite number"),
    ({"variables": var("a"), "arrows": [{"from": "a"}]}, "malformed_document", "arrow #1 needs both 'from' and 'to'"),
    ({"variables": var("a"), "version": 7}, "malformed_document", "version 7"),
]


@pytest.mark.parametrize("doc, code, message", BAD_DOCUMENTS)
def test_bad_document_message(doc, code, message):
    with pytest.raises(DiagramError) as info:
        parse_document(doc)
    assert info.value.code == code
    assert message in info.value.message


def test_cycle_message_names_the_nodes_of_one_cycle():
    doc = {"variables": var("a", "b", "c", "d"), "arrows": [["d", "a"], ["a", "b"], ["b", "c"], ["c", "a"]]}
    with pytest.raises(DiagramError) as info:
        parse_document(doc)
    assert sorted(info.value.cycle) == ["a", "b", "c"]


def test_missing_question_is_reported_by_analysis():
    diagram = parse_document({"variables": var("a", "b"), "arrows": [["a", "b"]]})
    with pytest.raises(DiagramError, match="no treatment is set"):
        analyze(diagram)


def test_document_round_trip_and_bare_strings():
    doc = {
        "variables": [{"name": "age", "label": "Age in years", "latent": False, "x": 120, "y": 80},
                      {"name": "ü-ñ 名"}],
        "arrows": [{"from": "age", "to": "ü-ñ 名"}],
        "treatment": "age", "outcome": "ü-ñ 名",
    }
    diagram = parse_document(doc)
    assert diagram.treatment == ("age",) and diagram.outcome == ("ü-ñ 名",)
    again = parse_document(json.loads(json.dumps(diagram.to_document())))
    assert again == diagram


def _rich():
    doc = butterfly_graph()
    doc["variables"][0].update({"label": 'Quote " and <b>', "description": "two\nlines", "x": 10.5, "y": -3})
    doc["variables"][1]["latent"] = True
    return parse_document(doc)


@pytest.mark.parametrize("write, read", [(to_graphml, from_graphml), (to_dot, from_dot)])
def test_open_format_round_trip(write, read):
    diagram = _rich()
    assert read(write(diagram)).to_document() == diagram.to_document()


def test_graphml_read_by_networkx_reference():
    """networkx reads our GraphML as the same directed graph (reference library)."""
    import io

    import networkx as nx

    diagram = _rich()
    graph = nx.read_graphml(io.BytesIO(to_graphml(diagram).encode()))
    assert set(graph.edges) == {(a.source, a.target) for a in diagram.arrows}
    assert graph.nodes["a"]["label"] == 'Quote " and <b>'


def test_dot_written_elsewhere_is_read():
    text = 'digraph G { rankdir=LR; subgraph cluster0 { a; b; } a -> b; "c d" -> b [color=red]; }'
    diagram = from_dot(text)
    assert sorted(diagram.names) == ["a", "b", "c d"]
    assert {(x.source, x.target) for x in diagram.arrows} == {("a", "b"), ("c d", "b")}


@pytest.mark.parametrize(
    "read, text, message",
    [
        (from_dot, "graph { a -- b }", "undirected"),
        (from_dot, "digraph { a -> b; b -> a }", "in the DOT file: the arrows form a cycle"),
        (from_dot, "this is not dot {{", "not a readable DOT file"),
        (from_graphml, "<graphml", "not a readable GraphML file"),
    ],
)
def test_bad_open_format_files(read, text, message):
    with pytest.raises(DiagramError, match=message):
        read(text)


def _cli(*args):
    return subprocess.run([sys.executable, "-m", "app.cli", *args], capture_output=True, text=True, timeout=60)


def test_cli_identify_json_contract(tmp_path):
    path = tmp_path / "g.json"
    path.write_text(json.dumps(butterfly_graph()))
    done = _cli("identify", str(path), "--adjust", "m")
    assert done.returncode == 0, done.stderr
    result = json.loads(done.stdout)
    for key in ("treatment", "outcome", "identifiable", "strategy", "minimal_adjustment_sets",
                "more_sets_exist", "optimal_adjustment_set", "adjustment_check", "paths", "paths_total",
                "front_door_sets", "instruments", "implications", "roles"):
        assert key in result
    assert result["minimal_adjustment_sets"] == [["a", "m"], ["b", "m"]]
    assert result["adjustment_check"]["set"] == ["m"] and not result["adjustment_check"]["valid"]


def test_cli_question_override_and_text(tmp_path):
    path = tmp_path / "g.dot"
    path.write_text("digraph { c -> x; c -> y; x -> y; }")
    done = _cli("identify", str(path), "--treatment", "x", "--outcome", "y", "--format", "text")
    assert done.returncode == 0, done.stderr
    assert "{c}" in done.stdout and "Smallest sets to adjust for" in done.stdout
    assert "x and y independent" not in done.stdout  # adjacent: no implication between them


@pytest.mark.parametrize(
    "content, message",
    [
        ("{not json", "is not valid JSON"),
        ('{"variables": ["a", "a"]}', "variable 'a' is listed twice"),
        ('{"variables": ["a", "b"], "arrows": [["a", "b"]]}', "no treatment is set"),
    ],
)
def test_cli_bad_input_exit_code_2(tmp_path, content, message):
    path = tmp_path / "g.json"
    path.write_text(content)
    done = _cli("identify", str(path))
    assert done.returncode == 2
    assert message in done.stderr and "Traceback" not in done.stderr


def test_cli_unknown_adjust_variable(tmp_path):
    path = tmp_path / "g.json"
    path.write_text(json.dumps(butterfly_graph()))
    done = _cli("identify", str(path), "--adjust", "nope")
    assert done.returncode == 2 and "unknown variable 'nope'" in done.stderr


def test_cli_version():
    done = _cli("--version")
    assert done.returncode == 0 and done.stdout.startswith("arrowmoot ")


def test_dot_export_prefixes_our_attributes():
    """Graphviz's own attributes (label, pos) keep their names; ours carry arrowmoot_."""
    import pydot

    text = to_dot(_rich())
    (graph,) = pydot.graph_from_dot_data(text)
    assert set(graph.get_attributes()) == {"arrowmoot_treatment", "arrowmoot_outcome"}
    node_keys = set().union(*(n.get_attributes() for n in graph.get_nodes()))
    assert node_keys <= {"arrowmoot_latent", "arrowmoot_description", "label", "pos"}
    assert "arrowmoot_latent" in node_keys and "latent" not in text.replace("arrowmoot_latent", "")


def test_dot_with_bare_attributes_is_still_read():
    """Files exported before the prefix used bare latent/description/treatment/outcome."""
    text = ('digraph { treatment="a"; outcome="b"; "a" [description="first"]; '
            '"u" [latent="true"]; a -> b; u -> a; u -> b; }')
    diagram = from_dot(text)
    assert diagram.treatment == ("a",) and diagram.outcome == ("b",)
    assert {v.name: v.latent for v in diagram.variables} == {"a": False, "u": True, "b": False}
    assert next(v for v in diagram.variables if v.name == "a").description == "first"
