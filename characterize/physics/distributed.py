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
from typing import TYPE_CHECKING

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
    """

    length_m: float
    area_m2: float
    perimeter_m: float
    circular: bool = True
    width_m: float = 0.0

    @classmethod
    def round(cls, diameter_m: float, length_m: float) -> Duct:
        return cls(length_m, math.pi * diameter_m**2 / 4.0, math.pi * diameter_m, True, diameter_m)

    @classmethod
    def rectangle(cls, width_m: float, height_m: float, length_m: float) -> Duct:
        return cls(length_m, width_m * height_m, 2.0 * (width_m + height_m), False,
                   max(width_m, height_m))

    @property
    def radius_m(self) -> float:
        """Equal-area radius, m."""
        return math.sqrt(self.area_m2 / math.pi)


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

    @property
    def volume_m3(self) -> float:
        """Cavity volume (or the tube's), m^3."""
        if not self.cavity:
            return self.neck.area_m2 * self.neck.length_m
        return sum(d.area_m2 * d.length_m for d in self.cavity)


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


def bessel_ratio(z: NDArray[np.complex128]) -> NDArray[np.complex128]:
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
    return area_m2 * (air.gamma - 1.0) * np.sqrt(1j * omega * nu_t) / (rho * c * c)


def _through(duct: Duct, y_far: NDArray[np.complex128], omega: NDArray[np.complex128],
             air: AirState, lossless: bool) -> NDArray[np.complex128]:
    """Admittance at the near end of a duct loaded by ``y_far`` at its far end."""
    g, zc, _ = duct_parameters(duct, omega, air, lossless)
    t = np.tanh(g * duct.length_m)
    yc = 1.0 / zc
    return yc * (y_far + yc * t) / (yc + y_far * t)


def mouth_impedance(bore: Bore, omega: NDArray[np.complex128], air: AirState,
                    lossless: bool = False) -> NDArray[np.complex128]:
    """Impedance looking into ONE opening from outside, without its radiation
    load (Pa s/m^3), by admittance transfer from the closed end up."""
    w = np.asarray(omega, dtype=np.complex128)
    rho = air.density_kg_m3
    y = np.zeros_like(w)
    if bore.cavity:
        y = y + _wall_admittance(bore.closed_end_area_m2, w, air, lossless)
        n = len(bore.cavity)
        for i, duct in enumerate(bore.cavity):
            y = _through(duct, y, w, air, lossless)
            if bore.step_wall_areas_m2:
                y = y + _wall_admittance(bore.step_wall_areas_m2[i], w, air, lossless)
            if i + 1 < n:
                small = min(duct.area_m2, bore.cavity[i + 1].area_m2)
                dm = bore.junction_corrections_m[i] if bore.junction_corrections_m else 0.0
                y = 1.0 / (1.0 / y + 1j * w * rho * dm / small)
        z = bore.count / y  # one opening carries 1/count of the flow
        z = z + 1j * w * rho * bore.inner_correction_m / bore.neck.area_m2
    else:
        y = y + _wall_admittance(bore.closed_end_area_m2 or bore.neck.area_m2, w, air, lossless)
        z = 1.0 / y if np.all(y != 0) else np.full_like(w, np.inf)
    if bore.viscous_end_length_m > 0 and not lossless:
        _, _, zs = duct_parameters(bore.neck, w, air, lossless)
        z = z + (zs - 1j * w * rho / bore.neck.area_m2) * bore.viscous_end_length_m
    with np.errstate(divide="ignore", invalid="ignore"):
        y1 = np.where(np.isinf(z), 0.0, 1.0 / z)
    y1 = _through(bore.neck, y1, w, air, lossless)
    return 1.0 / y1


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
    rho, c = air.density_kg_m3, air.speed_of_sound_m_s
    mass = 1j * w * rho * bore.outer_correction_m / bore.neck.area_m2
    if lossless:
        return mass
    return bore.count * monopole_gain(bore.baffle) * rho * w * w / (4.0 * np.pi * c) + mass


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
    for duct in (*bore.cavity, bore.neck):
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
