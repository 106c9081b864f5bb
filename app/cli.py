"""The ``arrowmoot`` command.

    arrowmoot serve [--host 127.0.0.1] [--port 8000] [--db PATH]
    arrowmoot identify GRAPH [--treatment A] [--outcome B] [--adjust Z1,Z2] [--format json|text]
    arrowmoot estimate GRAPH DATA [--map variable=column ...] [--method NAME]
    arrowmoot report BUNDLE.json [-o report.html]
    arrowmoot export GRAPH --to json|graphml|dot [-o FILE]
    arrowmoot --version

GRAPH is a graph document (.json), GraphML (.graphml, .xml) or DOT (.dot, .gv).
A bad file or question exits with code 2 and a one-line message, never a traceback.
"""

from __future__ import annotations

import argparse
import json
import os
import sys

from . import __version__
from .graph.document import Diagram
from .graph.errors import DiagramError

EXIT_BAD_INPUT = 2


class InputProblem(Exception):
    """A problem with what the user gave the command; printed without a traceback."""


def read_diagram(path: str) -> Diagram:
    """Read a graph file in any supported format, judged by its extension."""
    from .graph.formats import read_graph_file

    return read_graph_file(path)


def _names(value: str | None) -> list[str] | None:
    if value is None:
        return None
    return [part.strip() for part in value.split(",") if part.strip()]


def run_identify(args: argparse.Namespace) -> int:
    from .graph.identification import analyze
    from .graph.text import format_analysis

    diagram = read_diagram(args.graph)
    result = analyze(
        diagram,
        adjust=_names(args.adjust),
        treatment=_names(args.treatment),
        outcome=_names(args.outcome),
    )
    if args.format == "json":
        print(json.dumps(result, indent=2, ensure_ascii=False))
    else:
        print(format_analysis(result))
    return 0


def run_serve(args: argparse.Namespace) -> int:
    # One BLAS thread per process: the server already runs the analysis in a child
    # process, and on a small machine threaded BLAS makes small fits far slower.
    os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")
    import uvicorn

    from .main import create_app

    shown_host = f"[{args.host}]" if ":" in args.host else args.host
    if args.host in ("0.0.0.0", "::"):
        shown_host = "127.0.0.1"
    os.environ.setdefault("ARROWMOOT_PUBLIC_URL", f"http://{shown_host}:{args.port}")
    app = create_app(db_path=args.db)
    if args.host not in ("127.0.0.1", "localhost", "::1"):
        print(
            f"warning: serving on {args.host}: anyone who can reach this address can open the "
            "join page; session links still need their tokens.",
            file=sys.stderr,
        )
    # Per-message compression would compress every push once per participant;
    # the pushes are small, so it costs more time than it saves bytes.
    uvicorn.run(app, host=args.host, port=args.port, log_level="info", access_log=False,
                ws_per_message_deflate=False)
    return 0


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="arrowmoot",
        description="Agree a causal diagram in a workshop, then estimate what it identifies.",
    )
    parser.add_argument("--version", action="version", version=f"arrowmoot {__version__}")
    commands = parser.add_subparsers(dest="command", metavar="COMMAND")

    serve = commands.add_parser("serve", help="start the workshop server")
    serve.add_argument("--host", default="127.0.0.1",
                       help="address to bind (default 127.0.0.1, this machine only)")
    serve.add_argument("--port", type=int, default=8000, help="port (default 8000)")
    serve.add_argument("--db", default=None,
                       help="SQLite database file (default ./data/arrowmoot.sqlite3)")
    serve.set_defaults(run=run_serve)

    identify = commands.add_parser("identify", help="analyse a diagram for its question")
    identify.add_argument("graph", help="graph file: .json document, .graphml or .dot")
    identify.add_argument("--treatment", help="treatment variable(s), comma-separated")
    identify.add_argument("--outcome", help="outcome variable(s), comma-separated")
    identify.add_argument("--adjust", help="adjustment set to check and condition paths on, comma-separated")
    identify.add_argument("--format", choices=("json", "text"), default="json")
    identify.set_defaults(run=run_identify)

    try:
        from .estimation.cli import add_parser as add_estimate_parser
        from .estimation.cli import run as run_estimate
    except ModuleNotFoundError as err:
        if not (err.name or "").startswith("app.estimation"):
            raise
    except ImportError:
        pass  # the estimation command is not ready in this build
    else:
        add_estimate_parser(commands)
        estimate = commands.choices.get("estimate")
        if estimate is not None and estimate.get_default("run") is None:
            estimate.set_defaults(run=run_estimate)

    from .reporting.cli import add_parsers as add_record_parsers

    add_record_parsers(commands)
    return parser


def main(argv: list[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    if not getattr(args, "run", None):
        parser.print_help()
        return EXIT_BAD_INPUT
    try:
        return args.run(args)
    except (DiagramError, InputProblem) as err:
        print(f"arrowmoot: {err}", file=sys.stderr)
        return EXIT_BAD_INPUT
    except KeyboardInterrupt:
        return 130


if __name__ == "__main__":
    sys.exit(main())
