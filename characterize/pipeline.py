"""The main job as one library call: recording (+ geometry) -> :class:`Result`.

    audio -> transfer -> fitting -> checks        (this module wires them)
    physics (air, geometry, prediction) --^

Everything the ``fit`` command does is :func:`analyze`; the command line only
parses options, calls it and writes what it returns.

Ways of recording (``method``; ``auto`` picks from what is given):

========================  ==================================================
``sweep``                 two microphones, the sweep file: deconvolution
``h1`` / ``h2``           two microphones, any broadband signal: cross-spectra
``one-channel``           inside microphone + the excitation (sweep or any
                          signal): loudspeaker and room are part of H, so the
                          model gains a smooth background
``ringdown``              inside microphone, free decays (tap, clap, pop)
``csv``                   a measured transfer function exported as CSV
========================  ==================================================
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any

import numpy as np

from ._version import SCHEMA, __version__
from .audio import Recording, check_channel, check_not_silent, clip_report, read_audio
from .checks import (
    F0_TOLERANCE,
    Flag,
    check_band_edge,
    check_clipping,
    check_clock,
    check_drive,
    check_end_correction,
    check_f0_mismatch,
    check_fit_quality,
    check_geometry,
    check_in_band,
    check_low_q,
    check_methods_agree,
    check_multiple_peaks,
    check_nonlinear_drive,
    check_polarity,
    check_precision,
    check_q_mismatch,
    check_signal_quality,
    check_weighting,
    check_window,
)
from .errors import FitError, InputError
from .fitting.fit import FitResult, fit_transfer
from .objectfile import load_object
from .physics.air import AirState
from .physics.conditions import DEFAULT_AIR, resolve_air  # noqa: F401  (re-exported)
from .physics.geometry import ResonatorObject
from .physics.helmholtz import (
    PLAUSIBLE_END_CORRECTION_OVER_RADIUS,
    Derived,
    Prediction,
    derive_from_f0,
    predict,
)
from .takechecks import check_swapped, clock_error, refuse_room_in_window
from .transfer import TransferFunction

METHODS = ("auto", "sweep", "h1", "h2", "one-channel", "ringdown", "csv")
#: ``input.method`` of a no-fit document: the way of recording that was tried.
NO_FIT_METHOD_NAMES = {"sweep": "sweep-deconvolution", "h1": "cross-spectral-h1",
                       "h2": "cross-spectral-h2", "one-channel": "one-channel",
                       "ringdown": "ringdown", "csv": "csv"}
#: An excitation file must match the recording this well (normalised cross-
#: correlation) and cover this fraction of what was recorded after its start.
EXCITATION_MIN_MATCH = 0.1
EXCITATION_MIN_COVER = 0.9


@dataclass(frozen=True)
class InputInfo:
    recording: str
    sample_rate_hz: float | None
    inside_channel: int | None
    outside_channel: int | None
    method: str
    polarity_inverted: bool
    sweep: str | None = None
    sweep_parameters_from: str | None = None  # "sidecar" or "samples"
    excitation: str | None = None
    duration_s: float | None = None
    subtype: str | None = None

    def to_dict(self) -> dict[str, Any]:
        return {
            "recording": self.recording, "sample_rate_hz": self.sample_rate_hz,
            "inside_channel": self.inside_channel, "outside_channel": self.outside_channel,
            "method": self.method, "polarity_inverted": self.polarity_inverted,
            "sweep": self.sweep, "sweep_parameters_from": self.sweep_parameters_from,
            "excitation": self.excitation, "duration_s": self.duration_s,
            "sample_format": self.subtype,
        }


@dataclass(frozen=True)
class Result:
    """Everything one fit produced; :meth:`to_dict` is the result document."""

    input: InputInfo
    air: AirState
    air_sources: dict[str, str]
    fit: FitResult
    transfer: TransferFunction | None
    prediction: Prediction | None = None
    derived: Derived | None = None
    object: ResonatorObject | None = None
    flags: list[Flag] = field(default_factory=list)
    tolerance: float = F0_TOLERANCE
    modes: list[dict[str, float]] = field(default_factory=list)
    circle: dict[str, float] | None = None
    quality: dict[str, Any] = field(default_factory=dict)
    decays: list[dict[str, float]] = field(default_factory=list)
    background: list[list[float]] | None = None
    signal: np.ndarray | None = None  # the ringdown channel (plots only)
    modes_fit: Any = None  # fitting.modes.ModesFit when several modes or a background
    outside_mic: dict[str, Any] | None = None
    drive: dict[str, Any] | None = None
    #: How the model's size was chosen (fitting.modes.Selection.to_dict()), per choice.
    model_selection: list[dict[str, Any]] = field(default_factory=list)

    def model(self, freqs_hz: np.ndarray) -> np.ndarray:
        """The fitted model of H (all modes and the background) at ``freqs_hz``."""
        if self.modes_fit is not None:
            return np.asarray(self.modes_fit.model(np.asarray(freqs_hz, dtype=float)))
        return self.fit.model(np.asarray(freqs_hz, dtype=float))

    def to_dict(self) -> dict[str, Any]:
        """The result document (schema ``characterize.result/1``, see docs/result-schema.md)."""
        tf = self.transfer
        air: dict[str, Any] = self.air.to_dict()
        air["sources"] = dict(self.air_sources)
        fit = self.fit.to_dict()
        fit["modes"] = self.modes
        fit["circle"] = self.circle
        fit["background"] = self.background
        fit["model_selection"] = self.model_selection
        if self.decays:
            fit["decays"] = self.decays
        return {
            "schema": SCHEMA,
            "tool_version": __version__,
            "status": "fitted",
            "reason": None,
            "input": self.input.to_dict(),
            "air": air,
            "fit": fit,
            "prediction": None if self.prediction is None else self.prediction.to_dict(),
            "derived": None if self.derived is None else self.derived.to_dict(),
            "object": None if self.object is None else self.object.to_dict(),
            "transfer": None if tf is None else {
                "method": tf.method,
                "resolution_hz": tf.resolution_hz,
                "excited_band_hz": [float(tf.excited_band_hz[0]), float(tf.excited_band_hz[1])],
                "window": None if tf.window is None else tf.window.to_dict(),
                "averages": tf.averages,
            },
            "quality": self.quality,
            "outside_microphone": self.outside_mic,
            "drive": self.drive,
            "checks": {"f0_tolerance": self.tolerance,
                       "plausible_end_correction_over_radius":
                           list(PLAUSIBLE_END_CORRECTION_OVER_RADIUS)},
            "flags": [f.to_dict() for f in self.flags],
        }


def choose_method(method: str, n_channels: int | None, sweep: bool, excitation: bool,
                  transfer: bool) -> str:
    """The recording method for ``auto``, or a check that the given one fits the inputs."""
    if method not in METHODS:
        raise InputError("--method", None, f"must be one of {list(METHODS)}, got {method!r}")
    if method == "auto":
        if transfer:
            return "csv"
        if n_channels is not None and n_channels >= 2:
            return "sweep" if sweep else "h1"
        if sweep or excitation:
            return "one-channel"
        return "ringdown"
    if method == "csv" and not transfer:
        raise InputError("--method", None, "csv needs --transfer FILE.csv")
    if method == "sweep" and not sweep:
        raise InputError("--method", None, "sweep needs --sweep SWEEP.wav")
    if method == "one-channel" and not (sweep or excitation):
        raise InputError("--method", None, "one-channel needs --sweep or --excitation")
    if method in ("sweep", "h1", "h2") and n_channels is not None and n_channels < 2:
        raise InputError("--method", None, f"{method} needs two channels; this recording "
                         "has one (use one-channel or ringdown)")
    return method


def _align_excitation(x: np.ndarray, y: np.ndarray, source: str) -> np.ndarray:
    """The excitation ``x`` shifted to where it sits in the recording ``y``
    (peak of the FFT cross-correlation), cut or padded to ``y``'s length."""
    from scipy.signal import correlate

    if x.size > y.size:
        raise InputError(source, None, f"excitation ({x.size} samples) is longer than the "
                         f"recording ({y.size} samples)")
    c = correlate(y, x, mode="full", method="fft")
    k = int(np.argmax(np.abs(c)))
    lag = k - (x.size - 1)
    out = np.zeros_like(y)
    lo, hi = max(0, lag), min(y.size, lag + x.size)
    seg_y = y[lo:hi]
    norm = float(np.linalg.norm(x[lo - lag:hi - lag]) * np.linalg.norm(seg_y))
    match = abs(float(c[k])) / norm if norm > 0 else 0.0
    if hi - lo < 0.5 * x.size or match < EXCITATION_MIN_MATCH:
        raise InputError(source, None, "this excitation was not found in the recording "
                         f"(normalised correlation {match:.2f} < {EXCITATION_MIN_MATCH:g}): "
                         "is it the file that was played?")
    if (hi - lo) < EXCITATION_MIN_COVER * (y.size - lo):
        raise InputError(source, None, f"the excitation covers only {hi - lo} of the "
                         f"{y.size - lo} samples recorded after its start: it is shorter "
                         "than needed (give the whole file that was played)")
    out[lo:hi] = x[lo - lag:hi - lag]
    return out


