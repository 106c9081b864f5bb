"""Graph exports from a session (JSON, GraphML, DOT) and from the CLI, read back and compared.

External references: GraphML is read back by networkx's own GraphML reader
(networkx.read_graphml) and DOT by pydot (the parser networkx uses), besides
our own importers; both must see exactly the session's variables and arrows.
"""

from __future__ import annotations

import io
import json

import networkx as nx
import pydot
import pytest
from fastapi.testclient import TestClient

from app.graph.document import parse_document
from app.graph.formats import from_dot, from_graphml
from app.reporting.cli import add_parsers
from tests.helpers.app import make_app
from tests.helpers.workshop import SAMPLE, build_workshop


@pytest.fixture(name="workshop", scope="module")
def fixture_workshop(tmp_path_factory):
    app = make_app(tmp_path_factory.mktemp("exports"))
    with TestClient(app) as client:
        yield build_workshop(client, estimate=False)


def canonical(doc: dict) -> dict:
    """A document with order removed: arrow and variable order carry no meaning."""
    return {**doc, "variables": sorted(doc["variables"], key=lambda v: v["name"]),
            "arrows": sorted((a["from"], a["to"]) for a in doc["arrows"])}


def _expected(workshop) -> dict:
    r = workshop.client.get(f"/api/sessions/{workshop.session_id}/document", headers=workshop.headers())
    assert r.status_code == 200
    return parse_document(r.json()).to_document()


@pytest.mark.parametrize("fmt", ["json", "graphml", "dot"])
def test_export_round_trip_gives_the_same_diagram(workshop, fmt):
    r = workshop.get(f"/export/graph?format={fmt}", workshop.analyst)
    assert r.status_code == 200, r.text
    assert r.headers["content-disposition"].startswith("attachment; filename=")
    assert r.headers["content-disposition"].endswith(f'.{fmt}"')
    reader = {"json": lambda t: parse_document(json.loads(t)), "graphml": from_graphml, "dot": from_dot}[fmt]
    back = reader(r.text).to_document()
    assert canonical(back) == canonical(_expected(workshop))
    # positions, labels, descriptions, latent flags and the question all survive
    expected = {v["name"]: v for v in _expected(workshop)["variables"]}
    assert back["treatment"] == ["bike_lease"] and back["outcome"] == ["sick_days"]
    for v in back["variables"]:
        assert (v["x"], v["y"], v.get("label"), v.get("latent")) == (
            expected[v["name"]]["x"], expected[v["name"]]["y"], expected[v["name"]].get("label"),
            expected[v["name"]].get("latent"))


def test_graphml_export_reads_in_networkx(workshop):
    """networkx's reader (not ours) sees the same nodes, arrows and latent flags."""
    text = workshop.get("/export/graph?format=graphml").text
    graph = nx.read_graphml(io.BytesIO(text.encode("utf-8")))
    doc = _expected(workshop)
    assert graph.is_directed()
    assert set(graph.nodes) == {v["name"] for v in doc["variables"]}
    assert set(graph.edges) == {(a["from"], a["to"]) for a in doc["arrows"]}
    latent = {n for n, d in graph.nodes(data=True) if d.get("latent") in (True, "true", "True")}
    assert latent == {"health_consciousness"}


def test_dot_export_reads_in_pydot(workshop):
    text = workshop.get("/export/graph?format=dot").text
    (graph,) = pydot.graph_from_dot_data(text)
    assert graph.get_type() == "digraph"
    edges = {(e.get_source().strip('"'), e.get_destination().strip('"')) for e in graph.get_edges()}
    assert edges == {(a["from"], a["to"]) for a in _expected(workshop)["arrows"]}


def test_exports_need_analyst_or_facilitator(workshop):
    assert workshop.get("/export/graph", workshop.participant).status_code == 403
    assert workshop.get("/export/bundle", workshop.participant).status_code == 403
    r = workshop.client.get(f"/api/sessions/{workshop.session_id}/export/graph")
    assert r.status_code == 401 and r.json()["code"] == "no_token"
    assert workshop.get("/export/graph", workshop.facilitator).status_code == 200


def test_unknown_export_format_is_refused(workshop):
    r = workshop.get("/export/graph?format=pdf")
    assert r.status_code == 400
    assert r.json() == {"ok": False, "error": "unknown format 'pdf'; use one of json, graphml, dot",
                        "status": 400, "code": "unknown_format"}


def _cli(argv: list[str]) -> int:
    import argparse

    parser = argparse.ArgumentParser(prog="arrowmoot")
    add_parsers(parser.add_subparsers())
    args = parser.parse_args(argv)
    return args.run(args)


def test_cli_export_chain_json_dot_graphml_json(tmp_path):
    source = SAMPLE / "cycle_to_work.json"
    dot, graphml, back = tmp_path / "g.dot", tmp_path / "g.graphml", tmp_path / "g.json"
    assert _cli(["export", str(source), "--to", "dot", "-o", str(dot)]) == 0
    assert _cli(["export", str(dot), "--to", "graphml", "-o", str(graphml)]) == 0
    assert _cli(["export", str(graphml), "--to", "json", "-o", str(back)]) == 0
    original = parse_document(json.loads(source.read_text())).to_document()
    assert canonical(json.loads(back.read_text())) == canonical(original)


def test_cli_export_refuses_bad_files_with_a_message(tmp_path, capsys):
    assert _cli(["export", str(tmp_path / "missing.json"), "--to", "dot"]) == 2
    assert "no such file" in capsys.readouterr().err
    cyclic = tmp_path / "cycle.json"
    cyclic.write_text(json.dumps({"format": "arrowmoot-graph", "version": 1,
                                  "variables": [{"name": "a"}, {"name": "b"}],
                                  "arrows": [{"from": "a", "to": "b"}, {"from": "b", "to": "a"}]}))
    assert _cli(["export", str(cyclic), "--to", "graphml"]) == 2
    err = capsys.readouterr().err
    assert err.startswith("arrowmoot: ") and "cycle" in err and "Traceback" not in err


def test_arrowmoot_command_runs_report_and_export(tmp_path, capsys):
    """Through the top-level ``arrowmoot`` entry point (app.cli.main)."""
    from app.cli import main

    out = tmp_path / "g.graphml"
    assert main(["export", str(SAMPLE / "cycle_to_work.json"), "--to", "graphml", "-o", str(out)]) == 0
    assert canonical(from_graphml(out.read_text()).to_document()) == canonical(
        parse_document(json.loads((SAMPLE / "cycle_to_work.json").read_text())).to_document())
    assert main(["report", str(tmp_path / "nothing.json"), "-o", str(tmp_path / "r.html")]) == 2
    assert "no such file" in capsys.readouterr().err
