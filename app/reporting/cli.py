"""The ``report`` and ``export`` commands.

    arrowmoot report BUNDLE.json [-o report.html]
    arrowmoot export GRAPH --to json|graphml|dot [-o FILE]

GRAPH is a graph document (.json), GraphML (.graphml, .xml), DOT (.dot, .gv)
or a record bundle (its agreed graph is exported). Without ``-o`` the result
goes to standard output. A bad file exits with code 2 and a one-line message.
"""

from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path

from ..graph.errors import DiagramError

__all__ = ["add_parsers", "run_report", "run_export"]

EXIT_BAD_INPUT = 2


def _fail(message: str) -> int:
    print(f"arrowmoot: {message}", file=sys.stderr)
    return EXIT_BAD_INPUT


def _read_json(path: str) -> object:
    from ..graph.formats import parse_json_bytes, read_file_bytes
    from .bundle import BundleError  # imported when the command runs: the parser stays quick

    return parse_json_bytes(read_file_bytes(path, BundleError), path, BundleError)


def _write(text: str, output: str | None) -> None:
    from .bundle import BundleError  # imported when the command runs: the parser stays quick

    if output in (None, "-"):
        sys.stdout.write(text)
        if not text.endswith("\n"):
            sys.stdout.write("\n")
        return
    try:
        Path(output).write_text(text, encoding="utf-8")
    except OSError as err:
        raise BundleError(f"cannot write {output}: {err.strerror}") from None


def run_report(args: argparse.Namespace) -> int:
    from .bundle import BundleError  # imported when the command runs: the parser stays quick
    from .report import render_report

    try:
        bundle = _read_json(args.bundle)
    except BundleError as err:
        return _fail(err.message)
    try:
        html = render_report(bundle)
    except BundleError as err:
        return _fail(f"{args.bundle}: {err.message}")
    except (KeyError, TypeError, ValueError, AttributeError, IndexError) as err:
        return _fail(f"{args.bundle}: part of the bundle is damaged and cannot be shown ({type(err).__name__}: {err})")
    try:
        _write(html, args.output)
    except BundleError as err:
        return _fail(err.message)
    if args.output not in (None, "-"):
        print(f"wrote {args.output}", file=sys.stderr)
    return 0


def run_export(args: argparse.Namespace) -> int:
    from .bundle import BUNDLE_FORMAT, BundleError  # imported when the command runs: the parser stays quick

    from ..graph.document import parse_document
    from ..graph.formats import read_graph_file, to_dot, to_graphml

    path = Path(args.graph)
    try:
        if path.suffix.lower() == ".json":
            data = _read_json(args.graph)
            if isinstance(data, dict) and data.get("format") == BUNDLE_FORMAT:
                from .bundle import validate_bundle

                data = validate_bundle(data)["graph"]  # a record bundle: its agreed graph
            diagram = parse_document(data)
        else:
            diagram = read_graph_file(args.graph)
        if args.to == "graphml":
            text = to_graphml(diagram)
        elif args.to == "dot":
            text = to_dot(diagram)
        else:
            text = json.dumps(diagram.to_document(), indent=2, ensure_ascii=False)
        _write(text, args.output)
    except BundleError as err:
        return _fail(err.message)
    except DiagramError as err:
        return _fail(err.message if str(args.graph) in err.message else f"{args.graph}: {err.message}")
    return 0


def add_parsers(subparsers) -> None:
    """Add ``report`` and ``export`` to the ``arrowmoot`` command's subparsers."""
    report = subparsers.add_parser("report", help="render the workshop report from a record bundle")
    report.add_argument("bundle", help="record bundle (.record.json) exported from a session")
    report.add_argument("-o", "--output", help="HTML file to write (default: standard output)")
    report.set_defaults(run=run_report)

    export = subparsers.add_parser("export", help="convert a diagram to JSON, GraphML or DOT")
    export.add_argument("graph", help="graph file (.json, .graphml, .dot) or a record bundle")
    export.add_argument("--to", choices=("json", "graphml", "dot"), required=True, help="format to write")
    export.add_argument("-o", "--output", help="file to write (default: standard output)")
    export.set_defaults(run=run_export)
