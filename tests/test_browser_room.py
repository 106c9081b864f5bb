"""A live room in several chromium windows at once: what one person types survives
what the others do, and what the panels say follows the current state.

Ann and Bob each have their own browser context; the facilitator drives the session
over HTTP. Screenshots land in tests/artifacts/ (git-ignored).
"""

from __future__ import annotations

import os

import httpx
import pytest

from tests.helpers.live_server import ARTIFACTS, CHROMIUM, running_server
from tests.helpers.live_server import CHROMIUM_ARGS as ARGS
from tests.helpers.room import DOCUMENT, TOKEN_HEADER, wait

pytestmark = [
    pytest.mark.browser,
    pytest.mark.skipif(not os.path.exists(CHROMIUM), reason="Debian chromium is not installed"),
]

class Room:
    """A session with a facilitator (HTTP) and members who each get a browser page."""

    def __init__(self, http, browser, base, errors):
        self.http, self.browser, self.base, self.errors = http, browser, base, errors
        created = http.post("/api/sessions", json={"title": "Room check", "name": "Fay",
                                                   "document": DOCUMENT}).json()
        self.sid, self.fac, self.code = created["session_id"], created["token"], created["join_code"]

    def send(self, token, command):
        r = self.http.post(f"/api/sessions/{self.sid}/commands", json=command, headers={TOKEN_HEADER: token})
        assert r.status_code == 200, r.text
        return r.json()["revision"]

    def member(self, name, viewport=(1440, 900)):
        token = self.http.post("/api/join", json={"code": self.code, "name": name}).json()["token"]
        context = self.browser.new_context(viewport={"width": viewport[0], "height": viewport[1]})
        page = context.new_page()
        page.on("console", lambda m: self.errors.append(f"{name} console: {m.text}") if m.type == "error" else None)
        page.on("pageerror", lambda e: self.errors.append(f"{name} page error: {e}"))
        page.goto(f"{self.base}/s/{self.sid}#key={token}")
        wait(page, "!!(window.arrowmoot?.state && document.querySelector('.live-status.live-live'))", "live")
        return page, token


def at_revision(page, revision):
    wait(page, f"window.arrowmoot.state.revision >= {revision} && window.arrowmoot.analysis?.revision >= {revision}",
         f"revision {revision}")


def select_variable(page, name):
    box = page.locator(f'.node[data-name="{name}"] .shape').first.bounding_box()
    page.mouse.click(box["x"] + box["width"] / 2, box["y"] + box["height"] / 2)
    wait(page, f"document.querySelector('.panel h3')?.textContent === 'Variable {name}'", f"{name} selected")


FOCUS = """() => { const f = document.activeElement;
  return { label: f.getAttribute('aria-label'), value: f.value, start: f.selectionStart, end: f.selectionEnd }; }"""


@pytest.fixture(name="room")
def fixture_room(tmp_path):
    from playwright.sync_api import sync_playwright

    ARTIFACTS.mkdir(exist_ok=True)
    errors: list[str] = []
    with running_server(tmp_path) as base, httpx.Client(base_url=base, timeout=30) as http, \
            sync_playwright() as p:
        browser = p.chromium.launch(executable_path=CHROMIUM, args=ARGS)
        try:
            yield Room(http, browser, base, errors)
        finally:
            browser.close()
    assert errors == []


