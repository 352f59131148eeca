"""Hitting a target: trim advice, trim and fill series, matched sets, drive-level studies.

Pure library (no printing, no plotting); the ``trim``, ``series``, ``match``
and ``levels`` commands are thin shells over it.

Contents, by task:

- reading inputs: :func:`load_result` / :func:`result_from_dict` (a fitted
  result document, schema ``characterize.result/1``) -> :class:`ResultSummary`;
  :func:`read_manifest` (CSV) -> :class:`ManifestRow`; :func:`measure_rows`
  (run the main job on recordings, read result documents) -> measured items
  and failed items; :func:`read_force_table`.
- the straight line: :func:`fit_line` (weighted least squares with
  covariance, leverage and externally studentized residuals) -> :class:`LineFit`.
- :func:`advise_trim` -> :class:`TrimAdvice`: how far to cut the neck (with
  the end correction measured on this object), how much volume to change, or
  what to drill the neck to, with propagated standard errors and warnings.
- :func:`fit_series` -> :class:`SeriesFit`: the Rayleigh series methods (1/f0^2
  linear in the neck length or the filled volume, physics sheet section 9).
- :func:`match_sets` -> :class:`MatchResult`: the K results most alike and
  nearest a target.
- :func:`level_study` -> :class:`LevelStudy`: Q and f0 against cavity SPL and
  the onset of the nonlinear regime; :func:`fit_power_law` ->
  :class:`PowerLawFit`: a steady force against SPL on log axes, compared with
  the square law of a second-order effect.

Everything is SI inside (m, m^2, m^3, Hz, Pa, N, kg); sound levels are dB re
20 uPa (rms). Uncertainties are 1-sigma standard errors propagated to first
order (the law of propagation of uncertainty of JCGM 100:2008, section 5.1.2).
"""

from __future__ import annotations

import csv
import difflib
import io
import json
import math
from collections.abc import Callable, Iterable, Mapping, Sequence
from dataclasses import asdict, dataclass, fields, replace
from pathlib import Path
from typing import Any

import numpy as np

from . import SCHEMA
from .checks import Flag
from .errors import FitError, InputError
from .fileio import read_text
from .physics.air import AirState, air_state
from .physics.geometry import AirOverrides, Cavity, Neck, ResonatorObject, load_object
from .physics.helmholtz import (
    PLAUSIBLE_END_CORRECTION_OVER_RADIUS,
    derive_from_f0,
    helmholtz_f0_hz,
    predict,
)
from .physics.nonlinear import REFERENCE_PRESSURE_PA, drive_state
from .units import parse_quantity, parse_temperature_c

__all__ = [
    "OUTLIER_STUDENTIZED",
    "SERIES_TEMPERATURE_SPREAD_K",
    "MAX_VOLUME_CHANGE_FRACTION",
    "MAX_DIAMETER_CHANGE_FRACTION",
    "Q_DROP_FRACTION",
    "LEVEL_DETECTION_SIGMAS",
    "SQUARE_LAW_EXPONENT",
    "SQUARE_LAW_SIGMAS",
    "STANDARD_GRAVITY_M_S2",
    "REFERENCE_PRESSURE_PA",
    "MIN_POINTS",
    "ResultSummary",
    "textbook_end_correction_m",
    "load_result",
    "result_from_dict",
    "LineFit",
    "fit_line",
    "ratio_with_stderr",
    "NeckRoute",
    "VolumeRoute",
    "DiameterRoute",
    "TrimAdvice",
    "advise_trim",
    "check_points",
    "SeriesPoint",
    "SeriesFit",
    "fit_series",
    "ManifestRow",
    "read_manifest",
    "Measured",
    "Failure",
    "measure_rows",
    "MatchItem",
    "MatchedSet",
    "MatchResult",
    "match_sets",
    "spl_to_pressure_pa",
    "pressure_to_spl_db",
    "neck_displacement_over_diameter",
    "LevelPoint",
    "LevelStudy",
    "level_study",
    "PowerLawFit",
    "fit_power_law",
    "ForceTable",
    "read_force_table",
]

# --------------------------------------------------------------------------
# Thresholds (documented in docs/tuning.md)
# --------------------------------------------------------------------------

#: A point whose externally studentized residual exceeds this is flagged as an
#: outlier (3 is common practice in regression diagnostics).
OUTLIER_STUDENTIZED = 3.0
#: A series whose air temperature spans more than this (K) is flagged: 1/f0^2
#: changes by about -0.34 %/K (physics sheet section 9), so the per-point
#: correction to a common speed of sound matters and the temperatures must be right.
SERIES_TEMPERATURE_SPREAD_K = 0.5
#: Volume changes beyond this fraction of the cavity are outside what the lumped
#: model promises (the cavity's shape, not only its volume, changes).
MAX_VOLUME_CHANGE_FRACTION = 0.5
#: Diameter changes beyond this fraction assume too much of the measured end
#: correction ratio (which is taken to scale with the radius).
MAX_DIAMETER_CHANGE_FRACTION = 0.5
#: The onset of the nonlinear regime: the level where Q has dropped by this
#: fraction from its small-signal value (the issue's definition).
Q_DROP_FRACTION = 0.10
#: The growth of 1/Q with level must exceed this many standard errors to count
#: as detected.
LEVEL_DETECTION_SIGMAS = 2.0
#: A force from a second-order effect grows as the square of the acoustic
#: pressure (common practice), i.e. tenfold for every 10 dB.
SQUARE_LAW_EXPONENT = 2.0
#: The fitted exponent is called consistent with the square law within this
#: many standard errors (about 95 % coverage; common practice).
SQUARE_LAW_SIGMAS = 2.0
#: Standard acceleration of gravity, m/s^2 (3rd CGPM, 1901).
STANDARD_GRAVITY_M_S2 = 9.80665
#: Fewest points a series, a level study or a power-law fit accepts.
MIN_POINTS = 3

def _finite(x: float) -> bool:
    return isinstance(x, (int, float)) and math.isfinite(x)


