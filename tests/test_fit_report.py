"""The one-fit report (fit --out DIR writes DIR/report.html and DIR/report.pdf).

Checks against the HTML rules the batch report follows (issue: escaping of
user text, self-contained, accessible): parsed with the standard library's
html.parser, not with the code under test; the PDF with pypdf.
"""

from __future__ import annotations

import base64
import json
from pathlib import Path

from click.testing import CliRunner
from html_page import HtmlPage as _Page

from characterize.cli import main

EXAMPLES = Path(__file__).resolve().parent.parent / "example_audio"


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


def test_fit_report_pdf_has_the_numbers_and_the_plot(tmp_path: Path) -> None:
    from pypdf import PdfReader

    from characterize.report.fit_html import fit_page
    from characterize.report.page import pdf_page_count

    html = _fit(tmp_path, EXAMPLES / "listening-jar-04.toml")
    pdf = html.with_name("report.pdf")
    assert pdf.read_bytes()[:5] == b"%PDF-"  # the PDF signature (ISO 32000-1, 7.5.2)
    reader = PdfReader(str(pdf))
    text = "".join(p.extract_text() for p in reader.pages)
    assert "243.2" in text  # the fitted f0 of the example (truth 243.21 Hz)
    assert "listening-jar-04" in text and "page 1 of" in text
    doc = json.loads(html.with_name("result.json").read_text(encoding="utf-8"))
    png = html.with_name("response.png").read_bytes()
    assert len(reader.pages) == pdf_page_count(fit_page(doc, png))
    # the last page holds the response plot: an embedded image
    assert len(reader.pages[-1].images) == 1


def test_fit_out_refuses_an_existing_pdf_without_force(tmp_path: Path) -> None:
    out = tmp_path / "out"
    out.mkdir()
    (out / "report.pdf").write_bytes(b"keep me")
    res = CliRunner().invoke(main, ["fit", str(EXAMPLES / "listening-jar-04.flac"),
                                    "--sweep", str(EXAMPLES / "sweep-48k.wav"),
                                    "--out", str(out)])
    assert res.exit_code == 2
    assert "report.pdf" in res.output and "--force" in res.output
    assert (out / "report.pdf").read_bytes() == b"keep me"
    assert not (out / "result.json").exists()  # checked before anything is written
