"""The tuning studies in words: the text summaries ``series`` and ``levels``
print, and their report.html / report.pdf (one :class:`~.page.Page` each).

The summary sentences, the points table and the flags are built once here and
shown three ways: as the command's text, as the HTML page and as the PDF.
"""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING, Any

from .page import Figure, Page, Table, fmt, write_html, write_pdf
from .text import flag_lines

if TYPE_CHECKING:
    from ..tuning import LevelStudy, PowerLawFit, SeriesFit

#: Printed (stderr) when a study reaches 110 dB SPL, and shown on its report.
LEVELS_CAUTION = (
    "CAUTION: drive-level studies mean 110 dB and more near the loudspeaker and up to "
    "130-150 dB inside the cavity. Wear hearing protection, keep exposures short (e.g. "
    "NIOSH: 85 dB(A) for 8 h, 3 dB exchange rate, about 1.5 min at 110 dB(A)), step the "
    "level up from low, never leave a drive running unattended, and follow your local "
    "occupational-noise regulations, which take precedence."
)
#: Cavity SPL (dB re 20 uPa) from which the caution is printed and shown.
CAUTION_SPL_DB = 110.0

_MM, _ML = 1e3, 1e6


def _not_nan(x: float) -> bool:
    return x == x


def _title(source: str, kind: str, obj: dict[str, Any] | None = None) -> str:
    """The report's title: the object's name, else the table's folder and name
    ("level-series/manifest.csv")."""
    if obj and obj.get("name"):
        return str(obj["name"])
    parts = Path(source).parts[-2:]
    return "/".join(parts) or kind


def _object_table(obj: dict[str, Any] | None, air_note: str | None = None) -> tuple[Table, ...]:
    """The object (name, shape, every dimension with its unit) as a table, or a
    one-row table saying that the input named none."""
    from .values import object_rows

    rows = object_rows(obj)
    if air_note:
        rows.append(("air", air_note))
    if not rows:
        rows = [("object", "not named in the input")]
    return (Table("The object", ("item", "value"), tuple(rows)),)


# ------------------------------------------------------------------ series


def series_lines(s: SeriesFit) -> list[str]:
    """The summary sentences of a trim or fill series (no table, no flags)."""
    mm, ml = _MM, _ML
    trim = s.vary == "neck-length"
    line = s.line
    lines = [
        f"{'trim' if trim else 'fill'} series, {len(s.points)} points, weighted by "
        f"{'the f0 standard errors' if line.weighting == 'stated-errors' else 'equal weights'}; "
        f"f0 brought to c = {s.reference_speed_of_sound_m_s:.2f} m/s "
        f"({s.reference_temperature_c:.1f} °C)",
        f"  line: 1/f0² = {line.slope:.6g} x + {line.intercept:.6g} s² "
        f"(reduced chi-square {line.reduced_chi2:.2f}, errors scaled by {line.stderr_scale:.2f})",
    ]
    if trim:
        lines.append(f"  end correction δ = {s.end_correction_m * mm:.3f} ± "
                     f"{s.end_correction_stderr_m * mm:.3f} mm"
                     + (f" = {s.end_correction_over_radius:.3f} ± "
                        f"{s.end_correction_over_radius_stderr:.3f} neck radii"
                        if _not_nan(s.end_correction_over_radius) else ""))
        lines.append(f"  V/S = {s.volume_over_area_m:.5g} ± {s.volume_over_area_stderr_m:.2g} m"
                     + (f" (V = {s.volume_m3 * ml:.1f} ± {s.volume_stderr_m3 * ml:.1f} mL)"
                        if _not_nan(s.volume_m3) else ""))
    else:
        lines.append(f"  L_eff/S = {s.effective_length_over_area_m_inv:.5g} ± "
                     f"{s.effective_length_over_area_stderr_m_inv:.2g} 1/m, empty volume V0 = "
                     f"{s.volume_m3 * ml:.2f} ± {s.volume_stderr_m3 * ml:.2f} mL")
        if _not_nan(s.effective_neck_length_m):
            lines.append(f"  L_eff = {s.effective_neck_length_m * mm:.3f} ± "
                         f"{s.effective_neck_length_stderr_m * mm:.3f} mm"
                         + (f", end correction {s.end_correction_m * mm:.3f} mm = "
                            f"{s.end_correction_over_radius:.3f} neck radii"
                            if _not_nan(s.end_correction_m) else ""))
    if _not_nan(s.textbook_end_correction_m):
        lines.append(f"  textbook end correction for this geometry: "
                     f"{s.textbook_end_correction_m * mm:.3f} mm")
    return lines