def no_fit_document(reason: str, info: InputInfo | None, flags: list[Flag]) -> dict[str, Any]:
    """The result document of a run that made no fit (docs/result-schema.md)."""
    return {"schema": SCHEMA, "tool_version": __version__, "status": "no fit",
            "reason": reason, "input": None if info is None else info.to_dict(),
            "fit": None, "flags": [f.to_dict() for f in flags]}


def analyze(recording: str | Path | None, *, object_path: str | Path | None = None,
            sweep_path: str | Path | None = None, excitation_path: str | Path | None = None,
            transfer_path: str | Path | None = None, method: str = "auto", inside: int = 1,
            outside: int = 2, band_hz: tuple[float, float] | None = None,
            modes: int | None = None, temperature_c: float | None = None,
            relative_humidity: float | None = None, pressure_pa: float | None = None,
            tolerance: float | None = None, window_s: float | None = None,
            outside_distance_m: float | None = None,
            calibration_path: str | Path | None = None) -> Result:
    """Fit one recording (or a measured transfer function) and check it against
    its geometry.

    Parameters
    ----------
    recording : path or None
        WAV/FLAC/AIFF; two channels for the sweep and cross-spectral paths, one
        (or ``inside``) for one-channel and ringdown. None with ``transfer_path``.
    object_path : path, optional
        Object file (TOML) with the geometry; enables the prediction, the
        derived effective neck length and the mismatch checks.
    sweep_path, excitation_path : path, optional
        The sweep (deconvolution) or any other excitation that was played.
    transfer_path : path, optional
        A measured transfer function (CSV) instead of a recording.
    method : str
        One of :data:`METHODS`; ``auto`` picks from the inputs.
    inside, outside : int
        1-based channel numbers of the cavity and mouth microphones.
    band_hz : (lo, hi), optional
        Fit exactly this band (Hz); default automatic.
    modes : int, optional
        Fit this many resonances together (default 1).
    temperature_c, relative_humidity, pressure_pa : float, optional
        Air overrides (command line beats the object file beats the defaults).
    tolerance : float, optional
        Relative f0 mismatch that raises ``f0-mismatch``; default: what the
        geometry model can promise for this shape (``prediction.f0_tolerance``).
    window_s : float, optional
        Impulse-response window length (s) on the sweep paths; default automatic.
    outside_distance_m : float, optional
        Distance of the outside microphone from the mouth: H is corrected for
        the mouth's own radiation reaching it, and the fit redone.
    calibration_path : path, optional
        Calibration file (``characterize calibrate``): the relative gain and
        phase of the two channels are removed from H, and with the inside
        channel's sensitivity the drive level (cavity SPL, neck motion) is reported.

    Raises
    ------
    InputError
        Bad files or options (exit status 2 on the command line).
    FitError
        Readable data but no fit (exit status 1).
    """
    options = dict(locals())
    context: dict[str, Any] = {"flags": [], "input": None}
    try:
        return _analyze(context, **options)
    except FitError as exc:
        exc.document = no_fit_document(str(exc), context["input"], context["flags"])
        raise


