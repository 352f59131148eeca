"""Click parameter types shared by the commands: units are parsed at the edge.

Every quantity option takes a number with its unit ("21 degC", "3 %", "195 Hz",
"50 mm", "101.3 kPa"). A bare number is accepted only where its unit is
unambiguous and said in the option's help: degrees Celsius for a temperature,
hertz for a frequency, a fraction for a tolerance or humidity, seconds for a
sweep's durations, milliseconds for ``--window``, decibels for a level, pascals
for a pressure in the range of the atmosphere. A bare length is refused (is 50
millimetres or metres?), and so are values that only make sense in another
unit ("1013" for a pressure, "294" for a temperature) with a "did you mean"
message.
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

import click

#: Static air pressures accepted from the command line (Pa): below the summit of
#: Everest (about 33 kPa) to twice sea level. Anything else is almost always a
#: value typed in another unit.
PLAUSIBLE_PRESSURE_PA = (20e3, 500e3)


def _field(param: Any) -> str:
    return f"--{param.name.replace('_', '-')}" if param is not None and param.name else "value"


def _bare(value: Any) -> float | None:
    """The value as a float when it is a bare number (no unit), else None."""
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        return float(value)
    try:
        return float(str(value).strip())
    except ValueError:
        return None


class Fraction(click.ParamType):
    """A fraction 0..1 or an explicit percent ("45 %", "3 %")."""

    name = "FRACTION"

    def convert(self, value: Any, param: Any, ctx: Any) -> float:
        from ..errors import InputError
        from ..units import parse_fraction

        if isinstance(value, float):
            return value
        b = _bare(value)
        if b is not None and 1.0 < b <= 100.0:
            self.fail(f"{value!r} is not a fraction 0..1; did you mean '{b:g} %'?", param, ctx)
        try:
            return parse_fraction(value, "option", _field(param))
        except InputError as exc:
            self.fail(exc.expected, param, ctx)


class Quantity(click.ParamType):
    """A number with a unit ("50 mm", "195 Hz", "2 s").

    ``bare`` names the unit a bare number is taken in (documented in the
    option's help), with its SI factor; without it a bare number is refused
    with a message asking for the unit.
    """

    def __init__(self, dimension: str, bare: tuple[str, float] | None = None) -> None:
        self.dimension = dimension
        self.bare = bare
        self.name = dimension.upper()

    def convert(self, value: Any, param: Any, ctx: Any) -> float:
        from ..errors import InputError
        from ..units import _EXAMPLES, parse_quantity

        if isinstance(value, float):
            return value
        b = _bare(value)
        if b is not None:
            if self.bare is None:
                self.fail(f"{value!r} has no unit: give the {self.dimension} with its unit, "
                          f"e.g. {_EXAMPLES[self.dimension]!r}", param, ctx)
            return b * self.bare[1]
        try:
            return parse_quantity(value, self.dimension, "option", _field(param))
        except InputError as exc:
            self.fail(exc.expected, param, ctx)


class Pressure(click.ParamType):
    """A static pressure ("101.3 kPa", "1013 hPa", or a bare number in Pa),
    refused with a "did you mean" when it is far from any air pressure."""

    name = "PRESSURE"

    def convert(self, value: Any, param: Any, ctx: Any) -> float:
        from ..errors import InputError
        from ..units import parse_quantity

        if isinstance(value, float):
            return value
        b = _bare(value)
        try:
            pa = b if b is not None else parse_quantity(value, "pressure", "option",
                                                        _field(param))
        except InputError as exc:
            self.fail(exc.expected, param, ctx)
        lo, hi = PLAUSIBLE_PRESSURE_PA
        if not (lo <= pa <= hi):
            number = b if b is not None else pa
            hint = next((f"'{number:g} {u}'" for u, k in (("hPa", 100.0), ("kPa", 1e3),
                                                            ("bar", 1e5), ("Pa", 1.0))
                         if lo <= number * k <= hi), None)
            shown = f"{pa:g} Pa" if b is not None else repr(value)
            self.fail(f"{shown} is not an air pressure ({lo / 1e3:g} to {hi / 1e3:g} kPa)"
                      + (f"; did you mean {hint}?" if hint else ""), param, ctx)
        return float(pa)


class Temperature(click.ParamType):
    """An air temperature ("21 degC", "294 K", "70 degF"); a bare number is °C."""

    name = "TEMPERATURE"

    def convert(self, value: Any, param: Any, ctx: Any) -> float:
        from ..errors import InputError
        from ..units import parse_temperature_c

        if isinstance(value, float):
            return value
        b = _bare(value)
        try:
            return parse_temperature_c(b if b is not None else value, "option", _field(param))
        except InputError as exc:
            self.fail(exc.expected, param, ctx)


class Level(click.ParamType):
    """A level in decibels ("94 dB", "-12 dBFS"), or a bare number of decibels."""

    def __init__(self, unit: str = "dB") -> None:
        self.unit = unit
        self.name = unit.upper()

    def convert(self, value: Any, param: Any, ctx: Any) -> float:
        if isinstance(value, float):
            return value
        text = str(value).strip()
        for suffix in (self.unit, "dB SPL", "dBSPL", "dB"):
            if text.endswith(suffix):
                text = text[: -len(suffix)].strip()
                break
        b = _bare(text)
        if b is None or b != b or abs(b) == float("inf"):
            self.fail(f"expected a level such as '-12 {self.unit}', got {value!r}", param, ctx)
        return b


#: The frequency options: "195 Hz", "1.2 kHz", or a bare number of hertz.
FREQUENCY = Quantity("frequency", bare=("Hz", 1.0))
#: Durations of a sweep: "5 s", "500 ms", or a bare number of seconds.
SECONDS = Quantity("time", bare=("s", 1.0))
#: Lengths: always with a unit.
LENGTH = Quantity("length")


def air_options(fn: Callable[..., Any]) -> Callable[..., Any]:
    """--temperature, --humidity and --pressure: the air a measurement was made
    in, overriding the object file's [air] (see physics.conditions.resolve_air)."""
    fn = click.option("--pressure", "pressure_pa", type=Pressure(), default=None,
                      help="Static pressure ('101.3 kPa', '1013 hPa'; a bare number is Pa); "
                      "overrides the object file.")(fn)
    fn = click.option("--humidity", "relative_humidity", type=Fraction(), default=None,
                      help="Relative humidity, '45 %' or a fraction 0..1; overrides the "
                      "object file.")(fn)
    fn = click.option("--temperature", "temperature_c", type=Temperature(), default=None,
                      help="Air temperature ('21 degC', '294 K'; a bare number is °C); "
                      "overrides the object file.")(fn)
    return fn
