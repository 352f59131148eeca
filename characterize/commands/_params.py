"""Click parameter types shared by the commands: units are parsed at the edge."""

from __future__ import annotations

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
