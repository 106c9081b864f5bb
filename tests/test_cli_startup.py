"""The command line builds its parser without the estimation stack: commands
that do not estimate (``--version``, ``identify``) never import it."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
HEAVY = ("pandas", "numpy", "scipy", "statsmodels", "linearmodels", "pyarrow", "networkx")


def _modules_after(code: str) -> list[str]:
    probe = code + f"\nimport sys\nprint(sorted(m for m in {HEAVY!r} if m in sys.modules))"
    done = subprocess.run([sys.executable, "-c", probe], cwd=ROOT, capture_output=True, text=True, check=True)
    return json.loads(done.stdout.strip().splitlines()[-1].replace("'", '"'))


def test_parser_and_version_import_nothing_heavy():
    assert _modules_after("from app.cli import build_parser\nbuild_parser()") == []
    assert _modules_after("from app.cli import main\ntry:\n    main(['--version'])\nexcept SystemExit:\n    pass") == []


def test_identify_imports_the_graph_engine_only():
    code = ("from app.cli import main\nimport contextlib, io\n"
            "with contextlib.redirect_stdout(io.StringIO()):\n"
            "    main(['identify', 'sample_data/cycle_to_work.json'])")
    assert _modules_after(code) == ["networkx"]


def test_estimate_without_implication_tests_leaves_checks_null():
    done = subprocess.run([sys.executable, "-m", "app.cli", "estimate", "sample_data/cycle_to_work.json",
                           "sample_data/cycle_to_work.csv", "--no-implication-tests", "--no-validation"],
                          cwd=ROOT, capture_output=True, text=True, check=True)
    out = json.loads(done.stdout)
    assert out["checks"] is None and out["validation"] is None and out["method"] == "regression"
