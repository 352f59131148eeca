"""The object file: a resonator's geometry (and optional air conditions) in TOML,
read into the SI dataclasses of :mod:`characterize.physics.geometry`.

A Helmholtz resonator (``kind = "helmholtz"``, the default)::

    name = "jar-07"                 # optional; defaults to the file stem
    [cavity]
    volume = "355 mL"               # volume only, or a shape:
    # shape = "sphere"    diameter
    # shape = "cylinder"  diameter, length          (neck on an end face)
    # shape = "box"       width, depth, height      (neck on the width x depth face)
    # shape = "profile"   sections = [["62 mm", "90 mm"], ["62 mm", "30 mm", "25 mm"]]
    #                     (bottom up: [diameter, length] straight, [lower, upper
    #                     diameter, length] a cone, which must join its neighbours)
    # shape = "ellipsoid" semi_axes = ["50 mm", "35 mm", "60 mm"] (c along the neck)
    # shape = "elliptic-cylinder"  semi_axes = ["40 mm", "25 mm"], length
    # volume_by_water = "355 g" and water_temperature = "19 degC" instead of volume
    [neck]
    diameter = "18 mm"              # shape = "round" (default)
    length = "40 mm"
    # shape = "slot": width, height, length;  shape = "hole": diameter, wall_thickness
    # shape = "profile": sections = [["19 mm", "45 mm"], ["19 mm", "28 mm", "30 mm"]]
    #                    (from the OUTSIDE end inwards; a cone [outer, inner, length])
    # count = 3                       (identical openings)
    outer_end = "unflanged"         # or "flanged"
    inner_end = "flanged"           # or "unflanged"
    # outer_end_correction = "7 mm"   (explicit, replaces the formula for that end)
    [air]                           # optional; each key optional
    temperature = "21 degC"
    relative_humidity = 0.45        # or "45 %"
    pressure = "101.325 kPa"
    co2 = "400 ppm"                 # or a fraction, or "0.04 %"

A tube (``kind = "tube"``)::

    kind = "tube"
    [tube]
    diameter = "20 mm"
    length = "300 mm"
    open_end = "unflanged"          # the mouth: or "flanged"; open_end_correction optional
    far_end = "closed"              # default; "flanged" or "unflanged": open at both ends
                                    # (far_end_correction optional)

:func:`load_object` reads a file, :func:`parse_object` an already-parsed
mapping. Both return a :class:`ResonatorObject` in SI units, or raise
:class:`~characterize.errors.InputError` with one line naming the file, the
dotted field and what was expected.
"""

from __future__ import annotations

import difflib
import math
from collections.abc import Callable, Mapping
from pathlib import Path
from typing import Any

from .errors import InputError
from .physics.geometry import (
    CAVITY_SHAPES,
    DEFAULT_WATER_TEMPERATURE_C,
    END_CONDITIONS,
    KINDS,
    MAX_CO2_FRACTION,
    NECK_SHAPES,
    VOLUME_CONSISTENCY_TOLERANCE,
    AirOverrides,
    Cavity,
    Neck,
    ResonatorObject,
)
from .physics.water import TANAKA_RANGE_C, volume_from_water_mass_m3
from .units import parse_fraction, parse_quantity, parse_temperature_c

__all__ = ["load_object", "parse_object", "parse_co2"]

_EXAMPLES = {
    "length": "'18 mm'",
    "volume": "'355 mL'",
    "mass": "'355 g'",
    "pressure": "'101.325 kPa'",
    "temperature": "'21 degC'",
    "fraction": "0.45 or '45 %'",
    "co2": "'400 ppm', '0.04 %' or 0.0004",
    "end": " or ".join(repr(e) for e in END_CONDITIONS),
    "text": "'jar-07'",
    "count": "3",
    "sections": "[['62 mm', '90 mm'], ['62 mm', '30 mm', '25 mm']]",
    "neck_sections": "[['19 mm', '45 mm'], ['19 mm', '28 mm', '30 mm']]",
    "semi_axes": "['50 mm', '35 mm', '60 mm']",
    "tube_end": "'closed', 'flanged' or 'unflanged'",
}


