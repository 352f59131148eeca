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
from typing import Any

import numpy as np
from numpy.typing import NDArray

from ..errors import FitError
from ..transfer import TransferFunction, estimate_peak, peak_search_values
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
    stderr_scale: float  # factor applied to the covariance errors
    weighting: str  # "noise-estimate" or "residuals" (no noise estimate available)
    correlation_f0_q: float
    nfev: int
    #: Cramer-Rao bounds (1 sigma) at the estimate, from the Fisher information of
    #: the complex-Gaussian likelihood with the per-bin noise model (unscaled).
    crlb_f0_hz: float = math.nan
    crlb_q: float = math.nan
    #: "oscillator" (this module), "multi-mode", "oscillator-with-background"
    #: (fitting.modes) or "damped-sinusoid" (fitting.ringdown)
    method: str = "oscillator"

    def to_dict(self) -> dict[str, object]:
        d = asdict(self)
        d["band_hz"] = [float(self.band_hz[0]), float(self.band_hz[1])]
        d["crlb"] = {"f0_hz": d.pop("crlb_f0_hz"), "q": d.pop("crlb_q")}
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
    idx = np.flatnonzero((f >= band[0]) & (f <= band[1]) & np.isfinite(tf.h))
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


Kernel = tuple[NDArray[np.float64], NDArray[np.float64]] | None


def model_at(p: NDArray[np.float64], f: NDArray[np.float64], sign: float,
             kernel: Kernel = None, form: str = "linear") -> NDArray[np.complex128]:
    """The model at ``p = [f0_hz, q, gain, delay_s]``, smoothed by the
    estimator's spectral ``kernel`` (offsets Hz, weights) when there is one:
    ``H * K`` for H1, ``(|H|^2 * K) / (H^* * K)`` for H2."""
    if kernel is None:
        return inside_outside(f, p[0], p[1], p[2], p[3], sign)
    off, wts = kernel
    grid = f[:, None] + off[None, :]
    m = inside_outside(grid, p[0], p[1], p[2], p[3], sign)
    return smooth(m, wts, form)


def smooth(m: NDArray[np.complex128], wts: NDArray[np.float64], form: str
           ) -> NDArray[np.complex128]:
    """Apply kernel weights (one row shared, or one row per point) to a model
    evaluated on the kernel's offsets (points x offsets)."""
    out: Any
    if wts.ndim == 1:
        if form == "h2":
            out = (np.abs(m) ** 2 @ wts) / (np.conj(m) @ wts)
        else:
            out = m @ wts
    elif form == "h2":
        out = np.sum(np.abs(m) ** 2 * wts, axis=1) / np.sum(np.conj(m) * wts, axis=1)
    else:
        out = np.sum(m * wts, axis=1)
    return out


def local_kernel(tf: TransferFunction, f: NDArray[np.float64]) -> Kernel:
    """The estimator's kernel at points ``f``, weighted by the excitation's own
    spectrum across it: E[G_xy](f) = sum_j H(f + o_j) S_xx(f + o_j) K_j, so a
    slope of S_xx across the kernel (room reflections) does not shift f0. S_xx
    is the measured reference spectrum, interpolated (Bendat & Piersol 2010,
    §8.5, for the convolution form)."""
    if tf.kernel is None:
        return None
    off, wts = tf.kernel
    ref = 10 ** (np.asarray(tf.reference_db) / 10)
    if not np.all(np.isfinite(ref)) or ref.size != tf.freqs_hz.size:
        return tf.kernel
    s = np.interp(f[:, None] + off[None, :], tf.freqs_hz, ref)
    w2 = wts[None, :] * s
    w2 /= np.sum(w2, axis=1, keepdims=True)
    return off, w2


def stderr_scale(redchi: float, weighted: bool, tf: TransferFunction) -> float:
    """Factor on the covariance errors, from the reduced chi-square.

    With a noise estimate the errors are only ever scaled up: a chi-square above
    1 means noise underestimated or model error, which the errors should then
    include; below 1 they are left as the noise model says (conservative).
    Without a noise estimate (an imported CSV, or no noise-only stretch) the
    residuals set the scale.
    """
    if weighted:
        return math.sqrt(max(1.0, redchi))
    return math.sqrt(redchi)


def residual_at(p: NDArray[np.float64], f: NDArray[np.float64], h: NDArray[np.complex128],
                sig: NDArray[np.float64], sign: float, kernel: Kernel = None,
                form: str = "linear") -> NDArray[np.float64]:
    """Standardised residuals (real parts, then imaginary parts) at parameters
    ``p = [f0_hz, q, gain, delay_s]``."""
    d = (h - model_at(p, f, sign, kernel, form)) / sig
    return np.concatenate([d.real, d.imag])


