"""The main job as one library call: recording (+ geometry) -> :class:`Result`.

    audio -> transfer -> fitting -> checks        (this module wires them)
    physics (air, geometry, prediction) --^

Everything the ``fit`` command does is :func:`analyze`; the command line only
parses options, calls it and writes what it returns.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from . import SCHEMA, __version__
from .audio import check_channel, check_not_silent, clip_report, read_audio
from .checks import (
    F0_TOLERANCE,
    Flag,
    check_clipping,
    check_end_correction,
    check_f0_mismatch,
    check_fit_quality,
    check_in_band,
    check_polarity,
    check_weighting,
    check_window,
)
from .errors import InputError
from .fitting.fit import FitResult, fit_transfer
from .physics.air import AirState, air_state
from .physics.geometry import ResonatorObject, load_object
from .physics.helmholtz import (
    PLAUSIBLE_END_CORRECTION_OVER_RADIUS,
    Derived,
    Prediction,
    derive_from_f0,
    predict,
)
from .transfer import TransferFunction, cross_spectral_transfer, sweep_transfer

#: Air defaults when neither the object file nor the command line gives a value.
DEFAULT_AIR = {"temperature_c": 20.0, "relative_humidity": 0.5, "pressure_pa": 101325.0}


@dataclass(frozen=True)
class InputInfo:
    recording: str
    sample_rate_hz: float
    inside_channel: int
    outside_channel: int
    method: str
    polarity_inverted: bool
    sweep: str | None = None
    sweep_parameters_from: str | None = None  # "sidecar" or "samples"
    duration_s: float = 0.0
    subtype: str = ""

    def to_dict(self) -> dict[str, Any]:
        return {
            "recording": self.recording, "sample_rate_hz": self.sample_rate_hz,
            "inside_channel": self.inside_channel, "outside_channel": self.outside_channel,
            "method": self.method, "polarity_inverted": self.polarity_inverted,
            "sweep": self.sweep, "sweep_parameters_from": self.sweep_parameters_from,
            "duration_s": self.duration_s, "sample_format": self.subtype,
        }


@dataclass(frozen=True)
class Result:
    """Everything one fit produced; :meth:`to_dict` is the result document."""

    input: InputInfo
    air: AirState
    air_sources: dict[str, str]
    fit: FitResult
    transfer: TransferFunction
    prediction: Prediction | None = None
    derived: Derived | None = None
    object: ResonatorObject | None = None
    flags: list[Flag] = field(default_factory=list)
    tolerance: float = F0_TOLERANCE

    def to_dict(self) -> dict[str, Any]:
        """The result document (schema ``characterize.result/1``, see docs/result-schema.md)."""
        tf = self.transfer
        air = self.air.to_dict()
        air["sources"] = dict(self.air_sources)
        return {
            "schema": SCHEMA,
            "tool_version": __version__,
            "input": self.input.to_dict(),
            "air": air,
            "fit": self.fit.to_dict(),
            "prediction": None if self.prediction is None else self.prediction.to_dict(),
            "derived": None if self.derived is None else self.derived.to_dict(),
            "object": None if self.object is None else self.object.to_dict(),
            "transfer": {
                "method": tf.method,
                "resolution_hz": tf.resolution_hz,
                "excited_band_hz": [float(tf.excited_band_hz[0]), float(tf.excited_band_hz[1])],
                "window": None if tf.window is None else tf.window.to_dict(),
                "averages": tf.averages,
            },
            "checks": {"f0_tolerance": self.tolerance,
                       "plausible_end_correction_over_radius":
                           list(PLAUSIBLE_END_CORRECTION_OVER_RADIUS)},
            "flags": [f.to_dict() for f in self.flags],
        }


def resolve_air(obj: ResonatorObject | None, **cli: float | None
                ) -> tuple[AirState, dict[str, str]]:
    """Air state from defaults, then the object file's [air], then the command line."""
    values = dict(DEFAULT_AIR)
    sources = {k: "default" for k in values}
    if obj is not None:
        for k, v in obj.air.to_dict().items():
            if v is not None:
                values[k], sources[k] = float(v), "object file"
    for k, v in cli.items():
        if v is not None:
            values[k], sources[k] = float(v), "command line"
    try:
        return air_state(**values), sources
    except ValueError as exc:
        raise InputError("air", None, str(exc)) from None


