"""Layout of every figure and report page (issue 14, points 5 and 6): no text box
leaves its figure or overlaps another, legends sit outside the data, log
frequency axes carry 1-2-5 ticks, no "(1)" units, and the PDF's text holds
every row label and value whole.

Each figure is checked as drawn, just before it is saved, with matplotlib's
own text extents (Artist.get_window_extent after a draw); the PDF's text is
read back with pypdf. The bundled objects and recordings are the inputs.
Reference for the tick rule: 1-2-5 steps on a log frequency axis are common
practice in acoustics (e.g. octave-band plots).
"""

from __future__ import annotations

import re
import shutil
from pathlib import Path

import pytest
from click.testing import CliRunner

from characterize.cli import main

EXAMPLES = Path(__file__).resolve().parent.parent / "example_audio"
OBJECTS = sorted(p for p in EXAMPLES.glob("*.toml") if not p.name.startswith("sweep"))


def _texts(fig):
    """Every visible, non-empty text of a drawn figure with its window extent
    (tick labels outside their axis's view are not drawn, so not counted)."""
    from matplotlib.text import Text

    r = fig.canvas.get_renderer()
    hidden = set()
    for ax in [*fig.axes, *(c for a in fig.axes for c in a.child_axes)]:
        for axis, (lo, hi) in ((ax.xaxis, ax.get_xlim()), (ax.yaxis, ax.get_ylim())):
            lo, hi = sorted((lo, hi))
            span = hi - lo
            drawn = ax.axison and ax.get_visible()
            for tick in axis.get_major_ticks() + axis.get_minor_ticks():
                v = tick.get_loc()
                if not drawn or not lo - 1e-9 * span <= v <= hi + 1e-9 * span:
                    hidden |= {id(tick.label1), id(tick.label2)}
    out = []
    for t in fig.findobj(Text):
        if not t.get_visible() or not t.get_text().strip() or id(t) in hidden:
            continue
        if t.axes is not None and not t.axes.get_visible():
            continue
        out.append((t.get_text(), t.get_window_extent(r)))
    return out


def check_figure(fig, what):
    """No text outside the figure, no two texts overlapping, legends outside
    every axes' data area."""
    fig.canvas.draw()
    fb = fig.bbox
    texts = _texts(fig)
    assert texts, what
    for s, b in texts:
        assert b.x0 >= fb.x0 - 1 and b.x1 <= fb.x1 + 1 and b.y0 >= fb.y0 - 1 and \
            b.y1 <= fb.y1 + 1, f"{what}: {s!r} leaves the figure ({b} in {fb})"
    for i, (s1, b1) in enumerate(texts):
        for s2, b2 in texts[i + 1:]:
            ov = b1.overlaps(b2) and min(b1.x1, b2.x1) - max(b1.x0, b2.x0) > 1 and \
                min(b1.y1, b2.y1) - max(b1.y0, b2.y0) > 1
            assert not ov, f"{what}: {s1!r} overlaps {s2!r}"
    legends = list(fig.legends) + [ax.get_legend() for ax in fig.axes if ax.get_legend()]
    for leg in legends:
        lb = leg.get_window_extent()
        for ax in fig.axes:
            if ax.get_visible() and ax.has_data():
                ab = ax.get_window_extent()
                inter_w = min(lb.x1, ab.x1) - max(lb.x0, ab.x0)
                inter_h = min(lb.y1, ab.y1) - max(lb.y0, ab.y0)
                assert not (inter_w > 1 and inter_h > 1), f"{what}: legend over the data"
    for ax in fig.axes:
        for label in (ax.get_xlabel(), ax.get_ylabel()):
            assert "(1)" not in label, f"{what}: unit '(1)' in {label!r}"
        labels = [t.get_text() for t in ax.get_xticklabels() if t.get_text()]
        if ax.get_xscale() == "log" and ax.has_data() and labels:  # shared axes: lowest only
            lo, hi = ax.get_xlim()
            ticks = [t for t in ax.get_xticks() if lo <= t <= hi]
            # plain numbers (20, 50, 100 ...), never powers of ten written as 10^n
            assert not any("10^" in x or "$" in x for x in labels), (what, labels)
            assert all(re.fullmatch(r"[−-]?[\d.]+(e[−+-]?\d+)?", x) for x in labels), labels
            if hi / lo > 2.5:  # 1-2-5 steps: a labelled tick at least every half decade
                assert len(ticks) >= 2, (what, ticks)


@pytest.fixture
def checked(monkeypatch):
    """Check every figure the code saves (plots and PDF pages) before saving."""
    import matplotlib

    matplotlib.use("Agg")
    from matplotlib.backends.backend_pdf import PdfPages

    import characterize.report.plots as plots

    seen = []
    orig_save = plots._save

    def save(fig, path):
        # the commands turn an exception into exit status 1, so the finding is
        # kept here and reported by run()
        try:
            check_figure(fig, Path(path).name)
        except AssertionError as exc:
            FINDINGS.append(str(exc))
        seen.append(Path(path).name)
        return orig_save(fig, path)

    orig_pdf = PdfPages.savefig

    def pdf_save(self, figure=None, **kw):
        fig = figure
        try:
            check_figure(fig, "pdf page")
        except AssertionError as exc:
            FINDINGS.append(str(exc))
        seen.append("pdf page")
        return orig_pdf(self, figure, **kw)

    monkeypatch.setattr(plots, "_save", save)
    monkeypatch.setattr(PdfPages, "savefig", pdf_save)
    return seen


