"""The object file: a resonator's geometry (and optional air conditions) in TOML.

Example::

    name = "jar-07"                 # optional; defaults to the file stem
    [cavity]
    volume = "355 mL"
    [neck]
    diameter = "18 mm"
    length = "40 mm"
    outer_end = "unflanged"         # or "flanged"
    inner_end = "flanged"           # or "unflanged"
    [air]                           # optional; each key optional
    temperature = "21 degC"
    relative_humidity = 0.45        # or "45 %"
    pressure = "101.325 kPa"

:func:`load_object` reads a file, :func:`parse_object` an already-parsed
mapping. Both return a :class:`ResonatorObject` in SI units, or raise
:class:`~characterize.errors.InputError` with one line naming the file, the
dotted field and what was expected.

The parser is driven by :data:`_SECTIONS`: each table lists its keys, the
kind of value each holds (which picks the parser in :data:`_PARSERS`) and
whether it is required, plus a function building the dataclass. A new
cavity shape is a new set of keys and a new builder.
"""

from __future__ import annotations

import difflib
import math
import tomllib
from collections.abc import Callable, Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from ..errors import InputError
from ..units import parse_fraction, parse_quantity, parse_temperature_c

__all__ = [
    "END_CONDITIONS",
    "Cavity",
    "Neck",
    "AirOverrides",
    "ResonatorObject",
    "load_object",
    "parse_object",
]

#: Allowed values of ``neck.outer_end`` and ``neck.inner_end``.
END_CONDITIONS = ("flanged", "unflanged")


@dataclass(frozen=True, slots=True)
class Cavity:
    """The cavity, given by its volume.

    Attributes
    ----------
    volume_m3 : float
        Air volume of the cavity, m^3.
    """

    volume_m3: float

    def to_dict(self) -> dict[str, float]:
        return {"volume_m3": float(self.volume_m3)}


@dataclass(frozen=True, slots=True)
class Neck:
    """A round neck (or port) of uniform bore.

    Attributes
    ----------
    diameter_m : float
        Inner diameter, m.
    length_m : float
        Physical length, m (end corrections not included).
    outer_end : str
        Condition at the open end, one of :data:`END_CONDITIONS`.
    inner_end : str
        Condition where the neck meets the cavity, one of :data:`END_CONDITIONS`.
    """

    diameter_m: float
    length_m: float
    outer_end: str
    inner_end: str

    @property
    def radius_m(self) -> float:
        """Inner radius, m."""
        return self.diameter_m / 2.0

    @property
    def area_m2(self) -> float:
        """Cross-section area, m^2."""
        return math.pi * self.radius_m**2

    def to_dict(self) -> dict[str, float | str]:
        return {
            "diameter_m": float(self.diameter_m),
            "length_m": float(self.length_m),
            "radius_m": float(self.radius_m),
            "area_m2": float(self.area_m2),
            "outer_end": self.outer_end,
            "inner_end": self.inner_end,
        }


@dataclass(frozen=True, slots=True)
class AirOverrides:
    """Air conditions given in the object file; None where not given.

    Attributes
    ----------
    temperature_c : float or None
        Temperature, degC.
    relative_humidity : float or None
        Relative humidity as a fraction, 0..1.
    pressure_pa : float or None
        Static pressure, Pa.
    """

    temperature_c: float | None = None
    relative_humidity: float | None = None
    pressure_pa: float | None = None

    def to_dict(self) -> dict[str, float | None]:
        return {
            "temperature_c": self.temperature_c,
            "relative_humidity": self.relative_humidity,
            "pressure_pa": self.pressure_pa,
        }

    def air_state_kwargs(self) -> dict[str, float]:
        """The given values as keyword arguments for ``air.air_state``."""
        return {k: v for k, v in self.to_dict().items() if v is not None}


