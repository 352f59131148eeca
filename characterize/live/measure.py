"""The ``measure`` job: probe the levels, play the sweep and record, check and
save every take first, then fit each good take exactly as ``fit`` does.

Pure library (no printing): progress and retries are told through a ``say``
callback; the ``measure`` and ``tune`` commands print them.

Files written in the output folder (nothing is ever overwritten; a rejected try
is renamed, not deleted):

- ``sweep-30.0dBFS.wav`` + ``.toml``: the sweep played at that level (a
  ``fit --sweep`` input, with its sidecar);
- ``probe.flac`` + ``probe.json``: the quiet level probe;
- ``take-01.flac`` + ``take-01.json``: each accepted take (all recorded
  channels, 24-bit FLAC) and its sidecar (device, host API, rate, level,
  channels, UTC time, stream status, latency, what the checks found);
- ``take-01-rejected-1.flac`` + ``.json``: a try that was repeated, and why.

``characterize fit take-01.flac --sweep sweep-30.0dBFS.wav --object OBJ.toml``
redoes any fit later.
"""

from __future__ import annotations

import datetime as _dt
import json
import math
import os
from collections.abc import Callable
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any

import numpy as np
from numpy.typing import NDArray

from ..errors import FitError, InputError
from ..excitation import Sweep, SweepParams
from .bench import Bench
from .defaults import DEFAULT_LEVEL_DBFS, DEFAULT_MAX_LEVEL_DBFS
from .stream import RawTake, TakeInterrupted
from .takes import CLIP_DBFS, SILENT_PEAK, TakeCheck, check_take

#: The probe plays this much below the sweep level, dB.
PROBE_BELOW_DB = 12.0
#: The probe's sweep lasts this long, s.
PROBE_DURATION_S = 1.0
#: After clipping, the level is set so the loudest channel would peak here, dBFS.
TARGET_PEAK_DBFS = -6.0
#: Each clipped take lowers the level at least this much, dB.
CLIP_STEP_DB = 6.0
#: A microphone channel less than this far (dB) above its noise floor at the
#: sweep's level is too quiet.
MIN_SNR_DB = 30.0
#: Silence played before the sweep, s: longer than the device's dead start
#: (75 ms on the loopback, 0.43 s with a 0.2 s latency setting: shared/reference)
#: and doubled when a take shows it was not.
DEFAULT_LEAD_IN_S = 0.75
#: Silence played after the sweep's tail, s: longer than the latency.
DEFAULT_POST_ROLL_S = 0.5
#: Tries per take before giving up.
MAX_TRIES = 4
#: A default sweep covers this factor below and above the expected f0.
SWEEP_SPAN = 5.0
#: Default sweep duration, s.
DEFAULT_SWEEP_DURATION_S = 3.0


class MeasureInterrupted(Exception):
    """Ctrl-C: the sound was stopped; ``saved`` lists what was kept."""

    def __init__(self, saved: list[Path]) -> None:
        super().__init__("interrupted")
        self.saved = saved


@dataclass(frozen=True)
class MeasureSettings:
    """Everything ``measure`` takes besides the bench and the object (SI units,
    1-based channels)."""

    inside: int = 1
    outside: int = 2
    outputs: tuple[int, ...] = (1,)
    rate_hz: float | None = None
    start_hz: float | None = None
    stop_hz: float | None = None
    duration_s: float | None = None
    tail_s: float | None = None
    sweep_path: Path | None = None
    level_dbfs: float = DEFAULT_LEVEL_DBFS
    max_level_dbfs: float = DEFAULT_MAX_LEVEL_DBFS
    repeats: int = 1
    lead_in_s: float = DEFAULT_LEAD_IN_S
    post_roll_s: float = DEFAULT_POST_ROLL_S
    max_tries: int = MAX_TRIES
    probe: bool = True
    temperature_c: float | None = None
    relative_humidity: float | None = None
    pressure_pa: float | None = None
    tolerance: float | None = None