def _nearest(word: str, choices: list[str]) -> str:
    """``"did you mean 'x'? "`` for difflib's closest choice, else ``""``."""
    close = difflib.get_close_matches(word, choices, n=1, cutoff=0.5)
    return f"did you mean {close[0]!r}? " if close else ""


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


def _quantity(dimension: str, positive: bool = True) -> Callable[[Any, str, str], float]:
    def parse(value: Any, source: str, field: str) -> float:
        _require_unit_string(value, dimension, source, field)
        si = parse_quantity(value, dimension, source, field, positive=positive)
        if si < 0:
            raise InputError(source, field, f"{value!r} must not be negative")
        return si

    return parse


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


def _choice(allowed: tuple[str, ...], aliases: dict[str, str] | None = None
            ) -> Callable[[Any, str, str], str]:
    def parse(value: Any, source: str, field: str) -> str:
        listed = ", ".join(repr(a) for a in allowed)
        if not isinstance(value, str):
            raise InputError(source, field, f"expected one of {listed}, got {value!r}")
        word = value.strip().lower()
        word = (aliases or {}).get(word, word)
        if word not in allowed:
            hint = _nearest(word, list(allowed))
            raise InputError(source, field, f"unknown value {value!r}; {hint}allowed: {listed}")
        return word

    return parse


def _count(value: Any, source: str, field: str) -> int:
    if isinstance(value, bool) or not isinstance(value, int) or value < 1:
        raise InputError(source, field, f"expected a whole number >= 1, e.g. 3, got {value!r}")
    return int(value)


def _co2(value: Any, source: str, field: str) -> float:
    if isinstance(value, str) and value.strip().lower().endswith("ppm"):
        try:
            x = float(value.strip()[:-3]) * 1e-6
        except ValueError:
            raise InputError(source, field, f"expected e.g. {_EXAMPLES['co2']}, "
                             f"got {value!r}") from None
    else:
        x = parse_fraction(value, source, field)
    if not (math.isfinite(x) and 0.0 <= x <= MAX_CO2_FRACTION):
        raise InputError(source, field, f"{value!r} is outside 0 to {MAX_CO2_FRACTION:g} "
                         "(0 to 1 %, the range of Cramer's 1993 fit)")
    return x


#: Two joining diameters may differ by this fraction (rounding in a drawing).
JOIN_TOLERANCE = 0.005


def _profile(value: Any, source: str, field: str, what: str, example: str,
             order: str) -> tuple[tuple[float, ...], ...]:
    """Sections ``[diameter, length]`` (straight) or ``[d_start, d_end, length]``
    (a truncated cone); a cone's ends must join its neighbours."""
    if not isinstance(value, list) or not value:
        raise InputError(source, field, f"expected a list of {what} {order}, e.g. "
                         f"{example}, got {value!r}")
    length = _quantity("length")
    out: list[tuple[float, ...]] = []
    for i, item in enumerate(value, start=1):
        where = f"{field}[{i}]"
        if not isinstance(item, list) or len(item) not in (2, 3):
            raise InputError(source, where, "expected [diameter, length] or [diameter, "
                             "diameter, length] (a cone) with units, e.g. ['62 mm', '90 mm'] "
                             f"or ['62 mm', '30 mm', '25 mm'], got {item!r}")
        if len(item) == 2:
            out.append((length(item[0], source, f"{where}.diameter"),
                        length(item[1], source, f"{where}.length")))
        else:
            out.append((length(item[0], source, f"{where}.diameter_start"),
                        length(item[1], source, f"{where}.diameter_end"),
                        length(item[2], source, f"{where}.length")))
    for i in range(1, len(out)):
        prev, cur = out[i - 1], out[i]
        if len(prev) == 2 and len(cur) == 2:
            continue  # two straight sections may step
        end_prev, start_cur = prev[-2], cur[0]
        if abs(start_cur / end_prev - 1.0) > JOIN_TOLERANCE:
            raise InputError(
                source, f"{field}[{i + 1}]", f"does not join the section before it: it starts "
                f"at {1e3 * start_cur:.4g} mm where that one ends at {1e3 * end_prev:.4g} mm "
                "(a cone's ends must equal its neighbours' diameters)")
    return tuple(out)


