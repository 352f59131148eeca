"""Tests for characterize.physics.air against CoolProp and the physics sheet."""

from __future__ import annotations

import dataclasses
import json
import math

import pytest
from CoolProp.CoolProp import HAPropsSI, PropsSI

from characterize.physics import air
from characterize.physics.air import AirState, air_state

P_ATM = 101325.0
DRY_TEMPERATURES_C = (0.0, 10.0, 20.0, 30.0)


def _coolprop_air(prop: str, temperature_c: float, pressure_pa: float = P_ATM) -> float:
    return PropsSI(prop, "T", temperature_c + 273.15, "P", pressure_pa, "Air")


def _coolprop_humid(
    prop: str, temperature_c: float, rh: float, pressure_pa: float = P_ATM
) -> float:
    return HAPropsSI(prop, "T", temperature_c + 273.15, "P", pressure_pa, "R", rh)


class TestSpeedOfSound:
    @pytest.mark.parametrize("temperature_c", DRY_TEMPERATURES_C)
    def test_dry_matches_coolprop(self, temperature_c):
        state = air_state(temperature_c, 0.0, P_ATM)
        reference = _coolprop_air("A", temperature_c)  # CoolProp HEOS Air
        assert state.speed_of_sound_m_s == pytest.approx(reference, rel=5e-4)

    @pytest.mark.parametrize(
        ("temperature_c", "rh", "co2", "expected_m_s"),
        [
            (20.0, 0.5, 400e-6, 343.987),  # physics sheet recomputation of Cramer 1993
            (20.0, 1.0, 400e-6, 344.614),  # physics sheet recomputation of Cramer 1993
            (0.0, 0.0, 314e-6, 331.455),  # physics sheet recomputation of Cramer 1993
            (20.0, 0.0, 400e-6, 343.359),  # physics sheet recomputation of Cramer 1993
        ],
    )
    def test_cramer_check_values(self, temperature_c, rh, co2, expected_m_s):
        state = air_state(temperature_c, rh, P_ATM, co2)
        assert state.speed_of_sound_m_s == pytest.approx(expected_m_s, abs=1.5e-3)

    def test_humidity_raises_speed(self):
        # common practice: lighter, vapour-rich air carries sound faster
        dry = air_state(20.0, 0.0)
        humid = air_state(20.0, 0.8)
        assert humid.speed_of_sound_m_s > dry.speed_of_sound_m_s


class TestDavis:
    def test_saturation_pressure_matches_coolprop_water(self):
        reference = PropsSI("P", "T", 293.15, "Q", 0, "Water")  # CoolProp HEOS Water
        assert air.saturation_vapour_pressure_pa(293.15) == pytest.approx(reference, rel=2e-4)

    def test_saturation_pressure_sheet_value(self):
        # physics sheet section 1.3 recomputation of Davis 1992: 2339.16 Pa
        assert air.saturation_vapour_pressure_pa(293.15) == pytest.approx(2339.16, abs=0.01)

    def test_enhancement_factor_sheet_value(self):
        # physics sheet section 1.3 recomputation of Davis 1992: f = 1.00403
        assert air.enhancement_factor(P_ATM, 20.0) == pytest.approx(1.00403, abs=1e-5)

    def test_vapour_mole_fraction_matches_coolprop(self):
        reference = _coolprop_humid("psi_w", 20.0, 0.5)  # CoolProp HAPropsSI
        assert air.vapour_mole_fraction(0.5, 20.0, P_ATM) == pytest.approx(reference, rel=5e-4)

    @pytest.mark.parametrize("temperature_c", DRY_TEMPERATURES_C)
    def test_dry_compressibility_matches_coolprop(self, temperature_c):
        reference = _coolprop_air("Z", temperature_c)  # CoolProp HEOS Air
        assert air.compressibility_factor(temperature_c, P_ATM, 0.0) == pytest.approx(
            reference, abs=5e-5
        )

    def test_humid_compressibility_matches_coolprop(self):
        x_v = air.vapour_mole_fraction(0.5, 20.0, P_ATM)
        reference = _coolprop_humid("Z", 20.0, 0.5)  # CoolProp HAPropsSI
        assert air.compressibility_factor(20.0, P_ATM, x_v) == pytest.approx(reference, abs=5e-5)

    def test_compressibility_is_not_one(self):
        # physics sheet section 1.4: Z ~ 0.9996 for dry air at 20 degC, 1 atm
        z = air.compressibility_factor(20.0, P_ATM, 0.0)
        assert z == pytest.approx(0.9996, abs=1e-4)
        assert z < 1.0

    @pytest.mark.parametrize("temperature_c", DRY_TEMPERATURES_C)
    def test_dry_density_matches_coolprop(self, temperature_c):
        state = air_state(temperature_c, 0.0, P_ATM)
        reference = _coolprop_air("D", temperature_c)  # CoolProp HEOS Air
        assert state.density_kg_m3 == pytest.approx(reference, rel=5e-4)

    def test_humid_density_matches_coolprop(self):
        state = air_state(20.0, 0.5, P_ATM)
        reference = 1.0 / _coolprop_humid("Vha", 20.0, 0.5)  # CoolProp HAPropsSI
        assert state.density_kg_m3 == pytest.approx(reference, rel=5e-4)

    def test_density_scales_with_pressure(self):
        # common practice: density nearly proportional to p at fixed T (ideal gas)
        low = air_state(20.0, 0.0, 80e3)
        high = air_state(20.0, 0.0, 100e3)
        assert high.density_kg_m3 / low.density_kg_m3 == pytest.approx(100 / 80, rel=1e-3)

    def test_molar_mass_of_dry_air(self):
        # Davis 1992: M_a = 28.9635 g/mol at 400 ppm CO2
        assert air.dry_air_molar_mass_kg_mol(0.0004) == pytest.approx(28.9635e-3, rel=1e-12)


