"""Unit strings at the edges: the only module that imports pint.

Every length, volume, temperature and pressure in a user file is a string
with its unit ("18 mm", "355 mL", "21 degC", "101.325 kPa"). These helpers
turn them into SI floats and raise :class:`InputError` naming the file and
field when the string is not what was expected.
"""

from __future__ import annotations

import math
import re
from functools import lru_cache
from typing import Any

from .errors import InputError

# dimension name -> (SI unit, pint dimensionality string)
_DIMENSIONS = {
    "length": ("m", "[length]"),
    "volume": ("m**3", "[length] ** 3"),
    "area": ("m**2", "[length] ** 2"),
    "pressure": ("Pa", "[mass] / [length] / [time] ** 2"),
    "mass": ("kg", "[mass]"),
    "frequency": ("Hz", "1 / [time]"),
    "time": ("s", "[time]"),
}

_NUMBER_UNIT = re.compile(r"^\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*(.*?)\s*$")


@lru_cache(maxsize=1)
def _registry() -> Any:
    import pint

    return pint.UnitRegistry(autoconvert_offset_to_baseunit=True)


def _to_float(number: int | float, source: str, field: str) -> float:
    """A TOML number as a float; integers beyond the float range (tomllib reads
    integers of any size) are refused in one line."""
    try:
        return float(number)
    except OverflowError:
        raise InputError(source, field, f"the number {str(number)[:12]}... is too large") from None


def _split(text: str, source: str, field: str) -> tuple[float, str]:
    if not isinstance(text, str):
        raise InputError(source, field, f"expected a string with a unit, got {text!r}")
    m = _NUMBER_UNIT.match(text)
    if not m:
        raise InputError(source, field, f"expected a number and a unit, got {text!r}")
    value = float(m.group(1))
    if not math.isfinite(value):
        raise InputError(source, field, f"expected a finite number, got {text!r}")
    return value, m.group(2)


def parse_quantity(
    text: Any, dimension: str, source: str, field: str, *, positive: bool = True
) -> float:
    """Parse ``"18 mm"``-style text into an SI float of the given dimension.

    Parameters
    ----------
    text : str
        Number followed by a unit.
    dimension : str
        One of ``length, volume, area, pressure, mass, frequency, time``.
    source, field : str
        File (or option) and field named in the error message.
    positive : bool
        Require a value > 0.
    """
    if dimension not in _DIMENSIONS:
        raise ValueError(f"dimension must be one of {sorted(_DIMENSIONS)}, got {dimension!r}")
    si_unit, _ = _DIMENSIONS[dimension]
    value, unit = _split(text, source, field)
    if not unit:
        raise InputError(source, field, f"{text!r} has no unit; expected a {dimension} such as "
                         f"{_EXAMPLES[dimension]!r}")
    common = _COMMON.get(dimension, {}).get(unit)
    if common is not None:  # the usual units without loading pint (start-up time)
        si = value * common
    else:
        meant = case_typo(unit, dimension)
        ureg = _registry()
        try:
            q = ureg.Quantity(value, unit)
            si = q.to(si_unit).magnitude
        except Exception:  # pint raises several types: undefined unit, dimensionality...
            if meant is not None:
                raise InputError(source, field, f"{text!r}: unknown unit {unit!r}; did you mean "
                                 f"{meant}?") from None
            raise InputError(source, field, f"{text!r} is not a {dimension} (expected e.g. "
                             f"{_EXAMPLES[dimension]!r})") from None
        if meant is not None:
            ratio = abs(float(si)) / (abs(value) * _COMMON[dimension][meant]) if value else 1.0
            if not (1e-3 < ratio < 1e3):
                raise InputError(source, field, f"{text!r} reads as {ratio:.0e} times "
                                 f"'{value:g} {meant}'; did you mean {meant}? (unit letters "
                                 "are case-sensitive: M is mega, m milli)")
    si = float(si)
    if not math.isfinite(si):
        raise InputError(source, field, f"{text!r} is not finite")
    if positive and si <= 0:
        raise InputError(source, field, f"{text!r} must be greater than zero")
    return si


def case_typo(unit: str, dimension: str) -> str | None:
    """The common unit of this dimension that ``unit`` spells with other capitals
    ("ML", "Ml" -> "mL"; "Mm" -> "mm"; "KHz" -> "kHz"), or None. A unit that only
    differs in case from a common one is usually a typo that changes the value a
    thousand-million-fold (M is mega, m milli; SI Brochure, 9th ed., 2019, 3)."""
    if unit in _COMMON.get(dimension, {}):
        return None
    low = unit.lower()
    for u in _COMMON.get(dimension, {}):
        if u.lower() == low:
            return u
    return None


def _check_celsius(value_c: float, text: Any, source: str, field: str) -> float:
    if not math.isfinite(value_c) or value_c <= -273.15:
        raise InputError(source, field, f"{text!r} is below absolute zero or not finite")
    return value_c


