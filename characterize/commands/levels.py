"""``characterize levels``: drive-level studies and force power laws."""

from __future__ import annotations

import sys
import textwrap
from pathlib import Path
from typing import Any

import click

from ._errors import handles_errors

CAUTION = (
    "CAUTION: drive-level studies mean 110 dB and more near the loudspeaker and up to "
    "130-150 dB inside the cavity. Wear hearing protection, keep exposures short (e.g. "
    "NIOSH: 85 dB(A) for 8 h, 3 dB exchange rate, about 1.5 min at 110 dB(A)), step the "
    "level up from low, never leave a drive running unattended, and follow your local "
    "occupational-noise regulations, which take precedence."
)


def _level_text(s: Any) -> str:
    lines = [
        f"level study, {len(s.points)} levels from {s.points[0].spl_db:.1f} to "
        f"{s.points[-1].spl_db:.1f} dB (cavity SPL)",
        f"  small-signal Q0 = {s.q_small_signal:.3f} ± {s.q_small_signal_stderr:.3f}; "
        f"1/Q grows by {s.q_slope_per_pa:.4g} ± {s.q_slope_stderr_per_pa:.2g} per Pa (rms)",
    ]
    if s.onset_spl_db == s.onset_spl_db:
        xd = s.onset_displacement_over_diameter
        lines.append(f"  onset (Q down {100 * s.q_drop_fraction:.0f} %): {s.onset_spl_db:.2f} ± "
                     f"{s.onset_spl_stderr_db:.2f} dB ({s.onset_pressure_pa:.3g} Pa rms"
                     + (f", neck displacement {xd:.3g} of the diameter" if xd == xd else "") + ")")
    else:
        lines.append("  onset: no Q drop detected"
                     + (f" (above about {s.onset_lower_bound_spl_db:.0f} dB)"
                        if s.onset_lower_bound_spl_db == s.onset_lower_bound_spl_db else ""))
    lines.append(f"  f0 moves {s.f0_shift_hz:+.3f} ± {s.f0_shift_stderr_hz:.3f} Hz over the range")
    lines.append(f"  {'id':<16} {'SPL (dB)':>9} {'f0 (Hz)':>18} {'Q':>14} {'xi/d':>8} "
                 f"{'stud.':>6}")
    for p, t in zip(s.points, s.line.studentized):
        lines.append(f"  {p.id:<16} {p.spl_db:>9.1f} {p.f0_hz:>10.3f} ± {p.f0_stderr_hz:<5.3f} "
                     f"{p.q:>7.2f} ± {p.q_stderr:<4.2f} {p.displacement_over_diameter:>8.4f} "
                     f"{t:>6.2f}")
    from ..report.text import flag_lines

    lines += flag_lines(s.flags)
    return "\n".join(lines)


def _power_text(p: Any) -> str:
    verdict = ("consistent with" if p.consistent_with_square_law else "not consistent with")
    lines = [
        f"power law, {len(p.spl_db)} readings ({p.quantity}) from {min(p.spl_db):.1f} to "
        f"{max(p.spl_db):.1f} dB",
        f"  F = {p.coefficient_n:.4g} N x (p / 1 Pa)^n with n = {p.exponent:.3f} ± "
        f"{p.exponent_stderr:.3f} against pressure",
        f"  force ratio per 10 dB: {p.ratio_per_10_db:.2f} ± {p.ratio_per_10_db_stderr:.2f}",
        f"  expected for a second-order effect (common practice): n = 2, tenfold per 10 dB; "
        f"the fit is {verdict} it ({p.z_vs_expected:+.1f} standard errors)",
    ]
    from ..report.text import flag_lines

    lines += flag_lines(p.flags)
    return "\n".join(lines)


@click.command("levels", help=f"""Drive-level study from MANIFEST.csv.

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
              help="Write DIR/levels.json and DIR/levels.png.")
@click.option("--json", "as_json", is_flag=True, help="Print the study as JSON.")
@click.option("--force", is_flag=True, help="Overwrite existing outputs in --out.")
@handles_errors
def levels(manifest: Path, out_dir: Path | None, as_json: bool, force: bool) -> None:
    from ..errors import FitError, InputError
    from ..fileio import check_writable
    from ..report.document import to_json, write_document
    from ..tuning import (
        check_points,
        fit_power_law,
        is_force_table,
        level_points,
        level_study,
        measure_rows,
        read_force_table,
        read_manifest,
    )

    targets = []
    if out_dir is not None:
        if out_dir.exists() and not out_dir.is_dir():
            raise InputError(str(out_dir), None, "--out must be a directory")
        targets = [out_dir / "levels.json", out_dir / "levels.png"]
        for t in targets:
            check_writable(t, force=force)
    failures: list[Any] = []
    if is_force_table(manifest):
        table = read_force_table(manifest)
        result: Any = fit_power_law(table.spl_db, table.force_n, table.force_stderr_n,
                                    quantity=table.quantity, source=str(manifest))
        text = _power_text(result)
        top = max(table.spl_db)
    else:
        rows = read_manifest(manifest, {"spl_db": "db"})
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
        text = _level_text(result)
        top = result.points[-1].spl_db
    doc = result.to_dict()
    if out_dir is not None:
        from ..report import tuning_plots

        write_document(targets[0], doc)
        if doc["schema"] == "characterize.levels/1":
            tuning_plots.levels_plot(result, targets[1])
        else:
            tuning_plots.power_law_plot(result, targets[1])
    if as_json:
        click.echo(to_json(doc), nl=False)
    else:
        click.echo(text)
        if out_dir is not None:
            click.echo(f"wrote {targets[0]} and {targets[1]}")
    if top >= 110.0:
        click.echo(CAUTION, err=True)
    if failures:
        sys.exit(1)
