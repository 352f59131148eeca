"""``characterize match``: matched sets from many fitted results."""

from __future__ import annotations

from pathlib import Path
from typing import Any

import click

from ._errors import handles_errors
from ._params import FREQUENCY


def _describe(s: Any, target: float) -> str:
    return (f"{', '.join(s.ids)}\n      f0 {s.f0_mean_hz:.3f} Hz mean ({s.offset_hz:+.3f} Hz from "
            f"target), spread {s.f0_range_hz:.3f} Hz (sd {s.f0_std_hz:.3f}), worst "
            f"{s.max_deviation_hz:.3f} Hz = {100 * s.max_deviation_hz / target:.3f} % off; "
            f"Q {s.q_mean:.2f} (range {s.q_range:.2f}, sd {s.q_std:.2f}); cost {s.cost:.4g}")


def _text(m: Any) -> str:
    lines = [f"{m.count} of {len(m.items)} results most alike and nearest "
             f"{m.target_f0_hz:.3f} Hz, by {m.by} (f0 brought to c = "
             f"{m.reference_speed_of_sound_m_s:.2f} m/s, {m.reference_temperature_c:.1f} °C)",
             f"  best:   {_describe(m.best, m.target_f0_hz)}"]
    for i, alt in enumerate(m.alternatives, 1):
        lines.append(f"  alt {i}:  {_describe(alt, m.target_f0_hz)}")
    from ..report.text import flag_lines

    lines += flag_lines(m.flags)
    return "\n".join(lines)


@click.command("match", short_help="Pick the K results that respond most alike near a target.")
@click.argument("results", metavar="RESULTS...", nargs=-1, required=True,
                type=click.Path(path_type=Path))
@click.option("--count", "-k", "count", type=int, required=True,
              help="How many items the set needs (K).")
@click.option("--target", "target_hz", type=FREQUENCY, required=True,
              help="Target f0 ('243 Hz'; a bare number is Hz).")
@click.option("--by", type=click.Choice(["f0", "f0,q"]), default="f0", show_default=True,
              help="Match on f0 alone, or on f0 and Q.")
@click.option("--alternatives", type=click.IntRange(0, 20), default=3, show_default=True,
              help="How many next-best sets to show.")
@click.option("--json", "as_json", is_flag=True, help="Print the match as JSON.")
@click.option("--out", "out_dir", type=click.Path(file_okay=False, path_type=Path),
              help="Write DIR/match.json and DIR/match.txt.")
@click.option("--force", is_flag=True, help="Overwrite the files in --out.")
@handles_errors
def match(results: tuple[Path, ...], count: int, target_hz: float, by: str, alternatives: int,
          as_json: bool, out_dir: Path | None, force: bool) -> None:
    """Pick the K fitted RESULTS (result.json files, or folders holding one) whose
    f0 (and Q, with --by f0,q) lie closest together and nearest the target.

    With --by f0 a set's cost is its f0 spread plus the offset of its centre
    from the target (both count alike); with --by f0,q that figure, in half-power
    half-bandwidths, and the relative Q spread are added in quadrature. The
    search is exact. The chosen set's spread and the next-best sets are shown;
    f0 values measured at different temperatures are first brought to one speed
    of sound.
    """
    from ..fileio import out_folder
    from ..report.document import to_json
    from ..tuning import load_result, match_sets

    targets = [] if out_dir is None else out_folder(out_dir, ["match.json", "match.txt"],
                                                     force=force)
    # the same document named twice (overlapping globs, a folder and its result.json)
    # counts once
    unique: dict[Path, Path] = {}
    for p in results:
        unique.setdefault((p / "result.json" if p.is_dir() else p).resolve(), p)
    docs = [load_result(p) for p in unique.values()]
    m = match_sets(docs, count, target_hz, by, alternatives=alternatives)
    text = _text(m)
    if targets:
        from ..fileio import atomic_write_text
        from ..report.document import write_document

        write_document(targets[0], m.to_dict())
        atomic_write_text(targets[1], text + "\n")
    if as_json:
        click.echo(to_json(m.to_dict()), nl=False)
    else:
        click.echo(text)
        if targets:
            click.echo("wrote " + ", ".join(str(t) for t in targets))
