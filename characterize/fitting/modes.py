"""Several resonances, or one with a smooth background, fitted at once.

Model (frequencies in Hz, x = (f - f_ref)/f_ref with f_ref the first mode's f0):

.. math::

    H(f) = e^{-j 2\\pi f \\tau} \\, P(f) \\sum_k g_k R(f; f_k, Q_k),
    \\qquad R = \\frac{1}{1 - (f/f_k)^2 + j f/(Q_k f_k)}

- two-microphone paths: P = s (the polarity), g_1 >= 0, other g_k signed;
- one-microphone path (the loudspeaker and room are then part of H): P is a
  complex polynomial of low order in x (the smooth background), g_1 = 1.

Fitted by complex least squares with lmfit, like :mod:`.fit`.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass
from typing import Any

import numpy as np
from numpy.typing import NDArray

from ..errors import FitError, InputError
from ..transfer import TransferFunction, peak_search_values
from .fit import MAX_DELAY_S, MIN_POINTS, covariance, stderr_scale
from .models import oscillator

#: A peak must stand this many dB above its surroundings (scipy.signal.find_peaks
#: prominence on the smoothed |H| in dB) to count as a resonance.
PEAK_PROMINENCE_DB = 6.0


@dataclass(frozen=True, slots=True)
class Mode:
    f0_hz: float
    f0_stderr_hz: float
    q: float
    q_stderr: float
    gain: float
    gain_stderr: float

    def to_dict(self) -> dict[str, float]:
        return {k: float(v) for k, v in asdict(self).items()}


@dataclass(frozen=True)
class ModesFit:
    modes: tuple[Mode, ...]
    delay_s: float
    delay_stderr_s: float
    sign: float
    background: tuple[complex, ...]  # polynomial coefficients c0, c1, ... (empty: none)
    band_hz: tuple[float, float]
    n_points: int
    reduced_chi2: float
    stderr_scale: float
    weighting: str
    chi2: float = math.nan

    def model(self, freqs_hz: NDArray[np.float64]) -> NDArray[np.complex128]:
        p = _pack(self)
        return _model(p, freqs_hz, len(self.modes), len(self.background), self.sign)


def find_resonances(tf: TransferFunction, band_hz: tuple[float, float] | None = None
                    ) -> list[tuple[float, float]]:
    """Resonance peaks (f0 estimate, Q estimate from the half-power width) in
    ``band_hz`` (default the excited band), most prominent first."""
    from ..dsp import find_peaks, peak_widths  # scipy.signal's, in numpy (fast start)

    lo, hi = band_hz or tf.excited_band_hz
    h = peak_search_values(tf)
    sel = np.flatnonzero((tf.freqs_hz >= lo) & (tf.freqs_hz <= hi) & np.isfinite(h))
    if sel.size < 5:
        return []
    f = tf.freqs_hz[sel]
    mag = np.abs(h[sel])
    k = max(1, min(9, sel.size // 300))
    if k > 1:
        mag = np.convolve(mag, np.ones(k) / k, mode="same")
    db = 20 * np.log10(np.maximum(mag, 1e-300))
    peaks, prominences = find_peaks(db, PEAK_PROMINENCE_DB)
    if peaks.size == 0:
        return []
    widths = peak_widths(mag, peaks, 1 - 1 / math.sqrt(2))
    df = np.gradient(f)[peaks]
    out = []
    for i, pk in enumerate(peaks):
        width_hz = max(widths[i] * df[i], df[i])
        out.append((float(f[pk]), float(max(f[pk] / width_hz, 0.5)),
                    float(prominences[i])))
    out.sort(key=lambda t: -t[2])
    return [(fr, q) for fr, q, _ in out]


def _model(p: NDArray[np.float64], f: NDArray[np.float64], n_modes: int, n_bg: int,
           sign: float) -> NDArray[np.complex128]:
    f_ref = p[0]
    acc = np.zeros(f.shape, dtype=np.complex128)
    for k in range(n_modes):
        fk, qk, gk = p[3 * k], p[3 * k + 1], p[3 * k + 2]
        acc = acc + gk * oscillator(f, fk, qk)
    tau = p[3 * n_modes]
    if n_bg:
        x = (f - f_ref) / f_ref
        bg = np.zeros(f.shape, dtype=np.complex128)
        for j in range(n_bg):
            c = p[3 * n_modes + 1 + 2 * j] + 1j * p[3 * n_modes + 2 + 2 * j]
            bg = bg + c * x**j
        acc = acc * bg
    else:
        acc = acc * sign
    return acc * np.exp(-2j * np.pi * f * tau)


def _pack(fit: ModesFit) -> NDArray[np.float64]:
    v: list[float] = []
    for m in fit.modes:
        v += [m.f0_hz, m.q, m.gain]
    v.append(fit.delay_s)
    for c in fit.background:
        v += [c.real, c.imag]
    return np.asarray(v)


#: Modes fitted together must lie within this factor of the main peak's frequency
#: and within this many dB of its level.
MODES_SPAN_FACTOR = 8.0
MODES_LEVEL_DB = 20.0


def _near_main(tf: TransferFunction, peaks: list[tuple[float, float]]
               ) -> list[tuple[float, float]]:
    if not peaks:
        return peaks
    level = {p: float(np.abs(np.interp(p[0], tf.freqs_hz, np.abs(tf.h)))) for p in peaks}
    main = max(peaks, key=lambda p: level[p])
    floor = level[main] * 10 ** (-MODES_LEVEL_DB / 20)
    return [p for p in peaks
            if main[0] / MODES_SPAN_FACTOR <= p[0] <= main[0] * MODES_SPAN_FACTOR
            and level[p] >= floor]


def _start_gains(f: NDArray[np.float64], h: NDArray[np.complex128], w: NDArray[np.float64],
                 peaks: list[tuple[float, float]], complex_gain: bool
                 ) -> tuple[float, NDArray[np.complex128]]:
    """Delay and mode gains to start from: for each delay on a grid, the gains
    are a linear least-squares problem (real gains on the two-microphone paths,
    complex on the one-microphone path); keep the delay with the least residual."""
    basis = np.stack([oscillator(f, fk, qk) for fk, qk in peaks], axis=1)
    sw = np.sqrt(w)
    step = 0.05 / (2 * np.pi * float(np.max(f)))
    taus = np.arange(-MAX_DELAY_S, MAX_DELAY_S + step, step)
    best: tuple[float, float, Any] = (
        math.inf, 0.0, np.zeros(len(peaks), dtype=np.complex128))
    for tau in taus:
        b = basis * np.exp(-2j * np.pi * f * tau)[:, None] * sw[:, None]
        y = h * sw
        if complex_gain:
            g, *_ = np.linalg.lstsq(b, y, rcond=None)
            r = float(np.sum(np.abs(y - b @ g) ** 2))
        else:
            a = np.concatenate([b.real, b.imag])
            g_r, *_ = np.linalg.lstsq(a, np.concatenate([y.real, y.imag]), rcond=None)
            g = g_r.astype(np.complex128)
            r = float(np.sum(np.abs(y - b @ g_r) ** 2))
        if r < best[0]:
            best = (r, float(tau), g)
    return best[1], best[2]


def fit_modes(tf: TransferFunction, n_modes: int, *, background_order: int = -1,
              band_hz: tuple[float, float] | None = None,
              starts: list[tuple[float, float]] | None = None) -> ModesFit:
    """Fit ``n_modes`` oscillators (and a background polynomial of
    ``background_order``, -1 for none) to ``tf``.

    Raises :class:`InputError` when the data show fewer peaks than asked for,
    :class:`FitError` when the fit fails.
    """
    from ._lmfit import import_lmfit

    lmfit = import_lmfit()

    if starts is not None:
        peaks = starts
    else:
        # resonances near the main one: within a factor 8 in frequency and 20 dB in level
        found = find_resonances(tf, band_hz)
        peaks = _near_main(tf, found) if band_hz is None else found
    if len(peaks) < n_modes:
        raise InputError("--modes", None, f"{n_modes} modes asked for but the data show "
                         f"{len(peaks)} resonance peak(s) of at least {PEAK_PROMINENCE_DB:g} dB "
                         "prominence")
    peaks = sorted(peaks[:n_modes], key=lambda t: t[0])
    lo_f = min(fk * max(0.4, 1 - 3 / qk) for fk, qk in peaks)
    hi_f = max(fk * min(2.0, 1 + 3 / qk) for fk, qk in peaks)
    band = band_hz or (max(lo_f, tf.excited_band_hz[0]), min(hi_f, tf.excited_band_hz[1]))
    idx = np.flatnonzero((tf.freqs_hz >= band[0]) & (tf.freqs_hz <= band[1]) & np.isfinite(tf.h))
    if idx.size < MIN_POINTS + 3 * n_modes:
        raise FitError(f"only {idx.size} frequency points in {band[0]:.1f} to {band[1]:.1f} Hz")
    f, h = tf.freqs_hz[idx], tf.h[idx]
    sig = tf.sigma(None, idx) / math.sqrt(2)
    weighted = bool(np.all(np.isfinite(sig)))
    if not weighted:
        sig = np.ones(f.size)
    sig = np.maximum(sig, 1e-30)
    w = 1 / sig**2
    f1, q1 = peaks[0]
    n_bg = background_order + 1 if background_order >= 0 else 0
    tau0, gains = _start_gains(f, h, w, peaks, complex_gain=bool(n_bg))
    sign = 1.0
    if not n_bg and gains[0].real < 0:
        sign = -1.0
    params = lmfit.Parameters()
    for k, (fk, qk) in enumerate(peaks):
        params.add(f"f{k}", value=fk, min=band[0], max=band[1])
        params.add(f"q{k}", value=qk, min=0.2, max=1e5)
        if n_bg and k == 0:
            params.add(f"g{k}", value=1.0, vary=False)
        elif n_bg:
            params.add(f"g{k}", value=float((gains[k] / gains[0]).real))
        elif k == 0:
            params.add(f"g{k}", value=abs(gains[0].real), min=0.0)
        else:
            params.add(f"g{k}", value=float(sign * gains[k].real))
    # with a background the polynomial carries the phase trend: the delay stays at
    # its grid estimate (varying both makes the problem nearly degenerate)
    params.add("tau", value=tau0, min=-MAX_DELAY_S, max=MAX_DELAY_S, vary=not n_bg)
    c0 = gains[0] if n_bg else 1.0
    for j in range(n_bg):
        params.add(f"b{j}r", value=c0.real if j == 0 else 0.0)
        params.add(f"b{j}i", value=c0.imag if j == 0 else 0.0)

    names = list(params.keys())

    def vec(pv: Any) -> NDArray[np.float64]:
        return np.array([pv[k].value for k in names])

    def resid_vec(v: NDArray[np.float64]) -> NDArray[np.float64]:
        d = (h - _model(v, f, n_modes, n_bg, sign)) / sig
        return np.concatenate([d.real, d.imag])

    res = lmfit.minimize(lambda pv: resid_vec(vec(pv)), params, method="least_squares",
                         x_scale="jac")
    if not res.success:
        raise FitError(f"the multi-mode fit did not converge ({res.message})")
    v = vec(res.params)
    free = [i for i, k in enumerate(names) if res.params[k].vary]

    def resid_free(u: NDArray[np.float64]) -> NDArray[np.float64]:
        full = v.copy()
        full[free] = u
        return resid_vec(full)

    cov_free = covariance(resid_free, v[free])
    chi2 = float(np.sum(resid_vec(v) ** 2))
    dof = max(1, 2 * f.size - len(free))
    redchi = chi2 / dof
    scale = stderr_scale(redchi, weighted, tf)
    se = np.zeros(v.size)
    se[free] = np.sqrt(np.diag(cov_free)) * scale
    modes = tuple(Mode(v[3 * k], se[3 * k], v[3 * k + 1], se[3 * k + 1], v[3 * k + 2],
                       se[3 * k + 2]) for k in range(n_modes))
    bg = tuple(complex(v[3 * n_modes + 1 + 2 * j], v[3 * n_modes + 2 + 2 * j])
               for j in range(n_bg))
    return ModesFit(modes, float(v[3 * n_modes]), float(se[3 * n_modes]), sign, bg,
                    (float(band[0]), float(band[1])), int(f.size), redchi, scale,
                    "noise-estimate" if weighted else "residuals", chi2)


#: Highest order of the one-microphone background polynomial tried.
MAX_BACKGROUND_ORDER = 9
#: The order search stops after this many orders in a row that do not lower the
#: information criterion.
BACKGROUND_PATIENCE = 2


@dataclass(frozen=True)
class Selection:
    """Which model the information criterion chose, and the candidates' scores."""

    what: str  # "background order" or "modes"
    chosen: int
    scores: tuple[tuple[int, float, float], ...]  # (candidate, chi-square, BIC)
    reason: str = "the lowest BIC"

    def to_dict(self) -> dict[str, object]:
        return {"what": self.what, "chosen": self.chosen, "reason": self.reason,
                "criterion": "BIC = chi-square + k ln(n)",
                "candidates": [{"value": c, "chi2": x2, "bic": b} for c, x2, b in self.scores]}


