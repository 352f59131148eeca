"""Free decays (tap, clap, balloon pop): find each decay, fit a damped sinusoid.

Model of one decay (time from the start of the fitted stretch):

.. math::

    p(t) = A e^{-t/\\tau} \\cos(2\\pi f_d t + \\varphi) + c,
    \\qquad f_0 = \\sqrt{f_d^2 + (2\\pi\\tau)^{-2}},\\quad Q = \\pi f_0 \\tau

Start values come from the matrix-pencil method (Y. Hua, T.K. Sarkar, "Matrix
pencil method for estimating parameters of exponentially damped/undamped
sinusoids in noise", IEEE Trans. ASSP 38(5), 814-824, 1990), which also serves
as a cross-check; the final estimate is a least-squares fit with lmfit.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass
from typing import Any

import numpy as np
from numpy.typing import NDArray

from ..errors import FitError

#: A decay must start this many dB above the noise floor to be fitted.
MIN_DECAY_DB = 20.0
#: A fitted decay must hold this many periods of its frequency, and its f0 be
#: known to this fraction, to enter the combined result (a cut-off scrap of a
#: decay or a click gives numbers that mean nothing).
MIN_DECAY_CYCLES = 3.0
MAX_DECAY_F0_REL_STDERR = 0.01
#: The fitted stretch ends where the envelope is this many dB above the noise.
END_ABOVE_NOISE_DB = 6.0
#: Skip this much after the peak (the excitation itself) before fitting (s).
SKIP_AFTER_PEAK_S = 0.002
#: Shortest stretch fitted as a decay (s).
MIN_DECAY_S = 0.002
#: Samples handed to the matrix pencil for start values (its SVD grows as N^3).
PENCIL_SAMPLES = 2400
#: Pencil parameter (columns of the Hankel matrix) for the start values: below
#: N/3, where Hua & Sarkar put the noise optimum, to keep the SVD cheap.
PENCIL_PARAMETER = 300
#: Largest number of samples handed to the fit per decay (decimated above).
MAX_FIT_SAMPLES = 20000


@dataclass(frozen=True, slots=True)
class Decay:
    """One fitted decay (SI units, 1-sigma errors)."""

    start_s: float
    length_s: float
    f0_hz: float
    f0_stderr_hz: float
    q: float
    q_stderr: float
    amplitude: float
    pencil_f0_hz: float
    pencil_q: float
    reduced_chi2: float

    def to_dict(self) -> dict[str, float]:
        return {k: float(v) for k, v in asdict(self).items()}


def matrix_pencil(x: NDArray[np.float64], rate_hz: float, n_modes: int,
                  pencil: int | None = None) -> list[tuple[float, float, complex]]:
    """Damped complex exponentials in ``x`` by the matrix-pencil method
    (Hua & Sarkar 1990): Hankel matrix, truncated SVD to ``n_modes`` (2 per real
    damped sinusoid), eigenvalues of V1^+ V2 give z_i, s_i = ln(z_i) fs.

    Returns (f0_hz, q, complex amplitude) per positive-frequency pole, strongest first.
    """
    x = np.asarray(x, dtype=np.float64)
    n = x.size
    p = n // 3 if pencil is None else min(pencil, n // 3)  # ``pencil`` caps N/3
    p = int(min(max(p, n_modes + 1), n - n_modes - 1))
    y = np.lib.stride_tricks.sliding_window_view(x, p + 1)  # (n - p) x (p + 1) Hankel
    _, _, vh = np.linalg.svd(y, full_matrices=False)
    v = vh[:n_modes].conj().T
    v1, v2 = v[:-1], v[1:]
    z = np.linalg.eigvals(np.linalg.pinv(v1) @ v2)
    s = np.log(z.astype(np.complex128)) * rate_hz
    # amplitudes by least squares on the Vandermonde matrix
    k = np.arange(n)[:, None]
    vand = z[None, :] ** k
    amp, *_ = np.linalg.lstsq(vand, x.astype(np.complex128), rcond=None)
    out = []
    for si, ai in zip(s, amp, strict=True):
        if si.imag <= 0 or si.real >= 0:
            continue
        f0 = abs(si) / (2 * math.pi)
        q = abs(si) / (-2 * si.real)
        out.append((float(f0), float(q), complex(ai)))
    out.sort(key=lambda m: -abs(m[2]))
    return out


def _envelope(x: NDArray[np.float64], rate_hz: float) -> NDArray[np.float64]:
    from scipy.ndimage import maximum_filter1d, uniform_filter1d

    k = max(3, int(rate_hz * 0.005))
    return uniform_filter1d(maximum_filter1d(np.abs(x), size=k), size=k)


def find_decays(x: NDArray[np.float64], rate_hz: float) -> list[tuple[int, int, float]]:
    """Stretches (start, stop, noise rms) of free decays: the envelope rises at least
    ``MIN_DECAY_DB`` above the noise floor (its 10th percentile), then falls back; a
    stretch ends early where a new event (the envelope rising to twice its lowest
    value since the peak: another tap inside the decay) begins."""
    env = _envelope(x, rate_hz)
    p10 = np.percentile(env, 10)
    floor = float(p10)
    noise_rms = max(float(np.std(x[env <= p10])), 1e-12)
    if floor <= 0:
        floor = noise_rms
    thr_on = floor * 10 ** (MIN_DECAY_DB / 20)
    thr_end = floor * 10 ** (END_ABOVE_NOISE_DB / 20)
    out = []
    i = 0
    n = x.size
    skip = int(SKIP_AFTER_PEAK_S * rate_hz)
    k = max(3, int(rate_hz * 0.005))  # the envelope's smoothing
    while i < n:
        above = np.flatnonzero(env[i:] > thr_on)
        if above.size == 0:
            break
        j = i + int(above[0])
        # peak of this event: the maximum before the envelope falls below thr_end
        below = np.flatnonzero(env[j:] < thr_end)
        stop = j + int(below[0]) if below.size else n
        peak = j + int(np.argmax(np.abs(x[j:stop])))
        seg = env[peak:stop]
        new = np.flatnonzero((seg > 2 * np.minimum.accumulate(seg)) & (seg > thr_on))
        following = None
        if new.size and int(new[0]) - 2 * k > skip + 4 * k:
            following = peak + int(new[0]) - 2 * k  # before the envelope's smoothing
            stop = following
        start = peak + skip
        if stop - start > max(32, int(MIN_DECAY_S * rate_hz)):
            out.append((start, stop, noise_rms))
        i = max(stop if following is None else following, j) + 1
    return out


def fit_decay(x: NDArray[np.float64], rate_hz: float, noise_rms: float,
              start: int = 0) -> Decay:
    """Fit one decay stretch (already cut) with lmfit, starting from the matrix pencil."""
    from ._lmfit import import_lmfit

    lmfit = import_lmfit()

    step = max(1, x.size // MAX_FIT_SAMPLES)
    xs = x[::step]
    fs = rate_hz / step
    # start values: the matrix pencil on at most PENCIL_SAMPLES samples, strided
    # to span the decay but keeping 4 samples per period of the dominant frequency
    spec = np.abs(np.fft.rfft(xs * np.hanning(xs.size)))
    f_dom = float(np.fft.rfftfreq(xs.size, 1 / fs)[int(np.argmax(spec[1:])) + 1])
    stride = max(1, min(-(-xs.size // PENCIL_SAMPLES), int(fs / (4 * f_dom))))
    modes = matrix_pencil(xs[::stride][:PENCIL_SAMPLES], fs / stride, 4, pencil=PENCIL_PARAMETER)
    if not modes:
        raise FitError("no damped oscillation found in the decay")
    f_mp, q_mp, a_mp = modes[0]
    tau0 = q_mp / (math.pi * f_mp)
    fd0 = f_mp * math.sqrt(max(1e-9, 1 - 1 / (4 * q_mp * q_mp)))
    t = np.arange(xs.size) / fs
    params = lmfit.Parameters()
    params.add("amp", value=2 * abs(a_mp), min=0)
    params.add("tau", value=tau0, min=1e-5, max=1e3)
    params.add("fd", value=fd0, min=0.5 * fd0, max=min(1.5 * fd0, fs / 2))
    params.add("phi", value=float(np.angle(a_mp)))
    params.add("c", value=0.0)
    sig = noise_rms

    def resid(p: Any) -> NDArray[np.float64]:
        v = p.valuesdict()
        m = v["amp"] * np.exp(-t / v["tau"]) * np.cos(2 * np.pi * v["fd"] * t + v["phi"]) + v["c"]
        return (xs - m) / sig

    res = lmfit.minimize(resid, params, method="least_squares", x_scale="jac")
    if not res.success or res.covar is None:
        raise FitError(f"the decay fit did not converge ({res.message})")
    v = res.params
    tau, fd = v["tau"].value, v["fd"].value
    cov = np.asarray(res.covar)
    names = list(res.var_names)
    redchi = float(res.redchi)
    scale = math.sqrt(max(1.0, redchi))
    ct = cov[names.index("tau"), names.index("tau")]
    cf = cov[names.index("fd"), names.index("fd")]
    ctf = cov[names.index("tau"), names.index("fd")]
    w = 1 / (2 * math.pi * tau)
    f0 = math.sqrt(fd * fd + w * w)
    # first-order propagation: f0(fd, tau), Q = pi f0 tau
    df_dfd = fd / f0
    df_dtau = -(w * w) / (f0 * tau)
    var_f0 = df_dfd**2 * cf + df_dtau**2 * ct + 2 * df_dfd * df_dtau * ctf
    dq_dfd = math.pi * tau * df_dfd
    dq_dtau = math.pi * (f0 + tau * df_dtau)
    var_q = dq_dfd**2 * cf + dq_dtau**2 * ct + 2 * dq_dfd * dq_dtau * ctf
    return Decay(start_s=start / rate_hz, length_s=x.size / rate_hz, f0_hz=f0,
                 f0_stderr_hz=math.sqrt(max(var_f0, 0)) * scale, q=math.pi * f0 * tau,
                 q_stderr=math.sqrt(max(var_q, 0)) * scale, amplitude=float(v["amp"].value),
                 pencil_f0_hz=f_mp, pencil_q=q_mp, reduced_chi2=redchi)


def fit_ringdown(x: NDArray[np.float64], rate_hz: float, source: str = "recording"
                 ) -> list[Decay]:
    """Find and fit every free decay in ``x``; :class:`FitError` (no fit) when none is found."""
    stretches = find_decays(x, rate_hz)
    if not stretches:
        raise FitError(f"{source}: no free decay found: a tap or pop should rise at least "
                       f"{MIN_DECAY_DB:g} dB above the noise floor and ring down")
    decays = []
    for start, stop, noise in stretches:
        try:
            d = fit_decay(x[start:stop], rate_hz, noise, start)
        except FitError:
            continue
        if (d.length_s * d.f0_hz >= MIN_DECAY_CYCLES and math.isfinite(d.f0_stderr_hz)
                and d.f0_stderr_hz <= MAX_DECAY_F0_REL_STDERR * d.f0_hz):
            decays.append(d)
    if not decays:
        raise FitError(f"{source}: decays were found but none could be fitted (each must "
                       f"hold {MIN_DECAY_CYCLES:g} periods and give f0 to "
                       f"{100 * MAX_DECAY_F0_REL_STDERR:g} %)")
    return decays


def combine(decays: list[Decay]) -> tuple[float, float, float, float]:
    """Inverse-variance weighted mean of f0 and Q over decays (with standard errors);
    the error is widened by sqrt(reduced chi-square) when the decays disagree."""
    def wmean(vals: list[float], errs: list[float]) -> tuple[float, float]:
        w = np.array([1 / max(e, 1e-300) ** 2 for e in errs])
        v = np.array(vals)
        m = float(np.sum(w * v) / np.sum(w))
        se = float(1 / math.sqrt(np.sum(w)))
        if len(vals) > 1:
            chi = float(np.sum(w * (v - m) ** 2) / (len(vals) - 1))
            se *= math.sqrt(max(1.0, chi))
        return m, se

    f0, sf = wmean([d.f0_hz for d in decays], [d.f0_stderr_hz for d in decays])
    q, sq = wmean([d.q for d in decays], [d.q_stderr for d in decays])
    return f0, sf, q, sq