def _sections(value: Any, source: str, field: str) -> tuple[tuple[float, ...], ...]:
    return _profile(value, source, field, "sections", _EXAMPLES["sections"],
                    "from the bottom up")


def _neck_sections(value: Any, source: str, field: str) -> tuple[tuple[float, float, float], ...]:
    out = _profile(value, source, field, "neck sections", _EXAMPLES["neck_sections"],
                   "from the outside end inwards")
    return tuple((sec[0], sec[0], sec[1]) if len(sec) == 2 else (sec[0], sec[1], sec[2])
                 for sec in out)


def _semi_axes(value: Any, source: str, field: str) -> tuple[float, ...]:
    if not isinstance(value, list) or len(value) not in (2, 3):
        raise InputError(source, field, "expected semi-axes with units, three for an "
                         f"ellipsoid (a, b across, c along the neck's axis), e.g. "
                         f"{_EXAMPLES['semi_axes']}, two for an elliptic cylinder, got {value!r}")
    length = _quantity("length")
    return tuple(length(x, source, f"{field}[{i}]") for i, x in enumerate(value, start=1))


#: Public name of the CO2 parser (command-line options use it too).
parse_co2 = _co2


#: kind of value -> parser(value, source, dotted_field)
_PARSERS: dict[str, Callable[[Any, str, str], Any]] = {
    "length": _quantity("length"),
    "length0": _quantity("length", positive=False),
    "volume": _quantity("volume"),
    "mass": _quantity("mass"),
    "pressure": _quantity("pressure"),
    "temperature": _temperature,
    "fraction": parse_fraction,
    "co2": _co2,
    "end": _end,
    "text": _text,
    "kind": _choice(KINDS),
    "cavity_shape": _choice(tuple(CAVITY_SHAPES), {"sphere": "sphere", "cuboid": "box",
                                                   "elliptic_cylinder": "elliptic-cylinder",
                                                   "elliptical-cylinder": "elliptic-cylinder"}),
    "neck_shape": _choice(tuple(NECK_SHAPES), {"rectangular": "slot", "circular": "round"}),
    "count": _count,
    "sections": _sections,
    "neck_sections": _neck_sections,
    "semi_axes": _semi_axes,
    "tube_end": _choice(("closed", *END_CONDITIONS)),
}


# table -> {key: kind of value}
_TABLES: dict[str, dict[str, str]] = {
    "cavity": {
        "shape": "cavity_shape", "volume": "volume", "volume_by_water": "mass",
        "water_temperature": "temperature", "diameter": "length", "length": "length",
        "width": "length", "depth": "length", "height": "length", "sections": "sections",
        "semi_axes": "semi_axes",
    },
    "neck": {
        "shape": "neck_shape", "diameter": "length", "width": "length", "height": "length",
        "length": "length", "wall_thickness": "length", "count": "count",
        "outer_end": "end", "inner_end": "end",
        "outer_end_correction": "length0", "inner_end_correction": "length0",
        "sections": "neck_sections",
    },
    "tube": {
        "diameter": "length", "length": "length", "open_end": "end",
        "open_end_correction": "length0", "far_end": "tube_end", "far_end_correction": "length0",
    },
    "air": {
        "temperature": "temperature", "relative_humidity": "fraction",
        "pressure": "pressure", "co2": "co2",
    },
}


