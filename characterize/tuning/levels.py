"""Drive-level studies: Q and f0 against cavity SPL and the onset of the
nonlinear regime; a steady force against SPL as a power law."""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import asdict, dataclass, fields
from pathlib import Path
from typing import Any

import numpy as np

from ..checks import Flag
from ..errors import FitError, InputError
from ..physics.air import AirState
from ..physics.geometry import ResonatorObject
from ..physics.nonlinear import drive_state
from ..physics.spl import pressure_to_spl_db, spl_to_pressure_pa
from ..stats import LineFit, fit_line
from .common import (
    LEVEL_DETECTION_SIGMAS,
    OUTLIER_STUDENTIZED,
    Q_DROP_FRACTION,
    SQUARE_LAW_EXPONENT,
    SQUARE_LAW_SIGMAS,
    STANDARD_GRAVITY_M_S2,
    _flags_dicts,
    check_points,
)
from .manifest import Measured, _check_columns, _read_csv


def neck_displacement_over_diameter(spl_db: float, f0_hz: float, obj: ResonatorObject,
                                    air: AirState) -> float:
    r"""Neck particle displacement amplitude over the neck diameter at a cavity SPL.

    The volume flow into the cavity is :math:`U = j\omega C p_c`, so the
    displacement amplitude is

    .. math::

        \xi = \frac{V \hat p_c}{\rho c^2 S},
        \qquad \hat p_c = \sqrt2\,p_\text{rms}

    evaluated by :func:`~characterize.physics.nonlinear.drive_state` (d is the
    diameter, or a slot's smaller side).

    Parameters
    ----------
    spl_db : float
        Cavity SPL, dB re 20 uPa (rms).
    f0_hz : float
        Resonance frequency, Hz (> 0; the displacement does not depend on it).
    obj : ResonatorObject
        Geometry (V, S, d).
    air : AirState
        Uses density (kg/m^3) and speed of sound (m/s).

    Returns
    -------
    float
        xi / d, 1.

    References
    ----------
    Physics sheet section 6 (neck motion from cavity pressure; check: the
    sheet's bottle at 100 dB inside moves 27.4 um). L. E. Kinsler,
    A. R. Frey, A. B. Coppens, J. V. Sanders, *Fundamentals of Acoustics*,
    4th ed. (2000), section 10.8 (section from memory).
    """
    p_amp = math.sqrt(2.0) * float(spl_to_pressure_pa(spl_db))
    return drive_state(p_amp, f0_hz, obj, air).displacement_over_diameter


@dataclass(frozen=True)
class LevelPoint:
    """One drive level: the cavity SPL and the fit there.

    Attributes
    ----------
    id : str
    spl_db : float
        Cavity SPL, dB re 20 uPa.
    spl_source : str
        ``"result"`` (a calibrated drive block) or ``"manifest"``.
    f0_hz, f0_stderr_hz, q, q_stderr : float
    displacement_over_diameter : float
        Neck displacement amplitude / diameter (NaN without geometry).
    source : str
    """

    id: str
    spl_db: float
    spl_source: str
    f0_hz: float
    f0_stderr_hz: float
    q: float
    q_stderr: float
    displacement_over_diameter: float = math.nan
    source: str = ""

    def to_dict(self) -> dict[str, Any]:
        return asdict(self)


@dataclass(frozen=True)
class LevelStudy:
    """Q and f0 against cavity SPL, and the onset of the nonlinear regime.

    Attributes
    ----------
    points : tuple of LevelPoint
        In order of level.
    line : LineFit
        1/Q against the RMS cavity pressure (Pa).
    q_small_signal, q_small_signal_stderr : float
        1/intercept and its standard error.
    q_slope_per_pa, q_slope_stderr_per_pa : float
        Growth of 1/Q per pascal (rms) and its standard error.
    q_drop_fraction : float
        The onset criterion (0.10: Q down 10 %).
    onset_spl_db, onset_spl_stderr_db : float
        Cavity SPL where the fitted Q is (1 - q_drop_fraction) times the
        small-signal Q, dB (NaN when no drop was detected).
    onset_pressure_pa : float
        The same as an RMS pressure, Pa.
    onset_lower_bound_spl_db : float
        Without a detected drop: the onset lies above this level (slope at
        its upper 2-sigma value); NaN otherwise.
    onset_displacement_over_diameter : float
        xi/d at the onset (NaN without geometry or onset).
    f0_shift_hz, f0_shift_stderr_hz : float
        f0 at the highest level minus f0 at the lowest, Hz.
    flags : tuple of Flag
    failures : tuple of dict
    """

    points: tuple[LevelPoint, ...]
    line: LineFit
    q_small_signal: float
    q_small_signal_stderr: float
    q_slope_per_pa: float
    q_slope_stderr_per_pa: float
    q_drop_fraction: float
    onset_spl_db: float
    onset_spl_stderr_db: float
    onset_pressure_pa: float
    onset_lower_bound_spl_db: float
    onset_displacement_over_diameter: float
    f0_shift_hz: float
    f0_shift_stderr_hz: float
    flags: tuple[Flag, ...] = ()
    failures: tuple[dict[str, str], ...] = ()

    def q_model(self, spl_db: Any) -> Any:
        """The fitted Q at a level: 1 / (intercept + slope p_rms)."""
        return 1.0 / self.line(spl_to_pressure_pa(spl_db))

    def to_dict(self) -> dict[str, Any]:
        d = {f.name: getattr(self, f.name) for f in fields(self)}
        d["points"] = [{**p.to_dict(), "studentized_residual": t}
                       for p, t in zip(self.points, self.line.studentized, strict=False)]
        d["line"] = self.line.to_dict()
        d["flags"] = _flags_dicts(self.flags)
        d["failures"] = [dict(x) for x in self.failures]
        return {"schema": "characterize.levels/1", **d}