def _flags_dicts(flags: Iterable[Flag]) -> list[dict[str, str]]:
    return [f.to_dict() for f in flags]


# ==========================================================================
# Result documents
# ==========================================================================


@dataclass(frozen=True)
class ResultSummary:
    """What the tuning commands need from one fitted result (SI units).

    Attributes
    ----------
    source : str
        The file (or recording) it came from.
    name : str
        Object name, else a name made from the file.
    f0_hz, f0_stderr_hz : float
        Fitted resonance frequency and its standard error, Hz (NaN if absent).
    q, q_stderr : float
        Fitted quality factor and its standard error, 1.
    air : AirState
        Air at the measurement; ``speed_of_sound_m_s`` is the document's own.
    object : ResonatorObject or None
        Geometry, when the result carries one.
    end_correction_m, end_correction_stderr_m : float
        The measured end correction L_eff - L of this object, m (NaN without
        geometry).
    textbook_end_correction_m : float
        The end correction the geometry predicts (the document's
        ``prediction.end_correction_m``), m; NaN when not known yet
        (:func:`advise_trim` then asks :func:`textbook_end_correction_m`).
    drive_spl_db : float or None
        Cavity SPL from a calibrated drive block (``drive.cavity_spl_db``).
    drive_displacement_over_diameter : float or None
        Neck displacement amplitude over diameter from the drive block.
    warnings : tuple of str
        Codes of the document's warning and error flags.
    """

    source: str
    name: str
    f0_hz: float
    f0_stderr_hz: float
    q: float
    q_stderr: float
    air: AirState
    object: ResonatorObject | None
    end_correction_m: float = math.nan
    end_correction_stderr_m: float = math.nan
    textbook_end_correction_m: float = math.nan
    drive_spl_db: float | None = None
    drive_displacement_over_diameter: float | None = None
    warnings: tuple[str, ...] = ()

    def with_object(self, obj: ResonatorObject) -> ResultSummary:
        """The same measurement described by another geometry (end corrections re-derived).

        Raises
        ------
        InputError
            The geometry is not a Helmholtz resonator (a tube follows another law).
        """
        if obj.kind != "helmholtz":
            raise InputError(obj.source_path, "kind", f"tuning works on Helmholtz resonators, "
                             f"not on a {obj.kind!r}")
        derived = derive_from_f0(self.f0_hz, _nan_to_zero(self.f0_stderr_hz), obj, self.air)
        stderr = derived.end_correction_stderr_m if _finite(self.f0_stderr_hz) else math.nan
        return replace(self, object=obj, name=obj.name,
                       end_correction_m=derived.end_correction_m,
                       end_correction_stderr_m=stderr,
                       textbook_end_correction_m=math.nan)

    def with_temperature(self, temperature_c: float) -> ResultSummary:
        """The same measurement with the air recomputed at another temperature."""
        a = self.air
        try:
            air = air_state(temperature_c=temperature_c, relative_humidity=a.relative_humidity,
                            pressure_pa=a.pressure_pa, co2_fraction=a.co2_fraction)
        except ValueError as exc:
            raise InputError(self.source, "temperature", str(exc)) from None
        out = replace(self, air=air)
        return out.with_object(self.object) if self.object is not None else out

    def to_dict(self) -> dict[str, Any]:
        return {
            "source": self.source, "name": self.name, "f0_hz": self.f0_hz,
            "f0_stderr_hz": self.f0_stderr_hz, "q": self.q, "q_stderr": self.q_stderr,
            "temperature_c": self.air.temperature_c,
            "speed_of_sound_m_s": self.air.speed_of_sound_m_s,
            "end_correction_m": self.end_correction_m,
            "end_correction_stderr_m": self.end_correction_stderr_m,
            "textbook_end_correction_m": self.textbook_end_correction_m,
            "drive_spl_db": self.drive_spl_db,
            "drive_displacement_over_diameter": self.drive_displacement_over_diameter,
            "warnings": list(self.warnings),
        }


def _nan_to_zero(x: float) -> float:
    return x if _finite(x) else 0.0


def _number(doc: Mapping[str, Any], dotted: str, source: str, *, required: bool = True,
            positive: bool = False, nonneg: bool = False) -> float:
    cur: Any = doc
    for key in dotted.split("."):
        if not isinstance(cur, Mapping) or key not in cur:
            if required:
                raise InputError(source, dotted, "missing in the result document")
            return math.nan
        cur = cur[key]
    if cur is None:
        if required and (positive or not nonneg):
            raise InputError(source, dotted, "is null; expected a number")
        return math.nan
    if isinstance(cur, bool) or not isinstance(cur, (int, float)) or not math.isfinite(cur):
        raise InputError(source, dotted, f"expected a finite number, got {cur!r}")
    if positive and cur <= 0:
        raise InputError(source, dotted, f"expected a number > 0, got {cur!r}")
    if nonneg and cur < 0:
        raise InputError(source, dotted, f"expected a number >= 0, got {cur!r}")
    return float(cur)


def _air_from_doc(doc: Mapping[str, Any], source: str) -> AirState:
    a = doc.get("air")
    if not isinstance(a, Mapping):
        raise InputError(source, "air", "missing in the result document")
    c = _number(doc, "air.speed_of_sound_m_s", source, positive=True)
    t = _number(doc, "air.temperature_c", source)
    kw: dict[str, float] = {"temperature_c": t}
    for key in ("relative_humidity", "pressure_pa", "co2_fraction"):
        v = _number(doc, f"air.{key}", source, required=False)
        if math.isfinite(v):
            kw[key] = v
    try:
        state = air_state(**kw)
    except ValueError as exc:
        raise InputError(source, "air", str(exc)) from None
    rho = _number(doc, "air.density_kg_m3", source, required=False)
    return replace(state, speed_of_sound_m_s=c,
                   density_kg_m3=rho if math.isfinite(rho) and rho > 0 else state.density_kg_m3)


