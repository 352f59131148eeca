"""``characterize devices``, ``measure`` and ``tune``: measuring live at the bench.

Thin shells over :mod:`characterize.live`; sounddevice (PortAudio) is imported
only when a real device is used.
"""

from __future__ import annotations

import datetime as _dt
import sys
from pathlib import Path
from typing import Any

import click

from ._errors import handles_errors
from ._params import air_options

#: Exit status after Ctrl-C (128 + SIGINT), as shells report it.
EXIT_INTERRUPTED = 130


def _say(text: str) -> None:
    click.echo(text, err=True)


def _caution(bench: Any) -> None:
    from ..excitation import SAFETY_CAUTION

    if bench.kind == "simulated":
        click.echo("simulated bench: no sound is played. On a real bench: " + SAFETY_CAUTION,
                   err=True)
    else:
        click.echo(SAFETY_CAUTION, err=True)


def _outputs(text: str) -> tuple[int, ...]:
    from ..errors import InputError

    try:
        out = tuple(int(x) for x in text.replace(" ", "").split(",") if x)
    except ValueError:
        raise InputError("--output", None, f"expected channel numbers like 1 or 1,2, got "
                         f"{text!r}") from None
    if not out or min(out) < 1:
        raise InputError("--output", None, "output channels are numbered from 1")
    return out


def _default_out(kind: str) -> Path:
    stamp = _dt.datetime.now().strftime("%Y%m%d-%H%M%S")
    return Path(f"{kind}-{stamp}")


def _interrupted(saved: list[Path], where: Path) -> None:
    kept = ", ".join(p.name for p in saved if p.suffix == ".flac")
    click.echo(f"characterize: stopped (Ctrl-C): the sound was stopped; what was recorded is "
               f"kept in {where}" + (f" ({kept})" if kept else ""), err=True)
    sys.exit(EXIT_INTERRUPTED)


def measure_options(fn: Any) -> Any:
    """The options ``measure`` and ``tune`` share."""
    from ..live.defaults import DEFAULT_LEVEL_DBFS, DEFAULT_MAX_LEVEL_DBFS

    opts = [
        click.option("--device", "device", default=None, metavar="N|NAME|simulate",
                     help="Audio device: a number or part of a name from 'characterize "
                          "devices', or 'simulate' for the simulated bench [default: the "
                          "system's default device]."),
        click.option("--inside", type=int, default=1, show_default=True,
                     help="Input (from 1) of the microphone inside the cavity."),
        click.option("--outside", type=int, default=2, show_default=True,
                     help="Input (from 1) of the microphone just outside the mouth."),
        click.option("--output", "output", default="1", show_default=True,
                     help="Output channel(s) driving the loudspeaker, e.g. 1 or 1,2."),
        click.option("--rate", "rate_hz", type=float, default=None,
                     help="Sample rate (Hz) [default: the device's own]."),
        click.option("--start", "start_hz", type=float, default=None,
                     help="Sweep start (Hz) [default: the predicted f0 / 5]."),
        click.option("--stop", "stop_hz", type=float, default=None,
                     help="Sweep stop (Hz) [default: the predicted f0 x 5]."),
        click.option("--duration", "duration_s", type=float, default=None,
                     help="Sweep duration (s) [default: 3]."),
        click.option("--sweep", "sweep_path", type=click.Path(path_type=Path), default=None,
                     help="Play this sweep WAV (with its sidecar) instead of generating one."),
        click.option("--level", "level_dbfs", type=float, default=DEFAULT_LEVEL_DBFS,
                     show_default=True, help="Sweep peak level (dBFS). Start low."),
        click.option("--max-level", "max_level_dbfs", type=float,
                     default=DEFAULT_MAX_LEVEL_DBFS, show_default=True,
                     help="Never play louder than this (dBFS), also when retrying."),
        click.option("--seed", type=int, default=0, show_default=True,
                     help="Seed of the simulated bench (--device simulate)."),
    ]
    for o in reversed(opts):
        fn = o(fn)
    return air_options(fn)


def _settings(kw: dict[str, Any], repeats: int = 1) -> Any:
    from ..live.measure import MeasureSettings

    return MeasureSettings(
        inside=kw["inside"], outside=kw["outside"], outputs=_outputs(kw["output"]),
        rate_hz=kw["rate_hz"], start_hz=kw["start_hz"], stop_hz=kw["stop_hz"],
        duration_s=kw["duration_s"], sweep_path=kw["sweep_path"], level_dbfs=kw["level_dbfs"],
        max_level_dbfs=kw["max_level_dbfs"], repeats=repeats,
        temperature_c=kw["temperature_c"], relative_humidity=kw["relative_humidity"],
        pressure_pa=kw["pressure_pa"])