def _analyze(context: dict[str, Any], recording: str | Path | None, *,
             object_path: str | Path | None = None,
            sweep_path: str | Path | None = None, excitation_path: str | Path | None = None,
            transfer_path: str | Path | None = None, method: str = "auto", inside: int = 1,
            outside: int = 2, band_hz: tuple[float, float] | None = None,
            modes: int | None = None, temperature_c: float | None = None,
            relative_humidity: float | None = None, pressure_pa: float | None = None,
            tolerance: float | None = None, window_s: float | None = None,
            outside_distance_m: float | None = None,
            calibration_path: str | Path | None = None) -> Result:
    """The body of :func:`analyze`; ``context`` collects the flags and the input
    description for the no-fit document."""
    if tolerance is not None and not (0 < tolerance < 1):
        raise InputError("--tolerance", None,
                         f"must be a fraction between 0 and 1, got {tolerance}")
    if modes is not None and (modes < 1 or modes > 6):
        raise InputError("--modes", None, f"must be 1 to 6, got {modes}")
    if window_s is not None and not (math.isfinite(window_s) and window_s > 0):
        raise InputError("--window", None, f"must be a positive number of ms, got "
                         f"{window_s * 1000:g}")
    if window_s is not None and sweep_path is None:
        raise InputError("--window", None, "applies only with --sweep (the impulse-response "
                         "window of the deconvolution paths)")
    if band_hz is not None and not (0 < band_hz[0] < band_hz[1]):
        raise InputError("--band", None, f"need 0 < LO < HI, got {band_hz[0]:g} {band_hz[1]:g}")
    if sweep_path is not None and excitation_path is not None:
        raise InputError("--excitation", None, "give either --sweep or --excitation, not both")
    rec: Recording | None = None
    if transfer_path is None:
        if recording is None:
            raise InputError("fit", None, "give a RECORDING or --transfer FILE.csv")
        rec = read_audio(recording, min_channels=1)
    elif recording is not None:
        raise InputError("--transfer", None, "give either a RECORDING or --transfer, not both")
    chosen = choose_method(method, None if rec is None else rec.n_channels,
                           sweep_path is not None, excitation_path is not None,
                           transfer_path is not None)
    obj = load_object(object_path) if object_path is not None else None
    cal = None
    if calibration_path is not None:
        from .calibration import read_calibration

        cal = read_calibration(calibration_path)
    if outside_distance_m is not None and obj is None:
        raise InputError("--outside-distance", None, "needs --object (the cavity volume and "
                         "the mouth's baffle condition set the correction)")
    air, sources = resolve_air(obj, temperature_c=temperature_c,
                               relative_humidity=relative_humidity, pressure_pa=pressure_pa)
    if rec is not None and band_hz is not None and band_hz[1] > rec.rate_hz / 2:
        raise InputError("--band", None, f"{band_hz[0]:g} to {band_hz[1]:g} Hz is outside the "
                         f"data (0 to {rec.rate_hz / 2:g} Hz at this sample rate)")

    two_mic = chosen in ("sweep", "h1", "h2")
    flags: list[Flag] = context["flags"]
    sweep_from = None
    context["input"] = InputInfo(
        recording=str(recording if recording is not None else transfer_path),
        sample_rate_hz=None if rec is None else rec.rate_hz,
        inside_channel=None if rec is None else inside,
        outside_channel=outside if two_mic else None, method=NO_FIT_METHOD_NAMES[chosen],
        polarity_inverted=False, sweep=None if sweep_path is None else str(sweep_path),
        excitation=None if excitation_path is None else str(excitation_path),
        duration_s=None if rec is None else rec.duration_s,
        subtype=None if rec is None else rec.subtype)
    if rec is not None:
        check_channel(rec, inside, "--inside")
        check_not_silent(rec, inside, "inside")
        roles = {inside: "inside"}
        if two_mic:
            check_channel(rec, outside, "--outside")
            if inside == outside:
                raise InputError(rec.path, "--inside/--outside",
                                 f"both are channel {inside}; the inside and outside "
                                 "microphones must be different channels")
            check_not_silent(rec, outside, "outside")
            roles[outside] = "outside"
        flags += check_clipping([clip_report(rec, c) for c in roles], roles)

    if chosen == "ringdown":
        assert rec is not None
        return _ringdown(rec, inside, obj, air, sources, flags, tolerance)

    tf: TransferFunction
    record_fit: FitResult | None = None
    if chosen == "csv":
        from .transfer_csv import read_transfer_csv

        assert transfer_path is not None
        tf = read_transfer_csv(transfer_path)
    else:
        assert rec is not None
        # float64 copies only where the whole signal is transformed at once in
        # double precision; the cross-spectral path reads the float32 samples block
        # by block, the sweep path casts or copies them as its FFT size needs
        excitation_file = chosen == "one-channel" and excitation_path is not None
        y_in = rec.channel(inside) if excitation_file else rec.view(inside)
        if chosen in ("sweep", "one-channel") and sweep_path is not None:
            from .excitation import load_sweep

            sweep = load_sweep(sweep_path, rec.rate_hz)
            if rec.n_samples < sweep.samples.size - int(sweep.params.tail_s * rec.rate_hz):
                raise InputError(rec.path, None,
                                 f"recording ({rec.duration_s:.2f} s) is shorter than the sweep "
                                 f"({sweep.params.duration_s:.2f} s): it cannot hold the response")
            sweep_from = "samples" if sweep.estimated else "sidecar"
            from .transfer import sweep_transfer

            y_out = rec.view(outside) if chosen == "sweep" else None
            tf = sweep_transfer(y_in, y_out, rec.rate_hz, sweep, window_s=window_s)
        elif chosen == "one-channel":
            assert excitation_path is not None
            exc = read_audio(excitation_path)
            if exc.rate_hz != rec.rate_hz:
                raise InputError(str(excitation_path), "sample rate",
                                 f"excitation is at {exc.rate_hz:g} Hz but the recording "
                                 f"is at {rec.rate_hz:g} Hz; resample one of them")
            x = _align_excitation(exc.channel(1), y_in, str(excitation_path))
            from .transfer import cross_spectral_transfer

            tf = cross_spectral_transfer(y_in, x, rec.rate_hz)
            tf = _as_method(tf, "one-channel-excitation")
        elif (modes or 1) == 1 and outside_distance_m is None:
            # the whole record, errors in both channels, transients modelled
            from .fitting.record import record_transfer_fit

            def match(f: np.ndarray) -> np.ndarray:
                assert cal is not None and cal.relative is not None  # only passed then
                return cal.relative.correction(f, inside, outside)

            record_fit, tf = record_transfer_fit(
                y_in, rec.view(outside), rec.rate_hz, band_hz=band_hz,
                estimator=chosen,
                correction=match if cal is not None and cal.relative is not None else None)
        else:
            from .transfer import cross_spectral_transfer

            tf = cross_spectral_transfer(y_in, rec.view(outside), rec.rate_hz,
                                         estimator=chosen)
        if chosen == "sweep" and band_hz is None and modes is None:
            # (the cross-spectral path is fitted on the whole record, fitting.record)
            def transfer_of(ch_in: int, ch_out: int) -> TransferFunction:
                assert rec is not None
                from .transfer import sweep_transfer

                return sweep_transfer(rec.view(ch_in), rec.view(ch_out),
                                      rec.rate_hz, sweep, window_s=window_s)

            tf, swapped_flags = check_swapped(tf, transfer_of, inside, outside)
            if swapped_flags and swapped_flags[0].code == "channels-swapped":
                inside, outside = outside, inside
            flags += swapped_flags
    if band_hz is not None:
        f = tf.freqs_hz
        if band_hz[0] < f[1] or band_hz[1] > f[-1]:
            raise InputError("--band", None, f"{band_hz[0]:g} to {band_hz[1]:g} Hz is outside "
                             f"the data ({f[1]:.3g} to {f[-1]:.6g} Hz)")

    one_mic = chosen == "one-channel"
    if outside_distance_m is not None and not two_mic:
        raise InputError("--outside-distance", None, "applies to the two-microphone methods "
                         "(sweep, h1, h2) only")
    if cal is not None and cal.relative is not None and two_mic and record_fit is None:
        tf = replace(tf, h=tf.h / cal.relative.correction(tf.freqs_hz, inside, outside))
    n_modes = modes or 1
    background = None
    mf = None
    selection = None
    if one_mic:
        from .fitting.modes import fit_background_selected

        mf, selection = fit_background_selected(tf, n_modes, band_hz=band_hz)
        refuse_room_in_window(tf, mf)
    elif n_modes > 1:
        from .fitting.modes import Selection, fit_modes

        mf = fit_modes(tf, n_modes, band_hz=band_hz)
        selection = Selection("modes", n_modes, (), "--modes")
    elif (chosen == "sweep" and modes is None and band_hz is None
          and outside_distance_m is None):
        from .fitting.modes import select_mode_count

        mf, selection = select_mode_count(tf)
        if mf is not None:
            n_modes = len(mf.modes)
    if mf is not None:
        fit = _main_mode_result(mf, tf)
        mode_list = [m.to_dict() for m in mf.modes]
        if mf.background:
            background = [[c.real, c.imag] for c in mf.background]
    else:
        fit = record_fit if record_fit is not None else fit_transfer(tf, band_hz)
        mode_list = [{"f0_hz": fit.f0_hz, "f0_stderr_hz": fit.f0_stderr_hz, "q": fit.q,
                      "q_stderr": fit.q_stderr, "gain": fit.gain,
                      "gain_stderr": fit.gain_stderr}]
    outside_mic: dict[str, Any] = {
        "distance_m": None, "correction_applied": False,
        "note": "the outside microphone also hears the mouth's own radiation, which raises "
                "the measured f0 slightly and leaves the radiation damping out of Q; give "
                "--outside-distance to correct, or compare Q with prediction.q_without_radiation"}
    if outside_distance_m is not None and two_mic and n_modes == 1:
        from .physics.radiation import outside_mic_correction

        assert obj is not None
        raw = fit
        h_c = outside_mic_correction(tf.freqs_hz, tf.h, outside_distance_m, None, obj, air,
                                     gain=-raw.gain if raw.polarity_inverted else raw.gain,
                                     delay_s=raw.delay_s)
        tf = replace(tf, h=h_c)
        fit = fit_transfer(tf, band_hz)
        mode_list = [{"f0_hz": fit.f0_hz, "f0_stderr_hz": fit.f0_stderr_hz, "q": fit.q,
                      "q_stderr": fit.q_stderr, "gain": fit.gain,
                      "gain_stderr": fit.gain_stderr}]
        outside_mic = {"distance_m": outside_distance_m, "correction_applied": True,
                       "uncorrected": {"f0_hz": raw.f0_hz, "f0_stderr_hz": raw.f0_stderr_hz,
                                       "q": raw.q, "q_stderr": raw.q_stderr}}
    circle = None
    if not one_mic:
        from .fitting.circle import circle_fit

        try:
            with np.errstate(invalid="ignore"):
                sig = tf.sigma(np.abs(fit.model(tf.freqs_hz)))
            circle = circle_fit(tf.freqs_hz, tf.h, fit.f0_hz, fit.q, fit.delay_s,
                                -1.0 if fit.polarity_inverted else 1.0, sigma=sig)
        except FitError:
            circle = None
    clock_rel = clock_error(tf.clock)
    if clock_rel:
        se_f0 = math.hypot(fit.f0_stderr_hz, fit.f0_hz * clock_rel)
        fit = replace(fit, f0_stderr_hz=se_f0)
        if mode_list:
            mode_list[0] = {**mode_list[0], "f0_stderr_hz": se_f0}
    quality = signal_quality(tf, fit)
    quality["clock"] = None if tf.clock is None else tf.clock.to_dict()
    flags += check_clock(tf.clock)

    flags += check_fit_quality(fit)
    if record_fit is not None or chosen == "csv":
        flags += check_precision(fit)
    flags += check_in_band(fit, tf.excited_band_hz)
    flags += check_band_edge(fit, tf.excited_band_hz)
    flags += check_low_q(fit)
    flags += check_window(tf, fit)
    flags += check_weighting(fit)
    flags += check_polarity(fit)
    # the whole-record fit's errors carry both channels' noise (its likelihood), so the
    # coherence of the smoothed estimate is shown but raises no flag there
    flags += check_signal_quality(quality, tf.coherence is not None and not one_mic
                                  and record_fit is None)
    flags += check_nonlinear_drive(quality)
    # the circle is a single-mode cross-check of data the oscillator describes as they
    # are; a Welch estimate is smoothed by its window (the fit models that, the circle
    # does not), so there the circle is reported but not used to flag
    if circle is not None and n_modes == 1 and tf.kernel is None:
        flags += check_methods_agree(fit, circle.to_dict())
    if n_modes == 1 and band_hz is None:
        from .fitting.modes import find_resonances

        flags += check_multiple_peaks(fit, find_resonances(tf, fit.band_hz))
    prediction, derived, used_tol = _geometry(
        obj, air, fit, flags, tolerance,
        uncorrected_mic=two_mic and not outside_mic["correction_applied"])
    drive = None
    if cal is not None and rec is not None:
        drive = _drive(rec, inside, cal, fit, obj, air, flags)
    info = InputInfo(
        recording=str(recording if recording is not None else transfer_path),
        sample_rate_hz=None if rec is None else rec.rate_hz,
        inside_channel=None if rec is None else inside,
        outside_channel=outside if two_mic else None, method=tf.method,
        polarity_inverted=fit.polarity_inverted,
        sweep=None if sweep_path is None else str(sweep_path), sweep_parameters_from=sweep_from,
        excitation=None if excitation_path is None else str(excitation_path),
        duration_s=None if rec is None else rec.duration_s,
        subtype=None if rec is None else rec.subtype)
    return Result(info, air, sources, fit, tf, prediction, derived, obj, flags, used_tol,
                  modes=mode_list, circle=None if circle is None else circle.to_dict(),
                  quality=quality, background=background, modes_fit=mf,
                  outside_mic=outside_mic if two_mic else None, drive=drive,
                  model_selection=[] if selection is None else [selection.to_dict()])


