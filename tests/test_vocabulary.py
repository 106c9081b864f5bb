"""Our own words on screens, in command output and in files.

The strings listed in RETIRED were once shown to people and read like other
programs' output; none may come back in templates/, static/ or CLI output.
The estimate explanation is checked on simulated data (a simulated truth:
the effect size does not matter, only the words).
"""

from __future__ import annotations

import json
import re
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from app.cli import main as cli_main
from app.estimation.service import estimate
from app.graph.document import parse_document
from app.graph.implications import independence_text

from tests.helpers.graph_cases import confounding_graph, document

ROOT = Path(__file__).resolve().parents[1]

# Retired user-facing strings (case-insensitive where marked).
RETIRED = [
    ("Testable implications", re.I),
    ("⊥", 0),  # tack-and-bar independence notation
    ("⫫", 0),
    ("joining (1) versus not (0)", 0),
    ("biasing", re.I),
    ("#d6e6f5", re.I),  # the old outcome fill
    ("#1d3f66", re.I),  # and its outline
    ("identify_effect", 0),
    ("refute", re.I),
    ("r2dz", 0),  # the sensitivity result's old keys and chart
    ("r2yz", 0),
    ("adjusted_estimate", 0),
    ("adjusted_se", 0),
    ("am-contour", 0),
    ("red dashed", re.I),
]


def _retired_in(text: str) -> list[str]:
    return [s for s, flags in RETIRED if re.search(re.escape(s), text, flags)]


@pytest.mark.parametrize("folder", ["templates", "static"])
def test_retired_strings_absent_from_pages(folder):
    found = {}
    for path in sorted((ROOT / folder).rglob("*")):
        if path.is_file() and path.suffix in (".html", ".js", ".css", ".md", ".json", ".svg"):
            hits = _retired_in(path.read_text(encoding="utf-8"))
            if hits:
                found[str(path.relative_to(ROOT))] = hits
    assert found == {}


def test_retired_strings_absent_from_readme_and_app_code():
    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    assert _retired_in(readme) == [] and "retailer" not in readme
    for path in (ROOT / "app").rglob("*.py"):
        assert "identify_effect" not in path.read_text(encoding="utf-8"), path


def test_the_retired_check_can_fail():
    """The scan above finds each retired string when it is present."""
    for s, _ in RETIRED:
        assert _retired_in(f"before {s.upper()} after") or _retired_in(f"before {s} after")


def _run_cli(capsys, *args) -> str:
    code = cli_main(list(args))
    out = capsys.readouterr()
    assert code == 0, out.err
    return out.out + out.err


def _help_text(capsys, *args) -> str:
    with pytest.raises(SystemExit):
        cli_main([*args, "--help"])
    return capsys.readouterr().out


@pytest.fixture()
def chain_file(tmp_path):
    """A chain with a confounder and an unmeasured variable: several implications."""
    doc = document([("c", "x"), ("c", "y"), ("x", "m"), ("m", "y"), ("u", "c"), ("w", "x")], "x", "y",
                   latent=["u"])
    doc["variables"][0]["description"] = "a common cause"
    path = tmp_path / "chain.json"
    path.write_text(json.dumps(doc))
    return path


def test_cli_output_uses_our_words(capsys, chain_file, tmp_path):
    text = _run_cli(capsys, "identify", str(chain_file), "--format", "text")
    assert "What the data could contradict" in text
    # w -> x -> m -> y is blocked at m, w -> x <- c -> y at c (and at the collider x).
    assert "w and y independent given {c, m}" in text
    as_json = _run_cli(capsys, "identify", str(chain_file))
    dot_out = tmp_path / "chain.dot"
    _run_cli(capsys, "export", str(chain_file), "--to", "dot", "-o", str(dot_out))
    dot = dot_out.read_text()
    helps = "".join(_help_text(capsys, *cmd) for cmd in
                    [(), ("serve",), ("identify",), ("estimate",), ("export",), ("report",)])
    for shown in (text, as_json, dot, helps):
        assert _retired_in(shown) == []
    # Our DOT attributes carry the prefix; only Graphviz's own stay bare.
    assert re.findall(r"(?<![\w])(latent|description|treatment|outcome)=", dot) == []
    assert "arrowmoot_latent=" in dot and "arrowmoot_treatment=" in dot


def test_independence_text_is_the_one_sent():
    """Every listed implication carries the words the page and the CLI show."""
    from app.graph.identification import analyze

    doc = document([("c", "x"), ("c", "y"), ("x", "m"), ("m", "y"), ("w", "x")], "x", "y")
    result = analyze(parse_document(doc))
    assert result["implications"]
    for imp in result["implications"]:
        assert imp["text"] == independence_text(imp["x"], imp["y"], imp["given"])
        assert " independent" in imp["text"] and "|" not in imp["text"]


def _simulated(treatment_values):
    """Simulated data for the confounding triangle c -> x, c -> y, x -> y (invented)."""
    rng = np.random.default_rng(7)
    n = 400
    c = rng.normal(size=n)
    t = (c + rng.normal(size=n) > 0).astype(int)
    y = 2.0 * t + c + rng.normal(size=n)
    return pd.DataFrame({"c": c, "x": pd.Series(t).map(dict(enumerate(treatment_values))), "y": y})


def test_explanation_names_numeric_coding():
    frame = _simulated([0, 1])
    result = estimate(parse_document(confounding_graph()), frame, method="regression")
    assert "for x = 1 compared with x = 0" in result["explanation"]
    assert "joining" not in result["explanation"]


def test_explanation_names_text_levels():
    frame = _simulated(["no", "yes"])
    result = estimate(parse_document(confounding_graph()), frame, method="regression")
    assert "for x = 'yes' (coded 1) compared with x = 'no' (coded 0)" in result["explanation"]
    assert result["columns"]["x"]["level_coded_1"] == "yes"
    assert result["columns"]["x"]["reference_level"] == "no"


def test_explanation_follows_the_coding_of_other_text_levels():
    """Without a yes-like word, the later level in sort order is coded 1; the words say which."""
    frame = _simulated(["phoned", "not phoned"])
    result = estimate(parse_document(confounding_graph()), frame, method="regression")
    column = result["columns"]["x"]
    high, low = column["level_coded_1"], column["reference_level"]
    assert {high, low} == {"phoned", "not phoned"}
    assert f"for x = {high!r} (coded 1) compared with x = {low!r} (coded 0)" in result["explanation"]


def test_explanation_for_a_numeric_treatment_is_per_unit():
    frame = _simulated([0, 1])
    frame["x"] = frame["x"] * 3.5 + np.random.default_rng(1).normal(size=len(frame))
    result = estimate(parse_document(confounding_graph()), frame, method="regression")
    assert "one unit more of x" in result["explanation"]
