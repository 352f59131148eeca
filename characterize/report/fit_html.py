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
    """The report of one result document (and its response plot as PNG bytes):
    the fit (values rounded to their errors), what gain and delay are, the raw
    and corrected values when a correction was applied, the drive level from a
    calibrated channel (and its caution), the prediction with Q and its range,
    the object with every dimension, the flags and the settings."""
    from .values import (
        DELAY_MEANING,
        GAIN_MEANING,
        correction_note,
        correction_rows,
        drive_caution,
        drive_rows,
        length_sensitivity_text,
        object_rows,
        q_predicted_text,
        rounded,
    )

    fit, inp, air = doc["fit"], doc["input"], doc["air"]
    obj = doc.get("object") or {}

    def row(label: str, value: Any, err: Any, fallback: int = 3) -> tuple[str, str, str]:
        v, e = rounded(value, err, fallback)
        return (label, v, e)

    delay_err = fit.get("delay_stderr_s")
    rows = [row("f0 (Hz)", fit["f0_hz"], fit.get("f0_stderr_hz")),
            row("Q", fit["q"], fit.get("q_stderr"), 2)]
    if fit.get("method") != "damped-sinusoid":
        rows += [row("gain", fit.get("gain"), fit.get("gain_stderr"), 4),
                 row("delay (µs)", 1e6 * (fit.get("delay_s") or 0.0),
                     None if delay_err is None else 1e6 * delay_err, 1),
                 ("reduced chi-square", fmt(fit.get("reduced_chi2"), ".2f"), "")]
    coh = (doc.get("quality") or {}).get("coherence_min_in_band")
    if coh is not None:
        rows.append(("lowest coherence in the fit band", fmt(coh, ".3f"), ""))
    pred, der = doc.get("prediction"), doc.get("derived")
    lead = [f"gain: {GAIN_MEANING}; delay: {DELAY_MEANING}."]
    if pred is not None and der is not None:
        rel = fit["f0_hz"] / pred["f0_hz"] - 1
        rows += [("predicted f0 (Hz)", f"{pred['f0_hz']:.2f} (measured {100 * rel:+.2f} %)",
                  ""),
                 ("predicted Q", q_predicted_text(pred) or "—", ""),
                 row("measured L_eff (mm)", 1000 * der["effective_neck_length_m"],
                     1000 * der["effective_neck_length_stderr_m"]),
                 row("end correction (radii)", der["end_correction_over_radius"],
                     der.get("end_correction_over_radius_stderr"))]
        lead.append("L_eff: " + length_sensitivity_text(der["effective_neck_length_m"],
                                                       air["temperature_c"], "it") + ".")
    tables = [Table("Fitted damped oscillator (1-sigma standard errors)",
                    ("quantity", "value", "standard error"), tuple(rows))]
    note = correction_note(doc)
    corr = correction_rows(doc)
    if corr:
        tables.append(Table("Outside-microphone radiation: values before and after the "
                            "correction", ("quantity", "uncorrected", "corrected"),
                            tuple(corr)))
    drive = drive_rows(doc)
    if drive:
        tables.append(Table("Drive level (calibrated inside channel)", ("quantity", "value"),
                            tuple(drive)))
    objrows = object_rows(obj, air)
    if objrows:
        tables.append(Table("The object and the air", ("item", "value"), tuple(objrows)))
    if note:
        lead.insert(0, note[0].upper() + note[1:] + ".")
    settings = [("recording", inp["recording"]), ("method", inp["method"]),
                ("channels", f"inside {inp.get('inside_channel')}, "
                             f"outside {inp.get('outside_channel')}"),
                ("sweep", inp.get("sweep") or "—"),
                ("fit band (Hz)", " to ".join(fmt(b, ".1f") for b in fit.get("band_hz", []))),
                ("object file", obj.get("source_path") or "—")]
    name = obj.get("name") or Path(inp["recording"]).name
    pred_text = " and the geometry prediction" if pred is not None else ""
    coh_text = ", the coherence" if coh is not None else ""
    figure = None if png is None else Figure(
        png, f"Magnitude and phase of the measured inside/outside transfer function of "
             f"{name} with the fitted model{pred_text}, the fit band shaded{coh_text}, and the "
             f"normalised residuals below",
        "Measured H (points), fit (line)"
        + (", geometry prediction (dashed)" if pred is not None else "")
        + ("; coherence panel with the 0.95 and 0.8 thresholds" if coh is not None else "")
        + "; fit band shaded.")
    return Page(kind="fit report", title=name, subtitle=f"{inp['recording']} · {inp['method']}",
                lead=tuple(lead), caution=drive_caution(doc), tables=tuple(tables),
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
