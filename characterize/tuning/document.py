"""Fitted result documents (schema ``characterize.result/1``) read into the
:class:`ResultSummary` the tuning calculations take."""

from __future__ import annotations

import json
import math
from collections.abc import Mapping
from dataclasses import dataclass, fields, replace
from pathlib import Path
from typing import Any

from .._version import SCHEMA
from ..errors import InputError
from ..fileio import read_text
from ..physics.air import AirState, air_state
from ..physics.geometry import AirOverrides, Cavity, Neck, ResonatorObject
from ..physics.helmholtz import (
    derive_from_f0,
    predict,
)
from ..stats import is_finite_number


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
        stderr = (derived.end_correction_stderr_m if is_finite_number(self.f0_stderr_hz)
                  else math.nan)
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
    return x if is_finite_number(x) else 0.0


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


def _build(cls: type, data: Mapping[str, Any], *, renames: Mapping[str, str] | None = None,
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
    """The geometry block of a result document back to a :class:`ResonatorObject`.

    This reads ``ResonatorObject.to_dict()`` output (SI numbers such as
    ``volume_m3``), not an object file (unit strings such as "355 mL"), so the
    object-file parser cannot take its place; a typed ``Result.from_dict`` is
    where it belongs."""
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
    air: Mapping[str, Any] = o["air"] if isinstance(o.get("air"), Mapping) else {}
    try:
        sections = tuple((float(d), float(ln)) for d, ln in cav.get("sections_m") or ())
        cavity = _build(Cavity, cav, sections=sections) if sections else _build(Cavity, cav)
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
