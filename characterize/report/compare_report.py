"""The comparison of several results: one figure (measured responses with their
fits, overlaid) and one page (HTML and PDF) with the table of f0, Q, the
predictions and the differences against the first result."""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from .values import pm, q_predicted_text

if TYPE_CHECKING:
    from ..compare import Compared, Comparison

#: Colours of the compared results, in order (the project's palette first).
SERIES_COLOURS = ("#1f3b5b", "#d4462a", "#6a4c93", "#2a8a7e", "#c28a1a", "#7d7566",
                  "#3f7fbf", "#a23b72")


def _fit_curve(item: Compared, f: np.ndarray) -> np.ndarray:
    from ..fitting.models import inside_outside

    fit = item.fit
    sign = -1.0 if fit.get("polarity_inverted") else 1.0
    return inside_outside(f, fit["f0_hz"], fit["q"], float(fit.get("gain") or 1.0),
                          float(fit.get("delay_s") or 0.0), sign)


def _span(item: Compared) -> tuple[float, float]:
    fit = item.fit
    f0, q = fit["f0_hz"], fit["q"]
    band = fit.get("band_hz") or [f0 * (1 - 3 / q), f0 * (1 + 3 / q)]
    lo, hi = (float(b) for b in band)
    if not (np.isfinite(lo) and np.isfinite(hi)):
        lo, hi = f0 * (1 - 3 / q), f0 * (1 + 3 / q)
    return max(f0 - 4 * (f0 - lo), 0.4 * f0), min(f0 + 4 * (hi - f0), 2.5 * f0)


def comparison_plot(comp: Comparison, path: str | Path) -> Path:
    """Magnitude and phase (each fit's delay removed) of every result's measured
    response (points) with its fit (line), on one log-frequency axis."""
    from .plots import PALETTE, _figure, _save, frequency_axis, legend_outside

    spans = [_span(it) for it in comp.items]
    lo = min(s[0] for s in spans)
    hi = max(s[1] for s in spans)
    fig, (ax_m, ax_p) = _figure(2, [3, 2], (8.6, 5.6))
    for k, it in enumerate(comp.items):
        colour = SERIES_COLOURS[k % len(SERIES_COLOURS)]
        fit = it.fit
        sign = -1.0 if fit.get("polarity_inverted") else 1.0
        delay = float(fit.get("delay_s") or 0.0)
        s_lo, s_hi = spans[k]
        if it.transfer is not None:
            tf = it.transfer
            sel = (tf.freqs_hz >= s_lo) & (tf.freqs_hz <= s_hi) & (tf.freqs_hz > 0)
            f, h = tf.freqs_hz[sel], tf.h[sel]
            if f.size > 1500:
                keep = np.linspace(0, f.size - 1, 1500).round().astype(int)
                f, h = f[keep], h[keep]
            with np.errstate(divide="ignore"):
                ax_m.plot(f, 20 * np.log10(np.abs(h)), ".", ms=2.2, color=colour, alpha=0.55)
            ax_p.plot(f, np.degrees(np.angle(h * sign * np.exp(2j * np.pi * f * delay))), ".",
                      ms=2.2, color=colour, alpha=0.55)
        ff = np.geomspace(s_lo, s_hi, 1200)
        model = _fit_curve(it, ff)
        measured = "measured + fit" if it.transfer is not None else "fit only (no transfer.csv)"
        ax_m.plot(ff, 20 * np.log10(np.abs(model)), color=colour, lw=1.5,
                  label=f"{it.label}: f0 {fit['f0_hz']:.4g} Hz, Q {fit['q']:.3g} ({measured})")
        ax_p.plot(ff, np.degrees(np.angle(model * sign * np.exp(2j * np.pi * ff * delay))),
                  color=colour, lw=1.5)
    ax_m.set_ylabel("|H| inside/outside (dB)")
    ax_p.set_ylabel("phase, delay removed (°)")
    ax_p.set_ylim(-190, 10)
    ax_p.set_xlabel("frequency (Hz)")
    names = {str((it.doc.get("object") or {}).get("name") or "") for it in comp.items} - {""}
    title = (f"{next(iter(names))}: " if len(names) == 1 else "") + \
        f"{len(comp.items)} results compared (points measured, lines fitted)"
    ax_m.set_title(title, fontsize=10, color=PALETTE["ink"], loc="left")
    for ax in (ax_m, ax_p):
        ax.set_xscale("log")
        ax.set_xlim(lo, hi)
        frequency_axis(ax)
    legend_outside(fig, [ax_m, ax_p])
    return _save(fig, path)


def _num(x: Any, spec: str) -> str:
    from .page import fmt

    return fmt(x, spec)


