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