@dataclass
class TakeRecord:
    """One accepted take and what became of it."""

    number: int
    path: Path
    sidecar: Path
    sweep_path: Path
    level_dbfs: float
    check: TakeCheck
    rejected: list[dict[str, Any]] = field(default_factory=list)
    result: Any = None  # pipeline.Result
    error: str | None = None

    def to_dict(self, rate_hz: float) -> dict[str, Any]:
        c = self.check
        d: dict[str, Any] = {
            "file": str(self.path), "sidecar": str(self.sidecar), "sweep": str(self.sweep_path),
            "level_dbfs": self.level_dbfs, "latency_samples": c.delay_samples,
            "latency_s": None if c.delay_samples is None else c.delay_samples / rate_hz,
            "dead_start_s": c.dead_start_samples / rate_hz,
            "peaks_dbfs": {str(k): v for k, v in c.peaks_dbfs.items()},
            "tries": len(self.rejected) + 1, "rejected": self.rejected, "fit_error": self.error}
        if self.result is not None:
            f = self.result.fit
            d.update(f0_hz=f.f0_hz, f0_stderr_hz=f.f0_stderr_hz, q=f.q, q_stderr=f.q_stderr)
        return d


@dataclass
class Measurement:
    """What ``measure`` produced: the takes, their fits and the statistics."""

    out_dir: Path
    bench: dict[str, Any]
    settings: MeasureSettings
    rate_hz: float
    level_dbfs: float
    sweep: SweepParams
    takes: list[TakeRecord]
    probe: dict[str, Any] | None
    messages: list[str]
    truth: dict[str, float] | None = None

    @property
    def fitted(self) -> list[TakeRecord]:
        return [t for t in self.takes if t.result is not None]

    @property
    def result(self) -> Any:
        """The first fitted take's pipeline Result."""
        return self.fitted[0].result

    def repeat_stats(self) -> dict[str, Any]:
        """Mean and spread (sample standard deviation) of f0 and Q over the fitted
        takes, beside the fits' own mean standard errors."""
        fits = [t.result.fit for t in self.fitted]
        f0 = np.array([f.f0_hz for f in fits])
        q = np.array([f.q for f in fits])
        n = len(fits)

        def sd(a: Any) -> float:
            return float(np.std(a, ddof=1)) if n > 1 else math.nan

        return {"n": n, "f0_mean_hz": float(f0.mean()), "f0_spread_hz": sd(f0),
                "f0_mean_stderr_hz": sd(f0) / math.sqrt(n) if n > 1 else math.nan,
                "f0_fit_stderr_hz": float(np.mean([f.f0_stderr_hz for f in fits])),
                "q_mean": float(q.mean()), "q_spread": sd(q),
                "q_fit_stderr": float(np.mean([f.q_stderr for f in fits]))}

    def block(self) -> dict[str, Any]:
        """The result document's ``measurement`` block."""
        s = self.settings
        d: dict[str, Any] = {
            "device": self.bench, "rate_hz": self.rate_hz, "inside_channel": s.inside,
            "outside_channel": s.outside, "output_channels": list(s.outputs),
            "requested_level_dbfs": s.level_dbfs, "level_dbfs": self.level_dbfs,
            "max_level_dbfs": s.max_level_dbfs, "sweep": self.sweep.to_dict(),
            "probe": self.probe, "takes": [t.to_dict(self.rate_hz) for t in self.takes],
            "repeats": self.repeat_stats() if self.fitted else None,
            "messages": list(self.messages)}
        if self.truth is not None:
            d["simulated_truth"] = self.truth
        return d

    def document(self) -> dict[str, Any]:
        """The first fitted take's result document (what ``fit`` makes of that
        take) with the ``measurement`` block."""
        doc = self.result.to_dict()
        doc["measurement"] = self.block()
        return doc


def _now() -> str:
    return _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds")