def textbook_end_correction_m(obj: ResonatorObject, air: AirState) -> float:
    """The end correction the geometry predicts, L_eff - L, m: that of
    :func:`~characterize.physics.helmholtz.predict` (the same lumped-equivalent
    meaning as the measured one, so the two compare directly)."""
    return predict(obj, air).end_correction_m


def _build(cls: type, data: Mapping[str, Any], renames: Mapping[str, str] | None = None,
           **extra: Any) -> Any:
    """A geometry dataclass from its ``to_dict()`` output: the keys that are fields."""
    names = {f.name for f in fields(cls)}
    kw = {k: v for k, v in data.items() if k in names}
    for src, dst in (renames or {}).items():
        if src in data and dst in names:
            kw[dst] = data[src]
    kw.update(extra)
    return cls(**kw)


def _object_from_doc(doc: Mapping[str, Any], source: str) -> ResonatorObject | None:
    """The geometry block of a result document back to a :class:`ResonatorObject`."""
    o = doc.get("object")
    if o is None:
        return None
    where = source + ": object"
    if not isinstance(o, Mapping) or not isinstance(o.get("cavity"), Mapping) \
            or not isinstance(o.get("neck"), Mapping):
        raise InputError(source, "object", "expected a table with cavity and neck")
    _number(o, "cavity.volume_m3", where, positive=True)
    _number(o, "neck.diameter_m", where, positive=True)
    _number(o, "neck.length_m", where, positive=True)
    cav, neck = o["cavity"], o["neck"]
    air = o.get("air") if isinstance(o.get("air"), Mapping) else {}
    try:
        sections = tuple((float(d), float(ln)) for d, ln in cav.get("sections_m") or ())
        cavity = _build(Cavity, cav, **({"sections": sections} if sections else {}))
        return _build(ResonatorObject, o, cavity=cavity, neck=_build(Neck, neck),
                      air=_build(AirOverrides, air),
                      name=str(o.get("name") or Path(source).stem),
                      source_path=str(o.get("source_path") or source))
    except (TypeError, ValueError) as exc:
        raise InputError(source, "object", f"cannot be read: {exc}") from None


def result_from_dict(doc: Any, source: str) -> ResultSummary:
    """Read a result document (already parsed JSON) into a :class:`ResultSummary`.

    Parameters
    ----------
    doc : mapping
        The document written by ``characterize fit --out DIR`` (DIR/result.json,
        see docs/result-schema.md).
    source : str
        Where it came from, for messages.

    Raises
    ------
    InputError
        A schema other than ``characterize.result/1``, or a missing or malformed
        field (one line naming the file and the field).
    """
    source = str(source)
    if not isinstance(doc, Mapping):
        raise InputError(source, None, "expected a result document (a JSON object)")
    schema = doc.get("schema")
    if schema != SCHEMA:
        raise InputError(source, "schema", f"expected {SCHEMA!r}, got {schema!r}")
    f0 = _number(doc, "fit.f0_hz", source, positive=True)
    f0_se = _number(doc, "fit.f0_stderr_hz", source, nonneg=True)
    q = _number(doc, "fit.q", source, positive=True)
    q_se = _number(doc, "fit.q_stderr", source, nonneg=True)
    air = _air_from_doc(doc, source)
    obj = _object_from_doc(doc, source)
    drive = doc.get("drive")
    spl = xd = None
    if isinstance(drive, Mapping):
        v = _number(drive, "cavity_spl_db", source + ": drive", required=False)
        spl = v if math.isfinite(v) else None
        v = _number(drive, "displacement_over_diameter", source + ": drive", required=False,
                    nonneg=True)
        xd = v if math.isfinite(v) else None
    warnings = tuple(str(f.get("code")) for f in doc.get("flags") or []
                     if isinstance(f, Mapping) and f.get("severity") in ("warning", "error"))
    if obj is not None:
        name = obj.name
    else:
        p = Path(source)
        name = p.parent.name if p.name == "result.json" and p.parent.name else p.stem
    summary = ResultSummary(source=source, name=name, f0_hz=f0, f0_stderr_hz=f0_se, q=q,
                            q_stderr=q_se, air=air, object=None, drive_spl_db=spl,
                            drive_displacement_over_diameter=xd, warnings=warnings)
    if obj is None:
        return summary
    if obj.kind != "helmholtz":
        raise InputError(source, "object.kind", f"tuning works on Helmholtz resonators; this "
                         f"result is for a {obj.kind!r}")
    try:
        summary = summary.with_object(obj)
    except ValueError as exc:
        raise InputError(source, "object", str(exc)) from None
    textbook = _number(doc, "prediction.end_correction_m", source, required=False)
    return replace(summary, textbook_end_correction_m=textbook) if math.isfinite(textbook) \
        else summary


def load_result(path: str | Path) -> ResultSummary:
    """Read a result document from a file (or from DIR/result.json for a directory).

    Raises
    ------
    InputError
        Missing or unreadable file, not JSON, another schema, missing fields.
    """
    p = Path(path)
    if p.is_dir():
        p = p / "result.json"
    source = str(p)
    text = read_text(p, "a result document (JSON)", bom=False)
    try:
        doc = json.loads(text)
    except json.JSONDecodeError as exc:
        raise InputError(source, None, f"not valid JSON (line {exc.lineno}, column "
                         f"{exc.colno}): expected a result document") from None
    return result_from_dict(doc, source)


# ==========================================================================
# Weighted least-squares straight line
# ==========================================================================


