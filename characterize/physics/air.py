"""Properties of humid air at the measured conditions.

:func:`air_state` is the entry point: temperature, relative humidity, static
pressure and CO2 fraction in, an :class:`AirState` with every property the
predictions need out. The individual formulas are public functions so each
can be tested against its source:

- :func:`saturation_vapour_pressure_pa`, :func:`enhancement_factor`,
  :func:`vapour_mole_fraction` -- Davis 1992 (CIPM-81/91);
- :func:`compressibility_factor`, :func:`moist_air_density_kg_m3` -- Davis 1992;
- :func:`speed_of_sound_cramer_m_s` -- Cramer 1993;
- :func:`viscosity_sutherland_pa_s`, :func:`thermal_conductivity_w_mk` --
  U.S. Standard Atmosphere 1976;
- :func:`heat_capacity_cp_j_kgk` -- ideal mixing of dry air and vapour;
- :func:`ratio_of_specific_heats` -- from c, rho and Z.

All inputs and outputs are SI, except temperatures, which are in degrees
Celsius where the name says ``_c`` and in kelvin where it says ``_k``.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass

__all__ = [
    "AirState",
    "air_state",
    "CRAMER_STATED_RANGE",
    "VALIDITY_RANGE",
    "validity_problems",
    "saturation_vapour_pressure_pa",
    "enhancement_factor",
    "vapour_mole_fraction",
    "compressibility_factor",
    "dry_air_molar_mass_kg_mol",
    "moist_air_density_kg_m3",
    "speed_of_sound_cramer_m_s",
    "viscosity_sutherland_pa_s",
    "thermal_conductivity_w_mk",
    "heat_capacity_cp_j_kgk",
    "ratio_of_specific_heats",
]

ZERO_CELSIUS_K = 273.15

# Davis 1992 (CIPM-81/91) constants.
GAS_CONSTANT_J_MOLK = 8.314510  # R as used by CIPM-81/91 (Davis 1992)
WATER_MOLAR_MASS_KG_MOL = 18.01528e-3  # M_v, Davis 1992

# Cramer 1993, eq. 15 with the coefficients a0..a15 of its Table III (equation
# and table numbers as given by several independent copies; the values agree
# with the physics sheet section 1.2 and with those copies).
_CRAMER_A = (
    331.5024,
    0.603055,
    -0.000528,
    51.471935,
    0.1495874,
    -0.000782,
    -1.82e-7,
    3.73e-8,
    -2.93e-10,
    -85.20931,
    -0.228525,
    5.91e-5,
    -2.835149,
    -2.15e-13,
    29.179762,
    0.000486,
)

# Range for which Cramer's fit is stated (physics sheet section 1.2):
# 0-30 degC, 75-102 kPa, vapour mole fraction up to 0.06, CO2 up to 1 %.
CRAMER_STATED_RANGE = {
    "temperature_c": (0.0, 30.0),
    "pressure_pa": (75.0e3, 102.0e3),
    "vapour_mole_fraction": (0.0, 0.06),
    "co2_fraction": (0.0, 0.01),
}

# Range used for AirState.in_validity_range. Pressure is widened to
# 60-110 kPa: the pressure terms of Cramer's fit (a6..a8, a13, a15) move c by
# less than 0.01 % over that whole span, so extrapolating them a few kPa
# costs far less than the 0.05 % accuracy target; ordinary sea-level weather
# (up to about 105 kPa) and mountain labs (down to about 70 kPa) then pass.
VALIDITY_RANGE = {**CRAMER_STATED_RANGE, "pressure_pa": (60.0e3, 110.0e3)}

# Molar isobaric heat capacities used by heat_capacity_cp_j_kgk (see there).
DRY_AIR_MOLAR_CP_J_MOLK = 29.14
WATER_VAPOUR_MOLAR_CP_J_MOLK = 33.57


@dataclass(frozen=True, slots=True)
class AirState:
    """Air properties at one temperature, humidity, pressure and CO2 fraction.

    Attributes
    ----------
    temperature_c : float
        Temperature, degC.
    relative_humidity : float
        Relative humidity as a fraction, 0..1.
    pressure_pa : float
        Static pressure, Pa.
    co2_fraction : float
        CO2 mole fraction, 1.
    speed_of_sound_m_s : float
        Zero-frequency speed of sound, m/s.
    density_kg_m3 : float
        Density, kg/m^3.
    viscosity_pa_s : float
        Dynamic viscosity, Pa s.
    thermal_conductivity_w_mk : float
        Thermal conductivity, W/(m K).
    gamma : float
        Ratio of specific heats cp/cv, 1.
    cp_j_kgk : float
        Isobaric specific heat capacity, J/(kg K).
    prandtl : float
        Prandtl number mu cp / kappa, 1.
    vapour_mole_fraction : float
        Water-vapour mole fraction, 1.
    in_validity_range : bool
        True when the inputs lie inside :data:`VALIDITY_RANGE`; outside it
        the values are still computed, by extrapolation.
    """

    temperature_c: float
    relative_humidity: float
    pressure_pa: float
    co2_fraction: float
    speed_of_sound_m_s: float
    density_kg_m3: float
    viscosity_pa_s: float
    thermal_conductivity_w_mk: float
    gamma: float
    cp_j_kgk: float
    prandtl: float
    vapour_mole_fraction: float = 0.0
    in_validity_range: bool = True

    def to_dict(self) -> dict[str, float | bool]:
        """Plain-Python dict (floats and one bool), JSON-safe."""
        return {
            k: (bool(v) if isinstance(v, bool) else float(v)) for k, v in asdict(self).items()
        }

    def __str__(self) -> str:
        return (
            f"air {self.temperature_c:.2f} degC, RH {100 * self.relative_humidity:.1f} %, "
            f"{self.pressure_pa / 1e3:.3f} kPa: c = {self.speed_of_sound_m_s:.3f} m/s, "
            f"rho = {self.density_kg_m3:.5f} kg/m^3"
        )


def _check_finite(**values: float) -> None:
    for name, value in values.items():
        if not isinstance(value, (int, float)) or isinstance(value, bool):
            raise ValueError(f"{name} must be a number, got {value!r}")
        if not math.isfinite(value):
            raise ValueError(f"{name} must be finite, got {value!r}")


def saturation_vapour_pressure_pa(temperature_k: float) -> float:
    r"""Saturation vapour pressure of water over a plane liquid surface.

    .. math::

        p_{sv} = \exp\left(A T^2 + B T + C + D/T\right)

    with :math:`A = 1.2378847\times10^{-5}\ \mathrm{K^{-2}}`,
    :math:`B = -1.9121316\times10^{-2}\ \mathrm{K^{-1}}`,
    :math:`C = 33.93711047`, :math:`D = -6.3431645\times10^{3}\ \mathrm{K}`.

    Parameters
    ----------
    temperature_k : float
        Temperature, K.

    Returns
    -------
    float
        Saturation vapour pressure, Pa.

    References
    ----------
    R. S. Davis, "Equation for the determination of the density of moist air
    (1981/91)", Metrologia 29, 67-70 (1992).
    """
    t = temperature_k
    return math.exp(1.2378847e-5 * t * t - 1.9121316e-2 * t + 33.93711047 - 6.3431645e3 / t)


def enhancement_factor(pressure_pa: float, temperature_c: float) -> float:
    r"""Enhancement factor of water vapour in air.

    .. math::

        f = \alpha + \beta p + \gamma t^2,\quad \alpha = 1.00062,\
        \beta = 3.14\times10^{-8}\ \mathrm{Pa^{-1}},\
        \gamma = 5.6\times10^{-7}\ \mathrm{K^{-2}}

    Parameters
    ----------
    pressure_pa : float
        Static pressure, Pa.
    temperature_c : float
        Temperature, degC.

    Returns
    -------
    float
        Enhancement factor, 1.

    References
    ----------
    R. S. Davis, "Equation for the determination of the density of moist air
    (1981/91)", Metrologia 29, 67-70 (1992).
    """
    return 1.00062 + 3.14e-8 * pressure_pa + 5.6e-7 * temperature_c**2


def vapour_mole_fraction(
    relative_humidity: float, temperature_c: float, pressure_pa: float
) -> float:
    r"""Mole fraction of water vapour from relative humidity.

    .. math::

        x_v = h\, f(p, t)\, \frac{p_{sv}(T)}{p}

    Parameters
    ----------
    relative_humidity : float
        Relative humidity h as a fraction, 0..1.
    temperature_c : float
        Temperature t, degC.
    pressure_pa : float
        Static pressure p, Pa.

    Returns
    -------
    float
        Vapour mole fraction, 1.

    References
    ----------
    R. S. Davis, "Equation for the determination of the density of moist air
    (1981/91)", Metrologia 29, 67-70 (1992).
    """
    psv = saturation_vapour_pressure_pa(temperature_c + ZERO_CELSIUS_K)
    return relative_humidity * enhancement_factor(pressure_pa, temperature_c) * psv / pressure_pa


def _z_terms(temperature_c: float, pressure_pa: float, x_v: float) -> tuple[float, float]:
    """(first-order bracket, second-order bracket) of the CIPM-81/91 Z."""
    t = temperature_c
    first = (
        1.58123e-6
        - 2.9331e-8 * t
        + 1.1043e-10 * t * t
        + (5.707e-6 - 2.051e-8 * t) * x_v
        + (1.9898e-4 - 2.376e-6 * t) * x_v * x_v
    )
    second = 1.83e-11 - 0.765e-8 * x_v * x_v
    return first, second


def compressibility_factor(temperature_c: float, pressure_pa: float, x_v: float) -> float:
    r"""Compressibility factor Z of moist air (CIPM-81/91).

    .. math::

        Z = 1 - \frac{p}{T}\left[a_0 + a_1 t + a_2 t^2 + (b_0 + b_1 t) x_v
            + (c_0 + c_1 t) x_v^2\right] + \frac{p^2}{T^2}\left(d + e x_v^2\right)

    with :math:`a_0 = 1.58123\times10^{-6}` K/Pa,
    :math:`a_1 = -2.9331\times10^{-8}` 1/Pa,
    :math:`a_2 = 1.1043\times10^{-10}` 1/(K Pa),
    :math:`b_0 = 5.707\times10^{-6}` K/Pa, :math:`b_1 = -2.051\times10^{-8}` 1/Pa,
    :math:`c_0 = 1.9898\times10^{-4}` K/Pa, :math:`c_1 = -2.376\times10^{-6}` 1/Pa,
    :math:`d = 1.83\times10^{-11}` K^2/Pa^2, :math:`e = -0.765\times10^{-8}` K^2/Pa^2.

    Parameters
    ----------
    temperature_c : float
        Temperature t, degC (T = t + 273.15 K).
    pressure_pa : float
        Static pressure p, Pa.
    x_v : float
        Water-vapour mole fraction, 1.

    Returns
    -------
    float
        Z, 1.

    References
    ----------
    R. S. Davis, "Equation for the determination of the density of moist air
    (1981/91)", Metrologia 29, 67-70 (1992).
    """
    p_over_t = pressure_pa / (temperature_c + ZERO_CELSIUS_K)
    first, second = _z_terms(temperature_c, pressure_pa, x_v)
    return 1.0 - p_over_t * first + p_over_t**2 * second


def dry_air_molar_mass_kg_mol(co2_fraction: float) -> float:
    r"""Molar mass of dry air with a given CO2 mole fraction (CIPM-81/91).

    .. math::

        M_a = \left[28.9635 + 12.011\,(x_{CO_2} - 0.0004)\right]\times10^{-3}

    Parameters
    ----------
    co2_fraction : float
        CO2 mole fraction, 1.

    Returns
    -------
    float
        Molar mass, kg/mol.

    References
    ----------
    R. S. Davis, "Equation for the determination of the density of moist air
    (1981/91)", Metrologia 29, 67-70 (1992).
    """
    return (28.9635 + 12.011 * (co2_fraction - 0.0004)) * 1e-3


def moist_air_density_kg_m3(
    temperature_c: float, pressure_pa: float, x_v: float, co2_fraction: float
) -> float:
    r"""Density of moist air (CIPM-81/91).

    .. math::

        \rho = \frac{p M_a}{Z R T}\left[1 - x_v\left(1 - \frac{M_v}{M_a}\right)\right]

    with :math:`R = 8.314510` J/(mol K), :math:`M_v = 18.01528` g/mol,
    :math:`M_a` from :func:`dry_air_molar_mass_kg_mol` and Z from
    :func:`compressibility_factor`.

    Parameters
    ----------
    temperature_c : float
        Temperature, degC.
    pressure_pa : float
        Static pressure, Pa.
    x_v : float
        Water-vapour mole fraction, 1.
    co2_fraction : float
        CO2 mole fraction, 1.

    Returns
    -------
    float
        Density, kg/m^3.

    References
    ----------
    R. S. Davis, "Equation for the determination of the density of moist air
    (1981/91)", Metrologia 29, 67-70 (1992).
    """
    m_a = dry_air_molar_mass_kg_mol(co2_fraction)
    z = compressibility_factor(temperature_c, pressure_pa, x_v)
    t_k = temperature_c + ZERO_CELSIUS_K
    return (
        pressure_pa * m_a / (z * GAS_CONSTANT_J_MOLK * t_k)
        * (1.0 - x_v * (1.0 - WATER_MOLAR_MASS_KG_MOL / m_a))
    )


def speed_of_sound_cramer_m_s(
    temperature_c: float, pressure_pa: float, x_w: float, co2_fraction: float
) -> float:
    r"""Zero-frequency speed of sound in humid air (Cramer's fit).

    .. math::

        c_0 = a_0 + a_1 t + a_2 t^2 + (a_3 + a_4 t + a_5 t^2) x_w
            + (a_6 + a_7 t + a_8 t^2) p + (a_9 + a_{10} t + a_{11} t^2) x_c
            + a_{12} x_w^2 + a_{13} p^2 + a_{14} x_c^2 + a_{15} x_w p x_c

    with the coefficients :math:`a_0 \ldots a_{15}` of Cramer 1993
    (``_CRAMER_A`` in this module). Stated validity: 0-30 degC, 75-102 kPa,
    :math:`x_w \le 0.06`, :math:`x_c \le 0.01`.

    Parameters
    ----------
    temperature_c : float
        Temperature t, degC.
    pressure_pa : float
        Static pressure p, Pa.
    x_w : float
        Water-vapour mole fraction, 1.
    co2_fraction : float
        CO2 mole fraction :math:`x_c`, 1.

    Returns
    -------
    float
        Speed of sound, m/s.

    References
    ----------
    O. Cramer, "The variation of the specific heat ratio and the speed of
    sound in air with temperature, pressure, humidity, and CO2
    concentration", J. Acoust. Soc. Am. 93(5), 2510-2516 (1993).
    """
    a = _CRAMER_A
    t, p, xw, xc = temperature_c, pressure_pa, x_w, co2_fraction
    return (
        a[0] + a[1] * t + a[2] * t * t
        + (a[3] + a[4] * t + a[5] * t * t) * xw
        + (a[6] + a[7] * t + a[8] * t * t) * p
        + (a[9] + a[10] * t + a[11] * t * t) * xc
        + a[12] * xw * xw
        + a[13] * p * p
        + a[14] * xc * xc
        + a[15] * xw * p * xc
    )


def viscosity_sutherland_pa_s(temperature_k: float) -> float:
    r"""Dynamic viscosity of dry air by Sutherland's law.

    .. math::

        \mu = \frac{\beta T^{3/2}}{T + S},\quad
        \beta = 1.458\times10^{-6}\ \mathrm{kg/(m\,s\,K^{1/2})},\ S = 110.4\ \mathrm{K}

    Humidity is ignored (it lowers mu by about 0.3 % at 20 degC, 50 % RH).

    Parameters
    ----------
    temperature_k : float
        Temperature, K.

    Returns
    -------
    float
        Dynamic viscosity, Pa s.

    References
    ----------
    NOAA, NASA, USAF, *U.S. Standard Atmosphere, 1976* (1976), eq. 51
    (equation number from memory).
    """
    return 1.458e-6 * temperature_k**1.5 / (temperature_k + 110.4)


def thermal_conductivity_w_mk(temperature_k: float) -> float:
    r"""Thermal conductivity of dry air.

    .. math::

        \kappa = \frac{2.64638\times10^{-3}\, T^{3/2}}{T + 245.4\times10^{-12/T}}

    Humidity is ignored.

    Parameters
    ----------
    temperature_k : float
        Temperature, K.

    Returns
    -------
    float
        Thermal conductivity, W/(m K).

    References
    ----------
    NOAA, NASA, USAF, *U.S. Standard Atmosphere, 1976* (1976), eq. 53
    (coefficients from the physics sheet section 1.6; checked here only
    against CoolProp, within 1 % over 0-30 degC).
    """
    t = temperature_k
    return 2.64638e-3 * t**1.5 / (t + 245.4 * 10.0 ** (-12.0 / t))


def heat_capacity_cp_j_kgk(x_v: float, co2_fraction: float) -> float:
    r"""Isobaric specific heat capacity of humid air by ideal mixing.

    .. math::

        c_p = \frac{(1 - x_v)\,C_{p,a} + x_v\,C_{p,v}}{(1 - x_v) M_a + x_v M_v}

    with molar heat capacities :math:`C_{p,a} = 29.14` J/(mol K) for dry air
    and :math:`C_{p,v} = 33.57` J/(mol K) for water vapour, both at 20 degC
    and held constant (they change by less than 0.1 % over 0-30 degC).

    Parameters
    ----------
    x_v : float
        Water-vapour mole fraction, 1.
    co2_fraction : float
        CO2 mole fraction, 1 (through the molar mass of dry air).

    Returns
    -------
    float
        Specific heat capacity, J/(kg K).

    References
    ----------
    Dry air: E. W. Lemmon, R. T. Jacobsen, S. G. Penoncello, D. G. Friend,
    "Thermodynamic properties of air and mixtures of nitrogen, argon, and
    oxygen from 60 to 2000 K at pressures to 2000 MPa", J. Phys. Chem. Ref.
    Data 29(3), 331-385 (2000), at 20 degC and 101.325 kPa (evaluated with
    CoolProp). Vapour: ideal-gas part of W. Wagner, A. Pruss, "The IAPWS
    formulation 1995 for the thermodynamic properties of ordinary water
    substance for general and scientific use", J. Phys. Chem. Ref. Data
    31(2), 387-535 (2002), at 20 degC (evaluated with CoolProp).
    """
    m_a = dry_air_molar_mass_kg_mol(co2_fraction)
    molar_cp = (1.0 - x_v) * DRY_AIR_MOLAR_CP_J_MOLK + x_v * WATER_VAPOUR_MOLAR_CP_J_MOLK
    molar_mass = (1.0 - x_v) * m_a + x_v * WATER_MOLAR_MASS_KG_MOL
    return molar_cp / molar_mass


def ratio_of_specific_heats(
    speed_of_sound_m_s: float,
    density_kg_m3: float,
    temperature_c: float,
    pressure_pa: float,
    x_v: float,
) -> float:
    r"""Ratio of specific heats from the speed of sound, density and Z.

    The exact identity :math:`c^2 = \gamma\,(\partial p/\partial\rho)_T`
    with :math:`\rho = pM/(ZRT)` gives

    .. math::

        \gamma = \frac{\rho c^2}{p}\left(1 - \frac{p}{Z}
            \frac{\partial Z}{\partial p}\Big|_{T, x_v}\right)

    which reduces to the ideal-gas :math:`\gamma = \rho c^2/p` for Z = 1.
    Z and its pressure derivative are those of CIPM-81/91.

    Parameters
    ----------
    speed_of_sound_m_s : float
        Speed of sound, m/s.
    density_kg_m3 : float
        Density, kg/m^3.
    temperature_c : float
        Temperature, degC.
    pressure_pa : float
        Static pressure, Pa.
    x_v : float
        Water-vapour mole fraction, 1.

    Returns
    -------
    float
        gamma = cp/cv, 1.

    References
    ----------
    Identity: any thermodynamics text, e.g. L. E. Kinsler, A. R. Frey,
    A. B. Coppens, J. V. Sanders, *Fundamentals of Acoustics*, 4th ed. (2000),
    ch. 5 (section from memory). Z: R. S. Davis, "Equation for the
    determination of the density of moist air (1981/91)", Metrologia 29,
    67-70 (1992).
    """
    p_over_t = pressure_pa / (temperature_c + ZERO_CELSIUS_K)
    first, second = _z_terms(temperature_c, pressure_pa, x_v)
    z = 1.0 - p_over_t * first + p_over_t**2 * second
    p_dz_dp = -p_over_t * first + 2.0 * p_over_t**2 * second
    return density_kg_m3 * speed_of_sound_m_s**2 / pressure_pa * (1.0 - p_dz_dp / z)


def validity_problems(
    temperature_c: float, pressure_pa: float, x_v: float, co2_fraction: float
) -> list[str]:
    """Which inputs lie outside :data:`VALIDITY_RANGE` (empty list if none).

    Parameters
    ----------
    temperature_c : float
        Temperature, degC.
    pressure_pa : float
        Static pressure, Pa.
    x_v : float
        Water-vapour mole fraction, 1.
    co2_fraction : float
        CO2 mole fraction, 1.

    Returns
    -------
    list of str
        One short phrase per quantity out of range.
    """
    values = {
        "temperature_c": temperature_c,
        "pressure_pa": pressure_pa,
        "vapour_mole_fraction": x_v,
        "co2_fraction": co2_fraction,
    }
    problems = []
    for name, value in values.items():
        lo, hi = VALIDITY_RANGE[name]
        if not lo <= value <= hi:
            problems.append(f"{name} = {value:g} outside {lo:g}..{hi:g}")
    return problems


def air_state(
    temperature_c: float = 20.0,
    relative_humidity: float = 0.5,
    pressure_pa: float = 101325.0,
    co2_fraction: float = 0.0004,
) -> AirState:
    """Properties of humid air at the given conditions.

    Steps: vapour mole fraction (Davis 1992); speed of sound (Cramer 1993);
    density with the CIPM-81/91 compressibility factor (Davis 1992);
    viscosity and thermal conductivity of dry air (U.S. Standard Atmosphere
    1976); cp by ideal mixing; gamma from c, rho and Z; Prandtl number
    mu cp / kappa. See the function for each step for formulas and sources.

    Parameters
    ----------
    temperature_c : float
        Air temperature, degC; must be above -273.15. Default 20.
    relative_humidity : float
        Relative humidity as a fraction, 0..1 (not percent). Default 0.5.
    pressure_pa : float
        Static pressure, Pa; must be > 0. Default 101325.
    co2_fraction : float
        CO2 mole fraction, 0 <= x < 1. Default 0.0004 (400 ppm).

    Returns
    -------
    AirState
        All properties in SI units. Outside :data:`VALIDITY_RANGE` the values
        are extrapolated and ``in_validity_range`` is False.

    Raises
    ------
    ValueError
        For non-finite inputs, humidity outside 0..1, temperature at or below
        -273.15 degC, pressure <= 0, CO2 fraction outside [0, 1), or a vapour
        pressure at or above the total pressure.
    """
    _check_finite(
        temperature_c=temperature_c,
        relative_humidity=relative_humidity,
        pressure_pa=pressure_pa,
        co2_fraction=co2_fraction,
    )
    if not 0.0 <= relative_humidity <= 1.0:
        raise ValueError(
            f"relative_humidity must be a fraction in 0..1 (not percent), got {relative_humidity!r}"
        )
    if temperature_c <= -ZERO_CELSIUS_K:
        raise ValueError(f"temperature_c must be above -273.15 degC, got {temperature_c!r}")
    if pressure_pa <= 0.0:
        raise ValueError(f"pressure_pa must be > 0 Pa, got {pressure_pa!r}")
    if not 0.0 <= co2_fraction < 1.0:
        raise ValueError(f"co2_fraction must be in [0, 1), got {co2_fraction!r}")

    t_k = temperature_c + ZERO_CELSIUS_K
    x_v = vapour_mole_fraction(relative_humidity, temperature_c, pressure_pa)
    if x_v >= 1.0:
        raise ValueError(
            f"vapour pressure exceeds the total pressure at {temperature_c!r} degC, "
            f"RH {relative_humidity!r}, {pressure_pa!r} Pa; lower the humidity or temperature"
        )
    c = speed_of_sound_cramer_m_s(temperature_c, pressure_pa, x_v, co2_fraction)
    rho = moist_air_density_kg_m3(temperature_c, pressure_pa, x_v, co2_fraction)
    mu = viscosity_sutherland_pa_s(t_k)
    kappa = thermal_conductivity_w_mk(t_k)
    cp = heat_capacity_cp_j_kgk(x_v, co2_fraction)
    gamma = ratio_of_specific_heats(c, rho, temperature_c, pressure_pa, x_v)
    return AirState(
        temperature_c=float(temperature_c),
        relative_humidity=float(relative_humidity),
        pressure_pa=float(pressure_pa),
        co2_fraction=float(co2_fraction),
        speed_of_sound_m_s=c,
        density_kg_m3=rho,
        viscosity_pa_s=mu,
        thermal_conductivity_w_mk=kappa,
        gamma=gamma,
        cp_j_kgk=cp,
        prandtl=mu * cp / kappa,
        vapour_mole_fraction=x_v,
        in_validity_range=not validity_problems(temperature_c, pressure_pa, x_v, co2_fraction),
    )