def series_text(s: SeriesFit) -> str:
    """What ``characterize series`` prints."""
    trim = s.vary == "neck-length"
    unit, scale = ("mm", _MM) if trim else ("mL", _ML)
    line = s.line
    lines = series_lines(s)
    lines.append(f"  {'id':<16} {'value':>9} {'f0 (Hz)':>18} {'T (°C)':>7} {'residual':>9} "
                 f"{'stud.':>6}")
    for p, r, t in zip(s.points, line.normalized_residuals, line.studentized, strict=True):
        mark = "  outlier" if _not_nan(t) and abs(t) > 3 else ""
        lines.append(f"  {p.id:<16} {p.value * scale:>6.2f} {unit} {p.f0_hz:>10.3f} ± "
                     f"{p.f0_stderr_hz:<5.3f} {p.temperature_c:>7.1f} {r:>8.2f}σ {t:>6.2f}{mark}")
    return "\n".join(lines + flag_lines(s.flags))


def series_page(s: SeriesFit, source: str, png: bytes | None = None,
                obj: dict[str, Any] | None = None) -> Page:
    """report.html / report.pdf of a series read from ``source`` (``png``: series.png)."""
    trim = s.vary == "neck-length"
    label, scale = ("neck length (mm)", _MM) if trim else ("filled volume (mL)", _ML)
    rows = tuple(
        (p.id, fmt(p.value * scale, ".2f"), fmt(p.f0_hz, ".3f"), fmt(p.f0_stderr_hz, ".3f"),
         fmt(p.temperature_c, ".1f"), fmt(y * 1e6, ".6g"), fmt(r, "+.2f"), fmt(t, "+.2f"),
         "outlier" if _not_nan(t) and abs(t) > 3 else "")
        for p, y, r, t in zip(s.points, s.inverse_f0_squared_s2, s.line.normalized_residuals,
                              s.line.studentized, strict=True))
    kind = "trim series" if trim else "fill series"
    table = Table(f"{len(s.points)} points. f0 as measured (s.e.: standard error); 1/f0² after "
                  f"bringing f0 to c = {s.reference_speed_of_sound_m_s:.2f} m/s; resid.: "
                  f"residual in standard errors; stud.: studentized residual (outlier beyond 3)",
                  ("id", label, "f0 (Hz)", "f0 s.e. (Hz)", "air (°C)", "1/f0² (ms²)",
                   "resid. (σ)", "stud.", "note"), rows)
    figure = None if png is None else Figure(
        png, f"1/f0² in ms² against the {label} for the {len(s.points)} points of the "
             f"{kind}, with error bars, the weighted straight line"
             + (" extended to its zero crossing at minus the end correction" if trim else "")
             + ", outliers ringed, and the studentized residuals below",
        ("Measured points and the weighted line; " + ("the dashed line marks −δ."
                                                      if trim else "studentized residuals below.")))
    failures = [f"{f.get('id', '?')}: {f.get('reason', '')}" for f in s.failures]
    settings = [("manifest", source), ("varied", "neck length" if trim else "filled volume"),
                ("weighting", "the f0 standard errors" if s.line.weighting == "stated-errors"
                 else "equal weights")]
    if failures:
        settings.append(("items not measured", "; ".join(failures)))
    air = (f"f0 brought to {s.reference_temperature_c:.1f} °C (c = "
           f"{s.reference_speed_of_sound_m_s:.2f} m/s)")
    return Page(kind=f"{kind} report", title=_title(source, kind, obj),
                subtitle=f"{source} · {len(s.points)} points",
                lead=tuple(ln.strip() for ln in series_lines(s)),
                tables=(table, *_object_table(obj, air)),
                figure=figure, flags=tuple(s.flags), settings=tuple(settings))


