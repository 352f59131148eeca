"""Sweep path: both channels deconvolved by the sweep (Farina 2000), one common
time window on both impulse responses, then the ratio of their spectra. The
room reaches both microphones, so it cancels in the ratio; the window only drops
the harmonic images (which arrive *before* the linear response) and is long
enough for the resonator's ringing to decay. The per-bin noise comes from the
responses' noise-only stretch; long recordings deconvolve in
:mod:`characterize.longfft` buffers and keep only the stretches that are read
(:class:`Impulse`)."""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import replace

import numpy as np
from numpy.typing import NDArray

from ..clock import ClockEstimate
from ..errors import FitError, InputError
from ..excitation import Sweep, SweepParams, band_filter, inverse_spectrum, usable_band
from .core import TransferFunction, WindowInfo, estimate_peak

#: Time before the direct sound's peak kept in the window (s); also the taper-in.
PRE_ONSET_S = 0.004
#: The window holds this many ringing time constants Q/(pi f0) when it can.
WINDOW_TIME_CONSTANTS = 40.0
#: Fewer than this many time constants in the window biases Q (physics sheet §7:
#: Q reads 25.1 instead of 30 at 3 tau, 29.97 at 7 tau).
MIN_WINDOW_TIME_CONSTANTS = 7.0
#: Shortest window considered (s).
MIN_WINDOW_S = 0.1
#: Harmonic orders whose images are kept out of the window.
HARMONIC_ORDERS_EXCLUDED = 8
#: Harmonic orders summed into the THD.
HARMONIC_ORDERS_THD = 5


def _fast_len(n: int) -> int:
    from scipy.fft import next_fast_len

    return int(next_fast_len(int(n), real=True))


def _fast_below(n: int) -> int:
    """The largest 5-smooth length not above ``n`` (fast FFT sizes)."""
    from scipy.fft import next_fast_len

    m = int(n)
    while m > 16:
        if next_fast_len(m, real=True) == m:
            return m
        m -= 1
    return int(n)