def _bench(kw: dict[str, Any], object_path: Path | None, settings: Any) -> Any:
    from ..live.bench import open_bench
    from ..live.measure import validate_settings

    validate_settings(settings)  # before any device is touched
    return open_bench(kw["device"], inputs=max(settings.inside, settings.outside),
                      outputs=max(settings.outputs), object_path=object_path, seed=kw["seed"])


# ---------------------------------------------------------------------- devices
@click.command("devices", short_help="List the audio devices PortAudio sees.")
@click.option("--json", "as_json", is_flag=True, help="Print the list as JSON.")
@handles_errors
def devices(as_json: bool) -> None:
    """List the audio devices (number, name, host API, inputs, outputs, default rate)."""
    from ..live.devices import INSTALL_HINT, list_devices

    try:
        devs = list_devices()
    except Exception as exc:  # noqa: BLE001 - PortAudio missing: say how to install it
        from ..errors import InputError

        if isinstance(exc, InputError):
            raise
        raise InputError("devices", None, f"PortAudio failed ({exc}): {INSTALL_HINT}") from None
    if as_json:
        import json

        click.echo(json.dumps([d.to_dict() for d in devs], indent=2))
        return
    if not devs:
        click.echo("no audio devices (no sound card, or no sound server running); "
                   "--device simulate works without one")
        return
    click.echo(f"{'#':>3}  {'name':<32} {'host API':<14} {'in':>3} {'out':>4} {'rate (Hz)':>10}")
    for d in devs:
        mark = ("<" if d.default_input else " ") + (">" if d.default_output else " ")
        click.echo(f"{d.index:>3}{mark}{d.name[:32]:<32} {d.host_api[:14]:<14} "
                   f"{d.max_input_channels:>3} {d.max_output_channels:>4} "
                   f"{d.default_rate_hz:>10g}")
    click.echo("(< default input, > default output; give --device N or part of the name; "
               "'--device simulate' is the simulated bench)")


# ---------------------------------------------------------------------- measure
def _measure_text(m: Any, doc: dict[str, Any]) -> str:
    from ..report.text import pm, summary

    lines = [summary(doc)]
    md = doc["measurement"]
    lines.append(f"  measured on: {md['device']['name']} ({md['device']['host_api']}), "
                 f"{md['rate_hz']:g} Hz, level {md['level_dbfs']:.1f} dBFS")
    for t in md["takes"]:
        lat = t["latency_s"]
        peaks = ", ".join(f"in {k} {v:.1f}" for k, v in t["peaks_dbfs"].items())
        fit = (f"f0 {pm(t['f0_hz'], t['f0_stderr_hz'], 3)} Hz, Q {pm(t['q'], t['q_stderr'], 2)}"
               if t.get("f0_hz") is not None else f"no fit: {t['fit_error']}")
        lines.append(f"  {Path(t['file']).name}: latency {1000 * lat:.1f} ms, peaks ({peaks}) "
                     f"dBFS, {t['tries']} tr{'y' if t['tries'] == 1 else 'ies'}; {fit}")
    r = md.get("repeats")
    if r and r["n"] > 1:
        lines.append(f"  {r['n']} takes: f0 mean {r['f0_mean_hz']:.4f} Hz, spread (sd) "
                     f"{r['f0_spread_hz']:.2g} Hz beside the fit's own error "
                     f"{r['f0_fit_stderr_hz']:.2g} Hz; Q mean {r['q_mean']:.3f}, spread "
                     f"{r['q_spread']:.2g} beside {r['q_fit_stderr']:.2g}")
    truth = md.get("simulated_truth")
    if truth:
        lines.append(f"  simulated truth: f0 {truth['f0_hz']:.4f} Hz, Q {truth['q']:.3f}")
    return "\n".join(lines)


def _write_fit_outputs(result: Any, doc: dict[str, Any], out: Path) -> list[Path]:
    """What ``fit --out`` writes, from this take's result and document."""
    from ..report.document import write_document
    from ..report.fit_html import write_fit_html, write_fit_pdf
    from ..report.plots import response_plot

    written = [write_document(out / "result.json", doc)]
    png = out / "response.png"
    if result.transfer is not None:
        from ..transfer_csv import write_transfer_csv

        written.append(response_plot(result, png))
        written.append(write_transfer_csv(out / "transfer.csv", result.transfer))
    written.append(write_fit_html(out / "report.html", doc, png))
    written.append(write_fit_pdf(out / "report.pdf", doc, png))
    return written


@click.command("measure", short_help="Play a sweep, record both microphones and fit, live.")
@click.option("--object", "object_path", type=click.Path(path_type=Path), required=True,
              help="Object file (TOML): the geometry, and the sweep's band around its f0.")