def test_typing_survives_other_peoples_edits(room):
    """Focus, caret and unsaved text stay through live updates; changes and deletions
    by someone else are said beside the field, and the typing is kept."""
    ann, _ = room.member("Ann")
    bob, bob_token = room.member("Bob", (1280, 720))

    # Ann starts describing fitness and moves the caret back into her text.
    select_variable(ann, "fitness")
    description = ann.locator('.panel textarea[aria-label="Description"]')
    description.click()
    ann.keyboard.type("Riders are fitter")
    for _ in range(6):
        ann.keyboard.press("ArrowLeft")
    # Bob adds a variable from his own page; Ann's panel is redrawn by the push.
    revision = bob.evaluate("window.arrowmoot.send({ type: 'add_variable', name: 'weather', x: 700, y: 90 })"
                            ".then((ack) => ack.revision)")
    at_revision(ann, revision)
    assert ann.locator('.node[data-name="weather"]').count() == 1
    assert ann.evaluate(FOCUS) == {"label": "Description", "value": "Riders are fitter", "start": 11, "end": 11}
    ann.keyboard.type("much ")
    assert description.input_value() == "Riders are much fitter"

    # Bob rewrites the same description: Ann's text stays, a note says what it now reads.
    revision = room.send(bob_token, {"type": "update_variable", "name": "fitness", "description": "Bob's words"})
    at_revision(ann, revision)
    assert description.input_value() == "Riders are much fitter"
    assert ann.evaluate(FOCUS)["label"] == "Description"
    note = ann.locator(".panel .draft-note")
    assert "Someone else changed this while you were typing" in note.inner_text()
    assert "“Bob's words”" in note.inner_text()
    ann.screenshot(path=str(ARTIFACTS / "room-draft-changed.png"))
    # Saving sends Ann's text; the note goes once the field holds what the server holds.
    ann.locator(".panel button[type=submit]").click()
    wait(ann, "window.arrowmoot.state.document.variables.find((v) => v.name === 'fitness').description"
         " === 'Riders are much fitter'", "Ann's description saved")
    wait(ann, "!document.querySelector('.panel .draft-note')", "the note gone")

    # Ann types about commute; Bob deletes commute: the text is shown to copy, with who did it.
    select_variable(ann, "commute")
    ann.locator('.panel textarea[aria-label="Description"]').fill("Long rides tire people")
    revision = room.send(bob_token, {"type": "delete_variable", "name": "commute"})
    at_revision(ann, revision)
    orphan = ann.locator(".panel .draft-orphan")
    assert "Bob deleted variable 'commute' while you were typing" in orphan.inner_text()
    assert orphan.locator("textarea").input_value() == "Long rides tire people"
    ann.screenshot(path=str(ARTIFACTS / "room-draft-deleted.png"))


def test_vote_reason_survives_other_votes(room):
    room.send(room.fac, {"type": "set_stage", "stage": "debating"})
    ann, _ = room.member("Ann")
    bob, bob_token = room.member("Bob", (1024, 768))
    room.send(bob_token, {"type": "propose", "kind": "add", "from": "commute", "to": "fitness", "reason": "hills"})
    for page in (ann, bob):
        page.locator('.tabs [data-tab="debate"]').click()
        wait(page, "!!document.querySelector('.panel [data-proposal=\"1\"] .vote-reason')", "the proposal")
    reason = ann.locator('.panel [data-proposal="1"] .vote-reason')
    reason.click()
    ann.keyboard.type("Only for those who ride uphi")
    # Bob votes from his page by clicking; the push rebuilds Ann's Debate panel.
    bob.locator('.panel [data-proposal="1"] button[data-choice="agree"]').click()
    wait(ann, "window.arrowmoot.state.proposals[0].tally.agree === 1", "Bob's vote")
    assert ann.evaluate(FOCUS) == {"label": "Reason for your vote", "value": "Only for those who ride uphi",
                                   "start": 28, "end": 28}
    ann.keyboard.type("ll")
    ann.locator('.panel [data-proposal="1"] button[data-choice="unsure"]').click()
    wait(ann, "window.arrowmoot.state.proposals[0].tally.unsure === 1", "Ann's vote")
    votes = ann.evaluate("window.arrowmoot.state.proposals[0].votes.map((v) => [v.name, v.reason])")
    assert ["Ann", "Only for those who ride uphill"] in votes

    # The facilitator settles the proposal while Ann is retyping her reason: voting has
    # closed, so the field is kept (read-only) with a note instead of vanishing.
    reason.fill("Changed my mind")
    revision = room.send(room.fac, {"type": "settle", "proposal": 1, "decision": "reject"})
    at_revision(ann, revision)
    kept = ann.locator('.panel [data-proposal="1"] .vote-reason')
    assert kept.input_value() == "Changed my mind" and kept.is_disabled()
    assert "can no longer be changed here" in ann.locator('.panel [data-proposal="1"] .draft-note').inner_text()


