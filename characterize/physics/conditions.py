"""The air a measurement was made in: defaults, then the object file, then the
command line (each value says where it came from)."""

from __future__ import annotations

from typing import Any

from ..errors import InputError
from .air import AirState, air_state

#: Air defaults when neither the object file nor the command line gives a value.
DEFAULT_AIR = {"temperature_c": 20.0, "relative_humidity": 0.5, "pressure_pa": 101325.0,
               "co2_fraction": 0.0004}


def resolve_air(obj: Any, **cli: float | None) -> tuple[AirState, dict[str, str]]:
    """Air state from :data:`DEFAULT_AIR`, then the object file's [air] (``obj``
    may be None), then the command line; and the source of each value."""
    values = dict(DEFAULT_AIR)
    sources = {k: "default" for k in values}
    if obj is not None:
        for k, v in obj.air.to_dict().items():
            if v is not None and k in values:
                values[k], sources[k] = float(v), "object file"
    for k, v in cli.items():
        if v is not None:
            values[k], sources[k] = float(v), "command line"
    try:
        return air_state(**values), sources
    except ValueError as exc:
        raise InputError("air", None, str(exc)) from None
