"""Losses and the small corrections of the lumped Helmholtz model.

Boundary layers, the resistances and conductances that set Q, the frequency
shift the boundary layers cause, and Rayleigh's first-order corrections for
the inertia of the air in the cavity and the compliance of the air in the
neck. Pure functions of numbers (SI units); :mod:`characterize.physics.helmholtz`
applies them to an object.

Acoustic quantities: resistance R in Pa s/m^3, conductance G in m^3/(Pa s).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import asdict, dataclass

__all__ = [
    "VISCOUS_END_TERM_OVER_RADIUS",
    "VISCOUS_END_TERM_RANGE_OVER_RADIUS",
    "viscous_boundary_layer_m",
    "thermal_boundary_layer_m",
    "viscous_resistance_pa_s_m3",
    "thermal_conductance_m3_pa_s",
    "cavity_inertia_length_m",
    "cavity_viscous_resistance_pa_s_m3",
    "boundary_layer_shift",
    "QBudget",
]

#: Viscous end term of the neck (added length of wall per neck, over its
#: radius): the wall around each end carries boundary-layer shear too. The
#: value a (half a radius per end) sits between the end term of Maa's
#: micro-perforate formula (about a/2 in total) and the 2a also used; the
#: physics sheet marks the convention UNVERIFIED, so the predicted Q carries the
#: range below as its spread.
VISCOUS_END_TERM_OVER_RADIUS = 1.0
#: Range of the viscous end term over which the predicted Q is reported.
VISCOUS_END_TERM_RANGE_OVER_RADIUS = (0.5, 2.0)


def _check(**values: float) -> None:
    for name, value in values.items():
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            raise ValueError(f"{name} must be a number, got {value!r}")
        if not (math.isfinite(value) and value >= 0):
            raise ValueError(f"{name} must be finite and >= 0, got {value!r}")


def viscous_boundary_layer_m(viscosity_pa_s: float, density_kg_m3: float,
                             frequency_hz: float) -> float:
    r"""Viscous boundary-layer thickness.

    .. math::

        \delta_v = \sqrt{\frac{2\mu}{\rho\omega}}

    Parameters
    ----------
    viscosity_pa_s : float
        Dynamic viscosity mu, Pa s.
    density_kg_m3 : float
        Density rho, kg/m^3.
    frequency_hz : float
        Frequency, Hz.

    Returns
    -------
    float
        delta_v, m.

    References
    ----------
    L. E. Kinsler, A. R. Frey, A. B. Coppens, J. V. Sanders, *Fundamentals of
    Acoustics*, 4th ed. (2000), ch. 8 (from memory).
    """
    _check(viscosity_pa_s=viscosity_pa_s, density_kg_m3=density_kg_m3, frequency_hz=frequency_hz)
    return math.sqrt(2.0 * viscosity_pa_s / (density_kg_m3 * 2.0 * math.pi * frequency_hz))


def thermal_boundary_layer_m(conductivity_w_mk: float, density_kg_m3: float, cp_j_kgk: float,
                             frequency_hz: float) -> float:
    r"""Thermal boundary-layer thickness.

    .. math::

        \delta_t = \sqrt{\frac{2\kappa}{\rho c_p \omega}} = \delta_v/\sqrt{\mathrm{Pr}}

    Parameters
    ----------
    conductivity_w_mk : float
        Thermal conductivity kappa, W/(m K).
    density_kg_m3 : float
        Density, kg/m^3.
    cp_j_kgk : float
        Isobaric specific heat, J/(kg K).
    frequency_hz : float
        Frequency, Hz.

    Returns
    -------
    float
        delta_t, m.

    References
    ----------
    L. E. Kinsler et al., *Fundamentals of Acoustics*, 4th ed. (2000), ch. 8
    (from memory).
    """
    _check(conductivity_w_mk=conductivity_w_mk, density_kg_m3=density_kg_m3,
           cp_j_kgk=cp_j_kgk, frequency_hz=frequency_hz)
    return math.sqrt(2.0 * conductivity_w_mk
                     / (density_kg_m3 * cp_j_kgk * 2.0 * math.pi * frequency_hz))


def viscous_resistance_pa_s_m3(density_kg_m3: float, frequency_hz: float, delta_v_m: float,
                               wall_length_m: float, area_m2: float, perimeter_m: float,
                               count: int = 1) -> float:
    r"""Viscous resistance of ``count`` identical wide ducts in parallel.

    .. math::

        R_v = \frac{1}{N}\,\frac{\rho\omega\delta_v\,P\,\ell}{2S^2}

    the wide-duct (:math:`a \gg \delta_v`) limit of the Zwikker-Kosten
    series impedance; for a round duct :math:`P/(2S^2) = 1/(aS)`, which
    gives the familiar :math:`\rho\omega\delta_v\ell/(aS)`.

    Parameters
    ----------
    density_kg_m3 : float
        Density rho, kg/m^3.
    frequency_hz : float
        Frequency, Hz.
    delta_v_m : float
        Viscous boundary layer, m.
    wall_length_m : float
        Length of wall the flow passes (neck length plus the end term), m.
    area_m2 : float
        Cross-section S of ONE duct, m^2.
    perimeter_m : float
        Wetted perimeter P of one duct, m.
    count : int
        Number of ducts N.

    Returns
    -------
    float
        R_v for the total flow, Pa s/m^3.

    References
    ----------
    D. H. Keefe, "Acoustical wave propagation in cylindrical ducts:
    transmission line parameter approximations for isothermal and
    nonisothermal boundary conditions", J. Acoust. Soc. Am. 75(1), 58-62
    (1984); C. Zwikker, C. W. Kosten, *Sound Absorbing Materials* (1949).
    """
    omega = 2.0 * math.pi * frequency_hz
    return density_kg_m3 * omega * delta_v_m * perimeter_m * wall_length_m / (
        2.0 * area_m2 * area_m2 * count)


def thermal_conductance_m3_pa_s(frequency_hz: float, gamma: float, delta_t_m: float,
                                wall_area_m2: float, density_kg_m3: float,
                                speed_of_sound_m_s: float) -> float:
    r"""Shunt conductance of the thermal boundary layer on isothermal walls.

    .. math::

        G_t = \frac{\omega(\gamma - 1) A_w \delta_t}{2\rho c^2}

    so that a cavity of volume V has :math:`Q_t = \omega C/G_t = 2V/((\gamma-1)A_w\delta_t)`.

    Parameters
    ----------
    frequency_hz : float
        Frequency, Hz.
    gamma : float
        Ratio of specific heats, 1.
    delta_t_m : float
        Thermal boundary layer, m.
    wall_area_m2 : float
        Wall area A_w in contact with the oscillating pressure, m^2.
    density_kg_m3 : float
        Density, kg/m^3.
    speed_of_sound_m_s : float
        Speed of sound, m/s.

    Returns
    -------
    float
        G_t, m^3/(Pa s).

    References
    ----------
    D. H. Keefe, J. Acoust. Soc. Am. 75(1), 58-62 (1984) (the shunt term
    :math:`1 + (\gamma-1)(1-j)\delta_t/a` of a tube, per unit wall area).
    """
    omega = 2.0 * math.pi * frequency_hz
    return omega * (gamma - 1.0) * wall_area_m2 * delta_t_m / (
        2.0 * density_kg_m3 * speed_of_sound_m_s**2)


def _volume_integrals(sections: Sequence[tuple[float, float]]) -> list[tuple[float, float, float]]:
    """(area, length, integral of (V(x)/V)^2 dx over the section) from the bottom up."""
    total = sum(a * ln for a, ln in sections)
    out = []
    v0 = 0.0
    for area, length in sections:
        v1 = v0 + area * length
        out.append((area, length, (v1**3 - v0**3) / (3.0 * area * total * total)))
        v0 = v1
    return out


def cavity_inertia_length_m(neck_area_m2: float,
                            sections: Sequence[tuple[float, float]]) -> float:
    r"""Extra neck length for the inertia of the air moving inside the cavity.

    With the flow falling linearly with the volume below each height,
    :math:`U(x) = U\,V(x)/V`, the cavity's kinetic energy adds

    .. math::

        \Delta L = S\int_0^{L_c}\frac{(V(x)/V)^2}{A(x)}\,dx

    to the neck's effective length (for a cylinder :math:`S L_c/(3 S_c)`,
    Rayleigh's one-third rule), evaluated exactly for stacked sections.

    Parameters
    ----------
    neck_area_m2 : float
        Total neck area S, m^2.
    sections : sequence of (area_m2, length_m)
        Cavity sections from the closed end up to the neck.

    Returns
    -------
    float
        Delta L, m.

    References
    ----------
    Lord Rayleigh, *The Theory of Sound*, vol. II (1896), sections 305-307
    (the one-third corrections; from memory); the integral for a
    non-uniform cavity is the physics sheet's own first-order derivation
    (section 4).
    """
    return neck_area_m2 * sum(i / a for a, _, i in _volume_integrals(sections))


def cavity_viscous_resistance_pa_s_m3(density_kg_m3: float, frequency_hz: float,
                                      delta_v_m: float,
                                      sections: Sequence[tuple[float, float, float]]) -> float:
    r"""Viscous resistance of the cavity's side walls.

    .. math::

        R_c = \int_0^{L_c}\frac{\rho\omega\delta_v P(x)}{2A(x)^2}\left(\frac{V(x)}{V}\right)^2 dx

    (for a cylinder :math:`\rho\omega\delta_v L_c/(3R_cS_c)`); usually negligible.

    Parameters
    ----------
    density_kg_m3 : float
        Density, kg/m^3.
    frequency_hz : float
        Frequency, Hz.
    delta_v_m : float
        Viscous boundary layer, m.
    sections : sequence of (area_m2, length_m, perimeter_m)
        Cavity sections from the closed end up.

    Returns
    -------
    float
        R_c, Pa s/m^3.

    References
    ----------
    Physics sheet section 5 (cylinder form); Zwikker-Kosten wide-tube
    resistance per unit length (D. H. Keefe, J. Acoust. Soc. Am. 75(1),
    58-62, 1984) weighted by the flow.
    """
    omega = 2.0 * math.pi * frequency_hz
    ints = _volume_integrals([(a, ln) for a, ln, _ in sections])
    return sum(density_kg_m3 * omega * delta_v_m * p / (2.0 * a * a) * i
               for (a, _, i), (_, _, p) in zip(ints, sections, strict=False))


def boundary_layer_shift(delta_v_m: float, neck_wall_length_m: float, neck_area_m2: float,
                         neck_perimeter_m: float, effective_length_m: float,
                         gamma: float, delta_t_m: float, wall_area_m2: float,
                         volume_m3: float) -> tuple[float, float]:
    r"""Relative frequency shifts caused by the boundary layers.

    The boundary layers' reactances equal their resistances, so the neck's
    viscous layer adds mass and the walls' thermal layer adds compliance:

    .. math::

        \frac{\Delta f}{f} \approx -\frac{\delta_v P\,\ell}{4 S L_\text{eff}}
            - \frac{(\gamma - 1) A_w \delta_t}{4V}

    (for a round neck :math:`P/(4S) = 1/(2a)`).

    Parameters
    ----------
    delta_v_m : float
        Viscous boundary layer, m.
    neck_wall_length_m : float
        Neck wall length the flow passes (with the end term), m.
    neck_area_m2, neck_perimeter_m : float
        Area and perimeter of one opening, m^2 and m.
    effective_length_m : float
        Effective length the neck's mass is measured with, m.
    gamma : float
        Ratio of specific heats.
    delta_t_m : float
        Thermal boundary layer, m.
    wall_area_m2 : float
        Wall area of the cavity (and neck), m^2.
    volume_m3 : float
        Cavity volume, m^3.

    Returns
    -------
    (viscous, thermal) : tuple of float
        The two relative shifts (negative), 1.

    References
    ----------
    D. H. Keefe, J. Acoust. Soc. Am. 75(1), 58-62 (1984) (the reactive parts
    of the wide-tube series and shunt terms); physics sheet section 5.
    """
    viscous = -delta_v_m * neck_perimeter_m * neck_wall_length_m / (
        4.0 * neck_area_m2 * effective_length_m)
    thermal = -(gamma - 1.0) * wall_area_m2 * delta_t_m / (4.0 * volume_m3)
    return viscous, thermal


@dataclass(frozen=True, slots=True)
class QBudget:
    """Lumped quality factor and its parts, evaluated at ``frequency_hz``.

    Each ``q_*`` is omega M / R (series terms) or omega C / G (shunt terms);
    ``1/q = sum(1/q_i)``. Resistances in Pa s/m^3, conductances in m^3/(Pa s).
    The smooth-wall terms (radiation, viscous and thermal on the neck's and
    cavity's side walls) are what 1-D visco-thermal bore models contain; the
    end terms (the viscous end term of the neck and the thermal layer on the
    flat end walls and steps) are added by this tool.
    """

    frequency_hz: float
    q: float
    q_radiation: float
    q_viscous_neck: float
    q_viscous_cavity: float
    q_thermal_cavity: float
    q_thermal_neck: float
    q_without_radiation: float
    radiation_resistance_pa_s_m3: float
    viscous_resistance_neck_pa_s_m3: float
    viscous_resistance_cavity_pa_s_m3: float
    thermal_conductance_cavity_m3_pa_s: float
    thermal_conductance_neck_m3_pa_s: float
    q_viscous_end: float = math.inf
    q_thermal_end: float = math.inf
    q_smooth_wall: float = math.nan
    viscous_resistance_end_pa_s_m3: float = 0.0
    thermal_conductance_end_m3_pa_s: float = 0.0

    def to_dict(self) -> dict[str, float]:
        return {k: float(v) for k, v in asdict(self).items()}

    @classmethod
    def from_elements(cls, frequency_hz: float, mass_kg_m4: float, compliance_m3_pa: float,
                      r_rad: float, r_neck: float, r_cavity: float, g_cavity: float,
                      g_neck: float, r_end: float = 0.0, g_end: float = 0.0) -> QBudget:
        r"""Assemble from the elements: :math:`1/Q = \sum R/(\omega M) + \sum G/(\omega C)`.

        ``r_end`` and ``g_end`` are the end terms (viscous end term, thermal
        layer on the end walls); ``q_smooth_wall`` leaves them out.

        References
        ----------
        Physics sheet section 2 (series resistance and shunt conductance of a
        lumped resonator); L. E. Kinsler et al., *Fundamentals of Acoustics*,
        4th ed. (2000), section 10.8 (from memory).
        """
        omega = 2.0 * math.pi * frequency_hz
        wm, wc = omega * mass_kg_m4, omega * compliance_m3_pa

        def q_of(x: float) -> float:
            return math.inf if x <= 0 else 1.0 / x

        parts = [r_rad / wm, r_neck / wm, r_cavity / wm, g_cavity / wc, g_neck / wc]
        ends = [r_end / wm, g_end / wc]
        return cls(
            frequency_hz=frequency_hz, q=q_of(sum(parts) + sum(ends)),
            q_radiation=q_of(parts[0]),
            q_viscous_neck=q_of(parts[1]), q_viscous_cavity=q_of(parts[2]),
            q_thermal_cavity=q_of(parts[3]), q_thermal_neck=q_of(parts[4]),
            q_without_radiation=q_of(sum(parts[1:]) + sum(ends)),
            radiation_resistance_pa_s_m3=r_rad, viscous_resistance_neck_pa_s_m3=r_neck,
            viscous_resistance_cavity_pa_s_m3=r_cavity,
            thermal_conductance_cavity_m3_pa_s=g_cavity,
            thermal_conductance_neck_m3_pa_s=g_neck,
            q_viscous_end=q_of(ends[0]), q_thermal_end=q_of(ends[1]),
            q_smooth_wall=q_of(sum(parts)),
            viscous_resistance_end_pa_s_m3=r_end, thermal_conductance_end_m3_pa_s=g_end,
        )