def plan_sweep(obj: Any, air: Any, s: MeasureSettings, rate_hz: float, level_dbfs: float
               ) -> SweepParams:
    """The sweep: the options given, the rest from the geometry's predicted f0 and Q
    (:data:`SWEEP_SPAN` below and above f0; a tail of 12 ringing time constants)."""
    from ..excitation import validate_params

    f0 = q = None
    if obj is not None and (s.start_hz is None or s.stop_hz is None or s.tail_s is None):
        from ..physics.helmholtz import predict

        pred = predict(obj, air)
        f0, q = pred.f0_hz, pred.q_predicted
    if (s.start_hz is None or s.stop_hz is None) and f0 is None:
        raise InputError("--start/--stop", None, "give the sweep's band, or --object so it "
                         "can be chosen around the predicted f0")
    start = s.start_hz if s.start_hz is not None else max(10.0, f0 / SWEEP_SPAN)  # type: ignore[operator]
    stop = s.stop_hz if s.stop_hz is not None else min(0.45 * rate_hz, f0 * SWEEP_SPAN)  # type: ignore[operator]
    tail = s.tail_s if s.tail_s is not None else (
        max(0.5, 12 * q / (math.pi * f0)) if f0 and q else 1.0)
    p = SweepParams(start_hz=float(start), stop_hz=float(stop),
                    duration_s=float(s.duration_s or DEFAULT_SWEEP_DURATION_S),
                    rate_hz=float(rate_hz), level_dbfs=float(level_dbfs), tail_s=float(tail))
    validate_params(p, "options")
    return p


def validate_settings(s: MeasureSettings) -> None:
    """One-line errors for impossible settings (exit 2)."""
    for name, ch in (("--inside", s.inside), ("--outside", s.outside)):
        if ch < 1:
            raise InputError(name, None, f"channels are numbered from 1, got {ch}")
    if s.inside == s.outside:
        raise InputError("--inside/--outside", None, f"both are channel {s.inside}: the inside "
                         "and outside microphones must be on different inputs")
    if not s.outputs or any(c < 1 for c in s.outputs):
        raise InputError("--output", None, "output channels are numbered from 1")
    if not math.isfinite(s.max_level_dbfs) or s.max_level_dbfs > 0:
        raise InputError("--max-level", None, f"must be <= 0 dBFS, got {s.max_level_dbfs:g}")
    if not math.isfinite(s.level_dbfs) or s.level_dbfs > s.max_level_dbfs:
        raise InputError("--level", None, f"{s.level_dbfs:g} dBFS is above --max-level "
                         f"{s.max_level_dbfs:g} dBFS: lower --level (raise --max-level only "
                         "knowingly, with hearing protection)")
    if s.repeats < 1:
        raise InputError("--repeats", None, f"must be at least 1, got {s.repeats}")
    if s.rate_hz is not None and not (math.isfinite(s.rate_hz) and s.rate_hz > 0):
        raise InputError("--rate", None, f"must be > 0 Hz, got {s.rate_hz:g}")


def _played(sweep: NDArray[np.floating], lead: int, post: int, outputs: tuple[int, ...],
            width: int) -> NDArray[np.float32]:
    n = lead + sweep.size + post
    sig = np.zeros((n, max(width, *outputs)), dtype=np.float32)
    for c in outputs:
        sig[lead:lead + sweep.size, c - 1] = sweep
    return sig


def _reference(samples: NDArray[np.floating], lead: int, frames: int) -> NDArray[np.float64]:
    """What went to the loudspeaker, on the recording's clock (``frames`` long)."""
    played = np.zeros(frames)
    k = min(samples.size, max(0, frames - lead))
    played[lead:lead + k] = samples[:k]
    return played


def _write_flac(path: Path, data: NDArray[np.floating], rate_hz: float) -> Path:
    import soundfile as sf

    from ..fileio import atomic_write

    x = np.clip(np.asarray(data, dtype=np.float64), -1.0, 1.0)
    return atomic_write(path, lambda tmp: sf.write(tmp, x, int(round(rate_hz)),
                                                   subtype="PCM_24", format="FLAC"))


