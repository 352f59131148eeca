"""The neck's ends: end corrections, radiation resistance, and the outside
microphone standing in the resonator's own radiated field.

- :func:`end_correction_m` -- one end of a round neck, flanged or unflanged.
- :func:`rectangle_self_integral_m3`, :func:`flanged_rectangle_end_correction_m`
  -- Rayleigh's low-frequency mass integral for a rectangular (slot) opening.
- :func:`step_end_correction_m` -- a neck opening into a wider cavity
  (Kergomard & Garcia 1987); :func:`ingard_inner_end_correction_m` -- the
  older Ingard (1953) form, reported beside it.
- :func:`radiation_resistance_pa_s_m3` -- the mouth as a compact monopole.
- :func:`outside_mic_correction` -- remove the bias of a reference microphone
  that also hears the mouth's radiation.

Everything is SI (m, m^2, Pa s/m^3); time dependence is exp(+j omega t).
"""

from __future__ import annotations

import math
from typing import TYPE_CHECKING

if TYPE_CHECKING:
    import numpy as np
    from numpy.typing import NDArray

    from .air import AirState
    from .geometry import ResonatorObject

__all__ = [
    "FLANGED_END_FACTOR",
    "PISTON_END_FACTOR",
    "UNFLANGED_END_FACTOR",
    "END_FACTORS",
    "STEP_FACTOR_LARGE_CAVITY",
    "end_correction_m",
    "rectangle_self_integral_m3",
    "flanged_rectangle_end_correction_m",
    "step_end_correction_m",
    "ingard_inner_end_correction_m",
    "radiation_resistance_pa_s_m3",
    "monopole_gain",
    "outside_mic_correction",
]

#: End correction / radius of a pipe ending in an infinite flange (baffle),
#: Norris & Sheng 1989 (the pipe's own velocity profile; value from memory,
#: checked in the tests against openwind's flanged radiation model).
FLANGED_END_FACTOR = 0.8216
#: End correction / radius of a rigid piston (uniform velocity) in a baffle,
#: 8/(3 pi), Rayleigh 1896; used for the shape factor of slots.
PISTON_END_FACTOR = 8.0 / (3.0 * math.pi)
#: End correction / radius of an unflanged thin-walled end, Levine & Schwinger 1948.
UNFLANGED_END_FACTOR = 0.6133
#: end condition -> end correction / radius
END_FACTORS = {"flanged": FLANGED_END_FACTOR, "unflanged": UNFLANGED_END_FACTOR}
#: Kergomard & Garcia's step correction / radius for a vanishing radius ratio.
STEP_FACTOR_LARGE_CAVITY = 0.82


def _positive(**values: float) -> None:
    for name, value in values.items():
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            raise ValueError(f"{name} must be a number, got {value!r}")
        if not (math.isfinite(value) and value > 0):
            raise ValueError(f"{name} must be finite and > 0, got {value!r}")


def end_correction_m(radius_m: float, condition: str) -> float:
    r"""End correction of one end of a round neck at low frequency (ka << 1).

    .. math::

        \delta_\text{flanged} = 0.8216\,a, \qquad
        \delta_\text{unflanged} = 0.6133\,a

    The flanged value is the low-frequency limit for a pipe ending in an
    infinite flange (slightly below the uniform-velocity piston's
    :math:`8a/(3\pi) = 0.8488a`, :data:`PISTON_END_FACTOR`, because the
    pipe's velocity profile is not uniform); the unflanged value is the
    exact low-frequency limit for a thin-walled pipe radiating into free space.

    Parameters
    ----------
    radius_m : float
        Neck radius a, m.
    condition : str
        ``"flanged"`` or ``"unflanged"``.

    Returns
    -------
    float
        End correction, m.

    Raises
    ------
    ValueError
        Unknown condition (the message lists the allowed ones), or a radius
        that is not finite and positive.

    References
    ----------
    A. N. Norris, I. C. Sheng, "Acoustic radiation from a circular pipe with
    an infinite flange", J. Sound Vib. 135(1), 85-93 (1989) (value from
    memory). H. Levine, J. Schwinger, "On the radiation of sound from an
    unflanged circular pipe", Phys. Rev. 73(4), 383-406 (1948). Lord
    Rayleigh, *The Theory of Sound*, vol. II, 2nd ed. (1896), section 302
    (the piston; section from memory).
    """
    if condition not in END_FACTORS:
        allowed = ", ".join(repr(c) for c in END_FACTORS)
        raise ValueError(f"condition must be one of {allowed}, got {condition!r}")
    _positive(radius_m=radius_m)
    return END_FACTORS[condition] * radius_m


