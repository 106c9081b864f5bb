"""Reading a report page: its sections, headings, visible text and tags."""

from __future__ import annotations

from html.parser import HTMLParser

__all__ = ["parse"]


class _Page(HTMLParser):
    """Collects section ids, headings, visible text and every tag seen."""

    def __init__(self):
        super().__init__()
        self.sections, self.tags, self.text, self.headings = [], [], [], []
        self._in_h2 = False

    def handle_starttag(self, tag, attrs):
        self.tags.append((tag, dict(attrs)))
        if tag == "section":
            self.sections.append(dict(attrs).get("id"))
        self._in_h2 = tag == "h2"

    def handle_endtag(self, tag):
        if tag == "h2":
            self._in_h2 = False

    def handle_data(self, data):
        self.text.append(data)
        if self._in_h2:
            self.headings.append(data.strip())


def parse(html: str) -> _Page:
    page = _Page()
    page.feed(html)
    page.full_text = " ".join(" ".join(page.text).split())
    return page