def _noise_power(seg: NDArray[np.floating], n_out: int, rate_hz: float,
                 present_until: NDArray[np.float64] | None = None,
                 offset: int = 0, shape: NDArray[np.float64] | None = None
                 ) -> NDArray[np.float64]:
    """Noise power per unit window energy, E|FFT(n * w)|^2 / sum(w^2), of the
    noise-only stretch ``seg``, on an ``n_out``-point rfft grid.

    Averaged Hann periodograms of half-overlapping sub-segments. When
    ``present_until`` is given (for each sub-segment bin, the window sample up
    to which noise at that frequency exists; ``offset`` is where ``seg`` starts
    in the window), a sub-segment counts for a frequency only where it lies
    wholly before that limit; frequencies no sub-segment covers take the value
    of the nearest covered frequency.
    """
    m = int(min(max(256, seg.size // 8), 8192, seg.size))
    m -= m % 2
    w = np.hanning(m)
    f_seg = np.fft.rfftfreq(m, 1 / rate_hz)
    acc = np.zeros(m // 2 + 1)
    count = np.zeros(m // 2 + 1)
    limit = None if present_until is None else np.interp(
        f_seg, np.fft.rfftfreq(n_out, 1 / rate_hz), present_until)
    for s in range(0, seg.size - m + 1, m // 2):
        p = np.abs(np.fft.rfft(seg[s:s + m] * w)) ** 2
        use = np.ones(f_seg.size, bool) if limit is None else (offset + s + m <= limit)
        acc[use] += p[use]
        count[use] += 1
    ok = count > 0
    f_out = np.fft.rfftfreq(n_out, 1 / rate_hz)
    if not np.any(ok):
        return np.full(f_out.size, np.nan)
    g = np.ones(f_seg.size) if shape is None else np.maximum(
        np.interp(f_seg, f_out, shape), 1e-300)
    rel = np.interp(f_seg, f_seg[ok], acc[ok] / count[ok] / g[ok])
    return np.interp(f_out, f_seg, rel * g) / float(np.sum(w**2))


#: The response starts where its envelope first rises above this fraction of
#: its peak (searching back from the peak).
ONSET_THRESHOLD = 1e-4


def _argmax_abs(x: NDArray[np.floating], block: int = 1 << 22) -> int:
    """Index of the largest |x|, block by block (no full-length temporary)."""
    best, where = -1.0, 0
    for a in range(0, x.size, block):
        seg = x[a:a + block]
        i = int(np.argmax(np.abs(seg)))
        v = abs(float(seg[i]))
        if v > best:
            best, where = v, a + i
    return where


def find_onset(ir: NDArray[np.floating], rate_hz: float, max_lookback: int) -> int:
    """Index where a (circular) impulse response starts: search back from its
    peak, at most ``max_lookback`` samples, to where its envelope (a 0.5 ms
    running maximum of |ir|) falls below ``ONSET_THRESHOLD`` of the peak or
    below three times the noise envelope (the median envelope over the first
    half of the look-back stretch, well before the response). The peak alone is not the
    start: band limits and loudspeakers make a causal response rise well before
    its maximum."""
    from scipy.ndimage import maximum_filter1d

    i_peak = _argmax_abs(ir)
    look = int(max(1, min(max_lookback, ir.size // 4)))
    idx = (i_peak - look + np.arange(look + 1)) % ir.size
    env = maximum_filter1d(np.abs(ir[idx].astype(np.float64)), size=max(3, int(5e-4 * rate_hz)),
                           mode="nearest")
    noise = float(np.median(env[: max(1, look // 2)]))
    thr = max(ONSET_THRESHOLD * abs(float(ir[i_peak])), 3.0 * noise)
    below = np.flatnonzero(env < thr)
    if below.size == 0:
        return i_peak - look
    return i_peak - look + int(below[-1])


#: Longest stretch of a harmonic's impulse response read for the THD (s); longer
#: windows than this only refine a diagnostic and would cost memory on long sweeps.
THD_MAX_S = 30.0


def harmonic_stretches(sweep: Sweep, rate_hz: float, onset: int, pre: int,
                       max_length: int) -> list[tuple[int, int, int]]:
    """(order, first sample, length) of each harmonic impulse response read for the
    THD: from ``pre`` before the n-th image (which sits T ln(n)/ln(f2/f1) before the
    onset, Farina 2000) for at most ``max_length`` samples, ``THD_MAX_S``, or what
    the gap to the next image leaves; orders 2..HARMONIC_ORDERS_THD while the gap
    holds at least 4 ``pre``."""
    p = sweep.params
    out = []
    for order in range(2, HARMONIC_ORDERS_THD + 1):
        adv = int(round(p.harmonic_advance_s(order) * rate_hz))
        gap = adv - int(round(p.harmonic_advance_s(order - 1) * rate_hz))
        length = int(min(max_length, gap - 2 * pre, THD_MAX_S * rate_hz))
        if length < 4 * pre:
            break
        out.append((order, onset - adv - pre, length))
    return out


class Impulse:
    """An impulse response on an ``n_fft``-point circular grid: whole, or as the
    stretches kept of it (long recordings keep only what is read)."""

    def __init__(self, n_fft: int, whole: NDArray[np.floating] | None = None) -> None:
        self.n_fft = int(n_fft)
        self.whole = whole
        self.pieces: list[tuple[int, NDArray[np.float32]]] = []

    def keep(self, stretches: list[tuple[int, int]], shift: int = 0) -> None:
        """Keep (first sample, length) stretches of the whole response delayed by
        ``shift`` samples, in single precision, and let the whole go."""
        assert self.whole is not None
        for first, length in stretches:
            a = (first - shift) % self.n_fft
            if a + length <= self.n_fft:
                piece = self.whole[a:a + max(0, length)].astype(np.float32)
            else:
                piece = self.whole[(a + np.arange(length)) % self.n_fft].astype(np.float32)
            self.pieces.append((first % self.n_fft, piece))
        self.whole = None

    def take(self, first: int, length: int) -> NDArray[np.floating]:
        """Samples ``first`` .. ``first + length - 1`` (modulo ``n_fft``): a copy of
        the whole response's (float64), or a view of a kept stretch (float32)."""
        if self.whole is not None:
            return np.asarray(self.whole[(first + np.arange(length)) % self.n_fft],
                              dtype=np.float64)
        for start, arr in self.pieces:
            off = (first - start) % self.n_fft
            if off + length <= arr.size:
                return arr[off:off + length]
        raise AssertionError(f"stretch {first}+{length} of the impulse response was not kept")


def harmonic_distortion(ir: Impulse, onset: int, pre: int, sweep: Sweep,
                        rate_hz: float, freqs_hz: NDArray[np.float64], max_length: int,
                        fundamental: NDArray[np.complexfloating]) -> NDArray[np.float64]:
    """THD against excitation frequency from the harmonic impulse responses.

    After deconvolution of an exponential sweep, the n-th harmonic's response
    sits T ln(n)/ln(f2/f1) before the linear one, and its spectrum at n f is the
    n-th harmonic's amplitude for a drive at f, relative to the drive (the
    harmonic sweeps through n f at the same relative rate as the sweep itself;
    Farina 2000). THD(f) = sqrt(sum_n |H_n(n f)|^2) / |H_1(f)| for n = 2..5,
    NaN where f or its 2nd or 3rd harmonic lies outside the band the band limit
    leaves unattenuated (higher orders beyond it are left out).
    """
    p = sweep.params
    total = np.zeros(freqs_hz.size)
    lo, hi = usable_band(p)  # where the band limit leaves the responses unattenuated
    from scipy import fft as sfft

    for order, first, length in harmonic_stretches(sweep, rate_hz, onset, pre, max_length):
        w = np.ones(length)
        w[:pre] = 0.5 * (1 - np.cos(np.pi * np.arange(pre) / pre))
        taper = max(2, length // 20)
        w[-taper:] = 0.5 * (1 + np.cos(np.pi * (np.arange(taper) + 1) / taper))
        spec = sfft.rfft(ir.take(first, length) * w)
        f_n = np.fft.rfftfreq(length, 1 / rate_hz)
        target = order * freqs_hz
        mag = np.interp(target, f_n, np.abs(spec), right=np.nan)
        mag[(target > hi) | (target < lo)] = np.nan
        if order <= 3:  # the 2nd and 3rd harmonics carry most distortion: no THD without them
            total[target > hi] = np.nan
        total = total + np.where(np.isfinite(mag), mag, 0.0) ** 2
    with np.errstate(divide="ignore", invalid="ignore"):
        thd = np.sqrt(total) / np.abs(fundamental)
    thd[(freqs_hz < lo) | (2 * freqs_hz > hi)] = np.nan
    return thd


#: A later arrival above this fraction of the direct sound (high-passed envelope)
#: is taken as the first strong reflection on the one-microphone path.
REFLECTION_FRACTION = 0.2


#: The one-microphone window ends before the first strong reflection only when it
#: then still holds this many ringing time constants (a shorter window biases Q,
#: physics sheet §7); an earlier reflection stays in the window.
REFLECTION_CUT_TIME_CONSTANTS = 20.0


#: Stretch of a one-microphone response read for the first reflection (s, around the onset).
REFLECTION_SPAN_S = (0.01, 0.25)


def first_reflection(ir: Impulse, onset: int, rate_hz: float, lo_hz: float,
                     hi_hz: float) -> int | None:
    """Samples from the onset to the first strong reflection in a one-microphone
    impulse response, or None. Above the resonance the resonator passes sound
    with little smearing, so arrivals show as separate peaks in the envelope of
    the response high-passed at ``lo_hz``; the first later peak above
    ``REFLECTION_FRACTION`` of the direct one, at least 1 ms after it, counts."""
    from scipy.ndimage import maximum_filter1d
    from scipy.signal import butter, sosfiltfilt

    lo = min(lo_hz, 0.4 * hi_hz)
    if lo >= hi_hz or hi_hz >= rate_hz / 2:
        return None
    before, after = (int(t * rate_hz) for t in REFLECTION_SPAN_S)
    seg = ir.take(onset - before, before + after)
    sos = butter(4, [lo, hi_hz], btype="bandpass", fs=rate_hz, output="sos")
    env = maximum_filter1d(np.abs(sosfiltfilt(sos, seg)), size=max(3, int(2.5e-4 * rate_hz)))
    z = before
    direct = float(np.max(env[z: z + int(0.002 * rate_hz)]))
    # skip the direct sound's own ringing through the band-pass (a few periods of
    # its lowest frequency), then look for a rise: an arrival, not a decaying tail
    gap = z + max(int(0.0015 * rate_hz), int(4 * rate_hz / lo))
    rise = max(2, int(0.001 * rate_hz))
    if direct <= 0 or gap + rise >= env.size:
        return None
    from scipy.ndimage import minimum_filter1d

    before = minimum_filter1d(env, size=rise, origin=(rise - 1) // 2)  # min over the past 1 ms
    cand = np.flatnonzero((env[gap:] > REFLECTION_FRACTION * direct)
                          & (env[gap:] > 2.0 * before[gap - rise: env.size - rise]))
    if cand.size == 0:
        return None
    return int(gap + cand[0] - z)


#: Bins where the outside level is this many dB below its median in the band are
#: left out of the peak search (room notches make |H| spike there).
NOTCH_DEPTH_DB = 20.0


def _mask_notches(f: NDArray[np.floating], h: NDArray[np.complexfloating],
                  out: NDArray[np.complexfloating], band: tuple[float, float]
                  ) -> NDArray[np.complexfloating]:
    sel = (f >= band[0]) & (f <= band[1])
    p = np.abs(out) ** 2
    if not np.any(sel):
        return h
    ref = float(np.median(p[sel]))
    return np.where(p >= ref * 10 ** (-NOTCH_DEPTH_DB / 10), h, np.nan)


def decay_end(seg: NDArray[np.floating], rate_hz: float, noise_from: int, noise_to: int) -> int:
    """Sample at which an impulse response has decayed into its noise: the last
    5 ms block before ``noise_from`` whose rms exceeds three times the median
    block rms between ``noise_from`` and ``noise_to`` (the noise floor there)."""
    b = max(8, int(0.005 * rate_hz))
    nb = min(seg.size, noise_to) // b
    k0 = noise_from // b
    if nb - k0 < 4 or k0 < 1:
        return 0
    rms = np.sqrt(np.mean(seg[: nb * b].reshape(nb, b) ** 2, axis=1))
    floor = float(np.median(rms[k0:nb]))
    above = np.flatnonzero(rms[:k0] > 3 * floor)
    return int((above[-1] + 1) * b) if above.size else 0


#: Deconvolutions on FFT grids longer than this (about three minutes of recording
#: and sweep at 48 kHz) run in a :class:`characterize.longfft.LongSpectrum`:
#: single-precision storage, double-precision arithmetic, a fraction of the memory.
LONG_FFT_POINTS = 1 << 24
#: Longest stretch of impulse response after the onset that is read (s): it holds
#: the window (at most WINDOW_TIME_CONSTANTS ringing time constants) and the
#: noise-only stretch after it for time constants up to about 1 s (Q 150 at
#: 50 Hz); slower decays get a shorter window, flagged when too short.
KEEP_S = 60.0


def _abs_at(values: Callable[[NDArray[np.int64]], NDArray[np.complex128]], n_fft: int,
            rate_hz: float, f: NDArray[np.float64]) -> NDArray[np.float64]:
    """|X| at frequencies ``f``, linearly interpolated between the rfft bins of an
    ``n_fft``-point grid whose values ``values(k)`` gives."""
    x = np.asarray(f, dtype=np.float64) * n_fft / rate_hz
    k0 = np.clip(np.floor(x).astype(np.int64), 0, n_fft // 2 - 1)
    frac = np.clip(x - k0, 0.0, 1.0)
    return np.abs(values(k0)) * (1 - frac) + np.abs(values(k0 + 1)) * frac


def _pre_and_images(p: SweepParams, rate_hz: float) -> tuple[int, int]:
    """(samples kept before the onset, advance of the order-HARMONIC_ORDERS_EXCLUDED
    harmonic image) for a sweep at ``rate_hz``."""
    adv2 = int(p.harmonic_advance_s(2) * rate_hz)
    pre = max(8, min(int(round(PRE_ONSET_S * rate_hz)), adv2 // 2))
    return pre, int(p.harmonic_advance_s(HARMONIC_ORDERS_EXCLUDED) * rate_hz)


def _window_limits(p: SweepParams, rate_hz: float, n: int, n_fft: int,
                   onset: int) -> tuple[int, int, int]:
    """(pre, first sample, longest window) of the impulse-response window: from
    ``pre`` samples before the onset, clear of the order-HARMONIC_ORDERS_EXCLUDED
    image, within the recording and ``KEEP_S``."""
    pre, adv_max = _pre_and_images(p, rate_hz)
    start = onset - pre
    # the response cannot be longer than the recording after the onset, nor reach
    # where the noise deconvolved to negative times (down to minus the sweep's
    # duration) wraps around the grid
    l_max = min(n_fft - adv_max - 2 * pre, n - start, int(KEEP_S * rate_hz),
                n_fft - int(round(p.duration_s * rate_hz)) - start)
    return pre, start, l_max


def _stretches(sweep: Sweep, rate_hz: float, n: int, n_fft: int, onset: int,
               one_mic: bool) -> list[tuple[int, int]]:
    """Every (first sample, length) of an impulse response that
    :func:`sweep_transfer` reads once the onset is known."""
    pre, start, l_max = _window_limits(sweep.params, rate_hz, n, n_fft, onset)
    out = [(start, l_max)]
    out += [(first, length) for _, first, length in
            harmonic_stretches(sweep, rate_hz, onset, pre, l_max)]
    if one_mic:
        before, after = (int(t * rate_hz) for t in REFLECTION_SPAN_S)
        out.append((onset - before, before + after))
    return out


def _deconvolve(inside: NDArray[np.floating], outside: NDArray[np.floating] | None,
                rate_hz: float, sweep: Sweep
                ) -> tuple[int, int, Impulse, Impulse,
                           Callable[[NDArray[np.int64]], NDArray[np.complex128]]]:
    """Both channels deconvolved by the sweep (Farina 2000): (FFT length, onset,
    inside and outside impulse responses, the inverse filter's value at rfft bins).

    The FFT is longer than recording plus sweep, so that the harmonic images fall
    at negative times. Above ``LONG_FFT_POINTS`` it runs in place in single-
    precision buffers (:class:`characterize.longfft.LongSpectrum`) and is only
    as much longer than the recording as the harmonic images and the kept
    stretch need: the noise deconvolved to negative times (down to minus the
    sweep's duration) then wraps around to lags past ``KEEP_S`` after the onset,
    outside everything read (and :func:`_window_limits` ends the window before
    it in any case). Only the stretches that are read are kept.
    """
    p = sweep.params
    n = inside.size
    adv2 = int(p.harmonic_advance_s(2) * rate_hz)
    n_fft = _fast_len(n + sweep.samples.size)
    lo_b, hi_b = usable_band(p)
    if n_fft <= LONG_FFT_POINTS:
        from scipy import fft as sfft

        xinv = inverse_spectrum(sweep, n_fft)
        ir_in = sfft.irfft(sfft.rfft(np.asarray(inside, dtype=np.float64), n_fft) * xinv, n_fft)
        if outside is None:
            # the reference is the excitation itself: the band-limited impulse at the onset
            onset = find_onset(ir_in, rate_hz, max_lookback=adv2 // 2)
            limit = band_filter(np.fft.rfftfreq(n_fft, 1 / rate_hz), lo_b, hi_b)
            ir_out = np.roll(sfft.irfft(limit, n_fft), onset)
        else:
            ir_out = sfft.irfft(sfft.rfft(np.asarray(outside, dtype=np.float64), n_fft) * xinv,
                                n_fft)
            onset = find_onset(ir_out, rate_hz, max_lookback=adv2 // 2)
        return (n_fft, onset, Impulse(n_fft, ir_in), Impulse(n_fft, ir_out),
                lambda k: xinv[k])

    from ..excitation import band_response, long_inverse_spectrum
    from ..longfft import LongSpectrum

    pre, adv_max = _pre_and_images(p, rate_hz)
    # past the recording by what clears the harmonic images and keeps the
    # negative-time noise (down to minus the sweep's duration) that wraps around
    # out of the kept stretch (at most KEEP_S); never shorter than the sweep file
    clear = max(adv_max + 2 * pre, int(KEEP_S * rate_hz)) + int(0.5 * rate_hz)
    size = sweep.samples.size
    s_inv = long_inverse_spectrum(sweep, max(size, n + min(size, clear)))
    n_fft = s_inv.n_fft
    work = LongSpectrum(s_inv.n1, s_inv.n2)

    def response(x: NDArray[np.floating]) -> NDArray[np.float32]:
        work.buf[:] = 0
        work.signal[:n] = x
        work.forward()
        work.multiply(s_inv)
        work.inverse()
        return work.signal

    def values(k: NDArray[np.int64]) -> NDArray[np.complex128]:
        k = np.asarray(k, dtype=np.int64)
        inner = (k > 0) & (k < s_inv.n)
        out = np.zeros(k.shape, dtype=np.complex128)
        out[inner] = s_inv.values_at(k[inner])
        return out

    if outside is None:
        ir_in = Impulse(n_fft, response(inside))
        assert ir_in.whole is not None
        onset = find_onset(ir_in.whole, rate_hz, max_lookback=adv2 // 2)
        ir_in.keep(_stretches(sweep, rate_hz, n, n_fft, onset, True))
        df = rate_hz / n_fft
        limit_at = band_response(df, rate_hz / 2, lo_b, hi_b)
        work.apply(lambda k, v: limit_at(k * df), edge=lambda v: 0j)
        work.inverse()
        ir_out = Impulse(n_fft, work.signal)
        ir_out.keep(_stretches(sweep, rate_hz, n, n_fft, onset, True), shift=onset)
    else:
        ir_out = Impulse(n_fft, response(outside))
        assert ir_out.whole is not None
        onset = find_onset(ir_out.whole, rate_hz, max_lookback=adv2 // 2)
        ir_out.keep(_stretches(sweep, rate_hz, n, n_fft, onset, False))
        ir_in = Impulse(n_fft, response(inside))
        ir_in.keep(_stretches(sweep, rate_hz, n, n_fft, onset, False))
    return n_fft, onset, ir_in, ir_out, values


def sweep_transfer(inside: NDArray[np.floating], outside: NDArray[np.floating] | None,
                   rate_hz: float, sweep: Sweep, *, window_s: float | None = None,
                   clock_check: bool = True) -> TransferFunction:
    """H(f) from a swept-sine recording of both microphones, or of the inside
    one alone (``outside=None``: H then includes the loudspeaker and the room,
    and the window ends before the first strong reflection).

    Steps: linear deconvolution of each channel by the sweep's regularised
    inverse (:func:`characterize.excitation.inverse_spectrum`, in
    :func:`_deconvolve`) so that the harmonic images fall at negative times
    (Farina 2000); one window on both impulse responses from
    ``PRE_ONSET_S`` before the direct sound for ``WINDOW_TIME_CONSTANTS``
    ringing time constants (estimated from a first, long window) or as long as
    the harmonic images allow; the ratio of the two spectra. The per-bin noise
    comes from the impulse responses' noise-only stretch after the ringing.

    With two microphones the recorder's clock is compared with the player's
    (:func:`characterize.clock.estimate_clock` on the outside response); a
    mismatch above :data:`characterize.clock.CLOCK_MISMATCH_PPM` (and four of
    its standard errors) is corrected: the recording is deconvolved again by the
    sweep as that recorder saw it, and the frequencies are rescaled to the
    player's clock (``clock_check=False`` skips the check).
    """
    p = sweep.params
    n = inside.size
    one_mic = outside is None
    n_fft, onset, ir_in, ir_out, xinv_at = _deconvolve(inside, outside, rate_hz, sweep)
    pre, start, l_max = _window_limits(p, rate_hz, n, n_fft, onset)
    if l_max < int(MIN_WINDOW_S * rate_hz):
        raise FitError("the sweep is too short or fast: its harmonic images leave less than "
                       f"{MIN_WINDOW_S * 1000:.0f} ms for the response")
    seg_in, seg_out = ir_in.take(start, l_max), ir_out.take(start, l_max)
    band = usable_band(p)
    clock = None
    if clock_check and not one_mic:
        clock = _clock_of(seg_out, rate_hz, p, band, l_max)
        if clock is not None and clock.significant:
            k = 1 + 1e-6 * clock.ppm
            again = sweep_transfer(inside, outside, rate_hz, stretched_sweep(sweep, k),
                                   window_s=window_s, clock_check=False)
            lo_e, hi_e = again.excited_band_hz
            return replace(again, freqs_hz=again.freqs_hz * k,
                           excited_band_hz=(lo_e * k, hi_e * k),
                           clock=replace(clock, corrected=True))
    from scipy import fft as sfft

    def spectra(length: int, dtype: type = np.float64
                ) -> tuple[NDArray[np.float64], NDArray[np.complexfloating],
                           NDArray[np.complexfloating], NDArray[np.floating]]:
        w: NDArray[np.floating] = np.ones(length, dtype=dtype)
        w[:pre] = 0.5 * (1 - np.cos(np.pi * np.arange(pre) / pre))
        n_taper = max(2, length // 20)
        w[-n_taper:] = 0.5 * (1 + np.cos(np.pi * (np.arange(n_taper) + 1) / n_taper))
        fi = sfft.rfft(seg_in[:length] * w)
        fo = sfft.rfft(seg_out[:length] * w)
        return np.asarray(np.fft.rfftfreq(length, 1 / rate_hz), dtype=np.float64), fi, fo, w

    f0_est: float | None = None
    tau = math.nan
    if window_s is None:
        # a first, long window for the ringing's time constant (an estimate: in
        # the precision the responses are kept in)
        f, fi, fo, _ = spectra(_fast_below(l_max), seg_in.dtype.type)
        with np.errstate(divide="ignore", invalid="ignore"):
            h0 = fi / fo
        f0_est, q_est = estimate_peak(f, _mask_notches(f, h0, fo, band), band)
        tau = q_est / (math.pi * f0_est)
        length = int(min(l_max, max(WINDOW_TIME_CONSTANTS * tau, MIN_WINDOW_S) * rate_hz))
        length = min(_fast_len(length), _fast_below(l_max))
    else:
        length = int(round(window_s * rate_hz))
        if length < 4 * pre or length > l_max:
            raise InputError("--window", None,
                             f"{window_s * 1000:.0f} ms is outside what this recording allows "
                             f"({4 * pre / rate_hz * 1000:.0f} to "
                             f"{l_max / rate_hz * 1000:.0f} ms)")
    reflection_s = None
    if one_mic and window_s is None and f0_est is not None:
        refl = first_reflection(ir_in, onset, rate_hz, 4 * f0_est, usable_band(p)[1])
        if refl is not None:
            reflection_s = refl / rate_hz
            cut = max(4 * pre, pre + refl - int(5e-4 * rate_hz))
            # end the window before the reflection only when that leaves the ringing
            # time to decay (judged on the cut window itself: the long one holds the
            # room's ripple, and a cut that truncates the ringing broadens the peak,
            # so it never looks long enough); otherwise the room stays in H and the
            # fit's background (its order chosen from the data) describes it
            if cut < length:
                fc, fi_c, fo_c, _ = spectra(cut)
                with np.errstate(divide="ignore", invalid="ignore"):
                    hc = fi_c / fo_c
                try:
                    f0_c, q_c = estimate_peak(fc, _mask_notches(fc, hc, fo_c, band), band)
                except FitError:
                    q_c = math.inf
                tau_c = q_c / (math.pi * f0_c) if math.isfinite(q_c) else math.inf
                if cut >= REFLECTION_CUT_TIME_CONSTANTS * tau_c * rate_hz:
                    length, tau, f0_est = cut, tau_c, f0_c
    f, fi, fo, w = spectra(length)
    with np.errstate(divide="ignore", invalid="ignore"):
        h = fi / fo
    if window_s is not None or f0_est is None:
        try:
            f0_est, q_est = estimate_peak(f, _mask_notches(f, h, fo, band), band)
            tau = q_est / (math.pi * f0_est)
        except FitError:
            tau = math.nan
    # Where noise exists in the impulse responses. After deconvolution, the
    # response at lag t and frequency f comes from the recording at time
    # t + t_f, t_f being when the sweep passed f (Farina 2000); past the
    # recording's end there is neither signal nor noise at that frequency.
    t_f = np.clip(p.duration_s * np.log(np.maximum(f, p.start_hz) / p.start_hz)
                  / p.sweep_rate, 0.0, p.duration_s)
    until = (n - t_f * rate_hz - start).astype(np.float64)  # in window samples
    # noise-only stretch: after the ringing (25, else 15, else 10 time constants),
    # where the recording still holds noise at the resonance
    # and after the room's own decay in both responses
    m_seg = 2 * min(8192, max(256, (l_max - pre) // 16))
    n0 = int(0.75 * l_max)
    if math.isfinite(tau) and f0_est is not None:
        until_f0 = float(np.interp(f0_est, f, until))
        # the room's own decay, judged against the noise in the second half of
        # the stretch that still holds noise at the resonance
        end = int(min(until_f0, l_max))
        room = max(decay_end(seg_in, rate_hz, end // 2, end),
                   0 if one_mic else decay_end(seg_out, rate_hz, end // 2, end))
        for k in (25.0, 15.0, 10.0):
            cand = max(pre + int(k * tau * rate_hz), room + int(0.01 * rate_hz))
            if min(until_f0, l_max) - cand >= m_seg:
                n0 = cand
                break
    w2_cum = np.concatenate([[0.0], np.cumsum(w**2)])
    # window energy that meets noise, per bin
    sw2 = w2_cum[np.clip(until, 0, length).astype(int)]
    shape = _abs_at(xinv_at, n_fft, rate_hz, f) ** 2
    pn_in = _noise_power(seg_in[n0:], length, rate_hz, until, n0, shape) * sw2
    pn_out = (np.zeros_like(pn_in) if one_mic else
              _noise_power(seg_out[n0:], length, rate_hz, until, n0, shape) * sw2)
    with np.errstate(divide="ignore", invalid="ignore"):
        fo2 = np.abs(fo) ** 2
        noise_a = pn_in / fo2
        noise_b = pn_out / fo2
        ref_db = 10 * np.log10(np.maximum(fo2, 1e-300))
    thd_in = harmonic_distortion(ir_in, start + pre, pre, sweep, rate_hz, f, length, fi)
    thd_out = None if one_mic else harmonic_distortion(ir_out, start + pre, pre, sweep,
                                                         rate_hz, f, length, fo)
    t = (np.arange(length) - pre) / rate_hz
    win = WindowInfo(start_s=-pre / rate_hz, length_s=length / rate_hz,
                     taper_in_s=pre / rate_hz, taper_out_s=max(2, length // 20) / rate_hz,
                     time_constants=length / rate_hz / tau if math.isfinite(tau) else math.nan,
                     reflection_s=reflection_s)
    method = "one-channel-sweep" if one_mic else "sweep-deconvolution"
    return TransferFunction(f, h, noise_a, noise_b, band, method, ref_db,
                            window=win, impulse_t_s=t,
                            impulse_inside=np.array(seg_in[:length], dtype=np.float64),
                            impulse_outside=np.array(seg_out[:length], dtype=np.float64),
                            thd_inside=thd_in, thd_outside=thd_out, clock=clock)


def _clock_of(seg: NDArray[np.floating], rate_hz: float, p: SweepParams,
              band: tuple[float, float], l_max: int) -> ClockEstimate | None:
    """The clock mismatch from the start of a deconvolved response (the direct
    sound and its dispersion), with the band limit's phase taken out."""
    from ..clock import CLOCK_MAX_PPM, CLOCK_WINDOW_S, estimate_clock

    n = int(min(l_max, (CLOCK_WINDOW_S + 2e-6 * CLOCK_MAX_PPM * p.duration_s) * rate_hz))
    if n < 64:
        return None
    limit = band_filter(np.fft.rfftfreq(n, 1 / rate_hz), band[0], band[1])
    return estimate_clock(np.asarray(seg[:n], dtype=np.float64), rate_hz, p.start_hz,
                          p.duration_s, p.sweep_rate, band, limit)


def stretched_sweep(sweep: Sweep, k: float) -> Sweep:
    """The sweep as a recorder whose clock runs ``k`` times the player's records
    it, in the recorder's samples: every time ``k`` times longer, every frequency
    ``k`` times lower. Regenerated from its parameters when they come from the
    sidecar (exact); resampled (FFT, band-limited) when they were read off the
    samples."""
    p = sweep.params
    q = replace(p, start_hz=p.start_hz / k, stop_hz=p.stop_hz / k, duration_s=p.duration_s * k,
                fade_in_s=p.fade_in_s * k, fade_out_s=p.fade_out_s * k, tail_s=p.tail_s * k)
    if not sweep.estimated:
        from ..excitation import make_sweep

        return make_sweep(q)
    from scipy.signal import resample

    x = np.asarray(sweep.samples, dtype=np.float64)
    return Sweep(q, resample(x, int(round(x.size * k))), estimated=True)