@dataclass(frozen=True)
class LineFit:
    r"""A straight line y = slope x + intercept fitted by (weighted) least squares.

    Attributes
    ----------
    slope, intercept : float
        Fitted coefficients (units of y/x and of y).
    slope_stderr, intercept_stderr : float
        Their standard errors (from ``covariance``).
    covariance : ((float, float), (float, float))
        Covariance of (slope, intercept), scaled by ``stderr_scale`` squared.
    chi2 : float
        Sum of squared weighted residuals.
    dof : int
        Degrees of freedom, n - 2.
    reduced_chi2 : float
        chi2 / dof (NaN for dof 0).
    stderr_scale : float
        sqrt(max(1, reduced chi2)) with stated errors (errors are never
        scaled down, as in the main fit); sqrt(reduced chi2) without them.
    weighting : str
        ``"stated-errors"`` (weights 1/sigma^2) or ``"residuals"`` (equal
        weights, errors from the scatter).
    residuals : tuple of float
        y - fitted y, units of y.
    normalized_residuals : tuple of float
        Residuals over their stated sigma (over 1 without weights).
    leverage : tuple of float
        Diagonal of the hat matrix.
    studentized : tuple of float
        Externally studentized residuals (NaN with fewer than 4 points).
    """

    slope: float
    intercept: float
    slope_stderr: float
    intercept_stderr: float
    covariance: tuple[tuple[float, float], tuple[float, float]]
    chi2: float
    dof: int
    reduced_chi2: float
    stderr_scale: float
    weighting: str
    residuals: tuple[float, ...]
    normalized_residuals: tuple[float, ...]
    leverage: tuple[float, ...]
    studentized: tuple[float, ...]

    @property
    def cov_slope_intercept(self) -> float:
        return self.covariance[0][1]

    def __call__(self, x: Any) -> Any:
        return self.slope * np.asarray(x, dtype=float) + self.intercept

    def to_dict(self) -> dict[str, Any]:
        d = asdict(self)
        d["covariance"] = [list(map(float, row)) for row in self.covariance]
        for k in ("residuals", "normalized_residuals", "leverage", "studentized"):
            d[k] = [float(v) for v in d[k]]
        return d


def fit_line(x: Sequence[float], y: Sequence[float],
             sigma: Sequence[float] | None = None) -> LineFit:
    r"""Fit y = b x + a by weighted least squares, with diagnostics.

    With weights :math:`w_i = 1/\sigma_i^2` and design matrix
    :math:`X = [x\ 1]`, the estimate and its covariance are

    .. math::

        \hat\beta = (X^T W X)^{-1} X^T W y, \qquad
        \operatorname{cov}\hat\beta = s^2 (X^T W X)^{-1}

    with :math:`s^2 = \max(1, \chi^2/(n-2))` when the :math:`\sigma_i` are
    stated and :math:`s^2 = \chi^2/(n-2)` without them (equal weights: the
    ordinary least-squares line, whose errors equal ``scipy.stats.linregress``).
    The leverages are :math:`h_i = w_i x_i^T (X^T W X)^{-1} x_i` and the
    externally studentized residuals

    .. math::

        t_i = \frac{e_i\sqrt{w_i}}{s_{(i)}\sqrt{1 - h_i}},\qquad
        s_{(i)}^2 = \frac{\chi^2 - w_i e_i^2/(1 - h_i)}{n - 3}

    where, with stated errors, :math:`s_{(i)}^2` is floored at 1 (a point is
    judged against its own stated error unless the other points scatter more).

    Parameters
    ----------
    x, y : sequence of float
        At least three points, x not all equal (any units).
    sigma : sequence of float, optional
        Standard errors of y (units of y), all finite and > 0. Without them,
        equal weights and errors from the residuals.

    Returns
    -------
    LineFit

    Raises
    ------
    ValueError
        Fewer than three points, mismatched lengths, non-finite values, x all
        equal, or sigma not finite and > 0.

    References
    ----------
    P. R. Bevington, D. K. Robinson, *Data Reduction and Error Analysis for
    the Physical Sciences*, 3rd ed. (2003), ch. 6 (weighted straight-line fit;
    chapter from memory). D. A. Belsley, E. Kuh, R. E. Welsch, *Regression
    Diagnostics* (1980), ch. 2 (leverage and externally studentized residuals;
    chapter from memory).
    """
    xa = np.asarray(x, dtype=float)
    ya = np.asarray(y, dtype=float)
    n = xa.size
    if xa.ndim != 1 or ya.shape != xa.shape:
        raise ValueError(f"x and y must be 1-D of equal length, got {xa.shape} and {ya.shape}")
    if n < 3:
        raise ValueError(f"a line fit needs at least 3 points, got {n}")
    if not (np.all(np.isfinite(xa)) and np.all(np.isfinite(ya))):
        raise ValueError("x and y must be finite")
    if np.ptp(xa) == 0:
        raise ValueError("x values are all equal")
    if sigma is None:
        w = np.ones(n)
        weighting = "residuals"
    else:
        sa = np.asarray(sigma, dtype=float)
        if sa.shape != xa.shape or not np.all(np.isfinite(sa)) or np.any(sa <= 0):
            raise ValueError("sigma must have the length of x and be finite and > 0")
        w = 1.0 / sa**2
        weighting = "stated-errors"
    # Centre and scale x for conditioning; transform back exactly.
    x0 = float(np.sum(w * xa) / np.sum(w))
    xs = float(np.sqrt(np.sum(w * (xa - x0) ** 2) / np.sum(w)))
    u = (xa - x0) / xs
    sw = np.sqrt(w)
    design = np.column_stack([u, np.ones(n)])
    coef, *_ = np.linalg.lstsq(design * sw[:, None], ya * sw, rcond=None)
    cov_u = np.linalg.inv((design * w[:, None]).T @ design)
    # back to (slope, intercept) in x: slope = c0/xs, intercept = c1 - c0 x0/xs
    jac = np.array([[1.0 / xs, 0.0], [-x0 / xs, 1.0]])
    slope, intercept = jac @ coef
    cov_unscaled = jac @ cov_u @ jac.T
    resid = ya - (slope * xa + intercept)
    chi2 = float(np.sum(w * resid**2))
    dof = n - 2
    red = chi2 / dof
    scale2 = max(1.0, red) if weighting == "stated-errors" else red
    cov = cov_unscaled * scale2
    lev = w * np.einsum("ij,jk,ik->i", design, cov_u, design)
    norm = resid * sw
    if n >= 4:
        with np.errstate(divide="ignore", invalid="ignore"):
            s2_del = (chi2 - w * resid**2 / (1.0 - lev)) / (n - 3)
            if weighting == "stated-errors":
                s2_del = np.maximum(s2_del, 1.0)
            stud = norm / np.sqrt(s2_del * (1.0 - lev))
        stud = np.where(np.isfinite(stud), stud, np.nan)
    else:
        stud = np.full(n, np.nan)
    return LineFit(
        slope=float(slope), intercept=float(intercept),
        slope_stderr=float(math.sqrt(cov[0, 0])), intercept_stderr=float(math.sqrt(cov[1, 1])),
        covariance=((float(cov[0, 0]), float(cov[0, 1])), (float(cov[1, 0]), float(cov[1, 1]))),
        chi2=chi2, dof=dof, reduced_chi2=float(red), stderr_scale=float(math.sqrt(scale2)),
        weighting=weighting, residuals=tuple(map(float, resid)),
        normalized_residuals=tuple(map(float, norm)), leverage=tuple(map(float, lev)),
        studentized=tuple(map(float, stud)),
    )


