"""Trim advice: how far to cut the neck (with the end correction measured on
this object), how much volume to change, or what to drill the neck to, with
propagated standard errors and warnings."""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import asdict, dataclass, fields
from typing import Any

from ..checks import Flag
from ..errors import InputError
from ..physics.helmholtz import (
    PLAUSIBLE_END_CORRECTION_OVER_RADIUS,
    derive_from_f0,
    helmholtz_f0_hz,
)
from ..stats import is_finite_number
from .common import (
    MAX_DIAMETER_CHANGE_FRACTION,
    MAX_VOLUME_CHANGE_FRACTION,
    _flags_dicts,
)
from .document import (
    ResultSummary,
    textbook_end_correction_m,
)


@dataclass(frozen=True)
class NeckRoute:
    """Change the neck length (trimming shortens it; lengthening means adding a collar).

    Attributes
    ----------
    new_length_m, new_length_stderr_m : float
        Neck length that gives the target, and its standard error, m.
    cut_m, cut_stderr_m : float
        Length to remove (negative: to add), and its standard error, m.
    textbook_cut_m : float
        The cut the geometry's textbook end correction would have advised, m.
    max_f0_hz : float
        f0 with the whole neck removed (measured end correction kept), Hz.
    possible : bool
        False when trimming cannot reach the target (longer neck needed, or
        the target is above ``max_f0_hz``).
    """

    new_length_m: float
    new_length_stderr_m: float
    cut_m: float
    cut_stderr_m: float
    textbook_cut_m: float
    max_f0_hz: float
    possible: bool

    def to_dict(self) -> dict[str, Any]:
        return asdict(self)


@dataclass(frozen=True)
class VolumeRoute:
    """Change the cavity volume.

    Attributes
    ----------
    new_volume_m3, new_volume_stderr_m3 : float
        Cavity volume that gives the target, and its standard error, m^3.
    change_m3, change_stderr_m3 : float
        new - current (negative: take up volume, e.g. add water), m^3.
    fraction : float
        |change| / current volume, 1.
    """

    new_volume_m3: float
    new_volume_stderr_m3: float
    change_m3: float
    change_stderr_m3: float
    fraction: float

    @property
    def water_to_add_m3(self) -> float:
        """Liquid to pour in (m^3); negative when the volume must grow."""
        return -self.change_m3

    def to_dict(self) -> dict[str, Any]:
        d = asdict(self)
        d["water_to_add_m3"] = self.water_to_add_m3
        return d


@dataclass(frozen=True)
class DiameterRoute:
    """Change the neck bore (drilling only enlarges it; narrowing means a sleeve).

    Attributes
    ----------
    new_diameter_m, new_diameter_stderr_m : float
        Bore that gives the target, and its standard error, m.
    change_m : float
        new - current diameter, m.
    possible_by_drilling : bool
        True when the target needs a wider bore.
    """

    new_diameter_m: float
    new_diameter_stderr_m: float
    change_m: float
    possible_by_drilling: bool

    def to_dict(self) -> dict[str, Any]:
        return asdict(self)


@dataclass(frozen=True)
class TrimAdvice:
    """How to reach a target f0 from one fitted result.

    Attributes
    ----------
    name, source : str
        The object and the result document.
    target_f0_hz : float
        Requested f0, Hz (at the measurement's air).
    f0_hz, f0_stderr_hz : float
        Measured f0 and its standard error, Hz.
    speed_of_sound_m_s, temperature_c : float
        The measurement's air.
    length_m, diameter_m, volume_m3 : float
        The current geometry, m and m^3.
    end_correction_m, end_correction_stderr_m : float
        Measured end correction (L_eff - L) used for the advice, m.
    end_correction_over_radius : float
        The same over the neck radius, 1.
    textbook_end_correction_m : float
        The end correction the geometry predicts, m.
    neck, volume, diameter : NeckRoute, VolumeRoute, DiameterRoute
    flags : tuple of Flag
        Warnings (lumped-model limits, one-way operations, impossibility).
    """

    name: str
    source: str
    target_f0_hz: float
    f0_hz: float
    f0_stderr_hz: float
    speed_of_sound_m_s: float
    temperature_c: float
    length_m: float
    diameter_m: float
    volume_m3: float
    end_correction_m: float
    end_correction_stderr_m: float
    end_correction_over_radius: float
    textbook_end_correction_m: float
    neck: NeckRoute
    volume: VolumeRoute
    diameter: DiameterRoute
    flags: tuple[Flag, ...] = ()

    def to_dict(self) -> dict[str, Any]:
        d = {f.name: getattr(self, f.name) for f in fields(self)}
        d["neck"] = self.neck.to_dict()
        d["volume"] = self.volume.to_dict()
        d["diameter"] = self.diameter.to_dict()
        d["flags"] = _flags_dicts(self.flags)
        return {"schema": "characterize.trim/1", **d}