#: |H| of an inside/outside ratio falls above the resonance (the low-pass form);
def _as_method(tf: TransferFunction, method: str) -> TransferFunction:
    return replace(tf, method=method)


def _geometry(obj: ResonatorObject | None, air: AirState, fit: FitResult, flags: list[Flag],
              tolerance: float | None, uncorrected_mic: bool = False
              ) -> tuple[Prediction | None, Derived | None, float]:
    if obj is None:
        return None, None, F0_TOLERANCE if tolerance is None else tolerance
    prediction = predict(obj, air)
    derived = derive_from_f0(fit.f0_hz, fit.f0_stderr_hz, obj, air)
    tol = tolerance if tolerance is not None else float(
        getattr(prediction, "f0_tolerance", F0_TOLERANCE))
    flags += check_f0_mismatch(fit, prediction, tol)
    flags += check_geometry(obj, prediction)
    flags += check_q_mismatch(fit, prediction, uncorrected_mic)
    if obj.kind == "helmholtz":
        flags += check_end_correction(derived, PLAUSIBLE_END_CORRECTION_OVER_RADIUS)
    return prediction, derived, tol


def _drive(rec: Recording, inside: int, cal: Any, fit: FitResult,
           obj: ResonatorObject | None, air: AirState, flags: list[Flag]) -> dict[str, Any]:
    """Drive level from a calibrated inside channel: the pressure amplitude of the
    inside signal in the resonance band (its peak for a sweep or a decay), and
    with the geometry the neck motion (physics.nonlinear.drive_state)."""
    from scipy.signal import butter, sosfiltfilt

    from .physics.spl import pressure_to_spl_db

    if inside not in cal.channels:
        raise InputError(cal.source_path or "calibration", f"channel {inside}",
                         "the calibration file has no sensitivity for the inside channel")
    sens = cal.channels[inside].sensitivity_fs_per_pa
    fs = rec.rate_hz
    lo = max(1.0, fit.f0_hz * (1 - 1 / max(fit.q, 0.6)))
    hi = min(0.45 * fs, fit.f0_hz * (1 + 1 / max(fit.q, 0.6)))
    x = rec.channel(inside)
    sos = butter(2, [lo, hi], btype="bandpass", fs=fs, output="sos")
    y = sosfiltfilt(sos, x)
    p_amp = float(np.max(np.abs(y))) / sens
    out: dict[str, Any] = {"inside_sensitivity_fs_per_pa": sens,
                           "cavity_pressure_amplitude_pa": p_amp,
                           "cavity_spl_db": float(pressure_to_spl_db(p_amp / math.sqrt(2)))}
    if obj is not None:
        from .physics.nonlinear import drive_state

        state = drive_state(p_amp, fit.f0_hz, obj, air)
        out.update(state.to_dict())
        flags += check_drive(state.to_dict())
    return out


