"""``characterize batch``: check a whole manifest of recordings against a spec."""

from __future__ import annotations

import sys
from pathlib import Path
from typing import Any

import click

from ._errors import handles_errors


@click.command("batch", short_help="Check every recording of a manifest against a spec.")
@click.argument("manifest", type=click.Path(path_type=Path))
@click.option("--spec", "spec_path", required=True, type=click.Path(path_type=Path),
              help="Spec (TOML): f0 target and tolerance, Q limits, flags that fail.")
@click.option("--out", "out_dir", required=True,
              type=click.Path(file_okay=False, path_type=Path),
              help="Output folder: items/ID.json, summary.csv/json, report.html/pdf.")
@click.option("--workers", type=click.IntRange(min=1), default=None,
              help="Worker processes [default: all cores].")
@click.option("--resume", is_flag=True,
              help="Keep the items already done in --out; do the rest (failed ones again).")
@click.option("--force", is_flag=True, help="Recompute every item and overwrite --out.")
@click.option("--json", "as_json", is_flag=True,
              help="Print the summary document (what summary.json holds) instead of the text.")
@handles_errors
def batch(manifest: Path, spec_path: Path, out_dir: Path, workers: int | None, resume: bool,
          force: bool, as_json: bool) -> None:
    """Fit every recording in MANIFEST.csv, check each against the spec, and
    write per-item results, batch statistics and reports.

    Exit status 0 when every item passed, 1 when any item failed the spec or
    could not be analysed, 2 for bad input.
    """
    from ..batch import (
        BatchInterrupted,
        check_outputs,
        read_manifest,
        read_spec,
        run_batch,
        write_reports,
    )

    spec = read_spec(spec_path)
    items = read_manifest(manifest, spec)
    check_outputs(items, out_dir, resume=resume, force=force)
    counts = {"done": 0, "pass": 0, "error": 0}

    def show(_: Any) -> str:
        d = counts["done"]
        rate = f"{100 * counts['pass'] / d:.0f} %" if d else "-"
        return f"done {d}, failed {counts['error']}, pass rate {rate}"

    n = len(items.items)
    with click.progressbar(length=n, label=f"{n} items", item_show_func=show, file=sys.stderr,
                           show_pos=True) as bar:
        def progress(outcome: Any) -> None:
            counts["done"] += 1
            counts["pass"] += outcome.status == "pass"
            counts["error"] += outcome.status == "error"
            bar.update(1, outcome)

        try:
            summary = run_batch(items, spec, out_dir, workers=workers, resume=resume,
                                force=force, progress=progress)
        except BatchInterrupted as exc:
            click.echo(f"\ncharacterize: batch interrupted: {exc}", err=True)
            sys.exit(1)
        except KeyboardInterrupt:
            click.echo(f"\ncharacterize: batch interrupted: the finished items are saved in "
                       f"{Path(out_dir) / 'items'}; rerun with --resume", err=True)
            sys.exit(130)
    written = write_reports(summary, out_dir)
    if as_json:
        from ..report.document import to_json

        click.echo(to_json(summary.to_dict()), nl=False)
        sys.exit(0 if summary.all_passed else 1)
    st = summary.stats
    click.echo(f"{st.n_items} items: {st.n_pass} pass, {st.n_fail} fail, {st.n_error} "
               f"without a result; pass rate {100 * st.pass_rate:.1f} %")
    if st.f0_mean_hz is not None:
        std = "-" if st.f0_std_hz is None else f"{st.f0_std_hz:.3f}"
        qstd = "-" if st.q_std is None else f"{st.q_std:.2f}"
        cpk = "-" if st.cpk is None else f"{st.cpk:.2f}"
        click.echo(f"f0 mean {st.f0_mean_hz:.3f} Hz, std {std} Hz; Q mean {st.q_mean:.2f}, "
                   f"std {qstd}; Cpk {cpk} against {spec.f0_lower_hz:.2f} to "
                   f"{spec.f0_upper_hz:.2f} Hz")
    for it in summary.items:
        if it.status != "pass":
            why = it.reasons[0] if it.reasons else ""
            click.echo(f"  {it.status.upper():5} {it.id}: {why}")
    if st.outliers:
        click.echo("outliers: " + ", ".join(f"{o.id} ({o.quantity})" for o in st.outliers))
    click.echo("wrote " + ", ".join(str(p) for p in written) + f" and {Path(out_dir) / 'items'}/")
    if not summary.all_passed:
        sys.exit(1)