def _central_stderr(fn: Callable[[float], float], x: float, sigma: float) -> float:
    """First-order standard error of fn(x) by a central difference (the delta method)."""
    if not is_finite_number(sigma):
        return math.nan
    if sigma == 0:
        return 0.0
    h = 1e-6 * abs(x)
    return abs((fn(x + h) - fn(x - h)) / (2.0 * h)) * sigma


def _bore_for(target_hz: float, c: float, volume_m3: float, length_m: float,
              delta_over_radius: float, radius_m: float, count: int) -> float:
    """Radius a' of each of ``count`` round openings with
    helmholtz_f0_hz(c, count pi a'^2, V, L + k a') = target (k as measured)."""
    from scipy.optimize import brentq

    def g(a: float) -> float:
        return helmholtz_f0_hz(c, count * math.pi * a * a, volume_m3,
                               length_m + delta_over_radius * a) - target_hz

    lo, hi = radius_m * 1e-3, radius_m
    try:
        if g(lo) > 0:
            return math.nan  # the target is below what a pinhole gives
        while g(hi) < 0:
            hi *= 2.0
            if hi > 1e3 * radius_m:
                return math.nan
        return float(brentq(g, lo, hi, xtol=1e-15 * radius_m, rtol=1e-14, maxiter=200))
    except ValueError:
        # L + k a' <= 0 somewhere: a negative measured end correction (wrong geometry)
        return math.nan


