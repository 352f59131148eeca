"""``characterize selftest``: prove the installed tool on simulated recordings."""

from __future__ import annotations

import sys

import click

from ._errors import handles_errors


@click.command(short_help="Check this installation on simulated recordings.")
@click.option("--full", is_flag=True,
              help="The large run (400 resonators per method at 48 kHz, tables by regime; "
                   "about 8 minutes) instead of the compact one (about 20 s).")
@click.option("--json", "as_json", is_flag=True, help="Print the result as JSON.")
@click.option("--seed", type=int, default=None,
              help="Seed of the simulated cases [default: a fixed seed, so runs repeat].")
@handles_errors
def selftest(full: bool, as_json: bool, seed: int | None) -> None:
    """Simulate recordings with known f0 and Q on both paths (sweep and noise),
    fit them with this installation, and print bias, variance against the
    Cramer-Rao bound and the coverage of the reported errors, with pass/fail.

    Exit status 0 when every criterion passes, 1 when one fails.
    """
    from ..selftest import compact_plan, format_table, full_plan, run_selftest

    kw = {} if seed is None else {"seed": seed}
    plan = full_plan(**kw) if full else compact_plan(**kw)
    show = sys.stderr.isatty()

    def progress(done: int, total: int) -> None:
        if show:
            click.echo(f"\rselftest: {done}/{total} simulated recordings fitted", err=True,
                       nl=done == total)

    table = run_selftest(plan, progress=progress)
    if as_json:
        from ..report.document import to_json

        click.echo(to_json(table.to_dict()), nl=False)
    else:
        click.echo(format_table(table))
    if not table.passed:
        sys.exit(1)