#: A bare temperature above this (°C) that is an air temperature in kelvin
#: (213 to 353 K) is refused as probably typed in kelvin.
BARE_CELSIUS_LIMIT = 100.0


def parse_temperature_c(text: Any, source: str, field: str) -> float:
    """Parse a temperature string ("21 degC", "294 K", "70 degF") into degrees Celsius.

    Temperatures are offset units, so the number and unit are split and the
    quantity built with pint's constructor (not by multiplication).
    Plain numbers (int/float) are taken as degrees Celsius.
    """
    if isinstance(text, bool):
        raise InputError(source, field, f"expected a temperature such as '21 degC', got {text!r}")
    if isinstance(text, (int, float)):
        value_c = _to_float(text, source, field)
        if BARE_CELSIUS_LIMIT < value_c and -60.0 <= value_c - 273.15 <= 80.0:
            raise InputError(source, field, f"{value_c:g} °C is not an air temperature; did you "
                             f"mean '{value_c:g} K'? (a bare number is °C)")
    else:
        value, unit = _split(text, source, field)
        if not unit:
            raise InputError(source, field, f"{text!r} has no unit; expected e.g. '21 degC'")
        unit = {"C": "degC", "°C": "degC", "F": "degF", "°F": "degF"}.get(unit, unit)
        if unit in ("degC", "celsius"):
            return _check_celsius(value, text, source, field)
        if unit == "K":
            return _check_celsius(value - 273.15, text, source, field)
        ureg = _registry()
        try:
            value_c = float(ureg.Quantity(value, unit).to("degC").magnitude)
        except Exception:
            raise InputError(source, field, f"{text!r} is not a temperature (expected e.g. "
                             "'21 degC')") from None
    if not math.isfinite(value_c) or value_c <= -273.15:
        raise InputError(source, field, f"{text!r} is below absolute zero or not finite")
    return value_c


def parse_fraction(text: Any, source: str, field: str) -> float:
    """Parse a relative humidity: a number in [0, 1] or an explicit percent ("45 %")."""
    if isinstance(text, bool):
        raise InputError(source, field, f"expected a fraction 0..1 or '45 %', got {text!r}")
    if isinstance(text, str):
        t = text.strip()
        if t.endswith("%"):
            try:
                value = float(t[:-1]) / 100.0
            except ValueError:
                raise InputError(source, field, f"expected e.g. '45 %', got {text!r}") from None
        else:
            try:
                value = float(t)
            except ValueError:
                raise InputError(source, field,
                                 f"expected a fraction 0..1 or '45 %', got {text!r}") from None
    elif isinstance(text, (int, float)):
        value = _to_float(text, source, field)
    else:
        raise InputError(source, field, f"expected a fraction 0..1 or '45 %', got {text!r}")
    if not (0.0 <= value <= 1.0) or not math.isfinite(value):
        raise InputError(source, field, f"{text!r} is outside 0..1 (write '45 %' for a percent)")
    return value


#: Units common in object files, with their SI factors, read without pint (whose
#: registry takes most of a second to build); pint reads everything else. The
#: factors are exact by definition (SI Brochure, 9th ed., 2019; 1 in = 25.4 mm).
_COMMON: dict[str, dict[str, float]] = {
    "length": {"m": 1.0, "cm": 1e-2, "mm": 1e-3, "um": 1e-6, "µm": 1e-6, "in": 0.0254,
               "inch": 0.0254, "meter": 1.0, "millimeter": 1e-3, "centimeter": 1e-2},
    "volume": {"m**3": 1.0, "m^3": 1.0, "L": 1e-3, "l": 1e-3, "mL": 1e-6, "ml": 1e-6,
               "cL": 1e-5, "dL": 1e-4, "cm**3": 1e-6, "cm^3": 1e-6, "cc": 1e-6,
               "mm**3": 1e-9, "mm^3": 1e-9, "liter": 1e-3, "litre": 1e-3,
               "milliliter": 1e-6, "millilitre": 1e-6},
    "area": {"m**2": 1.0, "m^2": 1.0, "cm**2": 1e-4, "cm^2": 1e-4, "mm**2": 1e-6,
             "mm^2": 1e-6},
    "pressure": {"Pa": 1.0, "hPa": 100.0, "kPa": 1e3, "MPa": 1e6, "bar": 1e5,
                 "mbar": 100.0},
    "mass": {"kg": 1.0, "g": 1e-3, "mg": 1e-6},
    "frequency": {"Hz": 1.0, "kHz": 1e3},
    "time": {"s": 1.0, "ms": 1e-3, "min": 60.0},
}

_EXAMPLES = {
    "length": "18 mm",
    "volume": "355 mL",
    "area": "2.5 cm**2",
    "pressure": "101.325 kPa",
    "mass": "355 g",
    "frequency": "256 Hz",
    "time": "10 s",
}
