"""Test helpers live in tests/helpers/; no test module imports another test module."""

from __future__ import annotations

import ast
from pathlib import Path

TESTS = Path(__file__).resolve().parent


def test_no_test_imports_another_test_module():
    offenders = []
    for path in sorted(TESTS.glob("*.py")):
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
            names = []
            if isinstance(node, ast.ImportFrom) and node.module:
                names = [node.module]
            elif isinstance(node, ast.Import):
                names = [alias.name for alias in node.names]
            for name in names:
                last = name.split(".")[-1]
                if last.startswith("test_") or last == "conftest" or (TESTS / f"{last}.py").is_file():
                    offenders.append(f"{path.name}: {name}")
    assert offenders == [], "move shared code to tests/helpers/"
