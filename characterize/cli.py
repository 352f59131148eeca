"""Command line: a thin click shell over the library.

Heavy modules (numpy, scipy, lmfit, matplotlib, soundfile) are imported inside
the commands, so ``characterize --help`` starts fast.
"""

from __future__ import annotations

import sys
from pathlib import Path
from typing import Any

import click

from ._version import __version__
from .commands._errors import handles_errors
from .commands._params import FREQUENCY, LENGTH, SECONDS, Fraction, Level, Quantity, air_options
from .errors import FitError, InputError

#: Exit status after Ctrl-C (128 + SIGINT, the shell's convention), distinct from
#: 1 (no fit, failed item) and 2 (bad input).
INTERRUPTED = 130


class OneLineErrors(click.Group):
    """A click group whose usage errors are one line (exit status 2), like the
    library's input errors, instead of click's three-line usage block."""

    def main(self, *args: Any, **kwargs: Any) -> Any:  # type: ignore[override]
        kwargs["standalone_mode"] = False
        try:
            rv = super().main(*args, **kwargs)
        except click.exceptions.NoArgsIsHelpError as exc:
            click.echo(exc.format_message())
            sys.exit(0)
        except click.exceptions.UsageError as exc:
            cmd = f" {exc.ctx.info_name}" if exc.ctx is not None and exc.ctx.parent else ""
            click.echo(f"characterize: error: {exc.format_message()} "
                       f"(see characterize{cmd} --help)", err=True)
            sys.exit(2)
        except (click.exceptions.Abort, KeyboardInterrupt):
            click.echo("characterize: interrupted", err=True)
            sys.exit(INTERRUPTED)
        except click.exceptions.ClickException as exc:
            click.echo(f"characterize: error: {exc.format_message()}", err=True)
            sys.exit(exc.exit_code)
        sys.exit(rv if isinstance(rv, int) else 0)

    def format_commands(self, ctx: click.Context, formatter: click.HelpFormatter) -> None:
        """The command list with each command's whole one-line summary (click
        cuts them to fit the terminal's width)."""
        rows = []
        for name in self.list_commands(ctx):
            cmd = self.get_command(ctx, name)
            if cmd is None or cmd.hidden:
                continue
            text = cmd.short_help or (cmd.help or "").strip().split("\n\n")[0]
            rows.append((name, " ".join(text.split())))
        if rows:
            with formatter.section("Commands"):
                formatter.write_dl(rows)


