"""Density of water, for cavity volumes measured by filling with water.

:func:`water_density_kg_m3` is the Tanaka et al. (2001) formula, the one behind
the CIPM's recommended table for the density of water; :func:`volume_from_water_mass_m3`
turns a weighed fill ("355 g" at 20 degC) into the cavity's volume.
"""

from __future__ import annotations

import math

__all__ = ["TANAKA_RANGE_C", "water_density_kg_m3", "volume_from_water_mass_m3"]

#: Temperature range (degC) of the Tanaka et al. 2001 formula.
TANAKA_RANGE_C = (0.0, 40.0)

# Tanaka et al. 2001, eq. 1 coefficients (air-free water of standard isotopic
# composition at 101.325 kPa).
_A1_C = -3.983035
_A2_C = 301.797
_A3_C2 = 522528.9
_A4_C = 69.34881
_A5_KG_M3 = 999.974950


def water_density_kg_m3(temperature_c: float) -> float:
    r"""Density of liquid water at 101.325 kPa.

    .. math::

        \rho_w(t) = a_5\left[1 - \frac{(t + a_1)^2 (t + a_2)}{a_3 (t + a_4)}\right]

    with :math:`a_1 = -3.983035` degC, :math:`a_2 = 301.797` degC,
    :math:`a_3 = 522528.9` degC^2, :math:`a_4 = 69.34881` degC and
    :math:`a_5 = 999.974950` kg/m^3. Stated for 0 to 40 degC and air-free
    water; air-saturated tap water is lighter by about 0.003 kg/m^3 and its
    dissolved salts change it by far less than the weighing error of a fill,
    so neither is corrected.

    Parameters
    ----------
    temperature_c : float
        Water temperature t, degC (0 to 40).

    Returns
    -------
    float
        Density, kg/m^3.

    Raises
    ------
    ValueError
        Temperature not finite or outside 0 to 40 degC.

    References
    ----------
    M. Tanaka, G. Girard, R. Davis, A. Peuto, N. Bignell, "Recommended table
    for the density of water between 0 degC and 40 degC based on recent
    experimental reports", Metrologia 38(4), 301-309 (2001), eq. 1.
    """
    if isinstance(temperature_c, bool) or not isinstance(temperature_c, (int, float)):
        raise ValueError(f"temperature_c must be a number, got {temperature_c!r}")
    lo, hi = TANAKA_RANGE_C
    if not (math.isfinite(temperature_c) and lo <= temperature_c <= hi):
        raise ValueError(
            f"water temperature must be {lo:g} to {hi:g} degC (liquid water), got {temperature_c!r}"
        )
    t = float(temperature_c)
    return _A5_KG_M3 * (1.0 - (t + _A1_C) ** 2 * (t + _A2_C) / (_A3_C2 * (t + _A4_C)))


def volume_from_water_mass_m3(mass_kg: float, temperature_c: float) -> float:
    r"""Cavity volume from the mass of water that fills it.

    .. math::

        V = m / \rho_w(t)

    with :math:`\rho_w` from :func:`water_density_kg_m3`. Weighing in air
    without a buoyancy correction reads the mass about 0.1 % low (air of
    1.2 kg/m^3 against steel weights of 8000 kg/m^3 and water of 998 kg/m^3),
    which is left to the user.

    Parameters
    ----------
    mass_kg : float
        Mass of the water, kg (> 0).
    temperature_c : float
        Water temperature, degC (0 to 40).

    Returns
    -------
    float
        Volume, m^3.

    References
    ----------
    M. Tanaka et al., Metrologia 38(4), 301-309 (2001).
    """
    if isinstance(mass_kg, bool) or not isinstance(mass_kg, (int, float)):
        raise ValueError(f"mass_kg must be a number, got {mass_kg!r}")
    if not (math.isfinite(mass_kg) and mass_kg > 0):
        raise ValueError(f"mass_kg must be finite and > 0, got {mass_kg!r}")
    return float(mass_kg) / water_density_kg_m3(temperature_c)