def rectangle_self_integral_m3(width_m: float, height_m: float) -> float:
    r"""Rayleigh's self-integral of a w x h rectangle, in closed form.

    .. math::

        I = \iint\!\!\iint \frac{dS\,dS'}{|r - r'|}
          = \tfrac{2}{3}\left(w^3 + h^3 - d^3\right)
            + 2 w^2 h \ln\frac{h + d}{w} + 2 w h^2 \ln\frac{w + d}{h},
        \qquad d = \sqrt{w^2 + h^2}

    (for a unit square :math:`\tfrac43(1 - \sqrt2) + 4\ln(1 + \sqrt2) = 2.97321`).

    Parameters
    ----------
    width_m, height_m : float
        Sides of the rectangle, m.

    Returns
    -------
    float
        I, m^3.

    References
    ----------
    Lord Rayleigh, *The Theory of Sound*, vol. II, 2nd ed. (1896), section 306
    (the mass integral; section from memory). The closed form is elementary
    integration of the 4-fold integral (own derivation, checked numerically
    in the tests against scipy's dblquad and against the physics sheet's table).
    """
    _positive(width_m=width_m, height_m=height_m)
    w, h = float(width_m), float(height_m)
    d = math.hypot(w, h)
    return (2.0 / 3.0 * (w**3 + h**3 - d**3)
            + 2.0 * w * w * h * math.log((h + d) / w)
            + 2.0 * w * h * h * math.log((w + d) / h))


def flanged_rectangle_end_correction_m(width_m: float, height_m: float) -> float:
    r"""End correction of one flanged rectangular opening with uniform velocity.

    .. math::

        \delta = \frac{I}{2\pi S^2}\cdot S = \frac{I}{2\pi S},\qquad S = w h

    with :math:`I` from :func:`rectangle_self_integral_m3` (the low-frequency
    limit of the radiation mass of a baffled uniform-velocity piston). For a
    circle the same integral gives :math:`8a/(3\pi)`.

    Parameters
    ----------
    width_m, height_m : float
        Sides of the opening, m.

    Returns
    -------
    float
        End correction, m.

    References
    ----------
    Lord Rayleigh, *The Theory of Sound*, vol. II (1896), section 306 (from
    memory); the same approach for rectangular apertures is used by
    J. Lindemann, J. Acoust. Soc. Am. 55, 708-717 (1974) and T. E. Vigran,
    J. Acoust. Soc. Am. 135, 2777-2784 (2014) (both from memory).
    """
    area = width_m * height_m
    return rectangle_self_integral_m3(width_m, height_m) / (2.0 * math.pi * area * area) * area


def step_end_correction_m(radius_m: float, radius_ratio: float) -> float:
    r"""End correction of a round neck opening into a wider coaxial tube.

    .. math::

        \delta = 0.82\,a\,\left(1 - 1.35\,\xi + 0.31\,\xi^3\right),
        \qquad \xi = a / R_c

    clamped at zero near :math:`\xi = 1`, where the fit runs slightly
    negative (the correction vanishes for equal radii).

    Parameters
    ----------
    radius_m : float
        Neck radius a, m.
    radius_ratio : float
        :math:`\xi = a/R_c`, 0 <= xi <= 1 (R_c the cavity's equal-area radius).

    Returns
    -------
    float
        End correction on the neck side, m.

    References
    ----------
    J. Kergomard, A. Garcia, "Simple discontinuities in acoustic waveguides
    at low frequencies: critical analysis and formulae", J. Sound Vib.
    114(3), 465-479 (1987).
    """
    _positive(radius_m=radius_m)
    xi = float(radius_ratio)
    if not (math.isfinite(xi) and 0.0 <= xi <= 1.0):
        raise ValueError(f"radius_ratio must be in 0..1, got {radius_ratio!r}")
    return max(0.0, STEP_FACTOR_LARGE_CAVITY * radius_m * (1.0 - 1.35 * xi + 0.31 * xi**3))


