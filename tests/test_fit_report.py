"""The one-fit report (fit --out DIR writes DIR/report.html).

Checks against the HTML rules the batch report follows (issue: escaping of
user text, self-contained, accessible): parsed with the standard library's
html.parser, not with the code under test.
"""

from __future__ import annotations

import base64
from html.parser import HTMLParser
from pathlib import Path

from click.testing import CliRunner

from characterize.cli import main

EXAMPLES = Path(__file__).resolve().parent.parent / "example_audio"


class _Page(HTMLParser):
    def __init__(self) -> None:
        super().__init__()
        self.imgs: list[dict[str, str]] = []
        self.th_scopes: list[str | None] = []
        self.scripts = 0
        self.text: list[str] = []

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        a = dict(attrs)
        if tag == "img":
            self.imgs.append({k: v or "" for k, v in a.items()})
        if tag == "th":
            self.th_scopes.append(a.get("scope"))
        if tag == "script":
            self.scripts += 1

    def handle_data(self, data: str) -> None:
        self.text.append(data)


def _fit(tmp_path: Path, obj: Path) -> Path:
    out = tmp_path / "out"
    res = CliRunner().invoke(main, ["fit", str(EXAMPLES / "listening-jar-04.flac"),
                                    "--sweep", str(EXAMPLES / "sweep-48k.wav"),
                                    "--object", str(obj), "--out", str(out)])
    assert res.exit_code == 0, res.output
    return out / "report.html"


def test_fit_report_is_self_contained_and_accessible(tmp_path: Path) -> None:
    page = _Page()
    page.feed(_fit(tmp_path, EXAMPLES / "listening-jar-04.toml").read_text(encoding="utf-8"))
    assert page.scripts == 0
    assert len(page.imgs) == 1
    img = page.imgs[0]
    assert img["src"].startswith("data:image/png;base64,")
    # the embedded image is a real PNG (PNG signature, RFC 2083)
    assert base64.b64decode(img["src"].split(",", 1)[1])[:8] == b"\x89PNG\r\n\x1a\n"
    assert len(img.get("alt", "")) > 20
    assert page.th_scopes and all(s in ("col", "row") for s in page.th_scopes)
    assert "243.2" in "".join(page.text)  # the fitted f0 of the example (truth 243.21 Hz)


def test_fit_report_escapes_user_text(tmp_path: Path) -> None:
    evil = '<script>alert(1)</script> "jar" & co'
    src = (EXAMPLES / "listening-jar-04.toml").read_text(encoding="utf-8")
    obj = tmp_path / "evil.toml"
    obj.write_text(src.replace('name = "listening-jar-04"', f"name = '{evil}'"), encoding="utf-8")
    html = _fit(tmp_path, obj).read_text(encoding="utf-8")
    assert "<script>alert(1)</script>" not in html
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in html