_TOP_KEYS = {"name": "text", "kind": "kind"}


_TOP_ORDER = ["name", "kind", "cavity", "neck", "tube", "air"]


def _reject_unknown(keys: Mapping[str, Any], allowed: list[str], source: str, prefix: str) -> None:
    for key in keys:
        if key not in allowed:
            field = f"{prefix}{key}"
            hint = _nearest(key, allowed)
            raise InputError(
                source, field, f"unknown key; {hint}allowed here: {', '.join(allowed)}"
            )


def _parse_table(name: str, table: Any, source: str) -> dict[str, Any]:
    spec = _TABLES[name]
    if not isinstance(table, dict):
        raise InputError(
            source, name, f"expected a table [{name}] with keys {', '.join(spec)}, "
            f"got {type(table).__name__} {table!r}"
        )
    _reject_unknown(table, list(spec), source, f"{name}.")
    return {key: _PARSERS[spec[key]](value, source, f"{name}.{key}")
            for key, value in table.items()}


def _missing(source: str, field: str, kind: str) -> InputError:
    return InputError(source, field, f"missing required field (expected e.g. {_EXAMPLES[kind]})")


def _fmt_ml(v: float) -> str:
    return f"{v * 1e6:.4g} mL"


def _build_cavity(v: dict[str, Any], raw: Mapping[str, Any], source: str) -> Cavity:
    dims = [k for k in ("diameter", "length", "width", "depth", "height", "sections",
                        "semi_axes") if k in v]
    shape = v.get("shape")
    if shape is None:
        if dims:
            raise InputError(source, "cavity.shape", f"dimensions given ({', '.join(dims)}) but "
                             "no shape; add shape = 'sphere', 'cylinder', 'box', 'profile', "
                             "'ellipsoid' or 'elliptic-cylinder'")
        shape = "volume"
    needed = CAVITY_SHAPES[shape]
    for key in dims:
        if key not in needed:
            uses = ", ".join(needed) if needed else "no dimensions"
            raise InputError(source, f"cavity.{key}", f"not used by shape {shape!r} (it takes "
                             f"{uses})")
    for need in needed:
        if need not in v:
            raise _missing(source, f"cavity.{need}",
                           need if need in ("sections", "semi_axes") else "length")
    if "semi_axes" in v:
        want = 3 if shape == "ellipsoid" else 2
        if len(v["semi_axes"]) != want:
            raise InputError(source, "cavity.semi_axes", f"a{'n' if want == 3 else ''} "
                             f"{shape} takes {want} semi-axes, got {len(v['semi_axes'])}")
    if "volume" in v and "volume_by_water" in v:
        raise InputError(source, "cavity.volume_by_water", "give either volume or "
                         "volume_by_water, not both")
    if "water_temperature" in v and "volume_by_water" not in v:
        raise InputError(source, "cavity.water_temperature", "only used with volume_by_water")
    water_mass = water_t = None
    if "volume_by_water" in v:
        water_mass = v["volume_by_water"]
        water_t = v.get("water_temperature", DEFAULT_WATER_TEMPERATURE_C)
        lo, hi = TANAKA_RANGE_C
        if not lo <= water_t <= hi:
            raise InputError(source, "cavity.water_temperature", f"{raw.get('water_temperature')!r}"
                             f" is outside {lo:g} to {hi:g} degC (liquid water, Tanaka 2001)")
        volume: float | None = volume_from_water_mass_m3(water_mass, water_t)
        vsource = "water"
    elif "volume" in v:
        volume, vsource = v["volume"], "given"
    else:
        volume, vsource = None, "shape"
    cav = Cavity(
        volume_m3=1.0, shape=shape, diameter_m=v.get("diameter"), length_m=v.get("length"),
        width_m=v.get("width"), depth_m=v.get("depth"), height_m=v.get("height"),
        sections=v.get("sections", ()), semi_axes_m=v.get("semi_axes", ()),
    )
    shape_volume = cav.shape_volume_m3
    if volume is None:
        if shape_volume is None:
            raise InputError(source, "cavity.volume", "missing required field (expected e.g. "
                             f"{_EXAMPLES['volume']}, or volume_by_water, or a shape)")
        volume = shape_volume
    elif shape_volume is not None:
        rel = volume / shape_volume - 1.0
        if abs(rel) > VOLUME_CONSISTENCY_TOLERANCE:
            field = "cavity.volume_by_water" if vsource == "water" else "cavity.volume"
            raise InputError(
                source, field, f"{_fmt_ml(volume)} disagrees with the {shape}'s "
                f"{_fmt_ml(shape_volume)} from its dimensions ({100 * rel:+.1f} %, more than "
                f"{100 * VOLUME_CONSISTENCY_TOLERANCE:g} %): correct one of them")
    return Cavity(
        volume_m3=volume, shape=shape, diameter_m=cav.diameter_m, length_m=cav.length_m,
        width_m=cav.width_m, depth_m=cav.depth_m, height_m=cav.height_m,
        sections=cav.sections, semi_axes_m=cav.semi_axes_m, volume_source=vsource,
        water_mass_kg=water_mass,
        water_temperature_c=water_t,
    )