def ingard_inner_end_correction_m(radius_m: float, radius_ratio: float) -> float:
    r"""Ingard's end correction of a round orifice centred in a round cavity.

    .. math::

        \delta = 0.48\sqrt{S}\,(1 - 1.25\,\xi),\qquad \xi = a/R_c < 0.4

    Reported beside :func:`step_end_correction_m` as the spread of the
    inner correction; the form is from memory and marked UNVERIFIED in the
    project's physics sheet, so the prediction uses Kergomard & Garcia.

    Parameters
    ----------
    radius_m : float
        Orifice radius a, m.
    radius_ratio : float
        :math:`\xi = a/R_c`; values above 0.4 are outside the stated range
        and are evaluated anyway (floored at zero).

    Returns
    -------
    float
        End correction, m.

    References
    ----------
    U. Ingard, "On the theory and design of acoustic resonators", J. Acoust.
    Soc. Am. 25(6), 1037-1061 (1953).
    """
    _positive(radius_m=radius_m)
    return max(0.0, 0.48 * math.sqrt(math.pi) * radius_m * (1.0 - 1.25 * float(radius_ratio)))


def monopole_gain(baffle: str) -> float:
    """Radiation into a half space (``"flanged"``: 2) or full space (``"unflanged"``: 1)."""
    if baffle not in END_FACTORS:
        allowed = ", ".join(repr(c) for c in END_FACTORS)
        raise ValueError(f"baffle must be one of {allowed}, got {baffle!r}")
    return 2.0 if baffle == "flanged" else 1.0


def radiation_resistance_pa_s_m3(density_kg_m3: float, speed_of_sound_m_s: float,
                                 frequency_hz: float, baffle: str) -> float:
    r"""Radiation resistance of a compact mouth (ka << 1), per total volume velocity.

    .. math::

        R_\text{rad} = g\,\frac{\rho c k^2}{4\pi},\qquad g = 2\ \text{flanged},\ 1\ \text{unflanged}

    The flanged value is the baffled piston's (KFCS 2000, section 7.5); the
    unflanged one is Levine & Schwinger's normalized real part
    :math:`(ka)^2/4`. Several openings closer together than a wavelength
    radiate as one monopole, so the value holds for their total flow.

    Parameters
    ----------
    density_kg_m3 : float
        Air density, kg/m^3.
    speed_of_sound_m_s : float
        Speed of sound, m/s.
    frequency_hz : float
        Frequency, Hz.
    baffle : str
        ``"flanged"`` or ``"unflanged"``.

    Returns
    -------
    float
        R_rad, Pa s/m^3.

    References
    ----------
    L. E. Kinsler, A. R. Frey, A. B. Coppens, J. V. Sanders, *Fundamentals of
    Acoustics*, 4th ed. (2000), section 7.5 (from memory); H. Levine,
    J. Schwinger, Phys. Rev. 73(4), 383-406 (1948).
    """
    _positive(density_kg_m3=density_kg_m3, speed_of_sound_m_s=speed_of_sound_m_s,
              frequency_hz=frequency_hz)
    k = 2.0 * math.pi * frequency_hz / speed_of_sound_m_s
    return monopole_gain(baffle) * density_kg_m3 * speed_of_sound_m_s * k * k / (4.0 * math.pi)


