"""Cross-spectral path: H1 = G_xy / G_xx (or H2) with Welch averaging and the
ordinary coherence (Bendat & Piersol, *Random Data*, 4th ed. 2010, ch. 6 and 9),
for any broadband excitation; the Hann window's power kernel, which the fit
applies to the model so that the Welch resolution does not bias Q."""

from __future__ import annotations

import math

import numpy as np
from numpy.typing import NDArray

from .core import TransferFunction, estimate_peak, peak_search_values

#: Segments averaged in the cross-spectral path should be at least this long,
#: in units of 1/(bandwidth) = Q/f0 (Bendat & Piersol resolution bias rule).
SEGMENT_BANDWIDTHS = 16.0
#: Shortest Welch segment (s) when the recording allows: the reference spectrum
#: must be resolved finely enough (room ripple) for the kernel model to hold.
MIN_SEGMENT_S = 0.1
#: Minimum number of Welch averages for the coherence-based error to hold.
MIN_AVERAGES = 8


def hann_power_kernel(nperseg: int, rate_hz: float, oversample: int = 16,
                      half_width_bins: int = 6
                      ) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """The smoothing a Hann-windowed Welch estimate applies to a transfer function.

    For broadband excitation with a locally flat spectrum, the expected cross-
    and auto-spectra are the true ones convolved with the window's power
    spectrum |W(f)|^2, so E[H1] ~ (H * |W|^2) / sum |W|^2 (Bendat & Piersol,
    *Random Data*, 4th ed. 2010, §8.5 on resolution bias; Harris, "On the use
    of windows for harmonic analysis with the discrete Fourier transform",
    Proc. IEEE 66(1), 1978, for the Hann window). Returns frequency offsets (Hz)
    and weights on a grid ``oversample`` times finer than the bins, over
    +-``half_width_bins`` bins.
    """
    w = np.hanning(nperseg)
    n_big = nperseg * oversample
    spec = np.abs(np.fft.fft(w, n_big)) ** 2
    k = np.arange(-half_width_bins * oversample, half_width_bins * oversample + 1)
    weights = spec[k % n_big]
    weights = weights / weights.sum()
    return k * rate_hz / n_big, weights


#: Samples transformed at once in the Welch loop (bounds its memory: about 8 bytes
#: times this, for each of a few arrays).
WELCH_BLOCK_SAMPLES = 2**21


