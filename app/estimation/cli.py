"""``arrowmoot estimate GRAPH.json DATA.csv [--map variable=column ...] [--method NAME]``

Prints the estimate as JSON (estimate, std_error, ci, method, strategy,
adjustment_set or instrument and given, n_used, n_dropped, checks),
``validation``: the checks that can contradict the diagram and their verdict
(see :mod:`app.estimation.validation`), and ``sensitivity``: how strong a
hidden common cause would have to be, read with the room's stated causes from
``--room FILE``: a record bundle, or a JSON list of ``{"by", "variable",
"times"}``). Exit
codes: 0 estimated; 2 bad input (unreadable graph or data, bad mapping or
method, data the estimate cannot use, an effect the diagram does not
identify with the measured variables), with the message on stderr.
"""

from __future__ import annotations

import argparse
import importlib
import json
import sys
from pathlib import Path

from app.graph.errors import DiagramError

from .errors import DataError
from .methods import AUTO, method_names

__all__ = ["add_parser", "run"]


class _Default:
    """An option's default kept in a module of the estimation stack, read only when the
    help shows it or the command runs, so that building the parser imports nothing heavy."""

    def __init__(self, module: str, name: str):
        self.module, self.name = module, name

    def value(self):
        return getattr(importlib.import_module(self.module, __package__), self.name)

    def __str__(self) -> str:
        return str(self.value())


def _value(option):
    return option.value() if isinstance(option, _Default) else option


def add_parser(subparsers) -> argparse.ArgumentParser:
    parser = subparsers.add_parser(
        "estimate",
        help="estimate the effect a diagram identifies from a data file",
        description="Estimate the effect the diagram identifies and test its implications against the data.",
    )
    parser.add_argument("graph", help="graph document (JSON)")
    parser.add_argument("data", help="data table (CSV or Parquet)")
    parser.add_argument("--map", action="append", default=[], metavar="VARIABLE=COLUMN",
                        help="measure a variable by a column (repeatable); unnamed variables use a column "
                             "of the same name if there is one; VARIABLE= marks it unmeasured")
    parser.add_argument("--method", default="auto", choices=[AUTO, *method_names()],
                        help="estimator (default: chosen from the identification and the column types)")
    parser.add_argument("--adjust", default=None, metavar="A,B,...",
                        help="use this adjustment set instead of the default (must be valid)")
    parser.add_argument("--correction", default="holm", choices=["holm", "bh", "none"],
                        help="multiple-testing correction for the implication tests")
    parser.add_argument("--room", default=None, metavar="FILE",
                        help="the room's stated hidden causes: a record bundle or a JSON list of "
                             '{"by", "variable", "times"} (default: none)')
    parser.add_argument("--resamples", type=int, default=_Default(".validation", "RESAMPLES"), metavar="N",
                        help="paired resamples for comparing adjustment sets (default %(default)s)")
    parser.add_argument("--set-cap", type=int, default=_Default(".validation", "SET_CAP"), metavar="N",
                        help="compare at most N valid adjustment sets (default %(default)s)")
    parser.add_argument("--no-validation", action="store_true",
                        help="skip the checks against the data (validation is then null)")
    parser.add_argument("--no-implication-tests", action="store_true",
                        help="do not test the diagram's independences against the data with the estimate "
                             "(checks is then null; the validation still tests them unless --no-validation)")
    parser.add_argument("--max-bytes", type=int, default=_Default(".tables", "DEFAULT_MAX_BYTES"),
                        help=argparse.SUPPRESS)
    parser.set_defaults(handler=run)
    return parser


def _fail(message: str) -> int:
    print(f"arrowmoot estimate: {message}", file=sys.stderr)
    return 2


def _room(path: str | None) -> list[dict]:
    """Statements from a record bundle (its ``hidden_causes``) or a plain JSON list."""
    if path is None:
        return []
    try:
        raw = json.loads(Path(path).read_text(encoding="utf-8"))
    except FileNotFoundError:
        raise DataError(f"--room {path}: no such file") from None
    except (UnicodeDecodeError, json.JSONDecodeError) as exc:
        raise DataError(f"--room {path} is not JSON ({exc})") from None
    rows = raw.get("hidden_causes") if isinstance(raw, dict) else raw
    if not isinstance(rows, list) or not all(isinstance(r, dict) for r in rows):
        raise DataError(f"--room {path} must be a record bundle or a JSON list of "
                        '{"by", "variable", "times"} objects')
    out = []
    for i, r in enumerate(rows, 1):
        times = r.get("times")
        if not isinstance(r.get("variable"), str) or isinstance(times, bool) \
                or not isinstance(times, (int, float)) or not 0 < times <= 10:
            raise DataError(f"--room {path}: statement {i} needs a 'variable' name and 'times' above 0 and at most 10")
        out.append({"by": str(r.get("by") or ""), "variable": r["variable"], "times": float(times),
                    **({"words": r["words"]} if isinstance(r.get("words"), str) else {})})
    return out


def run(args) -> int:
    try:
        raw = json.loads(Path(args.graph).read_text(encoding="utf-8"))
    except FileNotFoundError:
        return _fail(f"{args.graph}: no such file")
    except (UnicodeDecodeError, json.JSONDecodeError) as exc:
        return _fail(f"{args.graph} is not a JSON graph document ({exc})")
    from app.graph.document import parse_document

    from .service import estimate, json_ready, sensitivity, validate
    from .tables import load_table

    args.resamples, args.set_cap, args.max_bytes = map(_value, (args.resamples, args.set_cap, args.max_bytes))
    try:
        diagram = parse_document(raw)
        frame = load_table(args.data, max_bytes=args.max_bytes)
        mapping = None
        if args.map:
            from .design import propose_mapping

            mapping = propose_mapping(diagram.names, frame.columns)
            for pair in args.map:
                if "=" not in pair:
                    return _fail(f"--map {pair!r} must look like variable=column")
                var, col = pair.split("=", 1)
                mapping[var.strip()] = col.strip() or None
        adjust = None
        if args.adjust is not None:
            adjust = [a.strip() for a in args.adjust.split(",") if a.strip()]
        if not 20 <= args.resamples <= 2000:
            return _fail("--resamples must be from 20 to 2000")
        if not 1 <= args.set_cap <= 20:
            return _fail("--set-cap must be from 1 to 20")
        result = estimate(diagram, frame, mapping, method=args.method, adjust=adjust,
                          correction=args.correction, checks=not getattr(args, "no_implication_tests", False))
        result["validation"] = None if args.no_validation else validate(
            diagram, frame, mapping, method=args.method, adjust=adjust, correction=args.correction,
            resamples=args.resamples, set_cap=args.set_cap, implication_checks=result["checks"] or None)
        result["sensitivity"] = sensitivity(diagram, frame, mapping, method=args.method, adjust=adjust,
                                            statements=_room(getattr(args, "room", None)))
    except (DataError, DiagramError) as exc:
        return _fail(exc.message)
    json.dump(json_ready(result), sys.stdout, indent=2)
    sys.stdout.write("\n")
    return 0


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(prog="arrowmoot")
    add_parser(parser.add_subparsers(dest="command", required=True))
    args = parser.parse_args(argv)
    return args.handler(args)


if __name__ == "__main__":
    sys.exit(main())
