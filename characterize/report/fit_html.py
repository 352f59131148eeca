"""report.html and report.pdf for one fit: a self-contained page (no network,
no scripts) to file, and the same content on A4 pages.

Both are drawn from one :class:`~.page.Page` (:func:`fit_page`), under the
batch report's rules (:mod:`.html`): autoescaping for every user-provided
string, a Content-Security-Policy that allows only embedded images, real table
headers, alt text, flags written out in words.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

from .page import Figure, Page, Table, fmt, png_bytes, render_html, write_html, write_pdf


def fit_page(doc: dict[str, Any], png: bytes | None = None) -> Page:
    """The report of one result document (and its response plot as PNG bytes)."""
    fit, inp, air = doc["fit"], doc["input"], doc["air"]
    obj = doc.get("object") or {}
    rows = [("f0 (Hz)", fmt(fit["f0_hz"], ".3f"), fmt(fit.get("f0_stderr_hz"), ".2g")),
            ("Q", fmt(fit["q"], ".2f"), fmt(fit.get("q_stderr"), ".2g")),
            ("gain", fmt(fit.get("gain"), ".4f"), fmt(fit.get("gain_stderr"), ".2g")),
            ("delay (µs)", fmt(1e6 * (fit.get("delay_s") or 0.0), ".1f"),
             fmt(None if fit.get("delay_stderr_s") is None else 1e6 * fit["delay_stderr_s"],
                  ".2g")),
            ("reduced chi-square", fmt(fit.get("reduced_chi2"), ".2f"), "")]
    pred, der = doc.get("prediction"), doc.get("derived")
    if pred is not None and der is not None:
        rows += [("predicted f0 (Hz)", fmt(pred["f0_hz"], ".2f"), ""),
                 ("measured effective neck length (mm)",
                  fmt(1000 * der["effective_neck_length_m"], ".2f"),
                  fmt(1000 * der["effective_neck_length_stderr_m"], ".2g")),
                 ("measured end correction (neck radii)",
                  fmt(der["end_correction_over_radius"], ".2f"),
                  fmt(der.get("end_correction_over_radius_stderr"), ".2g"))]
    settings = [("recording", inp["recording"]), ("method", inp["method"]),
                ("channels", f"inside {inp.get('inside_channel')}, "
                             f"outside {inp.get('outside_channel')}"),
                ("sweep", inp.get("sweep") or "—"),
                ("fit band (Hz)", " to ".join(fmt(b, ".1f") for b in fit.get("band_hz", []))),
                ("air", f"{fmt(air['temperature_c'], '.1f')} °C, RH "
                        f"{fmt(100 * air['relative_humidity'], '.0f')} %, "
                        f"{fmt(air['pressure_pa'] / 1000, '.2f')} kPa, c = "
                        f"{fmt(air['speed_of_sound_m_s'], '.2f')} m/s"),
                ("object file", obj.get("source_path") or "—")]
    name = obj.get("name") or Path(inp["recording"]).name
    pred_text = " and the geometry prediction" if pred is not None else ""
    figure = None if png is None else Figure(
        png, f"Magnitude and phase of the measured inside/outside transfer function of "
             f"{name} with the fitted model{pred_text}, the fit band shaded, and the "
             f"normalised residuals below",
        "Measured H (points), fit (line)"
        + (", geometry prediction (dashed)" if pred is not None else "") + "; fit band shaded.")
    return Page(kind="fit report", title=name, subtitle=f"{inp['recording']} · {inp['method']}",
                tables=(Table("Fitted damped oscillator (1-sigma standard errors)",
                              ("quantity", "value", "standard error"), tuple(rows)),),
                figure=figure, flags=tuple(doc.get("flags", [])), settings=tuple(settings))


def render_fit_html(doc: dict[str, Any], png: bytes | None = None) -> str:
    """The HTML page for one result document."""
    return render_html(fit_page(doc, png))


def write_fit_html(path: str | Path, doc: dict[str, Any], png_path: str | Path | None) -> Path:
    """Write report.html for one result document (``png_path``: its plot, embedded)."""
    return write_html(path, fit_page(doc, png_bytes(png_path)))


def write_fit_pdf(path: str | Path, doc: dict[str, Any], png_path: str | Path | None) -> Path:
    """Write report.pdf for one result document: the same content as report.html."""
    return write_pdf(path, fit_page(doc, png_bytes(png_path)))
