"""Batch reports: HTML (escaping, self-contained, accessible, rendered in a real
headless Chromium), PDF (page count, page numbers) and CSV (stable columns)."""

from __future__ import annotations

import csv
import html.parser
import io
import json
import math
import os
import re
import shutil
import subprocess
from pathlib import Path

import pytest

from characterize import batch as B
from characterize.excitation import SweepParams, make_sweep, sidecar_text
from characterize.report.csv_ import SUMMARY_COLUMNS
from characterize.simulate import Setup, simulate, write_recording

RATE_HZ = 16000.0
SWEEP = SweepParams(start_hz=50.0, stop_hz=2500.0, duration_s=1.0, rate_hz=RATE_HZ,
                    level_dbfs=-12.0, fade_in_s=0.05, fade_out_s=0.01, tail_s=0.6)
EVIL_ID = "<script>alert(1)</script>"
QUOTED_NOTE = 'said "ring it" & it\'s <b>flat</b>'
FORMULA_NOTE = "=HYPERLINK(\"http://example.invalid\")"
CHROMIUM_FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-background-networking",
                  "--disable-component-update", "--disable-sync", "--no-first-run",
                  "--hide-scrollbars", "--mute-audio", "--disable-dev-shm-usage"]


@pytest.fixture(scope="module")
def report(tmp_path_factory: pytest.TempPathFactory) -> dict:
    import soundfile as sf

    d = tmp_path_factory.mktemp("report")
    s = make_sweep(SWEEP)
    sf.write(d / "sweep.wav", s.samples, int(RATE_HZ), subtype="PCM_24")
    (d / "sweep.toml").write_text(sidecar_text(SWEEP), encoding="utf-8")
    items = [("jar-a", 300.0, 30.0, ""), (EVIL_ID, 303.0, 25.0, QUOTED_NOTE),
             ("jar-$x$", 320.0, 40.0, FORMULA_NOTE), ("jar-d", 297.0, 18.0, "")]
    rows = [["id", "recording", "note"]]
    for k, (item_id, f0, q, note) in enumerate(items):
        data, _ = simulate(Setup(f0_hz=f0, q=q, rate_hz=RATE_HZ, snr_db=40.0, sweep=SWEEP),
                           seed=50 + k)
        write_recording(str(d / f"r{k}.flac"), data, RATE_HZ, "PCM_24")
        rows.append([item_id, f"r{k}.flac", note])
    rows.append(["lost", "lost.flac", "card pulled"])
    buf = io.StringIO()
    csv.writer(buf).writerows(rows)
    (d / "manifest.csv").write_text(buf.getvalue(), encoding="utf-8")
    (d / "spec.toml").write_text('name = "jars <b>&amp;</b> \\"friends\\""\n[f0]\n'
                                 'target = "300 Hz"\ntolerance = "2 %"\n[q]\nmin = 20\n'
                                 '[defaults]\nsweep = "sweep.wav"\n', encoding="utf-8")
    out = d / "out"
    summary = B.run(d / "manifest.csv", d / "spec.toml", out, workers=2)
    return {"out": out, "summary": summary, "n": len(rows) - 1,
            "html": (out / "report.html").read_text(encoding="utf-8")}


class _Page(html.parser.HTMLParser):
    """Collects what the tests look at: rows of the items table, images, headers, links."""

    def __init__(self) -> None:
        super().__init__()
        self.stack: list[str] = []
        self.in_items = self.in_tbody = False
        self.rows: list[list[str]] = []
        self.imgs: list[dict[str, str | None]] = []
        self.ths: list[dict[str, str | None]] = []
        self.urls: list[str] = []
        self.scripts = 0
        self._cell: list[str] | None = None

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        a = dict(attrs)
        if tag == "table" and a.get("id") == "items-table":
            self.in_items = True
        if tag == "tbody" and self.in_items:
            self.in_tbody = True
        if tag == "tr" and self.in_tbody:
            self.rows.append([])
        if tag in ("td", "th") and self.in_tbody and self.rows:
            self._cell = []
        if tag == "th":
            self.ths.append(a)
        if tag == "img":
            self.imgs.append(a)
        if tag == "script":
            self.scripts += 1
        for k in ("src", "href"):
            if a.get(k):
                self.urls.append(str(a[k]))

    def handle_endtag(self, tag: str) -> None:
        if tag in ("td", "th") and self._cell is not None:
            self.rows[-1].append(" ".join("".join(self._cell).split()))
            self._cell = None
        if tag == "tbody":
            self.in_tbody = False
        if tag == "table":
            self.in_items = False

    def handle_data(self, data: str) -> None:
        if self._cell is not None:
            self._cell.append(data)