def welch_spectra(x: NDArray[np.floating], y: NDArray[np.floating], rate_hz: float,
                  nperseg: int) -> tuple[NDArray[np.floating], NDArray[np.complex128],
                                         NDArray[np.float64], NDArray[np.float64]]:
    """Welch's averaged cross- and auto-spectra G_xy, G_xx, G_yy (one-sided
    densities), as scipy.signal.csd and welch compute them with a periodic Hann
    window, 50 % overlap and each segment's mean removed, but in blocks of
    segments, so that memory stays near the size of the input (which may be
    float32).

    References
    ----------
    P.D. Welch, "The use of fast Fourier transform for the estimation of power
    spectra", IEEE Trans. Audio Electroacoust. 15(2), 70-73 (1967).
    """
    from scipy import fft as sfft
    from scipy.signal import get_window

    m = int(nperseg)
    step = m - m // 2
    w = get_window("hann", m)
    n_seg = (x.size - m) // step + 1
    nf = m // 2 + 1
    gxy = np.zeros(nf, dtype=np.complex128)
    gxx = np.zeros(nf)
    gyy = np.zeros(nf)
    block = max(1, WELCH_BLOCK_SAMPLES // m)
    for b0 in range(0, n_seg, block):
        starts = (np.arange(b0, min(n_seg, b0 + block)) * step)[:, None] + np.arange(m)
        xs = np.asarray(x[starts], dtype=np.float64)
        ys = np.asarray(y[starts], dtype=np.float64)
        xs -= xs.mean(axis=1, keepdims=True)
        ys -= ys.mean(axis=1, keepdims=True)
        fx = sfft.rfft(xs * w, axis=1)
        fy = sfft.rfft(ys * w, axis=1)
        gxy += np.sum(np.conj(fx) * fy, axis=0)
        gxx += np.sum(np.abs(fx) ** 2, axis=0)
        gyy += np.sum(np.abs(fy) ** 2, axis=0)
    scale = 1.0 / (rate_hz * float(np.sum(w * w)) * max(n_seg, 1))
    one_sided = np.full(nf, 2.0)
    one_sided[0] = 1.0
    if m % 2 == 0:
        one_sided[-1] = 1.0
    k = scale * one_sided
    return np.fft.rfftfreq(m, 1 / rate_hz), gxy * k, gxx * k, gyy * k


def cross_spectral_transfer(inside: NDArray[np.floating], outside: NDArray[np.floating],
                            rate_hz: float, *, nperseg: int | None = None,
                            estimator: str = "h1") -> TransferFunction:
    """H1 = G_xy/G_xx or H2 = G_yy/G_yx (x outside, y inside) with Welch
    averaging and the ordinary coherence gamma^2 = |G_xy|^2/(G_xx G_yy) = H1/H2.

    Noise at the reference (outside) microphone biases H1 low, noise at the
    inside microphone biases H2 high (Bendat & Piersol, *Random Data*, 4th ed.
    2010, ch. 6); with the reference at the mouth, ambient sound there is
    excitation, not error, so H1 is the default.

    The per-bin random error of H1 (Bendat & Piersol, *Random Data*, 4th ed.
    2010, ch. 9) is

    .. math::

        \\varepsilon \\approx \\sqrt{\\frac{1-\\gamma^2}{2\\gamma^2 (n_d - 1)}}

    for the magnitude (relative) and about the same in radians for the phase,
    so the complex noise variance is :math:`2\\varepsilon^2|H|^2`. ``n_d`` is
    the number of averages, corrected for the 50 % overlap of Hann segments.
    The segment length is chosen from a first pass so that the resolution is a
    small fraction (1/``SEGMENT_BANDWIDTHS``) of the resonance's bandwidth.
    """
    if estimator not in ("h1", "h2"):
        raise ValueError(f"estimator must be one of ['h1', 'h2'], got {estimator!r}")
    n = inside.size

    def estimate(m: int) -> TransferFunction:
        m = int(min(m, n))
        f, gxy, gxx, gyy = welch_spectra(outside, inside, rate_hz, m)
        with np.errstate(divide="ignore", invalid="ignore"):
            h = gxy / gxx if estimator == "h1" else gyy / np.conj(gxy)
            coh = np.clip(np.abs(gxy) ** 2 / (gxx * gyy), 0.0, 1.0)
        n_seg = max(1, (n - m) // (m // 2) + 1)
        n_d = max(1.5, n_seg / 1.056)  # Hann, 50 % overlap (Welch 1967 variance ratio)
        with np.errstate(divide="ignore", invalid="ignore"):
            # coherence 1 (identical channels) would give zero noise: keep a floor
            rel2 = np.maximum(1 - coh, 1e-12) / (np.maximum(coh, 1e-12) * (n_d - 1))
        rel2 = np.where(np.isfinite(rel2), rel2, 1e6)
        level = np.max(gxx) if gxx.size else 1.0
        excited = f[gxx > 1e-6 * level] if np.any(gxx > 0) else f
        lo = max(float(excited[1]) if excited.size > 1 else f[1], 2 * rate_hz / m)
        hi = min(float(excited[-1]) if excited.size else rate_hz / 2, 0.45 * rate_hz)
        return TransferFunction(np.asarray(f, dtype=np.float64), h.astype(np.complex128),
                                np.zeros_like(f), rel2, (lo, hi),
                                f"cross-spectral-{estimator}",
                                10 * np.log10(np.maximum(gxx, 1e-300)),
                                coherence=coh, averages=int(n_seg),
                                kernel=hann_power_kernel(m, rate_hz),
                                kernel_form="linear" if estimator == "h1" else "h2")

    if nperseg is not None:
        return estimate(nperseg)
    m0 = 2 ** int(np.clip(round(math.log2(max(n / 16, 256))), 8, 20))
    first = estimate(m0)
    f0, q = estimate_peak(first.freqs_hz, peak_search_values(first), first.excited_band_hz)
    want = max(SEGMENT_BANDWIDTHS * q / f0, MIN_SEGMENT_S) * rate_hz
    limit = 2 * n // (MIN_AVERAGES + 1)
    m = int(2 ** math.ceil(math.log2(max(want, 256))))
    while m > limit and m > 256:
        m //= 2
    return estimate(m)
