"""Measurement-chain simulator: recordings with known truth.

Excitation (an exponential sweep or noise) -> loudspeaker (high-pass and a
gentle low-pass) -> room (direct sound plus reflections) -> pressure at the
mouth. The outside microphone records that pressure; the inside microphone
records it through the resonator, with its own gain and a small path delay.
Both get independent Gaussian noise.

The recorded inside/outside ratio is therefore exactly

.. math::

    H(f) = s\\,G\\,\\frac{e^{-j2\\pi f\\tau}}{1 - (f/f_0)^2 + j f/(Q f_0)}

with ``G = gain_inside / gain_outside`` and ``s = -1`` when the inside
channel's polarity is inverted. The tests use this to check the fit against
known f0 and Q; the demo recordings in example_audio/ are made with it.

Everything is done in the frequency domain on an FFT long enough for the
resonator's ringing to decay (40 time constants), so the circular convolution
equals the linear one to far below the noise.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass, field, replace
from typing import cast

import numpy as np
from numpy.typing import NDArray

from .excitation import Sweep, SweepParams, make_sweep


@dataclass(frozen=True)
class Setup:
    """What is simulated (SI units).

    ``snr_db`` is the outside channel's signal-to-noise ratio: RMS of the
    recorded signal over RMS of the added noise, over the whole recording.
    The inside channel gets noise of the same RMS.
    """

    f0_hz: float
    q: float
    rate_hz: float = 48000.0
    snr_db: float = 40.0
    excitation: str = "sweep"  # "sweep" or "noise"
    sweep: SweepParams | None = None
    noise_duration_s: float = 8.0
    gain_inside: float = 1.0
    gain_outside: float = 0.9
    delay_s: float = 40e-6
    inverted: bool = False
    latency_s: float = 0.02
    reflections: tuple[tuple[float, float], ...] = ((0.0031, 0.45), (0.0074, -0.3),
                                                     (0.0123, 0.22), (0.0210, 0.12))
    loudspeaker_highpass_hz: float = 40.0
    #: The recorder's clock runs this many parts per million fast against the
    #: player's (two devices): the sweep is recorded stretched, and every
    #: frequency reads low by that fraction (sweeps only; noise is white either way)
    clock_ppm: float = 0.0
    #: Q of the loudspeaker's 2nd-order high-pass (its own resonance); 1/sqrt(2)
    #: is Butterworth (no peak), about 2 a small driver in a sealed box
    loudspeaker_q: float = 1 / math.sqrt(2)
    peak_dbfs: float = -6.0
    body_modes: tuple[tuple[float, float, float], ...] = ()  # (f_hz, q, gain) added to H
    #: memoryless polynomial y = x + a2 x^2 + a3 x^3 applied to the inside
    #: microphone's signal (normalised to its peak first): (a2, a3)
    inside_polynomial: tuple[float, float] = (0.0, 0.0)
    extra: dict[str, float] = field(default_factory=dict)

    def with_(self, **kw: object) -> Setup:
        return replace(self, **kw)  # type: ignore[arg-type]

    @property
    def gain(self) -> float:
        return self.gain_inside / self.gain_outside

    def truth(self) -> dict[str, float | bool]:
        return {"f0_hz": self.f0_hz, "q": self.q, "gain": self.gain,
                "delay_s": self.delay_s, "polarity_inverted": self.inverted}

    def to_dict(self) -> dict[str, object]:
        d = asdict(self)
        d["sweep"] = None if self.sweep is None else self.sweep.to_dict()
        return d


def resonator_response(freqs_hz: NDArray[np.float64], f0_hz: float, q: float
                       ) -> NDArray[np.complex128]:
    """Low-pass damped oscillator 1/(1 - (f/f0)^2 + j f/(Q f0)) (Rayleigh 1896)."""
    x = np.asarray(freqs_hz, dtype=np.float64) / f0_hz
    return cast("NDArray[np.complex128]", 1.0 / (1.0 - x**2 + 1j * x / q))


def true_transfer(setup: Setup, freqs_hz: NDArray[np.floating]) -> NDArray[np.complex128]:
    """The exact inside/outside ratio the simulated recording carries."""
    f = np.asarray(freqs_hz, dtype=np.float64)
    h = resonator_response(f, setup.f0_hz, setup.q)
    for fb, qb, gb in setup.body_modes:
        h = h + gb * resonator_response(f, fb, qb)
    sign = -1.0 if setup.inverted else 1.0
    return sign * setup.gain * h * np.exp(-2j * np.pi * f * setup.delay_s)


def speaker_room_response(setup: Setup, freqs_hz: NDArray[np.float64]
                          ) -> NDArray[np.complex128]:
    """From the excitation to the pressure at the mouth: the loudspeaker (a
    2nd-order high-pass at ``loudspeaker_highpass_hz``, Butterworth unless
    ``loudspeaker_q`` says otherwise, and a 1st-order low-pass at 12 kHz) times
    the room (direct sound plus the ``reflections``, each a delay and a gain)."""
    f = np.asarray(freqs_hz, dtype=np.float64)
    s = 1j * f / setup.loudspeaker_highpass_hz
    speaker = s**2 / (s**2 + s / setup.loudspeaker_q + 1) / (1 + 1j * f / 12000.0)
    room = np.ones_like(f, dtype=np.complex128)
    for d, g in setup.reflections:
        room = room + g * np.exp(-2j * np.pi * f * d)
    return speaker * room


def default_sweep(setup: Setup) -> SweepParams:
    """A sweep suited to the setup: two octaves below to two above f0 at least,
    long enough (and with a tail long enough) for the ringing to decay."""
    tau = setup.q / (math.pi * setup.f0_hz)
    lo = max(10.0, setup.f0_hz / 8)
    hi = min(0.45 * setup.rate_hz, setup.f0_hz * 8)
    return SweepParams(start_hz=lo, stop_hz=hi, duration_s=max(2.0, 4 * tau),
                       rate_hz=setup.rate_hz, level_dbfs=-6.0,
                       tail_s=max(0.5, 12 * tau))


def simulate(setup: Setup, seed: int | np.random.Generator = 0
             ) -> tuple[NDArray[np.float64], Sweep | None]:
    """Simulate a two-channel recording.

    Returns
    -------
    data : ndarray, shape (n, 2)
        Column 0 the inside microphone, column 1 the outside one (full scale 1).
    sweep : Sweep or None
        The excitation when it was a sweep (what a user would pass as --sweep).
    """
    rng = np.random.default_rng(seed)
    fs = setup.rate_hz
    sweep: Sweep | None = None
    if setup.excitation == "sweep":
        params = setup.sweep or default_sweep(setup)
        sweep = make_sweep(params)
        exc = sweep.samples
        if setup.clock_ppm:
            # the played sweep sampled by a recorder whose clock runs fast: the same
            # sweep generated at the recorder's true rate, read at the nominal one
            exc = make_sweep(replace(params, rate_hz=params.rate_hz * (1 + 1e-6 * setup.clock_ppm))
                             ).samples
    elif setup.excitation == "noise":
        exc = rng.standard_normal(int(round(setup.noise_duration_s * fs)))
    else:
        raise ValueError(f"excitation must be one of ['sweep', 'noise'], got {setup.excitation!r}")
    stretch = 1 + 1e-6 * setup.clock_ppm  # true frequency over the recorder's reading
    n_lat = int(round(setup.latency_s * fs * stretch))
    n_rec = n_lat + exc.size
    tau = setup.q / (math.pi * setup.f0_hz)
    n_pad = int(40 * tau * fs) + int(0.1 * fs)
    n_fft = _fast_len(n_rec + n_pad)
    f_read = np.fft.rfftfreq(n_fft, 1 / fs).astype(np.float64)
    e = np.fft.rfft(np.concatenate([np.zeros(n_lat), exc]), n_fft)
    f = f_read * stretch  # the acoustic chain acts at the true frequencies
    pe: NDArray[np.complex128] = np.multiply(e, speaker_room_response(setup, f))
    outside = np.fft.irfft(pe, n_fft)[:n_rec] * setup.gain_outside
    inside = np.fft.irfft(pe * true_transfer(setup, f), n_fft)[:n_rec] * setup.gain_outside
    a2, a3 = setup.inside_polynomial
    if a2 or a3:
        peak = float(np.max(np.abs(inside)))
        u = inside / peak
        inside = (u + a2 * u**2 + a3 * u**3) * peak
    clean = np.stack([inside, outside], axis=1)
    rms_out = float(np.sqrt(np.mean(outside**2)))
    sigma = rms_out * 10 ** (-setup.snr_db / 20)
    noisy = clean + sigma * rng.standard_normal(clean.shape)
    scale = 10 ** (setup.peak_dbfs / 20) / float(np.max(np.abs(noisy)))
    return noisy * scale, sweep


def _fast_len(n: int) -> int:
    from scipy.fft import next_fast_len

    return int(next_fast_len(int(n), real=True))


def write_recording(path: str, data: NDArray[np.float64], rate_hz: float,
                    subtype: str = "PCM_24", *, order: tuple[int, int] = (0, 1)) -> None:
    """Write a simulated recording; ``order`` picks which simulated channel
    (0 inside, 1 outside) goes to file channel 1 and 2."""
    import soundfile as sf

    sf.write(path, np.ascontiguousarray(data[:, list(order)]), int(rate_hz), subtype=subtype)
