r"""Distributed (1-D) model: the resonator as a lossy bore, closed at the bottom.

The cavity is a stack of ducts (round or rectangular) from the closed end up;
the neck (one or several identical openings) joins the top and radiates. Plane
waves travel in each duct with the visco-thermal propagation constant and
characteristic impedance of Zwikker & Kosten (Bessel functions for round
ducts, the wide-duct limit for rectangular ones); each change of section adds
the step mass of Kergomard & Garcia (1987); the mouth sees the radiation
impedance of a compact baffled or unbaffled opening. The closed end and the
annular steps can carry their thermal boundary layer.

The resonances are the complex roots of

.. math::

    D(\omega) = Z_\text{mouth}(\omega) + Z_\text{rad}(\omega) = 0

(the impedance looking into one neck from outside plus its radiation load);
without losses, for one cavity duct, this is the textbook condition
:math:`\tan kL'\,\tan kL_c = S/S_c`. A root :math:`\omega^*` gives
:math:`f_0 = |\omega^*|/2\pi` and :math:`Q = |\omega^*|/(2\,\mathrm{Im}\,\omega^*)`
(time dependence :math:`e^{+j\omega t}`, the same pole as the fitted
oscillator's).

Functions are vectorised over ``omega`` (complex arrays allowed).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any, cast

import numpy as np
from numpy.typing import NDArray

from .radiation import monopole_gain

if TYPE_CHECKING:
    from .air import AirState

__all__ = [
    "Duct",
    "Bore",
    "Resonance",
    "bessel_ratio",
    "cone_equivalent_radius_m",
    "cone_transfer_matrix",
    "duct_parameters",
    "mouth_impedance",
    "radiation_impedance",
    "characteristic_function",
    "find_resonance",
    "resonances",
    "transverse_cutoff_hz",
]


@dataclass(frozen=True, slots=True)
class Duct:
    """A uniform duct.

    Attributes
    ----------
    length_m : float
        Length, m.
    area_m2 : float
        Cross-section, m^2.
    perimeter_m : float
        Wetted perimeter, m.
    circular : bool
        True for a round duct (exact Bessel losses), False for the wide-duct
        boundary-layer form with the perimeter.
    width_m : float
        Largest transverse size (diameter, or a rectangle's longer side), m;
        sets the first transverse mode.
    end_area_m2 : float or None
        Round ducts only: the cross-section at the far end (in the direction
        of transfer, from the closed end towards the mouth) of a truncated
        cone, m^2; None for a uniform duct. ``area_m2`` and ``perimeter_m``
        are then those of the near end.
    """

    length_m: float
    area_m2: float
    perimeter_m: float
    circular: bool = True
    width_m: float = 0.0
    end_area_m2: float | None = None

    @classmethod
    def round(cls, diameter_m: float, length_m: float) -> Duct:
        return cls(length_m, math.pi * diameter_m**2 / 4.0, math.pi * diameter_m, True, diameter_m)

    @classmethod
    def rectangle(cls, width_m: float, height_m: float, length_m: float) -> Duct:
        return cls(length_m, width_m * height_m, 2.0 * (width_m + height_m), False,
                   max(width_m, height_m))

    @classmethod
    def cone(cls, diameter_start_m: float, diameter_end_m: float, length_m: float) -> Duct:
        """A truncated cone from ``diameter_start_m`` (near end) to ``diameter_end_m``."""
        if abs(diameter_end_m - diameter_start_m) <= 1e-9 * diameter_start_m:
            return cls.round(diameter_start_m, length_m)
        return cls(length_m, math.pi * diameter_start_m**2 / 4.0, math.pi * diameter_start_m,
                   True, max(diameter_start_m, diameter_end_m),
                   math.pi * diameter_end_m**2 / 4.0)

    @classmethod
    def ellipse(cls, semi_axis_a_m: float, semi_axis_b_m: float, length_m: float) -> Duct:
        """An elliptic duct (wide-duct boundary layers with the exact perimeter,
        :func:`~characterize.physics.geometry.ellipse_perimeter_m`)."""
        from .geometry import ellipse_perimeter_m

        return cls(length_m, math.pi * semi_axis_a_m * semi_axis_b_m,
                   ellipse_perimeter_m(semi_axis_a_m, semi_axis_b_m), False,
                   2.0 * max(semi_axis_a_m, semi_axis_b_m))

    @property
    def radius_m(self) -> float:
        """Equal-area radius (of the near end for a cone), m."""
        return math.sqrt(self.area_m2 / math.pi)

    @property
    def is_cone(self) -> bool:
        return self.end_area_m2 is not None

    @property
    def far_area_m2(self) -> float:
        """Cross-section at the far end, m^2."""
        return self.area_m2 if self.end_area_m2 is None else self.end_area_m2

    @property
    def volume_m3(self) -> float:
        """Air volume, m^3 (a truncated cone: L (S0 + sqrt(S0 S1) + S1)/3)."""
        s0, s1 = self.area_m2, self.far_area_m2
        return self.length_m * (s0 + math.sqrt(s0 * s1) + s1) / 3.0

    @property
    def wall_area_m2(self) -> float:
        """Side wall area, m^2 (a cone's lateral surface pi (r0 + r1) slant)."""
        if self.end_area_m2 is None:
            return self.perimeter_m * self.length_m
        r0, r1 = self.radius_m, math.sqrt(self.end_area_m2 / math.pi)
        return math.pi * (r0 + r1) * math.hypot(self.length_m, r1 - r0)

    def reversed(self) -> Duct:
        """The same duct with the transfer direction reversed."""
        if self.end_area_m2 is None:
            return self
        d0, d1 = 2.0 * self.radius_m, 2.0 * math.sqrt(self.end_area_m2 / math.pi)
        return Duct.cone(d1, d0, self.length_m)


@dataclass(frozen=True, slots=True)
class Bore:
    """The whole resonator as a 1-D bore.

    Attributes
    ----------
    cavity : tuple of Duct
        Cavity ducts from the closed end up (empty for a closed-open tube,
        whose only duct is ``neck``).
    neck : Duct
        ONE opening of the neck.
    count : int
        Number of identical openings.
    junction_corrections_m : tuple of float
        Step end correction between cavity duct i and i+1 (length, referred
        to the smaller of the two areas), m.
    inner_correction_m : float
        End correction where the neck joins the cavity (referred to one
        opening's area), m.
    outer_correction_m : float
        End correction of the mouth (radiation mass), m.
    baffle : str
        ``"flanged"`` or ``"unflanged"`` (radiation resistance).
    closed_end_area_m2 : float
        Area of the closed end that carries a thermal layer (0: none), m^2.
    step_wall_areas_m2 : tuple of float
        Annular wall at each step, one per cavity duct (the last is the top
        face around the openings), m^2; empty: none.
    viscous_end_length_m : float
        Extra wall length per opening for the viscous end term, m.
    neck_inner : tuple of Duct
        Further neck sections between the cavity and ``neck`` (a neck given
        as a profile), from the cavity outwards; ``neck`` is then the
        outermost section (the mouth). Each carries 1/count of the flow.
    neck_junction_corrections_m : tuple of float
        Step end correction between neck section i and i+1 (``neck`` last),
        referred to the smaller area, m (0 where the sections join).
    far_end : str
        ``"closed"`` (default), or for a tube without a cavity ``"flanged"``
        or ``"unflanged"``: an open far end with its own radiation load.
    far_correction_m : float
        End correction of an open far end, m.
    """

    cavity: tuple[Duct, ...]
    neck: Duct
    count: int = 1
    junction_corrections_m: tuple[float, ...] = ()
    inner_correction_m: float = 0.0
    outer_correction_m: float = 0.0
    baffle: str = "unflanged"
    closed_end_area_m2: float = 0.0
    step_wall_areas_m2: tuple[float, ...] = ()
    viscous_end_length_m: float = 0.0
    neck_inner: tuple[Duct, ...] = ()
    neck_junction_corrections_m: tuple[float, ...] = ()
    far_end: str = "closed"
    far_correction_m: float = 0.0

    @property
    def volume_m3(self) -> float:
        """Cavity volume (or the tube's), m^3."""
        if not self.cavity:
            return sum(d.volume_m3 for d in (*self.neck_inner, self.neck))
        return sum(d.volume_m3 for d in self.cavity)

    @property
    def neck_ducts(self) -> tuple[Duct, ...]:
        """All neck sections from the cavity outwards (the mouth last)."""
        return (*self.neck_inner, self.neck)


@dataclass(frozen=True, slots=True)
class Resonance:
    """One complex root: frequency |omega|/(2 pi) (Hz) and quality factor."""

    f_hz: float
    q: float


#: |z| above which :func:`bessel_ratio` uses the asymptotic (Hankel) expansion.
_ASYMPTOTIC_ABS_Z = 25.0
# Hankel's asymptotic coefficients a_k(nu) for nu = 0 and 1, k = 0..4.
_A0 = (1.0, -1.0 / 8.0, 9.0 / 128.0, -225.0 / 3072.0, 11025.0 / 98304.0)
_A1 = (1.0, 3.0 / 8.0, -15.0 / 128.0, 315.0 / 3072.0, -14175.0 / 98304.0)


def bessel_ratio(z: NDArray[np.complexfloating] | NDArray[np.floating]) -> NDArray[np.complex128]:
    r"""The Zwikker-Kosten function :math:`F(z) = 2J_1(z)/(z J_0(z))` for
    :math:`\arg z` near :math:`-\pi/4` (numpy only, no overflow).

    For :math:`|z| < 25` the power series of :math:`J_0` and :math:`J_1`
    (80 terms); above, Hankel's asymptotic expansion of
    :math:`H^{(1)}_\nu`, to which :math:`2J_\nu` tends when
    :math:`\mathrm{Im}\,z \to -\infty`:

    .. math::

        \frac{J_1}{J_0} \approx -j\,\frac{\sum_k j^k a_k(1) z^{-k}}{\sum_k j^k a_k(0) z^{-k}},
        \quad a_k(\nu) = \frac{\prod_{m=1}^{k}\left(4\nu^2 - (2m-1)^2\right)}{k!\,8^k}

    (the neglected part is of order :math:`e^{-2|\mathrm{Im}\,z|}`). Checked
    against scipy.special.jv in the tests.

    References
    ----------
    M. Abramowitz, I. A. Stegun, *Handbook of Mathematical Functions* (1964),
    eqs. 9.1.10 (series) and 9.2.7-9.2.10 (Hankel's expansion).
    """
    z = np.asarray(z, dtype=np.complex128)
    out = np.empty_like(z)
    big = np.abs(z) >= _ASYMPTOTIC_ABS_Z
    if np.any(big):
        zb = z[big]
        num = sum((1j**k) * c / zb**k for k, c in enumerate(_A1))
        den = sum((1j**k) * c / zb**k for k, c in enumerate(_A0))
        out[big] = 2.0 * (-1j) * num / (den * zb)
    small = ~big
    if np.any(small):
        zs = z[small]
        x = -(zs * zs) / 4.0
        term0 = np.ones_like(zs)
        term1 = np.ones_like(zs)
        j0 = term0.copy()
        s1 = term1.copy()
        for k in range(1, 80):
            term0 = term0 * x / (k * k)
            term1 = term1 * x / (k * (k + 1))
            j0 = j0 + term0
            s1 = s1 + term1
        # 2 J1/(z J0) = 2 (z/2) s1 / (z j0) = s1 / j0
        out[small] = s1 / j0
    return out


def duct_parameters(duct: Duct, omega: NDArray[np.complex128], air: AirState,
                    lossless: bool = False
                    ) -> tuple[NDArray[np.complex128], NDArray[np.complex128],
                               NDArray[np.complex128]]:
    r"""Propagation constant, characteristic impedance and series impedance.

    .. math::

        Z' = \frac{j\omega\rho}{S\,(1 - F_v)},\qquad
        Y' = \frac{j\omega S}{\rho c^2}\,\bigl(1 + (\gamma - 1)F_t\bigr),\qquad
        \Gamma = \sqrt{Z'Y'},\quad Z_c = Z'/\Gamma

    with :math:`F = 2J_1(\kappa a)/(\kappa a J_0(\kappa a))`,
    :math:`\kappa = \sqrt{-j\omega/\nu}` (:math:`\nu = \mu/\rho` viscous,
    :math:`\kappa_{th}/(\rho c_p)` thermal) for a round duct, and the
    wide-duct limit :math:`F = (P/S)\sqrt{\nu/(j\omega)}` otherwise.

    Parameters
    ----------
    duct : Duct
    omega : ndarray of complex
        Angular frequency, rad/s.
    air : AirState
        Uses c (m/s), rho (kg/m^3), mu (Pa s), kappa (W/(m K)), cp (J/(kg K)), gamma.
    lossless : bool
        F = 0 (plane waves without boundary layers).

    Returns
    -------
    gamma, zc, zs : ndarray of complex
        Gamma (1/m), Z_c (Pa s/m^3) and the series impedance per length Z' (Pa s/m^4).

    References
    ----------
    C. Zwikker, C. W. Kosten, *Sound Absorbing Materials* (1949); D. H. Keefe,
    J. Acoust. Soc. Am. 75(1), 58-62 (1984).
    """
    rho, c = air.density_kg_m3, air.speed_of_sound_m_s
    s = duct.area_m2
    w = np.asarray(omega, dtype=np.complex128)
    fv: Any
    ft: Any
    if lossless:
        fv = ft = np.zeros_like(w)
    else:
        nu_v = air.viscosity_pa_s / rho
        nu_t = air.thermal_conductivity_w_mk / (rho * air.cp_j_kgk)
        if duct.circular:
            a = duct.radius_m
            fv = bessel_ratio(np.sqrt(-1j * w / nu_v) * a)
            ft = bessel_ratio(np.sqrt(-1j * w / nu_t) * a)
        else:
            ratio = duct.perimeter_m / s
            fv = ratio * np.sqrt(nu_v / (1j * w))
            ft = ratio * np.sqrt(nu_t / (1j * w))
    zs = 1j * w * rho / (s * (1.0 - fv))
    ys = 1j * w * s / (rho * c * c) * (1.0 + (air.gamma - 1.0) * ft)
    g = np.sqrt(zs * ys)
    return g, zs / g, zs


def _wall_admittance(area_m2: float, omega: NDArray[np.complex128], air: AirState,
                     lossless: bool) -> NDArray[np.complex128]:
    r"""Thermal admittance of a rigid isothermal wall patch:
    :math:`Y = A(\gamma-1)\sqrt{j\omega\nu_t}/(\rho c^2)` (Keefe 1984, per unit area)."""
    if lossless or area_m2 <= 0:
        return np.zeros_like(omega)
    rho, c = air.density_kg_m3, air.speed_of_sound_m_s
    nu_t = air.thermal_conductivity_w_mk / (rho * air.cp_j_kgk)
    return cast("NDArray[np.complex128]",
                area_m2 * (air.gamma - 1.0) * np.sqrt(1j * omega * nu_t) / (rho * c * c))


def _through(duct: Duct, y_far: NDArray[np.complex128], omega: NDArray[np.complex128],
             air: AirState, lossless: bool) -> NDArray[np.complex128]:
    """Admittance at the near end of a duct loaded by ``y_far`` at its far end."""
    if duct.is_cone:
        return _through_cone(duct, y_far, omega, air, lossless)
    g, zc, _ = duct_parameters(duct, omega, air, lossless)
    t = np.tanh(g * duct.length_m)
    yc = 1.0 / zc
    return yc * (y_far + yc * t) / (yc + y_far * t)


def cone_equivalent_radius_m(radius_start_m: float, radius_end_m: float) -> float:
    r"""Radius of the cylinder whose boundary-layer losses stand in for a cone's.

    .. math::

        R_\text{eq} = \frac{R_\max - R_\min}{\ln(R_\max/R_\min)}

    the logarithmic mean, for which :math:`\int_0^\ell dx/R(x) = \ell/R_\text{eq}`
    along the cone: the wide-duct losses per unit length go as :math:`1/R`.

    References
    ----------
    A. Chaigne, J. Kergomard, *Acoustics of Musical Instruments* (Springer,
    2016), ch. 7 (eq. 7.106, as cited in openwind's documentation; the same
    choice is openwind's default for its transfer-matrix cones).
    """
    lo, hi = sorted((radius_start_m, radius_end_m))
    if hi - lo <= 1e-12 * hi:
        return hi
    return (hi - lo) / math.log(hi / lo)


def cone_transfer_matrix(duct: Duct, omega: NDArray[np.complex128], air: AirState,
                         lossless: bool = False
                         ) -> tuple[NDArray[np.complex128], NDArray[np.complex128],
                                    NDArray[np.complex128], NDArray[np.complex128]]:
    r"""Transfer matrix of a truncated cone with visco-thermal losses.

    Plane-front spherical waves :math:`p = [A\cosh\Gamma(x - x_2) +
    B\sinh\Gamma(x - x_2)]/x` (x from the apex, :math:`S \propto x^2`) with
    :math:`\partial p/\partial x = -\Gamma Z_c(x)\,U` give, from the near
    end (1) to the far end (2), :math:`\ell = x_2 - x_1`,

    .. math::

        p_1 = \frac{x_2}{x_1}\Bigl(\cosh\Gamma\ell - \frac{\sinh\Gamma\ell}{\Gamma x_2}\Bigr)p_2
              + \frac{x_2}{x_1} Z_{c2}\sinh\Gamma\ell\;U_2,\qquad
        U_1 = \frac{p_1/x_1 - (\Gamma/x_1)(B\cosh\Gamma\ell - x_2 p_2\sinh\Gamma\ell)}
                   {\Gamma Z_{c1}}

    with :math:`B = p_2/\Gamma - x_2 Z_{c2} U_2`. The losses are those of a
    cylinder of the logarithmic-mean radius (:func:`cone_equivalent_radius_m`,
    Zwikker-Kosten with Bessel functions), :math:`Z_c \propto 1/S` along the
    cone. Lossless, this is the classical cone matrix.

    Parameters
    ----------
    duct : Duct
        A cone (``end_area_m2`` set).
    omega : ndarray of complex
        Angular frequency, rad/s.
    air : AirState
    lossless : bool

    Returns
    -------
    a, b, c, d : ndarray of complex
        :math:`(p_1, U_1) = [[a, b], [c, d]]\,(p_2, U_2)`; the determinant is 1.

    References
    ----------
    A. Chaigne, J. Kergomard, *Acoustics of Musical Instruments* (Springer,
    2016), section 7.5, eq. 7.83 (the cone matrix; equation number as cited in
    openwind's documentation); A. Ernoult, J. Kergomard, "Transfer matrix of a
    truncated cone with viscothermal losses: application of the WKB method",
    Acta Acustica 4(2), 7 (2020); D. Mapes-Riordan, "Horn modeling with
    conical and cylindrical transmission-line elements", J. Audio Eng. Soc.
    41(6), 471-484 (1993) (from memory).
    """
    w = np.asarray(omega, dtype=np.complex128)
    r1 = duct.radius_m
    r2 = math.sqrt(duct.far_area_m2 / math.pi)
    length = duct.length_m
    x1 = r1 * length / (r2 - r1)  # signed distance of the near end from the apex
    x2 = x1 + length
    req = cone_equivalent_radius_m(r1, r2)
    eq = Duct.round(2.0 * req, length)
    g, zc_eq, _ = duct_parameters(eq, w, air, lossless)
    zc1 = zc_eq * eq.area_m2 / duct.area_m2
    zc2 = zc_eq * eq.area_m2 / duct.far_area_m2
    ch, sh = np.cosh(g * length), np.sinh(g * length)
    a = (x2 / x1) * (ch - sh / (g * x2))
    b = (x2 / x1) * zc2 * sh
    # U1 for (p2, U2) = (1, 0) and (0, 1), from the general solution
    # B = p2/G - x2 Zc2 U2, A = x2 p2:
    c = (a / x1 - (g / x1) * (ch / g - x2 * sh)) / (g * zc1)
    d = (b / x1 - (g / x1) * (-x2 * zc2 * ch)) / (g * zc1)
    return a, b, c, d


def _through_cone(duct: Duct, y_far: NDArray[np.complex128], omega: NDArray[np.complex128],
                  air: AirState, lossless: bool) -> NDArray[np.complex128]:
    # the bore is followed from the closed end (the load, the duct's start)
    # towards the mouth: the matrix runs from the input (the duct's far end)
    # to the load
    a, b, c, d = cone_transfer_matrix(duct.reversed(), omega, air, lossless)
    return (c + d * y_far) / (a + b * y_far)


def _end_radiation(area_m2: float, correction_m: float, baffle: str, flow_count: int,
                   omega: NDArray[np.complex128], air: AirState,
                   lossless: bool) -> NDArray[np.complex128]:
    """Radiation load of one opening (see :func:`radiation_impedance`)."""
    rho, c = air.density_kg_m3, air.speed_of_sound_m_s
    mass = 1j * omega * rho * correction_m / area_m2
    if lossless:
        return mass
    return flow_count * monopole_gain(baffle) * rho * omega * omega / (4.0 * np.pi * c) + mass


def mouth_impedance(bore: Bore, omega: NDArray[np.complex128], air: AirState,
                    lossless: bool = False) -> NDArray[np.complex128]:
    """Impedance looking into ONE opening from outside, without its radiation
    load (Pa s/m^3), by admittance transfer from the closed (or far open) end up."""
    w = np.asarray(omega, dtype=np.complex128)
    rho = air.density_kg_m3
    y = np.zeros_like(w)
    inner_neck = bore.neck_ducts[0]
    if bore.cavity:
        y = y + _wall_admittance(bore.closed_end_area_m2, w, air, lossless)
        n = len(bore.cavity)
        for i, duct in enumerate(bore.cavity):
            y = _through(duct, y, w, air, lossless)
            if bore.step_wall_areas_m2:
                y = y + _wall_admittance(bore.step_wall_areas_m2[i], w, air, lossless)
            if i + 1 < n:
                small = min(duct.far_area_m2, bore.cavity[i + 1].area_m2)
                dm = bore.junction_corrections_m[i] if bore.junction_corrections_m else 0.0
                if dm:
                    y = 1.0 / (1.0 / y + 1j * w * rho * dm / small)
        z = bore.count / y  # one opening carries 1/count of the flow
        z = z + 1j * w * rho * bore.inner_correction_m / inner_neck.area_m2
    elif bore.far_end != "closed":
        z = _end_radiation(inner_neck.area_m2, bore.far_correction_m, bore.far_end, 1, w, air,
                           lossless)
    else:
        y = y + _wall_admittance(bore.closed_end_area_m2 or inner_neck.area_m2, w, air,
                                 lossless)
        z = 1.0 / y if np.all(y != 0) else np.full_like(w, np.inf)
    if bore.viscous_end_length_m > 0 and not lossless:
        ref = (Duct.round(2.0 * inner_neck.radius_m, 1.0) if inner_neck.is_cone
               else inner_neck)
        _, _, zs = duct_parameters(ref, w, air, lossless)
        z = z + (zs - 1j * w * rho / inner_neck.area_m2) * bore.viscous_end_length_m
    with np.errstate(divide="ignore", invalid="ignore"):
        y1 = np.where(np.isinf(z), 0.0, 1.0 / z)
    ducts = bore.neck_ducts
    for i, duct in enumerate(ducts):
        y1 = _through(duct, y1, w, air, lossless)
        if i + 1 < len(ducts):
            dm = (bore.neck_junction_corrections_m[i] if bore.neck_junction_corrections_m
                  else 0.0)
            if dm:
                small = min(duct.far_area_m2, ducts[i + 1].area_m2)
                y1 = 1.0 / (1.0 / y1 + 1j * w * rho * dm / small)
    return cast("NDArray[np.complex128]", 1.0 / y1)


def radiation_impedance(bore: Bore, omega: NDArray[np.complex128], air: AirState,
                        lossless: bool = False) -> NDArray[np.complex128]:
    r"""Radiation load of ONE opening (Pa s/m^3):

    .. math::

        Z_r = N\,g\,\frac{\rho\,\omega^2}{4\pi c} + j\omega\rho\,\frac{\delta_\text{out}}{S_1}

    The resistance is that of a compact monopole carrying the flow of all N
    openings (g = 2 in a baffle, 1 in free space), shared among them; the
    mass is the opening's own end correction (interaction of the openings'
    near fields ignored).

    References
    ----------
    H. Levine, J. Schwinger, Phys. Rev. 73(4), 383-406 (1948); L. E. Kinsler
    et al., *Fundamentals of Acoustics*, 4th ed. (2000), section 7.5 (from memory).
    """
    w = np.asarray(omega, dtype=np.complex128)
    return _end_radiation(bore.neck.far_area_m2, bore.outer_correction_m, bore.baffle,
                          bore.count, w, air, lossless)


def characteristic_function(bore: Bore, omega: NDArray[np.complex128], air: AirState,
                            lossless: bool = False) -> NDArray[np.complex128]:
    """D(omega) = Z_mouth + Z_rad, whose roots are the resonances (Pa s/m^3)."""
    return (mouth_impedance(bore, omega, air, lossless)
            + radiation_impedance(bore, omega, air, lossless))


def find_resonance(bore: Bore, air: AirState, f_guess_hz: float, lossless: bool = False,
                   max_iter: int = 60) -> Resonance:
    """The complex root of D nearest ``f_guess_hz`` (secant iteration in the complex plane).

    Raises
    ------
    ArithmeticError
        No convergence (a guess far from any root).
    """
    def d(w: complex) -> complex:
        return complex(characteristic_function(bore, np.array([w]), air, lossless)[0])

    w0 = complex(2.0 * math.pi * f_guess_hz)
    w1 = w0 * (1.0 + 1e-3) + 1e-3j * abs(w0) * 0.01
    d0, d1 = d(w0), d(w1)
    for _ in range(max_iter):
        if d1 == d0:
            break
        w2 = w1 - d1 * (w1 - w0) / (d1 - d0)
        if not np.isfinite(w2):
            break
        # steps of at most 10 % keep the search local (an open-open tube has a
        # trivial root at omega = 0 that a long secant step can fall into)
        step = w2 - w1
        if abs(step) > 0.1 * abs(w1):
            w2 = w1 + step * (0.1 * abs(w1) / abs(step))
        w0, d0 = w1, d1
        w1, d1 = w2, d(w2)
        if abs(w1 - w0) < 1e-12 * abs(w1):
            mag = abs(w1)
            q = math.inf if w1.imag <= 0 else mag / (2.0 * w1.imag)
            return Resonance(mag / (2.0 * math.pi), q)
    raise ArithmeticError(f"no resonance found near {f_guess_hz:.6g} Hz")


def transverse_cutoff_hz(bore: Bore, air: AirState) -> float:
    r"""Lowest cut-on of a transverse mode in the widest duct, Hz:
    :math:`1.8412\,c/(\pi D)` round (first zero of :math:`J_1'`), :math:`c/(2w)`
    rectangular. The 1-D model holds only below it.

    References
    ----------
    L. E. Kinsler et al., *Fundamentals of Acoustics*, 4th ed. (2000),
    ch. 9 (ducts; from memory); 1.8412 is the first zero of J1' (scipy.special.jnp_zeros).
    """
    c = air.speed_of_sound_m_s
    best = math.inf
    for duct in (*bore.cavity, *bore.neck_ducts):
        f = 1.8412 * c / (math.pi * duct.width_m) if duct.circular else c / (2.0 * duct.width_m)
        best = min(best, f)
    return best


def resonances(bore: Bore, air: AirState, f_first_guess_hz: float, f_max_hz: float,
               n_max: int = 6, lossless: bool = False) -> list[Resonance]:
    """The first ``n_max`` resonances below ``f_max_hz``.

    The first is refined from ``f_first_guess_hz``; the others from the local
    minima of |D| on a real frequency grid up to ``f_max_hz``.
    """
    first = find_resonance(bore, air, f_first_guess_hz, lossless)
    found = [first]
    if n_max <= 1 or f_max_hz <= first.f_hz * 1.2:
        return found
    f = np.geomspace(first.f_hz * 1.2, f_max_hz, 1200)
    mag = np.abs(characteristic_function(bore, 2.0 * np.pi * f.astype(np.complex128), air,
                                         lossless))
    if lossless:
        mag = np.abs(mag)
    idx = np.nonzero((mag[1:-1] < mag[:-2]) & (mag[1:-1] < mag[2:]))[0] + 1
    for i in idx:
        if len(found) >= n_max:
            break
        try:
            r = find_resonance(bore, air, float(f[i]), lossless)
        except ArithmeticError:
            continue
        if r.f_hz < f_max_hz and all(abs(r.f_hz / o.f_hz - 1) > 1e-6 for o in found):
            found.append(r)
    return sorted(found, key=lambda r: r.f_hz)
