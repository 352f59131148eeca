"""Lumped Helmholtz resonator: end corrections, f0 from geometry, and back.

- :func:`end_correction_m` -- length added at one end of the neck.
- :func:`helmholtz_f0_hz` -- the lumped resonance formula.
- :func:`acoustic_mass_kg_m4`, :func:`compliance_m3_pa` -- the lumped elements.
- :func:`predict` -- object + air -> :class:`Prediction`.
- :func:`derive_from_f0` -- measured f0 + object + air -> :class:`Derived`
  (effective neck length and end correction, with standard errors).

Everything is SI: m, m^2, m^3, m/s, kg/m^3, Hz.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass

from .air import AirState
from .geometry import ResonatorObject

__all__ = [
    "FLANGED_END_FACTOR",
    "UNFLANGED_END_FACTOR",
    "END_FACTORS",
    "PLAUSIBLE_END_CORRECTION_OVER_RADIUS",
    "end_correction_m",
    "helmholtz_f0_hz",
    "acoustic_mass_kg_m4",
    "compliance_m3_pa",
    "Prediction",
    "predict",
    "Derived",
    "derive_from_f0",
]

#: End correction / radius of a flanged (baffled) end: 8/(3 pi), Rayleigh 1896.
FLANGED_END_FACTOR = 8.0 / (3.0 * math.pi)
#: End correction / radius of an unflanged thin-walled end, Levine & Schwinger 1948.
UNFLANGED_END_FACTOR = 0.6133

#: end condition -> end correction / radius
END_FACTORS = {"flanged": FLANGED_END_FACTOR, "unflanged": UNFLANGED_END_FACTOR}

# Range of the total end correction (both ends) over the neck radius that is
# accepted as plausible for a measured object. The physics sheet section 3
# gives typical totals from 1.1a (bottle: unflanged outside, neck into a
# narrow cavity) to about 1.7a (flanged neck into a large cavity); the range
# is widened on both sides (common practice) to leave room for measurement
# scatter, short necks, rounded or thick-walled ends and cavities that are
# not well described by a single volume.
PLAUSIBLE_END_CORRECTION_OVER_RADIUS = (0.6, 2.4)


def _positive(**values: float) -> None:
    for name, value in values.items():
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            raise ValueError(f"{name} must be a number, got {value!r}")
        if not (math.isfinite(value) and value > 0):
            raise ValueError(f"{name} must be finite and > 0, got {value!r}")


def end_correction_m(radius_m: float, condition: str) -> float:
    r"""End correction of one end of a round neck at low frequency (ka << 1).

    .. math::

        \delta_\text{flanged} = \frac{8}{3\pi} a \approx 0.8488\,a, \qquad
        \delta_\text{unflanged} = 0.6133\,a

    The flanged value is the mass end correction of a rigid piston in an
    infinite baffle; the unflanged value is the exact low-frequency limit
    for a thin-walled pipe radiating into free space.

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
    Lord Rayleigh, *The Theory of Sound*, vol. II, 2nd ed. (1896), section 302
    (section from memory). H. Levine, J. Schwinger, "On the radiation of
    sound from an unflanged circular pipe", Phys. Rev. 73(4), 383-406 (1948).
    """
    if condition not in END_FACTORS:
        allowed = ", ".join(repr(c) for c in END_FACTORS)
        raise ValueError(f"condition must be one of {allowed}, got {condition!r}")
    _positive(radius_m=radius_m)
    return END_FACTORS[condition] * radius_m


def helmholtz_f0_hz(
    speed_of_sound_m_s: float, area_m2: float, volume_m3: float, effective_length_m: float
) -> float:
    r"""Resonance frequency of a lumped Helmholtz resonator.

    .. math::

        f_0 = \frac{c}{2\pi}\sqrt{\frac{S}{V L_\text{eff}}}

    Parameters
    ----------
    speed_of_sound_m_s : float
        Speed of sound c, m/s.
    area_m2 : float
        Neck cross-section S, m^2.
    volume_m3 : float
        Cavity volume V, m^3.
    effective_length_m : float
        Effective neck length L_eff (physical length plus end corrections), m.

    Returns
    -------
    float
        f0, Hz.

    References
    ----------
    Lord Rayleigh, *The Theory of Sound*, vol. II, 2nd ed. (1896),
    sections 303-306; L. E. Kinsler, A. R. Frey, A. B. Coppens,
    J. V. Sanders, *Fundamentals of Acoustics*, 4th ed. (2000), section 10.8
    (sections from memory).
    """
    _positive(
        speed_of_sound_m_s=speed_of_sound_m_s,
        area_m2=area_m2,
        volume_m3=volume_m3,
        effective_length_m=effective_length_m,
    )
    return speed_of_sound_m_s / (2.0 * math.pi) * math.sqrt(
        area_m2 / (volume_m3 * effective_length_m)
    )


def acoustic_mass_kg_m4(density_kg_m3: float, effective_length_m: float, area_m2: float) -> float:
    r"""Acoustic mass of the air in the neck.

    .. math::

        M = \frac{\rho L_\text{eff}}{S}

    Parameters
    ----------
    density_kg_m3 : float
        Air density rho, kg/m^3.
    effective_length_m : float
        Effective neck length L_eff, m.
    area_m2 : float
        Neck cross-section S, m^2.

    Returns
    -------
    float
        M, kg/m^4.

    References
    ----------
    L. E. Kinsler, A. R. Frey, A. B. Coppens, J. V. Sanders, *Fundamentals of
    Acoustics*, 4th ed. (2000), section 10.8 (section from memory).
    """
    _positive(
        density_kg_m3=density_kg_m3, effective_length_m=effective_length_m, area_m2=area_m2
    )
    return density_kg_m3 * effective_length_m / area_m2


def compliance_m3_pa(volume_m3: float, density_kg_m3: float, speed_of_sound_m_s: float) -> float:
    r"""Acoustic compliance of the cavity (adiabatic).

    .. math::

        C = \frac{V}{\rho c^2}

    Parameters
    ----------
    volume_m3 : float
        Cavity volume V, m^3.
    density_kg_m3 : float
        Air density rho, kg/m^3.
    speed_of_sound_m_s : float
        Speed of sound c, m/s.

    Returns
    -------
    float
        C, m^3/Pa.

    References
    ----------
    L. E. Kinsler, A. R. Frey, A. B. Coppens, J. V. Sanders, *Fundamentals of
    Acoustics*, 4th ed. (2000), section 10.8 (section from memory).
    """
    _positive(
        volume_m3=volume_m3, density_kg_m3=density_kg_m3, speed_of_sound_m_s=speed_of_sound_m_s
    )
    return volume_m3 / (density_kg_m3 * speed_of_sound_m_s**2)


@dataclass(frozen=True, slots=True)
class Prediction:
    """Lumped prediction for one object at one air state.

    Attributes
    ----------
    f0_hz : float
        Resonance frequency, Hz.
    effective_neck_length_m : float
        Neck length plus both end corrections, m.
    end_correction_m : float
        Total end correction (outer + inner), m.
    outer_end_correction_m, inner_end_correction_m : float
        End correction of each end, m.
    acoustic_mass_kg_m4 : float
        rho L_eff / S, kg/m^4.
    compliance_m3_pa : float
        V / (rho c^2), m^3/Pa.
    """

    f0_hz: float
    effective_neck_length_m: float
    end_correction_m: float
    outer_end_correction_m: float
    inner_end_correction_m: float
    acoustic_mass_kg_m4: float
    compliance_m3_pa: float

    def to_dict(self) -> dict[str, float]:
        """Plain floats, JSON-safe."""
        return {k: float(v) for k, v in asdict(self).items()}

    def __str__(self) -> str:
        return (
            f"predicted f0 = {self.f0_hz:.3f} Hz "
            f"(L_eff = {1e3 * self.effective_neck_length_m:.3f} mm, "
            f"end correction {1e3 * self.end_correction_m:.3f} mm)"
        )


def predict(obj: ResonatorObject, air: AirState) -> Prediction:
    r"""Lumped Helmholtz prediction of f0 from the geometry and the air.

    .. math::

        L_\text{eff} = L + \delta_\text{outer} + \delta_\text{inner},\qquad
        f_0 = \frac{c}{2\pi}\sqrt{\frac{S}{V L_\text{eff}}}

    with each :math:`\delta` from :func:`end_correction_m` for the end
    condition in the object file. No wave (1-D) or boundary-layer
    corrections are applied.

    Parameters
    ----------
    obj : ResonatorObject
        Geometry (SI units).
    air : AirState
        Air properties; uses ``speed_of_sound_m_s`` (m/s) and
        ``density_kg_m3`` (kg/m^3).

    Returns
    -------
    Prediction

    References
    ----------
    See :func:`end_correction_m` and :func:`helmholtz_f0_hz`.
    """
    neck = obj.neck
    outer = end_correction_m(neck.radius_m, neck.outer_end)
    inner = end_correction_m(neck.radius_m, neck.inner_end)
    l_eff = neck.length_m + outer + inner
    c = air.speed_of_sound_m_s
    return Prediction(
        f0_hz=helmholtz_f0_hz(c, neck.area_m2, obj.cavity.volume_m3, l_eff),
        effective_neck_length_m=l_eff,
        end_correction_m=outer + inner,
        outer_end_correction_m=outer,
        inner_end_correction_m=inner,
        acoustic_mass_kg_m4=acoustic_mass_kg_m4(air.density_kg_m3, l_eff, neck.area_m2),
        compliance_m3_pa=compliance_m3_pa(obj.cavity.volume_m3, air.density_kg_m3, c),
    )


@dataclass(frozen=True, slots=True)
class Derived:
    """Neck quantities derived from a measured f0.

    Attributes
    ----------
    effective_neck_length_m, effective_neck_length_stderr_m : float
        L_eff and its standard error, m.
    end_correction_m, end_correction_stderr_m : float
        L_eff - L (total of both ends) and its standard error, m.
    end_correction_over_radius, end_correction_over_radius_stderr : float
        End correction / neck radius and its standard error, 1.
    """

    effective_neck_length_m: float
    effective_neck_length_stderr_m: float
    end_correction_m: float
    end_correction_stderr_m: float
    end_correction_over_radius: float
    end_correction_over_radius_stderr: float

    def to_dict(self) -> dict[str, float]:
        """Plain floats, JSON-safe (NaN where no standard error was given)."""
        return {k: float(v) for k, v in asdict(self).items()}

    def __str__(self) -> str:
        return (
            f"L_eff = {1e3 * self.effective_neck_length_m:.3f} "
            f"+/- {1e3 * self.effective_neck_length_stderr_m:.3f} mm, end correction "
            f"{self.end_correction_over_radius:.3f} +/- "
            f"{self.end_correction_over_radius_stderr:.3f} a"
        )


def derive_from_f0(
    f0_hz: float, f0_stderr_hz: float, obj: ResonatorObject, air: AirState
) -> Derived:
    r"""Effective neck length and end correction from a measured f0.

    Inverting :func:`helmholtz_f0_hz`:

    .. math::

        L_\text{eff} = \frac{S c^2}{(2\pi f_0)^2 V},\qquad
        \delta = L_\text{eff} - L,\qquad
        \sigma_{L} = \sigma_\delta = 2 L_\text{eff}\,\frac{\sigma_f}{f_0}

    (first-order propagation of the f0 standard error only; the errors of
    c, S, V and L are not included). The end correction over the radius is
    :math:`\delta/a` with standard error :math:`\sigma_\delta/a`.

    Parameters
    ----------
    f0_hz : float
        Measured resonance frequency, Hz.
    f0_stderr_hz : float
        Its standard error, Hz (>= 0; NaN propagates to NaN).
    obj : ResonatorObject
        Geometry (SI units).
    air : AirState
        Air properties; uses ``speed_of_sound_m_s`` (m/s).

    Returns
    -------
    Derived

    Raises
    ------
    ValueError
        f0 not finite and positive, or a negative standard error.

    References
    ----------
    Lord Rayleigh, *The Theory of Sound*, vol. II, 2nd ed. (1896),
    sections 303-306; L. E. Kinsler, A. R. Frey, A. B. Coppens,
    J. V. Sanders, *Fundamentals of Acoustics*, 4th ed. (2000), section 10.8
    (sections from memory).
    """
    _positive(f0_hz=f0_hz)
    if isinstance(f0_stderr_hz, bool) or not isinstance(f0_stderr_hz, (int, float)):
        raise ValueError(f"f0_stderr_hz must be a number, got {f0_stderr_hz!r}")
    if f0_stderr_hz < 0 or math.isinf(f0_stderr_hz):
        raise ValueError(f"f0_stderr_hz must be finite and >= 0 (or NaN), got {f0_stderr_hz!r}")
    neck = obj.neck
    c = air.speed_of_sound_m_s
    _positive(speed_of_sound_m_s=c)
    l_eff = neck.area_m2 * c**2 / ((2.0 * math.pi * f0_hz) ** 2 * obj.cavity.volume_m3)
    sigma_l = 2.0 * l_eff * f0_stderr_hz / f0_hz
    delta = l_eff - neck.length_m
    return Derived(
        effective_neck_length_m=l_eff,
        effective_neck_length_stderr_m=sigma_l,
        end_correction_m=delta,
        end_correction_stderr_m=sigma_l,
        end_correction_over_radius=delta / neck.radius_m,
        end_correction_over_radius_stderr=sigma_l / neck.radius_m,
    )
