"""A report page as the standard library's html.parser sees it (shared by the
report tests; not the code under test): images, header scopes, scripts, text."""

from __future__ import annotations

from html.parser import HTMLParser


class HtmlPage(HTMLParser):
    def __init__(self) -> None:
        super().__init__()
        self.imgs: list[dict[str, str]] = []
        self.th_scopes: list[str | None] = []
        self.scripts = 0
        self.text: list[str] = []

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        a = {k: v or "" for k, v in attrs}
        if tag == "img":
            self.imgs.append(a)
        if tag == "th":
            self.th_scopes.append(a.get("scope") or None)
        if tag == "script":
            self.scripts += 1

    def handle_data(self, data: str) -> None:
        self.text.append(data)
