"""Complex least-squares fit of the damped-oscillator model with lmfit.

With independent circular complex Gaussian noise per bin, stacking the real
and imaginary residuals, each divided by its standard deviation, makes least
squares the maximum-likelihood estimate (S.M. Kay, *Fundamentals of
Statistical Signal Processing: Estimation Theory*, 1993, ch. 15), and the
covariance matrix gives honest standard errors when the weights are right.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass

import numpy as np
from numpy.typing import NDArray

from ..errors import FitError
from ..transfer import TransferFunction, estimate_peak
from .models import inside_outside, oscillator

#: The automatic fit band spans f0 (1 -+ AUTO_BAND_HALF_WIDTH / Q), i.e. this
#: many half-power half-bandwidths each side, within [0.4, 2] f0.
AUTO_BAND_HALF_WIDTH = 3.0
AUTO_BAND_LIMITS = (0.4, 2.0)
#: Largest inter-channel delay searched (s): 2 ms is 0.7 m of path difference.
MAX_DELAY_S = 2e-3
#: Fewest frequency points a fit may use.
MIN_POINTS = 8
#: Most frequency points fitted; denser grids are thinned evenly.
MAX_POINTS = 4000


@dataclass(frozen=True, slots=True)
class FitResult:
    """Fitted damped oscillator (SI units). Standard errors are 1 sigma."""

    f0_hz: float
    f0_stderr_hz: float
    q: float
    q_stderr: float
    gain: float
    gain_stderr: float
    delay_s: float
    delay_stderr_s: float
    polarity_inverted: bool
    band_hz: tuple[float, float]
    n_points: int
    chi2: float
    reduced_chi2: float
    stderr_scale: float  # factor applied to the covariance errors (>= 1)
    correlation_f0_q: float
    nfev: int

    def to_dict(self) -> dict[str, object]:
        d = asdict(self)
        d["band_hz"] = [float(self.band_hz[0]), float(self.band_hz[1])]
        return {k: (float(v) if isinstance(v, (np.floating, np.integer)) else v)
                for k, v in d.items()}

    def model(self, freqs_hz: NDArray[np.float64]) -> NDArray[np.complex128]:
        return inside_outside(freqs_hz, self.f0_hz, self.q, self.gain, self.delay_s,
                              -1.0 if self.polarity_inverted else 1.0)

    def __str__(self) -> str:
        return (f"f0 = {self.f0_hz:.3f} ± {self.f0_stderr_hz:.3f} Hz, "
                f"Q = {self.q:.2f} ± {self.q_stderr:.2f}")


def auto_band(f0_hz: float, q: float, limits: tuple[float, float]) -> tuple[float, float]:
    """The automatic fit band around a resonance, clipped to ``limits``."""
    lo = f0_hz * max(AUTO_BAND_LIMITS[0], 1 - AUTO_BAND_HALF_WIDTH / q)
    hi = f0_hz * min(AUTO_BAND_LIMITS[1], 1 + AUTO_BAND_HALF_WIDTH / q)
    return max(lo, limits[0]), min(hi, limits[1])


def _select(tf: TransferFunction, band: tuple[float, float]) -> NDArray[np.intp]:
    f = tf.freqs_hz
    idx = np.flatnonzero((f >= band[0]) & (f <= band[1]) & np.isfinite(tf.h)
                         & np.isfinite(tf.noise_a) & np.isfinite(tf.noise_b))
    if idx.size > MAX_POINTS:
        idx = idx[np.linspace(0, idx.size - 1, MAX_POINTS).round().astype(int)]
    return idx


def initial_delay_and_sign(f: NDArray[np.float64], h: NDArray[np.complex128],
                           weight: NDArray[np.float64], f0_hz: float, q: float
                           ) -> tuple[float, float, float]:
    """Delay, sign and gain start values: maximise the matched-filter statistic
    |sum w conj(R) H exp(j 2 pi f tau)| over a grid of delays (the least-squares
    solution for a complex gain at each delay), refine by a parabola, and read
    the sign and gain off the optimal complex gain."""
    r = oscillator(f, f0_hz, q)
    z = weight * np.conj(r) * h
    norm = float(np.sum(weight * np.abs(r) ** 2))
    f_hi = float(np.max(f))
    step = 0.05 / (2 * np.pi * f_hi)
    taus = np.arange(-MAX_DELAY_S, MAX_DELAY_S + step, step)
    best = np.empty(taus.size)
    for i0 in range(0, taus.size, 256):
        t = taus[i0:i0 + 256]
        best[i0:i0 + 256] = np.abs(np.exp(2j * np.pi * np.outer(t, f)) @ z)
    i = int(np.argmax(best))
    tau = float(taus[i])
    if 0 < i < taus.size - 1:
        y0, y1, y2 = best[i - 1], best[i], best[i + 1]
        den = y0 - 2 * y1 + y2
        if den < 0:
            tau += 0.5 * (y0 - y2) / den * step
    a = complex(np.sum(z * np.exp(2j * np.pi * f * tau))) / norm
    sign = -1.0 if a.real < 0 else 1.0
    return tau, sign, abs(a)


def fit_transfer(tf: TransferFunction, band_hz: tuple[float, float] | None = None
                 ) -> FitResult:
    """Fit ``sign * G * R(f; f0, Q) * exp(-j 2 pi f tau)`` to ``tf``.

    Parameters
    ----------
    tf : TransferFunction
        Measured H(f) with its noise model.
    band_hz : (lo, hi), optional
        Fit exactly this band. Default: found around the main peak
        (:func:`auto_band`), re-centred once on the first fit.

    Raises
    ------
    FitError
        No peak, too few points, or no convergence.
    """
    import lmfit

    excited = tf.excited_band_hz
    f0, q = estimate_peak(tf.freqs_hz, tf.h, excited if band_hz is None else band_hz)
    band = band_hz if band_hz is not None else auto_band(f0, q, excited)
    # start values for delay and sign from a wider band, where the phase slope shows
    wide = _select(tf, (max(excited[0], f0 / 3), min(excited[1], 3 * f0)))
    if wide.size < MIN_POINTS:
        wide = _select(tf, band)
    sig_w = tf.sigma()[wide]
    w = 1.0 / np.maximum(sig_w, 1e-30) ** 2
    tau0, sign, g_lin = initial_delay_and_sign(tf.freqs_hz[wide], tf.h[wide], w, f0, q)
    g0 = g_lin

    result = None
    fitted: tuple[float, float, float] | None = None  # f0, Q, G of the previous pass
    for _ in range(2):
        idx = _select(tf, band)
        if idx.size < MIN_POINTS:
            raise FitError(f"only {idx.size} frequency points between {band[0]:.1f} and "
                           f"{band[1]:.1f} Hz; record longer or widen the band")
        f = tf.freqs_hz[idx]
        h = tf.h[idx]
        # per-bin noise with |H| from the previous pass's model (less noisy than data)
        h_abs = np.abs(h) if fitted is None else np.abs(fitted[2] * oscillator(f, *fitted[:2]))
        sig = np.sqrt(tf.noise_a[idx] + h_abs**2 * tf.noise_b[idx]) / math.sqrt(2)
        sig = np.maximum(sig, 1e-30)

        params = lmfit.Parameters()
        params.add("f0", value=min(max(f0, band[0]), band[1]), min=band[0], max=band[1])
        params.add("q", value=q, min=0.2, max=1e5)
        params.add("gain", value=g0, min=0.0)
        params.add("delay", value=tau0, min=-MAX_DELAY_S, max=MAX_DELAY_S)

        def residual(p: lmfit.Parameters, f: NDArray[np.float64] = f,
                     h: NDArray[np.complex128] = h, sig: NDArray[np.float64] = sig
                     ) -> NDArray[np.float64]:
            m = inside_outside(f, p["f0"].value, p["q"].value, p["gain"].value,
                               p["delay"].value, sign)
            d = (h - m) / sig
            return np.concatenate([d.real, d.imag])

        mini = lmfit.Minimizer(residual, params, scale_covar=False, nan_policy="raise")
        result = mini.minimize(method="leastsq")
        if not result.success:
            raise FitError(f"the fit did not converge ({result.message})")
        pv = result.params
        f0, q, g0, tau0 = (pv["f0"].value, pv["q"].value, pv["gain"].value, pv["delay"].value)
        fitted = (f0, q, g0)
        if band_hz is None:
            band = auto_band(f0, q, excited)
    assert result is not None
    if result.covar is None or not result.errorbars:
        raise FitError("the fit converged but its covariance could not be estimated "
                       "(parameters at a bound or degenerate)")
    dof = max(1, result.ndata - result.nvarys)
    redchi = float(result.chisqr / dof)
    scale = math.sqrt(max(1.0, redchi))
    pv = result.params
    names = list(result.var_names)
    cov = np.asarray(result.covar)
    i_f, i_q = names.index("f0"), names.index("q")
    corr = float(cov[i_f, i_q] / math.sqrt(cov[i_f, i_f] * cov[i_q, i_q]))

    def se(name: str) -> float:
        k = names.index(name)
        return float(math.sqrt(cov[k, k]) * scale)

    return FitResult(
        f0_hz=float(pv["f0"].value), f0_stderr_hz=se("f0"),
        q=float(pv["q"].value), q_stderr=se("q"),
        gain=float(pv["gain"].value), gain_stderr=se("gain"),
        delay_s=float(pv["delay"].value), delay_stderr_s=se("delay"),
        polarity_inverted=sign < 0,
        band_hz=(float(band[0]), float(band[1])) if band_hz is None else band_hz,
        n_points=int(result.ndata // 2), chi2=float(result.chisqr), reduced_chi2=redchi,
        stderr_scale=scale, correlation_f0_q=corr, nfev=int(result.nfev),
    )
