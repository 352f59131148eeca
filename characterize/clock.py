r"""Player/recorder clock mismatch, read off a deconvolved sweep response.

When the sweep is played by one device and recorded by another, their sample
clocks differ by some parts per million. A recorder whose clock runs fast by a
fraction eps records the sweep stretched: read at the nominal rate, it passes
each frequency f later than the reference by

.. math::

    \tau(f) = \tau_0 + \varepsilon \frac{T}{R}\left(\ln\frac{f}{f_1} + 1\right),
    \qquad R = \ln(f_2/f_1),

for a sweep of duration T from f1 to f2 (the exponential sweep's time-frequency
law, Farina 2000), and every frequency it records reads low by the fraction eps
(the resonance's too). After deconvolution by the reference sweep the direct
sound is therefore dispersed, with the phase
:math:`-2\pi\varepsilon (T/R) f \ln(f/f_1)` on top of a delay. The estimate is the
eps whose opposite phase makes the direct sound most compact: the peak of the
matched filter's output, i.e. the reference sweep stretched until it fits the
recording best (the wideband ambiguity function's peak in scale; Kelly & Wishner,
"Matched-filter theory for high-velocity, accelerating targets", IEEE Trans.
Mil. Electron. 9, 1965). The known phase of the sweep path's band limit is
removed first (left in, it reads as about -100 ppm on a clean recording).

Only the ratio of the two clocks is measurable; the correction takes the
player's clock (the sweep file's rate) as the true one.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

#: A mismatch larger than this (parts per million) is corrected and flagged
#: (clock-mismatch): crystal clocks of audio devices are usually within a few
#: tens of ppm of each other; 100 ppm moves f0 by 0.01 %, a tenth of the accuracy
#: bar, but many standard errors on a clean recording.
CLOCK_MISMATCH_PPM = 100.0
#: Largest mismatch searched (ppm).
CLOCK_MAX_PPM = 5000.0
#: Standard error assumed for the estimate (ppm), from the worst of the seeded
#: families in tests/test_clock.py (estimates within 20 ppm of the truth).
CLOCK_STDERR_PPM = 10.0
#: ... or this fraction of the metric's width, if larger.
CLOCK_STDERR_WIDTHS = 0.3
#: A mismatch is corrected only when it is this many standard errors from zero
#: (between two and this many, it is reported and added to f0's error).
CLOCK_MIN_SIGMAS = 4.0
#: The search starts this factor above the band's lower edge: the loudspeaker's
#: high-pass adds group delay at the low end, which reads as a mismatch (a
#: 40 Hz high-pass read -330 ppm on a sweep from 37 Hz with a factor 2).
LOW_END_FACTOR = 4.0
#: An estimate less sharp than this (ppm) says nothing: reported only (short
#: sweeps over narrow low bands, where the room's reflections overlap the
#: dispersed direct sound, gave spurious estimates of thousands of ppm).
CLOCK_MAX_STDERR_PPM = 250.0
#: Response stretch read (s): the direct sound and its dispersion.
CLOCK_WINDOW_S = 0.05


@dataclass(frozen=True)
class ClockEstimate:
    """Recorder clock fast against the player's by ``ppm`` (negative: slow)."""

    ppm: float
    stderr_ppm: float
    corrected: bool = False

    def to_dict(self) -> dict[str, float | bool]:
        return {"mismatch_ppm": self.ppm, "stderr_ppm": self.stderr_ppm,
                "corrected": self.corrected}

    @property
    def informative(self) -> bool:
        """Sharp enough to say anything (a standard error within
        CLOCK_MAX_STDERR_PPM, an estimate within the range searched)."""
        return bool(self.stderr_ppm <= CLOCK_MAX_STDERR_PPM and abs(self.ppm) < CLOCK_MAX_PPM)

    @property
    def evident(self) -> bool:
        """Above the threshold and two standard errors: some mismatch is likely,
        though perhaps too uncertain to correct."""
        return bool(self.informative and abs(self.ppm) > CLOCK_MISMATCH_PPM
                    and abs(self.ppm) > 2 * self.stderr_ppm)

    @property
    def significant(self) -> bool:
        return bool(self.informative and abs(self.ppm) > CLOCK_MISMATCH_PPM
                    and abs(self.ppm) > CLOCK_MIN_SIGMAS * self.stderr_ppm)