def covariance(fun: object, p: NDArray[np.float64]) -> NDArray[np.float64]:
    """Parameter covariance (J^T J)^-1 from a central-difference Jacobian of the
    standardised residuals ``fun(p)``; for Gaussian noise this is the inverse
    Fisher information, i.e. the Cramer-Rao bound at ``p`` (Kay 1993, ch. 3).

    Raises :class:`FitError` when J^T J is singular (a parameter the data do
    not determine).
    """
    p = np.asarray(p, dtype=np.float64)
    steps = np.maximum(np.abs(p) * 1e-6, 1e-12)
    cols = []
    for i, s in enumerate(steps):
        e = np.zeros_like(p)
        e[i] = s
        cols.append((fun(p + e) - fun(p - e)) / (2 * s))  # type: ignore[operator]
    jac = np.stack(cols, axis=1)
    fisher = jac.T @ jac
    try:
        cov = np.linalg.inv(fisher)
    except np.linalg.LinAlgError:
        raise FitError("the data do not determine all parameters (singular Fisher matrix)"
                       ) from None
    if not np.all(np.isfinite(cov)) or np.any(np.diag(cov) <= 0):
        raise FitError("the data do not determine all parameters (singular Fisher matrix)")
    return np.asarray(cov)


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
    from ._lmfit import import_lmfit

    lmfit = import_lmfit()

    excited = tf.excited_band_hz
    f0, q = estimate_peak(tf.freqs_hz, peak_search_values(tf),
                          excited if band_hz is None else band_hz)
    band = band_hz if band_hz is not None else auto_band(f0, q, excited)
    # start values for delay and sign from a wider band, where the phase slope shows
    wide = _select(tf, (max(excited[0], f0 / 3), min(excited[1], 3 * f0)))
    if wide.size < MIN_POINTS:
        wide = _select(tf, band)
    sig_w = tf.sigma(idx=wide)
    w = np.where(np.isfinite(sig_w), 1.0 / np.maximum(sig_w, 1e-30) ** 2, 0.0)
    if not np.any(w > 0):
        w = np.ones_like(sig_w)
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
        sig = tf.sigma(h_abs, idx) / math.sqrt(2)
        weighted = bool(np.all(np.isfinite(sig)))
        if not weighted:  # no noise estimate: equal weights, errors from the residuals
            sig = np.ones_like(h_abs)
        sig = np.maximum(sig, 1e-30)

        params = lmfit.Parameters()
        params.add("f0", value=min(max(f0, band[0]), band[1]), min=band[0], max=band[1])
        params.add("q", value=q, min=0.2, max=1e5)
        params.add("gain", value=g0, min=0.0)
        params.add("delay", value=tau0, min=-MAX_DELAY_S, max=MAX_DELAY_S)

        kern = local_kernel(tf, f)

        def residual(p: Any, f: NDArray[np.float64] = f,
                     h: NDArray[np.complex128] = h, sig: NDArray[np.float64] = sig,
                     kern: Kernel = kern) -> NDArray[np.float64]:
            v = np.array([p["f0"].value, p["q"].value, p["gain"].value, p["delay"].value])
            return residual_at(v, f, h, sig, sign, kern, tf.kernel_form)

        mini = lmfit.Minimizer(residual, params, scale_covar=False, nan_policy="raise")
        result = mini.minimize(method="least_squares", x_scale="jac", ftol=1e-12, xtol=1e-12,
                               gtol=1e-12)
        if not result.success:
            raise FitError(f"the fit did not converge ({result.message})")
        pv = result.params
        f0, q, g0, tau0 = (pv["f0"].value, pv["q"].value, pv["gain"].value, pv["delay"].value)
        fitted = (f0, q, g0)
        used_band = band
        if band_hz is None:
            band = auto_band(f0, q, excited)
    assert result is not None
    pv = result.params
    names = ["f0", "q", "gain", "delay"]
    p_hat = np.array([pv[k].value for k in names])
    cov = covariance(lambda p: residual_at(p, f, h, sig, sign, kern, tf.kernel_form), p_hat)
    chi2 = float(np.sum(residual_at(p_hat, f, h, sig, sign, kern, tf.kernel_form) ** 2))
    dof = max(1, 2 * f.size - len(names))
    redchi = chi2 / dof
    scale = stderr_scale(redchi, weighted, tf)
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
        band_hz=(float(used_band[0]), float(used_band[1])),
        n_points=int(f.size), chi2=chi2, reduced_chi2=redchi,
        stderr_scale=scale, weighting="noise-estimate" if weighted else "residuals",
        correlation_f0_q=corr,
        crlb_f0_hz=float(math.sqrt(cov[i_f, i_f])) if weighted else math.nan,
        crlb_q=float(math.sqrt(cov[i_q, i_q])) if weighted else math.nan, nfev=int(result.nfev),
    )
