"""A real workshop in two chromium windows: facilitator and participant.

Screenshots land in tests/artifacts/ (git-ignored).
"""

from __future__ import annotations

import os

import pytest

from tests.helpers.live_server import ARTIFACTS, CHROMIUM, running_server
from tests.helpers.live_server import CHROMIUM_ARGS as ARGS


pytestmark = [
    pytest.mark.browser,
    pytest.mark.skipif(not os.path.exists(CHROMIUM), reason="Debian chromium is not installed"),
]


@pytest.fixture(name="server")
def fixture_server(tmp_path):
    with running_server(tmp_path) as base:
        yield base


def _watch(page, errors):
    page.on("console", lambda m: errors.append(f"console {m.type}: {m.text}") if m.type == "error" else None)
    page.on("pageerror", lambda e: errors.append(f"page error: {e}"))


def _centre(page, selector):
    """Centre of an SVG element; the canvas redraws on every push, so retry if it was replaced."""
    for _ in range(50):
        box = page.locator(selector).first.bounding_box()
        if box is not None:
            return box["x"] + box["width"] / 2, box["y"] + box["height"] / 2
        page.wait_for_timeout(50)
    raise AssertionError(f"{selector} never appeared")


def _node_centre(page, name):
    return _centre(page, f'.node[data-name="{name}"] .shape')


def test_two_people_draw_and_vote(server):
    from playwright.sync_api import expect, sync_playwright

    ARTIFACTS.mkdir(exist_ok=True)
    errors: list[str] = []
    with sync_playwright() as p:
        browser = p.chromium.launch(executable_path=CHROMIUM, args=ARGS)
        fac_ctx = browser.new_context(viewport={"width": 1440, "height": 900})
        par_ctx = browser.new_context(viewport={"width": 1280, "height": 820})
        fac, par = fac_ctx.new_page(), par_ctx.new_page()
        _watch(fac, errors)
        _watch(par, errors)

        # The facilitator opens a session with its question.
        fac.goto(server + "/")
        fac.fill("input[name=title]", "Does the cycle-to-work bike_lease cut sick days?")
        fac.fill("input[name=name]", "Dana")
        fac.fill("input[name=treatment]", "bike_lease")
        fac.fill("input[name=outcome]", "sick_days")
        fac.click("#create-form button[type=submit]")
        expect(fac.locator(".live-status")).to_have_text("Live")
        expect(fac.locator('.node[data-name="bike_lease"]')).to_be_visible()
        assert "#key=" not in fac.url  # the key is dropped from the address bar
        summary_before = fac.locator(".summary").inner_text()
        code = fac.locator(".join-code strong").inner_text()

        # A participant joins with the code.
        par.goto(server + f"/join/{code}")
        par.fill("input[name=name]", "Sam")
        par.click("#join-form button[type=submit]")
        expect(par.locator(".live-status")).to_have_text("Live")
        expect(fac.locator(".who")).to_contain_text("2 online")

        # Sam draws bike_lease -> sick_days by Shift-dragging.
        sx, sy = _node_centre(par, "bike_lease")
        tx, ty = _node_centre(par, "sick_days")
        par.keyboard.down("Shift")
        par.mouse.move(sx, sy)
        par.mouse.down()
        par.mouse.move((sx + tx) / 2, (sy + ty) / 2, steps=5)
        par.mouse.move(tx, ty, steps=5)
        par.mouse.up()
        par.keyboard.up("Shift")

        edge = '.edge[data-key=\'["bike_lease","sick_days"]\']'
        expect(fac.locator(edge)).to_have_count(1)
        expect(fac.locator(".summary")).not_to_have_text(summary_before)
        fac.get_by_role("tab", name="Implications").click()
        expect(fac.locator(".paths")).to_contain_text("bike_lease → sick_days")

        # Sam votes on the arrow; the tally shows on both screens.
        par.mouse.click(*_centre(par, edge + " .edge-hit"))
        expect(par.locator(".panel h3").first).to_have_text("Arrow bike_lease → sick_days")
        par.fill(".vote-reason", "cycling builds fitness")
        par.click(".vote-agree")
        expect(par.locator(".panel .tally")).to_have_text("1 agree · 0 disagree · 0 unsure")
        expect(fac.locator(edge.replace(".edge", ".edge-badge"))).to_contain_text("+1 −0 ?0")
        fac.mouse.click(*_centre(fac, edge + " .edge-hit"))
        expect(fac.locator(".panel .tally")).to_have_text("1 agree · 0 disagree · 0 unsure")
        expect(fac.locator(".votes")).to_contain_text("cycling builds fitness")

        # Sam's connection drops; an edit lands meanwhile; Sam's page catches up on reconnect.
        par.evaluate("window.arrowmoot.live.socket.close()")
        fac.evaluate("window.arrowmoot.send({type: 'add_variable', name: 'fitness', x: 420, y: 140})")
        expect(fac.locator('.node[data-name="fitness"]')).to_have_count(1)
        expect(par.locator('.node[data-name="fitness"]')).to_have_count(1, timeout=10_000)
        expect(par.locator(".live-status")).to_have_text("Live")

        fac.wait_for_timeout(300)
        fac.screenshot(path=str(ARTIFACTS / "workshop_facilitator.png"))
        par.screenshot(path=str(ARTIFACTS / "workshop_participant.png"))
        browser.close()
    assert errors == []