def test_paths_heading_follows_the_set_shown(room):
    """Showing a set and clicking it again lists the paths given nothing once more."""
    ann, _ = room.member("Ann")
    heading = ann.locator(".panel h3", has_text="Non-causal paths left open")
    chip = ann.locator(".panel .chip", has_text="{ age }").first
    assert heading.text_content() == "Non-causal paths left open (adjusting for nothing)"
    open_paths = ann.evaluate(
        "[...document.querySelectorAll('.panel h3')].find((h) => h.textContent.startsWith('Non-causal paths left open'))"
        ".nextElementSibling.textContent")
    assert "bike_lease ← age → sick_days" in open_paths

    chip.click()
    wait(ann, "[...document.querySelectorAll('.panel h3')].some((h) => h.textContent === "
              "'Non-causal paths left open given { age }')", "the heading given age")
    wait(ann, "!!document.querySelector('.panel .set-check.set-valid')", "the check of { age }")
    given = ann.evaluate(
        "[...document.querySelectorAll('.panel h3')].find((h) => h.textContent.startsWith('Non-causal paths left open'))"
        ".nextElementSibling.textContent")
    assert given.startswith("No open non-causal path")

    ann.locator(".panel .chip", has_text="{ age }").first.click()
    wait(ann, "[...document.querySelectorAll('.panel h3')].some((h) => h.textContent === "
              "'Non-causal paths left open (adjusting for nothing)')", "the heading given nothing")
    again = ann.evaluate(
        "[...document.querySelectorAll('.panel h3')].find((h) => h.textContent.startsWith('Non-causal paths left open'))"
        ".nextElementSibling.textContent")
    assert again == open_paths
    assert ann.locator(".panel .set-check").count() == 0

    # After an edit the shown set is checked again against the new diagram.
    chip = ann.locator(".panel .chip", has_text="{ age }").first
    chip.click()
    wait(ann, "!!document.querySelector('.panel .set-check.set-valid')", "the check of { age }")
    revision = room.send(room.fac, {"type": "add_arrow", "from": "commute", "to": "bike_lease"})
    room.send(room.fac, {"type": "add_arrow", "from": "commute", "to": "sick_days"})
    at_revision(ann, revision + 1)
    wait(ann, "!!document.querySelector('.panel .set-check.set-invalid')", "{ age } found invalid after the edit")
    assert "bike_lease ← commute → sick_days" in ann.evaluate(
        "[...document.querySelectorAll('.panel h3')].find((h) => h.textContent.startsWith('Non-causal paths left open'))"
        ".nextElementSibling.textContent")


def _fac_page(room, viewport=(1440, 900)):
    context = room.browser.new_context(viewport={"width": viewport[0], "height": viewport[1]})
    page = context.new_page()
    page.on("pageerror", lambda e: room.errors.append(f"Fay page error: {e}"))
    page.goto(f"{room.base}/s/{room.sid}#key={room.fac}")
    wait(page, "!!(window.arrowmoot?.state && document.querySelector('.live-status.live-live'))", "live")
    return page


def _stage(page):
    return page.evaluate("window.arrowmoot.state.session.stage")


