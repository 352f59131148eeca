"""A resonator's geometry in SI units: :class:`Cavity`, :class:`Neck`,
:class:`AirOverrides` and :class:`ResonatorObject`, with the vocabulary of shapes
and end conditions.

The object file (TOML) that describes one is read by
:mod:`characterize.objectfile` (``load_object``, ``parse_object``), above
physics; :meth:`ResonatorObject.to_file_data` writes one back.

Equivalents used by the lumped formula (documented in docs/geometry.md):
- ``Neck.area_m2`` is the total open area of all ``count`` openings;
- ``Neck.radius_m`` and ``Neck.diameter_m`` belong to ONE opening; for a slot
  they are those of the circle of the same area (equal-area radius), which
  scales the end-correction plausibility range;
- for a tube, ``cavity.volume_m3`` is the tube's own volume and ``neck`` is the
  tube itself (``inner_end = "closed"``).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

__all__ = [
    "END_CONDITIONS",
    "KINDS",
    "CAVITY_SHAPES",
    "NECK_SHAPES",
    "VOLUME_CONSISTENCY_TOLERANCE",
    "DEFAULT_WATER_TEMPERATURE_C",
    "MAX_CO2_FRACTION",
    "Cavity",
    "Neck",
    "AirOverrides",
    "ResonatorObject",
]

#: Allowed values of ``neck.outer_end`` and ``neck.inner_end``.
END_CONDITIONS = ("flanged", "unflanged")


#: Resonator kinds.
KINDS = ("helmholtz", "tube")


#: Cavity shapes and the dimension keys each one needs.
CAVITY_SHAPES: dict[str, tuple[str, ...]] = {
    "volume": (),
    "sphere": ("diameter",),
    "cylinder": ("diameter", "length"),
    "box": ("width", "depth", "height"),
    "profile": ("sections",),
    "ellipsoid": ("semi_axes",),
    "elliptic-cylinder": ("semi_axes", "length"),
}


#: Neck shapes and the dimension keys each one needs.
NECK_SHAPES: dict[str, tuple[str, ...]] = {
    "round": ("diameter", "length"),
    "slot": ("width", "height", "length"),
    "hole": ("diameter", "wall_thickness"),
    "profile": ("sections",),
}


#: A volume given beside a shape's dimensions must agree with them within this
#: fraction; beyond it one of the two is wrong (common practice: a careful
#: water fill and calliper readings of a regular vessel agree within a few %).
VOLUME_CONSISTENCY_TOLERANCE = 0.05


#: Water temperature assumed for ``volume_by_water`` when none is given, degC
#: (5 K either way changes the volume by about 0.1 %).
DEFAULT_WATER_TEMPERATURE_C = 20.0


#: Largest CO2 mole fraction accepted (the range of Cramer's 1993 fit).
MAX_CO2_FRACTION = 0.01


def ellipse_perimeter_m(semi_axis_a_m: float, semi_axis_b_m: float) -> float:
    r"""Perimeter of an ellipse, exact.

    .. math::

        P = 4a\,E(m),\qquad m = 1 - b^2/a^2,\ a \ge b

    with E the complete elliptic integral of the second kind
    (``scipy.special.ellipe``, parameter convention m = k^2).

    References
    ----------
    NIST Digital Library of Mathematical Functions, section 19.9(ii)
    (arc length of an ellipse; from memory); checked in the tests against
    Ramanujan's second approximation and the circle.
    """
    from scipy.special import ellipe

    a, b = max(semi_axis_a_m, semi_axis_b_m), min(semi_axis_a_m, semi_axis_b_m)
    return 4.0 * a * float(ellipe(1.0 - (b / a) ** 2))


def ellipsoid_surface_area_m2(a_m: float, b_m: float, c_m: float) -> float:
    r"""Surface area of an ellipsoid with semi-axes a, b, c, exact.

    .. math::

        A = 4\pi abc\,R_G(a^{-2}, b^{-2}, c^{-2})

    with :math:`R_G` Carlson's symmetric elliptic integral of the second kind
    (``scipy.special.elliprg``); a sphere gives :math:`4\pi r^2`.

    References
    ----------
    NIST Digital Library of Mathematical Functions, eq. 19.33.1 (surface
    area of an ellipsoid in Carlson's form; equation number from memory);
    B. C. Carlson, "Numerical computation of real or complex elliptic
    integrals", Numer. Algorithms 10, 13-26 (1995). Checked in the tests
    against the spheroids' closed forms and Thomsen's approximation
    (within 1.061 %).
    """
    from scipy.special import elliprg

    return 4.0 * math.pi * a_m * b_m * c_m * float(
        elliprg(a_m**-2, b_m**-2, c_m**-2))


def section_parts(section: tuple[float, ...]) -> tuple[float, float, float]:
    """A profile section as (diameter at its start, diameter at its end, length), m:
    ``(d, L)`` is a cylinder, ``(d0, d1, L)`` a truncated cone."""
    if len(section) == 2:
        return (section[0], section[0], section[1])
    return (section[0], section[1], section[2])


def _frustum_volume_m3(d0: float, d1: float, length: float) -> float:
    return math.pi * length * (d0 * d0 + d0 * d1 + d1 * d1) / 12.0


def _frustum_side_m2(d0: float, d1: float, length: float) -> float:
    return math.pi * (d0 + d1) / 2.0 * math.hypot(length, (d1 - d0) / 2.0)


@dataclass(frozen=True, slots=True)
class Cavity:
    """The cavity: its air volume and, when known, its shape.

    Attributes
    ----------
    volume_m3 : float
        Air volume, m^3 (the given or water-measured volume when there is
        one, else the shape's).
    shape : str
        One of :data:`CAVITY_SHAPES` or ``"tube"`` (for ``kind = "tube"``).
    diameter_m : float or None
        Sphere or cylinder diameter, m.
    length_m : float or None
        Cylinder (or tube) length along the neck's axis, m.
    width_m, depth_m, height_m : float or None
        Box dimensions, m; the neck sits on the width x depth face and the
        height runs along its axis.
    sections : tuple of (diameter_m, length_m) or (diameter_m, diameter_m, length_m)
        Profile sections from the bottom up, m: a cylinder, or a truncated
        cone from its lower to its upper diameter (:func:`section_parts`).
    semi_axes_m : tuple of float
        Ellipsoid (a, b, c; c along the neck's axis, the neck on its pole)
        or elliptic cylinder (a, b, across the axis), m.
    volume_source : str
        ``"given"``, ``"water"`` or ``"shape"``.
    water_mass_kg, water_temperature_c : float or None
        The fill that measured the volume (``volume_source == "water"``).
    """

    volume_m3: float
    shape: str = "volume"
    diameter_m: float | None = None
    length_m: float | None = None
    width_m: float | None = None
    depth_m: float | None = None
    height_m: float | None = None
    sections: tuple[tuple[float, ...], ...] = ()
    semi_axes_m: tuple[float, ...] = ()
    volume_source: str = "given"
    water_mass_kg: float | None = None
    water_temperature_c: float | None = None

    @property
    def shape_volume_m3(self) -> float | None:
        """Volume computed from the dimensions, m^3 (None for volume only)."""
        if self.shape == "sphere":
            assert self.diameter_m is not None
            return math.pi * self.diameter_m**3 / 6.0
        if self.shape in ("cylinder", "tube"):
            assert self.diameter_m is not None and self.length_m is not None
            return math.pi * self.diameter_m**2 / 4.0 * self.length_m
        if self.shape == "box":
            assert self.width_m and self.depth_m and self.height_m
            return self.width_m * self.depth_m * self.height_m
        if self.shape == "profile":
            return sum(_frustum_volume_m3(*section_parts(sec)) for sec in self.sections)
        if self.shape == "ellipsoid":
            a, b, c = self.semi_axes_m
            return 4.0 / 3.0 * math.pi * a * b * c
        if self.shape == "elliptic-cylinder":
            a, b = self.semi_axes_m
            assert self.length_m is not None
            return math.pi * a * b * self.length_m
        return None

    @property
    def area_scale(self) -> float:
        """Given volume over the shape's volume (1 for volume only): every
        cross-section of the shape is scaled by it so the volumes agree."""
        v = self.shape_volume_m3
        return 1.0 if v is None else self.volume_m3 / v

    @property
    def axial_length_m(self) -> float | None:
        """Depth of the cavity along the neck's axis, m (None for volume only)."""
        if self.shape == "sphere":
            return self.diameter_m
        if self.shape in ("cylinder", "tube", "elliptic-cylinder"):
            return self.length_m
        if self.shape == "box":
            return self.height_m
        if self.shape == "profile":
            return sum(section_parts(sec)[2] for sec in self.sections)
        if self.shape == "ellipsoid":
            return 2.0 * self.semi_axes_m[2]
        return None

    @property
    def neck_side_area_m2(self) -> float | None:
        """Cross-section of the cavity where the neck joins it, m^2 (scaled to
        the volume); for a sphere its equatorial section. None for volume only."""
        s = self.area_scale
        if self.shape in ("sphere", "cylinder", "tube"):
            assert self.diameter_m is not None
            return math.pi * self.diameter_m**2 / 4.0 * s
        if self.shape == "box":
            assert self.width_m and self.depth_m
            return self.width_m * self.depth_m * s
        if self.shape == "profile":
            return math.pi * section_parts(self.sections[-1])[1] ** 2 / 4.0 * s
        if self.shape in ("ellipsoid", "elliptic-cylinder"):
            return math.pi * self.semi_axes_m[0] * self.semi_axes_m[1] * s
        return None

    @property
    def neck_side_widths_m(self) -> tuple[float, float] | None:
        """The two widths of the face that holds the neck (for fit checks), m."""
        s = math.sqrt(self.area_scale)
        if self.shape in ("sphere", "cylinder", "tube"):
            assert self.diameter_m is not None
            return (self.diameter_m * s, self.diameter_m * s)
        if self.shape == "box":
            assert self.width_m and self.depth_m
            return (self.width_m * s, self.depth_m * s)
        if self.shape == "profile":
            d = section_parts(self.sections[-1])[1] * s
            return (d, d)
        if self.shape in ("ellipsoid", "elliptic-cylinder"):
            return (2.0 * self.semi_axes_m[0] * s, 2.0 * self.semi_axes_m[1] * s)
        return None

    @property
    def wall_area_m2(self) -> float:
        r"""Inner wall area (openings not subtracted), m^2.

        For volume only it is estimated as that of a cylinder as tall as it
        is wide, :math:`A = 6\pi r^2` with :math:`r = (V/2\pi)^{1/3}`
        (between a sphere's 4.84 and a cube's 6.00 :math:`V^{2/3}`).
        """
        s = self.area_scale
        if self.shape == "sphere":
            assert self.diameter_m is not None
            return math.pi * self.diameter_m**2 * s ** (2.0 / 3.0)
        if self.shape in ("cylinder", "tube"):
            assert self.diameter_m is not None and self.length_m is not None
            r = self.diameter_m / 2.0 * math.sqrt(s)
            return 2.0 * math.pi * r * self.length_m + 2.0 * math.pi * r * r
        if self.shape == "box":
            assert self.width_m and self.depth_m and self.height_m
            w, d = self.width_m * math.sqrt(s), self.depth_m * math.sqrt(s)
            h = self.height_m
            return 2.0 * (w * d + w * h + d * h)
        if self.shape == "profile":
            lin = math.sqrt(s)
            parts = [(d0 * lin, d1 * lin, ln)
                     for d0, d1, ln in (section_parts(sec) for sec in self.sections)]
            side = sum(_frustum_side_m2(*p) for p in parts)
            ends = math.pi * (parts[0][0] ** 2 + parts[-1][1] ** 2) / 4.0
            steps = sum(abs(math.pi * (q[0] ** 2 - p[1] ** 2) / 4.0)
                        for p, q in zip(parts, parts[1:], strict=False))
            return side + ends + steps
        if self.shape == "ellipsoid":
            lin = math.sqrt(s)
            a, b, c = self.semi_axes_m
            return ellipsoid_surface_area_m2(a * lin, b * lin, c)
        if self.shape == "elliptic-cylinder":
            lin = math.sqrt(s)
            a, b = (x * lin for x in self.semi_axes_m)
            assert self.length_m is not None
            return ellipse_perimeter_m(a, b) * self.length_m + 2.0 * math.pi * a * b
        r = (self.volume_m3 / (2.0 * math.pi)) ** (1.0 / 3.0)
        return 6.0 * math.pi * r * r

    def to_dict(self) -> dict[str, Any]:
        d: dict[str, Any] = {
            "volume_m3": float(self.volume_m3),
            "shape": self.shape,
            "volume_source": self.volume_source,
            "axial_length_m": self.axial_length_m,
            "wall_area_m2": float(self.wall_area_m2),
        }
        for key in ("diameter_m", "length_m", "width_m", "depth_m", "height_m",
                    "water_mass_kg", "water_temperature_c"):
            value = getattr(self, key)
            if value is not None:
                d[key] = float(value)
        if self.sections:
            d["sections_m"] = [[float(x) for x in sec] for sec in self.sections]
        if self.semi_axes_m:
            d["semi_axes_m"] = [float(x) for x in self.semi_axes_m]
        if self.shape_volume_m3 is not None:
            d["shape_volume_m3"] = float(self.shape_volume_m3)
        return d


@dataclass(frozen=True, slots=True)
class Neck:
    """The neck (port, hole or slot); ``count`` identical openings.

    Attributes
    ----------
    diameter_m : float
        Inner diameter of one opening, m; for a slot the diameter of the
        circle of the same area.
    length_m : float
        Physical length (wall thickness for a hole), m; end corrections not
        included.
    outer_end : str
        Condition at the open end, one of :data:`END_CONDITIONS`.
    inner_end : str
        Condition where the neck meets the cavity, one of
        :data:`END_CONDITIONS` (``"closed"`` for the closed end of a tube).
    shape : str
        ``"round"``, ``"slot"``, ``"hole"`` or ``"profile"``.
    width_m, height_m : float or None
        Slot width and height, m.
    count : int
        Number of identical openings.
    outer_end_correction_m, inner_end_correction_m : float or None
        Explicit end corrections, m, replacing the formulas.
    sections : tuple of (diameter_m, diameter_m, length_m)
        A neck given as a profile: round sections from the OUTSIDE end
        inwards, each from its outer to its inner diameter (equal for a
        cylinder, different for a truncated cone). ``diameter_m`` is then the
        mouth's diameter and ``length_m`` the total length.
    """

    diameter_m: float
    length_m: float
    outer_end: str
    inner_end: str
    shape: str = "round"
    width_m: float | None = None
    height_m: float | None = None
    count: int = 1
    outer_end_correction_m: float | None = None
    inner_end_correction_m: float | None = None
    sections: tuple[tuple[float, float, float], ...] = ()

    @property
    def radius_m(self) -> float:
        """Radius of one opening (equal-area radius for a slot; the mouth's for
        a profile), m."""
        return self.diameter_m / 2.0

    @property
    def inner_diameter_m(self) -> float:
        """Diameter where the neck meets the cavity, m (``diameter_m`` unless
        a profile)."""
        return self.sections[-1][1] if self.sections else self.diameter_m

    @property
    def inner_area_m2(self) -> float:
        """Cross-section of one opening where it meets the cavity, m^2."""
        if self.sections:
            return math.pi * self.inner_diameter_m**2 / 4.0
        return self.opening_area_m2

    @property
    def mass_length_m(self) -> float:
        r"""Length of neck referred to the mouth's area that has the neck's
        acoustic mass (end corrections not included), m:

        .. math::

            \ell_M = S_\text{mouth}\int_0^L\frac{dx}{S(x)},\qquad
            \int_\text{cone}\frac{dx}{S} = \frac{\ell}{\pi r_0 r_1}

        (the physical length for a uniform neck).

        References
        ----------
        Lord Rayleigh, *The Theory of Sound*, vol. II (1896), sections
        306-308 (the conductivity of a channel of varying section, whose
        reciprocal is this integral for a slowly varying one; from memory).
        """
        if not self.sections:
            return self.length_m
        s0 = self.opening_area_m2
        return s0 * sum(ln / (math.pi * d0 * d1 / 4.0) for d0, d1, ln in self.sections)

    @property
    def wall_area_m2(self) -> float:
        """Side wall of one opening, m^2."""
        if self.sections:
            return sum(_frustum_side_m2(*sec) for sec in self.sections)
        return self.perimeter_m * self.length_m

    @property
    def viscous_length_m(self) -> float:
        r"""Length of a uniform neck of the mouth's radius with the same
        wide-duct viscous resistance, m:
        :math:`a^3\int dx/r^3`, :math:`\int_\text{cone} dx/r^3 = \ell(r_0 + r_1)/(2r_0^2r_1^2)`
        (Keefe 1984 wide-tube resistance per length, integrated)."""
        if not self.sections:
            return self.length_m
        a = self.radius_m
        return a**3 * sum(ln * (d0 + d1) / 2.0 / (2.0 * (d0 / 2.0) ** 2 * (d1 / 2.0) ** 2)
                          for d0, d1, ln in self.sections)

    @property
    def opening_area_m2(self) -> float:
        """Cross-section of one opening, m^2."""
        if self.shape == "slot":
            assert self.width_m is not None and self.height_m is not None
            return self.width_m * self.height_m
        return math.pi * self.radius_m**2

    @property
    def area_m2(self) -> float:
        """Total cross-section of all openings (the S of the lumped formula), m^2."""
        return self.count * self.opening_area_m2

    @property
    def perimeter_m(self) -> float:
        """Wetted perimeter of one opening, m."""
        if self.shape == "slot":
            assert self.width_m is not None and self.height_m is not None
            return 2.0 * (self.width_m + self.height_m)
        return math.pi * self.diameter_m

    @property
    def narrow_dimension_m(self) -> float:
        """Diameter, or a slot's smaller side: the size the jet sees, m."""
        if self.shape == "slot":
            assert self.width_m is not None and self.height_m is not None
            return min(self.width_m, self.height_m)
        return self.diameter_m

    def to_dict(self) -> dict[str, Any]:
        d: dict[str, Any] = {
            "shape": self.shape,
            "diameter_m": float(self.diameter_m),
            "length_m": float(self.length_m),
            "radius_m": float(self.radius_m),
            "area_m2": float(self.area_m2),
            "opening_area_m2": float(self.opening_area_m2),
            "count": int(self.count),
            "outer_end": self.outer_end,
            "inner_end": self.inner_end,
        }
        for key in ("width_m", "height_m", "outer_end_correction_m", "inner_end_correction_m"):
            value = getattr(self, key)
            if value is not None:
                d[key] = float(value)
        if self.sections:
            d["sections_m"] = [[float(x) for x in sec] for sec in self.sections]
            d["inner_diameter_m"] = float(self.inner_diameter_m)
            d["mass_length_m"] = float(self.mass_length_m)
        return d


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
    co2_fraction : float or None
        CO2 mole fraction, 1.
    """

    temperature_c: float | None = None
    relative_humidity: float | None = None
    pressure_pa: float | None = None
    co2_fraction: float | None = None

    def to_dict(self) -> dict[str, float | None]:
        d: dict[str, float | None] = {
            "temperature_c": self.temperature_c,
            "relative_humidity": self.relative_humidity,
            "pressure_pa": self.pressure_pa,
        }
        if self.co2_fraction is not None:
            d["co2_fraction"] = self.co2_fraction
        return d

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
    kind : str
        ``"helmholtz"`` or ``"tube"``.
    """

    name: str
    cavity: Cavity
    neck: Neck
    air: AirOverrides
    source_path: str
    kind: str = "helmholtz"

    def to_dict(self) -> dict[str, Any]:
        """Plain-Python dict in SI units (JSON-safe)."""
        return {
            "name": self.name,
            "kind": self.kind,
            "cavity": self.cavity.to_dict(),
            "neck": self.neck.to_dict(),
            "air": self.air.to_dict(),
            "source_path": self.source_path,
        }

    def to_file_data(self) -> dict[str, Any]:
        """The object-file mapping (unit strings) that parses back to this object."""
        data: dict[str, Any] = {"name": self.name}
        m = _unit_m
        n, c = self.neck, self.cavity
        if self.kind == "tube":
            data["kind"] = "tube"
            tube: dict[str, Any] = {"diameter": m(n.diameter_m), "length": m(n.length_m),
                                    "open_end": n.outer_end}
            if n.outer_end_correction_m is not None:
                tube["open_end_correction"] = m(n.outer_end_correction_m)
            if n.inner_end != "closed":
                tube["far_end"] = n.inner_end
            if n.inner_end_correction_m is not None:
                tube["far_end_correction"] = m(n.inner_end_correction_m)
            data["tube"] = tube
        else:
            cav: dict[str, Any] = {}
            if c.shape != "volume":
                cav["shape"] = c.shape
            if c.volume_source == "given":
                cav["volume"] = f"{c.volume_m3!r} m**3"
            elif c.volume_source == "water":
                cav["volume_by_water"] = f"{c.water_mass_kg!r} kg"
                cav["water_temperature"] = f"{c.water_temperature_c!r} degC"
            for key in ("diameter", "length", "width", "depth", "height"):
                value = getattr(c, f"{key}_m")
                if value is not None:
                    cav[key] = m(value)
            if c.sections:
                cav["sections"] = [[m(x) for x in sec] for sec in c.sections]
            if c.semi_axes_m:
                cav["semi_axes"] = [m(x) for x in c.semi_axes_m]
            data["cavity"] = cav
            neck: dict[str, Any] = {}
            if n.shape != "round":
                neck["shape"] = n.shape
            if n.shape == "slot":
                neck["width"], neck["height"] = m(n.width_m), m(n.height_m)  # type: ignore[arg-type]
                neck["length"] = m(n.length_m)
            elif n.shape == "hole":
                neck["diameter"], neck["wall_thickness"] = m(n.diameter_m), m(n.length_m)
            elif n.shape == "profile":
                neck["sections"] = [[m(d0), m(ln)] if d0 == d1 else [m(d0), m(d1), m(ln)]
                                    for d0, d1, ln in n.sections]
            else:
                neck["diameter"], neck["length"] = m(n.diameter_m), m(n.length_m)
            if n.count != 1:
                neck["count"] = n.count
            neck["outer_end"], neck["inner_end"] = n.outer_end, n.inner_end
            if n.outer_end_correction_m is not None:
                neck["outer_end_correction"] = m(n.outer_end_correction_m)
            if n.inner_end_correction_m is not None:
                neck["inner_end_correction"] = m(n.inner_end_correction_m)
            data["neck"] = neck
        air: dict[str, Any] = {}
        if self.air.temperature_c is not None:
            air["temperature"] = f"{self.air.temperature_c!r} degC"
        if self.air.relative_humidity is not None:
            air["relative_humidity"] = self.air.relative_humidity
        if self.air.pressure_pa is not None:
            air["pressure"] = f"{self.air.pressure_pa!r} Pa"
        if self.air.co2_fraction is not None:
            air["co2"] = self.air.co2_fraction
        if air:
            data["air"] = air
        return data


def _unit_m(value: float | None) -> str:
    return f"{value!r} m"