class TestTransport:
    @pytest.mark.parametrize("temperature_c", DRY_TEMPERATURES_C)
    def test_viscosity_matches_coolprop(self, temperature_c):
        state = air_state(temperature_c, 0.0)
        reference = _coolprop_air("V", temperature_c)  # CoolProp HEOS Air
        assert state.viscosity_pa_s == pytest.approx(reference, rel=6e-3)

    def test_viscosity_sheet_value(self):
        # physics sheet section 1.5 recomputation of Sutherland (US Std Atm 1976)
        assert air.viscosity_sutherland_pa_s(293.15) == pytest.approx(1.8134e-5, rel=1e-4)

    @pytest.mark.parametrize("temperature_c", DRY_TEMPERATURES_C)
    def test_thermal_conductivity_matches_coolprop(self, temperature_c):
        state = air_state(temperature_c, 0.0)
        reference = _coolprop_air("L", temperature_c)  # CoolProp HEOS Air
        assert state.thermal_conductivity_w_mk == pytest.approx(reference, rel=1e-2)

    def test_thermal_conductivity_sheet_value(self):
        # physics sheet section 1.6 recomputation of US Std Atm 1976: 0.025720 at 20 degC
        assert air.thermal_conductivity_w_mk(293.15) == pytest.approx(0.025720, rel=1e-4)


class TestHeatCapacities:
    @pytest.mark.parametrize("temperature_c", DRY_TEMPERATURES_C)
    def test_gamma_matches_coolprop(self, temperature_c):
        state = air_state(temperature_c, 0.0)
        reference = _coolprop_air("C", temperature_c) / _coolprop_air("O", temperature_c)
        assert state.gamma == pytest.approx(reference, rel=2e-4)  # CoolProp HEOS Air

    def test_gamma_real_gas_term_matters(self):
        # the Z-derivative term moves gamma by about 4e-4 at 1 atm (CoolProp HEOS Air
        # gamma is 1.40197 at 20 degC; rho c^2 / p alone is 1.4015)
        state = air_state(20.0, 0.0)
        ideal = state.density_kg_m3 * state.speed_of_sound_m_s**2 / state.pressure_pa
        reference = _coolprop_air("C", 20.0) / _coolprop_air("O", 20.0)
        assert abs(state.gamma - reference) < abs(ideal - reference)

    @pytest.mark.parametrize("temperature_c", DRY_TEMPERATURES_C)
    def test_dry_cp_matches_coolprop(self, temperature_c):
        state = air_state(temperature_c, 0.0)
        reference = _coolprop_air("C", temperature_c)  # CoolProp HEOS Air
        assert state.cp_j_kgk == pytest.approx(reference, rel=1e-3)

    @pytest.mark.parametrize(("temperature_c", "rh"), [(20.0, 0.5), (25.0, 0.8)])
    def test_humid_cp_matches_coolprop(self, temperature_c, rh):
        state = air_state(temperature_c, rh)
        reference = _coolprop_humid("cp_ha", temperature_c, rh)  # CoolProp HAPropsSI
        assert state.cp_j_kgk == pytest.approx(reference, rel=2e-3)

    @pytest.mark.parametrize("temperature_c", DRY_TEMPERATURES_C)
    def test_prandtl_matches_coolprop(self, temperature_c):
        state = air_state(temperature_c, 0.0)
        reference = _coolprop_air("Prandtl", temperature_c)  # CoolProp HEOS Air
        assert state.prandtl == pytest.approx(reference, rel=1e-2)
        assert state.prandtl == pytest.approx(
            state.viscosity_pa_s * state.cp_j_kgk / state.thermal_conductivity_w_mk, rel=1e-12
        )