def _parse(text: str) -> _Page:
    p = _Page()
    p.feed(text)
    return p


def test_user_strings_are_escaped(report: dict) -> None:
    text = report["html"]
    assert EVIL_ID not in text and "<script" not in text.lower()
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in text
    assert QUOTED_NOTE not in text and "<b>flat</b>" not in text and "<b>&amp;</b>" not in text
    # markupsafe's escapes for " and ' (numeric character references)
    assert "said &#34;ring it&#34; &amp; it&#39;s &lt;b&gt;flat&lt;/b&gt;" in text
    page = _parse(text)
    assert page.scripts == 0
    # ...and the browser-visible text is the user's text, unchanged
    ids = [r[1] for r in page.rows]
    assert EVIL_ID in ids and "jar-$x$" in ids
    assert any(QUOTED_NOTE in cell for r in page.rows for cell in r)


def test_page_is_self_contained_and_accessible(report: dict) -> None:
    page = _parse(report["html"])
    assert len(page.rows) == report["n"]  # one row per manifest item
    assert page.imgs, "no images"
    for img in page.imgs:
        assert str(img["src"]).startswith("data:image/png;base64,")
        assert img.get("alt") and len(str(img["alt"])) > 20
    for url in page.urls:  # nothing to fetch: embedded images and in-page anchors only
        assert url.startswith(("data:image/png;base64,", "#")), url
    assert all(th.get("scope") in ("col", "row") for th in page.ths)
    # pass/fail is written out, not only coloured
    statuses = [r[2] for r in page.rows]
    assert statuses.count("✓ PASS") == report["summary"].stats.n_pass
    assert statuses.count("⚠ ERROR") == 1
    n_plots = sum(1 for i in report["summary"].items if i.plot)
    assert len(page.imgs) == 3 + n_plots
    assert "Content-Security-Policy" in report["html"]
    assert '<meta name="viewport"' in report["html"] and "@media print" in report["html"]


def _chromium() -> str | None:
    found = shutil.which("chromium") or shutil.which("chromium-browser")
    if found:
        return found
    return "/usr/bin/chromium" if os.path.exists("/usr/bin/chromium") else None


_CHECK_SCRIPT = """<script>
window.addEventListener("load", function () {
  var imgs = Array.prototype.slice.call(document.images);
  var out = {
    rows: document.querySelectorAll("#items-table tbody tr").length,
    images: imgs.length,
    loaded: imgs.filter(function (i) { return i.complete && i.naturalWidth > 0; }).length,
    scripts: document.querySelectorAll("script").length,
    pageWidth: document.documentElement.scrollWidth,
    viewport: window.innerWidth,
    evil: Array.prototype.some.call(document.querySelectorAll("#items-table tbody th"),
      function (th) { return th.textContent.trim() === %s; })
  };
  var pre = document.createElement("pre");
  pre.id = "checks";
  pre.textContent = JSON.stringify(out);
  document.body.appendChild(pre);
});
</script>"""


def test_report_renders_in_headless_chromium(report: dict, tmp_path: Path) -> None:
    chromium = _chromium()
    if chromium is None:
        if os.environ.get("CI"):
            pytest.fail("Chromium is required in CI (Debian package chromium; .ci/run installs it)")
        pytest.skip("Chromium not installed (Debian package chromium; .ci/run installs it in CI)")
    src = report["html"]
    # a copy with a checking script; the report's own policy forbids scripts, so the copy
    # allows inline ones (the real report is checked above to carry no script at all)
    probe = src.replace("default-src 'none';", "default-src 'none'; script-src 'unsafe-inline';")
    literal = json.dumps(EVIL_ID).replace("</", "<\\/")  # no "</script>" inside the probe
    probe = probe.replace("</body>", _CHECK_SCRIPT % literal + "</body>")
    page = tmp_path / "probe.html"
    page.write_text(probe, encoding="utf-8")
    common = [chromium, *CHROMIUM_FLAGS, "--virtual-time-budget=10000"]
    # phone-sized viewport (412 CSS px wide)
    r = subprocess.run([*common, f"--user-data-dir={tmp_path / 'profile-1'}",
                        "--window-size=412,900", "--dump-dom", page.as_uri()],
                       capture_output=True, text=True, timeout=120)
    m = re.search(r'<pre id="checks">(.*?)</pre>', r.stdout)
    assert m, f"no check output from Chromium (exit {r.returncode}): {r.stderr[-500:]}"
    checks = json.loads(html.unescape(m.group(1)))
    n_plots = sum(1 for i in report["summary"].items if i.plot)
    assert checks["rows"] == report["n"]
    assert checks["images"] == 3 + n_plots
    assert checks["loaded"] == checks["images"]  # every image decoded (naturalWidth > 0)
    assert checks["scripts"] == 1  # only the probe: the evil id did not become a script
    assert checks["evil"] is True  # it is shown as text
    assert checks["pageWidth"] <= checks["viewport"]  # no sideways scrolling on a phone
    # a screenshot of the real report, desktop width
    shot = tmp_path / "report.png"
    r = subprocess.run([*common, f"--user-data-dir={tmp_path / 'profile-2'}",
                        "--window-size=1100,1600", f"--screenshot={shot}",
                        (report["out"] / "report.html").as_uri()],
                       capture_output=True, text=True, timeout=120)
    assert shot.exists(), r.stderr[-500:]
    from PIL import Image

    with Image.open(shot) as im:
        assert im.size == (1100, 1600)
        colours = im.convert("RGB").getcolors(maxcolors=1 << 20)
    assert colours is None or len(colours) > 50  # not a blank page


