"""Small signal-processing pieces in plain numpy, so the main fit path never
imports scipy.signal (which costs more start-up than the whole analysis of a
10 s take). Each one gives what its scipy.signal namesake gives; the tests
check them against scipy.signal (tests/test_dsp.py).
"""

from __future__ import annotations

import math

import numpy as np
from numpy.typing import NDArray


def butter_analog_zpk(order: int, wc_rad_s: float, btype: str
                      ) -> tuple[NDArray[np.complex128], NDArray[np.complex128], float]:
    """Zeros, poles and gain of an analog Butterworth low- or high-pass filter
    with its -3 dB point at ``wc_rad_s`` (S. Butterworth, "On the theory of filter
    amplifiers", Wireless Engineer 7, 1930): the prototype's poles lie evenly on
    the left half of the unit circle, p_k = exp(j pi (2k + n - 1) / (2n)),
    k = 1..n; the high-pass maps s -> wc/s (n zeros at the origin, poles wc/p_k).
    Same as ``scipy.signal.butter(order, wc, btype, analog=True, output="zpk")``."""
    if order < 1:
        raise ValueError(f"order must be >= 1, got {order}")
    k = np.arange(1, order + 1)
    proto = np.exp(1j * math.pi * (2 * k + order - 1) / (2 * order))
    if btype == "lowpass":
        return np.zeros(0, dtype=np.complex128), wc_rad_s * proto, float(wc_rad_s**order)
    if btype == "highpass":
        # gain: prod(-p) of the prototype is 1 (its polynomial's constant term)
        return np.zeros(order, dtype=np.complex128), wc_rad_s / proto, 1.0
    raise ValueError(f"btype must be 'lowpass' or 'highpass', got {btype!r}")


def freqs_zpk(z: NDArray[np.complex128], p: NDArray[np.complex128], k: float,
              w_rad_s: NDArray[np.float64]) -> NDArray[np.complex128]:
    """Frequency response k prod(jw - z) / prod(jw - p) of an analog filter at the
    angular frequencies ``w_rad_s`` (as ``scipy.signal.freqs_zpk(...)[1]``)."""
    s = 1j * np.asarray(w_rad_s, dtype=np.float64)
    h = np.full(s.shape, complex(k), dtype=np.complex128)
    for zi in z:
        h = h * (s - zi)
    for pi in p:
        h = h / (s - pi)
    return h