@measure_options
@click.option("--repeats", type=int, default=1, show_default=True,
              help="Take this many sweeps, fit each, report their mean and spread.")
@click.option("--tolerance", type=float, default=None,
              help="f0 mismatch against the geometry that raises a warning (fraction).")
@click.option("--out", "out_dir", type=click.Path(file_okay=False, path_type=Path),
              default=None, help="Folder for the takes and results [default: "
              "measure-DATE-TIME]; must be new or empty.")
@click.option("--json", "as_json", is_flag=True, help="Print the result document.")
@handles_errors
def measure(object_path: Path, repeats: int, tolerance: float | None, out_dir: Path | None,
            as_json: bool, **kw: Any) -> None:
    """Play a sweep, record both microphones, fit: what 'fit' gives, measured live.

    Every take is saved first (FLAC and a JSON sidecar), so 'characterize fit
    take-01.flac --sweep sweep-30.0dBFS.wav --object OBJ.toml' can redo it.
    """
    from dataclasses import replace

    from ..errors import InputError
    from ..live.measure import MeasureInterrupted
    from ..live.measure import measure as run

    settings = replace(_settings(kw, repeats), tolerance=tolerance)
    out = out_dir or _default_out("measure")
    if out.exists() and (not out.is_dir() or any(out.iterdir())):
        raise InputError(str(out), None, "exists and is not an empty folder: give a new --out "
                         "(takes are never overwritten)")
    bench = _bench(kw, object_path, settings)
    _caution(bench)
    try:
        m = run(bench, object_path, settings, out, say=_say)
    except MeasureInterrupted as stop:
        _interrupted(stop.saved, out)
    except KeyboardInterrupt:
        _interrupted([], out)
    doc = m.document()
    written = _write_fit_outputs(m.result, doc, out)
    if len(m.fitted) > 1:
        from ..report.document import write_document

        for t in m.fitted:
            d = t.result.to_dict()
            written.append(write_document(t.path.with_name(t.path.stem + ".result.json"), d))
    if as_json:
        from ..report.document import to_json

        click.echo(to_json(doc), nl=False)
    else:
        click.echo(_measure_text(m, doc))
        click.echo(f"wrote {out}/: " + ", ".join(p.name for p in written) + " and the takes")


# ---------------------------------------------------------------------- tune
def _step_text(session: Any, st: Any) -> str:
    from ..report.text import pm

    _, unit, k = _unit(session.route)
    lines = [f"step {st.number}: f0 {pm(st.f0_hz, st.f0_stderr_hz, 3)} Hz, Q "
             f"{pm(st.q, st.q_stderr, 2)}; target {st.target_hz:.3f} Hz: "
             f"{st.distance_hz:+.3f} Hz ({st.distance_cents:+.1f} cents)"]
    if st.within:
        lines.append(f"  within the tolerance (±{session.tolerance_hz:.3f} Hz)")
        return "\n".join(lines)
    verb = {"neck": "cut the neck by", "volume": "add liquid:", "diameter": "widen the bore by"}
    a = st.advice
    src = ("the series over the steps (end correction "
           f"{pm(st.series.end_correction_m * 1e3, st.series.end_correction_stderr_m * 1e3)} mm)"
           if st.advice_from == "series" and st.series is not None
           and st.series.end_correction_m == st.series.end_correction_m
           else "the series over the steps" if st.advice_from == "series" else
           f"trim advice, end correction measured on this object "
           f"{pm(a.end_correction_m * 1e3, a.end_correction_stderr_m * 1e3)} mm (textbook "
           f"{a.textbook_end_correction_m * 1e3:.2f} mm)")
    if st.advised == st.advised:
        lines.append(f"  advised: {verb[session.route]} {pm(st.advised * k, st.advised_stderr * k)}"
                     f" {unit} (from {src})")
    if session.route == "neck" and st.advised < 0:
        lines.append("  the target needs a LONGER neck: trimming cannot reach it (add a collar, "
                     "or use --route volume)")
    for n in st.notes:
        lines.append(f"  note: {n}")
    from ..report.text import flag_lines

    lines += flag_lines([f for f in a.flags if f.severity != "info"])
    return "\n".join(lines)


def _unit(route: str) -> tuple[str, str, float]:
    from ..live.session import route_unit

    return route_unit(route)


