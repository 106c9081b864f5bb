"""The report in a real chromium: served by the app, every section shown, figures inside
the page width, printed to PDF. Screenshots and the PDF go to tests/artifacts/."""

from __future__ import annotations


import httpx
import pytest

from app.reporting.report import SECTIONS

from tests.helpers.live_server import ARTIFACTS, CHROMIUM_ARGS, running_server


pytestmark = pytest.mark.browser


@pytest.fixture(name="server")
def fixture_server(tmp_path):
    with running_server(tmp_path) as base:
        yield base


class _HttpxAsTestClient:
    """Just enough of TestClient's surface for build_workshop, over a live server."""

    def __init__(self, base: str):
        self.http = httpx.Client(base_url=base, timeout=60)

    def post(self, url, **kw):
        return self.http.post(url, **kw)

    def put(self, url, **kw):
        return self.http.put(url, **kw)

    def get(self, url, **kw):
        return self.http.get(url, **kw)


def test_report_opens_prints_and_keeps_figures_on_the_page(server):
    from playwright.sync_api import sync_playwright

    from tests.helpers.workshop import build_workshop

    workshop = build_workshop(_HttpxAsTestClient(server))
    url = f"/api/sessions/{workshop.session_id}/report"
    ARTIFACTS.mkdir(parents=True, exist_ok=True)
    external: list[str] = []
    with sync_playwright() as p:
        browser = p.chromium.launch(executable_path="/usr/bin/chromium", args=CHROMIUM_ARGS)
        page = browser.new_page(viewport={"width": 1100, "height": 900},
                                extra_http_headers={"X-Arrowmoot-Token": workshop.analyst})
        page.on("request", lambda req: external.append(req.url) if not req.url.startswith(server) else None)
        errors: list[str] = []
        page.on("console", lambda msg: errors.append(msg.text) if msg.type == "error" else None)
        page.goto(server + url)
        for sid, heading in SECTIONS:
            section = page.locator(f"section#{sid}")
            assert section.count() == 1, sid
            assert section.locator("h2").inner_text() == heading
        # every figure fits inside its column: no cut-off charts
        overflow = page.evaluate("""() => [...document.querySelectorAll('figure svg')].filter(svg => {
            const r = svg.getBoundingClientRect(), f = svg.parentElement.getBoundingClientRect();
            return r.width === 0 || r.right > f.right + 1 || r.left < f.left - 1; }).length""")
        assert overflow == 0
        assert page.locator("figure.diagram svg .am-node").count() == 10
        page.screenshot(path=str(ARTIFACTS / "report_screen.png"), full_page=True)
        page.locator("figure.diagram").screenshot(path=str(ARTIFACTS / "report_diagram.png"))
        page.emulate_media(media="print")
        page.screenshot(path=str(ARTIFACTS / "report_print_media.png"), full_page=True)
        in_print = page.evaluate("""() => [...document.querySelectorAll('figure svg')].filter(svg => {
            const r = svg.getBoundingClientRect(); return r.width === 0 || r.right > document.documentElement.clientWidth + 1;
        }).length""")
        assert in_print == 0
        pdf = page.pdf(path=str(ARTIFACTS / "report.pdf"), format="A4", print_background=True)
        browser.close()
    assert pdf[:5] == b"%PDF-"
    assert pdf.count(b"/Type /Page") - pdf.count(b"/Type /Pages") >= len(SECTIONS) - 1  # page breaks between sections
    assert external == [] and errors == []


def test_records_forms_work_in_a_browser(server, tmp_path):
    """A real form post (browsers send an Origin header the guard checks) reopens a bundle."""
    from playwright.sync_api import sync_playwright

    from tests.helpers.workshop import build_workshop

    workshop = build_workshop(_HttpxAsTestClient(server), estimate=False)
    bundle = tmp_path / "s.record.json"
    bundle.write_bytes(httpx.get(f"{server}/api/sessions/{workshop.session_id}/export/bundle",
                                 headers={"X-Arrowmoot-Token": workshop.facilitator}).content)
    ARTIFACTS.mkdir(parents=True, exist_ok=True)
    with sync_playwright() as p:
        browser = p.chromium.launch(executable_path="/usr/bin/chromium", args=CHROMIUM_ARGS)
        page = browser.new_page(viewport={"width": 1000, "height": 800})
        page.goto(server + "/records")
        form = page.locator('form[action="/records/import"]')
        form.locator("input[type=file]").set_input_files(str(bundle))
        form.locator("input[name=name]").fill("Quinn")
        form.locator("select[name=mode]").select_option("read-only")
        form.locator("button").click()
        page.wait_for_load_state()
        page.screenshot(path=str(ARTIFACTS / "records_reopened.png"), full_page=True)
        assert page.locator("h1").first.inner_text() == "Session reopened"
        assert "read-only session" in page.locator("section").first.inner_text()
        page.goto(server + "/records")
        form = page.locator('form[action="/records/report"]')
        form.locator("input[type=file]").set_input_files(str(bundle))
        form.locator("button").click()
        page.wait_for_load_state()
        assert page.locator("section#decisions h2").inner_text() == "The decision record"
        browser.close()
