"""``characterize compare A B [C ...] --out DIR``: fitted results side by side."""

from __future__ import annotations

from pathlib import Path

import click

from ._errors import handles_errors


@click.command("compare", short_help="Overlay several fitted results; table of differences.")
@click.argument("results", metavar="RESULT...", nargs=-1, required=True,
                type=click.Path(path_type=Path))
@click.option("--out", "out_dir", type=click.Path(file_okay=False, path_type=Path),
              help="Write DIR/comparison.json, comparison.png, report.html and report.pdf.")
@click.option("--label", "labels", multiple=True,
              help="A name for each result, in order (default: its folder's name).")
@click.option("--json", "as_json", is_flag=True, help="Print the comparison document.")
@click.option("--force", is_flag=True, help="Overwrite the files in --out.")
@handles_errors
def compare(results: tuple[Path, ...], out_dir: Path | None, labels: tuple[str, ...],
            as_json: bool, force: bool) -> None:
    """Compare two or more fitted RESULTs (result.json files, or the folders
    'fit --out' wrote, whose transfer.csv holds the measured response): one
    figure overlaying the measured responses and their fits, and a table of f0,
    Q, the predicted values and the differences from the first result, with
    standard errors. The results may come from different sample rates, methods
    and fit bands.
    """
    from ..compare import compare as run_compare
    from ..report.compare_report import comparison_text
    from ..report.document import to_json

    comp = run_compare(list(results), out_dir=out_dir, labels=list(labels) or None,
                       force=force)
    if as_json:
        click.echo(to_json(comp.to_dict()), nl=False)
        return
    click.echo(comparison_text(comp))
    if out_dir is not None:
        from ..compare import OUTPUT_FILES

        click.echo("wrote " + ", ".join(str(Path(out_dir) / n) for n in OUTPUT_FILES))