# ------------------------------------------------------------------ levels


def levels_lines(s: LevelStudy) -> list[str]:
    """The summary sentences of a drive-level study (no table, no flags)."""
    lines = [
        f"level study, {len(s.points)} levels from {s.points[0].spl_db:.1f} to "
        f"{s.points[-1].spl_db:.1f} dB (cavity SPL)",
        f"  small-signal Q0 = {s.q_small_signal:.3f} ± {s.q_small_signal_stderr:.3f}; "
        f"1/Q grows by {s.q_slope_per_pa:.4g} ± {s.q_slope_stderr_per_pa:.2g} per Pa (rms)",
    ]
    if _not_nan(s.onset_spl_db):
        xd = s.onset_displacement_over_diameter
        lines.append(f"  onset (Q down {100 * s.q_drop_fraction:.0f} %): {s.onset_spl_db:.2f} ± "
                     f"{s.onset_spl_stderr_db:.2f} dB ({s.onset_pressure_pa:.3g} Pa rms"
                     + (f", neck displacement {xd:.3g} of the diameter" if _not_nan(xd) else "")
                     + ")")
    else:
        lines.append("  onset: no Q drop detected"
                     + (f" (above about {s.onset_lower_bound_spl_db:.0f} dB)"
                        if _not_nan(s.onset_lower_bound_spl_db) else ""))
    lines.append(f"  f0 moves {s.f0_shift_hz:+.3f} ± {s.f0_shift_stderr_hz:.3f} Hz over the range")
    return lines


def levels_text(s: LevelStudy) -> str:
    """What ``characterize levels`` prints for a level study."""
    lines = levels_lines(s)
    lines.append(f"  {'id':<16} {'SPL (dB)':>9} {'f0 (Hz)':>18} {'Q':>14} {'xi/d':>8} "
                 f"{'stud.':>6}")
    for p, t in zip(s.points, s.line.studentized, strict=True):
        lines.append(f"  {p.id:<16} {p.spl_db:>9.1f} {p.f0_hz:>10.3f} ± {p.f0_stderr_hz:<5.3f} "
                     f"{p.q:>7.2f} ± {p.q_stderr:<4.2f} {p.displacement_over_diameter:>8.4f} "
                     f"{t:>6.2f}")
    return "\n".join(lines + flag_lines(s.flags))


def levels_page(s: LevelStudy, source: str, png: bytes | None = None,
                obj: dict[str, Any] | None = None) -> Page:
    """report.html / report.pdf of a level study read from ``source`` (``png``: levels.png)."""
    rows = tuple((p.id, fmt(p.spl_db, ".1f"), p.spl_source, fmt(p.f0_hz, ".3f"),
                  fmt(p.f0_stderr_hz, ".3f"), fmt(p.q, ".2f"), fmt(p.q_stderr, ".2f"),
                  fmt(p.displacement_over_diameter, ".4f"), fmt(t, "+.2f"))
                 for p, t in zip(s.points, s.line.studentized, strict=True))
    table = Table(f"{len(s.points)} levels in order of cavity SPL. SPL: cavity SPL, dB re "
                  f"20 µPa; s.e.: standard error; xi/d: neck displacement amplitude over neck "
                  f"diameter; stud.: studentized residual of 1/Q from the fitted line",
                  ("id", "SPL (dB)", "SPL from", "f0 (Hz)", "f0 s.e. (Hz)", "Q", "Q s.e.",
                   "xi/d", "stud."), rows)
    onset = (f"the onset at {s.onset_spl_db:.2f} ± {s.onset_spl_stderr_db:.2f} dB marked with "
             f"its band" if _not_nan(s.onset_spl_db) else "no onset detected")
    figure = None if png is None else Figure(
        png, f"Q with error bars against cavity SPL in dB for {len(s.points)} levels, with the "
             f"fitted model 1/Q = 1/Q0 + β p, the small-signal Q0 = {s.q_small_signal:.2f}, "
             f"the line {100 * s.q_drop_fraction:.0f} % below it and {onset}; f0 in Hz "
             f"against cavity SPL below",
        "Q and f0 against cavity SPL; fitted level model (line).")
    return _level_page(source, "level study report", table, figure, s.flags,
                       levels_lines(s), s.points[-1].spl_db, s.failures, obj)