class TestValidity:
    def test_inside_range(self):
        assert air_state(20.0, 0.5, P_ATM).in_validity_range

    @pytest.mark.parametrize(
        ("temperature_c", "rh", "pressure_pa", "co2"),
        [
            (40.0, 0.5, P_ATM, 0.0004),  # Cramer 1993 stated range: 0-30 degC
            (-10.0, 0.5, P_ATM, 0.0004),
            (20.0, 0.5, 50e3, 0.0004),  # below the 60 kPa tolerance
            (20.0, 0.5, P_ATM, 0.02),  # Cramer 1993 stated range: CO2 <= 1 %
        ],
    )
    def test_outside_range_still_computes(self, temperature_c, rh, pressure_pa, co2):
        state = air_state(temperature_c, rh, pressure_pa, co2)
        assert not state.in_validity_range
        assert all(math.isfinite(v) for v in state.to_dict().values())
        assert air.validity_problems(
            temperature_c, pressure_pa, state.vapour_mole_fraction, co2
        )

    def test_widened_pressure_window(self):
        # 104 kPa is outside Cramer's stated 75-102 kPa but inside the 60-110 kPa tolerance
        assert air_state(20.0, 0.5, 104e3).in_validity_range
        assert not (
            air.CRAMER_STATED_RANGE["pressure_pa"][0]
            <= 104e3
            <= air.CRAMER_STATED_RANGE["pressure_pa"][1]
        )


class TestBadInput:
    @pytest.mark.parametrize("rh", [-0.01, 1.01, 50.0])
    def test_humidity_outside_zero_one(self, rh):
        with pytest.raises(ValueError, match=r"relative_humidity.*0\.\.1"):
            air_state(20.0, rh)

    @pytest.mark.parametrize("rh", [0.0, 1.0])
    def test_humidity_limits_accepted(self, rh):
        assert air_state(20.0, rh).relative_humidity == rh

    @pytest.mark.parametrize("temperature_c", [-273.15, -300.0])
    def test_temperature_at_or_below_absolute_zero(self, temperature_c):
        with pytest.raises(ValueError, match=r"above -273\.15"):
            air_state(temperature_c, 0.0)

    @pytest.mark.parametrize("pressure_pa", [0.0, -1.0])
    def test_pressure_not_positive(self, pressure_pa):
        with pytest.raises(ValueError, match=r"pressure_pa must be > 0"):
            air_state(20.0, 0.5, pressure_pa)

    @pytest.mark.parametrize("co2", [-1e-6, 1.0])
    def test_co2_outside_range(self, co2):
        with pytest.raises(ValueError, match=r"co2_fraction must be in \[0, 1\)"):
            air_state(20.0, 0.5, P_ATM, co2)

    @pytest.mark.parametrize("name", ["temperature_c", "relative_humidity", "pressure_pa"])
    def test_not_finite(self, name):
        kwargs = {name: math.nan}
        with pytest.raises(ValueError, match=f"{name} must be finite"):
            air_state(**kwargs)

    def test_vapour_pressure_above_total(self):
        # CoolProp HEOS Water: saturation pressure at 120 degC is about 199 kPa > 1 atm
        with pytest.raises(ValueError, match="vapour pressure exceeds"):
            air_state(120.0, 1.0, P_ATM)


class TestAirState:
    def test_to_dict_is_plain_and_json_safe(self):
        d = air_state().to_dict()
        assert set(d) == {f.name for f in dataclasses.fields(AirState)}
        assert all(type(v) in (float, bool) for v in d.values())
        assert json.loads(json.dumps(d)) == d

    def test_frozen(self):
        state = air_state()
        with pytest.raises(dataclasses.FrozenInstanceError):
            state.temperature_c = 25.0  # type: ignore[misc]

    def test_defaults(self):
        state = air_state()
        assert (state.temperature_c, state.relative_humidity, state.pressure_pa) == (
            20.0,
            0.5,
            P_ATM,
        )
        assert state.co2_fraction == 0.0004