def level_study(points: Sequence[LevelPoint], *, source: str = "levels",
                failures: Sequence[Mapping[str, str]] = (),
                q_drop_fraction: float = Q_DROP_FRACTION) -> LevelStudy:
    r"""Fit Q against drive level and find the onset of the nonlinear regime.

    The neck's resistance is taken as a linear part plus the quasi-steady
    nonlinear part, which grows with the velocity amplitude and so with the
    cavity pressure (physics sheet section 6: :math:`R_\text{nl} =
    (4/3\pi)\rho u_0/C_d^2`). Since :math:`1/Q = R/(\omega_0 M)`,

    .. math::

        \frac{1}{Q} = \frac{1}{Q_0} + \beta\,p_\text{rms},

    fitted by weighted least squares with :math:`\sigma(1/Q) = \sigma_Q/Q^2`.
    Q has dropped by the fraction D from :math:`Q_0` at

    .. math::

        p_D = \frac{D}{1 - D}\,\frac{1}{Q_0 \beta},\qquad
        L_D = 20\log_{10}\frac{p_D}{20\ \mu\text{Pa}},

    with :math:`\sigma_{L} = \frac{20}{\ln 10}\sqrt{\sigma_a^2/a^2 +
    \sigma_\beta^2/\beta^2 - 2\operatorname{cov}(a,\beta)/(a\beta)}`,
    :math:`a = 1/Q_0` (first-order propagation).

    Parameters
    ----------
    points : sequence of LevelPoint
        At least three, at distinct levels.
    source : str
        Name for messages.
    failures : sequence of mapping
        Items that could not be measured.
    q_drop_fraction : float
        D, 0 < D < 1.

    Returns
    -------
    LevelStudy

    Raises
    ------
    InputError
        Fewer than three points, duplicate levels.
    FitError
        The small-signal 1/Q comes out <= 0.

    References
    ----------
    U. Ingard, H. Ising, "Acoustic nonlinearity of an orifice", J. Acoust.
    Soc. Am. 42(1), 6-17 (1967) (from memory); physics sheet section 6
    (quasi-steady estimate and the practical test: repeat 10 dB lower).
    JCGM 100:2008, section 5.2.2 (correlated inputs; section from memory).
    """
    if not 0 < q_drop_fraction < 1:
        raise ValueError(f"q_drop_fraction must be in (0, 1), got {q_drop_fraction!r}")
    pts = tuple(sorted(points, key=lambda p: p.spl_db))
    check_points([p.spl_db for p in pts], [p.id for p in pts], source, "level study")
    spl = np.array([p.spl_db for p in pts])
    p_rms = spl_to_pressure_pa(spl)
    q = np.array([p.q for p in pts])
    sq = np.array([p.q_stderr for p in pts])
    weighted = bool(np.all(np.isfinite(sq)) and np.all(sq > 0))
    line = fit_line(p_rms, 1.0 / q, sq / q**2 if weighted else None)
    a, b = line.intercept, line.slope
    var_a, var_b, cov = line.covariance[1][1], line.covariance[0][0], line.cov_slope_intercept
    if a <= 0:
        raise FitError(f"{source}: the small-signal 1/Q extrapolates to {a:.3g} (<= 0): Q does "
                       "not follow the level model; check the levels and the fits")
    q0, se_q0 = 1.0 / a, math.sqrt(var_a) / a**2
    flags: list[Flag] = []
    ratio = q_drop_fraction / (1.0 - q_drop_fraction)
    onset = onset_se = onset_p = lower = math.nan
    se_b = math.sqrt(var_b)
    if b > 0 and b > LEVEL_DETECTION_SIGMAS * se_b:
        onset_p = ratio * a / b
        var_ln = var_a / a**2 + var_b / b**2 - 2.0 * cov / (a * b)
        onset = float(pressure_to_spl_db(onset_p))
        onset_se = 20.0 / math.log(10.0) * math.sqrt(max(var_ln, 0.0))
        if not spl[0] <= onset <= spl[-1]:
            flags.append(Flag("onset-extrapolated", "warning",
                              f"the onset ({onset:.1f} dB) lies outside the measured levels "
                              f"({spl[0]:.1f} to {spl[-1]:.1f} dB): it is extrapolated along "
                              "the level model"))
    else:
        b_hi = b + LEVEL_DETECTION_SIGMAS * se_b
        if b_hi > 0:
            lower = float(pressure_to_spl_db(ratio * a / b_hi))
        flags.append(Flag("no-level-dependence", "info",
                          f"Q does not fall measurably with level up to {spl[-1]:.1f} dB "
                          f"(1/Q slope {b:.3g} ± {se_b:.3g} per Pa)"
                          + (f"; the onset lies above about {lower:.0f} dB"
                             if math.isfinite(lower) else "")))
    xd = np.array([p.displacement_over_diameter for p in pts])
    onset_xd = math.nan
    if math.isfinite(onset_p) and np.any(np.isfinite(xd)):
        per_pa = xd / p_rms
        onset_xd = float(np.nanmedian(per_pa)) * onset_p
    df = pts[-1].f0_hz - pts[0].f0_hz
    df_se = math.hypot(pts[-1].f0_stderr_hz, pts[0].f0_stderr_hz)
    if math.isfinite(df_se) and df_se > 0 and abs(df) > 3.0 * df_se:
        flags.append(Flag("f0-level-dependent", "info",
                          f"f0 moves by {df:+.3f} ± {df_se:.3f} Hz from {spl[0]:.1f} to "
                          f"{spl[-1]:.1f} dB"))
    for p, t in zip(pts, line.studentized, strict=False):
        if math.isfinite(t) and abs(t) > OUTLIER_STUDENTIZED:
            flags.append(Flag("outlier", "warning",
                              f"level {p.id!r} ({p.spl_db:.1f} dB) has a studentized residual "
                              f"of {t:+.1f} against the level model"))
    if failures:
        flags.append(Flag("item-failed", "warning",
                          f"{len(failures)} item(s) could not be measured and were left out: "
                          + "; ".join(f"{x['id']}: {x['reason']}" for x in failures)))
    return LevelStudy(points=pts, line=line, q_small_signal=q0, q_small_signal_stderr=se_q0,
                      q_slope_per_pa=b, q_slope_stderr_per_pa=se_b,
                      q_drop_fraction=q_drop_fraction, onset_spl_db=onset,
                      onset_spl_stderr_db=onset_se, onset_pressure_pa=float(onset_p),
                      onset_lower_bound_spl_db=lower, onset_displacement_over_diameter=onset_xd,
                      f0_shift_hz=df, f0_shift_stderr_hz=df_se, flags=tuple(flags),
                      failures=tuple(dict(x) for x in failures))


