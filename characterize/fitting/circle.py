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


def circle_fit(freqs_hz: NDArray[np.float64], h: NDArray[np.complex128], f0_hz: float,
               q: float, delay_s: float = 0.0, sign: float = 1.0) -> CircleFit:
    """Kennedy-Pancu estimate of f0 and Q from the points within about one
    half-power bandwidth of ``f0_hz`` (start values from another estimate),
    after removing the delay and sign."""
    half = f0_hz / (2 * q)
    sel = (freqs_hz >= f0_hz - 2 * half) & (freqs_hz <= f0_hz + 2 * half) & np.isfinite(h)
    f = freqs_hz[sel]
    if f.size < 6:
        raise FitError("too few points near the resonance for a circle fit")
    b = 1j * f * h[sel] * np.exp(2j * np.pi * f * delay_s) * sign
    c, r = fit_circle_points(b)
    ang = np.unwrap(np.angle(b - c))
    # resonance: the circle point opposite the origin, i.e. angle of c itself
    target = math.atan2(c.imag, c.real)
    target += 2 * math.pi * round((float(np.mean(ang)) - target) / (2 * math.pi))
    order = np.argsort(f)
    f, ang = f[order], ang[order]
    if not (min(ang[0], ang[-1]) <= target <= max(ang[0], ang[-1])):
        raise FitError("the circle does not pass through the resonance in the fitted points")
    f_res = float(np.interp(target, ang if ang[-1] > ang[0] else ang[::-1],
                            f if ang[-1] > ang[0] else f[::-1]))
    w0 = 2 * math.pi * f_res
    theta = np.abs(ang - target)
    above = f > f_res
    below = f < f_res
    zetas = []
    for fa, ta in zip(f[above], theta[above], strict=True):
        for fb, tb in zip(f[below], theta[below], strict=True):
            if ta < 0.2 or tb < 0.2:
                continue
            wa, wb = 2 * math.pi * fa, 2 * math.pi * fb
            den = 2 * w0 * (wa * math.tan(ta / 2) + wb * math.tan(tb / 2))
            zetas.append((wa**2 - wb**2) / den)
    if len(zetas) < 3:
        raise FitError("too few point pairs around the resonance for a circle fit")
    zeta = float(np.median(zetas))
    q_c = 1 / (2 * zeta)
    # spread of the pair estimates as a rough error (pairs are not independent)
    n_eff = max(1, min(int(np.count_nonzero(above)), int(np.count_nonzero(below))))
    q_se = float(np.std(1 / (2 * np.asarray(zetas))) / math.sqrt(n_eff))
    res = np.abs(np.abs(b - c) - r)
    f_se = float(np.mean(res) / r * (f_res / q_c) / math.sqrt(f.size))
    return CircleFit(f_res, f_se, q_c, q_se, int(f.size))