def power_law_lines(p: PowerLawFit) -> list[str]:
    """The summary sentences of a force power law (no flags)."""
    verdict = ("consistent with" if p.consistent_with_square_law else "not consistent with")
    return [
        f"power law, {len(p.spl_db)} readings ({p.quantity}) from {min(p.spl_db):.1f} to "
        f"{max(p.spl_db):.1f} dB",
        f"  F = {p.coefficient_n:.4g} N x (p / 1 Pa)^n with n = {p.exponent:.3f} ± "
        f"{p.exponent_stderr:.3f} against pressure",
        f"  force ratio per 10 dB: {p.ratio_per_10_db:.2f} ± {p.ratio_per_10_db_stderr:.2f}",
        f"  expected for a second-order effect (common practice): n = 2, tenfold per 10 dB; "
        f"the fit is {verdict} it ({p.z_vs_expected:+.1f} standard errors)",
    ]


def power_law_text(p: PowerLawFit) -> str:
    """What ``characterize levels`` prints for a force table."""
    return "\n".join(power_law_lines(p) + flag_lines(p.flags))


def power_law_page(p: PowerLawFit, source: str, png: bytes | None = None) -> Page:
    """report.html / report.pdf of a force power law read from ``source`` (``png``:
    levels.png)."""
    rows = tuple((f"{k + 1}", fmt(spl, ".1f"), fmt(f, ".4g"), fmt(se, ".2g"))
                 for k, (spl, f, se) in enumerate(zip(p.spl_db, p.force_n,
                                                           p.force_stderr_n, strict=True)))
    table = Table(f"{len(p.spl_db)} readings ({p.quantity}; balance readings converted to "
                  f"force with standard gravity)",
                  ("#", "cavity SPL (dB re 20 µPa)", "steady force (N)",
                   "force standard error (N)"), rows)
    figure = None if png is None else Figure(
        png, f"Steady force in N against RMS cavity pressure in Pa on log axes for "
             f"{len(p.spl_db)} readings, with the fitted power law (n = {p.exponent:.3f}) and "
             f"a square law through the middle reading for comparison",
        "Force against drive level; fitted power law (line), square law (dashed).")
    return _level_page(source, "force power-law report", table, figure, p.flags,
                       power_law_lines(p), max(p.spl_db), ())


def _level_page(source: str, kind: str, table: Table, figure: Figure | None, flags: Any,
                lines: list[str], top_spl_db: float, failures: Any,
                obj: dict[str, Any] | None = None) -> Page:
    settings = [("table", source), ("highest cavity SPL (dB re 20 µPa)", fmt(top_spl_db, ".1f"))]
    if failures:
        settings.append(("items not measured", "; ".join(
            f"{f.get('id', '?')}: {f.get('reason', '')}" for f in failures)))
    return Page(kind=kind, title=_title(source, kind, obj), subtitle=source,
                lead=tuple(ln.strip() for ln in lines),
                caution=LEVELS_CAUTION if top_spl_db >= CAUTION_SPL_DB else None,
                tables=(table, *_object_table(obj)), figure=figure, flags=tuple(flags),
                settings=tuple(settings))


def write_study_reports(page: Page, html_path: str | Path, pdf_path: str | Path) -> list[Path]:
    """Write report.html and report.pdf of a study (atomically)."""
    return [write_html(html_path, page), write_pdf(pdf_path, page)]