def test_locking_lists_what_is_still_open_and_locked_tools_say_why(room):
    fay = _fac_page(room)
    ann_token = room.http.post("/api/join", json={"code": room.code, "name": "Ann"}).json()["token"]
    fay.locator(".stages button", has_text="2. Debating").click()
    wait(fay, "window.arrowmoot.state.session.stage === 'debating'", "debating")
    revision = room.send(ann_token, {"type": "vote", "from": "age", "to": "sick_days", "choice": "disagree",
                                     "reason": "age hardly matters"})
    revision = room.send(ann_token, {"type": "propose", "kind": "add", "from": "commute", "to": "bike_lease"})
    at_revision(fay, revision)

    # An open proposal: the dialog says so and the diagram cannot be locked yet.
    fay.locator(".stages button", has_text="3. Agreed").click()
    dialog = fay.locator("dialog.confirm-step")
    assert dialog.locator("h2").inner_text() == "1 proposal is still open"
    assert "#1 add the arrow commute → bike_lease" in dialog.inner_text() or "#1" in dialog.inner_text()
    assert dialog.locator("button", has_text="Lock it").count() == 0
    fay.screenshot(path=str(ARTIFACTS / "room-lock-open.png"))
    dialog.locator("button", has_text="Close").click()
    assert _stage(fay) == "debating"

    # Left disputed: the move is confirmed with the disputes listed, arrows in their direction.
    revision = room.send(room.fac, {"type": "settle", "proposal": 1, "decision": "dispute"})
    at_revision(fay, revision)
    fay.locator(".stages button", has_text="3. Agreed").click()
    text = dialog.inner_text()
    assert "2 arrows are still in dispute" in text
    assert "age → sick_days (as drawn) or no arrow — arrow age → sick_days voted against" in text
    assert "commute → bike_lease or no arrow (as drawn)" in text
    fay.screenshot(path=str(ARTIFACTS / "room-lock-disputes.png"))
    dialog.locator("button", has_text="Not yet").click()
    assert _stage(fay) == "debating"
    fay.locator(".stages button", has_text="3. Agreed").click()
    dialog.locator("button", has_text="Lock it (Agreed)").click()
    wait(fay, "window.arrowmoot.state.session.stage === 'agreed'", "agreed")

    # Locked: the drawing tools are off and say why; no arrow handle is drawn.
    add = fay.locator(".toolbar button", has_text="+ Variable")
    assert add.is_disabled()
    assert "locked in the Agreed stage; you can reopen it" in add.get_attribute("title")
    assert fay.locator(".toolbar button", has_text="Draw arrow").is_disabled()
    assert fay.locator(".node .port").count() == 0
    fay.screenshot(path=str(ARTIFACTS / "room-locked-tools.png"))


def test_a_jump_says_which_stages_it_skips(room):
    fay = _fac_page(room, (1280, 720))
    fay.locator(".stages button", has_text="4. Estimation").click()
    text = fay.locator("dialog.confirm-step").inner_text()
    assert "Debating is skipped" in text and "Agreed is skipped" in text
    fay.locator("dialog.confirm-step button", has_text="Not yet").click()
    assert _stage(fay) == "drafting"


def test_debate_writes_arrows_in_their_direction_and_spells_out_decisive(room):
    room.send(room.fac, {"type": "set_stage", "stage": "debating"})
    ann, ann_token = room.member("Ann")
    room.send(ann_token, {"type": "vote", "from": "age", "to": "sick_days", "choice": "disagree"})
    revision = room.send(ann_token, {"type": "propose", "kind": "add", "from": "commute", "to": "bike_lease"})
    at_revision(ann, revision)
    ann.locator('.tabs [data-tab="debate"]').click()
    wait(ann, "document.querySelectorAll('.panel .dispute').length === 2", "both disputes")
    headers = ann.locator(".panel .dispute header").all_inner_texts()
    assert any("age → sick_days (as drawn) or no arrow: decisive" in h for h in headers), headers
    assert any("commute → bike_lease or no arrow (as drawn): does not change the answer" in h for h in headers), headers
    decisive = ann.locator(".panel .dispute-decisive").inner_text()
    # Without age -> sick_days, { } becomes minimal and { age } is no longer minimal but
    # stays valid: age still blocks nothing it should not (back-door criterion, Pearl 2009, 3.3.1).
    assert ("With no arrow: the list of minimal adjustment sets changes ({ } (nothing) joins; { age } leaves). "
            "Every set listed now stays valid") in decisive
    ann.screenshot(path=str(ARTIFACTS / "room-debate-direction.png"))


