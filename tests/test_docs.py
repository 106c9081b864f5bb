"""The README stays true: every setting and every command is documented."""

from __future__ import annotations

from pathlib import Path

from app.cli import build_parser
from app.settings import SETTING_HELP

README = (Path(__file__).resolve().parent.parent / "README.md").read_text(encoding="utf-8")


def test_every_setting_is_in_the_readme():
    for name in SETTING_HELP:
        assert f"ARROWMOOT_{name.upper()}" in README, name


def test_every_command_is_in_the_readme():
    parser = build_parser()
    commands = next(a for a in parser._actions if a.dest == "command").choices
    for name in commands:
        assert f"arrowmoot {name}" in README, name


def test_readme_has_exactly_two_setup_commands():
    setup = README.split("## Set up", 1)[1].split("\n## ", 1)[0]
    commands = [line for line in setup.splitlines() if line.startswith("    ")]
    assert commands == ["    pip install -e . && arrowmoot serve", "    bash scripts/test.sh"]


def test_every_sensitivity_key_is_in_the_readme():
    """Each key the sensitivity result carries is named in the README's table."""
    import json

    import pandas as pd

    from app.estimation import service
    from app.graph.document import parse_document

    sample = Path(__file__).resolve().parent.parent / "sample_data"
    diagram = parse_document(json.loads((sample / "cycle_to_work.json").read_text()))
    frame = pd.read_csv(sample / "cycle_to_work.csv")
    reg = service.sensitivity(diagram, frame, statements=[{"by": "A", "variable": "age", "times": 2}])["regression"]
    table = README.split("| `sensitivity.regression` |", 1)[1].split("\n\n", 1)[0]
    keys = set(reg) | set(reg["benchmarks"][0]) | set(reg["room"]) | set(reg["room"]["statements"][0]) \
        | set(reg["path"][0])
    missing = sorted(k for k in keys if not any(f"{pre}{k}{end}" in table
                                                for pre in ("`", ".") for end in ("`", "[]`")))
    assert not missing, missing


def test_every_validation_key_is_in_the_readme():
    """The verdict object of ``arrowmoot estimate`` and the API, key by key."""
    import json

    import pandas as pd

    from app.estimation import service
    from app.graph.document import parse_document

    root = Path(__file__).resolve().parent.parent / "sample_data"
    diagram = parse_document(json.loads((root / "cycle_to_work.json").read_text()))
    result = service.validate(diagram, pd.read_csv(root / "cycle_to_work.csv"), resamples=20)
    table = README.split("| `verdict` |", 1)[1].split("\n\n", 1)[0]
    keys = set(result) | {k for i in result["items"] for k in i}
    for i in result["items"]:
        for row in i.get("sets", []) + i.get("controls", []):
            keys |= set(row)
    for key in keys:
        assert f"`{key}`" in table or f".{key}`" in table or f"`{key}[]" in table or key == "verdict", key