@dataclass(frozen=True, slots=True)
class ResonatorObject:
    """One resonator as described by its object file.

    Attributes
    ----------
    name : str
        Name of the object (the file stem when the file gives none).
    cavity : Cavity
    neck : Neck
    air : AirOverrides
    source_path : str
        The file it was read from (or the source name given to
        :func:`parse_object`).
    """

    name: str
    cavity: Cavity
    neck: Neck
    air: AirOverrides
    source_path: str

    def to_dict(self) -> dict[str, Any]:
        """Plain-Python dict in SI units (JSON-safe)."""
        return {
            "name": self.name,
            "cavity": self.cavity.to_dict(),
            "neck": self.neck.to_dict(),
            "air": self.air.to_dict(),
            "source_path": self.source_path,
        }

    def to_file_data(self) -> dict[str, Any]:
        """The object-file mapping (unit strings) that parses back to this object."""
        data: dict[str, Any] = {
            "name": self.name,
            "cavity": {"volume": f"{self.cavity.volume_m3!r} m**3"},
            "neck": {
                "diameter": f"{self.neck.diameter_m!r} m",
                "length": f"{self.neck.length_m!r} m",
                "outer_end": self.neck.outer_end,
                "inner_end": self.neck.inner_end,
            },
        }
        air: dict[str, Any] = {}
        if self.air.temperature_c is not None:
            air["temperature"] = f"{self.air.temperature_c!r} degC"
        if self.air.relative_humidity is not None:
            air["relative_humidity"] = self.air.relative_humidity
        if self.air.pressure_pa is not None:
            air["pressure"] = f"{self.air.pressure_pa!r} Pa"
        if air:
            data["air"] = air
        return data


# --------------------------------------------------------------------------
# Table-driven parser
# --------------------------------------------------------------------------

_EXAMPLES = {
    "length": "'18 mm'",
    "volume": "'355 mL'",
    "pressure": "'101.325 kPa'",
    "temperature": "'21 degC'",
    "fraction": "0.45 or '45 %'",
    "end": " or ".join(repr(e) for e in END_CONDITIONS),
    "text": "'jar-07'",
}


def _nearest(word: str, choices: list[str]) -> str:
    """``"did you mean 'x'? "`` for difflib's closest choice, else ``""``."""
    close = difflib.get_close_matches(word, choices, n=1, cutoff=0.5)
    return f"did you mean {close[0]!r}? " if close else ""


def _quantity(dimension: str) -> Callable[[Any, str, str], float]:
    def parse(value: Any, source: str, field: str) -> float:
        _require_unit_string(value, dimension, source, field)
        return parse_quantity(value, dimension, source, field, positive=True)

    return parse


def _require_unit_string(value: Any, kind: str, source: str, field: str) -> None:
    if isinstance(value, str):
        return
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        raise InputError(
            source, field, f"{value!r} is a number without a unit; write a string with "
            f"its unit, e.g. {_EXAMPLES[kind]}"
        )
    raise InputError(
        source, field, f"expected a string with a unit, e.g. {_EXAMPLES[kind]}, "
        f"got {type(value).__name__} {value!r}"
    )


def _temperature(value: Any, source: str, field: str) -> float:
    # A bare number is refused here (units.py would read it as degC): a
    # kelvin value written without its unit would otherwise pass silently.
    _require_unit_string(value, "temperature", source, field)
    return parse_temperature_c(value, source, field)


def _end(value: Any, source: str, field: str) -> str:
    allowed = ", ".join(repr(e) for e in END_CONDITIONS)
    if not isinstance(value, str):
        raise InputError(source, field, f"expected one of {allowed}, got {value!r}")
    condition = value.strip().lower()
    if condition not in END_CONDITIONS:
        hint = _nearest(condition, list(END_CONDITIONS))
        raise InputError(
            source, field, f"unknown end condition {value!r}; {hint}allowed: {allowed}"
        )
    return condition


def _text(value: Any, source: str, field: str) -> str:
    if not isinstance(value, str) or not value.strip():
        raise InputError(source, field, f"expected a non-empty string, got {value!r}")
    return value.strip()


#: kind of value -> parser(value, source, dotted_field)
_PARSERS: dict[str, Callable[[Any, str, str], Any]] = {
    "length": _quantity("length"),
    "volume": _quantity("volume"),
    "pressure": _quantity("pressure"),
    "temperature": _temperature,
    "fraction": parse_fraction,
    "end": _end,
    "text": _text,
}


@dataclass(frozen=True, slots=True)
class _Field:
    kind: str
    required: bool = True


@dataclass(frozen=True, slots=True)
class _Section:
    fields: dict[str, _Field]
    build: Callable[[dict[str, Any]], Any]
    required: bool = True


