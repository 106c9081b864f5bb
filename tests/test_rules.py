"""The rule table: every command has one rule, checked once, and the page gets the same table."""

from __future__ import annotations

import re
from pathlib import Path

import pytest

from app.errors import DiagramLocked, FacilitatorOnly, NeedsRole, ReadOnly, UseProposal, WrongStage
from app.workshop.commands import COMMAND_TYPES
from app.workshop.models import Member, Role
from app.workshop.rules import RULES, check
from app.workshop.stages import STAGES

ROOT = Path(__file__).resolve().parent.parent
FACILITATOR = Member(id="mf", name="Fran", role=Role.FACILITATOR)
PARTICIPANT = Member(id="mp", name="Pat")
ANALYST = Member(id="ma", name="Ana", analyst=True)
READER = Member(id="mr", name="Rae", role=Role.READER)


def test_every_command_has_one_rule():
    assert set(COMMAND_TYPES) <= set(RULES)


@pytest.mark.parametrize("command", COMMAND_TYPES)
def test_a_reader_changes_nothing(command):
    for stage in STAGES:
        with pytest.raises(ReadOnly):
            check(command, READER, stage)


@pytest.mark.parametrize("command,member,stage,error", [
    ("set_stage", PARTICIPANT, "drafting", FacilitatorOnly),
    ("undo", ANALYST, "debating", FacilitatorOnly),          # the analyst role does not facilitate
    ("add_variable", PARTICIPANT, "agreed", DiagramLocked),
    ("vote", FACILITATOR, "estimation", DiagramLocked),       # the lock holds for the facilitator too
    ("add_arrow", PARTICIPANT, "debating", UseProposal),
    ("delete_variable", PARTICIPANT, "debating", FacilitatorOnly),
    ("propose", PARTICIPANT, "drafting", WrongStage),
    ("settle", FACILITATOR, "drafting", WrongStage),
    ("estimate", PARTICIPANT, "agreed", NeedsRole),
    ("estimate", ANALYST, "debating", WrongStage),
    ("export_record", READER, "agreed", NeedsRole),           # reading a record is not a change
])
def test_refusals_name_the_problem(command, member, stage, error):
    with pytest.raises(error):
        check(command, member, stage)


@pytest.mark.parametrize("command,member,stage", [
    ("add_arrow", FACILITATOR, "debating"),
    ("add_arrow", PARTICIPANT, "drafting"),
    ("move_variable", PARTICIPANT, "estimation"),             # positions move in any stage
    ("estimate", ANALYST, "estimation"),
    ("estimate", FACILITATOR, "agreed"),                      # the facilitator counts as an analyst
    ("set_stage", FACILITATOR, "agreed"),
])
def test_allowed_where_the_table_says(command, member, stage):
    check(command, member, stage)


def test_the_page_reads_the_same_words_and_rules(client):
    from app.workshop.stages import STAGE_TITLES

    served = client.get("/api/vocabulary").json()
    assert served["stage_titles"] == {str(k): v for k, v in STAGE_TITLES.items()}
    assert served["locked_stages"] == ["agreed", "estimation"]
    assert served["vote_choices"] == {"agree": "Agree", "disagree": "Disagree", "unsure": "Unsure"}
    assert served["permissions"]["settle"] == {"roles": ["facilitator"], "stages": ["debating"],
                                                "facilitator_in": []}
    assert set(served["permissions"]) == set(RULES)


def test_the_scripts_keep_no_copy_of_the_stage_or_vote_words():
    """The session scripts import the served words (static/js/vocabulary.js) instead."""
    copies = re.compile(r"\['agreed', 'estimation'\]|agree: 'Agree'|drafting: 'Drafting'")
    found = [p.name for p in (ROOT / "static" / "js").glob("*.js") if copies.search(p.read_text())]
    assert found == []
