"""``characterize trim``: how to reach a target f0 from one fitted result."""

from __future__ import annotations

from pathlib import Path
from typing import Any

import click

from ._errors import handles_errors
from ._params import FREQUENCY


def _pm(value: float, stderr: float, decimals: int = 2) -> str:
    from ..report.text import pm

    return pm(value, stderr, decimals)


def _text(a: Any) -> str:
    """The advice as a few lines of text (units on every figure)."""
    mm, ml = 1e3, 1e6
    rel = a.target_f0_hz / a.f0_hz - 1
    n, v, d = a.neck, a.volume, a.diameter
    lines = [
        f"{a.name}: measured f0 {_pm(a.f0_hz, a.f0_stderr_hz, 3)} Hz at "
        f"{a.temperature_c:.1f} °C (c = {a.speed_of_sound_m_s:.2f} m/s); target "
        f"{a.target_f0_hz:.3f} Hz ({100 * rel:+.2f} %)",
        f"  measured end correction "
        f"{_pm(a.end_correction_m * mm, a.end_correction_stderr_m * mm)} mm = "
        f"{a.end_correction_over_radius:.3f} neck "
        f"radii (textbook {a.textbook_end_correction_m * mm:.2f} mm)",
    ]
    if n.cut_m >= 0 and n.possible:
        lines.append(f"  neck:     cut {_pm(n.cut_m * mm, n.cut_stderr_m * mm)} mm "
                     f"(length {a.length_m * mm:.2f} -> {n.new_length_m * mm:.2f} mm); the "
                     f"textbook end correction would say {n.textbook_cut_m * mm:.2f} mm")
    elif n.cut_m < 0:
        lines.append(f"  neck:     cannot be trimmed to this: it needs "
                     f"{_pm(-n.cut_m * mm, n.cut_stderr_m * mm)} mm MORE neck (length "
                     f"{n.new_length_m * mm:.2f} mm)")
    else:
        lines.append(f"  neck:     impossible: removing the whole neck gives at most "
                     f"{n.max_f0_hz:.2f} Hz")
    if v.change_m3 <= 0:
        lines.append(f"  volume:   take up {_pm(-v.change_m3 * ml, v.change_stderr_m3 * ml, 1)} "
                     f"mL (e.g. add {v.water_to_add_m3 * ml:.1f} mL of water; "
                     f"{a.volume_m3 * ml:.1f} -> {v.new_volume_m3 * ml:.1f} mL)")
    else:
        lines.append(f"  volume:   enlarge by {_pm(v.change_m3 * ml, v.change_stderr_m3 * ml, 1)}"
                     f" mL ({a.volume_m3 * ml:.1f} -> {v.new_volume_m3 * ml:.1f} mL)")
    verb = "drill to" if d.possible_by_drilling else "sleeve to"
    if d.new_diameter_m != d.new_diameter_m:
        lines.append("  bore:     not available (see the flags)")
    else:
        lines.append(f"  bore:     {verb} "
                     f"{_pm(d.new_diameter_m * mm, d.new_diameter_stderr_m * mm)} mm "
                     f"(from {a.diameter_m * mm:.2f} mm)")
    from ..report.text import flag_lines
    from ..report.values import length_sensitivity_text

    if n.cut_m >= 0 and n.possible:
        lines.append("  note:     " + length_sensitivity_text(n.cut_m, a.temperature_c, "the cut"))
    else:
        lines.append("  note:     errors are the fit's only; the geometry's and the "
                     "temperature's come on top")
    lines += flag_lines(a.flags)
    return "\n".join(lines)


@click.command("trim", short_help="How to cut, fill or drill to reach a target f0.")
@click.argument("result_path", metavar="RESULT.json",
                type=click.Path(path_type=Path))
@click.option("--target", "target_hz", type=FREQUENCY, required=True,
              help="Target f0 ('195 Hz'; a bare number is Hz), at the measurement's air.")
@click.option("--object", "object_path", type=click.Path(path_type=Path),
              help="Object file (TOML) describing the geometry, if the result has none "
                   "(or to use another description).")
@click.option("--json", "as_json", is_flag=True, help="Print the advice as JSON.")
@click.option("--out", "out_dir", type=click.Path(file_okay=False, path_type=Path),
              help="Write DIR/trim.json and DIR/trim.txt.")
@click.option("--force", is_flag=True, help="Overwrite the files in --out.")
@handles_errors
def trim(result_path: Path, target_hz: float, object_path: Path | None, as_json: bool,
         out_dir: Path | None, force: bool) -> None:
    """Say how to reach a target f0 from a fitted RESULT.json: cut the neck (with
    the end correction measured on this object), change the volume, or drill the bore.

    Each figure carries its standard error, propagated from the fit. Trimming only
    shortens a neck; when the target needs a longer one, the volume and bore routes
    are offered instead.
    """
    from ..fileio import out_folder
    from ..objectfile import load_object
    from ..report.document import to_json
    from ..tuning import advise_trim, load_result

    targets = [] if out_dir is None else out_folder(out_dir, ["trim.json", "trim.txt"],
                                                     force=force)
    result = load_result(result_path)
    if object_path is not None:
        result = result.with_object(load_object(object_path))
    advice = advise_trim(result, target_hz)
    text = _text(advice)
    if targets:
        from ..fileio import atomic_write_text
        from ..report.document import write_document

        write_document(targets[0], advice.to_dict())
        atomic_write_text(targets[1], text + "\n")
    if as_json:
        click.echo(to_json(advice.to_dict()), nl=False)
    else:
        click.echo(text)
        if targets:
            click.echo("wrote " + ", ".join(str(t) for t in targets))