_SECTIONS: dict[str, _Section] = {
    "cavity": _Section(
        fields={"volume": _Field("volume")},
        build=lambda v: Cavity(volume_m3=v["volume"]),
    ),
    "neck": _Section(
        fields={
            "diameter": _Field("length"),
            "length": _Field("length"),
            "outer_end": _Field("end"),
            "inner_end": _Field("end"),
        },
        build=lambda v: Neck(
            diameter_m=v["diameter"],
            length_m=v["length"],
            outer_end=v["outer_end"],
            inner_end=v["inner_end"],
        ),
    ),
    "air": _Section(
        fields={
            "temperature": _Field("temperature", required=False),
            "relative_humidity": _Field("fraction", required=False),
            "pressure": _Field("pressure", required=False),
        },
        build=lambda v: AirOverrides(
            temperature_c=v.get("temperature"),
            relative_humidity=v.get("relative_humidity"),
            pressure_pa=v.get("pressure"),
        ),
        required=False,
    ),
}

#: top-level keys that are values, not tables
_TOP_FIELDS: dict[str, _Field] = {"name": _Field("text", required=False)}


def _reject_unknown(keys: Mapping[str, Any], allowed: list[str], source: str, prefix: str) -> None:
    for key in keys:
        if key not in allowed:
            field = f"{prefix}{key}"
            hint = _nearest(key, allowed)
            raise InputError(
                source, field, f"unknown key; {hint}allowed here: {', '.join(allowed)}"
            )


def _parse_section(name: str, table: Any, source: str) -> Any:
    section = _SECTIONS[name]
    if not isinstance(table, dict):
        raise InputError(
            source, name, f"expected a table [{name}] with keys {', '.join(section.fields)}, "
            f"got {type(table).__name__} {table!r}"
        )
    _reject_unknown(table, list(section.fields), source, f"{name}.")
    values: dict[str, Any] = {}
    for key, spec in section.fields.items():
        field = f"{name}.{key}"
        if key not in table:
            if spec.required:
                raise InputError(
                    source, field, f"missing required field (expected e.g. {_EXAMPLES[spec.kind]})"
                )
            continue
        values[key] = _PARSERS[spec.kind](table[key], source, field)
    return section.build(values)


def parse_object(data: Mapping[str, Any], source: str) -> ResonatorObject:
    """Build a :class:`ResonatorObject` from an object-file mapping.

    Parameters
    ----------
    data : mapping
        The parsed TOML document (see the module docstring for its keys).
    source : str
        Name of the file (or other origin) used in error messages, in
        ``source_path``, and, without its suffix, as the default name.

    Returns
    -------
    ResonatorObject
        Geometry in SI units; missing air values are None.

    Raises
    ------
    InputError
        One line naming ``source``, the dotted field and what was expected.
    """
    source = str(source)
    if not isinstance(data, Mapping):
        raise InputError(source, None, f"expected a TOML table at top level, got {data!r}")
    allowed = list(_TOP_FIELDS) + list(_SECTIONS)
    _reject_unknown(data, allowed, source, "")
    for name, section in _SECTIONS.items():
        if section.required and name not in data:
            keys = ", ".join(section.fields)
            raise InputError(source, name, f"missing required table [{name}] (keys: {keys})")
    parsed = {
        name: _parse_section(name, data[name], source) if name in data else None
        for name in _SECTIONS
    }
    name = (
        _PARSERS["text"](data["name"], source, "name") if "name" in data else Path(source).stem
    )
    return ResonatorObject(
        name=name,
        cavity=parsed["cavity"],
        neck=parsed["neck"],
        air=parsed["air"] if parsed["air"] is not None else AirOverrides(),
        source_path=source,
    )


def load_object(path: str | Path) -> ResonatorObject:
    """Read an object file (TOML) into a :class:`ResonatorObject`.

    Parameters
    ----------
    path : str or pathlib.Path
        The object file.

    Returns
    -------
    ResonatorObject

    Raises
    ------
    InputError
        The file is missing or unreadable, is not UTF-8 TOML (the message
        gives tomllib's line and column), or a field is missing, unknown or
        malformed.
    """
    source = str(path)
    try:
        raw = Path(path).read_bytes()
    except FileNotFoundError:
        raise InputError(source, None, "file not found") from None
    except IsADirectoryError:
        raise InputError(source, None, "is a directory, expected an object file (TOML)") from None
    except OSError as exc:
        raise InputError(source, None, f"cannot read file: {exc.strerror or exc}") from None
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise InputError(
            source, None, f"not UTF-8 text (bad byte at offset {exc.start}); expected a TOML file"
        ) from None
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        message = " ".join(str(exc).split())
        raise InputError(source, None, f"not valid TOML: {message}") from None
    return parse_object(data, source)