def bic(fit: ModesFit, n_free: int) -> float:
    """Bayesian information criterion chi2 + k ln(n) of a weighted least-squares
    fit (Schwarz, "Estimating the dimension of a model", Ann. Stat. 6(2), 1978),
    with n the real residuals (two per frequency point)."""
    return float(fit.chi2 + n_free * math.log(2 * fit.n_points))


def n_free_parameters(n_modes: int, n_bg: int) -> int:
    """Free parameters of :func:`fit_modes`: three per mode (the first mode's gain
    is fixed when there is a background), the delay when there is none, and a
    complex coefficient per background term."""
    if n_bg:
        return 3 * n_modes - 1 + 2 * n_bg
    return 3 * n_modes + 1


def fit_background_selected(tf: TransferFunction, n_modes: int, *,
                            band_hz: tuple[float, float] | None = None,
                            max_order: int = MAX_BACKGROUND_ORDER
                            ) -> tuple[ModesFit, Selection]:
    """:func:`fit_modes` with the background polynomial's order chosen by the
    Bayesian information criterion (Schwarz 1978) over orders 1 to
    ``max_order``, all on the same band and weights.

    On the one-microphone paths the background is the loudspeaker and the room
    across the fit band; how much of a polynomial that needs depends on the
    loudspeaker's own resonance, the band's width (low Q) and the room's
    reflections inside the window, so no fixed order fits every take (a cubic
    left reduced chi-squares of 10 to 10^5 on clean simulated takes).
    """
    best: tuple[float, ModesFit] | None = None
    scores: list[tuple[int, float, float]] = []
    worse = 0
    last_error: FitError | None = None
    for order in range(1, max_order + 1):
        try:
            mf = fit_modes(tf, n_modes, background_order=order, band_hz=band_hz)
        except FitError as exc:
            last_error = exc
            continue
        score = bic(mf, n_free_parameters(n_modes, order + 1))
        scores.append((order, float(mf.chi2), score))
        if best is None or score < best[0]:
            best, worse = (score, mf), 0
        else:
            worse += 1
            if worse >= BACKGROUND_PATIENCE:
                break
    if best is None:
        raise last_error or FitError("the background fit failed at every order")
    return best[1], Selection("background order", len(best[1].background) - 1, tuple(scores))


