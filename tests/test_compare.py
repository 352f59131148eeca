"""``characterize compare`` (issue 14, point 14): results side by side.

Outside references: the differences of independent measurements carry the
combined standard error sqrt(s_a^2 + s_b^2) (JCGM 100:2008, GUM, 5.1.2, for a
difference of uncorrelated inputs); f0 of a Helmholtz resonator is proportional
to the speed of sound (Rayleigh, The Theory of Sound, 1896, §303), so the f0
measured at another temperature is brought to the first's air by the ratio of
the speeds of sound; the simulator's truth (characterize.simulate) for the
overlaid curves.
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner
from html_page import HtmlPage

from characterize.cli import main
from characterize.compare import compare

EXAMPLES = Path(__file__).resolve().parent.parent / "example_audio"


def _page(path):
    page = HtmlPage()
    page.feed(Path(path).read_text(encoding="utf-8"))
    return page, " ".join(" ".join(page.text).split())


def run(*args):
    return CliRunner().invoke(main, [*map(str, args)])


@pytest.fixture(scope="module")
def fitted(tmp_path_factory):
    """Three results of different rates, methods and bands: the jar (sweep,
    48 kHz), the same jar fitted in a narrower band at another temperature, and
    the absorber cell (H1 on noise, 44.1 kHz)."""
    d = tmp_path_factory.mktemp("cmp")
    jar = ("fit", EXAMPLES / "listening-jar-04.flac", "--object",
           EXAMPLES / "listening-jar-04.toml", "--sweep", EXAMPLES / "sweep-48k.wav")
    for args in ((*jar, "--out", d / "jar"),
                 (*jar, "--band", "230 Hz", "256 Hz", "--temperature", "25 degC",
                  "--out", d / "jar-warm"),
                 ("fit", EXAMPLES / "absorber-cell-b2.flac", "--object",
                  EXAMPLES / "absorber-cell-b2.toml", "--out", d / "cell")):
        res = run(*args)
        assert res.exit_code == 0, res.output
    return d


def _doc(d):
    return json.loads((d / "result.json").read_text())


def test_table_differences_against_the_first(fitted):
    c = compare([fitted / "jar", fitted / "jar-warm" / "result.json", fitted / "cell"])
    rows = c.to_dict()["results"]
    assert [r["label"] for r in rows] == ["jar", "jar-warm", "cell"]
    a, b = _doc(fitted / "jar"), _doc(fitted / "jar-warm")
    fa, fb = a["fit"], b["fit"]
    assert rows[0]["delta_f0_hz"] == 0.0
    assert rows[1]["delta_f0_hz"] == pytest.approx(fb["f0_hz"] - fa["f0_hz"], abs=1e-12)
    # GUM 5.1.2: combined standard error of a difference of independent values
    assert rows[1]["delta_f0_stderr_hz"] == pytest.approx(
        math.hypot(fa["f0_stderr_hz"], fb["f0_stderr_hz"]), rel=1e-12)
    assert rows[1]["delta_q_stderr"] == pytest.approx(
        math.hypot(fa["q_stderr"], fb["q_stderr"]), rel=1e-12)
    # the same recording fitted twice: the raw difference is within its error
    assert abs(rows[1]["delta_f0_hz"]) < 3 * rows[1]["delta_f0_stderr_hz"]
    # f0 ~ c: the second result says the air was 25 °C, not 21 °C; brought to the
    # first's air its f0 reads lower by the ratio of the speeds of sound,
    # sqrt(294.15/298.15) (ideal gas, c ~ sqrt(T); humidity changes it slightly)
    k = a["air"]["speed_of_sound_m_s"] / b["air"]["speed_of_sound_m_s"]
    assert k == pytest.approx(math.sqrt(294.15 / 298.15), rel=5e-4)
    assert rows[1]["delta_f0_same_air_hz"] == pytest.approx(fb["f0_hz"] * k - fa["f0_hz"])
    # the predictions are carried, per result
    assert rows[2]["predicted_f0_hz"] == pytest.approx(_doc(fitted / "cell")["prediction"]["f0_hz"])
    assert rows[2]["method"] == "cross-spectral-h1" and rows[2]["sample_rate_hz"] == 44100
    assert all(r["transfer"] for r in rows)


def test_command_writes_png_html_pdf(fitted, tmp_path):
    out = tmp_path / "cmp"
    res = run("compare", fitted / "jar", fitted / "jar-warm", fitted / "cell", "--out", out)
    assert res.exit_code == 0, res.output
    assert "differences from jar" in res.stdout and "Δf0" in res.stdout
    assert (out / "comparison.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert (out / "report.pdf").read_bytes()[:5] == b"%PDF-"
    page, text = _page(out / "report.html")
    for label in ("jar", "jar-warm", "cell"):
        assert label in text
    assert "predicted Q" in text and "Δf0" in text
    assert page.imgs and "transfer functions" in page.imgs[0]["alt"]
    assert page.scripts == 0
    doc = json.loads((out / "comparison.json").read_text())
    assert doc["schema"] == "characterize.comparison/1" and len(doc["results"]) == 3
    # no overwrite without --force, one line
    res = run("compare", fitted / "jar", fitted / "cell", "--out", out)
    assert res.exit_code == 2 and "--force" in res.stderr
    # the JSON on stdout is the same table
    js = json.loads(run("compare", fitted / "jar", fitted / "cell", "--json").stdout)
    assert [r["label"] for r in js["results"]] == ["jar", "cell"]


def test_the_figure_holds_each_measured_response_and_its_fit(fitted, tmp_path):
    """Drawn data equal what the transfer.csv and the fitted model give."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    from characterize.fitting.models import inside_outside
    from characterize.report import compare_report

    captured = {}
    c = compare([fitted / "jar", fitted / "cell"])
    import characterize.report.plots as plots

    orig = plots._save

    def keep(fig, path):
        captured["fig"] = fig
        return orig(fig, path)

    plots._save = keep
    try:
        compare_report.comparison_plot(c, tmp_path / "c.png")
    finally:
        plots._save = orig
    fig = captured["fig"]
    ax_m = fig.axes[0]
    lines = ax_m.get_lines()
    # per result: measured points then the fit line
    assert len(lines) == 4
    for k, it in enumerate(c.items):
        pts, fitline = lines[2 * k], lines[2 * k + 1]
        f, y = pts.get_data()
        tf = it.transfer
        idx = np.searchsorted(tf.freqs_hz, f)
        assert np.allclose(y, 20 * np.log10(np.abs(tf.h[idx])))
        ff, yy = fitline.get_data()
        fit = it.fit
        want = inside_outside(ff, fit["f0_hz"], fit["q"], fit["gain"], fit["delay_s"],
                              -1.0 if fit["polarity_inverted"] else 1.0)
        assert np.allclose(yy, 20 * np.log10(np.abs(want)))
        assert ff.min() < fit["f0_hz"] < ff.max()
    # the legend is outside the axes' data area
    leg = fig.legends[0] if fig.legends else ax_m.get_legend()
    fig.canvas.draw()
    lb = leg.get_window_extent()
    for ax in fig.axes:
        assert not lb.overlaps(ax.get_window_extent()), "legend over the data"
    plt.close(fig)


def test_a_result_without_transfer_csv_is_drawn_from_its_fit(fitted, tmp_path):
    lone = tmp_path / "lone.json"
    lone.write_text((fitted / "cell" / "result.json").read_text())
    c = compare([fitted / "jar", lone], out_dir=tmp_path / "o")
    assert c.items[1].transfer is None
    _, text = _page(tmp_path / "o" / "report.html")
    assert f"No measured response (transfer.csv) beside {c.items[1].label}" in text


def test_bad_inputs_one_line(fitted, tmp_path):
    res = run("compare", fitted / "jar")
    assert res.exit_code == 2 and "two results" in res.stderr
    bad = tmp_path / "x.json"
    bad.write_text('{"schema": "characterize.prediction/1"}')
    res = run("compare", fitted / "jar", bad)
    assert res.exit_code == 2 and "schema" in res.stderr
    assert len(res.stderr.strip().splitlines()) == 1