@click.group(cls=OneLineErrors, context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(__version__, prog_name="characterize")
def main() -> None:
    """Measure acoustic resonators: sweep, record, fit f0 and Q, compare with geometry."""


@main.command(short_help="Write an exponential sine sweep and its sidecar.")
@click.argument("out", type=click.Path(dir_okay=False, path_type=Path))
@click.option("--start", "start_hz", type=FREQUENCY, default=20.0, show_default=True,
              help="Start frequency ('20 Hz'; a bare number is Hz).")
@click.option("--stop", "stop_hz", type=FREQUENCY, default=4000.0, show_default=True,
              help="Stop frequency ('4 kHz'; a bare number is Hz).")
@click.option("--duration", "duration_s", type=SECONDS, default=5.0, show_default=True,
              help="Sweep duration ('5 s'; a bare number is s), fades included.")
@click.option("--rate", "rate_hz", type=int, default=48000, show_default=True,
              help="Sample rate (Hz).")
@click.option("--level", "level_dbfs", type=Level("dBFS"), default=-12.0, show_default=True,
              help="Peak level ('-12 dBFS'; a bare number is dBFS). Start low and step up.")
@click.option("--fade-in", "fade_in_s", type=SECONDS, default=0.05, show_default=True,
              help="Half-Hann fade-in ('50 ms'; a bare number is s).")
@click.option("--fade-out", "fade_out_s", type=SECONDS, default=0.01, show_default=True,
              help="Half-Hann fade-out ('10 ms'; a bare number is s).")
@click.option("--tail", "tail_s", type=SECONDS, default=2.0, show_default=True,
              help="Silence after the sweep ('2 s'; a bare number is s): longer than the "
                   "ringing, Q/(pi f0) x 10.")
@click.option("--force", is_flag=True, help="Overwrite OUT and its sidecar.")
@click.option("--json", "as_json", is_flag=True,
              help="Print the sweep's parameters (what the sidecar holds) as JSON.")
@handles_errors
def sweep(out: Path, force: bool, as_json: bool, **kw: Any) -> None:
    """Write an exponential sine sweep OUT.wav and its sidecar OUT.toml."""
    import soundfile as sf

    from .excitation import SAFETY_CAUTION, SweepParams, make_sweep, sidecar_path, sidecar_text
    from .fileio import atomic_write, atomic_write_text, check_writable

    if out.suffix.lower() != ".wav":
        raise InputError(str(out), None, "the sweep is written as WAV: give a .wav name")
    side = sidecar_path(out)
    check_writable(out, force=force)
    check_writable(side, force=force, what="sidecar")
    params = SweepParams(
        start_hz=kw["start_hz"], stop_hz=kw["stop_hz"], duration_s=kw["duration_s"],
        rate_hz=float(kw["rate_hz"]), level_dbfs=kw["level_dbfs"], fade_in_s=kw["fade_in_s"],
        fade_out_s=kw["fade_out_s"], tail_s=kw["tail_s"])
    from .excitation import validate_params

    validate_params(params, "options")
    s = make_sweep(params)
    atomic_write(out, lambda tmp: sf.write(tmp, s.samples, int(params.rate_hz),
                                           subtype="PCM_24", format="WAV"))
    atomic_write_text(side, sidecar_text(params))
    if as_json:
        from ._version import __version__
        from .report.document import to_json

        click.echo(to_json({"schema": "characterize.sweep/1", "tool_version": __version__,
                            "sweep": params.to_dict(), "wav": str(out), "sidecar": str(side)}),
                   nl=False)
        click.echo(SAFETY_CAUTION, err=True)
        return
    click.echo(f"wrote {out} ({params.duration_s:g} s sweep {params.start_hz:g} to "
               f"{params.stop_hz:g} Hz at {params.level_dbfs:g} dBFS, {params.tail_s:g} s tail) "
               f"and {side}")
    click.echo(SAFETY_CAUTION, err=True)


@main.command(short_help="Fit f0, Q, gain and delay to a recording or a transfer CSV.")
@click.argument("recording", type=click.Path(path_type=Path), required=False)
@click.option("--object", "object_path", type=click.Path(path_type=Path),
              help="Object file (TOML) with the geometry.")
@click.option("--sweep", "sweep_path", type=click.Path(path_type=Path),
              help="The sweep WAV that was played (deconvolution); without it, H1.")
@click.option("--excitation", "excitation_path", type=click.Path(path_type=Path),
              help="Any other excitation that was played (one-microphone recordings).")
@click.option("--transfer", "transfer_path", type=click.Path(path_type=Path),
              help="Fit a measured transfer function (CSV: frequency and real/imag or "
                   "dB/degrees) instead of a recording.")
@click.option("--method", type=click.Choice(["auto", "sweep", "h1", "h2", "one-channel",
                                             "ringdown", "csv"]), default="auto",
              show_default=True, help="How the recording was made; auto picks from the inputs.")
@click.option("--modes", type=int, default=None,
              help="Fit this many resonances together (e.g. a bottle's body mode).")
@click.option("--inside", type=int, default=1, show_default=True,
              help="Channel (from 1) of the microphone inside the cavity.")
@click.option("--outside", type=int, default=2, show_default=True,
              help="Channel (from 1) of the microphone just outside the mouth.")
@click.option("--band", type=(FREQUENCY, FREQUENCY), default=None, metavar="LO HI",
              help="Fit exactly this band ('180 Hz' '300 Hz'; bare numbers are Hz); "
                   "default: found around the peak.")
@air_options
@click.option("--tolerance", type=Fraction(), default=None,
              help="f0 mismatch that raises a warning, '3 %' or a fraction 0.03 [default: "
                   "what the geometry model promises for the shape, 2 to 3.5 %].")
@click.option("--outside-distance", "outside_distance_m", type=LENGTH,
              default=None, help="Distance of the outside microphone from the mouth "
              "('50 mm'): correct H for the mouth's own radiation reaching it.")
@click.option("--calibration", "calibration_path", type=click.Path(path_type=Path),
              default=None, help="Calibration file from 'characterize calibrate': channel "
              "gain/phase match and the inside level (cavity SPL, neck motion).")
@click.option("--window", "window_s", type=Quantity("time", bare=("ms", 1e-3)), default=None,
              help="Impulse-response window on the sweep path ('250 ms'; a bare number is "
                   "ms); default automatic.")
@click.option("--out", "out_dir", type=click.Path(file_okay=False, path_type=Path),
              help="Write DIR/result.json, response.png, transfer.csv, report.html and "
                   "report.pdf.")
@click.option("--json", "as_json", is_flag=True, help="Print the result document.")
@click.option("--strict", is_flag=True, help="Exit 1 when any warning or error flag is raised.")
@click.option("--force", is_flag=True, help="Overwrite an existing result in --out.")
@handles_errors
def fit(recording: Path | None, object_path: Path | None, sweep_path: Path | None,
        excitation_path: Path | None, transfer_path: Path | None, method: str,
        modes: int | None, inside: int,
        outside: int, band: tuple[float, float] | None, temperature_c: float | None,
        relative_humidity: float | None, pressure_pa: float | None, tolerance: float | None,
        outside_distance_m: float | None, calibration_path: Path | None,
        window_s: float | None, out_dir: Path | None, as_json: bool, strict: bool,
        force: bool) -> None:
    """Fit f0, Q, gain and delay to a RECORDING (or a measured --transfer CSV).

    Two microphones (inside the cavity, just outside the mouth) with the sweep
    that was played, or with any broadband signal (H1); the inside microphone
    alone with the excitation file, or with taps and pops (ringdown).
    """
    from .fileio import check_writable

    targets = []
    if out_dir is not None:
        if out_dir.exists() and not out_dir.is_dir():
            raise InputError(str(out_dir), None, "--out must be a directory")
        targets = [out_dir / "result.json", out_dir / "response.png", out_dir / "transfer.csv",
                   out_dir / "report.html", out_dir / "report.pdf"]
        for t in targets:
            check_writable(t, force=force)
    from .pipeline import analyze
    from .report.document import to_json, write_document
    from .report.text import summary

    try:
        result = analyze(recording, object_path=object_path, sweep_path=sweep_path,
                         excitation_path=excitation_path, transfer_path=transfer_path,
                         method=method, modes=modes, inside=inside,
                         outside=outside, band_hz=band, temperature_c=temperature_c,
                         relative_humidity=relative_humidity, pressure_pa=pressure_pa,
                         tolerance=tolerance, outside_distance_m=outside_distance_m,
                         calibration_path=calibration_path,
                         window_s=window_s)
    except FitError as exc:
        # exit status 1 either way; with --json the no-fit document goes to stdout
        if as_json and exc.document is not None:
            click.echo(to_json(exc.document), nl=False)
        raise
    doc = result.to_dict()
    written = []
    if out_dir is not None:
        from .report.plots import decay_plot, response_plot

        written.append(write_document(targets[0], doc))
        if result.transfer is not None:
            written.append(response_plot(result, targets[1]))
            from .transfer_csv import write_transfer_csv

            written.append(write_transfer_csv(targets[2], result.transfer))
        else:
            written.append(decay_plot(result, targets[1]))
        from .report.fit_html import write_fit_html, write_fit_pdf

        written.append(write_fit_html(targets[3], doc, targets[1]))
        written.append(write_fit_pdf(targets[4], doc, targets[1]))
    if as_json:
        click.echo(to_json(doc), nl=False)
    else:
        click.echo(summary(doc))
        if written:
            click.echo("wrote " + ", ".join(str(w) for w in written))
    if strict and any(f.severity in ("warning", "error") for f in result.flags):
        sys.exit(1)


def _register() -> None:
    from .commands import register

    register(main)


_register()

if __name__ == "__main__":  # pragma: no cover
    main()
