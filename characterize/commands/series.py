"""``characterize series``: trim and fill series (1/f0^2 linear in L or in volume)."""

from __future__ import annotations

import sys
from pathlib import Path
from typing import Any

import click

from ._errors import handles_errors


def _text(s: Any) -> str:
    mm, ml = 1e3, 1e6
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
                        if s.end_correction_over_radius == s.end_correction_over_radius else ""))
        lines.append(f"  V/S = {s.volume_over_area_m:.5g} ± {s.volume_over_area_stderr_m:.2g} m"
                     + (f" (V = {s.volume_m3 * ml:.1f} ± {s.volume_stderr_m3 * ml:.1f} mL)"
                        if s.volume_m3 == s.volume_m3 else ""))
    else:
        lines.append(f"  L_eff/S = {s.effective_length_over_area_m_inv:.5g} ± "
                     f"{s.effective_length_over_area_stderr_m_inv:.2g} 1/m, empty volume V0 = "
                     f"{s.volume_m3 * ml:.2f} ± {s.volume_stderr_m3 * ml:.2f} mL")
        if s.effective_neck_length_m == s.effective_neck_length_m:
            lines.append(f"  L_eff = {s.effective_neck_length_m * mm:.3f} ± "
                         f"{s.effective_neck_length_stderr_m * mm:.3f} mm"
                         + (f", end correction {s.end_correction_m * mm:.3f} mm = "
                            f"{s.end_correction_over_radius:.3f} neck radii"
                            if s.end_correction_m == s.end_correction_m else ""))
    if s.textbook_end_correction_m == s.textbook_end_correction_m:
        lines.append(f"  textbook end correction for this geometry: "
                     f"{s.textbook_end_correction_m * mm:.3f} mm")
    unit, scale = ("mm", mm) if trim else ("mL", ml)
    lines.append(f"  {'id':<16} {'value':>9} {'f0 (Hz)':>18} {'T (°C)':>7} {'residual':>9} "
                 f"{'stud.':>6}")
    for p, r, t in zip(s.points, line.normalized_residuals, line.studentized):
        mark = "  outlier" if t == t and abs(t) > 3 else ""
        lines.append(f"  {p.id:<16} {p.value * scale:>6.2f} {unit} {p.f0_hz:>10.3f} ± "
                     f"{p.f0_stderr_hz:<5.3f} {p.temperature_c:>7.1f} {r:>8.2f}σ {t:>6.2f}{mark}")
    from ..report.text import flag_lines

    lines += flag_lines(s.flags)
    return "\n".join(lines)


@click.command("series")
@click.argument("manifest", metavar="MANIFEST.csv", type=click.Path(path_type=Path))
@click.option("--vary", type=click.Choice(["neck-length", "volume"]), required=True,
              help="What changed between the points: the neck length (column neck_length, "
                   "e.g. '36 mm') or the filled volume (column fill_volume, e.g. '50 mL').")
@click.option("--json", "as_json", is_flag=True, help="Print the series document.")
@click.option("--out", "out_dir", type=click.Path(file_okay=False, path_type=Path),
              help="Write DIR/series.json and DIR/series.png.")
@click.option("--force", is_flag=True, help="Overwrite existing outputs in --out.")
@handles_errors
def series(manifest: Path, vary: str, as_json: bool, out_dir: Path | None, force: bool) -> None:
    """Fit a trim or fill series listed in MANIFEST.csv by weighted least squares.

    A trim series gives the end correction δ measured directly (1/f0² = b (L + δ))
    and V/S; a fill series gives L_eff/S and the empty volume. Each row names a
    recording (with object, sweep, inside, outside, temperature columns as needed)
    or a result document, and the varied value. Exit status 1 when an item could
    not be measured (the others are still fitted).
    """
    from ..errors import InputError
    from ..fileio import check_writable
    from ..report.document import to_json, write_document
    from ..tuning import VARY, SeriesPoint, check_points, fit_series, measure_rows, read_manifest

    column, kind = VARY[vary]
    targets = []
    if out_dir is not None:
        if out_dir.exists() and not out_dir.is_dir():
            raise InputError(str(out_dir), None, "--out must be a directory")
        targets = [out_dir / "series.json", out_dir / "series.png"]
        for t in targets:
            check_writable(t, force=force)
    rows = read_manifest(manifest, {column: kind}, required_values=(column,))
    check_points([r.values[column] for r in rows], [r.id for r in rows], str(manifest),
                 "trim series" if vary == "neck-length" else "fill series")
    measured, failures = measure_rows(rows)
    points = [SeriesPoint(id=m.row.id, value=m.row.values[column], f0_hz=m.result.f0_hz,
                          f0_stderr_hz=m.result.f0_stderr_hz,
                          speed_of_sound_m_s=m.result.air.speed_of_sound_m_s,
                          temperature_c=m.result.air.temperature_c, source=m.result.source)
              for m in measured]
    if len(points) < 3 and failures:
        from ..errors import FitError

        raise FitError(f"{manifest}: only {len(points)} of {len(rows)} items could be measured "
                       f"({failures[0].id}: {failures[0].reason})")
    obj = next((m.result.object for m in measured if m.result.object is not None), None)
    fit = fit_series(points, vary, obj, source=str(manifest),
                     failures=[f.to_dict() for f in failures])
    doc = fit.to_dict()
    if out_dir is not None:
        from ..report.tuning_plots import series_plot

        write_document(targets[0], doc)
        series_plot(fit, targets[1])
    if as_json:
        click.echo(to_json(doc), nl=False)
    else:
        click.echo(_text(fit))
        if out_dir is not None:
            click.echo(f"wrote {targets[0]} and {targets[1]}")
    if failures:
        sys.exit(1)
