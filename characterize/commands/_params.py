"""Click parameter types shared by the commands: units are parsed at the edge."""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

import click


class Fraction(click.ParamType):
    """A fraction 0..1 or an explicit percent ("45 %")."""

    name = "FRACTION"

    def convert(self, value: Any, param: Any, ctx: Any) -> float:
        from ..errors import InputError
        from ..units import parse_fraction

        if isinstance(value, float):
            return value
        try:
            return parse_fraction(value, "option", f"--{param.name}" if param else "value")
        except InputError as exc:
            self.fail(exc.expected, param, ctx)


class Quantity(click.ParamType):
    """A number with a unit ("101.325 kPa", "50 mm"), or a bare number in SI units."""

    def __init__(self, dimension: str) -> None:
        self.dimension = dimension
        self.name = dimension.upper()

    def convert(self, value: Any, param: Any, ctx: Any) -> float:
        from ..errors import InputError
        from ..units import parse_quantity

        if isinstance(value, float):
            return value
        try:
            return float(value)
        except ValueError:
            pass
        try:
            return parse_quantity(value, self.dimension, "option",
                                  f"--{param.name.replace('_', '-')}" if param else "")
        except InputError as exc:
            self.fail(exc.expected, param, ctx)


def air_options(fn: Callable[..., Any]) -> Callable[..., Any]:
    """--temperature, --humidity and --pressure: the air a measurement was made
    in, overriding the object file's [air] (see physics.conditions.resolve_air)."""
    fn = click.option("--pressure", "pressure_pa", type=Quantity("pressure"), default=None,
                      help="Static pressure ('101.3 kPa' or Pa); overrides the object file."
                      )(fn)
    fn = click.option("--humidity", "relative_humidity", type=Fraction(), default=None,
                      help="Relative humidity, 0..1 or '45 %'; overrides the object file.")(fn)
    fn = click.option("--temperature", "temperature_c", type=float, default=None,
                      help="Air temperature (°C); overrides the object file.")(fn)
    return fn