def ratio_with_stderr(num: float, den: float, var_num: float, var_den: float,
                      cov: float) -> tuple[float, float]:
    r"""A ratio r = num/den and its first-order standard error.

    .. math::

        \sigma_r^2 = \frac{\sigma_n^2}{d^2} + \frac{n^2\sigma_d^2}{d^4}
            - \frac{2 n \operatorname{cov}(n, d)}{d^3}

    (the physics sheet's section 9 error formula for the end correction
    :math:`\delta = a/b`).

    References
    ----------
    JCGM 100:2008, *Evaluation of measurement data -- Guide to the expression
    of uncertainty in measurement*, section 5.2.2 (correlated input
    quantities; section from memory).
    """
    r = num / den
    var = var_num / den**2 + num**2 * var_den / den**4 - 2.0 * num * cov / den**3
    return r, math.sqrt(max(var, 0.0))


# ==========================================================================
# Trim advice
# ==========================================================================


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
    if not _finite(sigma):
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
    if not _finite(target_hz) or target_hz <= 0:
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


# ==========================================================================
# Trim and fill series
# ==========================================================================

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
        return tuple(p.id for p, t in zip(self.points, self.line.studentized)
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
                                          self.line.residuals, self.line.studentized)
        ]
        for k in ("f0_corrected_hz", "inverse_f0_squared_s2", "inverse_f0_squared_stderr_s2"):
            del d[k]
        d["line"] = self.line.to_dict()
        d["flags"] = _flags_dicts(self.flags)
        d["failures"] = [dict(x) for x in self.failures]
        return {"schema": "characterize.series/1", **d}


def check_points(values: Sequence[float], ids: Sequence[str], source: str, what: str) -> None:
    """At least :data:`MIN_POINTS` points, with distinct values of the varied quantity.

    Raises
    ------
    InputError
        Too few points, or two points with the same value (both named).
    """
    if len(values) < MIN_POINTS:
        raise InputError(source, None, f"a {what} needs at least {MIN_POINTS} points, got "
                         f"{len(values)}")
    seen: dict[float, str] = {}
    for v, i in zip(values, ids):
        key = round(float(v), 12)
        if key in seen:
            raise InputError(source, what, f"duplicate value {v:.6g} (items {seen[key]!r} and "
                             f"{i!r}); each point must change the varied quantity")
        seen[key] = i


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
    for p, t in zip(pts, line.studentized):
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


# ==========================================================================
# Manifests
# ==========================================================================

#: Columns a manifest may have besides the value columns.
BASE_COLUMNS = ("id", "recording", "result", "object", "sweep", "inside", "outside",
                "temperature", "note")


@dataclass(frozen=True)
class ManifestRow:
    """One row of a manifest (paths resolved against the manifest's folder).

    Attributes
    ----------
    line : int
        Line number in the file (for messages).
    id : str
    recording, result, object, sweep : pathlib.Path or None
    inside, outside : int
        1-based channels.
    temperature_c : float or None
        Air temperature override, degC.
    values : dict of str to float
        Value columns (SI), e.g. ``neck_length`` in m, ``spl_db`` in dB.
    note : str
    """

    line: int
    id: str
    recording: Path | None
    result: Path | None
    object: Path | None
    sweep: Path | None
    inside: int
    outside: int
    temperature_c: float | None
    values: dict[str, float]
    note: str = ""


def _read_csv(path: Path) -> tuple[list[str], list[tuple[int, dict[str, str]]]]:
    source = str(path)
    text = read_text(path, "a CSV file")
    lines = [(i + 1, ln) for i, ln in enumerate(text.splitlines())
             if ln.strip() and not ln.lstrip().startswith("#")]
    if not lines:
        raise InputError(source, None, "empty: expected a header row and at least one item")
    reader = csv.reader(io.StringIO("\n".join(ln for _, ln in lines)))
    try:
        table = list(reader)
    except csv.Error as exc:
        raise InputError(source, None, f"not valid CSV: {exc}") from None
    header = [h.strip() for h in table[0]]
    if len(set(header)) != len(header):
        dup = next(h for h in header if header.count(h) > 1)
        raise InputError(source, f"column {dup!r}", "appears twice in the header")
    rows = []
    for (lineno, _), cells in zip(lines[1:], table[1:]):
        if len(cells) > len(header):
            raise InputError(source, f"line {lineno}", f"{len(cells)} cells for "
                             f"{len(header)} columns")
        cells = cells + [""] * (len(header) - len(cells))
        rows.append((lineno, {h: c.strip() for h, c in zip(header, cells)}))
    return header, rows


def _check_columns(header: Sequence[str], allowed: Sequence[str], required: Sequence[str],
                   source: str) -> None:
    for h in header:
        if h not in allowed:
            close = difflib.get_close_matches(h, list(allowed), n=1, cutoff=0.5)
            hint = f"did you mean {close[0]!r}? " if close else ""
            raise InputError(source, f"column {h!r}", f"unknown column; {hint}allowed: "
                             f"{', '.join(allowed)}")
    missing = [r for r in required if r not in header]
    if missing:
        raise InputError(source, None, f"missing column(s) {', '.join(missing)} (header has "
                         f"{', '.join(header) or 'nothing'})")