def level_points(measured: Sequence[Measured], source: str) -> list[LevelPoint]:
    """Level points from measured manifest rows.

    The cavity SPL comes from the result's calibrated drive block
    (``drive.cavity_spl_db``) when there is one, else from the manifest's
    ``spl_db`` column; the displacement over diameter from the drive block,
    else from :func:`neck_displacement_over_diameter` when the geometry is known.

    Raises
    ------
    InputError
        A row with neither a drive block nor an ``spl_db`` value.
    """
    out = []
    for m in measured:
        r = m.result
        if r.drive_spl_db is not None:
            spl, src = r.drive_spl_db, "result"
        elif "spl_db" in m.row.values:
            spl, src = m.row.values["spl_db"], "manifest"
        else:
            raise InputError(source, f"line {m.row.line}, spl_db", "no cavity level: give "
                             "spl_db (dB re 20 uPa) or a calibrated result with a drive block")
        if r.drive_displacement_over_diameter is not None:
            xd = r.drive_displacement_over_diameter
        elif r.object is not None:
            xd = neck_displacement_over_diameter(spl, r.f0_hz, r.object, r.air)
        else:
            xd = math.nan
        out.append(LevelPoint(id=m.row.id, spl_db=float(spl), spl_source=src, f0_hz=r.f0_hz,
                              f0_stderr_hz=r.f0_stderr_hz, q=r.q, q_stderr=r.q_stderr,
                              displacement_over_diameter=float(xd), source=r.source))
    return out