def _build_neck(v: dict[str, Any], source: str) -> Neck:
    shape = v.get("shape", "round")
    needed = NECK_SHAPES[shape]
    if shape == "hole" and "length" in v:
        if "wall_thickness" in v:
            raise InputError(source, "neck.length", "a hole's length is its wall_thickness; "
                             "give one of them")
        v = {**v, "wall_thickness": v["length"]}
        del v["length"]
    for key in ("diameter", "width", "height", "length", "wall_thickness", "sections"):
        if key in v and key not in needed:
            raise InputError(source, f"neck.{key}", f"not used by shape {shape!r} (it takes "
                             f"{', '.join(needed)})")
    for key in needed:
        if key not in v:
            raise _missing(source, f"neck.{key}", "neck_sections" if key == "sections"
                           else "length")
    ends = {}
    for key in ("outer_end", "inner_end"):
        if key in v:
            ends[key] = v[key]
        elif shape == "hole":
            ends[key] = "flanged"  # a hole in a wall is baffled on both sides
        else:
            raise _missing(source, f"neck.{key}", "end")
    sections: tuple[tuple[float, float, float], ...] = ()
    if shape == "slot":
        width, height = v["width"], v["height"]
        diameter = 2.0 * math.sqrt(width * height / math.pi)
        length = v["length"]
    elif shape == "profile":
        width = height = None
        sections = v["sections"]
        diameter, length = sections[0][0], sum(sec[2] for sec in sections)
    else:
        width = height = None
        diameter = v["diameter"]
        length = v["length"] if shape == "round" else v["wall_thickness"]
    return Neck(
        diameter_m=diameter, length_m=length, outer_end=ends["outer_end"],
        inner_end=ends["inner_end"], shape=shape, width_m=width, height_m=height,
        count=v.get("count", 1), outer_end_correction_m=v.get("outer_end_correction"),
        inner_end_correction_m=v.get("inner_end_correction"), sections=sections,
    )


def _build_tube(v: dict[str, Any], source: str) -> tuple[Cavity, Neck]:
    for key, kind in (("diameter", "length"), ("length", "length"), ("open_end", "end")):
        if key not in v:
            raise _missing(source, f"tube.{key}", kind)
    d, length = v["diameter"], v["length"]
    far = v.get("far_end", "closed")
    if "far_end_correction" in v and far == "closed":
        raise InputError(source, "tube.far_end_correction", "only for an open far end "
                         "(far_end = 'flanged' or 'unflanged')")
    neck = Neck(diameter_m=d, length_m=length, outer_end=v["open_end"], inner_end=far,
                outer_end_correction_m=v.get("open_end_correction"),
                inner_end_correction_m=v.get("far_end_correction"))
    cavity = Cavity(volume_m3=math.pi * d * d / 4.0 * length, shape="tube", diameter_m=d,
                    length_m=length, volume_source="shape")
    return cavity, neck