def _main_mode_result(mf: Any, tf: TransferFunction) -> FitResult:
    """The multi-mode fit's strongest-gain mode as the result's main fit."""
    k = int(np.argmax([abs(m.gain) for m in mf.modes])) if not mf.background else 0
    m = mf.modes[k]
    gain = abs(mf.background[0]) if mf.background else abs(m.gain)
    return FitResult(
        f0_hz=m.f0_hz, f0_stderr_hz=m.f0_stderr_hz, q=m.q, q_stderr=m.q_stderr, gain=gain,
        gain_stderr=m.gain_stderr, delay_s=mf.delay_s, delay_stderr_s=mf.delay_stderr_s,
        polarity_inverted=bool(mf.sign < 0), band_hz=mf.band_hz, n_points=mf.n_points,
        chi2=mf.chi2, reduced_chi2=mf.reduced_chi2,
        stderr_scale=mf.stderr_scale, weighting=mf.weighting, correlation_f0_q=math.nan,
        nfev=0, method="multi-mode" if len(mf.modes) > 1 else "oscillator-with-background")


def signal_quality(tf: TransferFunction, fit: FitResult) -> dict[str, Any]:
    """SNR and coherence in the fit band, THD at f0, window length."""
    f = tf.freqs_hz
    idx = np.flatnonzero((f >= fit.band_hz[0]) & (f <= fit.band_hz[1]))
    q: dict[str, Any] = {"snr_db_in_band": None, "coherence_min_in_band": None,
                         "coherence_min_off_peak": None,
                         "thd_inside_at_f0": None, "thd_outside_at_f0": None,
                         "window_ms": None if tf.window is None else 1000 * tf.window.length_s,
                         "resolution_hz": tf.resolution_hz}
    if idx.size:
        sig = tf.sigma(np.abs(fit.model(f[idx])), idx)
        with np.errstate(divide="ignore", invalid="ignore"):
            snr = np.abs(fit.model(f[idx])) / sig
        snr = snr[np.isfinite(snr) & (snr > 0)]
        if snr.size:
            q["snr_db_in_band"] = float(20 * np.log10(np.median(snr)))
        if tf.coherence is not None:
            q["coherence_min_in_band"] = float(np.min(tf.coherence[idx]))
            # away from the half-power band, where leakage of the ringing does not
            # lower the coherence (checks.UNDERSTATED_ERRORS_COHERENCE)
            off = idx[np.abs(f[idx] - fit.f0_hz) >= fit.f0_hz / (2 * fit.q)]
            if off.size:
                q["coherence_min_off_peak"] = float(np.min(tf.coherence[off]))
    for key, arr in (("thd_inside_at_f0", tf.thd_inside), ("thd_outside_at_f0", tf.thd_outside)):
        if arr is not None:
            v = float(np.interp(fit.f0_hz, f, arr))
            q[key] = v if math.isfinite(v) else None
    return q