def _local_maxima(x: NDArray[np.float64]) -> NDArray[np.intp]:
    """Indices of local maxima; a flat top counts once, at its middle (rounded
    down), as in scipy.signal.find_peaks."""
    n = x.size
    if n < 3:
        return np.zeros(0, dtype=np.intp)
    d = np.diff(x)
    # positions where the value changes; a peak is a rise followed (after any
    # flat run) by a fall
    change = np.flatnonzero(d != 0)
    if change.size < 2:
        return np.zeros(0, dtype=np.intp)
    rise = d[change] > 0
    peaks = []
    for a, b, ra, rb in zip(change[:-1], change[1:], rise[:-1], rise[1:], strict=True):
        if ra and not rb:
            # rise ends at a+1, flat run a+1..b, fall after b
            peaks.append((a + 1 + b) // 2)
    return np.asarray(peaks, dtype=np.intp)


def _previous_greater(x: NDArray[np.float64]) -> NDArray[np.intp]:
    """For each i, the largest j < i with x[j] > x[i], else -1 (monotonic stack)."""
    out = np.full(x.size, -1, dtype=np.intp)
    stack: list[int] = []
    xs = x.tolist()
    for i, v in enumerate(xs):
        while stack and xs[stack[-1]] <= v:
            stack.pop()
        if stack:
            out[i] = stack[-1]
        stack.append(i)
    return out


class _RangeMin:
    """Minimum over index ranges [a, b] by a sparse table (vectorised queries)."""

    def __init__(self, x: NDArray[np.float64]) -> None:
        self.levels = [np.asarray(x, dtype=np.float64)]
        span = 1
        while 2 * span <= x.size:
            prev = self.levels[-1]
            self.levels.append(np.minimum(prev[:-span], prev[span:]))
            span *= 2

    def query(self, a: NDArray[np.intp], b: NDArray[np.intp]) -> NDArray[np.float64]:
        length = b - a + 1
        lev = np.floor(np.log2(np.maximum(length, 1))).astype(np.intp)
        out = np.empty(a.size)
        for j in np.unique(lev):
            m = lev == j
            tab = self.levels[j]
            out[m] = np.minimum(tab[a[m]], tab[b[m] - (1 << j) + 1])
        return out


def peak_prominences(x: NDArray[np.float64], peaks: NDArray[np.intp]
                     ) -> tuple[NDArray[np.float64], NDArray[np.intp], NDArray[np.intp]]:
    """Prominence of each peak and its left and right bases, as
    ``scipy.signal.peak_prominences``: from the peak, extend left and right until
    a strictly higher sample or the end; the base on each side is the lowest
    sample on the way (the first such, searching outwards); the prominence is
    the peak's height above the higher of the two bases."""
    x = np.asarray(x, dtype=np.float64)
    peaks = np.asarray(peaks, dtype=np.intp)
    if peaks.size == 0:
        e = np.zeros(0, dtype=np.intp)
        return np.zeros(0), e, e
    pg = _previous_greater(x)[peaks]
    ng = (x.size - 1 - _previous_greater(x[::-1]))[::-1][peaks]  # next greater (or n)
    rmq = _RangeMin(x)
    lo = pg + 1
    hi = ng - 1
    left_min = rmq.query(lo, peaks)
    right_min = rmq.query(peaks, hi)
    left_base = np.empty(peaks.size, dtype=np.intp)
    right_base = np.empty(peaks.size, dtype=np.intp)
    for i, (p, a, b) in enumerate(zip(peaks, lo, hi, strict=True)):
        seg = x[a:p + 1]
        # scipy searches outwards and keeps the first strict new minimum
        left_base[i] = p - int(np.argmin(seg[::-1]))
        right_base[i] = p + int(np.argmin(x[p:b + 1]))
    return x[peaks] - np.maximum(left_min, right_min), left_base, right_base


def find_peaks(x: NDArray[np.float64], prominence: float
               ) -> tuple[NDArray[np.intp], NDArray[np.float64]]:
    """Local maxima standing at least ``prominence`` above their surroundings and
    their prominences (``scipy.signal.find_peaks(x, prominence=...)``'s peaks and
    ``props["prominences"]``)."""
    x = np.asarray(x, dtype=np.float64)
    peaks = _local_maxima(x)
    prom, _, _ = peak_prominences(x, peaks)
    keep = prom >= prominence
    return peaks[keep], prom[keep]


def peak_widths(x: NDArray[np.float64], peaks: NDArray[np.intp], rel_height: float
                ) -> NDArray[np.float64]:
    """Width of each peak, in samples, at ``rel_height`` of its prominence below
    its top, with linear interpolation between samples, bounded by the peak's
    bases (``scipy.signal.peak_widths(x, peaks, rel_height)[0]``)."""
    x = np.asarray(x, dtype=np.float64)
    peaks = np.asarray(peaks, dtype=np.intp)
    prom, lb, rb = peak_prominences(x, peaks)
    widths = np.empty(peaks.size)
    for i, p in enumerate(peaks):
        h = x[p] - prom[i] * rel_height
        j = int(p)
        while lb[i] < j and h < x[j]:
            j -= 1
        left = float(j)
        if x[j] < h:
            left += (h - x[j]) / (x[j + 1] - x[j])
        j = int(p)
        while j < rb[i] and h < x[j]:
            j += 1
        right = float(j)
        if x[j] < h:
            right -= (h - x[j]) / (x[j - 1] - x[j])
        widths[i] = right - left
    return widths