@dataclass(frozen=True)
class PowerLawFit:
    r"""A power law F = A p^n fitted on log axes (p the RMS pressure in Pa).

    Attributes
    ----------
    spl_db, force_n, force_stderr_n : tuple of float
        The table (force standard errors NaN when not given).
    quantity : str
        ``"force_n"`` or ``"excess_mass_kg"`` (converted with standard gravity).
    line : LineFit
        log10(F / 1 N) against log10(p / 1 Pa).
    exponent, exponent_stderr : float
        n and its standard error.
    coefficient_n, coefficient_stderr_n : float
        A, the force at 1 Pa rms (94 dB), N.
    ratio_per_10_db, ratio_per_10_db_stderr : float
        Force ratio for a 10 dB step, 10^(n/2).
    expected_exponent : float
        2 (a second-order effect; common practice).
    z_vs_expected : float
        (n - 2) / its standard error.
    consistent_with_square_law : bool
        |z| <= SQUARE_LAW_SIGMAS.
    flags : tuple of Flag
    """

    spl_db: tuple[float, ...]
    force_n: tuple[float, ...]
    force_stderr_n: tuple[float, ...]
    quantity: str
    line: LineFit
    exponent: float
    exponent_stderr: float
    coefficient_n: float
    coefficient_stderr_n: float
    ratio_per_10_db: float
    ratio_per_10_db_stderr: float
    expected_exponent: float
    z_vs_expected: float
    consistent_with_square_law: bool
    flags: tuple[Flag, ...] = ()

    def to_dict(self) -> dict[str, Any]:
        d = {f.name: getattr(self, f.name) for f in fields(self)}
        d["line"] = self.line.to_dict()
        d["flags"] = _flags_dicts(self.flags)
        return {"schema": "characterize.power-law/1", **d}


def fit_power_law(spl_db: Sequence[float], force_n: Sequence[float],
                  force_stderr_n: Sequence[float] | None = None, *, quantity: str = "force_n",
                  source: str = "table") -> PowerLawFit:
    r"""Fit F = A p^n to a steady force against cavity SPL, on log axes.

    With :math:`p = 20\ \mu\text{Pa}\cdot 10^{L/20}`, the straight line

    .. math::

        \log_{10} F = n \log_{10} p + \log_{10} A

    is fitted by least squares (weighted with
    :math:`\sigma(\log_{10}F) = \sigma_F/(F\ln 10)` when the force errors are
    given, else unweighted with errors from the scatter). A force from a
    second-order effect (mean flow, radiation pressure: products of two
    first-order quantities) grows as :math:`p^2`, i.e. tenfold for every
    10 dB; comparing n with 2 is common practice. The ratio per 10 dB is
    :math:`10^{n/2}`.

    Parameters
    ----------
    spl_db : sequence of float
        Cavity SPL, dB re 20 uPa; at least three distinct values.
    force_n : sequence of float
        Steady force, N, all > 0.
    force_stderr_n : sequence of float, optional
        Its standard errors, N.
    quantity : str
        What the table held (for the report).
    source : str
        Name for messages.

    Returns
    -------
    PowerLawFit

    Raises
    ------
    InputError
        Fewer than three points, duplicate levels, a force <= 0.

    References
    ----------
    P. R. Bevington, D. K. Robinson, *Data Reduction and Error Analysis for
    the Physical Sciences*, 3rd ed. (2003), ch. 6 (straight-line fit; from
    memory). The square-law expectation is common practice.
    """
    spl = np.asarray(spl_db, dtype=float)
    force = np.asarray(force_n, dtype=float)
    check_points(list(spl), [f"{v:g} dB" for v in spl], source, "power-law fit")
    if np.any(~np.isfinite(force)) or np.any(force <= 0):
        bad = float(force[~(np.isfinite(force) & (force > 0))][0])
        raise InputError(source, quantity, f"every force must be > 0 for a fit on log axes, got "
                         f"{bad:g}")
    x = np.log10(spl_to_pressure_pa(spl))
    y = np.log10(force)
    se = (np.full(force.shape, np.nan) if force_stderr_n is None
          else np.asarray(force_stderr_n, dtype=float))
    weighted = bool(np.all(np.isfinite(se)) and np.all(se > 0))
    line = fit_line(x, y, se / (force * math.log(10.0)) if weighted else None)
    n, se_n = line.slope, line.slope_stderr
    coef = 10.0**line.intercept
    se_coef = coef * math.log(10.0) * line.intercept_stderr
    ratio = 10.0 ** (n / 2.0)
    se_ratio = ratio * math.log(10.0) / 2.0 * se_n
    dev = n - SQUARE_LAW_EXPONENT
    if abs(dev) < 1e-9:  # exact to rounding (noise-free data): the error is rounding too
        z, consistent = 0.0, True
    elif se_n > 0:
        z = dev / se_n
        consistent = abs(z) <= SQUARE_LAW_SIGMAS
    else:
        z, consistent = math.copysign(math.inf, dev), False
    flags: list[Flag] = []
    if not consistent:
        flags.append(Flag("not-square-law", "info",
                          f"the force grows with exponent {n:.3f} ± {se_n:.3f} against pressure, "
                          f"{abs(z):.1f} standard errors from 2 (a second-order effect): another "
                          "mechanism, or a level-dependent offset, contributes"))
    for s, t in zip(spl, line.studentized, strict=False):
        if math.isfinite(t) and abs(t) > OUTLIER_STUDENTIZED:
            flags.append(Flag("outlier", "warning",
                              f"the reading at {s:.1f} dB has a studentized residual of {t:+.1f}"))
    return PowerLawFit(spl_db=tuple(map(float, spl)), force_n=tuple(map(float, force)),
                       force_stderr_n=tuple(map(float, se)), quantity=quantity, line=line,
                       exponent=n, exponent_stderr=se_n, coefficient_n=coef,
                       coefficient_stderr_n=se_coef, ratio_per_10_db=ratio,
                       ratio_per_10_db_stderr=se_ratio, expected_exponent=SQUARE_LAW_EXPONENT,
                       z_vs_expected=float(z), consistent_with_square_law=bool(consistent),
                       flags=tuple(flags))


