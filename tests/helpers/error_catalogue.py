"""Every error code the server can answer with, found in the source, with its HTTP status.

``python -m tests.helpers.error_catalogue > docs/errors.md`` writes the catalogue;
tests/test_error_shape.py fails when the catalogue and the source disagree.
Codes come from three places: the ``code`` of each AppError subclass, the
``code=...`` given where an error is raised, and the codes the web layer
answers with itself (validation, unknown paths, the request guards).
"""

from __future__ import annotations

import ast
import importlib
import pkgutil
from pathlib import Path

import app
from app.errors import AppError
from app.web.errors import HTTP_STATUS

ROOT = Path(__file__).resolve().parents[2]

# Answered by the web layer itself, not by an AppError.
WEB_CODES = {
    "invalid_request": (HTTP_STATUS["invalid"], "the request does not match the endpoint's schema"),
    "not_found": (HTTP_STATUS["not_found"], "nothing at that path"),
    "method_not_allowed": (HTTP_STATUS["method_not_allowed"], "that method is not allowed on that path"),
    "http_error": (0, "another HTTP error from the framework (its own status)"),
    "internal_error": (HTTP_STATUS["internal"], "a bug: the server hit an unexpected problem; nothing was changed"),
    "body_too_large": (HTTP_STATUS["too_large"], "the request body is over the server's limit"),
    "cross_origin": (HTTP_STATUS["forbidden"], "a browser page from another origin sent the request"),
    "database_unreachable": (HTTP_STATUS["unavailable"], "the readiness check: the database does not answer"),
}


def _error_classes() -> dict[str, type[AppError]]:
    for module in pkgutil.walk_packages(app.__path__, "app."):
        if module.name.endswith(".worker"):
            continue
        importlib.import_module(module.name)
    found: dict[str, type[AppError]] = {}
    todo = [AppError]
    while todo:
        cls = todo.pop()
        found[cls.__name__] = cls
        todo.extend(cls.__subclasses__())
    return found


def catalogue() -> dict[str, dict]:
    """``{code: {"status": {..}, "raised_by": {..}, "example": str}}`` for every code."""
    classes = _error_classes()
    out: dict[str, dict] = {}

    def add(code: str, status: int, by: str, example: str = "") -> None:
        entry = out.setdefault(code, {"status": set(), "raised_by": set(), "example": ""})
        entry["status"].add(status)
        entry["raised_by"].add(by)
        if example and not entry["example"]:
            entry["example"] = example

    for cls in classes.values():
        if "code" in vars(cls):
            add(cls.code, HTTP_STATUS[cls.kind], cls.__name__, (cls.__doc__ or "").strip().split("\n")[0])
    for path in sorted((ROOT / "app").rglob("*.py")):
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
            if not isinstance(node, ast.Call):
                continue
            name = node.func.id if isinstance(node.func, ast.Name) else getattr(node.func, "attr", None)
            if name not in classes:
                continue
            codes = [k.value.value for k in node.keywords if k.arg == "code" and isinstance(k.value, ast.Constant)]
            if not codes and len(node.args) >= 2 and isinstance(node.args[1], ast.Constant):
                codes = [node.args[1].value]  # BundleError(message, code)
            example = ""
            if node.args and isinstance(node.args[0], ast.Constant):
                example = node.args[0].value
            elif node.args and isinstance(node.args[0], ast.JoinedStr):
                example = "".join(v.value if isinstance(v, ast.Constant) else "…" for v in node.args[0].values)
            cls = classes[name]
            for code in codes:
                add(code, HTTP_STATUS[cls.kind], name, example)
            if not codes and "code" in vars(cls) and example:
                add(cls.code, HTTP_STATUS[cls.kind], name, example)
    for code, (status, meaning) in WEB_CODES.items():
        add(code, status, "the web layer", meaning)
    return out


def _statuses(entry: dict) -> str:
    return ", ".join("its own" if s == 0 else str(s) for s in sorted(entry["status"]))


def render() -> str:
    lines = [
        "# Error codes",
        "",
        "Every error answer has one shape, over HTTP and on the WebSocket:",
        "",
        "```json",
        '{"ok": false, "error": "<a message for a person>", "status": 409, "code": "diagram_locked"}',
        "```",
        "",
        "(`cycle` is added when a diagram has one.) The message names what is wrong; the code is for",
        "programs. Each error belongs to a family (`AppError.kind` in app/errors.py) and the one table",
        "`HTTP_STATUS` in app/web/errors.py gives each family its status. This list is written by",
        "`python -m tests.helpers.error_catalogue > docs/errors.md`; a test fails when it is out of date.",
        "",
        "| code | HTTP status | raised by | for example |",
        "| --- | --- | --- | --- |",
    ]
    for code, entry in sorted(catalogue().items()):
        example = " ".join(entry["example"].split()).replace("|", "\\|")
        lines.append(f"| `{code}` | {_statuses(entry)} | {', '.join(sorted(entry['raised_by']))} | {example} |")
    return "\n".join(lines) + "\n"


if __name__ == "__main__":
    print(render(), end="")
