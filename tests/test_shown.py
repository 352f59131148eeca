"""What the user sees (issue 14, points 1 to 5, 7 and 8): corrections and
calibration, predicted Q with its range, coherence, the object, rounding, the
meanings of gain and delay, in the text summary, report.html and report.pdf.

Outside references: the rounding rule of two significant digits of the
standard uncertainty, the value to the same decimal (JCGM 100:2008, GUM, 7.2.6;
common practice); the lumped Helmholtz law L_eff = S c^2 / ((2 pi f0)^2 V) with
c^2 proportional to T (ideal gas), whose sensitivities the trim note quotes
(Rayleigh, The Theory of Sound, 1896, §303); the example recordings' truth.
"""

from __future__ import annotations

import json
import re
from pathlib import Path
from types import SimpleNamespace

import pytest
from click.testing import CliRunner
from html_page import HtmlPage

from characterize.cli import main
from characterize.report.values import DELAY_MEANING, GAIN_MEANING, pm, rounded

EXAMPLES = Path(__file__).resolve().parent.parent / "example_audio"


def run(*args):
    res = CliRunner().invoke(main, [*map(str, args)])
    assert res.exit_code == 0, res.output
    return res


def _pdf_text(path):
    from pypdf import PdfReader

    return " ".join(" ".join(p.extract_text().split()) for p in PdfReader(str(path)).pages)


def _html_text(path):
    page = HtmlPage()
    page.feed(Path(path).read_text(encoding="utf-8"))
    return " ".join(" ".join(page.text).split())


@pytest.mark.parametrize("value,err,want", [
    (243.2092428569, 0.0015569979, ("243.2092", "0.0016")),   # GUM 7.2.6: 2 digits of u
    (47.912304, 0.00061, ("47.91230", "0.00061")),
    (24.57, 0.0011, ("24.5700", "0.0011")),
    (37.99378, 0.018356, ("37.994", "0.018")),
    (1234.6, 56.7, ("1235", "57")),
    (12345.6, 567.0, ("12350", "570")),
    (5.0, float("nan"), ("5.000", "—")),
])
def test_values_rounded_to_their_error(value, err, want):
    assert rounded(value, err) == want
    assert pm(value, err) == (want[0] if want[1] == "—" else f"{want[0]} ± {want[1]}")


@pytest.fixture(scope="module")
def jar(tmp_path_factory):
    """The bundled jar fitted with the outside-microphone correction and a
    calibrated inside channel (a sensitivity that puts the cavity above 110 dB)."""
    from characterize.calibration import Calibration, ChannelCalibration, write_calibration

    d = tmp_path_factory.mktemp("shown")
    cal = Calibration().with_channel(ChannelCalibration(1, 2e-4, 94.0, 1000.0, "tone.wav"))
    write_calibration(d / "cal.toml", cal)
    res = run("fit", EXAMPLES / "listening-jar-04.flac", "--object",
              EXAMPLES / "listening-jar-04.toml", "--sweep", EXAMPLES / "sweep-48k.wav",
              "--outside-distance", "50 mm", "--calibration", d / "cal.toml", "--out", d / "r")
    doc = json.loads((d / "r" / "result.json").read_text())
    return res.stdout, doc, _html_text(d / "r" / "report.html"), _pdf_text(d / "r" / "report.pdf")


def test_corrections_shown_raw_and_corrected(jar):
    text, doc, html, pdf = jar
    raw = doc["outside_microphone"]["uncorrected"]
    fit = doc["fit"]
    assert abs(raw["f0_hz"] - fit["f0_hz"]) > 10 * fit["f0_stderr_hz"]  # it did move
    for out in (text, html, pdf):
        assert "correction applied" in out.lower()
        assert pm(raw["f0_hz"], raw["f0_stderr_hz"]) in out
        assert pm(fit["f0_hz"], fit["f0_stderr_hz"]) in out or \
            rounded(fit["f0_hz"], fit["f0_stderr_hz"])[0] in out
        assert pm(raw["q"], raw["q_stderr"]) in out


