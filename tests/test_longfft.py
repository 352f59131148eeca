"""Tests for the memory-lean long-recording path: characterize.longfft and the
single-precision, kept-stretch deconvolution in characterize.transfer.

References outside the project: numpy.fft.rfft / irfft (the reference real DFT,
double precision) for the four-step transform; the double-precision
deconvolution of the same recordings (whose accuracy tests/test_transfer.py and
tests/test_fit.py check against simulate.true_transfer) for the long path.
Tolerances: single-precision storage rounds each value to 2^-24 relative
(IEEE 754 binary32), a few times per transform; 3e-6 of the rms is a bound with
margin (common practice for float32 FFT checks, no published source).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from characterize.excitation import SweepParams
from characterize.fitting.fit import fit_transfer
from characterize.longfft import LongSpectrum
from characterize.simulate import Setup, simulate
from characterize.transfer import sweep as tr


def _natural(spec: LongSpectrum) -> np.ndarray:
    """The stored spectrum as numpy.fft.rfft's X[0..N]."""
    m = spec.n_fft
    out = np.empty(m // 2 + 1, dtype=np.complex128)
    out[1:m // 2] = spec.values_at(np.arange(1, m // 2))
    out[0], out[m // 2] = spec.buf[0].real, spec.buf[0].imag
    return out


@pytest.mark.parametrize("n_min", [10, 97, 1000, 12345, 300001, 1_000_003])
def test_forward_matches_numpy_rfft(n_min: int) -> None:
    rng = np.random.default_rng(n_min)
    x = rng.standard_normal(n_min).astype(np.float32)
    spec = LongSpectrum.for_length(n_min)
    assert spec.n_fft >= n_min and spec.n_fft == 2 * spec.n1 * spec.n2
    spec.signal[:n_min] = x
    spec.forward()
    ref = np.fft.rfft(x.astype(np.float64), spec.n_fft)  # reference: numpy, double precision
    rms = math.sqrt(float(np.mean(np.abs(ref) ** 2)))
    assert np.max(np.abs(_natural(spec) - ref)) < 3e-6 * rms
    spec.inverse()
    back = spec.signal
    assert np.max(np.abs(back[:n_min] - x)) < 3e-6 * float(np.std(x))
    assert np.max(np.abs(back[n_min:])) < 3e-6 * float(np.std(x))  # the zero padding stays zero


def test_odd_complex_length_and_product() -> None:
    """An odd N = n1 n2 (no self-paired bin) and the spectral product: the
    circular convolution of two signals, against numpy's."""
    spec, other = LongSpectrum(9, 15), LongSpectrum(9, 15)
    rng = np.random.default_rng(3)
    a = rng.standard_normal(spec.n_fft).astype(np.float32)
    b = rng.standard_normal(spec.n_fft).astype(np.float32)
    spec.signal[:] = a
    other.signal[:] = b
    spec.forward()
    other.forward()
    spec.multiply(other)
    spec.inverse()
    ref = np.fft.irfft(np.fft.rfft(a.astype(np.float64)) * np.fft.rfft(b.astype(np.float64)),
                       spec.n_fft)
    assert np.max(np.abs(spec.signal - ref)) < 3e-6 * float(np.max(np.abs(ref)))


def test_blocks_visit_every_bin_once() -> None:
    spec = LongSpectrum(12, 20)
    seen = np.concatenate([k for _, k in spec.blocks()])
    assert np.array_equal(np.sort(seen), np.arange(spec.n))
    # apply() sees the value of bin k: build a spectrum whose value is k and read it back
    spec.apply(lambda k, v: k.astype(np.complex128), edge=lambda v: 0j)
    assert np.array_equal(spec.values_at(np.arange(1, spec.n)).real, np.arange(1, spec.n))


def _cases() -> list[tuple[Setup, bool]]:
    """A seeded family over the nominal ranges (f0 60 Hz-3 kHz, Q 4-150, SNR 20-60
    dB, three rates), two-microphone, plus one-microphone cases without room
    reflections (the one-microphone window ends at the first one), plus wide
    sweeps with lead-ins (where the negative-time noise is most likely to wrap
    into what is read)."""
    rng = np.random.default_rng(20261201)
    out = []
    for i in range(9):
        f0 = float(np.exp(rng.uniform(math.log(60), math.log(3000))))
        q = float(np.exp(rng.uniform(math.log(4), math.log(150))))
        fs = (16000.0, 44100.0, 48000.0)[i % 3]
        setup = Setup(f0_hz=min(f0, 0.3 * fs / 8), q=q, rate_hz=fs,
                      snr_db=float(rng.uniform(20, 60)))
        one_mic = i % 3 == 0
        if one_mic:
            setup = setup.with_(reflections=())
        out.append((setup, one_mic))
    # wide sweeps (20 Hz to 0.45 fs) with f0 low in them, so that the sweep passed
    # f0 long before its end; with a lead-in before the sweep and without
    for i, (f0, q, lead_s) in enumerate(((120.0, 30.0, 0.02), (400.0, 60.0, 2.0),
                                         (250.0, 15.0, 5.0))):
        fs = 16000.0
        sweep = SweepParams(start_hz=20.0, stop_hz=0.45 * fs, duration_s=6.0 + 2 * i,
                            rate_hz=fs, level_dbfs=-6.0, tail_s=1.0 + i)
        out.append((Setup(f0_hz=f0, q=q, rate_hz=fs, snr_db=40.0, sweep=sweep,
                          latency_s=lead_s), False))
    return out


N_CASES = 12


@pytest.mark.parametrize("short_keep", [False, True])
@pytest.mark.parametrize("case", range(N_CASES))
def test_long_path_gives_the_double_precision_result(case: int, short_keep: bool,
                                                     monkeypatch: pytest.MonkeyPatch) -> None:
    """The long-recording path (forced here on short recordings) gives the same
    window, fit and THD as the double-precision full-grid path, to a small
    fraction of the standard errors, although it keeps only stretches of the
    responses in single precision. With a short kept stretch (``keep_s``, both
    paths) its FFT grid is also shorter than recording plus sweep, as on long
    recordings, and the negative-time noise must wrap around out of the way."""
    setup, one_mic = _cases()[case]
    if short_keep:  # ten ringing time constants: shorter than the sweep and its tail
        monkeypatch.setattr(tr, "KEEP_S", 10 * setup.q / (math.pi * setup.f0_hz) + 0.3)
    data, sweep = simulate(setup, seed=case)
    assert sweep is not None
    data = data.astype(np.float32)  # what read_audio holds
    outside = None if one_mic else data[:, 1]
    ref_tf = tr.sweep_transfer(data[:, 0], outside, setup.rate_hz, sweep)
    monkeypatch.setattr(tr, "LONG_FFT_POINTS", 0)
    long_tf = tr.sweep_transfer(data[:, 0], outside, setup.rate_hz, sweep)
    assert long_tf.window.length_s == ref_tf.window.length_s
    ref, got = fit_transfer(ref_tf), fit_transfer(long_tf)
    assert abs(got.f0_hz - ref.f0_hz) < 0.01 * ref.f0_stderr_hz
    assert abs(got.q - ref.q) < 0.01 * ref.q_stderr
    assert got.q_stderr == pytest.approx(ref.q_stderr, rel=0.01)
    thd_ref, thd = ref_tf.thd_inside, long_tf.thd_inside
    ok = np.isfinite(thd_ref) & (thd_ref > 1e-4)
    assert np.array_equal(ok, np.isfinite(thd) & (thd > 1e-4))
    # 1e-5 absolute: the single-precision grid's own error floor in the harmonic
    # stretches (-100 dB re the fundamental, far below a loudspeaker's distortion)
    assert np.allclose(thd[ok], thd_ref[ok], rtol=0.01, atol=1e-5)


def test_recording_stopped_before_the_sweep_files_tail(monkeypatch: pytest.MonkeyPatch) -> None:
    """A sweep file whose silent tail is longer than what was recorded after the
    sweep: the long path's grid still holds the whole sweep file, and gives the
    double-precision path's fit."""
    fs = 16000.0
    sweep_p = SweepParams(start_hz=40.0, stop_hz=4000.0, duration_s=4.0, rate_hz=fs,
                          level_dbfs=-6.0, tail_s=4.0)
    setup = Setup(f0_hz=500.0, q=20.0, rate_hz=fs, snr_db=40.0, sweep=sweep_p)
    data, sweep = simulate(setup, seed=3)
    assert sweep is not None
    cut = data[: int(4.4 * fs)].astype(np.float32)  # 0.4 s after the sweep, not 4 s
    ref = fit_transfer(tr.sweep_transfer(cut[:, 0], cut[:, 1], fs, sweep))
    monkeypatch.setattr(tr, "LONG_FFT_POINTS", 0)
    got = fit_transfer(tr.sweep_transfer(cut[:, 0], cut[:, 1], fs, sweep))
    assert abs(got.f0_hz - ref.f0_hz) < 0.01 * ref.f0_stderr_hz
    assert abs(got.q - ref.q) < 0.01 * ref.q_stderr
