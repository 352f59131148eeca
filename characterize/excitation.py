"""Excitation signals: exponential sine sweeps, their sidecars and inverse filters.

References
----------
A. Farina, "Simultaneous measurement of impulse response and distortion with a
swept-sine technique", AES 108th Convention, preprint 5093 (2000).
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterator
from dataclasses import asdict, dataclass
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np
from numpy.typing import NDArray

from .errors import InputError

if TYPE_CHECKING:
    from .longfft import LongSpectrum

#: Default fade lengths and silent tail of a generated sweep.
DEFAULT_FADE_IN_S = 0.05
DEFAULT_FADE_OUT_S = 0.01
DEFAULT_TAIL_S = 1.0

SAFETY_CAUTION = (
    "CAUTION: driving resonators hard can exceed 110 dB SPL near the loudspeaker and "
    "130 dB inside the cavity. Start at a low level and step up, wear hearing protection "
    "above 85 dB(A), keep exposure short, never loop sweeps unattended, and follow your "
    "local occupational-noise regulations (e.g. NIOSH REL 85 dB(A)/8 h, EU 2003/10/EC)."
)


@dataclass(frozen=True, slots=True)
class SweepParams:
    """Every parameter of an exponential sine sweep (SI units)."""

    start_hz: float
    stop_hz: float
    duration_s: float
    rate_hz: float
    level_dbfs: float
    fade_in_s: float = DEFAULT_FADE_IN_S
    fade_out_s: float = DEFAULT_FADE_OUT_S
    tail_s: float = DEFAULT_TAIL_S
    kind: str = "exponential"

    def to_dict(self) -> dict[str, float | str]:
        return asdict(self)

    @property
    def sweep_rate(self) -> float:
        """R = ln(f2/f1) (dimensionless)."""
        return math.log(self.stop_hz / self.start_hz)

    def harmonic_advance_s(self, order: int) -> float:
        """Time by which the ``order``-th harmonic's impulse response precedes the
        linear one after deconvolution: T ln(n) / ln(f2/f1) (Farina 2000)."""
        return self.duration_s * math.log(order) / self.sweep_rate


@dataclass(frozen=True)
class Sweep:
    """A sweep's parameters and samples (sweep followed by the silent tail;
    float64 when generated, float32 as read from a file)."""

    params: SweepParams
    samples: NDArray[np.floating]
    estimated: bool = False  # True when the parameters were read off the samples


def validate_params(p: SweepParams, source: str = "sweep") -> None:
    """Raise :class:`InputError` for impossible sweep settings."""
    for name in ("start_hz", "stop_hz", "duration_s", "rate_hz", "level_dbfs",
                 "fade_in_s", "fade_out_s", "tail_s"):
        v = getattr(p, name)
        if not math.isfinite(v):
            raise InputError(source, name, f"must be a finite number, got {v!r}")
    from .audio import MAX_DURATION_S, MAX_SAMPLES

    total_s = p.duration_s + p.tail_s
    if total_s > MAX_DURATION_S or total_s * p.rate_hz > MAX_SAMPLES:
        raise InputError(source, "duration", f"sweep plus tail ({total_s:g} s at "
                         f"{p.rate_hz:g} Hz) is longer than fit reads back "
                         f"({MAX_SAMPLES:,} samples, {MAX_DURATION_S:g} s)")
    nyq = p.rate_hz / 2
    if not (p.rate_hz > 0):
        raise InputError(source, "rate", f"must be > 0 Hz, got {p.rate_hz:g}")
    if not (0 < p.start_hz < p.stop_hz):
        raise InputError(source, "start/stop",
                         f"need 0 < start < stop, got {p.start_hz:g} and {p.stop_hz:g} Hz")
    if p.stop_hz > nyq:
        raise InputError(source, "stop",
                         f"{p.stop_hz:g} Hz is above the Nyquist frequency {nyq:g} Hz")
    if not (p.duration_s > 0):
        raise InputError(source, "duration", f"must be > 0 s, got {p.duration_s:g}")
    if p.level_dbfs > 0:
        raise InputError(source, "level", f"must be <= 0 dBFS, got {p.level_dbfs:g}")
    if p.fade_in_s < 0 or p.fade_out_s < 0 or p.fade_in_s + p.fade_out_s > p.duration_s:
        raise InputError(source, "fade", "fades must be >= 0 and shorter than the sweep together")
    if p.tail_s < 0:
        raise InputError(source, "tail", f"must be >= 0 s, got {p.tail_s:g}")


def make_sweep(params: SweepParams) -> Sweep:
    """Generate an exponential sine sweep (Farina 2000).

    .. math::

        x(t) = A \\sin\\left[\\frac{2\\pi f_1 T}{R}\\left(e^{tR/T} - 1\\right)\\right],
        \\quad R = \\ln(f_2/f_1),\\ 0 \\le t < T

    with half-Hann fades at both ends, peak amplitude ``A = 10**(level_dbfs/20)``
    (full scale = 1), and ``tail_s`` of silence after it. The instantaneous
    frequency is :math:`f_1 e^{tR/T}`.

    References
    ----------
    A. Farina, "Simultaneous measurement of impulse response and distortion with a
    swept-sine technique", AES 108th Convention, preprint 5093 (2000).
    """
    validate_params(params)
    fs = params.rate_hz
    n = int(round(params.duration_s * fs))
    t = np.arange(n) / fs
    r = params.sweep_rate
    phase = (2 * np.pi * params.start_hz * params.duration_s / r
             * np.expm1(t * r / params.duration_s))
    x = np.sin(phase)
    n_in = int(round(params.fade_in_s * fs))
    n_out = int(round(params.fade_out_s * fs))
    if n_in > 0:
        x[:n_in] *= 0.5 * (1 - np.cos(np.pi * np.arange(n_in) / n_in))
    if n_out > 0:
        x[n - n_out:] *= 0.5 * (1 + np.cos(np.pi * (np.arange(n_out) + 1) / n_out))
    x *= 10 ** (params.level_dbfs / 20)
    tail = np.zeros(int(round(params.tail_s * fs)))
    return Sweep(params, np.concatenate([x, tail]))


def sidecar_path(wav_path: str | Path) -> Path:
    """The TOML sidecar that sits beside a sweep WAV (same stem)."""
    return Path(wav_path).with_suffix(".toml")


def sidecar_text(params: SweepParams) -> str:
    """TOML text of the sidecar (written by hand: tomllib only reads)."""
    lines = ["# exponential sine sweep written by characterize", "[sweep]"]
    for key, value in params.to_dict().items():
        lines.append(f'{key} = "{value}"' if isinstance(value, str) else f"{key} = {value!r}")
    return "\n".join(lines) + "\n"


def read_sidecar(path: str | Path) -> SweepParams:
    """Read a sweep sidecar TOML; :class:`InputError` names the missing field."""
    from .fileio import read_toml

    p = Path(path)
    data = read_toml(p, "a sweep sidecar")
    table = data.get("sweep", data)
    if not isinstance(table, dict):
        raise InputError(str(p), "sweep", f"expected a [sweep] table, got {table!r}")
    values: dict[str, float | str] = {}
    for name in ("start_hz", "stop_hz", "duration_s", "rate_hz", "level_dbfs",
                 "fade_in_s", "fade_out_s", "tail_s"):
        if name not in table:
            raise InputError(str(p), f"sweep.{name}", "missing")
        v = table[name]
        try:
            ok = not isinstance(v, bool) and isinstance(v, (int, float)) and math.isfinite(v)
        except OverflowError:
            ok = False
        if not ok:
            raise InputError(str(p), f"sweep.{name}", f"expected a finite number, got "
                             f"{str(v)[:40]!r}")
        values[name] = float(v)
    params = SweepParams(**values)  # type: ignore[arg-type]
    validate_params(params, str(p))
    return params


#: The active part of a sweep read off its samples starts where the envelope
#: first exceeds this fraction of its peak (fades are half-Hann, so this is
#: within 2 % of a fade's length from its start).
ESTIMATE_EDGE_FRACTION = 1e-3
#: Largest rms deviation of ln(instantaneous frequency) from a straight line for
#: the samples to count as an exponential sweep.
ESTIMATE_MAX_LOG_RESIDUAL = 0.05


#: Samples per block of the analytic signal in :func:`estimate_params`, and the
#: margin on each side dropped from each block (the Hilbert transform's kernel
#: decays as 1/t: its edge error is small this far in).
ESTIMATE_BLOCK = 1 << 20
ESTIMATE_MARGIN = 1 << 15
#: At most this many instantaneous-frequency samples enter the straight-line fit.
ESTIMATE_MAX_POINTS = 1 << 22


def _analytic_blocks(x: NDArray[np.floating], lo: int, hi: int
                     ) -> Iterator[tuple[int, NDArray[np.complex128]]]:
    """The analytic signal of ``x`` over [lo, hi), block by block, in double
    precision: (first sample, values). One block (exactly scipy.signal.hilbert
    of the stretch) when it fits."""
    from scipy.signal import hilbert

    if hi - lo <= ESTIMATE_BLOCK + 2 * ESTIMATE_MARGIN:
        yield lo, hilbert(np.asarray(x[lo:hi], dtype=np.float64))
        return
    from scipy.fft import next_fast_len

    for a in range(lo, hi, ESTIMATE_BLOCK):
        b = min(a + ESTIMATE_BLOCK, hi)
        a0, b0 = max(lo, a - ESTIMATE_MARGIN), min(hi, b + ESTIMATE_MARGIN)
        # zero-padded by a margin, so that the transform's circular wrap does not
        # carry one end of a block (cut mid-sweep) onto the other
        n_fft = next_fast_len(b0 - a0 + ESTIMATE_MARGIN)
        z = hilbert(np.asarray(x[a0:b0], dtype=np.float64), N=n_fft)
        yield a, z[a - a0: b - a0]


def _first_last(mask: NDArray[np.bool_], source: str) -> tuple[int, int]:
    """First index where ``mask`` holds and one past the last."""
    if not np.any(mask):
        raise InputError(source, None, "no sweep found")
    return int(np.argmax(mask)), int(mask.size - np.argmax(mask[::-1]))


def estimate_params(samples: NDArray[np.floating], rate_hz: float,
                    source: str = "sweep") -> SweepParams:
    """Read an exponential sweep's band and timing off its samples alone.

    The instantaneous frequency (from the analytic signal's phase) of an
    exponential sweep is :math:`f_1 e^{tR/T}`: its logarithm is fitted as a
    straight line over the middle of the active part and extrapolated to the
    active part's ends (Farina 2000 for the law). Long sweeps are read block by
    block (``ESTIMATE_BLOCK``), and at most ``ESTIMATE_MAX_POINTS`` evenly
    spaced samples of the instantaneous frequency enter the line fit, so the
    memory stays near the sweep's own size.
    """
    x = np.asarray(samples)
    if not np.issubdtype(x.dtype, np.floating):
        x = x.astype(np.float64)
    if x.size == 0 or not np.any(x):
        raise InputError(source, None, "the sweep file is silent")
    if not np.all(np.isfinite(x)):
        raise InputError(source, None, "holds NaN or infinite samples")
    k = max(1, int(rate_hz * 0.002))
    # the law is fitted where the envelope is above 10 % of its peak (clear of the
    # fades); the sweep's ends are where the samples first and last leave silence
    # (fades included), and the law extrapolated there gives the start and stop
    if x.size <= ESTIMATE_BLOCK + 2 * ESTIMATE_MARGIN:
        env = np.abs(next(_analytic_blocks(x, 0, x.size))[1])
        smooth = np.convolve(env, np.ones(k) / k, mode="same")
    else:  # single precision is plenty for a threshold at 10 % of the peak
        env = np.empty(x.size, dtype=np.float32)
        for first, z in _analytic_blocks(x, 0, x.size):
            env[first:first + z.size] = np.abs(z)
        smooth = np.empty_like(env)
        box = np.ones(k) / k
        for a in range(0, env.size, ESTIMATE_BLOCK):  # np.convolve "same", block by block
            lo, hi = max(0, a - k), min(env.size, a + ESTIMATE_BLOCK + k)
            seg = np.convolve(env[lo:hi], box, mode="same")
            smooth[a:a + ESTIMATE_BLOCK] = seg[a - lo:a - lo + min(ESTIMATE_BLOCK, env.size - a)]
    peak = float(np.max(env))
    i0, i1 = _first_last(smooth > 0.1 * peak, source)
    del env, smooth
    if i1 - i0 < 0.05 * rate_hz:
        raise InputError(source, None, "no sweep found (active part shorter than 50 ms)")
    thr = ESTIMATE_EDGE_FRACTION * max(float(np.max(x)), -float(np.min(x)))
    e0, e1 = _first_last((x > thr) | (x < -thr), source)
    # instantaneous frequency over the middle 80 % of the active part (decimated)
    n_inst = i1 - i0 - 1
    a, b = int(0.1 * n_inst), int(0.9 * n_inst)
    step = max(1, -(-(b - a) // ESTIMATE_MAX_POINTS))
    keep_t, keep_f = [], []
    carry = None  # the previous block's last phase: the difference across blocks
    for first, z in _analytic_blocks(x, i0, i1):
        phase = np.unwrap(np.angle(z))
        if carry is None:
            full, j0 = phase, first - i0
        else:
            phase += 2 * np.pi * round((carry - phase[0]) / (2 * np.pi))
            full, j0 = np.concatenate([[carry], phase]), first - i0 - 1
        carry = float(phase[-1])
        inst = np.diff(full) * rate_hz / (2 * np.pi)
        j = j0 + np.arange(inst.size)  # index of each difference in the active part
        pick = (j >= a) & (j < b) & ((j - a) % step == 0)
        keep_t.append((i0 + j[pick] + 0.5) / rate_hz)
        keep_f.append(inst[pick])
    t_fit, f_fit = np.concatenate(keep_t), np.concatenate(keep_f)
    ok = f_fit > 0
    if np.count_nonzero(ok) < 10:
        raise InputError(source, None, "cannot read a rising frequency: not a sine sweep")
    tt, lf = t_fit[ok], np.log(f_fit[ok])
    slope, icpt = np.polyfit(tt, lf, 1)
    resid = float(np.sqrt(np.mean((lf - (icpt + slope * tt)) ** 2)))
    duration = (e1 - e0) / rate_hz
    f1 = float(np.exp(icpt + slope * e0 / rate_hz))
    f2 = float(np.exp(icpt + slope * e1 / rate_hz))
    if not (slope > 0 and 0 < f1 and f2 > 1.5 * f1) or resid > ESTIMATE_MAX_LOG_RESIDUAL:
        raise InputError(source, None, "the frequency does not rise exponentially "
                         f"(rms deviation {resid:.2f} in ln f): not an exponential sweep")
    f2 = min(f2, rate_hz / 2)
    level = 20 * np.log10(float(np.max(np.abs(x[i0:i1]))))
    return SweepParams(start_hz=f1, stop_hz=f2, duration_s=duration, rate_hz=rate_hz,
                       level_dbfs=float(min(level, 0.0)), fade_in_s=0.0, fade_out_s=0.0,
                       tail_s=(x.size - e1) / rate_hz)


def _check_is_sidecar(side: Path, wav: str | Path) -> None:
    """Refuse, saying what happened, a TOML beside the sweep that is not a sweep
    sidecar: usually the recording and --sweep were swapped, and the lookup by
    stem found the recording's object file."""
    from .fileio import read_toml

    data = read_toml(side, "a sweep sidecar")
    if "sweep" in data or "start_hz" in data:
        return
    what = ("an object file" if any(k in data for k in ("cavity", "neck", "name", "kind"))
            else "not a sweep sidecar (no [sweep] table)")
    raise InputError(str(wav), "--sweep", f"{side.name} beside it is {what}, so {Path(wav).name} "
                     "is probably the recording: were the recording and --sweep swapped? "
                     "(--sweep takes the file that was played)")


def load_sweep(path: str | Path, rate_hz: float | None = None) -> Sweep:
    """Read a sweep WAV; take its exact parameters from the sidecar when present,
    else read them off the samples (:func:`estimate_params`).

    ``rate_hz``, when given, is the recording's rate; another rate is an error.
    """
    from .audio import read_audio

    rec = read_audio(path)
    if rate_hz is not None and rec.rate_hz != rate_hz:
        raise InputError(str(path), "sample rate",
                         f"sweep is at {rec.rate_hz:g} Hz but the recording is at "
                         f"{rate_hz:g} Hz; resample one of them")
    # single precision as stored (exact for 16/24-bit PCM and float WAVs): a long
    # sweep's samples stay in memory beside the recording's
    x = np.ascontiguousarray(rec.view(1))
    side = sidecar_path(path)
    if side.exists():
        _check_is_sidecar(side, path)
        params = read_sidecar(side)
        if params.rate_hz != rec.rate_hz:
            raise InputError(str(side), "sweep.rate_hz",
                             f"says {params.rate_hz:g} Hz but the WAV is at "
                             f"{rec.rate_hz:g} Hz")
        return Sweep(params, x, estimated=False)
    return Sweep(estimate_params(x, rec.rate_hz, str(path)), x, estimated=True)


#: The deconvolution's causal band limit has its corners this factor inside the
#: sweep's ends (half an octave), where the sweep still has its full level, so that
#: sweep x inverse equals the band limit exactly and the responses stay causal.
BAND_EDGE_FACTOR = math.sqrt(2.0)
BAND_ORDER = 16
#: Spectral division floor, relative to the sweep's peak power.
INVERSE_FLOOR = 1e-10


def usable_band(params: SweepParams) -> tuple[float, float]:
    """The band in which a deconvolved response is reliable (Hz): the band
    limit's corners, and below 0.45 of the sample rate."""
    return (params.start_hz * BAND_EDGE_FACTOR,
            min(params.stop_hz / BAND_EDGE_FACTOR, 0.45 * params.rate_hz))


def band_response(f_min_hz: float, f_max_hz: float, lo_hz: float, hi_hz: float,
                  order: int = BAND_ORDER
                  ) -> Callable[[NDArray[np.floating]], NDArray[np.complex128]]:
    """The causal band limit of :func:`band_filter` as a function of frequency,
    accurate on [``f_min_hz``, ``f_max_hz``]: evaluated once on a dense log grid
    (zeros-poles-gain form; the polynomial form loses precision at order 8),
    then interpolated (the response is smooth in log frequency, and the FFT grids
    here have up to 10^8 points)."""
    from .dsp import butter_analog_zpk, freqs_zpk  # numpy: no scipy.signal on the fit path

    f_min = float(f_min_hz)
    grid = np.geomspace(f_min, max(float(f_max_hz), f_min * 1.0001), 20000)
    w = 2 * np.pi * grid
    hh = freqs_zpk(*butter_analog_zpk(order, 2 * np.pi * lo_hz, "highpass"), w)
    hl = freqs_zpk(*butter_analog_zpk(order, 2 * np.pi * hi_hz, "lowpass"), w)
    g = hh * hl
    lg = np.log(grid)

    def response(freqs_hz: NDArray[np.floating]) -> NDArray[np.complex128]:
        f = np.asarray(freqs_hz, dtype=np.float64)
        lf = np.log(np.maximum(f, f_min))
        out = np.interp(lf, lg, g.real) + 1j * np.interp(lf, lg, g.imag)
        out[f <= 0] = 0.0
        return out

    return response


def band_filter(freqs_hz: NDArray[np.floating], lo_hz: float, hi_hz: float,
                order: int = BAND_ORDER) -> NDArray[np.complex128]:
    """Causal (minimum-phase) band limit: analog Butterworth high-pass at ``lo_hz``
    times low-pass at ``hi_hz`` (S. Butterworth, "On the theory of filter
    amplifiers", Wireless Engineer 7, 1930), evaluated on the FFT grid.

    A causal band limit keeps the deconvolved impulse responses free of
    precursors, so one window cut before the onset treats both channels alike.
    """
    f = np.asarray(freqs_hz, dtype=np.float64)
    pos = f[f > 0]
    if pos.size == 0:
        return np.zeros(f.size, dtype=np.complex128)
    return band_response(float(pos.min()), float(pos.max()), lo_hz, hi_hz, order)(f)


def _inverse_values(x: NDArray[np.complex128], f: NDArray[np.floating], p: SweepParams,
                    peak: float, limit: NDArray[np.complex128]) -> NDArray[np.complex128]:
    """``limit conj(X) / max(|X|^2 + eps, floor)`` for sweep-spectrum values ``x`` at
    frequencies ``f`` (see :func:`inverse_spectrum`)."""
    power = np.abs(x) ** 2
    # Outside the sweep there is nothing to invert: a regularisation that is zero
    # inside [start, stop] and rises smoothly (raised cosine over half an octave)
    # to the sweep's peak power outside keeps the gain there bounded. The band
    # limit is already 48 dB down at the sweep's ends, so what this changes is
    # small and smooth, and the responses stay causal to well below the noise.
    with np.errstate(divide="ignore"):
        lf = np.log2(np.maximum(f, 1e-12))
    above = np.clip((lf - math.log2(p.stop_hz)) / 0.5, 0.0, 1.0)
    below = np.clip((math.log2(p.start_hz) - lf) / 0.5, 0.0, 1.0)
    ramp = 0.5 * (1 - np.cos(np.pi * np.maximum(above, below)))
    eps = peak * ramp**2
    return limit * np.conj(x) / np.maximum(power + eps, INVERSE_FLOOR * peak)


def inverse_spectrum(sweep: Sweep, n_fft: int) -> NDArray[np.complex128]:
    """Regularised inverse of the sweep's spectrum on an ``n_fft``-point rfft grid.

    ``B(f) conj(X) / |X|^2`` with ``B`` the causal band limit of
    :func:`band_filter` at the sweep's ends: deconvolving the sweep by itself
    gives a band-limited, causal impulse at sample 0. This plays the part of
    Farina's time-reversed, amplitude-compensated inverse filter (Farina 2000).
    """
    p = sweep.params
    from scipy import fft as sfft

    x = sfft.rfft(np.asarray(sweep.samples, dtype=np.float64), n_fft)
    f = np.fft.rfftfreq(n_fft, 1 / p.rate_hz)
    lo, hi = usable_band(p)
    limit = band_filter(f, lo, min(hi, 0.45 * p.rate_hz))
    return _inverse_values(x, f, p, float(np.max(np.abs(x) ** 2)), limit)


def long_inverse_spectrum(sweep: Sweep, n_fft_min: int) -> LongSpectrum:
    """:func:`inverse_spectrum` for very long sweeps, in a
    :class:`characterize.longfft.LongSpectrum` of at least ``n_fft_min`` points
    (single-precision storage, double-precision arithmetic in blocks): the
    same values to about 1e-7 of the largest, with a fraction of the memory."""
    from .longfft import LongSpectrum

    p = sweep.params
    spec = LongSpectrum.for_length(n_fft_min)
    spec.signal[: sweep.samples.size] = sweep.samples
    spec.forward()
    df = p.rate_hz / spec.n_fft
    peak = 0.0
    for sl, _ in spec.blocks():
        peak = max(peak, float(np.max(np.abs(spec.buf[sl].astype(np.complex128)) ** 2)))
    v0 = complex(spec.buf[0])
    peak = max(peak, v0.real**2, v0.imag**2)
    lo, hi = usable_band(p)
    limit = band_response(df, p.rate_hz / 2, lo, min(hi, 0.45 * p.rate_hz))

    def invert(k: NDArray[np.int64], x: NDArray[np.complex128]) -> NDArray[np.complex128]:
        f = k * df
        return _inverse_values(x, f, p, peak, limit(f))

    spec.apply(invert, edge=lambda v: 0j)  # the band limit is zero at DC and Nyquist
    return spec
