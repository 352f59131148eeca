"""How hard the neck is driven: particle motion from the cavity pressure.

:func:`drive_state` turns a calibrated cavity pressure at f0 into the neck
particle displacement and velocity, the acoustic Reynolds, Strouhal and
Keulegan-Carpenter numbers, and whether the flow is in the nonlinear regime
(then the fitted Q depends on the drive level).
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass
from typing import TYPE_CHECKING

from .spl import REFERENCE_PRESSURE_PA, pressure_to_spl_db

if TYPE_CHECKING:
    from .air import AirState
    from .geometry import ResonatorObject

__all__ = [
    "REFERENCE_PRESSURE_PA",
    "NONLINEAR_DISPLACEMENT_OVER_DIAMETER",
    "DriveState",
    "drive_state",
    "cavity_pressure_for_displacement_pa",
]


#: Displacement over neck diameter above which ``nonlinear`` is set. Common
#: practice: at a displacement comparable to the diameter the neck flow is
#: certainly nonlinear (jetting and vortex shedding at the ends; Ingard & Ising
#: 1967 measured the orifice resistance turning amplitude-dependent there). The
#: physics sheet's quasi-steady estimate (section 6) puts the level where the
#: jet resistance (4/3pi) rho u0 / Cd^2 equals the linear resistance of a typical
#: bottle at xi/d = 0.12 for Cd = 1 and lower for sharp edges (Cd = 0.6), so a
#: tenth of the diameter is taken as the level from which Q can no longer be
#: trusted to be level-independent.
NONLINEAR_DISPLACEMENT_OVER_DIAMETER = 0.1


@dataclass(frozen=True, slots=True)
class DriveState:
    """Neck motion at f0 for one cavity pressure.

    Attributes
    ----------
    cavity_pressure_pa : float
        Cavity pressure amplitude (peak), Pa.
    cavity_spl_db : float
        Cavity SPL, dB re 20 uPa (rms).
    displacement_m : float
        Neck particle displacement amplitude xi, m.
    velocity_m_s : float
        Neck particle velocity amplitude u = omega xi, m/s.
    displacement_over_diameter : float
        xi / d (d the diameter, or a slot's smaller side), 1.
    reynolds : float
        Acoustic Reynolds number u d / nu, 1.
    strouhal : float
        Strouhal number omega a / u = a / xi (a = d/2), 1.
    keulegan_carpenter : float
        2 pi xi / d, 1.
    nonlinear : bool
        ``displacement_over_diameter`` >= the threshold.
    threshold_displacement_over_diameter : float
        The threshold used, 1.
    onset_cavity_spl_db : float
        Cavity SPL at which the threshold is reached, dB re 20 uPa.
    """

    cavity_pressure_pa: float
    cavity_spl_db: float
    displacement_m: float
    velocity_m_s: float
    displacement_over_diameter: float
    reynolds: float
    strouhal: float
    keulegan_carpenter: float
    nonlinear: bool
    threshold_displacement_over_diameter: float
    onset_cavity_spl_db: float

    def to_dict(self) -> dict[str, float | bool]:
        return {k: (v if isinstance(v, bool) else float(v)) for k, v in asdict(self).items()}

    def __str__(self) -> str:
        word = "NONLINEAR" if self.nonlinear else "linear"
        return (f"cavity {self.cavity_spl_db:.1f} dB SPL: neck displacement "
                f"{1e6 * self.displacement_m:.1f} um ({100 * self.displacement_over_diameter:.2f} "
                f"% of d), velocity {self.velocity_m_s:.3g} m/s, Re {self.reynolds:.3g}, "
                f"St {self.strouhal:.3g} ({word})")


def _spl_db(p_peak_pa: float) -> float:
    return float(pressure_to_spl_db(p_peak_pa / math.sqrt(2.0)))


def cavity_pressure_for_displacement_pa(displacement_m: float, obj: ResonatorObject,
                                        air: AirState) -> float:
    r"""Cavity pressure amplitude that moves the neck air by ``displacement_m``.

    .. math::

        p_c = \frac{\rho c^2 S\,\xi}{V}

    Parameters
    ----------
    displacement_m : float
        Displacement amplitude, m.
    obj : ResonatorObject
        Uses the total neck area S (m^2) and the volume V (m^3).
    air : AirState
        Uses rho (kg/m^3) and c (m/s).

    Returns
    -------
    float
        Pressure amplitude, Pa.

    References
    ----------
    Physics sheet section 6 (continuity with the cavity compliance
    :math:`C = V/(\rho c^2)`); L. E. Kinsler et al., *Fundamentals of
    Acoustics*, 4th ed. (2000), section 10.8 (from memory).
    """
    rho, c = air.density_kg_m3, air.speed_of_sound_m_s
    return rho * c * c * obj.neck.area_m2 * displacement_m / obj.cavity.volume_m3


def drive_state(cavity_pressure_pa_amplitude: float, f0_hz: float, obj: ResonatorObject,
                air: AirState) -> DriveState:
    r"""Neck particle motion and flow numbers from the cavity pressure at f0.

    The flow into the cavity is :math:`U = j\omega C p_c` with
    :math:`C = V/(\rho c^2)`, shared by the openings of total area S, so

    .. math::

        \xi = \frac{V p_c}{\rho c^2 S},\qquad u = \omega\xi,\qquad
        \mathrm{Re} = \frac{u d}{\nu},\qquad \mathrm{St} = \frac{\omega a}{u} = \frac{a}{\xi},
        \qquad \mathrm{KC} = \frac{2\pi\xi}{d}

    with d the neck diameter (a slot's smaller side), :math:`a = d/2`,
    :math:`\nu = \mu/\rho`. ``nonlinear`` is set from
    :data:`NONLINEAR_DISPLACEMENT_OVER_DIAMETER`. For a tube the same
    relations are applied to the tube's own volume (a rough estimate).

    Parameters
    ----------
    cavity_pressure_pa_amplitude : float
        Cavity pressure amplitude (peak) at f0, Pa (rms x sqrt 2).
    f0_hz : float
        Resonance frequency, Hz.
    obj : ResonatorObject
        Geometry: total neck area (m^2), volume (m^3), diameter (m).
    air : AirState
        rho (kg/m^3), c (m/s), mu (Pa s).

    Returns
    -------
    DriveState

    Raises
    ------
    ValueError
        Pressure or frequency not finite and positive.

    References
    ----------
    Physics sheet section 6; U. Ingard, H. Ising, "Acoustic nonlinearity of
    an orifice", J. Acoust. Soc. Am. 42(1), 6-17 (1967) (onset; from memory).
    """
    for name, value in (("cavity_pressure_pa_amplitude", cavity_pressure_pa_amplitude),
                        ("f0_hz", f0_hz)):
        if isinstance(value, bool) or not isinstance(value, (int, float)) or not (
                math.isfinite(value) and value > 0):
            raise ValueError(f"{name} must be finite and > 0, got {value!r}")
    rho, c = air.density_kg_m3, air.speed_of_sound_m_s
    d = obj.neck.narrow_dimension_m
    xi = obj.cavity.volume_m3 * cavity_pressure_pa_amplitude / (rho * c * c * obj.neck.area_m2)
    omega = 2.0 * math.pi * f0_hz
    u = omega * xi
    nu = air.viscosity_pa_s / rho
    threshold = NONLINEAR_DISPLACEMENT_OVER_DIAMETER
    onset = cavity_pressure_for_displacement_pa(threshold * d, obj, air)
    return DriveState(
        cavity_pressure_pa=float(cavity_pressure_pa_amplitude),
        cavity_spl_db=_spl_db(cavity_pressure_pa_amplitude),
        displacement_m=xi,
        velocity_m_s=u,
        displacement_over_diameter=xi / d,
        reynolds=u * d / nu,
        strouhal=(d / 2.0) / xi,
        keulegan_carpenter=2.0 * math.pi * xi / d,
        nonlinear=xi / d >= threshold,
        threshold_displacement_over_diameter=threshold,
        onset_cavity_spl_db=_spl_db(onset),
    )
