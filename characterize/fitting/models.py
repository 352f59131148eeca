"""Model functions (pure numpy, no fitting library).

Time dependence e^{+j omega t}; frequencies in Hz.
"""

from __future__ import annotations

from typing import cast

import numpy as np
from numpy.typing import NDArray


def oscillator(freqs_hz: NDArray[np.float64], f0_hz: float, q: float) -> NDArray[np.complex128]:
    """Low-pass damped oscillator, the lumped Helmholtz resonator's p_c / p_e.

    .. math::

        R(f) = \\frac{1}{1 - (f/f_0)^2 + j f / (Q f_0)}

    Parameters
    ----------
    freqs_hz : array
        Frequencies (Hz).
    f0_hz : float
        Undamped resonance frequency (Hz).
    q : float
        Quality factor (dimensionless).

    References
    ----------
    Lord Rayleigh, *The Theory of Sound*, vol. II (1896), §§303-306; L.E. Kinsler,
    A.R. Frey, A.B. Coppens, J.V. Sanders, *Fundamentals of Acoustics*, 4th ed.
    (2000), §10.8.
    """
    x = np.asarray(freqs_hz, dtype=np.float64) / f0_hz
    return cast("NDArray[np.complex128]", 1.0 / (1.0 - x * x + 1j * x / q))


def inside_outside(freqs_hz: NDArray[np.float64], f0_hz: float, q: float, gain: float,
                   delay_s: float, sign: float = 1.0) -> NDArray[np.complex128]:
    """The measured ratio: ``sign * gain * R(f) * exp(-j 2 pi f delay)``.

    ``gain`` (>= 0) lumps the microphones' sensitivity ratio; ``delay_s`` > 0
    when the inside channel lags (path difference, converter skew);
    ``sign`` = -1 for a polarity inversion between the channels.
    """
    f = np.asarray(freqs_hz, dtype=np.float64)
    return sign * gain * oscillator(f, f0_hz, q) * np.exp(-2j * np.pi * f * delay_s)


def half_power_band(f0_hz: float, q: float) -> tuple[float, float]:
    r"""Half-power band of the band-pass form (j f/(Q f0)) R(f), where its power is
    half its peak:

    .. math::

        f_{1,2} = f_0\left(\sqrt{1 + \frac{1}{4Q^2}} \mp \frac{1}{2Q}\right),
        \qquad f_2 - f_1 = f_0/Q

    Parameters
    ----------
    f0_hz : float
        Resonance frequency (Hz).
    q : float
        Quality factor.

    Returns
    -------
    (f1_hz, f2_hz) : tuple of float
        Lower and upper half-power frequencies (Hz).

    References
    ----------
    L.E. Kinsler, A.R. Frey, A.B. Coppens, J.V. Sanders, *Fundamentals of Acoustics*,
    4th ed. (2000), §1.10 (forced oscillator; section from memory).
    """
    r = np.sqrt(1 + 1 / (4 * q * q))
    return float(f0_hz * (r - 1 / (2 * q))), float(f0_hz * (r + 1 / (2 * q)))