def test_drive_level_and_caution_shown(jar):
    text, doc, html, pdf = jar
    d = doc["drive"]
    assert d["cavity_spl_db"] > 110
    for out in (text, html, pdf):
        assert f"{d['cavity_spl_db']:.1f} dB" in out
        assert f"{1e3 * d['displacement_m']:.3g} mm" in out
        assert "neck particle displacement" in out
        assert "hearing protection" in out and "CAUTION" in out


def test_no_caution_below_110_db(tmp_path):
    from characterize.calibration import Calibration, ChannelCalibration, write_calibration

    # a sensitivity 1000 times higher puts the same recording 60 dB lower (20 log10 1000)
    cal = Calibration().with_channel(ChannelCalibration(1, 2e-1, 94.0, 1000.0, "tone.wav"))
    write_calibration(tmp_path / "cal.toml", cal)
    res = run("fit", EXAMPLES / "listening-jar-04.flac", "--object",
              EXAMPLES / "listening-jar-04.toml", "--sweep", EXAMPLES / "sweep-48k.wav",
              "--calibration", tmp_path / "cal.toml", "--json")
    doc = json.loads(res.stdout)
    assert doc["drive"]["cavity_spl_db"] < 110
    from characterize.report.text import summary

    assert "CAUTION" not in summary(doc) and "cavity SPL" in summary(doc)


def test_predicted_q_with_range_beside_measured(jar):
    text, doc, html, pdf = jar
    pred = doc["prediction"]
    lo, hi = sorted(pred["q_predicted_range"])
    want = f"{pred['q_predicted']:.3g} (range {lo:.3g} to {hi:.3g})"
    for out in (text, html, pdf):
        assert want in out
        assert "predicted Q" in out
    assert re.search(r"predicted Q\s+= .*measured " + re.escape(pm(doc["fit"]["q"],
                                                                 doc["fit"]["q_stderr"])), text)


def test_q_mismatch_flag_from_the_predicted_range(jar):
    # the jar's measured Q (34, corrected) lies far below the predicted range
    _, doc, _, _ = jar
    codes = {f["code"]: f for f in doc["flags"]}
    assert codes["q-mismatch"]["severity"] == "info"
    from characterize.checks import check_q_mismatch

    pred = SimpleNamespace(q_predicted=60.0, q_predicted_range=(50.0, 70.0),
                           q_without_radiation=80.0)
    fit = SimpleNamespace(q=45.0, q_stderr=2.0)
    assert check_q_mismatch(fit, pred)[0].severity == "info"   # 45 + 2x2 < 50
    fit = SimpleNamespace(q=47.0, q_stderr=2.0)
    assert check_q_mismatch(fit, pred) == []                   # within 2 sigma of 50
    fit = SimpleNamespace(q=75.0, q_stderr=1.0)
    assert check_q_mismatch(fit, pred)[0].severity == "warning"
    # without the outside microphone's correction the interval reaches Q without radiation
    assert check_q_mismatch(fit, pred, uncorrected_outside_mic=True) == []


def test_gain_and_delay_explained(jar):
    text, _, html, pdf = jar
    for out in (text, html, pdf):
        assert GAIN_MEANING in out and DELAY_MEANING in out


def test_object_on_the_report(jar):
    text, doc, html, pdf = jar
    for out in (html, pdf):
        for label, value in (("cavity volume", "480 mL"), ("neck diameter", "24 mm"),
                             ("neck length", "28 mm"), ("neck ends", "outer unflanged")):
            assert label in out and value in out, (label, value)
        assert "21.0 °C" in out and "RH 45 %" in out
    assert "neck diameter 24 mm" in text


def test_rounding_everywhere_and_trim_note(jar, tmp_path):
    text, doc, html, pdf = jar
    der = doc["derived"]
    want = pm(1000 * der["effective_neck_length_m"], 1000 * der["effective_neck_length_stderr_m"])
    assert want in text
    # the unrounded error (more than 2 significant digits) is printed nowhere
    raw = f"{1000 * der['effective_neck_length_stderr_m']:.6f}"
    assert raw not in text and raw not in html
    assert "1 K of air temperature moves L_eff by" in text
    # L/T per kelvin: the lumped law with c^2 ~ T
    t_k = doc["air"]["temperature_c"] + 273.15
    assert f"{1e3 * der['effective_neck_length_m'] / t_k:.2g} mm" in text
    res = run("trim", _result_dir(doc, tmp_path), "--target", "250 Hz")
    assert "the geometry's and the temperature's come on top" in res.stdout
    assert "1 K of air temperature moves the cut by" in res.stdout


