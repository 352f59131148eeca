"""Circle fit (Kennedy-Pancu) as an independent estimate of f0 and damping.

For the oscillator model, B(f) = j f H(f) traces a circle through the origin
in the complex plane; the resonance is the point of the circle opposite the
origin (where the angle around the centre moves fastest), and for points a
above and b below the resonance, with angles theta measured around the centre
from the resonance point,

.. math::

    \\zeta = \\frac{\\omega_a^2 - \\omega_b^2}
    {2\\omega_0\\left(\\omega_a\\tan(\\theta_a/2) + \\omega_b\\tan(\\theta_b/2)\\right)},
    \\qquad Q = \\frac{1}{2\\zeta}

References
----------
C.C. Kennedy, C.D.P. Pancu, "Use of vectors in vibration measurement and
analysis", J. Aeronautical Sciences 14(11), 603-625 (1947); D.J. Ewins, *Modal
Testing: Theory, Practice and Application*, 2nd ed. (2000), §4.3 (from memory).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from ..errors import FitError


@dataclass(frozen=True, slots=True)
class CircleFit:
    f0_hz: float
    f0_stderr_hz: float
    q: float
    q_stderr: float
    n_points: int

    def to_dict(self) -> dict[str, float]:
        return {"f0_hz": self.f0_hz, "f0_stderr_hz": self.f0_stderr_hz, "q": self.q,
                "q_stderr": self.q_stderr, "n_points": self.n_points}


def fit_circle_points(z: NDArray[np.complex128]) -> tuple[complex, float]:
    """Algebraic least-squares circle (I. Kasa, "A circle fitting procedure and
    its error analysis", IEEE Trans. Instrum. Meas. 25(1), 8-14, 1976): centre, radius."""
    x, y = z.real, z.imag
    a = np.column_stack([x, y, np.ones_like(x)])
    b = x * x + y * y
    sol, *_ = np.linalg.lstsq(a, b, rcond=None)
    cx, cy = sol[0] / 2, sol[1] / 2
    r = math.sqrt(max(sol[2] + cx * cx + cy * cy, 0.0))
    return complex(cx, cy), r


#: Noisy replicas of the data from which the circle fit's standard errors come.
BOOTSTRAP_REPLICAS = 48
#: Points a side of the resonance that enter the pair estimates (imported
#: transfer functions can be dense; measured ones have a few dozen).
MAX_SIDE_POINTS = 400


def _estimate(f: NDArray[np.float64], b: NDArray[np.complex128]
              ) -> tuple[float, float, NDArray[np.float64]]:
    """f0, Q and the pair damping estimates of the circle through the points
    ``b = j f H`` at frequencies ``f`` (sorted): the resonance where the angle
    around the centre meets the direction of the centre, and Q from the median
    of the point-pair damping estimates (module docstring)."""
    c, _ = fit_circle_points(b)
    ang = np.unwrap(np.angle(b - c))
    # resonance: the circle point opposite the origin, i.e. angle of c itself
    target = math.atan2(c.imag, c.real)
    target += 2 * math.pi * round((float(np.mean(ang)) - target) / (2 * math.pi))
    if not (min(ang[0], ang[-1]) <= target <= max(ang[0], ang[-1])):
        raise FitError("the circle does not pass through the resonance in the fitted points")
    rising = ang[-1] > ang[0]
    f_res = float(np.interp(target, ang if rising else ang[::-1], f if rising else f[::-1]))
    w0 = 2 * math.pi * f_res
    theta = np.abs(ang - target)
    a = (f > f_res) & (theta >= 0.2)
    bl = (f < f_res) & (theta >= 0.2)
    for side in (a, bl):  # at most MAX_SIDE_POINTS a side (evenly): a bounded pair matrix
        idx = np.flatnonzero(side)
        if idx.size > MAX_SIDE_POINTS:
            side[:] = False
            side[idx[np.linspace(0, idx.size - 1, MAX_SIDE_POINTS).round().astype(int)]] = True
    wa, ta = 2 * math.pi * f[a][:, None], theta[a][:, None]
    wb, tb = 2 * math.pi * f[bl][None, :], theta[bl][None, :]
    if wa.size * wb.size < 3:
        raise FitError("too few point pairs around the resonance for a circle fit")
    zetas = (wa**2 - wb**2) / (2 * w0 * (wa * np.tan(ta / 2) + wb * np.tan(tb / 2)))
    return f_res, 1 / (2 * float(np.median(zetas))), zetas.ravel()


def circle_fit(freqs_hz: NDArray[np.float64], h: NDArray[np.complex128], f0_hz: float,
               q: float, delay_s: float = 0.0, sign: float = 1.0,
               sigma: NDArray[np.float64] | None = None, seed: int = 0) -> CircleFit:
    """Kennedy-Pancu estimate of f0 and Q from the points within about one
    half-power bandwidth of ``f0_hz`` (start values from another estimate),
    after removing the delay and sign.

    Standard errors: with ``sigma`` (each bin's complex noise, sqrt E|n|^2, on
    ``freqs_hz``), the spread of the estimate over ``BOOTSTRAP_REPLICAS``
    replicas of the data with complex Gaussian noise of that size added (a
    parametric bootstrap, B. Efron, "Bootstrap methods: another look at the
    jackknife", Annals of Statistics 7(1), 1979; seeded by ``seed``, so a result
    is reproducible). Without it, a rough figure from the circle's residuals and
    the spread of the pair estimates.
    """
    half = f0_hz / (2 * q)
    sel = (freqs_hz >= f0_hz - 2 * half) & (freqs_hz <= f0_hz + 2 * half) & np.isfinite(h)
    f = freqs_hz[sel]
    if f.size < 6:
        raise FitError("too few points near the resonance for a circle fit")
    order = np.argsort(f)
    f = f[order]
    rot = 1j * f * np.exp(2j * np.pi * f * delay_s) * sign
    b = rot * h[sel][order]
    f_res, q_c, zetas = _estimate(f, b)
    sig = None if sigma is None else np.asarray(sigma, dtype=np.float64)[sel][order]
    if sig is not None and np.all(np.isfinite(sig)) and np.all(sig > 0):
        rng = np.random.default_rng(seed)
        reps = []
        for _ in range(BOOTSTRAP_REPLICAS):
            noise = sig * (rng.standard_normal(f.size) + 1j * rng.standard_normal(f.size))
            try:
                reps.append(_estimate(f, b + rot * noise / math.sqrt(2))[:2])
            except FitError:
                continue
        if len(reps) >= BOOTSTRAP_REPLICAS // 2:
            arr = np.asarray(reps)
            return CircleFit(f_res, float(np.std(arr[:, 0], ddof=1)), q_c,
                             float(np.std(arr[:, 1], ddof=1)), int(f.size))
    # no noise model: the spread of the pair estimates (pairs are not independent)
    # and the circle's residuals, as a rough figure
    c, r = fit_circle_points(b)
    n_eff = max(1, min(int(np.count_nonzero(f > f_res)), int(np.count_nonzero(f < f_res))))
    q_se = float(np.std(1 / (2 * zetas)) / math.sqrt(n_eff))
    res = np.abs(np.abs(b - c) - r)
    f_se = float(np.mean(res) / r * (f_res / q_c) / math.sqrt(f.size))
    return CircleFit(f_res, f_se, q_c, q_se, int(f.size))
