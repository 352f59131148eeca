"""The cross-spectral path's fit: the whole record's spectra, errors in both
channels, and the resonator's transients.

Two microphones, any excitation (noise, a sweep played without its file, taps):
the outside channel x and the inside channel y are each transformed once over
the whole record (rectangular window, no averaging), and

.. math::

    Y_k = H(f_k)\\,X_k + R(f_k)\\,e^{-j2\\pi f_k\\tau}\\,(c_0 + c_1 u_k)
          + N_{y,k} - H(f_k)\\,N_{x,k},
    \\qquad H = s\\,G\\,R\\,e^{-j2\\pi f\\tau},\\quad
    R = \\frac{1}{1 - (f/f_0)^2 + j f/(Q f_0)},\\quad u_k = \\frac{f_k - f_r}{f_r}

holds for every bin: the second term is the *transient* of a finite record
(the ringing started before the record and cut off at its end), which for a
second-order system is a first-order polynomial over the same denominator
(R. Pintelon & J. Schoukens, *System Identification: A Frequency Domain
Approach*, 2nd ed., Wiley 2012, §6.3 on leakage as a transient term). With
it, the DFT bins carry no leakage error however short the record is against
the ringing time Q/(pi f0), so the frequency resolution is that of the whole
record (1/T) and nothing has to be chosen from the data but the fit band.

The noise of both microphones enters the criterion: the residual of bin k has
variance ``sigma_y^2 + |H_k|^2 sigma_x^2``, evaluated at the model, which makes
the weighted least squares the errors-in-variables maximum-likelihood
estimator (Pintelon & Schoukens 2012, §10.3): unbiased where H1 is biased low
by the outside microphone's noise and H2 high by the inside one's (Bendat &
Piersol, *Random Data*, 4th ed. 2010, §9.1). The two noise levels are
estimated from the residuals by maximum likelihood, alternately with the
resonance parameters; bins of a rectangular-window DFT of white noise are
independent, so the covariance (inverse Fisher matrix) gives the errors,
scaled by the reduced chi-square when it exceeds 1.

What the user sees as the transfer function (plots, transfer.csv) is the
frequency-averaged H1 (or H2) over blocks of ``k`` neighbouring bins (Daniell's
average: Bendat & Piersol 2010, §11.5), with its rectangular kernel, so that a
refit of the CSV sees the same smoothing.
"""

from __future__ import annotations

import math
from collections.abc import Callable

import numpy as np
from numpy.typing import NDArray

from ..errors import FitError
from ..transfer import TransferFunction, estimate_peak
from .fit import FitResult, initial_delay_and_sign
from .models import oscillator

#: Neighbouring DFT bins averaged in the smoothed estimate used to find the peak
#: and shown to the user (at least; more on long records, see PEAK_MAX_CELLS).
PEAK_BINS = 9
#: Most frequency cells of the smoothed estimate (longer records average more bins).
PEAK_MAX_CELLS = 2**15
#: Fewest and most DFT bins fitted (denser bands are thinned evenly; bins are
#: independent, so thinning costs precision, not honesty).
MIN_POINTS = 8
MAX_POINTS = 20000
#: The fit band is f0 +- this many half-power half-widths f0/(2Q) ...
BAND_HALF_WIDTHS = 6.0
#: ... and never narrower than this many DFT bins each side.
BAND_MIN_BINS = 12
#: Coherence a smoothed cell must reach to count as related (three neighbouring
#: cells in a row must, or the channels are taken as unrelated).
RELATED_COHERENCE = 0.5
#: The resonance must lower the chi-square by at least this much against H
#: without a resonance (a complex constant): about 10 standard errors of its
#: amplitude. Below, the data hold no resonance (pure noise, or too short).
MIN_RESONANCE_CHI2 = 100.0
#: The record must hold this many periods of the fitted f0.
MIN_CYCLES = 3.0
#: Alternations of the resonance fit and the noise-level estimate.
PASSES = 4


