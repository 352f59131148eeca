"""``characterize levels``: drive-level studies and force power laws."""

from __future__ import annotations

import sys
import textwrap
from pathlib import Path
from typing import Any

import click

# the caution lives with the study's report text (a light module: no numpy at import)
from ..report.tuning_report import CAUTION_SPL_DB
from ..report.tuning_report import LEVELS_CAUTION as CAUTION
from ._errors import handles_errors


@click.command("levels", short_help="Drive-level study: Q and steady force against the level.",
               help=f"""Drive-level study from MANIFEST.csv.

A manifest of recordings (or result documents) of one object at increasing drive
level, with the cavity SPL in column spl_db (dB re 20 uPa; a calibrated result's
drive block takes precedence): f0, Q and the neck displacement over diameter at
each level, the level where Q has dropped 10 % from its small-signal value (the
onset of the nonlinear regime) with its uncertainty, and a plot of Q and f0
against cavity SPL.

A table with columns spl_db and force_n (N) or excess_mass_kg (a balance
reading, kg) instead gets a power-law fit on log axes; the exponent against
pressure is compared with 2, the square law of a second-order effect (tenfold
for every 10 dB).

\b
{textwrap.fill(CAUTION, 76)}
""")
@click.argument("manifest", metavar="MANIFEST.csv", type=click.Path(path_type=Path))
@click.option("--out", "out_dir", type=click.Path(file_okay=False, path_type=Path),
              help="Write DIR/levels.json, levels.png, report.html and report.pdf.")
@click.option("--json", "as_json", is_flag=True, help="Print the study as JSON.")
@click.option("--force", is_flag=True, help="Overwrite existing outputs in --out.")
@handles_errors
def levels(manifest: Path, out_dir: Path | None, as_json: bool, force: bool) -> None:
    from ..errors import FitError, InputError
    from ..fileio import check_writable
    from ..report import tuning_report
    from ..report.document import to_json, write_document
    from ..tuning import (
        check_points,
        fit_power_law,
        is_force_table,
        level_points,
        level_study,
        measure_rows,
        read_force_table,
        read_tuning_manifest,
    )

    targets = []
    if out_dir is not None:
        if out_dir.exists() and not out_dir.is_dir():
            raise InputError(str(out_dir), None, "--out must be a directory")
        targets = [out_dir / "levels.json", out_dir / "levels.png", out_dir / "report.html",
                   out_dir / "report.pdf"]
        for t in targets:
            check_writable(t, force=force)
    failures: list[Any] = []
    if is_force_table(manifest):
        table = read_force_table(manifest)
        result: Any = fit_power_law(table.spl_db, table.force_n, table.force_stderr_n,
                                    quantity=table.quantity, source=str(manifest))
        text = tuning_report.power_law_text(result)
        top = max(table.spl_db)
    else:
        rows = read_tuning_manifest(manifest, {"spl_db": "db"})
        if len(rows) < 3:
            raise InputError(str(manifest), None,
                             f"a level study needs at least 3 levels, got {len(rows)}")
        if all("spl_db" in r.values for r in rows):
            check_points([r.values["spl_db"] for r in rows], [r.id for r in rows],
                         str(manifest), "level study")
        measured, failures = measure_rows(rows)
        points = level_points(measured, str(manifest))
        if len(points) < 3 and failures:
            raise FitError(f"{manifest}: only {len(points)} of {len(rows)} items could be "
                           f"measured ({failures[0].id}: {failures[0].reason})")
        result = level_study(points, source=str(manifest),
                             failures=[f.to_dict() for f in failures])
        text = tuning_report.levels_text(result)
        top = result.points[-1].spl_db
    doc = result.to_dict()
    if out_dir is not None:
        from ..report import tuning_plots
        from ..report.page import png_bytes

        write_document(targets[0], doc)
        if doc["schema"] == "characterize.levels/1":
            tuning_plots.levels_plot(result, targets[1])
            obj = next((m.result.object for m in measured if m.result.object is not None),
                       None)
            page = tuning_report.levels_page(result, str(manifest), png_bytes(targets[1]),
                                             None if obj is None else obj.to_dict())
        else:
            tuning_plots.power_law_plot(result, targets[1])
            page = tuning_report.power_law_page(result, str(manifest), png_bytes(targets[1]))
        tuning_report.write_study_reports(page, targets[2], targets[3])
    if as_json:
        click.echo(to_json(doc), nl=False)
    else:
        click.echo(text)
        if out_dir is not None:
            click.echo("wrote " + ", ".join(str(t) for t in targets))
    if top >= CAUTION_SPL_DB:
        click.echo(CAUTION, err=True)
    if failures:
        sys.exit(1)