def advise_trim(result: ResultSummary, target_hz: float) -> TrimAdvice:
    r"""Advise how to reach a target f0: neck length, cavity volume or neck bore.

    The measured effective length :math:`L_\text{eff} = S c^2/((2\pi f_0)^2 V)`
    (from :func:`~characterize.physics.helmholtz.derive_from_f0`) carries this
    object's own end correction :math:`\delta = L_\text{eff} - L`. Keeping
    :math:`\delta`, the lumped law gives

    .. math::

        L' = \frac{S c^2}{(2\pi f_t)^2 V} - \delta, \qquad
        \text{cut} = L - L' = L_\text{eff}\left(1 - \frac{f_0^2}{f_t^2}\right),

    .. math::

        V' = V \frac{f_0^2}{f_t^2},

    and for the bore, with :math:`\delta = k a` scaling with the radius
    (:math:`k` as measured), the radius :math:`a'` solving
    :math:`\frac{c}{2\pi}\sqrt{\pi a'^2/(V (L + k a'))} = f_t`
    (found numerically with
    :func:`~characterize.physics.helmholtz.helmholtz_f0_hz`). Standard errors
    come from the fit's f0 standard error by first-order propagation; the
    target is exact. The advice holds at the measurement's air: f0 scales
    with the speed of sound.

    Parameters
    ----------
    result : ResultSummary
        A fitted result with geometry (see :func:`load_result`).
    target_hz : float
        Target f0, Hz, > 0.

    Returns
    -------
    TrimAdvice

    Raises
    ------
    InputError
        Target not > 0, or no geometry in the result.

    References
    ----------
    Lord Rayleigh, *The Theory of Sound*, vol. II, 2nd ed. (1896),
    sections 303-306 (lumped resonator; sections from memory). JCGM 100:2008,
    *Guide to the expression of uncertainty in measurement*, section 5.1.2
    (first-order propagation; section from memory).
    """
    if not is_finite_number(target_hz) or target_hz <= 0:
        raise InputError("--target", None, f"must be a frequency > 0 Hz, got {target_hz!r}")
    obj = result.object
    if obj is None:
        raise InputError(result.source, "object", "the result carries no geometry; fit with "
                         "--object or give --object OBJECT.toml")
    air = result.air
    c = air.speed_of_sound_m_s
    f0, sf = result.f0_hz, result.f0_stderr_hz
    neck, volume = obj.neck, obj.cavity.volume_m3
    length, radius, area = neck.length_m, neck.radius_m, neck.area_m2
    delta = result.end_correction_m
    k = delta / radius
    textbook = result.textbook_end_correction_m
    if not math.isfinite(textbook):
        textbook = textbook_end_correction_m(obj, air)

    def leff(f: float) -> float:
        return derive_from_f0(f, 0.0, obj, air).effective_neck_length_m

    l_eff_t = leff(target_hz)
    new_length = l_eff_t - delta
    # new_length = L_eff(f_t) - (L_eff(f0) - L): only L_eff(f0) carries the error
    se_len = _central_stderr(leff, f0, sf)
    cut = length - new_length
    textbook_cut = (length + textbook) * (1.0 - (f0 / target_hz) ** 2)
    max_f0 = helmholtz_f0_hz(c, area, volume, delta) if delta > 0 else math.inf
    neck_possible = cut >= 0 and new_length > 0
    neck_route = NeckRoute(new_length_m=new_length, new_length_stderr_m=se_len, cut_m=cut,
                           cut_stderr_m=se_len, textbook_cut_m=textbook_cut, max_f0_hz=max_f0,
                           possible=neck_possible)

    def new_vol(f: float) -> float:
        return volume * (f / target_hz) ** 2

    v_new = new_vol(f0)
    se_v = _central_stderr(new_vol, f0, sf)
    vol_route = VolumeRoute(new_volume_m3=v_new, new_volume_stderr_m3=se_v,
                            change_m3=v_new - volume, change_stderr_m3=se_v,
                            fraction=abs(v_new - volume) / volume)

    def bore(f: float) -> float:
        # the end correction over the radius measured at f, kept for the new bore
        k_f = (leff(f) - length) / radius
        return 2.0 * _bore_for(target_hz, c, volume, length, k_f, radius, neck.count)

    round_bore = neck.shape in ("round", "hole")
    d_new = bore(f0) if round_bore else math.nan
    se_d = _central_stderr(bore, f0, sf) if math.isfinite(d_new) else math.nan
    dia_route = DiameterRoute(new_diameter_m=d_new, new_diameter_stderr_m=se_d,
                              change_m=d_new - neck.diameter_m,
                              possible_by_drilling=bool(d_new >= neck.diameter_m))

    flags: list[Flag] = []
    mm = 1e3
    lo_k, hi_k = PLAUSIBLE_END_CORRECTION_OVER_RADIUS
    if not lo_k <= k <= hi_k:
        flags.append(Flag("end-correction-implausible", "warning",
                          f"the measured end correction is {k:.2f} neck radii (plausible "
                          f"{lo_k:g} to {hi_k:g}): the advice rests on it; check the neck "
                          "length, diameter and volume in the object file"))
    if cut < 0:
        flags.append(Flag("trim-one-way", "warning",
                          f"the target {target_hz:.2f} Hz is below the measured "
                          f"{f0:.2f} Hz and needs a longer neck ({-cut * mm:.2f} mm more, "
                          "e.g. a collar): trimming only shortens; or add "
                          f"{vol_route.change_m3 * 1e6:.1f} mL of volume"
                          + (f", or sleeve the bore to {d_new * mm:.2f} mm"
                             if math.isfinite(d_new) else "")))
    elif new_length <= 0:
        flags.append(Flag("trim-impossible", "error",
                          f"the target {target_hz:.2f} Hz is above {max_f0:.2f} Hz, what "
                          "removing the whole neck gives (with this object's end "
                          "correction): use the volume or bore route"))
    elif new_length < radius:
        flags.append(Flag("lumped-limit", "warning",
                          f"the trimmed neck ({new_length * mm:.2f} mm) would be shorter than "
                          f"its radius ({radius * mm:.2f} mm): the end corrections interact "
                          "and the lumped model cannot promise the result; cut in steps and "
                          "measure again"))
    if vol_route.fraction > MAX_VOLUME_CHANGE_FRACTION:
        flags.append(Flag("volume-change-large", "warning",
                          f"the volume route changes the cavity by "
                          f"{100 * vol_route.fraction:.0f} % (over "
                          f"{100 * MAX_VOLUME_CHANGE_FRACTION:.0f} %): the lumped model "
                          "cannot promise this; change in steps and measure again"))
    if not round_bore:
        flags.append(Flag("no-bore-route", "info",
                          f"the neck is a {neck.shape}: the bore route is given for round "
                          "openings only"))
    elif not math.isfinite(d_new):
        flags.append(Flag("no-bore-route", "info",
                          "no bore reaches the target with the measured end correction"))
    if math.isfinite(d_new):
        if d_new < neck.diameter_m:
            flags.append(Flag("drill-one-way", "info",
                              f"the bore route needs a narrower neck ({d_new * mm:.2f} mm "
                              f"from {neck.diameter_m * mm:.2f} mm): drilling only enlarges; "
                              "fit a sleeve"))
        if abs(d_new / neck.diameter_m - 1.0) > MAX_DIAMETER_CHANGE_FRACTION:
            flags.append(Flag("diameter-change-large", "warning",
                              f"the bore route changes the diameter by "
                              f"{100 * abs(d_new / neck.diameter_m - 1):.0f} %: the measured end "
                              "correction ratio may not hold; change in steps"))
        if length < d_new / 2.0:
            flags.append(Flag("lumped-limit", "warning",
                              f"with a {d_new * mm:.2f} mm bore the neck ({length * mm:.2f} mm) "
                              "is shorter than its radius: the lumped model cannot promise "
                              "the result"))
    if result.warnings:
        flags.append(Flag("result-has-warnings", "info",
                          f"the fitted result carries warnings ({', '.join(result.warnings)}): "
                          "check them before cutting"))
    return TrimAdvice(
        name=result.name, source=result.source, target_f0_hz=float(target_hz), f0_hz=f0,
        f0_stderr_hz=sf, speed_of_sound_m_s=c, temperature_c=air.temperature_c,
        length_m=length, diameter_m=neck.diameter_m, volume_m3=volume, end_correction_m=delta,
        end_correction_stderr_m=result.end_correction_stderr_m, end_correction_over_radius=k,
        textbook_end_correction_m=textbook, neck=neck_route,
        volume=vol_route, diameter=dia_route, flags=tuple(flags))