def _write_json(path: Path, doc: dict[str, Any]) -> Path:
    from ..report.document import write_document

    return write_document(path, doc)


def _free(path: Path) -> Path:
    """``path``, or with -2, -3 ... before the suffix when it exists (never overwrite)."""
    if not path.exists():
        return path
    k = 2
    while True:
        p = path.with_name(f"{path.stem}-{k}{path.suffix}")
        if not p.exists():
            return p
        k += 1


class _Recorder:
    """Plays and saves takes for one measurement."""

    def __init__(self, bench: Bench, out_dir: Path, s: MeasureSettings, rate_hz: float,
                 in_channels: int, say: Callable[[str], None], prefix: str) -> None:
        self.bench, self.out, self.s, self.rate = bench, out_dir, s, rate_hz
        self.in_channels, self.say, self.prefix = in_channels, say, prefix
        self.messages: list[str] = []
        self.saved: list[Path] = []
        self.lead_in_s, self.post_roll_s = s.lead_in_s, s.post_roll_s
        self.out_width = max(s.outputs)

    def tell(self, text: str) -> None:
        self.messages.append(text)
        self.say(text)

    def sidecar(self, kind: str, level: float, raw: RawTake, sweep_file: Path | None,
                extra: dict[str, Any]) -> dict[str, Any]:
        s = self.s
        return {"schema": "characterize.take/1", "kind": kind, "time_utc": _now(),
                "device": self.bench.describe(), "rate_hz": self.rate,
                "level_dbfs": level, "max_level_dbfs": s.max_level_dbfs,
                "recorded_channels": self.in_channels, "inside_channel": s.inside,
                "outside_channel": s.outside, "output_channels": list(s.outputs),
                "lead_in_s": self.lead_in_s, "post_roll_s": self.post_roll_s,
                "sweep": None if sweep_file is None else str(sweep_file.name),
                "frames": raw.frames, "interrupted": raw.interrupted,
                "stream_status": [{"frame": f, "flags": t} for f, t in raw.status],
                **extra}

    def play(self, samples: NDArray[np.floating], name: str, kind: str, level: float,
             sweep_file: Path | None) -> tuple[RawTake, Path, Path, int]:
        """Play, save the raw take and its sidecar first, return them."""
        lead = int(round(self.lead_in_s * self.rate))
        post = int(round(self.post_roll_s * self.rate))
        sig = _played(samples, lead, post, self.s.outputs, self.out_width)
        path = _free(self.out / f"{name}.flac")
        side = path.with_suffix(".json")
        try:
            raw = self.bench.play_record(sig, self.rate, self.in_channels)
        except TakeInterrupted as stop:
            raw = stop.take
            if raw.frames > 0:
                _write_flac(path, raw.recorded[:raw.frames], self.rate)
                _write_json(side, self.sidecar(kind, level, raw, sweep_file, {}))
                self.saved += [path, side]
            raise MeasureInterrupted(self.saved) from None
        _write_flac(path, raw.recorded[:raw.frames], self.rate)
        _write_json(side, self.sidecar(kind, level, raw, sweep_file, {}))
        self.saved += [path, side]
        return raw, path, side, lead


def _sweep_file(out: Path, params: SweepParams) -> tuple[Sweep, Path]:
    """Write (or reuse) the sweep at this level with its sidecar."""
    import soundfile as sf

    from ..excitation import make_sweep, sidecar_path, sidecar_text
    from ..fileio import atomic_write, atomic_write_text

    sweep = make_sweep(params)
    path = out / f"sweep{params.level_dbfs:+.1f}dBFS.wav".replace("+", "")
    side = sidecar_path(path)
    if not path.exists():
        atomic_write(path, lambda tmp: sf.write(tmp, sweep.samples, int(params.rate_hz),
                                               subtype="FLOAT", format="WAV"))
        atomic_write_text(side, sidecar_text(params))
    return sweep, path


