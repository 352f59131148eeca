"""Helmholtz resonators and closed-open tubes: f0, higher modes and Q from the geometry.

- :func:`neck_end_corrections` -- both ends of the neck for an object.
- :func:`helmholtz_f0_hz` -- the lumped resonance formula.
- :func:`acoustic_mass_kg_m4`, :func:`compliance_m3_pa` -- the lumped elements.
- :func:`bore_from_object` -- the object as a 1-D bore (distributed model).
- :func:`predict` -- object + air -> :class:`Prediction` (lumped, corrected
  lumped and distributed f0, next modes, predicted Q with each contribution).
- :func:`derive_from_f0` -- measured f0 + object + air -> :class:`Derived`
  (effective neck length and end correction, with standard errors).

:mod:`.lumped` holds the lumped elements and :mod:`.derive` the inversion from
a measured f0; both are re-exported here.

Everything is SI: m, m^2, m^3, m/s, kg/m^3, Hz, Pa s/m^3.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass, field
from typing import Any

from .air import AirState
from .derive import PLAUSIBLE_END_CORRECTION_OVER_RADIUS, Derived, derive_from_f0
from .geometry import ResonatorObject
from .losses import (
    VISCOUS_END_TERM_OVER_RADIUS,
    VISCOUS_END_TERM_RANGE_OVER_RADIUS,
    QBudget,
    boundary_layer_shift,
    cavity_inertia_length_m,
    cavity_viscous_resistance_pa_s_m3,
    thermal_boundary_layer_m,
    thermal_conductance_m3_pa_s,
    viscous_boundary_layer_m,
    viscous_resistance_pa_s_m3,
)
from .lumped import (
    SPHERE_SLICES,
    EndCorrections,
    _neck_ducts,
    acoustic_mass_kg_m4,
    bore_from_object,
    compliance_m3_pa,
    helmholtz_f0_hz,
    neck_end_corrections,
)
from .radiation import (
    END_FACTORS,
    FLANGED_END_FACTOR,
    PISTON_END_FACTOR,
    UNFLANGED_END_FACTOR,
    _positive,
    end_correction_m,
    radiation_resistance_pa_s_m3,
)

__all__ = [
    "FLANGED_END_FACTOR",
    "PISTON_END_FACTOR",
    "UNFLANGED_END_FACTOR",
    "END_FACTORS",
    "PLAUSIBLE_END_CORRECTION_OVER_RADIUS",
    "SPHERE_SLICES",
    "MAX_MODES",
    "F0_TOLERANCE_BY_MODEL",
    "EndCorrections",
    "end_correction_m",
    "neck_end_corrections",
    "helmholtz_f0_hz",
    "acoustic_mass_kg_m4",
    "compliance_m3_pa",
    "bore_from_object",
    "Prediction",
    "predict",
    "Derived",
    "derive_from_f0",
]

#: Resonances reported (the first and the next ones below the 1-D limit).
MAX_MODES = 5


#: Suggested f0-mismatch tolerance by how the cavity is described (model
#: uncertainty plus typical input uncertainty). Known shapes: the 1-D model is
#: within 0.5 % of openwind (tests/test_openwind.py); a neck diameter read to
#: 1 % moves f0 by 1 %, the temperature to 1 K by 0.17 % -> 2 %. Spheres and
#: ellipsoids add the spread between their 1-D and 3-D models (computed per
#: object). Volume only adds half the span of the plausible shapes (computed per
#: object, at least 3.5 %).
F0_TOLERANCE_BY_MODEL = {"distributed": 0.02, "tube-distributed": 0.02,
                         "corrected-lumped": 0.035, "volume-shape-range": 0.035}


@dataclass(frozen=True, slots=True)
class Prediction:
    """What the geometry predicts for one object at one air state.

    The headline ``f0_hz`` is the best of the models (``model`` says which):
    the distributed 1-D model for cylinders, elliptic cylinders, boxes,
    profiles, spheres, ellipsoids and tubes (for spheres and ellipsoids the
    tolerance adds the spread to the corrected lumped model with the 3-D inner
    end correction); for cavities given by volume only the middle of the span
    of plausible cylinders. ``effective_neck_length_m`` is the
    lumped-equivalent effective length: the length that puts the plain lumped
    formula at ``f0_hz`` (for a tube: a quarter wavelength), i.e. the same
    quantity that :func:`derive_from_f0` measures; ``end_correction_m`` is
    that length minus the neck's physical length. The ends themselves are
    ``outer_end_correction_m`` and ``inner_end_correction_m``; their sum plus
    the neck is ``geometric_effective_length_m``.

    Attributes
    ----------
    f0_hz : float
        Best predicted resonance frequency, Hz.
    effective_neck_length_m, end_correction_m : float
        Lumped-equivalent effective length and its excess over the neck, m.
    outer_end_correction_m, inner_end_correction_m : float
        End correction of each end, m.
    acoustic_mass_kg_m4 : float
        rho L'/S with L' the geometric effective length, kg/m^4.
    compliance_m3_pa : float
        V/(rho c^2), m^3/Pa.
    model : str
        ``"distributed"``, ``"corrected-lumped"``, ``"volume-shape-range"``
        or ``"tube-distributed"``.
    kind : str
        ``"helmholtz"`` or ``"tube"``.
    f0_lumped_hz : float
        Plain lumped formula with the geometric effective length, Hz
        (for a tube, c/(4 (L + delta))).
    f0_corrected_lumped_hz : float
        Lumped formula with Rayleigh's one-third corrections and the
        boundary-layer shift, Hz.
    f0_distributed_hz : float or None
        First root of the lossy 1-D model, Hz (None for volume only).
    modes_hz, modes_q : tuple of float
        Resonances from the 1-D model below its validity limit (first
        included), Hz, and their Q.
    mode_limit_hz : float or None
        First transverse cut-on (the 1-D model's limit), Hz.
    q_predicted : float
        Best predicted Q (same model as ``f0_hz``).
    q_predicted_range : tuple of float
        The range the end losses span (low, high): Q with the viscous end
        term at 2a (the top of its range) and the thermal layer on the end
        walls, and the smooth-wall Q (no end losses), 1-D model.
    q_without_radiation : float
        Q with the radiation term left out (what an outside microphone close
        to the mouth measures when not corrected).
    q_lumped, q_distributed : float or None
        Lumped Q budget total; Q of the 1-D root.
    q_radiation, q_viscous_neck, q_viscous_cavity, q_thermal_cavity, q_thermal_neck : float
        Each contribution of the lumped budget (1/Q = sum 1/Q_i).
    radiation_resistance_pa_s_m3, viscous_resistance_neck_pa_s_m3,
    viscous_resistance_cavity_pa_s_m3 : float
        Series resistances, Pa s/m^3.
    thermal_conductance_cavity_m3_pa_s, thermal_conductance_neck_m3_pa_s : float
        Shunt conductances, m^3/(Pa s).
    neck_area_m2, neck_radius_m, neck_length_m : float
        Total open area, radius of one opening, physical length.
    cavity_volume_m3, cavity_length_m, wall_area_m2 : float
        Volume; axial length (None for volume only); wall area (openings
        subtracted; estimated for volume only).
    geometric_effective_length_m : float
        L + outer + inner, m.
    inner_end_correction_alternative_m : float
        Ingard's 1953 inner correction, m (spread of the inner end).
    cavity_inertia_length_m : float
        Rayleigh's one-third cavity inertia as a length, m.
    neck_compliance_volume_m3 : float
        S L'/3, the neck's own compliance as a volume, m^3.
    boundary_layer_shift_viscous, boundary_layer_shift_thermal : float
        Relative f0 shifts from the boundary layers, 1.
    viscous_boundary_layer_m, thermal_boundary_layer_m : float
        Layer thicknesses at f0, m.
    viscous_end_term_m : float
        Viscous end term used per opening, m.
    ka : float
        Helmholtz number of one opening at f0, 1.
    lumped_wave_parameter : float
        X = k sqrt(L'^2 + Lc^2): the plain lumped f0 runs high by about X^2/6.
    f0_tolerance : float
        Suggested relative f0-mismatch tolerance for this kind of prediction
        (:data:`F0_TOLERANCE_BY_MODEL`), 1.
    notes : tuple of str
        What was assumed.
    q_smooth_wall : float
        Q without the end losses (radiation and the side walls' boundary
        layers only): the physics of 1-D visco-thermal bore models, checked
        against openwind (tests/test_openwind.py).
    q_end_losses : float
        The end losses as one term: 1/q_end = 1/q_predicted - 1/q_smooth_wall.
    q_viscous_end, q_thermal_end : float
        The lumped end terms: the viscous end term and the thermal layer on
        the flat end walls and steps.
    end_wall_area_m2 : float
        Area of those end walls, m^2.
    neck_mass_length_m : float
        The neck's mass integral as a length at the mouth's area, m (the
        physical length for a uniform neck).
    q_terms : tuple of (name, q, source)
        Every named loss term of the lumped budget with its published source
        (:data:`Q_TERM_SOURCES`); JSON: ``{name: {"q", "source"}}``.
    """

    f0_hz: float
    effective_neck_length_m: float
    end_correction_m: float
    outer_end_correction_m: float
    inner_end_correction_m: float
    acoustic_mass_kg_m4: float
    compliance_m3_pa: float
    model: str = "corrected-lumped"
    kind: str = "helmholtz"
    f0_lumped_hz: float = math.nan
    f0_corrected_lumped_hz: float = math.nan
    f0_distributed_hz: float | None = None
    modes_hz: tuple[float, ...] = ()
    modes_q: tuple[float, ...] = ()
    mode_limit_hz: float | None = None
    q_predicted: float = math.nan
    q_predicted_range: tuple[float, float] = (math.nan, math.nan)
    q_without_radiation: float = math.nan
    q_lumped: float = math.nan
    q_distributed: float | None = None
    q_radiation: float = math.nan
    q_viscous_neck: float = math.nan
    q_viscous_cavity: float = math.nan
    q_thermal_cavity: float = math.nan
    q_thermal_neck: float = math.nan
    radiation_resistance_pa_s_m3: float = math.nan
    viscous_resistance_neck_pa_s_m3: float = math.nan
    viscous_resistance_cavity_pa_s_m3: float = math.nan
    thermal_conductance_cavity_m3_pa_s: float = math.nan
    thermal_conductance_neck_m3_pa_s: float = math.nan
    neck_area_m2: float = math.nan
    neck_radius_m: float = math.nan
    neck_length_m: float = math.nan
    cavity_volume_m3: float = math.nan
    cavity_length_m: float | None = None
    wall_area_m2: float = math.nan
    geometric_effective_length_m: float = math.nan
    inner_end_correction_alternative_m: float = math.nan
    cavity_inertia_length_m: float = 0.0
    neck_compliance_volume_m3: float = 0.0
    boundary_layer_shift_viscous: float = 0.0
    boundary_layer_shift_thermal: float = 0.0
    viscous_boundary_layer_m: float = math.nan
    thermal_boundary_layer_m: float = math.nan
    viscous_end_term_m: float = 0.0
    ka: float = math.nan
    lumped_wave_parameter: float | None = None
    f0_tolerance: float = 0.035
    notes: tuple[str, ...] = field(default_factory=tuple)
    q_smooth_wall: float = math.nan
    q_end_losses: float = math.inf
    q_viscous_end: float = math.inf
    q_thermal_end: float = math.inf
    end_wall_area_m2: float = 0.0
    neck_mass_length_m: float = math.nan
    q_terms: tuple[tuple[str, float, str], ...] = ()

    def to_dict(self) -> dict[str, Any]:
        """Plain Python types, JSON-safe (lists for tuples; None where not available)."""
        out: dict[str, Any] = {}
        for k, v in asdict(self).items():
            if k == "q_terms":
                out[k] = {name: {"q": float(q), "source": src} for name, q, src in v}
            elif isinstance(v, (tuple, list)):
                out[k] = [x if isinstance(x, str) else float(x) for x in v]
            elif isinstance(v, str) or v is None:
                out[k] = v
            else:
                out[k] = float(v)
        return out

    def __str__(self) -> str:
        return (
            f"predicted f0 = {self.f0_hz:.3f} Hz ({self.model}; lumped "
            f"{self.f0_lumped_hz:.3f} Hz), "
            f"Q = {self.q_predicted:.1f} (L_eff = {1e3 * self.effective_neck_length_m:.3f} mm, "
            f"end correction {1e3 * self.end_correction_m:.3f} mm)"
        )


def _budget(obj: ResonatorObject, air: AirState, f_hz: float, l_mass_m: float,
            end_term_m: float, sections3: list[tuple[float, float, float]] | None,
            end_wall_m2: float) -> tuple[QBudget, float, float]:
    neck = obj.neck
    rho, c = air.density_kg_m3, air.speed_of_sound_m_s
    dv = viscous_boundary_layer_m(air.viscosity_pa_s, rho, f_hz)
    dt = thermal_boundary_layer_m(air.thermal_conductivity_w_mk, rho, air.cp_j_kgk, f_hz)
    s = neck.area_m2
    r_rad = radiation_resistance_pa_s_m3(rho, c, f_hz, neck.outer_end)
    neck_wall_m2 = neck.count * neck.wall_area_m2
    if obj.kind == "tube":
        # Quarter-wave (closed-open) or half-wave (open-open) mode, referred to
        # the mouth's flow: modal mass rho L'/(2S) and compliance
        # S L'/(2 rho c^2) (time-averaged energy of a standing wave); wall terms
        # weighted by the mean of sin^2 and cos^2 along the tube, 1/2 (common
        # practice). An open far end radiates as much as the mouth.
        if neck.inner_end != "closed":
            r_rad = r_rad + radiation_resistance_pa_s_m3(rho, c, f_hz, neck.inner_end)
        mass = rho * l_mass_m / (2.0 * s)
        compliance = s * l_mass_m / (2.0 * rho * c * c)
        r_neck = viscous_resistance_pa_s_m3(rho, f_hz, dv, neck.length_m / 2.0,
                                            neck.opening_area_m2, neck.perimeter_m)
        r_end = viscous_resistance_pa_s_m3(rho, f_hz, dv, end_term_m, neck.opening_area_m2,
                                           neck.perimeter_m)
        r_cav = g_cav = 0.0
        g_end = thermal_conductance_m3_pa_s(f_hz, air.gamma, dt, end_wall_m2, rho, c)
        g_neck = thermal_conductance_m3_pa_s(f_hz, air.gamma, dt, neck_wall_m2 / 2.0, rho, c)
    else:
        mass = rho * l_mass_m / s
        compliance = compliance_m3_pa(obj.cavity.volume_m3, rho, c)
        r_neck = viscous_resistance_pa_s_m3(rho, f_hz, dv, neck.viscous_length_m,
                                            neck.opening_area_m2, neck.perimeter_m, neck.count)
        r_end = viscous_resistance_pa_s_m3(rho, f_hz, dv, end_term_m, neck.opening_area_m2,
                                           neck.perimeter_m, neck.count)
        r_cav = (cavity_viscous_resistance_pa_s_m3(rho, f_hz, dv, sections3)
                 if sections3 else 0.0)
        side = max(_cavity_wall_m2(obj) - end_wall_m2, 0.0)
        g_cav = thermal_conductance_m3_pa_s(f_hz, air.gamma, dt, side, rho, c)
        g_end = thermal_conductance_m3_pa_s(f_hz, air.gamma, dt, end_wall_m2, rho, c)
        g_neck = thermal_conductance_m3_pa_s(f_hz, air.gamma, dt, neck_wall_m2, rho, c)
    budget = QBudget.from_elements(f_hz, mass, compliance, r_rad, r_neck, r_cav, g_cav, g_neck,
                                   r_end, g_end)
    return budget, dv, dt


def _cavity_wall_m2(obj: ResonatorObject) -> float:
    """Cavity wall in contact with the air (openings subtracted), m^2; for a
    tube its side wall and closed end."""
    if obj.kind == "tube":
        n = obj.neck
        return n.wall_area_m2 + (n.opening_area_m2 if n.inner_end == "closed" else 0.0)
    return max(obj.cavity.wall_area_m2 - obj.neck.count * obj.neck.inner_area_m2, 0.0)


def _end_wall_m2(obj: ResonatorObject, bore: Any) -> float:
    """The flat end walls (closed bottom, steps, the face around the neck), m^2:
    where the tool adds a thermal layer that 1-D bore models leave out."""
    if obj.kind == "tube":
        return obj.neck.opening_area_m2 if obj.neck.inner_end == "closed" else 0.0
    if obj.cavity.shape in ("sphere", "ellipsoid"):
        return 0.0
    if bore is not None:
        return bore.closed_end_area_m2 + sum(bore.step_wall_areas_m2)
    # volume only: the two end faces of the cylinder as tall as wide
    r = (obj.cavity.volume_m3 / (2.0 * math.pi)) ** (1.0 / 3.0)
    return max(2.0 * math.pi * r * r - obj.neck.count * obj.neck.inner_area_m2, 0.0)


def _sections(bore: Any) -> list[tuple[float, float, float]] | None:
    """Cavity ducts as (area, length, perimeter), cones cut into 16
    volume-exact slices."""
    if bore is None or not bore.cavity:
        return None
    out = []
    for d in bore.cavity:
        if not d.is_cone:
            out.append((d.area_m2, d.length_m, d.perimeter_m))
            continue
        r0, r1 = d.radius_m, math.sqrt(d.far_area_m2 / math.pi)
        n = 16
        for i in range(n):
            ra, rb = r0 + (r1 - r0) * i / n, r0 + (r1 - r0) * (i + 1) / n
            h = d.length_m / n
            area = math.pi * (ra * ra + ra * rb + rb * rb) / 3.0
            out.append((area, h, 2.0 * math.sqrt(math.pi * area)))
    return out


#: Aspect ratios (height over diameter) of the plausible cylinders that stand
#: in for a cavity given by volume only (common practice: from a squat jar to a
#: tall vial), and the narrowest cavity over the neck's diameter.
VOLUME_ONLY_ASPECTS = (0.5, 0.75, 1.0, 1.5, 2.0, 3.0)


VOLUME_ONLY_MIN_CAVITY_OVER_NECK = 1.25


def volume_only_shapes(obj: ResonatorObject) -> list[ResonatorObject]:
    """The plausible cylinders of a cavity given by volume only: the same
    volume, neck and ends, height/diameter in :data:`VOLUME_ONLY_ASPECTS`,
    no narrower than :data:`VOLUME_ONLY_MIN_CAVITY_OVER_NECK` times the neck
    (a cavity only slightly wider than the neck is the narrow extreme)."""
    from dataclasses import replace

    from .geometry import Cavity

    v = obj.cavity.volume_m3
    d_min = VOLUME_ONLY_MIN_CAVITY_OVER_NECK * max(obj.neck.inner_diameter_m,
                                                   math.sqrt(obj.neck.area_m2 / math.pi) * 2.0)
    out = []
    aspects = list(VOLUME_ONLY_ASPECTS)
    # the narrowest admissible cylinder, when it is within the range
    h_over_d_max = 4.0 * v / (math.pi * d_min**3)
    if VOLUME_ONLY_ASPECTS[0] < h_over_d_max < VOLUME_ONLY_ASPECTS[-1]:
        aspects.append(h_over_d_max)
    for k in aspects:
        if k > h_over_d_max * (1 + 1e-9):
            continue
        d = (4.0 * v / (math.pi * k)) ** (1.0 / 3.0)
        cav = Cavity(volume_m3=v, shape="cylinder", diameter_m=d, length_m=k * d,
                     volume_source="shape")
        out.append(replace(obj, cavity=cav))
    return out


def predict(obj: ResonatorObject, air: AirState) -> Prediction:
    r"""Predict f0, the next modes and Q from the geometry and the air.

    Steps (each formula's source is in the function it calls):

    1. End corrections (:func:`neck_end_corrections`), geometric effective
       length :math:`L' = L + \delta_o + \delta_i` and the plain lumped
       :math:`f_0 = (c/2\pi)\sqrt{S/(VL')}`.
    2. Corrected lumped model: Rayleigh's one-third corrections,
       :math:`L' \to L' + \Delta L_\text{cav}` (cavity inertia, when the
       cavity's shape is known; not for a sphere, whose 3-D inner end
       correction already holds the spreading flow) and
       :math:`V \to V + S L'/3`, then the boundary-layer shift
       :math:`\Delta f/f \approx -\delta_v P\ell/(4SL_\text{eff}) - (\gamma-1)A_w\delta_t/(4V)`.
    3. Lumped Q budget at that frequency: radiation, viscous neck (with its
       end term), viscous cavity walls, thermal cavity and neck walls.
    4. Distributed 1-D model (:mod:`~characterize.physics.distributed`):
       complex roots of the lossy bore; f0, Q and the next modes below the
       first transverse cut-on.
    5. The best model gives ``f0_hz`` and ``q_predicted``: 1-D for every
       known shape; for spheres and ellipsoids the corrected lumped one with
       the 3-D inner correction is the other bound (the 1-D taper
       under-represents the 3-D spreading at the hole, the 3-D lumped estimate
       leaves out the cavity's own inertia; they differ by 1 to 10 %) and
       their spread widens ``f0_tolerance``; for volume only the middle of
       the span of plausible cylinders (:func:`volume_only_shapes`), half the
       span widening the tolerance; a note states the assumption.

    Parameters
    ----------
    obj : ResonatorObject
        Geometry (SI units).
    air : AirState
        Air properties: c (m/s), rho (kg/m^3), mu (Pa s), kappa (W/(m K)),
        cp (J/(kg K)), gamma.

    Returns
    -------
    Prediction

    References
    ----------
    Lord Rayleigh, *The Theory of Sound*, vol. II (1896), sections 302-307;
    J. Kergomard, A. Garcia, J. Sound Vib. 114(3), 465-479 (1987); D. H. Keefe,
    J. Acoust. Soc. Am. 75(1), 58-62 (1984); physics sheet sections 2-5.
    """
    from .distributed import find_resonance, resonances, transverse_cutoff_hz

    neck, cav = obj.neck, obj.cavity
    c, rho = air.speed_of_sound_m_s, air.density_kg_m3
    _positive(speed_of_sound_m_s=c, density_kg_m3=rho)
    ends = neck_end_corrections(obj)
    s, v = neck.area_m2, cav.volume_m3
    length = neck.length_m
    # the lumped view of a profiled neck: its mass integral referred to the
    # mouth's area, the inner end's correction referred to it too
    inner_ref = ends.inner_m * neck.opening_area_m2 / neck.inner_area_m2
    l_geo = neck.mass_length_m + ends.outer_m + inner_ref
    open_open = obj.kind == "tube" and neck.inner_end != "closed"
    end_term = VISCOUS_END_TERM_OVER_RADIUS * neck.inner_diameter_m / 2.0
    notes: list[str] = []
    bore = bore_from_object(obj)
    sections3 = _sections(bore)
    end_wall = _end_wall_m2(obj, bore)

    if obj.kind == "tube":
        f_lumped = c / ((2.0 if open_open else 4.0) * l_geo)
        f_corr0 = f_lumped
        d_cav = v_neck = 0.0
        l_mass = l_geo
        end_term = end_term / 2.0
    else:
        f_lumped = helmholtz_f0_hz(c, s, v, l_geo)
        d_cav = 0.0
        if sections3 is not None and cav.shape not in ("sphere", "ellipsoid"):
            d_cav = cavity_inertia_length_m(s, [(a, ln) for a, ln, _ in sections3])
        neck_air = neck.count * sum(
            d.volume_m3 for d in _neck_ducts(obj)) if neck.sections else s * length
        v_neck = (neck_air + s * (l_geo - neck.mass_length_m)) / 3.0
        l_mass = l_geo + d_cav
        f_corr0 = helmholtz_f0_hz(c, s, v + v_neck, l_mass)
    budget0, dv, dt = _budget(obj, air, f_corr0, l_mass, end_term, sections3, end_wall)
    if obj.kind == "tube":
        shift_v = shift_t = 0.0
        f_corr = f_corr0
    else:
        shift_v, shift_t = boundary_layer_shift(
            dv, neck.viscous_length_m + end_term, neck.opening_area_m2, neck.perimeter_m,
            l_mass, air.gamma, dt, _cavity_wall_m2(obj), v)
        # the layers add mass (1 - 2 shift_v) and compliance (1 - 2 shift_t): exact
        # in that form, first order equal to f (1 + shift_v + shift_t), and never
        # negative for narrow necks
        f_corr = f_corr0 / math.sqrt((1.0 - 2.0 * shift_v) * (1.0 - 2.0 * shift_t))
    budget, dv, dt = _budget(obj, air, f_corr, l_mass, end_term, sections3, end_wall)
    hi_end = VISCOUS_END_TERM_RANGE_OVER_RADIUS[1] * neck.inner_diameter_m / 2.0
    budget_2a = _budget(obj, air, f_corr, l_mass,
                        hi_end / (2.0 if obj.kind == "tube" else 1.0), sections3, end_wall)[0]

    f_dist = q_dist = limit = q_smooth_1d = q_2a_1d = None
    modes: list[Any] = []
    if bore is not None:
        limit = transverse_cutoff_hz(bore, air)
        guess = f_lumped if obj.kind == "tube" else f_corr
        try:
            modes = resonances(bore, air, guess, limit, MAX_MODES)
        except ArithmeticError:
            modes = []
        if not modes:
            try:
                modes = [find_resonance(bore, air, guess)]
            except ArithmeticError:
                notes.append("the 1-D model found no root near the lumped estimate")
        if modes:
            f_dist, q_dist = modes[0].f_hz, modes[0].q
            try:
                q_smooth_1d = find_resonance(
                    bore_from_object(obj, end_losses=False, viscous_end_term_over_radius=0.0),
                    air, f_dist).q
                q_2a_1d = find_resonance(
                    bore_from_object(obj, viscous_end_term_over_radius=(
                        VISCOUS_END_TERM_RANGE_OVER_RADIUS[1])), air, f_dist).q
            except ArithmeticError:
                q_smooth_1d = q_2a_1d = None

    tolerance = None
    if obj.kind == "tube" and f_dist is not None:
        best_f, best_q, model = f_dist, q_dist, "tube-distributed"
    elif obj.kind == "tube":
        best_f, best_q, model = f_corr, budget.q, "corrected-lumped"
    elif f_dist is not None and cav.shape in ("cylinder", "box", "profile",
                                              "elliptic-cylinder"):
        best_f, best_q, model = f_dist, q_dist, "distributed"
    elif f_dist is not None and cav.shape in ("sphere", "ellipsoid"):
        # The 1-D taper under-represents the 3-D spreading of the flow at the
        # hole (its inner inertia vanishes for a small hole in a large sphere,
        # where the 3-D value tends to 0.82a); the 3-D lumped estimate leaves
        # out the cavity's own inertia. Which is nearer a real flask is not
        # known (physics sheet section 4): the 1-D model (the validated one)
        # gives f0 and the whole spread widens the tolerance.
        best_f, best_q, model = f_dist, q_dist, "distributed"
        spread = abs(f_dist - f_corr) / f_dist
        tolerance = F0_TOLERANCE_BY_MODEL["distributed"] + spread
        notes.append(f"{cav.shape}: the 1-D taper model ({f_dist:.2f} Hz); the lumped model "
                     f"with the 3-D inner end correction gives {f_corr:.2f} Hz "
                     f"({100 * (f_corr / f_dist - 1):+.1f} %), a spread that widens the "
                     f"suggested tolerance (which is nearer a real {cav.shape} is not known)")
    elif cav.shape == "volume":
        best_f, best_q, model, tolerance, note = _volume_only(obj, air, f_corr, budget.q)
        notes.append(note)
    else:
        best_f, best_q, model = f_corr, budget.q, "corrected-lumped"
    assert best_q is not None
    scale = best_q / budget.q if budget.q > 0 else 1.0
    if q_smooth_1d is not None and q_2a_1d is not None and model != "volume-shape-range":
        q_smooth, q_range = q_smooth_1d, (q_2a_1d, q_smooth_1d)
    else:
        q_smooth = budget.q_smooth_wall * scale
        q_range = (budget_2a.q * scale, q_smooth)
    q_norad = budget.q_without_radiation * scale
    inv_end = 1.0 / best_q - 1.0 / q_smooth
    q_end = math.inf if inv_end <= 0 else 1.0 / inv_end
    terms = _q_terms(obj, budget)

    omega = 2.0 * math.pi * best_f
    if obj.kind == "tube":
        l_equiv = c / ((2.0 if open_open else 4.0) * best_f)
        x_wave = None
    else:
        l_equiv = s * c * c / (omega * omega * v)
        lc = cav.axial_length_m
        x_wave = None if lc is None else 2.0 * math.pi * f_lumped / c * math.hypot(l_geo, lc)
    if neck.sections:
        notes.append(f"neck profile: acoustic mass as a uniform neck of the mouth's area "
                     f"{1e3 * neck.mass_length_m:.2f} mm long (integral of dx/S(x)); the "
                     f"inner end correction belongs to the inner diameter "
                     f"{1e3 * neck.inner_diameter_m:.2f} mm")
    return Prediction(
        f0_hz=best_f,
        effective_neck_length_m=l_equiv,
        end_correction_m=l_equiv - neck.mass_length_m,
        outer_end_correction_m=ends.outer_m,
        inner_end_correction_m=ends.inner_m,
        acoustic_mass_kg_m4=acoustic_mass_kg_m4(rho, l_geo, s),
        compliance_m3_pa=compliance_m3_pa(v, rho, c),
        model=model,
        kind=obj.kind,
        f0_lumped_hz=f_lumped,
        f0_corrected_lumped_hz=f_corr,
        f0_distributed_hz=f_dist,
        modes_hz=tuple(m.f_hz for m in modes),
        modes_q=tuple(m.q for m in modes),
        mode_limit_hz=limit,
        q_predicted=best_q,
        q_predicted_range=q_range,
        q_without_radiation=q_norad,
        q_lumped=budget.q,
        q_distributed=q_dist,
        q_radiation=budget.q_radiation,
        q_viscous_neck=budget.q_viscous_neck,
        q_viscous_cavity=budget.q_viscous_cavity,
        q_thermal_cavity=budget.q_thermal_cavity,
        q_thermal_neck=budget.q_thermal_neck,
        radiation_resistance_pa_s_m3=budget.radiation_resistance_pa_s_m3,
        viscous_resistance_neck_pa_s_m3=budget.viscous_resistance_neck_pa_s_m3,
        viscous_resistance_cavity_pa_s_m3=budget.viscous_resistance_cavity_pa_s_m3,
        thermal_conductance_cavity_m3_pa_s=budget.thermal_conductance_cavity_m3_pa_s,
        thermal_conductance_neck_m3_pa_s=budget.thermal_conductance_neck_m3_pa_s,
        neck_area_m2=s,
        neck_radius_m=neck.radius_m,
        neck_length_m=length,
        cavity_volume_m3=v,
        cavity_length_m=cav.axial_length_m,
        wall_area_m2=_cavity_wall_m2(obj),
        geometric_effective_length_m=l_geo,
        inner_end_correction_alternative_m=ends.inner_alternative_m,
        cavity_inertia_length_m=d_cav,
        neck_compliance_volume_m3=v_neck,
        boundary_layer_shift_viscous=shift_v,
        boundary_layer_shift_thermal=shift_t,
        viscous_boundary_layer_m=dv,
        thermal_boundary_layer_m=dt,
        viscous_end_term_m=end_term,
        ka=omega / c * neck.radius_m,
        lumped_wave_parameter=x_wave,
        f0_tolerance=F0_TOLERANCE_BY_MODEL[model] if tolerance is None else tolerance,
        notes=tuple(notes),
        q_smooth_wall=q_smooth,
        q_end_losses=q_end,
        q_viscous_end=budget.q_viscous_end,
        q_thermal_end=budget.q_thermal_end,
        end_wall_area_m2=end_wall,
        neck_mass_length_m=neck.mass_length_m,
        q_terms=terms,
    )


#: Published source of each named loss term (docs/geometry.md, "Predicted Q").
Q_TERM_SOURCES = {
    "radiation": "Levine & Schwinger 1948 (unflanged), Kinsler et al. 2000 sec. 7.5 "
                 "(baffled piston)",
    "viscous_neck": "Zwikker & Kosten 1949; Keefe 1984 (wide-duct limit)",
    "thermal_neck": "Zwikker & Kosten 1949; Keefe 1984 (wall admittance)",
    "viscous_cavity": "Keefe 1984, weighted by the flow (V(x)/V)^2 (physics sheet sec. 5)",
    "thermal_cavity": "Keefe 1984 (side walls)",
    "viscous_end": "convention, no measurement behind it: wall length a (0.5a to 2a) per "
                   "opening (physics sheet sec. 5, UNVERIFIED)",
    "thermal_end": "Keefe 1984's wall admittance on the flat end walls and steps (left out "
                   "by 1-D bore models)",
}


def _q_terms(obj: ResonatorObject, budget: QBudget) -> tuple[tuple[str, float, str], ...]:
    """(name, lumped Q of the term, source) for each named loss term."""
    values = {
        "radiation": budget.q_radiation, "viscous_neck": budget.q_viscous_neck,
        "thermal_neck": budget.q_thermal_neck, "viscous_cavity": budget.q_viscous_cavity,
        "thermal_cavity": budget.q_thermal_cavity, "viscous_end": budget.q_viscous_end,
        "thermal_end": budget.q_thermal_end,
    }
    return tuple((k, float(q), Q_TERM_SOURCES[k]) for k, q in values.items())


def _volume_only(obj: ResonatorObject, air: AirState, f_corr: float,
                 q_lumped: float) -> tuple[float, float, str, float, str]:
    """A cavity given by volume only: f0 spans the plausible shapes.

    The 1-D model of each plausible cylinder (:func:`volume_only_shapes`) and
    the corrected lumped model (a large flat cavity: the full inner
    correction, no cavity inertia) bound f0; the prediction is the middle of
    that span and the suggested tolerance adds half the span to the 2 % of a
    known shape.
    """
    from .distributed import find_resonance

    fs = [f_corr]
    for o in volume_only_shapes(obj):
        try:
            r = find_resonance(bore_from_object(o), air, f_corr)
        except ArithmeticError:
            continue
        fs.append(r.f_hz)
    lo, hi = min(fs), max(fs)
    mid = 0.5 * (lo + hi)
    half = (hi - lo) / (2.0 * mid)
    q = q_lumped
    tol = F0_TOLERANCE_BY_MODEL["distributed"] + half
    note = (f"cavity given by volume only: assumed a cylinder from squat to tall (height/"
            f"diameter {VOLUME_ONLY_ASPECTS[0]:g} to {VOLUME_ONLY_ASPECTS[-1]:g}, at least "
            f"{VOLUME_ONLY_MIN_CAVITY_OVER_NECK:g} x the neck wide) or a large flat cavity; "
            f"f0 spans {lo:.2f} to {hi:.2f} Hz over those shapes, so the tolerance is widened "
            f"by {100 * half:.1f} % (give the shape to narrow it); the wall area is estimated")
    return mid, q, "volume-shape-range", tol, note
