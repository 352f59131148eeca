"""Tests for characterize.transfer: H1 with coherence, sweep deconvolution, onsets.

References outside the project: scipy.signal (csd, welch, coherence, butter,
lfilter, freqz) for the estimators and the true filter response; Bendat &
Piersol, *Random Data* (2010) ch. 9 for what a per-bin noise model must do
(normalised squared errors average 1); the physics sheet §7 for the window
rule (>= 7 time constants); simulate.true_transfer for the simulated truth.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import signal

from characterize.errors import InputError
from characterize.fitting.fit import auto_band
from characterize.simulate import Setup, simulate, true_transfer
from characterize.transfer import cross_spectral_transfer, find_onset, sweep_transfer

FS = 48000.0
# A 2nd-order resonant band-pass (scipy.signal.butter, order 1 band-pass):
# centre ~1 kHz, bandwidth 200 Hz, i.e. Q ~ 5.
BP_B, BP_A = signal.butter(1, [900.0, 1100.0], btype="bandpass", fs=FS)
NPERSEG = 4096  # 11.7 Hz resolution: 17 bins per bandwidth, little resolution bias


def _noise_through_filter(snr_db: float, seed: int, seconds: float = 20.0
                          ) -> tuple[np.ndarray, np.ndarray]:
    """Outside x = white noise; inside y = lfilter(band-pass, x) + output noise."""
    rng = np.random.default_rng(seed)
    x = rng.standard_normal(int(seconds * FS))
    y = signal.lfilter(BP_B, BP_A, x)
    y = y + 10 ** (-snr_db / 20) * np.std(y) * rng.standard_normal(x.size)
    return y, x


@pytest.fixture(scope="module")
def data() -> tuple[np.ndarray, np.ndarray]:
    """20 s of white noise through the band-pass, output SNR 10 dB."""
    return _noise_through_filter(10.0, seed=11)


class TestCrossSpectral:

    def test_h1_equals_scipy_csd_over_welch(self, data) -> None:
        inside, outside = data
        tf = cross_spectral_transfer(inside, outside, FS, nperseg=NPERSEG)
        # scipy.signal.csd(x, y) = conj(X) Y averaged; H1 = G_xy / G_xx (Bendat & Piersol)
        f, gxy = signal.csd(outside, inside, fs=FS, window="hann", nperseg=NPERSEG)
        _, gxx = signal.welch(outside, fs=FS, window="hann", nperseg=NPERSEG)
        np.testing.assert_allclose(tf.freqs_hz, f, rtol=0, atol=1e-9)
        ok = gxx > 0
        assert np.max(np.abs(tf.h[ok] - gxy[ok] / gxx[ok])) < 1e-10 * np.max(np.abs(tf.h[ok]))

    def test_coherence_equals_scipy(self, data) -> None:
        inside, outside = data
        tf = cross_spectral_transfer(inside, outside, FS, nperseg=NPERSEG)
        _, coh = signal.coherence(outside, inside, fs=FS, window="hann", nperseg=NPERSEG)
        assert tf.coherence is not None
        assert np.max(np.abs(tf.coherence - coh)) < 1e-10  # scipy.signal.coherence

    def test_magnitude_agrees_with_freqz(self, data) -> None:
        inside, outside = data
        tf = cross_spectral_transfer(inside, outside, FS, nperseg=NPERSEG)
        _, h_true = signal.freqz(BP_B, BP_A, worN=tf.freqs_hz, fs=FS)
        # away from the band edges (the band-pass has zeros at DC and Nyquist)
        sel = (tf.freqs_hz > 100) & (tf.freqs_hz < 10000)
        # the error of |H1| is the complex error's component along H, standard
        # deviation sigma/sqrt(2) (circular complex noise)
        z = (np.abs(tf.h) - np.abs(h_true))[sel] / (tf.sigma()[sel] / math.sqrt(2))
        assert np.max(np.abs(z)) < 5.0  # ~850 bins: beyond 5 sigma has odds ~5e-4
        assert np.quantile(np.abs(z), 0.95) < 2.5  # Gaussian: 1.96
        assert np.quantile(np.abs(z), 0.95) > 1.5

    @pytest.mark.parametrize("snr_db", [0.0, 10.0, 25.0])
    def test_noise_model_is_honest(self, snr_db: float) -> None:
        # With output noise only, H1 is unbiased and its complex error has
        # E|n|^2 = |H|^2 (1 - g2) / (g2 (n_d - 1)) (Bendat & Piersol 2010 ch. 9),
        # so over many bins the normalised squared error averages 1.
        ratios = []
        for seed in (1, 2):
            inside, outside = _noise_through_filter(snr_db, seed=seed, seconds=12.0)
            tf = cross_spectral_transfer(inside, outside, FS, nperseg=NPERSEG)
            _, h_true = signal.freqz(BP_B, BP_A, worN=tf.freqs_hz, fs=FS)
            sel = (tf.freqs_hz > 300) & (tf.freqs_hz < 3000)  # |H| > 0.07: coherence readable
            ratios.append(np.mean((np.abs(tf.h - h_true)[sel] / tf.sigma()[sel]) ** 2))
        assert 0.6 <= np.mean(ratios) <= 1.6


SWEEP_SETUPS = [
    # (f0 Hz, Q, rate Hz, SNR dB)
    (256.0, 30.0, 48000.0, 40.0),
    (1000.0, 100.0, 44100.0, 30.0),
    (80.0, 10.0, 96000.0, 20.0),
    (1500.0, 8.0, 48000.0, 30.0),
    # low Q at high f0: 25 ringing time constants are only 13 ms, shorter
    # than the simulated room's reflections (up to 21 ms)
    (3000.0, 5.0, 48000.0, 50.0),
]


def _sweep_tf(setup: Setup, seed: int):
    data, sweep = simulate(setup, seed)
    assert sweep is not None
    return sweep_transfer(data[:, 0], data[:, 1], setup.rate_hz, sweep)


class TestSweepTransfer:
    @pytest.mark.parametrize("f0, q, fs, snr", SWEEP_SETUPS,
                             ids=[f"{s[0]:g}Hz-Q{s[1]:g}-{s[2]:g}-{s[3]:g}dB"
                                  for s in SWEEP_SETUPS])
    def test_h_within_noise_of_truth(self, f0: float, q: float, fs: float, snr: float) -> None:
        ratios = []
        for seed in (0, 1, 2):
            setup = Setup(f0_hz=f0, q=q, rate_hz=fs, snr_db=snr, delay_s=1e-4)
            tf = _sweep_tf(setup, seed)
            h_true = true_transfer(setup, tf.freqs_hz)  # the simulator's exact ratio
            lo, hi = auto_band(f0, q, tf.excited_band_hz)  # the fit band around the truth
            sel = (tf.freqs_hz >= lo) & (tf.freqs_hz <= hi)
            z2 = (np.abs(tf.h - h_true)[sel] / tf.sigma(np.abs(h_true))[sel]) ** 2
            # no outliers: |n|^2/sigma^2 is exponential(1) for circular Gaussian
            # noise, P(> 25) = e^-25
            assert np.max(z2) < 25.0
            ratios.append(float(np.mean(z2)))
        # honest per-bin noise: normalised squared error averages 1 (brief: [0.6, 1.6])
        assert 0.6 <= np.mean(ratios) <= 1.6, ratios

    @pytest.mark.parametrize("f0, q, fs", [(256.0, 30.0, 48000.0), (60.0, 200.0, 44100.0),
                                           (3000.0, 20.0, 96000.0)])
    def test_window_holds_seven_time_constants(self, f0: float, q: float, fs: float) -> None:
        setup = Setup(f0_hz=f0, q=q, rate_hz=fs, snr_db=40.0)
        data, sweep = simulate(setup, 3)
        tf = sweep_transfer(data[:, 0], data[:, 1], fs, sweep)
        assert tf.window is not None
        tau = q / (math.pi * f0)  # physics sheet §2: tau = Q / (pi f0)
        # simulate.default_sweep leaves a tail of 12 tau, so the recording allows it
        assert tf.window.length_s >= 7 * tau  # physics sheet §7: keep T_w >= 7 tau
        assert tf.window.length_s <= data.shape[0] / fs

    def test_window_longer_than_recording_allows_is_refused(self) -> None:
        setup = Setup(f0_hz=500.0, q=20.0, snr_db=40.0)
        data, sweep = simulate(setup, 0)
        # a window the recording cannot hold is a bad --window option (exit 2)
        with pytest.raises(InputError, match="window"):
            sweep_transfer(data[:, 0], data[:, 1], setup.rate_hz, sweep, window_s=60.0)

    def test_polarity_and_delay_survive_the_ratio(self) -> None:
        setup = Setup(f0_hz=400.0, q=25.0, snr_db=50.0, inverted=True, delay_s=1.5e-4)
        tf = _sweep_tf(setup, 4)
        h_true = true_transfer(setup, tf.freqs_hz)
        k = int(np.argmin(np.abs(tf.freqs_hz - 400.0)))
        f = tf.freqs_hz[k]
        # physics sheet §2: H = 1/(1 - (f/f0)^2 + j f/(Q f0)), -90 deg at f0;
        # inversion adds 180 deg and the delay -2 pi f tau
        x = f / 400.0
        expect = -math.atan2(x / 25.0, 1 - x * x) + np.pi - 2 * np.pi * f * 1.5e-4
        assert np.angle(tf.h[k] / np.exp(1j * expect)) == pytest.approx(0.0, abs=0.05)
        assert np.angle(tf.h[k] / h_true[k]) == pytest.approx(0.0, abs=0.02)


class TestFindOnset:
    @pytest.mark.parametrize("delay", [3000, 12345, 40000])
    @pytest.mark.parametrize("fs", [44100.0, 96000.0])
    def test_finds_start_of_causal_band_limited_response(self, delay: int, fs: float) -> None:
        # a causal band-limited response (scipy.signal.butter band-pass through
        # lfilter) that starts at a known sample, its peak several ms later
        b, a = signal.butter(4, [60.0, 8000.0], btype="bandpass", fs=fs)
        n = 2**17
        imp = np.zeros(n)
        imp[delay] = 1.0
        ir = signal.lfilter(b, a, imp)
        ir = ir + 1e-7 * np.max(np.abs(ir)) * np.random.default_rng(delay).standard_normal(n)
        i_peak = int(np.argmax(np.abs(ir)))
        assert i_peak > delay + 2  # the peak alone would start too late
        onset = find_onset(ir, fs, max_lookback=int(0.02 * fs))
        # never after the true start; at most the 0.5 ms envelope's half-width
        # (and the 1e-4 threshold) before it
        assert delay - int(5e-4 * fs) <= onset <= delay

    def test_wraps_around_a_circular_buffer(self) -> None:
        # the response starts near the end of the buffer and peaks after the wrap
        # (deconvolution buffers are circular)
        fs = 48000.0
        b, a = signal.butter(4, [60.0, 8000.0], btype="bandpass", fs=fs)
        n = 2**16
        imp = np.zeros(n)
        imp[100] = 1.0
        ir = np.roll(signal.lfilter(b, a, imp), -105)  # starts at index n - 5
        onset = find_onset(ir, fs, max_lookback=int(0.02 * fs))
        assert (n - 5) - int(5e-4 * fs) <= onset % n <= n - 5