def measure(bench: Bench, object_path: str | Path | None, settings: MeasureSettings,
            out_dir: str | Path, *, say: Callable[[str], None] = lambda text: None,
            prefix: str = "take") -> Measurement:
    """Measure one object: probe, take ``repeats`` sweeps (each repeated until
    its recording is clean), save every take first, fit each.

    Raises
    ------
    InputError
        Bad settings, a device that cannot do them, every try silent (a wrong
        rate or no microphones): one line with the fix.
    FitError
        No usable take after :data:`MAX_TRIES` tries, or no take could be fitted
        (the takes are kept).
    MeasureInterrupted
        Ctrl-C (what was recorded is kept).
    """
    s = settings
    validate_settings(s)
    out = Path(out_dir)
    if out.exists() and not out.is_dir():
        raise InputError(str(out), None, "--out must be a directory")
    obj = None
    air = None
    if object_path is not None:
        from ..objectfile import load_object
        from ..physics.conditions import resolve_air

        obj = load_object(object_path)
        air, _ = resolve_air(obj, temperature_c=s.temperature_c,
                             relative_humidity=s.relative_humidity, pressure_pa=s.pressure_pa)
    in_channels = max(s.inside, s.outside)
    rate = float(s.rate_hz or bench.default_rate_hz)
    # at least two output channels where the device has them, silent ones zero: a
    # one-channel stream may be copied to every output by a sound server
    out_width = max(max(s.outputs), min(2, int(bench.outputs)))
    bench.check(rate, in_channels, out_width)
    level = s.level_dbfs
    given: Sweep | None = None
    if s.sweep_path is not None:
        from ..excitation import load_sweep

        given = load_sweep(s.sweep_path, rate)
        peak = float(np.max(np.abs(given.samples)))
        file_level = 20 * math.log10(peak) if peak > 0 else -math.inf
        if file_level > s.max_level_dbfs + 0.05:
            raise InputError(str(s.sweep_path), None, f"peaks at {file_level:.1f} dBFS, above "
                             f"--max-level {s.max_level_dbfs:g} dBFS: make a quieter sweep")
        level = file_level
        params = given.params
    else:
        params = plan_sweep(obj, air, s, rate, level)
    out.mkdir(parents=True, exist_ok=True)
    rec = _Recorder(bench, out, s, rate, in_channels, say, prefix)
    rec.out_width = out_width
    probe_info = None
    if s.probe and given is None:
        level, probe_info = _probe(rec, params, level)
        params = replace(params, level_dbfs=level)
    takes: list[TakeRecord] = []
    for r in range(1, s.repeats + 1):
        take, level = _take(rec, r, params if given is None else None, given, level)
        params = replace(params, level_dbfs=level) if given is None else params
        takes.append(take)
    for t in takes:
        _fit_take(t, object_path, s)
    truth = bench.truth() if hasattr(bench, "truth") else None  # type: ignore[attr-defined]
    m = Measurement(out_dir=out, bench=bench.describe(), settings=s, rate_hz=rate,
                    level_dbfs=level, sweep=params, takes=takes, probe=probe_info,
                    messages=rec.messages, truth=truth)
    if not m.fitted:
        errs = "; ".join(f"{t.path.name}: {t.error}" for t in takes)
        raise FitError(f"no take could be fitted ({errs}); the takes are kept in {out}")
    return m


def _fit_take(t: TakeRecord, object_path: Any, s: MeasureSettings) -> None:
    from ..pipeline import analyze

    try:
        t.result = analyze(t.path, object_path=object_path, sweep_path=t.sweep_path,
                           inside=s.inside, outside=s.outside, temperature_c=s.temperature_c,
                           relative_humidity=s.relative_humidity, pressure_pa=s.pressure_pa,
                           tolerance=s.tolerance)
    except FitError as exc:
        t.error = str(exc)


