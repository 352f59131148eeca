"""From a measured f0 back to the geometry: the effective neck length and end
correction, with standard errors (:func:`derive_from_f0`).

Everything is SI: m, m^2, m^3, m/s, kg/m^3, Hz, Pa s/m^3.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass

from .air import AirState
from .geometry import ResonatorObject
from .radiation import (
    _positive,
)

# Range of the total end correction (both ends) over the neck radius that is
# accepted as plausible for a measured object. The physics sheet section 3
# gives typical totals from 1.1a (bottle: unflanged outside, neck into a
# narrow cavity) to about 1.7a (flanged neck into a large cavity); the range
# is widened on both sides (common practice) to leave room for measurement
# scatter, short necks, rounded or thick-walled ends and cavities that are
# not well described by a single volume.
PLAUSIBLE_END_CORRECTION_OVER_RADIUS = (0.6, 2.4)


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
    :math:`\delta/a` with standard error :math:`\sigma_\delta/a`. S is the
    total open area and a the radius of one opening (equal-area radius for a
    slot). For ``kind = "tube"`` the quarter-wave relation is inverted
    instead: :math:`L_\text{eff} = c/(4f_0)`, :math:`\sigma_L = L_\text{eff}\sigma_f/f_0`.

    This is the lumped-equivalent length: it holds the cavity's own inertia
    and the boundary-layer mass as well as the end corrections, which is what
    a trim calculation with the lumped formula needs; compare it with
    :attr:`Prediction.effective_neck_length_m`, which has the same meaning.

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
    if obj.kind == "tube":
        # quarter-wave tube: f1 = c / (4 L_eff) (half-wave, open at both ends:
        # c / (2 L_eff)), so sigma_L = L_eff sigma_f / f0
        l_eff = c / ((4.0 if neck.inner_end == "closed" else 2.0) * f0_hz)
        sigma_l = l_eff * f0_stderr_hz / f0_hz
    else:
        l_eff = neck.area_m2 * c**2 / ((2.0 * math.pi * f0_hz) ** 2 * obj.cavity.volume_m3)
        sigma_l = 2.0 * l_eff * f0_stderr_hz / f0_hz
    delta = l_eff - neck.mass_length_m
    return Derived(
        effective_neck_length_m=l_eff,
        effective_neck_length_stderr_m=sigma_l,
        end_correction_m=delta,
        end_correction_stderr_m=sigma_l,
        end_correction_over_radius=delta / neck.radius_m,
        end_correction_over_radius_stderr=sigma_l / neck.radius_m,
    )
