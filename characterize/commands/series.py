"""``characterize series``: trim and fill series (1/f0^2 linear in L or in volume)."""

from __future__ import annotations

import sys
from pathlib import Path

import click

from ._errors import handles_errors


@click.command("series", short_help="End correction from a trim or fill series.")
@click.argument("manifest", metavar="MANIFEST.csv", type=click.Path(path_type=Path))
@click.option("--vary", type=click.Choice(["neck-length", "volume"]), required=True,
              help="What changed between the points: the neck length (column neck_length, "
                   "e.g. '36 mm') or the filled volume (column fill_volume, e.g. '50 mL').")
@click.option("--json", "as_json", is_flag=True, help="Print the series document.")
@click.option("--out", "out_dir", type=click.Path(file_okay=False, path_type=Path),
              help="Write DIR/series.json, series.png, report.html and report.pdf.")
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
    from ..tuning import (
        VARY,
        SeriesPoint,
        check_points,
        fit_series,
        measure_rows,
        read_tuning_manifest,
    )

    column, kind = VARY[vary]
    targets = []
    if out_dir is not None:
        if out_dir.exists() and not out_dir.is_dir():
            raise InputError(str(out_dir), None, "--out must be a directory")
        targets = [out_dir / "series.json", out_dir / "series.png", out_dir / "report.html",
                   out_dir / "report.pdf"]
        for t in targets:
            check_writable(t, force=force)
    rows = read_tuning_manifest(manifest, {column: kind}, required_values=(column,))
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
        from ..report.page import png_bytes
        from ..report.tuning_plots import series_plot
        from ..report.tuning_report import series_page, write_study_reports

        write_document(targets[0], doc)
        series_plot(fit, targets[1])
        write_study_reports(series_page(fit, str(manifest), png_bytes(targets[1]),
                                        None if obj is None else obj.to_dict()),
                            targets[2], targets[3])
    if as_json:
        click.echo(to_json(doc), nl=False)
    else:
        from ..report.tuning_report import series_text

        click.echo(series_text(fit))
        if out_dir is not None:
            click.echo("wrote " + ", ".join(str(t) for t in targets))
    if failures:
        sys.exit(1)
