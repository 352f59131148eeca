"""Checks: results in, flags out (pure functions, no I/O).

Every flag has a stable ``code``, a ``severity`` (info, warning, error) and a
one-line ``message`` with the numbers. Default thresholds are the named
constants below; docs/checks.md documents each.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass
from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:
    from .audio import ClipReport
    from .clock import ClockEstimate
    from .fitting.fit import FitResult
    from .physics.helmholtz import Derived, Prediction
    from .transfer import TransferFunction

SEVERITIES = ("info", "warning", "error")

#: Relative f0 mismatch against the prediction that raises a warning. The
#: prediction (physics.helmholtz.predict) is within 0.5 % of openwind's 1-D
#: visco-thermal model for cylinders, boxes and profiles (tests/test_openwind.py),
#: which with 1 % on a neck diameter and 1 K on the temperature makes 2 %; a
#: cavity given by volume only leaves its own inertia unknown (up to about 3 %),
#: and that case sets the default: 3.5 % (see Prediction.f0_tolerance per model).
F0_TOLERANCE = 0.035
#: Reduced chi-square above which the residuals are inconsistent with the noise.
POOR_FIT_REDUCED_CHI2 = 3.0
#: Relative standard errors above which a fit is too loose to use.
POOR_FIT_F0_REL_STDERR = 0.01
POOR_FIT_Q_REL_STDERR = 0.25
#: The resonance must sit this many half-power half-widths f0/(2Q) inside the excited band.
OUT_OF_BAND_HALF_WIDTHS = 4.0
#: A fit within this many half-widths of the excited band's edge, and poor, is
#: taken for a resonance outside the band (near-band-edge).
BAND_EDGE_HALF_WIDTHS = 1.0
#: Below this Q the statistics of the fit are not validated (low-q).
LOW_Q = 4.0
#: Window shorter than this many ringing time constants Q/(pi f0) biases Q low.
MIN_WINDOW_TIME_CONSTANTS = 7.0
#: Median per-bin SNR of H in the fit band (|H| over its noise) below which the fit
#: band is noise-dominated.
LOW_SNR_DB = 10.0
#: Lowest ordinary coherence allowed in the fit band (cross-spectral paths).
LOW_COHERENCE = 0.8
#: Below this coherence somewhere in the fit band away from the resonance peak
#: (outside f0 +- f0/(2Q), where the ringing's leakage across Welch segments
#: lowers the coherence without adding error), the cross-spectral path's
#: standard errors understate the scatter (errors-understated; Monte Carlo in
#: docs/quality.md: rms error/stderr about 1.5 there, 2 to 4 below LOW_COHERENCE,
#: 0.6 to 1.0 above).
UNDERSTATED_ERRORS_COHERENCE = 0.95
#: Inside THD at f0 exceeding the outside THD by this much (and by the factor
#: below) is evidence of nonlinear drive in the neck rather than of the loudspeaker.
NONLINEAR_THD_EXCESS = 0.03
NONLINEAR_THD_RATIO = 2.0
#: Circle fit and oscillator fit disagree when they differ by more than this many
#: combined standard errors AND by more than a relative floor (the circle fit
#: ignores the estimator's leakage and uses fewer points: a cross-check only).
METHODS_DISAGREE_SIGMAS = 4.0
METHODS_DISAGREE_F0_REL = 0.002
METHODS_DISAGREE_Q_REL = 0.05


#: The accuracy the tool promises on a clean take (DESIGN.md §4, issue 11): a fit
#: whose 2-sigma interval is wider than this says so (imprecise).
ACCURACY_F0_REL = 0.001
ACCURACY_Q_REL = 0.03


@dataclass(frozen=True, slots=True)
class Flag:
    code: str
    severity: str
    message: str

    def __post_init__(self) -> None:
        if self.severity not in SEVERITIES:
            raise ValueError(f"severity must be one of {list(SEVERITIES)}, got {self.severity!r}")

    def to_dict(self) -> dict[str, str]:
        return asdict(self)


def check_f0_mismatch(fit: FitResult, prediction: Prediction,
                      tolerance: float = F0_TOLERANCE) -> list[Flag]:
    rel = fit.f0_hz / prediction.f0_hz - 1
    if abs(rel) <= tolerance:
        return []
    return [Flag("f0-mismatch", "warning",
                 f"measured f0 {fit.f0_hz:.2f} Hz is {100 * rel:+.1f} % from the predicted "
                 f"{prediction.f0_hz:.2f} Hz (tolerance {100 * tolerance:.1f} %)")]


def check_end_correction(derived: Derived, plausible: tuple[float, float]) -> list[Flag]:
    r = derived.end_correction_over_radius
    if plausible[0] <= r <= plausible[1]:
        return []
    return [Flag("end-correction-implausible", "warning",
                 f"measured end correction is {r:.2f} neck radii "
                 f"({1000 * derived.end_correction_m:.1f} mm); plausible is "
                 f"{plausible[0]:g} to {plausible[1]:g} radii: check the neck length, "
                 "diameter and volume in the object file")]


def check_fit_quality(fit: FitResult) -> list[Flag]:
    reasons = []
    if fit.reduced_chi2 > POOR_FIT_REDUCED_CHI2:
        reasons.append(f"reduced chi-square {fit.reduced_chi2:.1f} > {POOR_FIT_REDUCED_CHI2:g} "
                       "(residuals larger than the noise: the model does not describe the data)")
    if fit.f0_stderr_hz > POOR_FIT_F0_REL_STDERR * fit.f0_hz:
        reasons.append(f"f0 standard error {fit.f0_stderr_hz:.3g} Hz is over "
                       f"{100 * POOR_FIT_F0_REL_STDERR:g} % of f0")
    if fit.q_stderr > POOR_FIT_Q_REL_STDERR * fit.q:
        reasons.append(f"Q standard error {fit.q_stderr:.3g} is over "
                       f"{100 * POOR_FIT_Q_REL_STDERR:g} % of Q")
    if not reasons:
        return []
    return [Flag("poor-fit", "warning", "; ".join(reasons))]


def check_clipping(reports: list[ClipReport], role: dict[int, str]) -> list[Flag]:
    out = []
    for r in reports:
        if r.clipped:
            out.append(Flag("clipping", "warning",
                            f"channel {r.channel} ({role.get(r.channel, '?')}) has {r.runs} "
                            f"clipped run(s), {r.clipped_samples} samples at full scale "
                            f"(peak {r.peak_dbfs:.2f} dBFS): lower the input gain or the drive"))
    return out


def check_in_band(fit: FitResult, band_hz: tuple[float, float]) -> list[Flag]:
    # log-symmetric around f0, so that a low Q does not reach below 0 Hz
    r = 1 + OUT_OF_BAND_HALF_WIDTHS / (2 * fit.q)
    lo, hi = fit.f0_hz / r, fit.f0_hz * r
    if lo >= band_hz[0] and hi <= band_hz[1]:
        return []
    return [Flag("out-of-band", "warning",
                 f"the resonance ({lo:.1f} to {hi:.1f} Hz, {OUT_OF_BAND_HALF_WIDTHS:g} half-"
                 f"widths each side of f0) is not well inside the excited band "
                 f"{band_hz[0]:.1f} to {band_hz[1]:.1f} Hz: widen the sweep or the excitation")]


def check_band_edge(fit: FitResult, band_hz: tuple[float, float]) -> list[Flag]:
    """A fit that sits on the edge of the excited band and does not describe the
    data: the resonance is most likely outside the band (an error: do not use it)."""
    if not (math.isfinite(band_hz[0]) and math.isfinite(fit.f0_hz)):
        return []
    half = fit.f0_hz / (2 * fit.q)
    at_edge = (fit.f0_hz - BAND_EDGE_HALF_WIDTHS * half <= band_hz[0]
               or fit.f0_hz + BAND_EDGE_HALF_WIDTHS * half >= band_hz[1])
    if not (at_edge and fit.reduced_chi2 > POOR_FIT_REDUCED_CHI2):
        return []
    return [Flag("near-band-edge", "error",
                 f"the fitted resonance (f0 {fit.f0_hz:.1f} Hz, Q {fit.q:.2f}) sits on the edge "
                 f"of the excited band {band_hz[0]:.1f} to {band_hz[1]:.1f} Hz and does not fit "
                 "the data: the resonance is probably outside the band; extend the sweep")]


def check_low_q(fit: FitResult) -> list[Flag]:
    if fit.q >= LOW_Q:
        return []
    return [Flag("low-q", "info",
                 f"Q {fit.q:.2f} is below {LOW_Q:g}, the lowest the self-test validates; the "
                 "errors there rest on the chi-square scaling (see docs/quality.md)")]


def check_window(tf: TransferFunction, fit: FitResult) -> list[Flag]:
    if tf.window is None:
        return []
    tau = fit.q / (math.pi * fit.f0_hz)
    n_tau = tf.window.length_s / tau
    if n_tau >= MIN_WINDOW_TIME_CONSTANTS:
        return []
    return [Flag("window-too-short", "warning",
                 f"the response window ({1000 * tf.window.length_s:.0f} ms) holds only "
                 f"{n_tau:.1f} ringing time constants Q/(pi f0) = {1000 * tau:.0f} ms; "
                 f"Q reads low below {MIN_WINDOW_TIME_CONSTANTS:g}: record a longer tail")]


def check_polarity(fit: FitResult) -> list[Flag]:
    if not fit.polarity_inverted:
        return []
    return [Flag("polarity-inverted", "info",
                 "the inside channel's polarity is inverted relative to the outside one "
                 "(wiring or microphone polarity); the gain is reported as a magnitude")]


def check_weighting(fit: FitResult) -> list[Flag]:
    if fit.weighting == "noise-estimate":
        return []
    return [Flag("no-noise-estimate", "info",
                 "the noise per bin is unknown (an imported transfer function, or no "
                 "noise-only stretch after the ringing: record a longer silent tail), so "
                 "the fit used equal weights and its errors come from the residuals")]


def check_signal_quality(quality: dict[str, Any], has_coherence: bool) -> list[Flag]:
    out = []
    snr = quality.get("snr_db_in_band")
    if snr is not None and snr < LOW_SNR_DB:
        out.append(Flag("low-snr", "warning",
                        f"median SNR of H in the fit band is {snr:.1f} dB (< {LOW_SNR_DB:g} dB): "
                        "raise the drive level, average longer or lower the noise"))
    coh = quality.get("coherence_min_in_band")
    if has_coherence and coh is not None and coh < LOW_COHERENCE:
        out.append(Flag("low-coherence", "warning",
                        f"coherence falls to {coh:.2f} in the fit band (< {LOW_COHERENCE:g}): "
                        "noise or other sources at one microphone; record longer or louder"))
    off = quality.get("coherence_min_off_peak")
    if has_coherence and off is not None and off < UNDERSTATED_ERRORS_COHERENCE:
        out.append(Flag("errors-understated", "info",
                        f"coherence falls to {off:.2f} in the fit band away from the peak "
                        f"(< {UNDERSTATED_ERRORS_COHERENCE:g}): the standard errors are then "
                        "too small, by about 1.5x, and by 2 to 4x where the coherence is below "
                        f"{LOW_COHERENCE:g} (noise at the microphones biases the cross-spectral "
                        "estimate); read them as lower bounds, or record longer or louder"))
    return out


def check_nonlinear_drive(quality: dict[str, Any]) -> list[Flag]:
    ti, to = quality.get("thd_inside_at_f0"), quality.get("thd_outside_at_f0")
    if ti is None or to is None:
        return []
    if ti - to > NONLINEAR_THD_EXCESS and ti > NONLINEAR_THD_RATIO * to:
        return [Flag("nonlinear-drive", "warning",
                     f"THD inside the cavity at f0 is {100 * ti:.1f} % against {100 * to:.1f} % "
                     "outside: the neck flow is nonlinear at this level, so the fitted Q "
                     "depends on level; measure again 10 dB lower")]
    return []


def check_methods_agree(fit: FitResult, circle: dict[str, float]) -> list[Flag]:
    df = circle["f0_hz"] - fit.f0_hz
    dq = circle["q"] - fit.q
    sf = math.hypot(fit.f0_stderr_hz, circle["f0_stderr_hz"])
    sq = math.hypot(fit.q_stderr, circle["q_stderr"])
    k = METHODS_DISAGREE_SIGMAS
    f_off = abs(df) > k * sf and abs(df) > METHODS_DISAGREE_F0_REL * fit.f0_hz
    q_off = abs(dq) > k * sq and abs(dq) > METHODS_DISAGREE_Q_REL * fit.q
    if not (f_off or q_off):
        return []
    return [Flag("methods-disagree", "warning",
                 f"circle fit gives f0 {circle['f0_hz']:.3f} Hz, Q {circle['q']:.2f} against "
                 f"{fit.f0_hz:.3f} Hz, {fit.q:.2f} from the oscillator fit (more than {k:g} "
                 "combined standard errors and "
                 f"{100 * (METHODS_DISAGREE_F0_REL if f_off else METHODS_DISAGREE_Q_REL):g} % "
                 "apart): the response is not a single clean mode")]


def check_multiple_peaks(fit: FitResult, peaks: list[tuple[float, float]]) -> list[Flag]:
    if len(peaks) < 2:
        return []
    nearest = min(peaks, key=lambda p: abs(p[0] - fit.f0_hz))
    others = [p for p in peaks if p is not nearest]
    where = ", ".join(f"{p[0]:.1f} Hz" for p in others[:3])
    return [Flag("multiple-peaks", "warning",
                 f"{len(others)} other resonance peak(s) in the fit band ({where}); if they "
                 f"are real modes, fit them together (--modes {min(6, 1 + len(others))})")]


def check_drive(drive: dict[str, Any]) -> list[Flag]:
    """Nonlinear neck flow from the calibrated drive level (physics.nonlinear)."""
    if not drive.get("nonlinear"):
        return []
    return [Flag("nonlinear-drive", "warning",
                 f"at {drive['cavity_spl_db']:.1f} dB SPL in the cavity the air in the neck "
                 f"moves {1000 * drive['displacement_m']:.2f} mm, "
                 f"{drive['displacement_over_diameter']:.2f} of the neck diameter: the flow "
                 "is nonlinear, so the fitted Q depends on the level; measure 10 dB lower")]


#: A measured Q further than this many standard errors outside the predicted Q
#: range raises q-mismatch.
Q_MISMATCH_SIGMAS = 2.0
#: Geometry far outside anything a resonator has (geometry-implausible): usually a
#: unit typed wrong in the object file ("24 Mm" for "24 mm").
PLAUSIBLE_F0_HZ = (1.0, 50e3)
PLAUSIBLE_NECK_LENGTH_M = 10.0


def q_interval(prediction: Prediction, uncorrected_outside_mic: bool = False
               ) -> tuple[float, float]:
    """The predicted Q interval a measurement is compared with: the prediction's
    range (the viscous end term over 0.5a to 2a, physics.losses), widened to the
    Q without radiation damping when the outside microphone's radiation is not
    corrected (that microphone hears the mouth's radiation, so the measured Q
    leaves out the radiation term; physics.radiation)."""
    vals = [v for v in prediction.q_predicted_range if math.isfinite(v)]
    if not vals:
        vals = [prediction.q_predicted]
    if uncorrected_outside_mic and math.isfinite(prediction.q_without_radiation):
        vals.append(prediction.q_without_radiation)
    return min(vals), max(vals)


def check_q_mismatch(fit: FitResult, prediction: Prediction,
                     uncorrected_outside_mic: bool = False) -> list[Flag]:
    """q-mismatch: the measured Q lies more than Q_MISMATCH_SIGMAS standard errors
    outside the predicted Q interval (q_interval). The tolerance is the
    prediction's own range, so an object whose loss model is uncertain (a wide
    range) is judged loosely; below it means extra losses (a leak, a crack, a
    rough or lined neck, a soft wall; severity info), above it a wrong dimension
    or end (warning)."""
    lo, hi = q_interval(prediction, uncorrected_outside_mic)
    if not (math.isfinite(lo) and math.isfinite(fit.q)):
        return []
    s = fit.q_stderr if math.isfinite(fit.q_stderr) else 0.0
    k = Q_MISMATCH_SIGMAS
    rng = f"{lo:.3g} to {hi:.3g} (best {prediction.q_predicted:.3g})"
    if fit.q + k * s < lo:
        # info: the loss model leaves out losses that real objects have (wall
        # roughness and give, joints), so a Q below the range is common and tells
        # more than it warns; a Q above it has no such explanation
        return [Flag("q-mismatch", "info",
                     f"measured Q {fit.q:.3g} is below the predicted {rng}: extra losses "
                     "(a leak, a crack, a rough or lined neck, a soft wall) or a wrong "
                     "dimension")]
    if fit.q - k * s > hi:
        return [Flag("q-mismatch", "warning",
                     f"measured Q {fit.q:.3g} is above the predicted {rng}: check the neck "
                     "diameter and length and the end conditions in the object file")]
    return []


def check_geometry(obj: Any, prediction: Prediction) -> list[Flag]:
    """geometry-implausible: a predicted f0 below 1 Hz or above 50 kHz, or a neck
    longer than 10 m, is far outside anything built as a resonator; usually a unit
    typed wrong in the object file."""
    out: list[str] = []
    lo, hi = PLAUSIBLE_F0_HZ
    f0 = prediction.f0_hz
    if math.isfinite(f0) and not (lo <= f0 <= hi):
        out.append(f"predicted f0 {f0:.3g} Hz is outside {lo:g} Hz to {hi / 1e3:g} kHz")
    neck = getattr(obj, "neck", None)
    length = getattr(neck, "length_m", None)
    if length is not None and length > PLAUSIBLE_NECK_LENGTH_M:
        out.append(f"neck length {length:.3g} m is over {PLAUSIBLE_NECK_LENGTH_M:g} m")
    if not out:
        return []
    return [Flag("geometry-implausible", "warning",
                 "; ".join(out) + ": check the units in the object file (mm, not Mm; mL, "
                 "not ML)")]


def check_precision(fit: FitResult) -> list[Flag]:
    """The data cannot support the promised accuracy: the 2-sigma interval of f0
    or Q is wider than ``ACCURACY_F0_REL`` / ``ACCURACY_Q_REL`` of the value."""
    rf = 2 * fit.f0_stderr_hz / fit.f0_hz if fit.f0_hz > 0 else math.inf
    rq = 2 * fit.q_stderr / fit.q if fit.q > 0 else math.inf
    if not (rf > ACCURACY_F0_REL or rq > ACCURACY_Q_REL):
        return []
    return [Flag("imprecise", "warning",
                 f"the data hold f0 to {100 * rf:.2g} % and Q to {100 * rq:.2g} % (2 sigma), "
                 f"wider than the {100 * ACCURACY_F0_REL:g} % and {100 * ACCURACY_Q_REL:g} % "
                 "a clean take gives: record longer or louder (or more taps); the errors "
                 "are honest, the numbers less precise")]


def check_clock(clock: ClockEstimate | None) -> list[Flag]:
    """Player and recorder clocks apart by more than clock.CLOCK_MISMATCH_PPM:
    corrected (warning), or evident but too uncertain to correct (info)."""
    if clock is None or not (clock.corrected or clock.evident):
        return []
    way = "fast" if clock.ppm > 0 else "slow"
    if clock.corrected:
        return [Flag("clock-mismatch", "warning",
                     f"the recorder's clock runs {abs(clock.ppm):.0f} ± {clock.stderr_ppm:.0f} ppm "
                     f"{way} against the player's (the recorded sweep is stretched against the "
                     "sweep file): corrected, taking the player's clock as the right one (f0 "
                     f"would read {abs(clock.ppm) / 1e4:.3f} % {'low' if clock.ppm > 0 else 'high'}"
                     "); play and record on one interface to avoid it")]
    return [Flag("clock-mismatch", "info",
                 f"the recorder's clock may run {abs(clock.ppm):.0f} ± {clock.stderr_ppm:.0f} ppm "
                 f"{way} against the player's; too uncertain to correct (a longer or wider "
                 "sweep measures it better): f0 may be off by that fraction, which its "
                 "standard error includes")]