def _pdf_text(path):
    from pypdf import PdfReader

    return " ".join(" ".join(p.extract_text().split()) for p in PdfReader(str(path)).pages)


FINDINGS: list[str] = []


def run(*args, codes=(0,)):
    FINDINGS.clear()
    res = CliRunner().invoke(main, [*map(str, args)])
    assert not FINDINGS, FINDINGS
    assert res.exit_code in codes, res.output
    return res


@pytest.mark.parametrize("obj", OBJECTS, ids=lambda p: p.stem)
def test_sketch_of_every_bundled_object(obj, checked, tmp_path):
    run("predict", obj, "--sketch", tmp_path / "s.png")
    assert checked == ["s.png"]


def _check_page_text(page, pdf_path):
    """Every table cell's words, every row label, flag and setting are in the PDF
    text, whole; nothing cut with an ellipsis."""
    text = _pdf_text(pdf_path)
    assert "…" not in text
    squashed = re.sub(r"\s+", "", text)
    for t in page.tables:
        for row in t.rows:
            for cell in row:
                assert re.sub(r"\s+", "", cell) in squashed, (t.caption, cell)
    for f in page.flag_dicts():
        assert f["code"] in text


def test_fit_report_with_corrections_and_drive(checked, tmp_path):
    from characterize.calibration import Calibration, ChannelCalibration, write_calibration
    from characterize.report.fit_html import fit_page

    cal = Calibration().with_channel(ChannelCalibration(1, 2e-4, 94.0, 1000.0, "tone.wav"))
    write_calibration(tmp_path / "cal.toml", cal)
    run("fit", EXAMPLES / "listening-jar-04.flac", "--object", EXAMPLES / "listening-jar-04.toml",
        "--sweep", EXAMPLES / "sweep-48k.wav", "--outside-distance", "50 mm",
        "--calibration", tmp_path / "cal.toml", "--out", tmp_path / "r")
    assert "response.png" in checked and checked.count("pdf page") >= 2
    import json

    doc = json.loads((tmp_path / "r" / "result.json").read_text())
    _check_page_text(fit_page(doc), tmp_path / "r" / "report.pdf")


def test_fit_report_cross_spectral(checked, tmp_path):
    import json

    from characterize.report.fit_html import fit_page

    run("fit", EXAMPLES / "absorber-cell-b2.flac", "--object",
        EXAMPLES / "absorber-cell-b2.toml", "--out", tmp_path / "r")
    assert "response.png" in checked
    doc = json.loads((tmp_path / "r" / "result.json").read_text())
    _check_page_text(fit_page(doc), tmp_path / "r" / "report.pdf")


def test_series_and_level_reports(checked, tmp_path):
    run("series", EXAMPLES / "trim-series" / "manifest.csv", "--vary", "neck-length",
        "--out", tmp_path / "s")
    run("levels", EXAMPLES / "level-series" / "manifest.csv", "--out", tmp_path / "l")
    run("levels", EXAMPLES / "level-series" / "balance.csv", "--out", tmp_path / "b")
    assert {"series.png", "levels.png"} <= set(checked)
    for d in ("s", "l", "b"):
        assert "…" not in _pdf_text(tmp_path / d / "report.pdf")


def test_batch_report(checked, tmp_path):
    src = EXAMPLES / "batch"
    for p in src.iterdir():
        if p.suffix in (".toml", ".wav") or p.name in ("jar-01.flac", "jar-02.flac",
                                                       "jar-03.flac"):
            shutil.copy(p, tmp_path / p.name)
    (tmp_path / "m.csv").write_text("id,recording\njar-01,jar-01.flac\njar-02,jar-02.flac\n"
                                    "jar-03,jar-03.flac\n", encoding="utf-8")
    run("batch", tmp_path / "m.csv", "--spec", tmp_path / "spec.toml", "--out", tmp_path / "o",
        "--workers", 1, codes=(0, 1))
    assert checked.count("pdf page") >= 2
    assert "…" not in _pdf_text(tmp_path / "o" / "report.pdf")


def test_compare_figure_and_page(checked, tmp_path):
    jar = ("fit", EXAMPLES / "listening-jar-04.flac", "--object",
           EXAMPLES / "listening-jar-04.toml", "--sweep", EXAMPLES / "sweep-48k.wav")
    run(*jar, "--out", tmp_path / "a")
    run("fit", EXAMPLES / "port-check-k1.flac", "--object", EXAMPLES / "port-check-k1.toml",
        "--sweep", EXAMPLES / "sweep-48k.wav", "--inside", 2, "--outside", 1,
        "--out", tmp_path / "b")
    checked.clear()
    run("compare", tmp_path / "a", tmp_path / "b", "--out", tmp_path / "c")
    assert checked[0] == "comparison.png" and "pdf page" in checked
    assert "…" not in _pdf_text(tmp_path / "c" / "report.pdf")