def comparison_table(comp: Comparison) -> Any:
    """The comparison as a page Table (values rounded to their errors)."""
    from .page import Table

    rows = []
    for r in comp.rows:
        rel = r["f0_vs_predicted"]
        rows.append((
            r["label"],
            f"{r['method']}, {_num(r['sample_rate_hz'], '.0f')} Hz" if r["sample_rate_hz"]
            else str(r["method"]),
            _num(r["temperature_c"], ".1f"),
            pm(r["f0_hz"], r["f0_stderr_hz"]),
            pm(r["q"], r["q_stderr"]),
            "—" if r["predicted_f0_hz"] is None else
            f"{r['predicted_f0_hz']:.2f} ({100 * rel:+.2f} %)",
            q_predicted_text({"q_predicted": r["predicted_q"],
                              "q_predicted_range": r["predicted_q_range"]}) or "—",
            pm(r["delta_f0_hz"], r["delta_f0_stderr_hz"]),
            "—" if r["delta_f0_same_air_hz"] is None else
            pm(r["delta_f0_same_air_hz"], r["delta_f0_same_air_stderr_hz"]),
            pm(r["delta_q"], r["delta_q_stderr"]),
        ))
    return Table(f"f0 and Q of each result (1-sigma standard errors), the geometry's "
                 f"prediction, and the differences from {comp.items[0].label}",
                 ("result", "method, rate", "air (°C)", "f0 (Hz)", "Q", "predicted f0 (Hz)",
                  "predicted Q", "Δf0 (Hz)", "Δf0 at the same air (Hz)", "ΔQ"),
                 tuple(rows))


def comparison_page(comp: Comparison, png: bytes | None) -> Any:
    from .page import Figure, Page

    names = [it.label for it in comp.items]
    lead = [f"Differences are taken from {names[0]}, with combined standard errors "
            "(independent measurements). 'At the same air' brings each f0 to the first "
            "result's speed of sound (f0 is proportional to c), so a change of room "
            "temperature does not read as a change of the object."]
    missing = [it.label for it in comp.items if it.transfer is None]
    if missing:
        lead.append("No measured response (transfer.csv) beside " + ", ".join(missing)
                    + ": drawn from the fit alone.")
    settings = tuple((it.label, it.path + (f" (+ {Path(it.transfer_path).name})"
                                           if it.transfer_path else ""))
                     for it in comp.items)
    figure = None if png is None else Figure(
        png, "Magnitude and phase of the measured inside/outside transfer functions of "
             + ", ".join(names) + ", each with its fitted damped oscillator, overlaid on one "
             "logarithmic frequency axis",
        "Points: measured H; lines: fits; phase shown with each fit's delay removed.")
    objs = {str((it.doc.get("object") or {}).get("name") or "") for it in comp.items} - {""}
    title = " vs ".join(names) if len(" vs ".join(names)) <= 60 else f"{len(names)} results"
    return Page(kind="comparison", title=title,
                subtitle=("object " + ", ".join(sorted(objs))) if objs else "results",
                lead=tuple(lead), tables=(comparison_table(comp),), figure=figure,
                settings=settings)


def write_comparison(comp: Comparison, json_path: Path, png_path: Path, html_path: Path,
                     pdf_path: Path) -> list[Path]:
    """Write comparison.json, comparison.png, report.html and report.pdf."""
    from .document import write_document
    from .page import png_bytes, write_html, write_pdf

    out = [write_document(json_path, comp.to_dict()), comparison_plot(comp, png_path)]
    page = comparison_page(comp, png_bytes(png_path))
    out += [write_html(html_path, page), write_pdf(pdf_path, page)]
    return out


def comparison_text(comp: Comparison) -> str:
    """The comparison as text lines (values rounded to their errors)."""
    ref = comp.items[0].label
    lines = [f"{len(comp.items)} results; differences from {ref}:"]
    for r in comp.rows:
        qp = q_predicted_text({"q_predicted": r["predicted_q"],
                               "q_predicted_range": r["predicted_q_range"]})
        pred = "" if r["predicted_f0_hz"] is None else (
            f"; predicted f0 {r['predicted_f0_hz']:.2f} Hz ({100 * r['f0_vs_predicted']:+.2f} %)"
            f", Q {qp}")
        lines.append(f"  {r['label']}: f0 {pm(r['f0_hz'], r['f0_stderr_hz'])} Hz, "
                     f"Q {pm(r['q'], r['q_stderr'])} ({r['method']}, "
                     f"{_num(r['temperature_c'], '.1f')} °C){pred}")
        if r is not comp.rows[0]:
            same = ("" if r["delta_f0_same_air_hz"] is None else
                    f" ({pm(r['delta_f0_same_air_hz'], r['delta_f0_same_air_stderr_hz'])} Hz "
                    "at the same air)")
            lines.append(f"      Δf0 {pm(r['delta_f0_hz'], r['delta_f0_stderr_hz'])} Hz{same}, "
                         f"ΔQ {pm(r['delta_q'], r['delta_q_stderr'])}")
        if r["transfer"] is None:
            lines.append("      (no transfer.csv beside it: fit only in the figure)")
    return "\n".join(lines)