def _result_dir(doc, tmp_path):
    p = tmp_path / "res"
    p.mkdir(exist_ok=True)
    (p / "result.json").write_text(json.dumps(doc))
    return p


def test_coherence_in_plot_and_report(tmp_path):
    run("fit", EXAMPLES / "absorber-cell-b2.flac", "--object",
        EXAMPLES / "absorber-cell-b2.toml", "--out", tmp_path / "r")
    doc = json.loads((tmp_path / "r" / "result.json").read_text())
    coh = doc["quality"]["coherence_min_in_band"]
    html = _html_text(tmp_path / "r" / "report.html")
    assert "lowest coherence in the fit band" in html and f"{coh:.3f}" in html
    assert "coherence panel" in html
    # the plot has the coherence panel (its own axes, 0..1)
    from characterize.pipeline import analyze
    from characterize.report import plots

    result = analyze(EXAMPLES / "absorber-cell-b2.flac",
                     object_path=EXAMPLES / "absorber-cell-b2.toml")
    captured = {}
    orig = plots._save

    def keep(fig, path):
        captured["fig"] = fig
        return orig(fig, path)

    plots._save = keep
    try:
        plots.response_plot(result, tmp_path / "p.png")
    finally:
        plots._save = orig
    labels = [ax.get_ylabel() for ax in captured["fig"].axes]
    assert any("coherence" in y for y in labels), labels


def test_histogram_coloured_by_the_quantity_shown():
    from characterize.report.batch_plots import _values

    items = [SimpleNamespace(status="fail", f0_hz=243.0, q=10.0),   # failed on Q only
             SimpleNamespace(status="pass", f0_hz=243.5, q=40.0),
             SimpleNamespace(status="fail", f0_hz=260.0, q=40.0),   # failed on f0
             SimpleNamespace(status="error", f0_hz=None, q=None)]
    summary = SimpleNamespace(items=items)
    assert _values(summary, "f0_hz", 238.0, 248.0) == ([243.0, 243.5], [260.0])
    assert _values(summary, "q", 25.0, 70.0) == ([40.0, 40.0], [10.0])


def test_batch_outputs_carry_predicted_q(tmp_path):
    import csv
    import shutil

    src = EXAMPLES / "batch"
    for name in ("spec.toml", "reed-walk-jar.toml", "sweep-16k.wav", "sweep-16k.toml",
                 "jar-01.flac"):
        shutil.copy(src / name, tmp_path / name)
    (tmp_path / "m.csv").write_text("id,recording\njar-01,jar-01.flac\n", encoding="utf-8")
    CliRunner().invoke(main, ["batch", str(tmp_path / "m.csv"), "--spec",
                              str(tmp_path / "spec.toml"), "--out", str(tmp_path / "o"),
                              "--workers", "1"])
    item = json.loads((tmp_path / "o" / "items" / "jar-01.json").read_text())
    pred = item["prediction"]
    with open(tmp_path / "o" / "summary.csv", encoding="utf-8") as fh:
        row = next(r for r in csv.DictReader(line for line in fh if not line.startswith("#")))
    assert float(row["predicted_q"]) == pytest.approx(pred["q_predicted"], rel=1e-12)
    assert float(row["predicted_q_low"]) == pytest.approx(min(pred["q_predicted_range"]))
    lo, hi = sorted(pred["q_predicted_range"])
    want = f"predicted Q {pred['q_predicted']:.3g} (range {lo:.3g} to {hi:.3g})"
    assert want in _html_text(tmp_path / "o" / "report.html")
    assert want in _pdf_text(tmp_path / "o" / "report.pdf")
