"""characterize.dsp against its outside reference, scipy.signal (the general-purpose
library whose results these numpy versions must reproduce)."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import signal

from characterize import dsp


@pytest.mark.parametrize("order", [1, 2, 4, 8, 16])
@pytest.mark.parametrize("btype", ["lowpass", "highpass"])
def test_butterworth_response_matches_scipy(order: int, btype: str) -> None:
    wc = 2 * np.pi * 137.0
    w = 2 * np.pi * np.geomspace(1.0, 20000.0, 500)
    z, p, k = dsp.butter_analog_zpk(order, wc, btype)
    zs, ps, ks = signal.butter(order, wc, btype=btype, analog=True, output="zpk")
    h = dsp.freqs_zpk(z, p, k, w)
    hs = signal.freqs_zpk(zs, ps, ks, worN=w)[1]
    np.testing.assert_allclose(h, hs, rtol=1e-9, atol=1e-12)
    # -3 dB at the corner (the definition of Butterworth's cut-off)
    h_c = dsp.freqs_zpk(z, p, k, np.array([wc]))[0]
    assert abs(h_c) == pytest.approx(1 / np.sqrt(2), rel=1e-12)


def _curves(seed: int) -> list[np.ndarray]:
    """Resonance magnitude curves in dB with noise, plateaus and edge peaks."""
    rng = np.random.default_rng(seed)
    f = np.linspace(50.0, 800.0, int(rng.integers(20, 3000)))
    out = []
    for _ in range(4):
        h = np.zeros(f.size, dtype=complex)
        for _ in range(int(rng.integers(1, 4))):
            f0, q = rng.uniform(60, 780), rng.uniform(3, 150)
            x = f / f0
            h += rng.uniform(0.3, 3) / (1 - x**2 + 1j * x / q)
        db = 20 * np.log10(np.abs(h) + 1e-6) + rng.normal(0, rng.uniform(0, 1), f.size)
        out.append(db)
    plateau = np.round(out[0], 1)  # quantised: flat tops and flat stretches
    out.append(plateau)
    out.append(np.array([0.0, 1.0, 1.0, 1.0, 0.0, 2.0, 2.0, 3.0, 3.0, 1.0, 5.0]))
    return out


@pytest.mark.parametrize("seed", range(12))
def test_find_peaks_and_widths_match_scipy(seed: int) -> None:
    for x in _curves(seed):
        for prom in (0.0, 1.0, 6.0):
            peaks, prominences = dsp.find_peaks(x, prom)
            ps, props = signal.find_peaks(x, prominence=prom)
            np.testing.assert_array_equal(peaks, ps)
            np.testing.assert_allclose(prominences, props["prominences"], rtol=0, atol=1e-12)
        if ps.size:
            lin = 10 ** (x / 20)
            for rel in (0.5, 1 - 1 / np.sqrt(2), 1.0):
                np.testing.assert_allclose(dsp.peak_widths(lin, ps, rel),
                                           signal.peak_widths(lin, ps, rel_height=rel)[0],
                                           rtol=1e-12, atol=1e-12)


def test_short_and_flat_inputs_have_no_peaks() -> None:
    for x in (np.array([]), np.array([1.0]), np.array([1.0, 2.0]), np.ones(10)):
        peaks, prom = dsp.find_peaks(x, 0.0)
        assert peaks.size == 0 and prom.size == 0
