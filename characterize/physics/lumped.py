"""The lumped Helmholtz resonator's elements: the neck's end corrections, the
resonance formula, the acoustic mass and compliance, and the object as a 1-D
bore for the distributed model.

Everything is SI: m, m^2, m^3, m/s, kg/m^3, Hz, Pa s/m^3.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

from .geometry import ResonatorObject, section_parts
from .losses import (
    VISCOUS_END_TERM_OVER_RADIUS,
)
from .radiation import (
    PISTON_END_FACTOR,
    _positive,
    end_correction_m,
    flanged_rectangle_end_correction_m,
    ingard_inner_end_correction_m,
    step_end_correction_m,
)

#: Slices of the 1-D model of a sphere (volume-exact stacked cylinders).
SPHERE_SLICES = 32


@dataclass(frozen=True, slots=True)
class EndCorrections:
    """The two ends of one opening, m.

    Attributes
    ----------
    outer_m, inner_m : float
        End corrections used by the prediction, m.
    inner_alternative_m : float
        Ingard's (1953) form of the inner correction, for comparison, m
        (equal to ``inner_m`` when the inner end is not a step into a
        cavity of known section).
    shape_factor : float
        Slot correction over that of the circle of equal area (1 for round).
    radius_ratio : float or None
        xi = sqrt(S / S_c), opening over cavity cross-section (per opening's
        share), when the cavity's section is known.
    outer_source, inner_source : str
        Which formula (or "explicit") gave each value.
    """

    outer_m: float
    inner_m: float
    inner_alternative_m: float
    shape_factor: float
    radius_ratio: float | None
    outer_source: str
    inner_source: str

    @property
    def total_m(self) -> float:
        return self.outer_m + self.inner_m


def neck_end_corrections(obj: ResonatorObject) -> EndCorrections:
    r"""End corrections of the object's neck (one opening).

    - Outer end: :math:`0.6133a` unflanged (Levine & Schwinger 1948) or
      :math:`0.8216a` flanged (Norris & Sheng 1989), or the explicit value.
    - Inner end, flush with the cavity wall ("flanged"): the step correction
      of Kergomard & Garcia (1987) with :math:`\xi = \sqrt{S/S_c}`, S the
      total open area and :math:`S_c` the cavity's cross-section at the
      neck, so each of N openings gets a 1/N share of the cavity's section;
      for volume only, :math:`\xi = 0` (:math:`0.82a`, a wall of a large
      cavity). Protruding into the cavity ("unflanged"): :math:`0.6133a`.
      Ingard's (1953) :math:`0.48\sqrt{S}(1 - 1.25\xi)` is reported beside it.
    - Slots: the round value for the equal-area radius times the ratio of
      Rayleigh's mass integrals, rectangle over circle (own approximation;
      exact for flanged ends with uniform velocity).
    - Necks given as a profile: the outer end from the mouth's radius, the
      inner end from the innermost section's radius (each in its own area).
    - Tubes: no inner end when closed; an open far end (open-open tube) is
      an outer end of its kind (flanged or unflanged).

    Parameters
    ----------
    obj : ResonatorObject

    Returns
    -------
    EndCorrections

    References
    ----------
    See :func:`~characterize.physics.radiation.end_correction_m`,
    :func:`~characterize.physics.radiation.step_end_correction_m`,
    :func:`~characterize.physics.radiation.ingard_inner_end_correction_m` and
    :func:`~characterize.physics.radiation.flanged_rectangle_end_correction_m`.
    """
    neck, cav = obj.neck, obj.cavity
    a = neck.radius_m
    a_in = neck.inner_diameter_m / 2.0
    if neck.shape == "slot":
        assert neck.width_m is not None and neck.height_m is not None
        factor = flanged_rectangle_end_correction_m(neck.width_m, neck.height_m) / (
            PISTON_END_FACTOR * a)
    else:
        factor = 1.0
    if neck.outer_end_correction_m is not None:
        outer, outer_src = neck.outer_end_correction_m, "explicit"
    else:
        outer = factor * end_correction_m(a, neck.outer_end)
        outer_src = ("Levine & Schwinger 1948" if neck.outer_end == "unflanged"
                     else "Norris & Sheng 1989")
    side = cav.neck_side_area_m2
    xi = (None if side is None or obj.kind == "tube"
          else math.sqrt(neck.count * neck.inner_area_m2 / side))
    if obj.kind == "tube" and neck.inner_end == "closed":
        inner, inner_src, alt = 0.0, "closed end", 0.0
    elif neck.inner_end_correction_m is not None:
        inner, inner_src = neck.inner_end_correction_m, "explicit"
        alt = inner
    elif obj.kind == "tube":
        inner = end_correction_m(a_in, neck.inner_end)
        inner_src = ("Levine & Schwinger 1948" if neck.inner_end == "unflanged"
                     else "Norris & Sheng 1989")
        alt = inner
    elif neck.inner_end == "unflanged":
        inner, inner_src = factor * end_correction_m(a_in, "unflanged"), "Levine & Schwinger 1948"
        alt = inner
    elif xi is None:
        inner, inner_src = factor * step_end_correction_m(a_in, 0.0), "Kergomard & Garcia 1987"
        alt = factor * ingard_inner_end_correction_m(a_in, 0.0)
    else:
        inner = factor * step_end_correction_m(a_in, min(xi, 1.0))
        inner_src = "Kergomard & Garcia 1987"
        alt = factor * ingard_inner_end_correction_m(a_in, min(xi, 1.0))
    return EndCorrections(outer, inner, alt, factor, xi, outer_src, inner_src)


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


def bore_from_object(obj: ResonatorObject, *, end_losses: bool = True,
                     viscous_end_term_over_radius: float = VISCOUS_END_TERM_OVER_RADIUS,
                     sphere_slices: int = SPHERE_SLICES) -> Any:
    """The object as a :class:`~characterize.physics.distributed.Bore`, or None.

    Cavity ducts follow the shape (areas scaled so their volume equals the
    object's volume): one round duct for a cylinder, one rectangular duct
    (width x depth, ``height`` long) for a box, the listed sections for a
    profile, and ``sphere_slices`` volume-exact slices for a sphere, cut where
    its section equals the neck's total area (the taper then stands in for the
    inner end correction, so none is added). Volume only gives None.

    Parameters
    ----------
    obj : ResonatorObject
    end_losses : bool
        Give the closed end and the steps their thermal boundary layer (the
        1-D reference models of the tests have none).
    viscous_end_term_over_radius : float
        Viscous end term per opening, over its radius (see
        :data:`~characterize.physics.losses.VISCOUS_END_TERM_OVER_RADIUS`).
    sphere_slices : int
        Number of slices for a sphere.

    Returns
    -------
    Bore or None
    """
    from .distributed import Bore, Duct

    neck, cav = obj.neck, obj.cavity
    ends = neck_end_corrections(obj)
    necks = _neck_ducts(obj)
    neck_junctions = _junctions(necks)
    end_len = viscous_end_term_over_radius * neck.inner_diameter_m / 2.0
    if obj.kind == "tube":
        if neck.inner_end == "closed":
            return Bore((), necks[-1], 1, (), 0.0, ends.outer_m, neck.outer_end,
                        necks[0].area_m2 if end_losses else 0.0, (), end_len / 2.0,
                        tuple(necks[:-1]), neck_junctions)
        return Bore((), necks[-1], 1, (), 0.0, ends.outer_m, neck.outer_end, 0.0, (),
                    end_len / 2.0, tuple(necks[:-1]), neck_junctions, neck.inner_end,
                    ends.inner_m)
    s_scale = cav.area_scale
    lin = math.sqrt(s_scale)
    inner = ends.inner_m
    tapered = cav.shape in ("sphere", "ellipsoid")
    if cav.shape == "cylinder":
        assert cav.diameter_m is not None and cav.length_m is not None
        ducts: list[Any] = [Duct.round(cav.diameter_m * lin, cav.length_m)]
    elif cav.shape == "box":
        assert cav.width_m and cav.depth_m and cav.height_m
        ducts = [Duct.rectangle(cav.width_m * lin, cav.depth_m * lin, cav.height_m)]
    elif cav.shape == "elliptic-cylinder":
        assert cav.length_m is not None
        ducts = [Duct.ellipse(cav.semi_axes_m[0] * lin, cav.semi_axes_m[1] * lin,
                              cav.length_m)]
    elif cav.shape == "profile":
        ducts = [Duct.cone(d0 * lin, d1 * lin, ln)
                 for d0, d1, ln in (section_parts(sec) for sec in cav.sections)]
    elif tapered:
        if cav.shape == "sphere":
            assert cav.diameter_m is not None
            ax = ay = cav.diameter_m / 2.0 * lin
            cz = cav.diameter_m / 2.0
        else:
            ax, ay = cav.semi_axes_m[0] * lin, cav.semi_axes_m[1] * lin
            cz = cav.semi_axes_m[2]
        ducts = _spheroid_slices(ax, ay, cz, neck.count * neck.inner_area_m2, sphere_slices)
        inner = 0.0
    else:
        return None
    junctions = (_junctions(ducts) if not tapered
                 else tuple(0.0 for _ in ducts[1:]))
    if end_losses and not tapered:
        steps = [abs(d1.area_m2 - d0.far_area_m2) for d0, d1 in zip(ducts, ducts[1:],
                                                                     strict=False)]
        steps.append(max(ducts[-1].far_area_m2 - neck.count * neck.inner_area_m2, 0.0))
        closed, step_walls = ducts[0].area_m2, tuple(steps)
    else:
        closed, step_walls = 0.0, ()
    return Bore(tuple(ducts), necks[-1], neck.count, junctions, inner, ends.outer_m,
                neck.outer_end, closed, step_walls, end_len, tuple(necks[:-1]), neck_junctions)


def _neck_ducts(obj: ResonatorObject) -> list[Any]:
    """One opening's ducts from the cavity (or a tube's far end) outwards."""
    from .distributed import Duct

    neck = obj.neck
    if neck.sections:
        # given from the outside inwards, each from its outer to its inner diameter
        return [Duct.cone(d_in, d_out, ln) for d_out, d_in, ln in reversed(neck.sections)]
    if neck.shape == "slot":
        assert neck.width_m is not None and neck.height_m is not None
        return [Duct.rectangle(neck.width_m, neck.height_m, neck.length_m)]
    return [Duct.round(neck.diameter_m, neck.length_m)]


def _junctions(ducts: list[Any]) -> tuple[float, ...]:
    """Kergomard & Garcia step corrections between consecutive ducts (0 where
    they join without a step)."""
    out = []
    for d0, d1 in zip(ducts, ducts[1:], strict=False):
        a0, a1 = d0.far_area_m2, d1.area_m2
        if abs(a1 - a0) <= 1e-6 * max(a0, a1):
            out.append(0.0)
        else:
            out.append(step_end_correction_m(math.sqrt(min(a0, a1) / math.pi),
                                             math.sqrt(min(a0, a1) / max(a0, a1))))
    return tuple(out)


def _spheroid_slices(ax: float, ay: float, cz: float, cut_area_m2: float,
                     n: int) -> list[Any]:
    """Volume-exact round slices of an ellipsoid (semi-axes ax, ay across,
    cz along the axis) from the bottom pole up to where its section equals
    ``cut_area_m2``; slices uniform in the polar angle (finer near the poles)."""
    from .distributed import Duct

    s_eq = math.pi * ax * ay
    frac = min(cut_area_m2 / s_eq, 0.998)
    z_top = cz + cz * math.sqrt(1.0 - frac)
    theta_top = math.acos((cz - z_top) / cz)
    edges = [cz - cz * math.cos(theta_top * i / n) for i in range(n + 1)]
    out = []
    for z0, z1 in zip(edges, edges[1:], strict=False):
        h = z1 - z0
        vol = s_eq * (h - ((z1 - cz) ** 3 - (z0 - cz) ** 3) / (3.0 * cz * cz))
        out.append(Duct.round(2.0 * math.sqrt(vol / h / math.pi), h))
    return out
