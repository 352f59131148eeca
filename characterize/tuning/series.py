"""Trim and fill series: the Rayleigh series methods (1/f0^2 linear in the neck
length or the filled volume, physics sheet section 9) by weighted least squares."""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import asdict, dataclass, fields, replace
from typing import Any

import numpy as np

from ..checks import Flag
from ..errors import FitError, InputError
from ..physics.air import air_state
from ..physics.geometry import ResonatorObject
from ..physics.helmholtz import (
    PLAUSIBLE_END_CORRECTION_OVER_RADIUS,
)
from ..stats import LineFit, fit_line, ratio_with_stderr
from .common import (
    OUTLIER_STUDENTIZED,
    SERIES_TEMPERATURE_SPREAD_K,
    _flags_dicts,
    check_points,
)
from .document import (
    textbook_end_correction_m,
)

#: --vary value -> (manifest column, kind of quantity)
VARY = {"neck-length": ("neck_length", "length"), "volume": ("fill_volume", "volume")}


@dataclass(frozen=True)
class SeriesPoint:
    """One point of a series: the varied value and the measurement.

    Attributes
    ----------
    id : str
    value : float
        Neck length (m) for a trim series, filled volume (m^3) for a fill series.
    f0_hz, f0_stderr_hz : float
        Fitted f0 and its standard error, Hz.
    speed_of_sound_m_s, temperature_c : float
        Air at this point.
    source : str
    """

    id: str
    value: float
    f0_hz: float
    f0_stderr_hz: float
    speed_of_sound_m_s: float
    temperature_c: float
    source: str = ""

    def to_dict(self) -> dict[str, Any]:
        return asdict(self)


@dataclass(frozen=True)
class SeriesFit:
    """A fitted trim or fill series (physics sheet section 9).

    Attributes
    ----------
    vary : str
        ``"neck-length"`` or ``"volume"``.
    points : tuple of SeriesPoint
    reference_speed_of_sound_m_s, reference_temperature_c : float
        Every point's f0 is brought to this speed of sound: f0 c_ref / c_i.
    f0_corrected_hz, inverse_f0_squared_s2, inverse_f0_squared_stderr_s2 : tuple of float
        The points as fitted (y = 1/f0^2 in s^2).
    line : LineFit
        y against the varied value (m or m^3).
    end_correction_m, end_correction_stderr_m : float
        delta: for a trim series intercept/slope; for a fill series
        L_eff - L (needs the neck area and length), m.
    end_correction_over_radius, end_correction_over_radius_stderr : float
        delta / a (NaN without the neck radius).
    volume_over_area_m, volume_over_area_stderr_m : float
        V/S from a trim series, m (NaN for a fill series).
    volume_m3, volume_stderr_m3 : float
        V = (V/S) S for a trim series (needs S); V0 = -intercept/slope for a
        fill series, m^3.
    effective_length_over_area_m_inv, effective_length_over_area_stderr_m_inv : float
        L_eff/S from a fill series, 1/m (NaN for a trim series).
    effective_neck_length_m, effective_neck_length_stderr_m : float
        L_eff: from a fill series (needs S); for a trim series at the first
        point's length, m.
    textbook_end_correction_m : float
        What the geometry predicts, m (NaN without geometry).
    flags : tuple of Flag
    """

    vary: str
    points: tuple[SeriesPoint, ...]
    reference_speed_of_sound_m_s: float
    reference_temperature_c: float
    f0_corrected_hz: tuple[float, ...]
    inverse_f0_squared_s2: tuple[float, ...]
    inverse_f0_squared_stderr_s2: tuple[float, ...]
    line: LineFit
    end_correction_m: float = math.nan
    end_correction_stderr_m: float = math.nan
    end_correction_over_radius: float = math.nan
    end_correction_over_radius_stderr: float = math.nan
    volume_over_area_m: float = math.nan
    volume_over_area_stderr_m: float = math.nan
    volume_m3: float = math.nan
    volume_stderr_m3: float = math.nan
    effective_length_over_area_m_inv: float = math.nan
    effective_length_over_area_stderr_m_inv: float = math.nan
    effective_neck_length_m: float = math.nan
    effective_neck_length_stderr_m: float = math.nan
    textbook_end_correction_m: float = math.nan
    flags: tuple[Flag, ...] = ()
    failures: tuple[dict[str, str], ...] = ()

    @property
    def outliers(self) -> tuple[str, ...]:
        return tuple(p.id for p, t in zip(self.points, self.line.studentized, strict=False)
                     if math.isfinite(t) and abs(t) > OUTLIER_STUDENTIZED)

    def to_dict(self) -> dict[str, Any]:
        d = {f.name: getattr(self, f.name) for f in fields(self)}
        d["points"] = [
            {**p.to_dict(), "f0_corrected_hz": fc, "inverse_f0_squared_s2": y,
             "inverse_f0_squared_stderr_s2": sy, "residual_s2": r, "studentized_residual": t,
             "outlier": bool(math.isfinite(t) and abs(t) > OUTLIER_STUDENTIZED)}
            for p, fc, y, sy, r, t in zip(self.points, self.f0_corrected_hz,
                                          self.inverse_f0_squared_s2,
                                          self.inverse_f0_squared_stderr_s2,
                                          self.line.residuals, self.line.studentized, strict=False)
        ]
        for k in ("f0_corrected_hz", "inverse_f0_squared_s2", "inverse_f0_squared_stderr_s2"):
            del d[k]
        d["line"] = self.line.to_dict()
        d["flags"] = _flags_dicts(self.flags)
        d["failures"] = [dict(x) for x in self.failures]
        return {"schema": "characterize.series/1", **d}