#: Most resonances fitted together when their number is chosen automatically.
MAX_AUTO_MODES = 3


def select_mode_count(tf: TransferFunction, max_modes: int = MAX_AUTO_MODES
                      ) -> tuple[ModesFit | None, Selection]:
    """How many resonances to fit (two-microphone paths, no --modes): the
    resonance peaks in the whole excited band near the main one
    (:func:`find_resonances`, within ``MODES_SPAN_FACTOR`` in frequency and
    ``MODES_LEVEL_DB`` in level), fitted 1, 2, ... at a time on one band that
    holds them all, and the count with the lowest BIC (Schwarz 1978) kept.
    Returns (None, selection) when one mode is chosen or only one peak shows:
    the single-mode fit (fitting.fit) is then made as usual, on its own band.

    A second resonance a few times f0 biases a single-mode fit of the first
    through its tail (0.2 to 0.6 % in f0 on simulated takes with a mode at
    3.5 f0).
    """
    peaks = _near_main(tf, find_resonances(tf))[:max_modes]
    if len(peaks) < 2:
        return None, Selection("modes", 1, (), "one resonance peak in the excited band")
    lo_f = min(fk * max(0.4, 1 - 3 / qk) for fk, qk in peaks)
    hi_f = max(fk * min(2.0, 1 + 3 / qk) for fk, qk in peaks)
    band = (max(lo_f, tf.excited_band_hz[0]), min(hi_f, tf.excited_band_hz[1]))
    best: tuple[float, ModesFit] | None = None
    scores: list[tuple[int, float, float]] = []
    for k in range(1, len(peaks) + 1):
        try:
            mf = fit_modes(tf, k, band_hz=band, starts=peaks[:k])
        except (FitError, InputError):
            continue
        score = bic(mf, n_free_parameters(k, 0))
        scores.append((k, float(mf.chi2), score))
        if best is None or score < best[0]:
            best = (score, mf)
    if best is None or len(best[1].modes) == 1:
        return None, Selection("modes", 1, tuple(scores),
                               f"{len(peaks)} peaks, one mode has the lowest BIC")
    k = len(best[1].modes)
    return best[1], Selection("modes", k, tuple(scores),
                              f"{len(peaks)} resonance peaks; {k} modes have the lowest BIC")