def _probe(rec: _Recorder, params: SweepParams, level: float) -> tuple[float, dict[str, Any]]:
    """Play a short quiet sweep; lower the level when the sweep would clip, and say
    when a channel would be too quiet (by how many dB, and what to do)."""
    from ..excitation import make_sweep

    s = rec.s
    p_level = level - PROBE_BELOW_DB
    pp = replace(params, duration_s=PROBE_DURATION_S, tail_s=0.2, level_dbfs=p_level,
                 fade_in_s=min(params.fade_in_s, 0.1), fade_out_s=min(params.fade_out_s, 0.05))
    probe = make_sweep(pp)
    check = None
    for _ in range(rec.s.max_tries):
        raw, path, side, lead = rec.play(probe.samples, "probe", "probe", p_level, None)
        check = check_take(raw.recorded[:raw.frames], _reference(probe.samples, lead,
                                                                 raw.frames),
                           rec.rate, s.inside, s.outside, pp, lead, raw.status)
        _write_json(side, rec.sidecar("probe", p_level, raw, None, {"check": check.to_dict()}))
        if check.delay_samples is not None and not any("nothing" in p for p in check.problems):
            break
        if check.problems:
            rec.tell(f"level probe: {check.problems[0]}; probing again")
    assert check is not None
    if any("nothing" in p for p in check.problems):
        _silent_error(rec, check)
    info: dict[str, Any] = {"file": str(path), "level_dbfs": p_level, "check": check.to_dict()}
    if check.delay_samples is None:
        rec.tell("level probe: could not find the probe in the recording; going on at "
                 f"{level:g} dBFS")
        return level, info
    y = raw.recorded[:raw.frames]
    arrive = lead + check.delay_samples
    lo = check.dead_start_samples
    predicted: dict[str, float] = {}
    new_level = level
    for c, role in ((s.inside, "inside"), (s.outside, "outside")):
        peak = check.peaks_dbfs[c] + PROBE_BELOW_DB
        noise_seg = y[lo:max(lo, arrive - int(0.01 * rec.rate)), c - 1].astype(np.float64)
        noise = 20 * math.log10(float(np.sqrt(np.mean(noise_seg**2)))) \
            if noise_seg.size > 64 and np.any(noise_seg) else -math.inf
        predicted[str(c)] = peak
        snr = peak - noise
        info[f"{role}_noise_dbfs"] = noise
        info[f"{role}_predicted_peak_dbfs"] = peak
        if peak > TARGET_PEAK_DBFS + 3:
            new_level = min(new_level, level - (peak - TARGET_PEAK_DBFS))
        elif snr < MIN_SNR_DB:
            need = MIN_SNR_DB - snr
            room = s.max_level_dbfs - level
            how = (f"raise --level by {need:.0f} dB (--max-level leaves {room:.0f} dB)"
                   if need <= room else
                   f"raise the preamplifier's gain by {need - max(room, 0):.0f} dB or more "
                   "(the level cannot go above --max-level), or move the loudspeaker closer")
            rec.tell(f"level probe: the {role} microphone (input {c}) would be only "
                     f"{snr:.0f} dB above its noise at {level:g} dBFS ({need:.0f} dB short of "
                     f"{MIN_SNR_DB:g} dB): {how}")
    if new_level < level:
        rec.tell(f"level probe: the sweep would clip at {level:g} dBFS; lowering the level to "
                 f"{new_level:.1f} dBFS")
    info["level_chosen_dbfs"] = new_level
    return new_level, info


def _silent_error(rec: _Recorder, check: TakeCheck | None) -> None:
    silent = [c for c in (rec.s.inside, rec.s.outside)
              if check is not None
              and not check.peaks_dbfs.get(c, -math.inf) > 20 * math.log10(SILENT_PEAK)]
    which = " and ".join(str(c) for c in silent) or f"{rec.s.inside} and {rec.s.outside}"
    own = rec.bench.default_rate_hz
    raise InputError("--device", None, f"every try came back all zeros on input {which}: "
                     f"check that microphone is connected and powered and that --inside/"
                     f"--outside name its inputs; if no input records anything, the device "
                     f"probably runs at another rate than {rec.rate:g} Hz (it reports "
                     f"{own:g} Hz; a sound server may use its own, often 48000): give that "
                     f"with --rate; every try is kept in {rec.out}")