def test_pdf_has_the_expected_pages(report: dict) -> None:
    from pypdf import PdfReader

    n = report["n"]
    reader = PdfReader(str(report["out"] / "report.pdf"))
    # cover + items table (34 rows a page) + f0 histogram, Q histogram, control chart
    # + two items a page (the layout documented in characterize/report/pdf.py)
    expected = 1 + math.ceil(n / 34) + 3 + math.ceil(n / 2)
    assert len(reader.pages) == expected
    for i, pg in enumerate(reader.pages, start=1):
        assert f"page {i} of {expected}" in pg.extract_text()
    assert "jar-$x$" in reader.pages[1].extract_text()  # mathtext off: printed as written
    text = " ".join(" ".join(pg.extract_text().split()) for pg in reader.pages)
    assert "file not found" in text  # the failed item's reason, as in the HTML
    assert "Cpk" in text and "Outliers" in text and "f0 control chart" in text


def test_pdf_page_count_for_a_long_batch() -> None:
    from characterize.report.pdf import page_count

    for n in (1, 2, 33, 34, 35, 200):
        assert page_count(n) == 1 + math.ceil(n / 34) + 3 + math.ceil(n / 2)


def test_summary_csv_columns_and_values(report: dict) -> None:
    text = (report["out"] / "summary.csv").read_text(encoding="utf-8")
    rows = list(csv.DictReader(io.StringIO(text)))
    assert list(rows[0].keys()) == [c for c, _ in SUMMARY_COLUMNS]
    assert [c for c, _ in SUMMARY_COLUMNS][:8] == [
        "index", "id", "status", "f0_hz", "f0_stderr_hz", "f0_deviation_hz",
        "f0_deviation_percent", "q"]  # stable names: a change here breaks users' sheets
    doc = json.loads((report["out"] / "summary.json").read_text(encoding="utf-8"))
    assert len(rows) == len(doc["items"]) == report["n"]
    for row, item in zip(rows, doc["items"], strict=True):
        assert row["id"] == item["id"] and row["status"] == item["status"]
        if item["f0_hz"] is None:
            assert row["f0_hz"] == ""
        else:
            assert float(row["f0_hz"]) == item["f0_hz"]  # full precision
            assert float(row["f0_deviation_percent"]) == pytest.approx(
                100 * (item["f0_hz"] - 300.0) / 300.0)
    formula = next(r for r in rows if r["id"] == "jar-$x$")
    assert formula["note"] == "'" + FORMULA_NOTE  # not run as a formula by a spreadsheet


def test_reports_without_any_result(tmp_path: Path) -> None:
    (tmp_path / "m.csv").write_text("id,recording\na,none.flac\nb,none2.flac\n")
    (tmp_path / "s.toml").write_text('[f0]\ntarget = "300 Hz"\ntolerance = "3 Hz"\n')
    s = B.run(tmp_path / "m.csv", tmp_path / "s.toml", tmp_path / "out", workers=2)
    assert s.stats.n_error == 2 and s.stats.f0_mean_hz is None and s.stats.cpk is None
    page = _parse((tmp_path / "out" / "report.html").read_text(encoding="utf-8"))
    assert len(page.rows) == 2 and len(page.imgs) == 3
    from pypdf import PdfReader

    assert len(PdfReader(str(tmp_path / "out" / "report.pdf")).pages) == 1 + 1 + 3 + 1