def test_drawing_a_proposal_asks_for_an_optional_reason(room):
    room.send(room.fac, {"type": "set_stage", "stage": "debating"})
    bob, _ = room.member("Bob", (1280, 720))

    def centre(name):
        box = bob.locator(f'.node[data-name="{name}"] .shape').first.bounding_box()
        return box["x"] + box["width"] / 2, box["y"] + box["height"] / 2

    (x1, y1), (x2, y2) = centre("commute"), centre("sick_days")
    bob.keyboard.down("Shift")
    bob.mouse.move(x1, y1)
    bob.mouse.down()
    bob.mouse.move(x2, y2, steps=8)
    bob.mouse.up()
    bob.keyboard.up("Shift")
    dialog = bob.locator("dialog.ask")
    assert dialog.locator("h2").inner_text() == "Propose to add commute → sick_days"
    dialog.locator("input").fill("long rides tire people out")
    dialog.locator("button[type=submit]").click()
    wait(bob, "window.arrowmoot.state.proposals.length === 1", "the proposal")
    proposal = bob.evaluate("window.arrowmoot.state.proposals[0]")
    assert (proposal["kind"], proposal["reason"]) == ("add", "long rides tire people out")
    assert "“long rides tire people out”" in bob.locator('.panel [data-proposal="1"] .byline').inner_text()


def _tab_to(page, predicate, what, limit=120):
    """Press Tab until the focused element satisfies ``predicate`` (a JS expression on `f`)."""
    for _ in range(limit):
        page.keyboard.press("Tab")
        if page.evaluate(f"(() => {{ const f = document.activeElement; return !!f && ({predicate}); }})()"):
            return
    raise AssertionError(f"Tab never reached {what}")


def _button(text):
    return f"f.tagName === 'BUTTON' && f.textContent.trim() === {text!r}"