@dataclass(frozen=True)
class ForceTable:
    """A table of steady force (or balance reading) against cavity SPL (SI)."""

    spl_db: tuple[float, ...]
    force_n: tuple[float, ...]
    force_stderr_n: tuple[float, ...] | None
    quantity: str


#: Columns of a force table.
FORCE_COLUMNS = ("id", "spl_db", "force_n", "force_stderr_n", "excess_mass_kg",
                 "excess_mass_stderr_kg", "note")


def is_force_table(path: str | Path) -> bool:
    """True when the CSV's header has ``spl_db`` and ``force_n`` or ``excess_mass_kg``
    and no ``recording``/``result`` column."""
    header, _ = _read_csv(Path(path))
    return ("spl_db" in header and ("force_n" in header or "excess_mass_kg" in header)
            and "recording" not in header and "result" not in header)


def read_force_table(path: str | Path) -> ForceTable:
    """Read a CSV with ``spl_db`` and ``force_n`` (N) or ``excess_mass_kg`` (kg).

    A balance reading m is a force m g_n with the standard gravity
    g_n = 9.80665 m/s^2 (3rd CGPM, 1901). Optional ``force_stderr_n`` or
    ``excess_mass_stderr_kg`` weight the fit.

    Raises
    ------
    InputError
        Missing or unknown columns, both or neither quantity, bad numbers.
    """
    p = Path(path)
    source = str(p)
    header, rows = _read_csv(p)
    _check_columns(header, FORCE_COLUMNS, ("spl_db",), source)
    has_f, has_m = "force_n" in header, "excess_mass_kg" in header
    if has_f == has_m:
        raise InputError(source, None, "give exactly one of the columns force_n (N) or "
                         "excess_mass_kg (kg)")
    col, se_col, scale = (("force_n", "force_stderr_n", 1.0) if has_f else
                          ("excess_mass_kg", "excess_mass_stderr_kg", STANDARD_GRAVITY_M_S2))
    if not rows:
        raise InputError(source, None, "no rows: expected one row per level")

    def num(text: str, field: str) -> float:
        try:
            v = float(text)
        except ValueError:
            raise InputError(source, field, f"expected a number, got {text!r}") from None
        if not math.isfinite(v):
            raise InputError(source, field, f"expected a finite number, got {text!r}")
        return v

    spl, force, se = [], [], []
    for lineno, r in rows:
        spl.append(num(r["spl_db"], f"line {lineno}, spl_db"))
        force.append(num(r[col], f"line {lineno}, {col}") * scale)
        if se_col in header:
            se.append(num(r[se_col], f"line {lineno}, {se_col}") * scale)
    return ForceTable(spl_db=tuple(spl), force_n=tuple(force),
                      force_stderr_n=tuple(se) if se else None, quantity=col)