def _ringdown(rec: Recording, channel: int, obj: ResonatorObject | None, air: AirState,
              sources: dict[str, str], flags: list[Flag], tolerance: float | None) -> Result:
    from .fitting.ringdown import combine, fit_ringdown

    x = rec.channel(channel)
    try:
        decays = fit_ringdown(x, rec.rate_hz, rec.path)
    except FitError as exc:
        if rec.n_channels == 1:  # perhaps a two-microphone take saved as mono
            raise FitError(f"{exc} (a one-channel recording without --sweep or "
                           "--excitation is read as taps; the two-microphone methods "
                           "need two channels)") from None
        raise
    f0, sf, q, sq = combine(decays)
    redchi = float(np.mean([d.reduced_chi2 for d in decays]))
    fit = FitResult(f0_hz=f0, f0_stderr_hz=sf, q=q, q_stderr=sq,
                    gain=float(np.mean([d.amplitude for d in decays])), gain_stderr=math.nan,
                    delay_s=0.0, delay_stderr_s=math.nan, polarity_inverted=False,
                    band_hz=(math.nan, math.nan), n_points=int(sum(
                        d.length_s * rec.rate_hz for d in decays)),
                    chi2=math.nan, reduced_chi2=redchi, stderr_scale=1.0,
                    weighting="noise-estimate", correlation_f0_q=math.nan, nfev=0,
                    method="damped-sinusoid")
    flags += check_fit_quality(fit)
    flags += check_precision(fit)
    prediction, derived, used_tol = _geometry(obj, air, fit, flags, tolerance)
    info = InputInfo(recording=str(rec.path), sample_rate_hz=rec.rate_hz,
                     inside_channel=channel, outside_channel=None, method="ringdown",
                     polarity_inverted=False, duration_s=rec.duration_s, subtype=rec.subtype)
    pencil = [{"f0_hz": d.pencil_f0_hz, "q": d.pencil_q} for d in decays]
    return Result(info, air, sources, fit, None, prediction, derived, obj, flags, used_tol,
                  modes=[{"f0_hz": f0, "f0_stderr_hz": sf, "q": q, "q_stderr": sq,
                          "gain": fit.gain, "gain_stderr": math.nan}],
                  circle=None, quality={"decays": len(decays), "matrix_pencil": pencil},
                  decays=[d.to_dict() for d in decays], signal=x)