def _channel(text: str, default: int, source: str, field: str) -> int:
    if not text:
        return default
    try:
        n = int(text)
    except ValueError:
        raise InputError(source, field, f"expected a channel number from 1, got {text!r}") \
            from None
    if n < 1:
        raise InputError(source, field, f"channels are numbered from 1, got {n}")
    return n


def _value(text: str, kind: str, source: str, field: str) -> float:
    if not text:
        raise InputError(source, field, "empty; every row needs a value")
    if kind == "db":
        try:
            v = float(text)
        except ValueError:
            raise InputError(source, field, f"expected a level in dB (a number), got {text!r}") \
                from None
        if not math.isfinite(v):
            raise InputError(source, field, f"expected a finite level, got {text!r}")
        return v
    if kind == "volume":
        v = parse_quantity(text, "volume", source, field, positive=False)
        if v < 0:
            raise InputError(source, field, f"{text!r} must not be negative")
        return v
    return parse_quantity(text, kind, source, field, positive=True)


def read_manifest(path: str | Path, value_columns: Mapping[str, str],
                  required_values: Sequence[str] = ()) -> list[ManifestRow]:
    """Read a manifest CSV of recordings or result documents.

    Columns: ``id`` (optional; default the file's stem), exactly one of
    ``recording`` (audio file) or ``result`` (result document) per row,
    optional ``object``, ``sweep``, ``inside``, ``outside`` (channels from
    1; default 1 and 2), ``temperature`` (e.g. "21.5 degC", overrides the
    air), ``note``, and the value columns. Paths are relative to the
    manifest's folder. Lines starting with ``#`` are comments.

    Parameters
    ----------
    path : path
        The CSV file.
    value_columns : mapping of str to str
        Column -> kind (``"length"``, ``"volume"`` with unit strings such as
        "28 mm" or "50 mL", or ``"db"`` for a plain number in dB).
    required_values : sequence of str
        Value columns that must be present.

    Raises
    ------
    InputError
        Unknown or missing columns, bad cells, missing files, duplicate ids,
        rows with neither or both of recording and result, no rows.
    """
    p = Path(path)
    source = str(p)
    header, rows = _read_csv(p)
    allowed = list(BASE_COLUMNS) + list(value_columns)
    _check_columns(header, allowed, required_values, source)
    if "recording" not in header and "result" not in header:
        raise InputError(source, None, "missing column recording or result (each row names a "
                         "recording or a result document)")
    if not rows:
        raise InputError(source, None, "no items: expected one row per recording or result")
    base = p.parent
    out: list[ManifestRow] = []
    ids: dict[str, int] = {}

    def path_of(cell: str, field: str, lineno: int) -> Path | None:
        if not cell:
            return None
        q = Path(cell)
        q = q if q.is_absolute() else base / q
        if not q.exists():
            raise InputError(source, f"line {lineno}, {field}", f"{cell!r} does not exist "
                             f"(paths are relative to {base})")
        return q

    for lineno, r in rows:
        rec = path_of(r.get("recording", ""), "recording", lineno)
        res = path_of(r.get("result", ""), "result", lineno)
        if (rec is None) == (res is None):
            raise InputError(source, f"line {lineno}", "give exactly one of recording or result")
        rid = r.get("id", "") or (rec or res).stem  # type: ignore[union-attr]
        if rid in ids:
            raise InputError(source, f"line {lineno}, id", f"duplicate id {rid!r} (also on line "
                             f"{ids[rid]})")
        ids[rid] = lineno
        temp = r.get("temperature", "")
        values = {col: _value(r[col], kind, source, f"line {lineno}, {col}")
                  for col, kind in value_columns.items() if col in r and
                  (r[col] or col in required_values)}
        out.append(ManifestRow(
            line=lineno, id=rid, recording=rec, result=res,
            object=path_of(r.get("object", ""), "object", lineno),
            sweep=path_of(r.get("sweep", ""), "sweep", lineno),
            inside=_channel(r.get("inside", ""), 1, source, f"line {lineno}, inside"),
            outside=_channel(r.get("outside", ""), 2, source, f"line {lineno}, outside"),
            temperature_c=parse_temperature_c(temp, source, f"line {lineno}, temperature")
            if temp else None,
            values=values, note=r.get("note", "")))
    return out


@dataclass(frozen=True)
class Measured:
    """A manifest row and what was measured for it."""

    row: ManifestRow
    result: ResultSummary


@dataclass(frozen=True)
class Failure:
    """A manifest row that could not be measured, with the reason (one line)."""

    id: str
    reason: str

    def to_dict(self) -> dict[str, str]:
        return {"id": self.id, "reason": self.reason}


def measure_rows(rows: Sequence[ManifestRow]) -> tuple[list[Measured], list[Failure]]:
    """Read each row's result document, or run the main job on its recording.

    Result documents are read first, so a wrong schema or a malformed
    document stops everything with an :class:`InputError` before any
    recording is analysed. A recording that cannot be read or fitted becomes
    a :class:`Failure` and the others go on (a batch survives a bad item).
    Object files named in the manifest are read once each.
    """
    objects: dict[Path, ResonatorObject] = {}

    def obj_for(row: ManifestRow) -> ResonatorObject | None:
        if row.object is None:
            return None
        if row.object not in objects:
            objects[row.object] = load_object(row.object)
        return objects[row.object]

    docs: dict[int, ResultSummary] = {}
    for i, row in enumerate(rows):
        if row.result is not None:
            s = load_result(row.result)
            o = obj_for(row)
            if o is not None:
                s = s.with_object(o)
            if row.temperature_c is not None:
                s = s.with_temperature(row.temperature_c)
            docs[i] = s
        else:
            obj_for(row)
    from .pipeline import analyze

    measured: list[Measured] = []
    failures: list[Failure] = []
    for i, row in enumerate(rows):
        if i in docs:
            measured.append(Measured(row, docs[i]))
            continue
        try:
            res = analyze(row.recording, object_path=row.object,  # type: ignore[arg-type]
                          sweep_path=row.sweep, inside=row.inside, outside=row.outside,
                          temperature_c=row.temperature_c)
            doc = res.to_dict()
            measured.append(Measured(row, result_from_dict(doc, str(row.recording))))
        except (InputError, FitError) as exc:
            failures.append(Failure(row.id, str(exc)))
    return measured, failures


