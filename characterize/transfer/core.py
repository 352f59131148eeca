"""The transfer function H(f) = P_inside / P_outside both estimators return
(:class:`TransferFunction`, with its per-bin noise model, the fit weights), the
impulse-response window of the sweep path, and the rough peak search both
paths and the fits use for start values and windows."""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from ..clock import ClockEstimate
from ..errors import FitError


@dataclass(frozen=True)
class WindowInfo:
    """The impulse-response window used on both channels."""

    start_s: float  # relative to the direct sound's peak (negative: before it)
    length_s: float
    taper_in_s: float
    taper_out_s: float
    time_constants: float  # window length over the estimated Q/(pi f0)
    reflection_s: float | None = None  # first strong reflection (one-microphone path)

    def to_dict(self) -> dict[str, float | None]:
        return {"start_s": self.start_s, "length_s": self.length_s,
                "taper_in_s": self.taper_in_s, "taper_out_s": self.taper_out_s,
                "time_constants": self.time_constants, "reflection_s": self.reflection_s}


@dataclass(frozen=True)
class TransferFunction:
    """H(f) on a frequency grid, with what is needed for its per-bin noise.

    The complex noise of bin k has variance
    ``(noise_a[k] + |H[k]|**2 * noise_b[k])`` (E|n|^2): inside-channel noise and
    outside-channel noise carried through the ratio. :meth:`sigma` evaluates it
    for any |H| (the fit uses its own model, which is less noisy than the data).
    """

    freqs_hz: NDArray[np.float64]
    h: NDArray[np.complex128]
    noise_a: NDArray[np.float64]
    noise_b: NDArray[np.float64]
    excited_band_hz: tuple[float, float]
    method: str
    reference_db: NDArray[np.float64]  # outside-channel level per bin (dB, arbitrary ref)
    coherence: NDArray[np.float64] | None = None
    window: WindowInfo | None = None
    averages: int | None = None
    impulse_t_s: NDArray[np.float64] | None = None
    impulse_inside: NDArray[np.float64] | None = None
    impulse_outside: NDArray[np.float64] | None = None
    #: Spectral smoothing the estimator applies to the true H (frequency offsets
    #: in Hz and weights summing to 1), or None. The fit applies it to the model.
    kernel: tuple[NDArray[np.float64], NDArray[np.float64]] | None = None
    #: How the kernel acts: "linear" (E[H1] = H * K) or "h2" (E[H2] = (|H|^2 * K)/(H^* * K)).
    kernel_form: str = "linear"
    #: Total harmonic distortion of each channel against the excitation frequency
    #: (sweep path only; orders 2..HARMONIC_ORDERS_THD), on ``freqs_hz``.
    thd_inside: NDArray[np.float64] | None = None
    thd_outside: NDArray[np.float64] | None = None
    #: Player/recorder clock mismatch read off the sweep (characterize.clock), or None.
    clock: ClockEstimate | None = None

    def sigma(self, h_abs: NDArray[np.float64] | None = None,
              idx: NDArray[np.intp] | None = None) -> NDArray[np.float64]:
        """Per-bin standard deviation of the complex noise (sqrt of E|n|^2), at
        bins ``idx`` (default all), for |H| = ``h_abs`` (default the data's)."""
        sel = slice(None) if idx is None else idx
        a = np.abs(self.h[sel]) if h_abs is None else np.asarray(h_abs)
        return np.sqrt(self.noise_a[sel] + a**2 * self.noise_b[sel])

    @property
    def resolution_hz(self) -> float:
        """Median frequency step (Hz); uniform grids except for imported CSV."""
        return float(np.median(np.diff(self.freqs_hz)))


#: Bins below this coherence are left out of the peak search (H2 and H1 blow up or
#: sink where the inside channel is mostly noise).
PEAK_SEARCH_MIN_COHERENCE = 0.5


#: A resonance peak must stand this factor (3 dB) above the median |H| of the band.
PEAK_MIN_PROMINENCE = 10 ** (3 / 20)


def peak_search_values(tf: TransferFunction) -> NDArray[np.complex128]:
    """H with the bins unfit for a peak search set to NaN: low coherence, or a
    noise estimate larger than half of |H| (room notches in the reference)."""
    h = tf.h
    if tf.coherence is not None:
        h = np.where(tf.coherence >= PEAK_SEARCH_MIN_COHERENCE, h, np.nan)
    with np.errstate(invalid="ignore"):
        sig = tf.sigma()
        noisy = np.isfinite(sig) & (sig > 0.5 * np.abs(tf.h))
    return np.where(noisy, np.nan, h)


def estimate_peak(freqs_hz: NDArray[np.float64], h: NDArray[np.complexfloating],
                  band_hz: tuple[float, float]) -> tuple[float, float]:
    """Rough f0 and Q from |H|: the largest peak inside ``band_hz`` and its
    half-power width (interpolated). Used for start values and windows only.

    Raises :class:`FitError` when no peak stands out of the band edges.
    """
    f = freqs_hz
    sel = np.flatnonzero((f >= band_hz[0]) & (f <= band_hz[1]) & np.isfinite(h))
    if sel.size < 5:
        raise FitError("too few frequency points in the excited band to find a resonance")
    mag = np.abs(h[sel])
    k = max(1, min(9, sel.size // 200))
    if k > 1:
        mag = np.convolve(mag, np.ones(k) / k, mode="same")
    i = int(np.argmax(mag))
    peak = mag[i]
    if not peak > PEAK_MIN_PROMINENCE * float(np.median(mag)):
        raise FitError(f"no resonance: |H| has no peak standing "
                       f"{20 * math.log10(PEAK_MIN_PROMINENCE):.0f} dB above its median "
                       f"between {f[sel[0]]:.1f} and {f[sel[-1]]:.1f} Hz")
    if i == 0 or i == mag.size - 1:
        raise FitError("no resonance peak inside the excited band (the largest |H| is at a "
                       f"band edge, {f[sel[i]]:.1f} Hz)")
    half = peak / math.sqrt(2)
    lo = i
    while lo > 0 and mag[lo] > half:
        lo -= 1
    hi = i
    while hi < mag.size - 1 and mag[hi] > half:
        hi += 1

    def cross(j0: int, j1: int) -> float:
        m0, m1 = mag[j0], mag[j1]
        if m1 == m0:
            return float(f[sel[j0]])
        return float(f[sel[j0]] + (half - m0) * (f[sel[j1]] - f[sel[j0]]) / (m1 - m0))

    f_lo = cross(lo, lo + 1) if mag[lo] <= half else float(f[sel[0]])
    f_hi = cross(hi - 1, hi) if mag[hi] <= half else float(f[sel[-1]])
    # parabolic interpolation of the peak on the (smoothed) magnitude
    f0 = float(f[sel[i]])
    y0, y1, y2 = mag[i - 1], mag[i], mag[i + 1]
    den = y0 - 2 * y1 + y2
    if den < 0:
        f0 += 0.5 * (y0 - y2) / den * float(f[sel[i + 1]] - f[sel[i]])
    width = max(f_hi - f_lo, float(f[1] - f[0]))
    q = float(np.clip(f0 / width, 0.5, 1e4))
    return f0, q