def _fast_below(n: int) -> int:
    """The largest 5-smooth length not above ``n`` (a fast FFT size)."""
    from scipy.fft import next_fast_len

    m = int(n)
    while m > 16 and next_fast_len(m, real=True) != m:
        m -= 1
    return m


def _spectra(inside: NDArray[np.floating], outside: NDArray[np.floating], rate_hz: float
             ) -> tuple[NDArray[np.float64], NDArray[np.complex128], NDArray[np.complex128]]:
    """rfft of both channels (mean removed) over the longest 5-smooth length
    that fits in the record (so the FFT is fast; at most a few samples lost)."""
    from scipy import fft as sfft

    n = _fast_below(inside.size)
    x = np.asarray(outside[:n], dtype=np.float64)
    y = np.asarray(inside[:n], dtype=np.float64)
    x -= x.mean()
    y -= y.mean()
    return np.asarray(np.fft.rfftfreq(n, 1 / rate_hz), dtype=np.float64), sfft.rfft(x), sfft.rfft(y)


def _smoothed(f: NDArray[np.float64], x: NDArray[np.complex128], y: NDArray[np.complex128],
              k: int) -> tuple[NDArray[np.float64], NDArray[np.complex128],
                               NDArray[np.float64], NDArray[np.float64]]:
    """Cross- and auto-spectra summed over blocks of ``k`` bins (from bin 1)."""
    m = (f.size - 1) // k
    sl = slice(1, 1 + m * k)
    gxy = np.zeros(m, dtype=np.complex128)
    gxx = np.zeros(m)
    gyy = np.zeros(m)
    step = max(1, (1 << 20) // k)
    for a in range(0, m, step):
        b = min(m, a + step)
        s = slice(1 + a * k, 1 + b * k)
        gxy[a:b] = (np.conj(x[s]) * y[s]).reshape(b - a, k).sum(1)
        gxx[a:b] = (np.abs(x[s]) ** 2).reshape(b - a, k).sum(1)
        gyy[a:b] = (np.abs(y[s]) ** 2).reshape(b - a, k).sum(1)
    fc = f[sl].reshape(m, k).mean(1) if m else np.zeros(0)
    return fc, gxy, gxx, gyy


def _noise_levels(r2: NDArray[np.float64], m2: NDArray[np.float64], sy2: float, sx2: float
                  ) -> tuple[float, float]:
    """Maximum-likelihood noise levels: minimise sum(r2/v + ln v) over
    v = sy2 + m2 * sx2 (complex Gaussian residuals of power r2)."""
    from scipy.optimize import minimize

    scale = max(float(np.mean(r2)), 1e-300)
    r = r2 / scale
    mm = m2 * 1.0

    def nll(lv: NDArray[np.float64]) -> tuple[float, NDArray[np.float64]]:
        a, b = math.exp(lv[0]), math.exp(lv[1])
        v = a + mm * b
        g = 1 / v - r / v**2
        return float(np.sum(r / v + np.log(v))), np.array([np.sum(g) * a, np.sum(g * mm) * b])

    start = np.log([max(sy2 / scale, 1e-12), max(sx2 / scale, 1e-12)])
    lo = math.log(1e-12)
    res = minimize(nll, start, jac=True, method="L-BFGS-B",
                   bounds=[(lo, 30.0), (lo + math.log(1 / max(float(np.max(mm)), 1e-300)), 30.0)])
    return float(math.exp(res.x[0]) * scale), float(math.exp(res.x[1]) * scale)


def record_transfer_fit(inside: NDArray[np.floating], outside: NDArray[np.floating],
                        rate_hz: float, *, band_hz: tuple[float, float] | None = None,
                        estimator: str = "h1",
                        correction: Callable[[NDArray[np.float64]], NDArray[np.complex128]]
                        | None = None) -> tuple[FitResult, TransferFunction]:
    """Fit f0, Q, gain and delay to a two-microphone recording of any excitation.

    Parameters
    ----------
    inside, outside : arrays
        The two channels (float32 as read is fine).
    rate_hz : float
    band_hz : (lo, hi), optional
        Fit exactly this band; default f0 +- ``BAND_HALF_WIDTHS`` half-widths.
    estimator : "h1" or "h2"
        Which smoothed estimate is shown (the fit is the same).
    correction : callable, optional
        Channel-match factor C(f) to divide the measured ratio by (calibration).

    Returns
    -------
    (FitResult, TransferFunction)
        The fit, and the smoothed transfer function with its noise model.

    Raises
    ------
    FitError
        The channels are unrelated, the record is too short, or no resonance
        stands out of the noise.
    """
    from scipy.optimize import least_squares

    if estimator not in ("h1", "h2"):
        raise ValueError(f"estimator must be one of ['h1', 'h2'], got {estimator!r}")
    f, xs, ys = _spectra(inside, outside, rate_hz)
    n = int(round(rate_hz / (f[1] - f[0]))) if f.size > 1 else 1
    t_s = n / rate_hz
    if correction is not None:
        ys = ys / np.where(f > 0, correction(np.maximum(f, f[1] if f.size > 1 else 1.0)), 1.0)
    k = max(PEAK_BINS, int(math.ceil(f.size / PEAK_MAX_CELLS)))
    fc, gxy, gxx, gyy = _smoothed(f, xs, ys, k)
    if fc.size < 8:
        raise FitError(f"the recording ({1000 * t_s:.0f} ms) is too short to hold a resonance")
    with np.errstate(divide="ignore", invalid="ignore"):
        h1 = gxy / gxx
        coh = np.clip(np.abs(gxy) ** 2 / (gxx * gyy), 0.0, 1.0)
    coh = np.where(np.isfinite(coh), coh, 0.0)
    level = float(np.max(gxx))
    if not level > 0:
        raise FitError("the outside channel holds no signal")
    excited = fc[gxx > 1e-6 * level]
    lo = max(float(excited[0]), 4 * k / t_s)
    hi = min(float(excited[-1]), 0.45 * rate_hz)
    # a short record resolves nothing below a few smoothing cells
    short = (f"; the recording ({t_s:.3g} s) is too short to show a resonance below "
             f"{lo:.0f} Hz" if 4 * k / t_s > float(excited[0]) else "")
    inband = (fc >= lo) & (fc <= hi)
    good = inband & (coh >= RELATED_COHERENCE)
    if good.size < 3 or not np.any(good[:-2] & good[1:-1] & good[2:]):
        top = float(np.max(coh[inband])) if np.any(inband) else 0.0
        raise FitError(f"the channels are unrelated (coherence at most {top:.2f} between "
                       f"{lo:.0f} and {hi:.0f} Hz): the inside microphone does not hear "
                       f"what the outside one hears{short}")
    peak_h = np.where(coh >= RELATED_COHERENCE, h1, np.nan)
    try:
        f0, q = estimate_peak(fc, peak_h, (lo, hi) if band_hz is None else band_hz)
    except FitError as exc:
        raise FitError(f"{exc}{short}") from None
    df = rate_hz / n

    def band_for(f0: float, q: float) -> tuple[float, float]:
        half = max(BAND_HALF_WIDTHS * f0 / (2 * q), BAND_MIN_BINS * df)
        return max(f0 - half, 0.4 * f0, lo), min(f0 + half, 2 * f0, hi)

    band = band_for(f0, q) if band_hz is None else band_hz
    wide = np.flatnonzero((fc >= max(lo, f0 / 3)) & (fc <= min(hi, 3 * f0))
                          & np.isfinite(peak_h))
    if wide.size > 2000:
        wide = wide[np.linspace(0, wide.size - 1, 2000).round().astype(int)]
    if wide.size < 3:
        raise FitError("too few related frequency points around the peak to fit")
    cw = coh[wide]
    tau0, sign, g_abs = initial_delay_and_sign(fc[wide], h1[wide],
                                               cw / np.maximum(1 - cw, 1e-3), f0, q)
    p: NDArray[np.float64] | None = None
    sy2 = sx2 = math.nan
    for _ in range(PASSES):
        idx = np.flatnonzero((f >= band[0]) & (f <= band[1]))
        if idx.size > MAX_POINTS:
            idx = idx[np.linspace(0, idx.size - 1, MAX_POINTS).round().astype(int)]
        if idx.size < MIN_POINTS:
            raise FitError(f"only {idx.size} frequency points between {band[0]:.1f} and "
                           f"{band[1]:.1f} Hz; record longer or widen the band")
        fb = f[idx]
        scale = math.sqrt(float(np.mean(np.abs(xs[idx]) ** 2)))
        xb, yb = xs[idx] / scale, ys[idx] / scale
        fr = float(f0)
        u = (fb - fr) / fr
        if p is None:
            # the delay and sign read off the smoothed estimate, and no delay with
            # either sign: over a narrow band a wrong pair can mimic the right one,
            # so the first pass starts from each and keeps the best
            starts = []
            for tau_c, sign_c in ((tau0, sign), (0.0, 1.0), (0.0, -1.0)):
                r0 = oscillator(fb, f0, q) * np.exp(-2j * np.pi * fb * tau_c)
                a = np.stack([r0, r0 * u], axis=1)
                c, *_ = np.linalg.lstsq(a, yb - sign_c * g_abs * r0 * xb, rcond=None)
                starts.append(np.array([f0, q, sign_c * g_abs, tau_c, c[0].real, c[0].imag,
                                        c[1].real, c[1].imag]))
                if len(starts) == 1:
                    e = yb - (sign_c * g_abs * r0 * xb + r0 * (c[0] + c[1] * u))
                    v0 = float(np.mean(np.abs(e) ** 2))
                    m0 = float(np.mean(np.abs(g_abs * r0) ** 2))
                    sy2, sx2 = 0.5 * v0, 0.5 * v0 / max(m0, 1e-30)
        else:
            # the transient's polynomial is centred on the previous pass's f0
            starts = [p.copy()]

        def parts(pp: NDArray[np.float64], fb: NDArray[np.float64] = fb,
                  xb: NDArray[np.complex128] = xb, u: NDArray[np.float64] = u
                  ) -> tuple[NDArray[np.complex128], NDArray[np.complex128]]:
            r = oscillator(fb, pp[0], pp[1]) * np.exp(-2j * np.pi * fb * pp[3])
            m = pp[2] * r
            return m, m * xb + r * ((pp[4] + 1j * pp[5]) + (pp[6] + 1j * pp[7]) * u)

        def residual(sy: float, sx: float, yb: NDArray[np.complex128] = yb,
                     parts: Callable = parts) -> Callable:
            def fun(pp: NDArray[np.float64]) -> NDArray[np.float64]:
                m, pred = parts(pp)
                d = (yb - pred) / np.sqrt((sy + np.abs(m) ** 2 * sx) / 2)
                return np.concatenate([d.real, d.imag])
            return fun

        resid = residual(sy2, sx2)
        sol = None
        for start in starts:
            trial = least_squares(resid, start, method="lm", x_scale="jac", ftol=1e-10,
                                  xtol=1e-10, gtol=1e-10, max_nfev=4000)
            if sol is None or trial.cost < sol.cost:
                sol = trial
        assert sol is not None
        p = sol.x
        m, pred = parts(p)
        sy2, sx2 = _noise_levels(np.abs(yb - pred) ** 2, np.abs(m) ** 2, sy2, sx2)
        if not (band[0] <= p[0] <= band[1] and 0.2 < p[1] < 1e5):
            raise FitError(f"the fit found no resonance inside {band[0]:.1f} to "
                           f"{band[1]:.1f} Hz (it ran to f0 {p[0]:.4g} Hz, Q {p[1]:.3g})")
        f0, q = float(p[0]), float(p[1])
        used_band = band
        if band_hz is None:
            band = band_for(f0, q)
    assert p is not None
    # final pass at the last noise levels, on the last pass's bins
    resid = residual(sy2, sx2)
    sol = least_squares(resid, p, method="lm", x_scale="jac", ftol=1e-12, xtol=1e-12,
                        gtol=1e-12, max_nfev=4000)
    p = sol.x
    res = resid(p)
    chi2 = float(np.sum(res**2))
    n_par = p.size
    dof = max(1, res.size - n_par)
    redchi = chi2 / dof
    jac = sol.jac
    try:
        cov = np.linalg.inv(jac.T @ jac)
    except np.linalg.LinAlgError:
        raise FitError("the data do not determine all parameters (singular Fisher matrix)"
                       ) from None
    if not np.all(np.isfinite(np.diag(cov))) or np.any(np.diag(cov) <= 0):
        raise FitError("the data do not determine all parameters (singular Fisher matrix)")
    # is there a resonance? chi-square against H = a complex constant, same noise
    v_null = sy2 + abs(p[2]) ** 2 * sx2
    a_null = complex(np.sum(np.conj(xb) * yb) / np.sum(np.abs(xb) ** 2))
    chi2_null = float(np.sum(np.abs(yb - a_null * xb) ** 2) / (v_null / 2))
    if chi2_null - chi2 < MIN_RESONANCE_CHI2:
        raise FitError(f"no resonance stands out of the noise between {used_band[0]:.1f} and "
                       f"{used_band[1]:.1f} Hz (chi-square {chi2_null - chi2:.0f} lower with one "
                       f"than without; {MIN_RESONANCE_CHI2:g} needed)")
    f0, q = float(p[0]), float(p[1])
    if f0 * t_s < MIN_CYCLES:
        raise FitError(f"the recording ({t_s:.3g} s) holds {f0 * t_s:.1f} periods of the "
                       f"resonance at {f0:.1f} Hz; at least {MIN_CYCLES:g} are needed")
    stderr_scale = math.sqrt(max(1.0, redchi))
    se = np.sqrt(np.diag(cov))
    fit = FitResult(
        f0_hz=f0, f0_stderr_hz=float(se[0] * stderr_scale), q=q,
        q_stderr=float(se[1] * stderr_scale), gain=abs(float(p[2])),
        gain_stderr=float(se[2] * stderr_scale), delay_s=float(p[3]),
        delay_stderr_s=float(se[3] * stderr_scale), polarity_inverted=bool(p[2] < 0),
        band_hz=(float(used_band[0]), float(used_band[1])), n_points=int(idx.size), chi2=chi2,
        reduced_chi2=redchi, stderr_scale=stderr_scale, weighting="noise-estimate",
        correlation_f0_q=float(cov[0, 1] / math.sqrt(cov[0, 0] * cov[1, 1])),
        nfev=int(sol.nfev), crlb_f0_hz=float(se[0]), crlb_q=float(se[1]))
    # the smoothed estimate the user sees, with its noise model and kernel
    noise_y, noise_x = sy2 * scale**2, sx2 * scale**2
    with np.errstate(divide="ignore", invalid="ignore"):
        h = h1 if estimator == "h1" else gyy / np.conj(gxy)
        noise_a = noise_y / gxx
        noise_b = noise_x / gxx
    h = np.where(np.isfinite(h), h, np.nan + 0j)
    offsets = np.asarray((np.arange(k) - (k - 1) / 2) * df, dtype=np.float64)
    tf = TransferFunction(
        freqs_hz=fc, h=h.astype(np.complex128), noise_a=noise_a, noise_b=noise_b,
        excited_band_hz=(lo, hi), method=f"cross-spectral-{estimator}",
        reference_db=10 * np.log10(np.maximum(gxx, 1e-300)), coherence=coh,
        averages=int(k), kernel=(offsets, np.full(k, 1.0 / k)),
        kernel_form="linear" if estimator == "h1" else "h2")
    return fit, tf