# ==========================================================================
# Matched sets
# ==========================================================================


@dataclass(frozen=True)
class MatchItem:
    """One candidate for a matched set (f0 brought to the common speed of sound)."""

    id: str
    source: str
    f0_hz: float
    f0_stderr_hz: float
    q: float
    q_stderr: float
    f0_measured_hz: float
    temperature_c: float

    def to_dict(self) -> dict[str, Any]:
        return asdict(self)


@dataclass(frozen=True)
class MatchedSet:
    """K items and how alike they are.

    Attributes
    ----------
    ids : tuple of str
        Members, in order of f0.
    cost : float
        The ranking criterion (smaller is better; see :func:`match_cost`).
    max_deviation_hz : float
        Largest |f0 - target| among the members, Hz.
    f0_mean_hz, f0_std_hz, f0_range_hz : float
        Mean, sample standard deviation and max - min of the members' f0, Hz.
    offset_hz : float
        Mean f0 - target, Hz.
    q_mean, q_std, q_range : float
        The same for Q.
    """

    ids: tuple[str, ...]
    cost: float
    max_deviation_hz: float
    f0_mean_hz: float
    f0_std_hz: float
    f0_range_hz: float
    offset_hz: float
    q_mean: float
    q_std: float
    q_range: float

    def to_dict(self) -> dict[str, Any]:
        d = asdict(self)
        d["ids"] = list(self.ids)
        return d


@dataclass(frozen=True)
class MatchResult:
    """The best set, the next-best alternatives and the candidates."""

    target_f0_hz: float
    count: int
    by: str
    reference_speed_of_sound_m_s: float
    reference_temperature_c: float
    q_scale: float
    best: MatchedSet
    alternatives: tuple[MatchedSet, ...]
    items: tuple[MatchItem, ...]
    flags: tuple[Flag, ...] = ()

    def to_dict(self) -> dict[str, Any]:
        return {
            "schema": "characterize.match/1", "target_f0_hz": self.target_f0_hz,
            "count": self.count, "by": self.by,
            "reference_speed_of_sound_m_s": self.reference_speed_of_sound_m_s,
            "reference_temperature_c": self.reference_temperature_c,
            "q_scale": self.q_scale, "best": self.best.to_dict(),
            "alternatives": [a.to_dict() for a in self.alternatives],
            "items": [i.to_dict() for i in self.items], "flags": _flags_dicts(self.flags),
        }


def _set_of(idx: Sequence[int], items: Sequence[MatchItem], target: float,
            cost: float) -> MatchedSet:
    members = sorted(idx, key=lambda i: items[i].f0_hz)
    f = np.array([items[i].f0_hz for i in members])
    q = np.array([items[i].q for i in members])
    return MatchedSet(
        ids=tuple(items[i].id for i in members), cost=float(cost),
        max_deviation_hz=float(np.max(np.abs(f - target))), f0_mean_hz=float(f.mean()),
        f0_std_hz=float(f.std(ddof=1)) if f.size > 1 else 0.0, f0_range_hz=float(np.ptp(f)),
        offset_hz=float(f.mean() - target), q_mean=float(q.mean()),
        q_std=float(q.std(ddof=1)) if q.size > 1 else 0.0, q_range=float(np.ptp(q)))


def match_cost(f0_hz: Sequence[float], q: Sequence[float], target_hz: float, by: str,
               q_scale: float) -> float:
    r"""The ranking criterion of a candidate set (smaller is better).

    - ``by="f0"``: the spread of the members' f0 plus the offset of the set's
      centre (midrange) from the target, relative to the target:

      .. math::

          r = \frac{(f_\max - f_\min) + |(f_\max + f_\min)/2 - f_t|}{f_t}

      (how far apart the members are and how far off the set is count alike).
    - ``by="f0,q"``: :math:`\sqrt{(2\tilde Q r)^2 + (\Delta Q/\tilde Q)^2}`,
      where :math:`\tilde Q` is the median Q of all candidates and
      :math:`\Delta Q` the set's Q range. :math:`2\tilde Q r` expresses the f0
      figure in half-power half-bandwidths :math:`f_0/(2Q)`, :math:`\Delta Q/Q`
      is the relative Q spread; both are first-order relative changes of the
      response 1/(1 - (f/f0)^2 + j f/(Q f0)) at resonance, so they are added
      in quadrature (own derivation).
    """
    f = np.asarray(f0_hz, dtype=float)
    lo, hi = float(np.min(f)), float(np.max(f))
    r = ((hi - lo) + abs(0.5 * (lo + hi) - target_hz)) / target_hz
    if by == "f0":
        return r
    qa = np.asarray(q, dtype=float)
    return math.hypot(2.0 * q_scale * r, float(np.ptp(qa)) / q_scale)


def _label(r: ResultSummary) -> str:
    """A short id for a result: its folder for DIR/result.json, else its file stem."""
    p = Path(r.source)
    return p.parent.name if p.name == "result.json" and p.parent.name else p.stem