def _check_fit(cavity: Cavity, neck: Neck, source: str) -> None:
    """The neck must fit on the cavity face it opens into."""
    widths = cavity.neck_side_widths_m
    side_area = cavity.neck_side_area_m2
    curved = cavity.shape in ("sphere", "ellipsoid")
    if widths is None or side_area is None or curved:
        # a sphere's neck sits on a curved shell: only its total area is checked
        if curved and side_area is not None and neck.area_m2 >= side_area:
            raise InputError(source, "neck", f"the openings' total area exceeds the "
                             f"{cavity.shape}'s cross-section")
        return
    face = sorted(widths)
    if neck.shape == "slot":
        assert neck.width_m is not None and neck.height_m is not None
        slot = sorted((neck.width_m, neck.height_m))
        if slot[1] > face[1] or slot[0] > face[0]:
            raise InputError(
                source, "neck.width", f"the slot ({1e3 * neck.width_m:.4g} x "
                f"{1e3 * neck.height_m:.4g} mm) is wider than the cavity face it opens into "
                f"({1e3 * face[1]:.4g} x {1e3 * face[0]:.4g} mm)")
    elif max(neck.diameter_m, neck.inner_diameter_m) > face[0] * (1 + JOIN_TOLERANCE):
        field = "neck.sections" if neck.sections else "neck.diameter"
        widest = max(neck.diameter_m, neck.inner_diameter_m)
        raise InputError(source, field, f"{1e3 * widest:.4g} mm is wider "
                         f"than the cavity face it opens into ({1e3 * face[0]:.4g} mm)")
    if neck.area_m2 >= side_area:
        raise InputError(source, "neck.count", f"the {neck.count} openings' total area "
                         f"({1e6 * neck.area_m2:.4g} mm^2) is not smaller than the cavity's "
                         f"cross-section ({1e6 * side_area:.4g} mm^2)")


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
    _reject_unknown(data, _TOP_ORDER, source, "")
    kind = _PARSERS["kind"](data["kind"], source, "kind") if "kind" in data else "helmholtz"
    needed = ("tube",) if kind == "tube" else ("cavity", "neck")
    for name in needed:
        if name not in data:
            keys = ", ".join(_TABLES[name])
            raise InputError(source, name, f"missing required table [{name}] (keys: {keys})")
    for name in ("cavity", "neck", "tube"):
        if name in data and name not in needed:
            raise InputError(source, name, f"[{name}] is not used by kind = {kind!r} (it takes "
                             f"{', '.join('[' + n + ']' for n in needed)})")
    name = _text(data["name"], source, "name") if "name" in data else Path(source).stem
    air_values = _parse_table("air", data["air"], source) if "air" in data else {}
    air = AirOverrides(
        temperature_c=air_values.get("temperature"),
        relative_humidity=air_values.get("relative_humidity"),
        pressure_pa=air_values.get("pressure"),
        co2_fraction=air_values.get("co2"),
    )
    if kind == "tube":
        cavity, neck = _build_tube(_parse_table("tube", data["tube"], source), source)
    else:
        raw_cavity = data["cavity"]
        cavity = _build_cavity(_parse_table("cavity", raw_cavity, source), raw_cavity, source)
        neck = _build_neck(_parse_table("neck", data["neck"], source), source)
        _check_fit(cavity, neck, source)
    return ResonatorObject(name=name, cavity=cavity, neck=neck, air=air, source_path=source,
                           kind=kind)


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
        gives tomllib's line and column), or a field is missing, unknown,
        malformed or inconsistent with another.
    """
    from .fileio import read_toml

    source = str(path)
    data = read_toml(path, "an object file")
    return parse_object(data, source)