def outside_mic_correction(freqs_hz: NDArray[np.float64], h: NDArray[np.complex128],
                           distance_m: float, baffle: str | None, obj: ResonatorObject,
                           air: AirState, *, gain: complex = 1.0, delay_s: float = 0.0
                           ) -> NDArray[np.complex128]:
    r"""Correct a measured inside/outside ratio for the mouth's own radiation.

    The outside (reference) microphone at distance r from the mouth hears
    the drive :math:`p_e` plus the field of the neck flow :math:`U` (into
    the cavity), a monopole for :math:`kr \ll 1,\ r \gg a`:

    .. math::

        p_\text{ref} = p_e - j\omega\rho U\,g\,\frac{e^{-jkr}}{4\pi r},\qquad
        U = j\omega C p_c,\quad C = \frac{V}{\rho c^2}

    with :math:`g = 2` for a mouth in a baffle (half space) and 1 in free
    space. So :math:`p_\text{ref} = p_e + k^2 V G(r)\,p_c` with
    :math:`G = g\,e^{-jkr}/(4\pi r)`, and the measured
    :math:`H_m = A\,p_c/p_\text{ref}` (A the channels' gain and delay,
    :math:`A = \text{gain}\cdot e^{-j\omega\tau}`) corrects to

    .. math::

        H = \frac{H_m}{1 - k^2 V G(r)\,H_m / A}

    the ratio to the drive alone. In the lumped model this adds
    :math:`\rho g\cos(kr)/(4\pi r)` back to the acoustic mass and
    :math:`g R_\text{rad,unfl}\,\mathrm{sinc}(kr)` back to the resistance:
    uncorrected, f0 reads high and Q misses its radiation damping.

    Parameters
    ----------
    freqs_hz : ndarray
        Frequencies, Hz.
    h : ndarray of complex
        Measured inside/outside ratio at ``freqs_hz`` (as recorded: channel
        gain, delay and polarity included).
    distance_m : float
        Distance from the centre of the mouth to the outside microphone, m
        (should be several neck radii; must exceed the neck radius).
    baffle : str or None
        ``"flanged"`` or ``"unflanged"``; None takes the object's
        ``neck.outer_end``.
    obj : ResonatorObject
        Geometry; uses ``cavity.volume_m3`` (m^3) and the neck radius (m).
    air : AirState
        Uses ``speed_of_sound_m_s`` (m/s).
    gain : complex, optional
        Channel gain A at low frequency (inside over outside, signed for an
        inverted polarity), as a first fit of the raw data reports it; 1 for
        calibrated, matched channels.
    delay_s : float, optional
        Inside-channel delay tau, s.

    Returns
    -------
    ndarray of complex
        Corrected ratio, in the same form (gain and delay kept) as ``h``.

    Raises
    ------
    InputError
        ``distance_m`` not finite or not larger than the neck radius.
    ValueError
        Unknown baffle, or ``freqs_hz`` and ``h`` of different shapes.

    References
    ----------
    Own derivation from the monopole field of the neck flow (physics sheet
    section 7, "Reference microphone in the resonator's own field"); the
    monopole field: L. E. Kinsler et al., *Fundamentals of Acoustics*, 4th
    ed. (2000), ch. 7 (from memory).
    """
    import numpy as np

    from ..errors import InputError

    if (isinstance(distance_m, bool) or not isinstance(distance_m, (int, float))
            or not math.isfinite(distance_m) or distance_m <= obj.neck.radius_m):
        raise InputError("--outside-distance", None,
                         f"must be a distance larger than the neck radius "
                         f"({1e3 * obj.neck.radius_m:.3g} mm), got {distance_m!r} m")
    f = np.asarray(freqs_hz, dtype=np.float64)
    hm = np.asarray(h, dtype=np.complex128)
    if f.shape != hm.shape:
        raise ValueError(f"freqs_hz {f.shape} and h {hm.shape} must have the same shape")
    g = monopole_gain(obj.neck.outer_end if baffle is None else baffle)
    k = 2.0 * np.pi * f / air.speed_of_sound_m_s
    green = g * np.exp(-1j * k * distance_m) / (4.0 * np.pi * distance_m)
    a = complex(gain) * np.exp(-2j * np.pi * f * delay_s)
    return hm / (1.0 - k * k * obj.cavity.volume_m3 * green * hm / a)