def test_the_whole_workshop_works_from_the_keyboard(room):
    """Add, select, connect, move, vote and settle with keys alone; others hear votes,
    proposals and stage moves through a polite live region."""
    fay = _fac_page(room)
    ann, _ = room.member("Ann", (1280, 720))
    fay.locator(".canvas").focus()

    # add: N opens the dialog, Enter adds and selects
    fay.keyboard.press("n")
    fay.keyboard.type("weather")
    fay.keyboard.press("Enter")
    wait(fay, "window.arrowmoot.view.selection?.name === 'weather'", "weather selected")
    # connect: the select beside "Arrow from weather to", then its button
    _tab_to(fay, "f.tagName === 'SELECT'", "the arrow target")
    fay.keyboard.type("sick")
    _tab_to(fay, _button("Draw this arrow"), "the draw button")
    fay.keyboard.press("Enter")
    wait(fay, "window.arrowmoot.state.document.arrows.some((a) => a.from === 'weather' && a.to === 'sick_days')",
         "the arrow weather → sick_days")
    # move: arrow keys with focus outside a field
    x = fay.evaluate("window.arrowmoot.state.document.variables.find((v) => v.name === 'weather').x")
    fay.keyboard.press("ArrowRight")
    wait(fay, f"window.arrowmoot.state.document.variables.find((v) => v.name === 'weather').x === {x + 20}",
         "weather moved")
    # select: Escape clears, the list offers every variable; ] steps through them
    fay.keyboard.press("Escape")
    _tab_to(fay, _button("commute"), "commute in the list")
    fay.keyboard.press("Enter")
    wait(fay, "window.arrowmoot.view.selection?.name === 'commute'", "commute selected")
    assert fay.evaluate("document.activeElement.textContent") == "Variable commute"
    fay.keyboard.press("]")
    wait(fay, "window.arrowmoot.view.selection?.name === 'weather'", "the next variable")

    # stage move by keyboard; Ann's page announces it
    _tab_to(fay, _button("2. Debating"), "the Debating stage")
    fay.keyboard.press("Enter")
    wait(fay, "window.arrowmoot.state.session.stage === 'debating'", "debating")
    wait(ann, "document.querySelector('[aria-live=polite][role=log]')?.textContent.includes('Fay moved')",
         "the stage change announced")

    # propose with a reason, from the keyboard
    fay.keyboard.press("[")
    wait(fay, "window.arrowmoot.view.selection?.name === 'commute'", "commute again")
    _tab_to(fay, "f.tagName === 'SELECT'", "the arrow target")
    fay.keyboard.type("fit")
    _tab_to(fay, _button("Propose this arrow"), "the propose button")
    fay.keyboard.press("Enter")
    fay.keyboard.type("hills make riders fitter")
    fay.keyboard.press("Enter")
    wait(fay, "window.arrowmoot.state.proposals.length === 1", "the proposal")
    wait(ann, "document.querySelector('[aria-live=polite][role=log]')?.textContent.includes('Fay proposed #1')",
         "the proposal announced")

    # vote and settle on the Debate tab
    _tab_to(fay, "f.dataset.tab === 'debate'", "the Debate tab")
    fay.keyboard.press("Enter")
    _tab_to(fay, "f.dataset.choice === 'agree'", "Agree")
    fay.keyboard.press("Enter")
    wait(fay, "window.arrowmoot.state.proposals[0].tally.agree === 1", "the vote")
    wait(ann, "document.querySelector('[aria-live=polite][role=log]')?.textContent.includes('Fay voted agree')",
         "the vote announced")
    _tab_to(fay, _button("Accept"), "Accept")
    fay.keyboard.press("Enter")
    wait(fay, "window.arrowmoot.state.proposals[0].status === 'accepted'", "accepted")
    assert fay.evaluate("window.arrowmoot.state.document.arrows.some((a) => a.from === 'commute' && a.to === 'fitness')")
    fay.screenshot(path=str(ARTIFACTS / "room-keyboard.png"))


def test_a_wrong_join_code_is_answered_on_the_home_form(room):
    context = room.browser.new_context(viewport={"width": 390, "height": 844})
    page = context.new_page()
    page.goto(room.base + "/")
    page.fill("#join-code-form input[name=code]", "zzzzzz")
    page.click("#join-code-form button[type=submit]")
    error = page.locator("#join-error")
    wait(page, "document.getElementById('join-error').textContent.length > 0", "the answer")
    assert error.inner_text().startswith("No session has the code ZZZZZZ. Check it with the facilitator")
    assert page.url == room.base + "/"
    page.screenshot(path=str(ARTIFACTS / "room-home-wrong-code.png"))
    page.fill("#join-code-form input[name=code]", room.code.lower())
    page.click("#join-code-form button[type=submit]")
    page.wait_for_url(f"{room.base}/join/{room.code}")
    assert page.locator("#join-form").count() == 1


@pytest.mark.parametrize("listen", ["", "192.0.2.10"])
def test_the_join_screen_shows_a_reachable_address_or_the_host_advice(tmp_path, monkeypatch, listen):
    """192.0.2.10 is a documentation address (RFC 5737): shown, never contacted."""
    from playwright.sync_api import sync_playwright

    if listen:
        monkeypatch.setenv("ARROWMOOT_LISTEN_HOST", listen)
    errors: list[str] = []
    with running_server(tmp_path) as base, httpx.Client(base_url=base, timeout=30) as http, \
            sync_playwright() as p:
        browser = p.chromium.launch(executable_path=CHROMIUM, args=ARGS)
        try:
            room = Room(http, browser, base, errors)
            for size in ((1280, 720), (390, 844)):
                page = _fac_page(room, size)
                page.locator(".join-code").click()
                dialog = page.locator("dialog.join-screen")
                wait(page, "!document.querySelector('dialog.join-screen')?.textContent.includes('Finding')", "the address")
                if listen:
                    port = base.rsplit(":", 1)[1]
                    assert dialog.locator(".join-url").inner_text() == f"http://{listen}:{port}/join/{room.code}"
                    assert dialog.locator("img.join-qr").get_attribute("src").startswith("data:image/svg+xml")
                else:
                    assert "arrowmoot serve --host 0.0.0.0" in dialog.locator(".join-advice").inner_text()
                    assert dialog.locator("img.join-qr").count() == 0
                page.screenshot(path=str(ARTIFACTS / f"room-join-{'network' if listen else 'loopback'}-{size[0]}.png"))
                page.context.close()
        finally:
            browser.close()
    assert errors == []