def match_sets(results: Sequence[ResultSummary], count: int, target_hz: float, by: str = "f0",
               *, alternatives: int = 3) -> MatchResult:
    """Pick the ``count`` results most alike and nearest a target f0.

    Every f0 is first brought to the mean speed of sound of all results
    (f0 c_ref / c_i), so items measured at different temperatures compare
    as they would side by side. Sets are ranked by :func:`match_cost`. The
    best set is found exactly, because shrinking the f0 interval a set spans
    never raises the f0 part of the cost (the spread falls by as much as the
    centre can move away from the target, times two):

    - ``by="f0"``: the best set is a run of ``count`` consecutive items in f0
      order; all runs are ranked and the next best are the alternatives.
    - ``by="f0,q"``: for every f0 interval (pruned once its f0 part alone
      exceeds the costs already found), the ``count`` items in it that are
      consecutive in Q with the smallest Q range.

    Parameters
    ----------
    results : sequence of ResultSummary
    count : int
        Set size K, 2 <= K <= len(results).
    target_hz : float
        Target f0, Hz, > 0.
    by : str
        ``"f0"`` or ``"f0,q"``.
    alternatives : int
        How many next-best sets to report.

    Raises
    ------
    InputError
        K outside 2..len(results), target not > 0, unknown ``by``.
    """
    import bisect

    if by not in ("f0", "f0,q"):
        raise InputError("--by", None, f"must be one of 'f0', 'f0,q', got {by!r}")
    if not _finite(target_hz) or target_hz <= 0:
        raise InputError("--target", None, f"must be a frequency > 0 Hz, got {target_hz!r}")
    n = len(results)
    if count < 2:
        raise InputError("--count", None, f"a matched set needs at least 2 items, got {count}")
    if count > n:
        raise InputError("--count", None, f"asks for {count} items but only {n} result(s) "
                         "were given")
    c = np.array([r.air.speed_of_sound_m_s for r in results])
    c_ref = float(c.mean())
    ids: list[str] = []
    for r in results:
        rid = _label(r)
        ids.append(r.source if rid in ids else rid)
    items = tuple(
        MatchItem(id=i, source=r.source, f0_hz=r.f0_hz * c_ref / r.air.speed_of_sound_m_s,
                  f0_stderr_hz=r.f0_stderr_hz * c_ref / r.air.speed_of_sound_m_s, q=r.q,
                  q_stderr=r.q_stderr, f0_measured_hz=r.f0_hz,
                  temperature_c=r.air.temperature_c)
        for i, r in zip(ids, results))
    f = np.array([it.f0_hz for it in items])
    q = np.array([it.q for it in items])
    q_scale = float(np.median(q))
    order = np.argsort(f, kind="stable")
    fs = f[order]
    keep = alternatives + 1
    cands: dict[frozenset[int], float] = {}
    top: list[float] = []  # the `keep` smallest costs found so far

    def add(idx: np.ndarray) -> None:
        key = frozenset(int(i) for i in idx)
        if key in cands:
            return
        cost = match_cost(f[idx], q[idx], target_hz, by, q_scale)
        cands[key] = cost
        bisect.insort(top, cost)
        del top[keep:]

    def threshold() -> float:
        return top[-1] if len(top) >= keep else math.inf

    for i in range(n - count + 1):
        for j in range(i + count - 1, n):
            cf = ((fs[j] - fs[i]) + abs(0.5 * (fs[i] + fs[j]) - target_hz)) / target_hz
            bound = cf if by == "f0" else 2.0 * q_scale * cf
            if bound > threshold():
                break
            if by == "f0":
                add(order[i:i + count])
                break
            inner = order[i:j + 1]
            by_q = inner[np.argsort(q[inner], kind="stable")]
            qs = q[by_q]
            ranges = qs[count - 1:] - qs[:qs.size - count + 1]
            for s0 in np.argsort(ranges, kind="stable")[:keep]:
                add(by_q[s0:s0 + count])
    ranked = sorted(cands.items(), key=lambda kv: (kv[1], sorted(kv[0])))
    sets = [_set_of(sorted(k), items, target_hz, v) for k, v in ranked[:keep]]
    best = sets[0]
    flags: list[Flag] = []
    member_se = [it.f0_stderr_hz for it in items if it.id in best.ids]
    se = float(np.nanmedian(member_se)) if np.any(np.isfinite(member_se)) else math.nan
    if math.isfinite(se) and best.f0_range_hz < 2.0 * se:
        flags.append(Flag("match-below-precision", "info",
                          f"the chosen set spans {best.f0_range_hz:.3g} Hz, less than twice "
                          f"the members' f0 standard error ({se:.3g} Hz): they are "
                          "indistinguishable at this precision"))
    t_spread = float(np.ptp([it.temperature_c for it in items]))
    if t_spread > SERIES_TEMPERATURE_SPREAD_K:
        flags.append(Flag("temperature-spread", "info",
                          f"the results were measured {t_spread:.1f} K apart; f0 values were "
                          f"brought to c = {c_ref:.2f} m/s before matching"))
    return MatchResult(target_f0_hz=float(target_hz), count=count, by=by,
                       reference_speed_of_sound_m_s=c_ref,
                       reference_temperature_c=float(np.mean([it.temperature_c
                                                              for it in items])),
                       q_scale=q_scale, best=best, alternatives=tuple(sets[1:]), items=items,
                       flags=tuple(flags))


# ==========================================================================
# Drive-level studies
# ==========================================================================


def spl_to_pressure_pa(spl_db: Any) -> Any:
    r"""RMS pressure from a sound pressure level.

    .. math::

        p_\text{rms} = p_\text{ref}\,10^{L/20},\quad p_\text{ref} = 20\ \mu\text{Pa}

    Parameters
    ----------
    spl_db : float or array
        SPL, dB re 20 uPa.

    Returns
    -------
    float or array
        RMS pressure, Pa.

    References
    ----------
    IEC 61672-1:2013, *Electroacoustics -- Sound level meters*, definition of
    sound pressure level (clause from memory); physics sheet section 10
    (94 dB = 1.00237 Pa).
    """
    return REFERENCE_PRESSURE_PA * 10.0 ** (np.asarray(spl_db, dtype=float) / 20.0)


def pressure_to_spl_db(p_rms_pa: Any) -> Any:
    """Sound pressure level (dB re 20 uPa) from an RMS pressure (Pa).

    The inverse of :func:`spl_to_pressure_pa`.
    """
    return 20.0 * np.log10(np.asarray(p_rms_pa, dtype=float) / REFERENCE_PRESSURE_PA)


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
                       for p, t in zip(self.points, self.line.studentized)]
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
    for p, t in zip(pts, line.studentized):
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
    for s, t in zip(spl, line.studentized):
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