def _take(rec: _Recorder, number: int, params: SweepParams | None, given: Sweep | None,
          level: float) -> tuple[TakeRecord, float]:
    """One accepted take (tries repeated, each saved first)."""
    s = rec.s
    rejected: list[dict[str, Any]] = []
    name = f"{rec.prefix}-{number:02d}"
    all_silent = True
    for attempt in range(1, s.max_tries + 1):
        if given is not None:
            sweep, sweep_file = given, Path(s.sweep_path)  # type: ignore[arg-type]
        else:
            assert params is not None
            sweep, sweep_file = _sweep_file(rec.out, replace(params, level_dbfs=level))
        raw, path, side, lead = rec.play(sweep.samples, name, "sweep", level, sweep_file)
        check = check_take(raw.recorded[:raw.frames],
                           _reference(sweep.samples, lead, raw.frames), rec.rate, s.inside,
                           s.outside, sweep.params, lead, raw.status)
        if not any("nothing" in p for p in check.problems):
            all_silent = False
        extra = {"check": check.to_dict(), "accepted": check.ok, "attempt": attempt}
        _write_json(side, rec.sidecar("sweep", level, raw, sweep_file, extra))
        if check.ok:
            if rejected:
                rec.tell(f"{name}: good on try {attempt}")
            return TakeRecord(number, path, side, sweep_file, level, check, rejected), level
        reason = "; ".join(check.problems) if check.problems else \
            "clipping on input " + " and ".join(str(c) for c in check.clipped)
        # keep the rejected try under another name; the accepted one gets NAME.flac
        bad = _free(rec.out / f"{name}-rejected-{attempt}.flac")
        os.replace(path, bad)
        os.replace(side, bad.with_suffix(".json"))
        rec.saved = [p for p in rec.saved if p not in (path, side)] + [bad,
                                                                       bad.with_suffix(".json")]
        rejected.append({"file": str(bad), "reason": reason})
        if check.clipped and not check.problems:
            if given is not None:
                raise InputError(str(s.sweep_path), None, f"the take clips ({reason}) with this "
                                 "sweep file: make a quieter one, or lower the preamp gain")
            worst = max(check.peaks_dbfs[c] for c in check.clipped)
            new = min(level - CLIP_STEP_DB, level - (worst - TARGET_PEAK_DBFS))
            rec.tell(f"{name} try {attempt}: {reason} at {level:g} dBFS; lowering the level "
                     f"to {new:.1f} dBFS and repeating (kept as {bad.name})")
            level = new
            continue
        rec.tell(f"{name} try {attempt}: {reason}; repeating the take (kept as {bad.name})")
        if check.retry == "lead-in":
            rec.lead_in_s *= 2
        elif check.retry == "post-roll":
            rec.post_roll_s *= 2
    if all_silent:
        _silent_error(rec, check)
    raise FitError(f"{name}: no clean take in {s.max_tries} tries (last: "
                   f"{rejected[-1]['reason']}); every try is kept in {rec.out}")


def load_take_sidecar(path: str | Path) -> dict[str, Any]:
    """A take's sidecar (JSON) as written by :func:`measure`."""
    from ..fileio import read_text

    p = Path(path)
    try:
        doc = json.loads(read_text(p, "a take sidecar (JSON)", bom=False))
    except json.JSONDecodeError as exc:
        raise InputError(str(p), None, f"not valid JSON (line {exc.lineno})") from None
    if not isinstance(doc, dict) or doc.get("schema") != "characterize.take/1":
        raise InputError(str(p), "schema", "expected 'characterize.take/1'")
    return doc


__all__ = ["DEFAULT_LEVEL_DBFS", "DEFAULT_MAX_LEVEL_DBFS", "MeasureSettings", "Measurement",
           "MeasureInterrupted", "TakeRecord", "measure", "plan_sweep", "validate_settings",
           "load_take_sidecar", "CLIP_DBFS"]