def _sharpness(spec: NDArray[np.complex128], f: NDArray[np.float64], f1: float,
               scale: float, eps: float, n_out: int) -> float:
    """Peak power of the band's (complex) response after undoing the
    dispersion of a clock mismatch ``eps``."""
    phase = 2 * np.pi * eps * scale * f * np.log(f / f1)
    ir = np.fft.ifft(spec * np.exp(1j * phase), n_out)
    return float(np.max(np.abs(ir) ** 2))


def _width(f: NDArray[np.float64], f1: float, scale: float) -> float:
    """The mismatch whose dispersion bends the phase by one radian across the
    band, beyond what a delay (a straight line in f) absorbs."""
    g = f * np.log(f / f1)
    line = np.polyval(np.polyfit(f, g, 1), f)
    return 1.0 / (2 * np.pi * scale * max(float(np.ptp(g - line)), 1e-300))


def _refine(vals: NDArray[np.float64], grid: NDArray[np.float64], step: float) -> float:
    i = int(np.argmax(vals))
    best = float(grid[i])
    if 0 < i < grid.size - 1:
        y0, y1, y2 = vals[i - 1], vals[i], vals[i + 1]
        den = y0 - 2 * y1 + y2
        if den < 0:
            best += 0.5 * (y0 - y2) / den * step
    return best


def estimate_clock(response: NDArray[np.floating], rate_hz: float, start_hz: float,
                   duration_s: float, sweep_rate: float, band_hz: tuple[float, float],
                   band_limit: NDArray[np.complex128] | None = None,
                   exclude_hz: tuple[float, float] | None = None,
                   max_ppm: float = CLOCK_MAX_PPM) -> ClockEstimate | None:
    """The recorder's clock mismatch from ``response`` (from just before the
    direct sound, deconvolved by the reference sweep of ``start_hz``,
    ``duration_s`` and ``sweep_rate`` = ln(f2/f1)), over the usable ``band_hz``;
    ``band_limit`` is the band limit's response on the rfft grid of
    ``response`` (its phase is taken out); ``exclude_hz`` is left out (the
    resonance, on the one-microphone path, whose ringing would dominate the
    peak). None when the band is too narrow.

    The standard error is 0.3 of the metric's width (one radian): on the
    seeded families tried the estimates were within 0.9 of a
    width, the larger errors on short sweeps over narrow bands, where the room's
    reflections overlap the broad peak.

    Coarse to fine: the band is widened an octave at a time from twice its lower
    edge, each step searching around the previous best on a grid a quarter of the
    metric's width (one radian of the dispersion's phase across the band,
    beyond a delay).
    """
    lo, hi = LOW_END_FACTOR * band_hz[0], band_hz[1]
    if not hi > 2 * lo:
        return None
    x = np.array(response, dtype=np.float64)
    # a half-Hann taper over the second half: a ringing resonance cut off by the
    # window would leak across the whole band
    m = x.size // 2
    x[x.size - m:] *= 0.5 * (1 + np.cos(np.pi * np.arange(1, m + 1) / m))
    spec_all = np.fft.rfft(x)
    f_all = np.fft.rfftfreq(x.size, 1 / rate_hz)
    if band_limit is not None:
        ok = np.abs(band_limit) > 0.1
        spec_all = np.where(ok, spec_all / np.where(ok, band_limit, 1.0), 0.0)
    if exclude_hz is not None:
        spec_all = np.where((f_all >= exclude_hz[0]) & (f_all <= exclude_hz[1]), 0.0, spec_all)
    scale = duration_s / sweep_rate
    best, span = 0.0, max_ppm * 1e-6
    top = 4 * lo
    while True:
        top = min(top, hi)
        sel = (f_all >= lo) & (f_all <= top)
        spec, f = spec_all[sel], np.asarray(f_all[sel], dtype=np.float64)
        if f.size < 8:
            return None
        n_out = int(2 ** math.ceil(math.log2(4 * f.size)))
        width = _width(f, start_hz, scale)
        step = min(width / 4, span / 8)
        grid = best + np.arange(-span, span + step / 2, step)
        vals = np.array([_sharpness(spec, f, start_hz, scale, e, n_out) for e in grid])
        best = _refine(vals, grid, step)
        if top >= hi:
            break
        span = max(2 * width, 4 * step)
        top *= 2
    # a last, finer pass on the whole band
    step = width / 8
    grid = best + np.arange(-4 * step, 4.5 * step, step)
    vals = np.array([_sharpness(spec, f, start_hz, scale, e, n_out) for e in grid])
    best = _refine(vals, grid, step)
    return ClockEstimate(1e6 * best, max(CLOCK_STDERR_PPM, 1e6 * width * CLOCK_STDERR_WIDTHS))