def test_a_read_only_record_says_what_read_only_means(room):
    revision = room.send(room.fac, {"type": "set_stage", "stage": "debating"})
    bundle = room.http.get(f"/api/sessions/{room.sid}/export/bundle", headers={TOKEN_HEADER: room.fac}).json()
    opened = room.http.post("/api/records/import?mode=read-only&name=Rita", json=bundle)
    assert opened.status_code == 201, opened.text
    data = opened.json()
    context = room.browser.new_context(viewport={"width": 1024, "height": 768})
    page = context.new_page()
    page.goto(f"{room.base}/s/{data['session_id']}#key={data['token']}")
    wait(page, "!!(window.arrowmoot?.state && document.querySelector('.live-status.live-live'))", "live")
    banner = page.locator(".stage-banner").inner_text()
    assert banner.startswith("A read-only copy of a workshop record: everything can be read, nothing can be changed")
    assert "facilitator can reopen" not in page.locator("body").inner_text()
    assert "reader of a read-only record" in page.locator(".who").inner_text()
    add = page.locator(".toolbar button", has_text="+ Variable")
    assert add.is_disabled() and "read-only copy" in add.get_attribute("title")
    page.locator('.node[data-name="age"] .shape').first.click()
    assert page.locator(".panel .vote").count() == 0
    assert page.locator(".node .port").count() == 0
    page.screenshot(path=str(ARTIFACTS / "room-read-only.png"))
    assert revision


def test_a_left_out_arrow_can_be_kept_out_on_purpose(room):
    # with commute -> bike_lease drawn, a commute -> sick_days arrow would break { age }
    room.send(room.fac, {"type": "add_arrow", "from": "commute", "to": "bike_lease"})
    room.send(room.fac, {"type": "set_stage", "stage": "debating"})
    fay = _fac_page(room)
    fay.locator('.tabs [data-tab="debate"]').click()
    wait(fay, "!!document.querySelector('.panel .absent-list li button')", "the left-out arrows", seconds=60)
    first = fay.locator(".panel .absent-list li").first
    arrow = first.locator("strong").inner_text()
    source, target = arrow.split(" → ")
    first.locator("button", has_text="Considered, stays out").click()
    fay.locator("dialog.ask input").fill("no plausible route")
    fay.locator("dialog.ask button[type=submit]").click()
    wait(fay, "(window.arrowmoot.state.absent_marks || []).length === 1", "the mark")
    considered = fay.locator(".panel .absent-considered")
    assert considered.locator("summary").inner_text() == "Considered, stays out (1)"
    considered.locator("summary").click()
    assert f"{arrow} — Fay: “no plausible route”" in considered.inner_text()
    assert arrow not in [t for t in fay.locator(".panel .absent > .absent-list li strong").all_inner_texts()]
    fay.screenshot(path=str(ARTIFACTS / "room-considered.png"))
    history = room.http.get(f"/api/sessions/{room.sid}/history", headers={TOKEN_HEADER: room.fac}).json()["events"]
    assert history[-1]["summary"] == f"considered {arrow} and keeps it out: no plausible route"
    report = room.http.get(f"/api/sessions/{room.sid}/report", headers={TOKEN_HEADER: room.fac}).text
    assert "Considered by the room and kept out (Fay," in report and "no plausible route" in report
    assert source and target