def _summary_text(d: dict[str, Any]) -> str:
    f = d["final"]
    if f is None:
        return "no step was measured"
    head = "reached the target" if d["reached"] else "stopped before the target"
    lines = [f"{head} in {d['steps']} step(s): f0 {f['f0_hz']:.3f} ± {f['f0_stderr_hz']:.2g} "
             f"Hz against {d['target_hz']:.3f} Hz ({f['distance_hz']:+.3f} Hz, "
             f"{f['distance_cents']:+.1f} cents; tolerance ±{d['tolerance_hz']:.3f} Hz), "
             f"from {d['start_f0_hz']:.3f} Hz; total change {d['cumulative_change']:.3f} "
             f"{d['unit']}"]
    if d.get("series_end_correction_m") is not None:
        lines.append(f"  end correction from the series: "
                     f"{1e3 * d['series_end_correction_m']:.2f} ± "
                     f"{1e3 * d['series_end_correction_stderr_m']:.2f} mm")
    t = d.get("simulated_truth")
    if t:
        lines.append(f"  simulated truth now: f0 {t['f0_hz']:.3f} Hz (end correction "
                     f"{1e3 * t['end_correction_m']:.2f} mm, {t['end_correction_factor']:.2f} x "
                     "the textbook's)")
    return "\n".join(lines)


@click.command("tune", short_help="The bench loop: measure, advise a change, repeat.")
@click.option("--object", "object_path", type=click.Path(path_type=Path), required=True,
              help="Object file (TOML) as the session starts.")
@click.option("--target", "target_hz", type=float, required=True, help="Target f0 (Hz).")
@click.option("--route", type=click.Choice(["neck", "volume", "diameter"]), default="neck",
              show_default=True, help="What you change: cut the neck, add liquid (volume), "
              "or widen the bore (diameter).")
@click.option("--tolerance", "tolerance", default="5 cents", show_default=True,
              help="Stop when f0 is this close to the target: '5 cents', '0.5 Hz', '0.2 %'.")
@measure_options
@click.option("--max-steps", type=int, default=30, show_default=True,
              help="Stop after this many measurements.")
@click.option("--auto", is_flag=True, help="Simulated bench only: make the advised change "
              "by itself (an unattended demonstration).")
@click.option("--out", "out_dir", type=click.Path(file_okay=False, path_type=Path),
              default=None, help="Session folder [default: tune-DATE-TIME]; must be new or "
              "empty.")
@handles_errors
def tune(object_path: Path, target_hz: float, route: str, tolerance: str, max_steps: int,
         auto: bool, out_dir: Path | None, **kw: Any) -> None:
    """The bench loop: measure, show f0 against the target and the change to make,
    then read one line: empty = measure again, '1.5 mm' or '20 mL' = the change just
    made, q = stop.

    Changes are what you did: for --route neck the length cut off; volume: the
    liquid poured in (negative: taken out); diameter: how much wider the bore is.
    """
    from ..errors import FitError, InputError
    from ..live.measure import MeasureInterrupted
    from ..live.session import TuneSession, parse_change, parse_tolerance

    settings = _settings(kw)
    tol_hz = parse_tolerance(tolerance, target_hz) if target_hz > 0 else 0.0
    out = out_dir or _default_out("tune")
    from ..live.bench import parse_simulate

    if auto and parse_simulate(kw["device"] or "") is None:
        raise InputError("--auto", None, "only with --device simulate: on a real bench you "
                         "make the change and type it")
    bench = _bench(kw, object_path, settings)
    session = TuneSession(bench, object_path, target_hz, route, tol_hz, out, settings, say=_say)
    _caution(bench)
    _, unit, k = _unit(route)
    try:
        attempts = 0
        while len(session.steps) < max_steps and attempts < 2 * max_steps:
            attempts += 1
            try:
                st = session.measure_step()
            except FitError as exc:  # the takes are kept; the bench decides what next
                click.echo(f"  no fit at this step: {exc}", err=True)
                if auto:
                    break
                st = None
            if st is not None:
                click.echo(_step_text(session, st))
                if st.within:
                    break
            if auto and st is not None:
                made = session.auto_change(st)
                if made is None:
                    click.echo("  the advised change cannot be made on this route; stopping")
                    break
                click.echo(f"  (auto) made the change: {made * k:.3f} {unit}")
                continue
            while True:
                try:
                    line = input(f"change made ('1.5 {unit}'), Enter = measure again, q = stop: ")
                except EOFError:
                    line = "q"
                line = line.strip()
                if line.lower() in ("q", "quit", "stop"):
                    raise _Stop
                if not line:
                    break
                try:
                    session.record_change(parse_change(line, route))
                    break
                except InputError as exc:
                    click.echo(f"  not taken: {exc}", err=True)
    except _Stop:
        pass
    except MeasureInterrupted as stop:
        session.summary()
        _interrupted(stop.saved, out)
    except KeyboardInterrupt:
        session.summary()
        _interrupted([], out)
    d = session.summary()
    click.echo(_summary_text(d))
    click.echo(f"session kept in {out}/ (log.csv, tune.png, session.json, step-NN/)")
    if not d["reached"]:
        sys.exit(1)


class _Stop(Exception):
    """'q' typed."""