def fit_series(points: Sequence[SeriesPoint], vary: str, obj: ResonatorObject | None = None,
               *, source: str = "series", failures: Sequence[Mapping[str, str]] = ()
               ) -> SeriesFit:
    r"""Fit a trim or fill series by weighted least squares (Rayleigh's series method).

    From the lumped law :math:`1/f_0^2 = 4\pi^2 V L_\text{eff}/(c^2 S)`
    (physics sheet sections 2 and 9):

    - trim series (neck length L varied, V fixed):

      .. math::

          \frac{1}{f_0^2} = b (L + \delta),\quad b = \frac{4\pi^2 V}{c^2 S},\quad
          \delta = \frac{a}{b},\quad \frac{V}{S} = \frac{b c^2}{4\pi^2}

      with a the intercept: the line crosses zero at L = -delta.
    - fill series (liquid volume v put into the cavity):

      .. math::

          \frac{1}{f_0^2} = \frac{4\pi^2 L_\text{eff}}{c^2 S}(V_0 - v),\quad
          \frac{L_\text{eff}}{S} = -\frac{\text{slope}\,c^2}{4\pi^2},\quad
          V_0 = -\frac{\text{intercept}}{\text{slope}}.

    Each point's f0 is first brought to a common speed of sound
    :math:`c_\text{ref}` (the mean over the points): :math:`f_i c_\text{ref}/c_i`.
    The weights use :math:`\sigma(1/f^2) = 2\sigma_f/f^3`; without stated
    f0 errors on every point the fit is unweighted. Ratios carry the
    first-order error :math:`\operatorname{var}\delta = \operatorname{var}a/b^2
    + a^2\operatorname{var}b/b^4 - 2a\operatorname{cov}(a,b)/b^3`.

    Parameters
    ----------
    points : sequence of SeriesPoint
        At least three, with distinct values.
    vary : str
        ``"neck-length"`` (values in m) or ``"volume"`` (values in m^3).
    obj : ResonatorObject, optional
        Geometry: the neck radius and area (and, for a fill series, the neck
        length) turn the line into delta/a, V and L_eff.
    source : str
        Name for error messages (the manifest).
    failures : sequence of mapping
        Items that could not be measured, kept in the result.

    Returns
    -------
    SeriesFit

    Raises
    ------
    InputError
        Fewer than three points, duplicate values, an unknown ``vary``.
    FitError
        The data do not follow the law's sign (1/f0^2 must grow with the
        neck length and fall with the filled volume).

    References
    ----------
    Lord Rayleigh, *The Theory of Sound*, vol. II, 2nd ed. (1896),
    sections 303-306 (sections from memory); physics sheet section 9 (the
    series formulas and their check values). P. R. Bevington, D. K. Robinson,
    *Data Reduction and Error Analysis for the Physical Sciences*, 3rd ed.
    (2003), ch. 6 (weighted least squares; chapter from memory).
    """
    if vary not in VARY:
        raise InputError("--vary", None, f"must be one of {', '.join(VARY)}, got {vary!r}")
    what = "trim series" if vary == "neck-length" else "fill series"
    check_points([p.value for p in points], [p.id for p in points], source, what)
    pts = tuple(points)
    c = np.array([p.speed_of_sound_m_s for p in pts])
    c_ref = float(np.mean(c))
    temps = np.array([p.temperature_c for p in pts])
    f = np.array([p.f0_hz for p in pts]) * c_ref / c
    sf = np.array([p.f0_stderr_hz for p in pts]) * c_ref / c
    y = 1.0 / f**2
    weighted = bool(np.all(np.isfinite(sf)) and np.all(sf > 0))
    sy = 2.0 * sf / f**3
    x = np.array([p.value for p in pts])
    line = fit_line(x, y, sy if weighted else None)
    b, a = line.slope, line.intercept
    var_b, var_a, cov_ab = line.covariance[0][0], line.covariance[1][1], line.cov_slope_intercept
    four_pi2 = 4.0 * math.pi**2
    out: dict[str, float] = {}
    flags: list[Flag] = []
    radius = obj.neck.radius_m if obj is not None else math.nan
    area = obj.neck.area_m2 if obj is not None else math.nan
    textbook = math.nan
    if obj is not None:
        if obj.kind != "helmholtz":
            raise InputError(obj.source_path, "kind", f"series methods are for Helmholtz "
                             f"resonators, not for a {obj.kind!r}")
        air_ref = replace(air_state(temperature_c=float(np.mean(temps))),
                          speed_of_sound_m_s=c_ref)
        textbook = textbook_end_correction_m(obj, air_ref)
    if vary == "neck-length":
        if b <= 0:
            raise FitError(f"{source}: 1/f0^2 does not grow with the neck length (slope "
                           f"{b:.3g} s^2/m): not a trim series, or the values are mislabelled")
        delta, se_delta = ratio_with_stderr(a, b, var_a, var_b, cov_ab)
        v_over_s = b * c_ref**2 / four_pi2
        se_vs = math.sqrt(var_b) * c_ref**2 / four_pi2
        out.update(end_correction_m=delta, end_correction_stderr_m=se_delta,
                   volume_over_area_m=v_over_s, volume_over_area_stderr_m=se_vs,
                   volume_m3=v_over_s * area, volume_stderr_m3=se_vs * area,
                   effective_neck_length_m=float(x[0]) + delta,
                   effective_neck_length_stderr_m=se_delta)
    else:
        if b >= 0:
            raise FitError(f"{source}: 1/f0^2 does not fall as the cavity is filled (slope "
                           f"{b:.3g} s^2/m^3): not a fill series, or the values are mislabelled")
        l_over_s = -b * c_ref**2 / four_pi2
        se_ls = math.sqrt(var_b) * c_ref**2 / four_pi2
        # V0 = a / (-b): numerator a, denominator -b, cov(a, -b) = -cov(a, b)
        v0, se_v0 = ratio_with_stderr(a, -b, var_a, var_b, -cov_ab)
        l_eff = l_over_s * area
        out.update(effective_length_over_area_m_inv=l_over_s,
                   effective_length_over_area_stderr_m_inv=se_ls,
                   volume_m3=v0, volume_stderr_m3=se_v0, effective_neck_length_m=l_eff,
                   effective_neck_length_stderr_m=se_ls * area)
        if obj is not None:
            out.update(end_correction_m=l_eff - obj.neck.length_m,
                       end_correction_stderr_m=se_ls * area)
        if np.any(x >= v0):
            flags.append(Flag("fill-beyond-volume", "warning",
                              f"some filled volumes reach the fitted cavity volume "
                              f"{v0 * 1e6:.1f} mL: the values or their units are wrong"))
    if math.isfinite(radius) and "end_correction_m" in out:
        out["end_correction_over_radius"] = out["end_correction_m"] / radius
        out["end_correction_over_radius_stderr"] = out["end_correction_stderr_m"] / radius
        lo, hi = PLAUSIBLE_END_CORRECTION_OVER_RADIUS
        r = out["end_correction_over_radius"]
        if not lo <= r <= hi:
            flags.append(Flag("end-correction-implausible", "warning",
                              f"the series gives an end correction of {r:.2f} neck radii "
                              f"({out['end_correction_m'] * 1e3:.2f} mm); plausible is {lo:g} "
                              f"to {hi:g}: check the varied values, their units and the "
                              "neck diameter"))
    for p, t in zip(pts, line.studentized, strict=False):
        if math.isfinite(t) and abs(t) > OUTLIER_STUDENTIZED:
            flags.append(Flag("outlier", "warning",
                              f"point {p.id!r} has a studentized residual of {t:+.1f} (beyond "
                              f"{OUTLIER_STUDENTIZED:g}): remeasure it or leave it out"))
    if len(pts) < 4:
        flags.append(Flag("no-outlier-test", "info",
                          "three points fit a line with one degree of freedom: outliers "
                          "cannot be tested (measure four or more)"))
    spread = float(np.ptp(temps))
    if spread > SERIES_TEMPERATURE_SPREAD_K:
        shift = float(np.max(np.abs(c_ref / c - 1.0)))
        flags.append(Flag("temperature-spread", "warning",
                          f"the air temperature spans {spread:.1f} K "
                          f"({temps.min():.1f} to {temps.max():.1f} °C): the points were "
                          f"brought to c = {c_ref:.2f} m/s, shifting f0 by up to "
                          f"{100 * shift:.2f} %; the result relies on the recorded "
                          "temperatures"))
    if failures:
        flags.append(Flag("item-failed", "warning",
                          f"{len(failures)} item(s) could not be measured and were left out: "
                          + "; ".join(f"{x['id']}: {x['reason']}" for x in failures)))
    return SeriesFit(vary=vary, points=pts, reference_speed_of_sound_m_s=c_ref,
                     reference_temperature_c=float(np.mean(temps)),
                     f0_corrected_hz=tuple(map(float, f)),
                     inverse_f0_squared_s2=tuple(map(float, y)),
                     inverse_f0_squared_stderr_s2=tuple(map(float, sy)), line=line,
                     textbook_end_correction_m=textbook, flags=tuple(flags),
                     failures=tuple(dict(x) for x in failures), **out)
