"""The ``arrowmoot`` command.

    arrowmoot serve [--host 127.0.0.1] [--port 8000] [--db PATH | --db postgresql://USER@HOST:PORT/DBNAME]
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
from typing import TYPE_CHECKING

from . import __version__
from .graph.errors import DiagramError

if TYPE_CHECKING:
    from .graph.document import Diagram

EXIT_BAD_INPUT = 2


class InputProblem(Exception):
    """A problem with what the user gave the command; printed without a traceback."""


def read_diagram(path: str) -> "Diagram":
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
    from .storage import StorageError

    shown_host = f"[{args.host}]" if ":" in args.host else args.host
    if args.host in ("0.0.0.0", "::"):
        shown_host = "127.0.0.1"
    os.environ.setdefault("ARROWMOOT_PUBLIC_URL", f"http://{shown_host}:{args.port}")
    # what the join screen needs to tell the room an address it can reach
    os.environ["ARROWMOOT_LISTEN_HOST"], os.environ["ARROWMOOT_LISTEN_PORT"] = args.host, str(args.port)
    try:
        app = create_app(db_path=args.db)
    except StorageError as err:
        print(f"error: {err}", file=sys.stderr)
        return EXIT_BAD_INPUT
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


def _open_sessions(db: str | None):
    """The sessions of an existing database (None, with a message, when there is none)."""
    from .sessions import Sessions
    from .settings import Settings
    from .storage import StorageError, is_database_url, open_store

    settings = Settings()
    path = db or str(settings.db_path)
    if not is_database_url(path) and not os.path.exists(path):  # never create a database by a typo
        print(f"error: no database at {path}; pass --db with the file the server uses", file=sys.stderr)
        return None
    if db:
        settings.db_path = path
        settings.__post_init__()
    try:
        return Sessions(open_store(path, data_dir=settings.shared_data_dir()), use_processes=False)
    except StorageError as err:
        print(f"error: {err}", file=sys.stderr)
        return None


def run_sessions(args: argparse.Namespace) -> int:
    import time

    sessions = _open_sessions(args.db)
    if sessions is None:
        return EXIT_BAD_INPUT
    listed = sessions.list_sessions()
    if not listed:
        print("no sessions in this database")
        return 0
    for row, members in listed:
        people = sorted((m.name, m.role) for m in members)
        shown = ", ".join(f"{n} ({r})" if r == "facilitator" else n for n, r in people)
        when = time.strftime("%Y-%m-%d %H:%M", time.localtime(row["updated"] or row["created"]))
        print(f"{row['id']}  {row['title']}  (revision {row['revision']}, last change {when})")
        print(f"    members: {shown or 'none'}")
    return 0


def run_key(args: argparse.Namespace) -> int:
    """Issue a new key to the session's facilitator (or a named member); the old one stops working."""
    from .errors import AppError

    sessions = _open_sessions(args.db)
    if sessions is None:
        return EXIT_BAD_INPUT
    try:
        member, token = sessions.reissue_key(args.session, args.member)
    except AppError as err:
        print(f"error: {err.message}", file=sys.stderr)
        return EXIT_BAD_INPUT
    base = os.environ.get("ARROWMOOT_PUBLIC_URL", "http://127.0.0.1:8000").rstrip("/")
    print(f"New key for {member.name} ({member.role}); the old key no longer works.")
    print(f"  Link (keep it private): {base}/s/{args.session}#key={token}")
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
                       help="SQLite database file, whose folder holds attached data (default "
                       "arrowmoot.sqlite3 in the per-user data folder), or postgresql://USER@HOST:PORT/DBNAME "
                       "for a database several servers share (attached data in ARROWMOOT_DATA_DIR)")
    serve.set_defaults(run=run_serve)

    sessions = commands.add_parser("sessions", help="list the sessions in the database and their members")
    sessions.add_argument("--db", default=None, help="SQLite database file or PostgreSQL URL (default: as for serve)")
    sessions.set_defaults(run=run_sessions)

    key = commands.add_parser("key", help="issue a new key for a session's facilitator or a member")
    key.add_argument("session", help="session id (from the link, or `arrowmoot sessions`)")
    key.add_argument("--member", default=None, help="member's display name (default: the facilitator)")
    key.add_argument("--db", default=None, help="SQLite database file or PostgreSQL URL (default: as for serve)")
    key.set_defaults(run=run_key)

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


def _session_id_last(argv: list[str]) -> list[str]:
    """Session ids may begin with "-": for ``key``, put the options first and the id
    after "--" so it is never read as an option."""
    if not argv or argv[0] != "key" or any(a in ("-h", "--help", "--") for a in argv):
        return argv
    options, positional, i = [], [], 1
    while i < len(argv):
        a = argv[i]
        if a in ("--member", "--db") and i + 1 < len(argv):
            options += argv[i:i + 2]
            i += 2
            continue
        (options if a.startswith(("--member=", "--db=")) else positional).append(a)
        i += 1
    return ["key", *options, "--", *positional]


def main(argv: list[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(_session_id_last(list(sys.argv[1:] if argv is None else argv)))
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