def analyze(recording: str | Path, *, object_path: str | Path | None = None,
            sweep_path: str | Path | None = None, inside: int = 1, outside: int = 2,
            band_hz: tuple[float, float] | None = None, temperature_c: float | None = None,
            relative_humidity: float | None = None, pressure_pa: float | None = None,
            tolerance: float = F0_TOLERANCE, window_s: float | None = None) -> Result:
    """Fit one recording and check it against its geometry.

    Parameters
    ----------
    recording : path
        WAV/FLAC/AIFF with at least two channels.
    object_path : path, optional
        Object file (TOML) with the geometry; enables the prediction, the
        derived effective neck length and the mismatch checks.
    sweep_path : path, optional
        The sweep that was played: deconvolution path. Without it, H1.
    inside, outside : int
        1-based channel numbers of the cavity and mouth microphones.
    band_hz : (lo, hi), optional
        Fit exactly this band (Hz); default automatic.
    temperature_c, relative_humidity, pressure_pa : float, optional
        Air overrides (command line beats the object file beats the defaults).
    tolerance : float
        Relative f0 mismatch that raises ``f0-mismatch``.
    window_s : float, optional
        Impulse-response window length (s) on the sweep path; default automatic.

    Raises
    ------
    InputError
        Bad files or options (exit status 2 on the command line).
    FitError
        Readable data but no fit (exit status 1).
    """
    rec = read_audio(recording, min_channels=2)
    check_channel(rec, inside, "--inside")
    check_channel(rec, outside, "--outside")
    if inside == outside:
        raise InputError(rec.path, "--inside/--outside",
                         f"both are channel {inside}; the inside and outside microphones "
                         "must be different channels")
    check_not_silent(rec, inside, "inside")
    check_not_silent(rec, outside, "outside")
    if not (0 < tolerance < 1):
        raise InputError("--tolerance", None, f"must be a fraction between 0 and 1, got {tolerance}")
    obj = load_object(object_path) if object_path is not None else None
    air, sources = resolve_air(obj, temperature_c=temperature_c,
                               relative_humidity=relative_humidity, pressure_pa=pressure_pa)
    if band_hz is not None:
        lo, hi = band_hz
        if not (0 < lo < hi):
            raise InputError("--band", None, f"need 0 < LO < HI, got {lo:g} {hi:g}")
        if hi > rec.sample_rate_hz / 2:
            raise InputError("--band", None, f"{lo:g} to {hi:g} Hz is outside the data "
                             f"(0 to {rec.sample_rate_hz / 2:g} Hz at this sample rate)")
    y_in = rec.channel(inside)
    y_out = rec.channel(outside)
    sweep_from = None
    if sweep_path is not None:
        from .excitation import load_sweep

        sweep = load_sweep(sweep_path, rec.sample_rate_hz)
        if rec.n_samples < sweep.samples.size - int(sweep.params.tail_s * rec.sample_rate_hz):
            raise InputError(rec.path, None,
                             f"recording ({rec.duration_s:.2f} s) is shorter than the sweep "
                             f"({sweep.params.duration_s:.2f} s): it cannot hold the response")
        sweep_from = "samples" if sweep.estimated else "sidecar"
        tf = sweep_transfer(y_in, y_out, rec.sample_rate_hz, sweep, window_s=window_s)
    else:
        tf = cross_spectral_transfer(y_in, y_out, rec.sample_rate_hz)
    if band_hz is not None:
        f = tf.freqs_hz
        if band_hz[0] < f[1] or band_hz[1] > f[-1]:
            raise InputError("--band", None, f"{band_hz[0]:g} to {band_hz[1]:g} Hz is outside "
                             f"the data ({f[1]:.3g} to {f[-1]:.6g} Hz)")
    fit = fit_transfer(tf, band_hz)

    flags: list[Flag] = []
    flags += check_clipping([clip_report(rec, inside), clip_report(rec, outside)],
                            {inside: "inside", outside: "outside"})
    flags += check_fit_quality(fit)
    flags += check_in_band(fit, tf.excited_band_hz)
    flags += check_window(tf, fit)
    flags += check_weighting(fit)
    flags += check_polarity(fit)
    prediction = derived = None
    if obj is not None:
        prediction = predict(obj, air)
        derived = derive_from_f0(fit.f0_hz, fit.f0_stderr_hz, obj, air)
        flags += check_f0_mismatch(fit, prediction, tolerance)
        flags += check_end_correction(derived, PLAUSIBLE_END_CORRECTION_OVER_RADIUS)
    info = InputInfo(
        recording=str(recording), sample_rate_hz=rec.sample_rate_hz, inside_channel=inside,
        outside_channel=outside, method=tf.method, polarity_inverted=fit.polarity_inverted,
        sweep=None if sweep_path is None else str(sweep_path), sweep_parameters_from=sweep_from,
        duration_s=rec.duration_s, subtype=rec.subtype)
    return Result(info, air, sources, fit, tf, prediction, derived, obj, flags, tolerance)
