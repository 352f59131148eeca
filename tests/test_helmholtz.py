"""Tests for characterize.physics.helmholtz: end corrections, lumped f0, inversion."""

from __future__ import annotations

import dataclasses
import json
import math

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from characterize.physics import helmholtz
from characterize.physics.air import AirState, air_state
from characterize.physics.geometry import (
    END_CONDITIONS,
    AirOverrides,
    Cavity,
    Neck,
    ResonatorObject,
)
from characterize.physics.helmholtz import (
    FLANGED_END_FACTOR,
    PLAUSIBLE_END_CORRECTION_OVER_RADIUS,
    UNFLANGED_END_FACTOR,
    Derived,
    Prediction,
    derive_from_f0,
    end_correction_m,
    helmholtz_f0_hz,
    predict,
)

# The physics sheet's air: dry air at 20 degC, 101325 Pa from CoolProp HEOS Air.
SHEET_C_M_S = 343.344  # CoolProp HEOS Air, via the physics sheet header
SHEET_RHO_KG_M3 = 1.20458  # CoolProp HEOS Air, via the physics sheet header


def _sheet_air() -> AirState:
    """An AirState carrying the sheet's c and rho (other fields are not used here)."""
    return AirState(
        temperature_c=20.0,
        relative_humidity=0.0,
        pressure_pa=101325.0,
        co2_fraction=0.0,
        speed_of_sound_m_s=SHEET_C_M_S,
        density_kg_m3=SHEET_RHO_KG_M3,
        viscosity_pa_s=1.8206e-5,
        thermal_conductivity_w_mk=0.025874,
        gamma=1.40197,
        cp_j_kgk=1006.14,
        prandtl=0.7080,
    )


def _bottle(outer: str = "unflanged", inner: str = "flanged") -> ResonatorObject:
    """The physics sheet's "bottle": a = 9 mm, L = 40 mm, V = 0.35 L."""
    return ResonatorObject(
        name="bottle",
        cavity=Cavity(volume_m3=0.35e-3),
        neck=Neck(diameter_m=0.018, length_m=0.040, outer_end=outer, inner_end=inner),
        air=AirOverrides(),
        source_path="<test>",
    )


class TestEndCorrections:
    def test_flanged_factor(self):
        # Rayleigh 1896: 8/(3 pi) = 0.84883
        assert FLANGED_END_FACTOR == pytest.approx(0.8488, abs=5e-5)
        assert FLANGED_END_FACTOR == pytest.approx(8 / (3 * math.pi), rel=1e-15)

    def test_unflanged_factor(self):
        # Levine & Schwinger 1948: 0.6133 a
        assert UNFLANGED_END_FACTOR == pytest.approx(0.6133, abs=1e-12)

    @pytest.mark.parametrize(
        ("condition", "expected_m"),
        [
            # physics sheet section 3 bottle check (Levine & Schwinger 1948): 5.520 mm
            ("unflanged", 5.520e-3),
            ("flanged", 7.639e-3),  # Rayleigh 1896: 0.84883 * 9 mm = 7.639 mm (by hand)
        ],
    )
    def test_bottle_radius(self, condition, expected_m):
        assert end_correction_m(0.009, condition) == pytest.approx(expected_m, abs=1e-6)

    def test_scales_with_radius(self):
        # common practice: low-frequency end corrections are proportional to a
        assert end_correction_m(0.02, "flanged") == pytest.approx(
            2 * end_correction_m(0.01, "flanged"), rel=1e-15
        )

    @pytest.mark.parametrize("condition", ["baffled", "Flanged", "", None])
    def test_unknown_condition_lists_allowed(self, condition):
        with pytest.raises(ValueError, match=r"one of 'flanged', 'unflanged'"):
            end_correction_m(0.009, condition)

    @pytest.mark.parametrize("radius", [0.0, -0.009, math.nan, math.inf])
    def test_bad_radius(self, radius):
        with pytest.raises(ValueError, match="radius_m must be finite and > 0"):
            end_correction_m(radius, "flanged")

    def test_conditions_agree_with_geometry(self):
        assert set(helmholtz.END_FACTORS) == set(END_CONDITIONS)

    def test_plausible_range_covers_sheet_totals(self):
        # physics sheet section 3 typical totals 1.108a .. 1.67a (and 1.57a for a thin wall)
        lo, hi = PLAUSIBLE_END_CORRECTION_OVER_RADIUS
        for total in (1.108, 1.43, 1.57, 1.67, UNFLANGED_END_FACTOR + FLANGED_END_FACTOR):
            assert lo < total < hi


class TestLumpedFormula:
    def test_sheet_bottle_with_sheet_end_corrections(self):
        # Physics sheet section 2 check: with its end corrections, 0.6133a outside
        # (Levine & Schwinger 1948) and Kergomard & Garcia 1987 at xi = 0.3 inside,
        # 0.82 (1 - 1.35*0.3 + 0.31*0.3**3) a = 0.49476 a, f0 = 208.433 Hz.
        a = 0.009
        inner = 0.82 * (1 - 1.35 * 0.3 + 0.31 * 0.3**3) * a  # 4.4529 mm
        l_eff = 0.040 + 0.6133 * a + inner  # 49.973 mm
        f0 = helmholtz_f0_hz(SHEET_C_M_S, math.pi * a**2, 0.35e-3, l_eff)
        assert l_eff == pytest.approx(49.973e-3, abs=1e-6)
        assert f0 == pytest.approx(208.433, abs=1e-3)

    def test_sheet_lumped_elements(self):
        # Physics sheet section 2 check: M = 236.55 kg/m^4, C = 2.4648e-9 m^3/Pa
        s = math.pi * 0.009**2
        assert helmholtz.acoustic_mass_kg_m4(SHEET_RHO_KG_M3, 49.973e-3, s) == pytest.approx(
            236.55, abs=0.01
        )
        assert helmholtz.compliance_m3_pa(0.35e-3, SHEET_RHO_KG_M3, SHEET_C_M_S) == pytest.approx(
            2.4648e-9, rel=1e-4
        )

    def test_predict_bottle_by_hand(self):
        # Own hand check (not the sheet's 208.433 Hz: ours is flanged inside, 0.8488a,
        # where the sheet uses Kergomard & Garcia's 0.4948a).
        #   a = 9 mm, S = pi a^2 = 2.544690e-4 m^2, L = 40 mm, V = 0.35 L = 3.5e-4 m^3
        #   outer (unflanged, Levine & Schwinger 1948): 0.6133 * 9 mm = 5.5197 mm
        #   inner (flanged, Rayleigh 1896): 8/(3 pi) * 9 mm = 0.848826 * 9 mm = 7.6394 mm
        #   L_eff = 40 + 5.5197 + 7.6394 = 53.1591 mm
        #   S/(V L_eff) = 2.544690e-4 / (3.5e-4 * 0.0531591) = 13.67694 1/m^2
        #   sqrt(...) = 3.698235 1/m ; c/(2 pi) = 343.344 / 6.283185 = 54.64489 m/s
        #   f0 = 54.64489 * 3.698235 = 202.0896 Hz
        a, length, volume = 0.009, 0.040, 0.35e-3
        s = math.pi * a * a
        outer = 0.6133 * a
        inner = 8.0 / (3.0 * math.pi) * a
        l_eff = length + outer + inner
        f0_by_hand = SHEET_C_M_S / (2 * math.pi) * math.sqrt(s / (volume * l_eff))

        p = predict(_bottle(), _sheet_air())
        assert p.f0_hz == pytest.approx(f0_by_hand, rel=1e-12)
        assert p.f0_hz == pytest.approx(202.0896, abs=1e-4)  # hand value above
        assert p.effective_neck_length_m == pytest.approx(53.1591e-3, abs=1e-7)
        assert p.outer_end_correction_m == pytest.approx(5.5197e-3, abs=1e-7)
        assert p.inner_end_correction_m == pytest.approx(7.6394e-3, abs=1e-7)
        assert p.end_correction_m == pytest.approx(outer + inner, rel=1e-12)
        assert p.acoustic_mass_kg_m4 == pytest.approx(SHEET_RHO_KG_M3 * l_eff / s, rel=1e-12)
        assert p.compliance_m3_pa == pytest.approx(
            volume / (SHEET_RHO_KG_M3 * SHEET_C_M_S**2), rel=1e-12
        )

    def test_resonance_of_lumped_elements(self):
        # Physics sheet section 2: omega0 = 1/sqrt(M C)
        p = predict(_bottle(), air_state(21.0, 0.45))
        omega0 = 1.0 / math.sqrt(p.acoustic_mass_kg_m4 * p.compliance_m3_pa)
        assert omega0 / (2 * math.pi) == pytest.approx(p.f0_hz, rel=1e-12)

    def test_end_conditions_order_frequencies(self):
        # common practice: a flanged end adds more length, so f0 is lower
        air = _sheet_air()
        f_uu = predict(_bottle("unflanged", "unflanged"), air).f0_hz
        f_uf = predict(_bottle("unflanged", "flanged"), air).f0_hz
        f_ff = predict(_bottle("flanged", "flanged"), air).f0_hz
        assert f_uu > f_uf > f_ff

    def test_f0_scaling(self):
        # Rayleigh 1896: f0 proportional to c and to 1/sqrt(V)
        f = helmholtz_f0_hz(343.0, 2.5e-4, 3.5e-4, 0.05)
        assert helmholtz_f0_hz(2 * 343.0, 2.5e-4, 3.5e-4, 0.05) == pytest.approx(2 * f, rel=1e-14)
        assert helmholtz_f0_hz(343.0, 2.5e-4, 4 * 3.5e-4, 0.05) == pytest.approx(f / 2, rel=1e-14)

    @pytest.mark.parametrize("bad", [0.0, -1.0, math.nan, math.inf])
    @pytest.mark.parametrize("position", range(4))
    def test_f0_rejects_bad_arguments(self, bad, position):
        args = [343.0, 2.5e-4, 3.5e-4, 0.05]
        args[position] = bad
        with pytest.raises(ValueError, match="must be finite and > 0"):
            helmholtz_f0_hz(*args)

    def test_prediction_to_dict(self):
        d = predict(_bottle(), _sheet_air()).to_dict()
        assert {"f0_hz", "effective_neck_length_m", "end_correction_m"} <= set(d)
        assert set(d) == {f.name for f in dataclasses.fields(Prediction)}
        assert all(type(v) is float for v in d.values())
        assert json.loads(json.dumps(d)) == d


class TestDeriveFromF0:
    def test_round_trip_bottle(self):
        obj, air = _bottle(), air_state(21.0, 0.45)
        p = predict(obj, air)
        d = derive_from_f0(p.f0_hz, 0.0, obj, air)
        assert d.effective_neck_length_m == pytest.approx(p.effective_neck_length_m, rel=1e-9)
        assert d.end_correction_m == pytest.approx(p.end_correction_m, rel=1e-9)
        assert d.end_correction_over_radius == pytest.approx(
            UNFLANGED_END_FACTOR + FLANGED_END_FACTOR, rel=1e-9
        )
        assert d.effective_neck_length_stderr_m == 0.0

    @settings(max_examples=60, database=None, deadline=None)
    @given(
        diameter_m=st.floats(1e-3, 0.2),
        length_m=st.floats(1e-4, 0.5),
        volume_m3=st.floats(1e-6, 0.5),
        outer=st.sampled_from(END_CONDITIONS),
        inner=st.sampled_from(END_CONDITIONS),
        temperature_c=st.floats(0.0, 30.0),
    )
    def test_round_trip_any_geometry(
        self, diameter_m, length_m, volume_m3, outer, inner, temperature_c
    ):
        obj = ResonatorObject(
            "h", Cavity(volume_m3), Neck(diameter_m, length_m, outer, inner), AirOverrides(), "-"
        )
        air = air_state(temperature_c, 0.5)
        p = predict(obj, air)
        d = derive_from_f0(p.f0_hz, 0.0, obj, air)
        assert d.effective_neck_length_m == pytest.approx(p.effective_neck_length_m, rel=1e-9)
        assert d.end_correction_m == pytest.approx(p.end_correction_m, rel=1e-9)

    def test_stderr_matches_numerical_derivative(self):
        obj, air = _bottle(), _sheet_air()
        f0, sigma_f = 205.0, 0.37
        d = derive_from_f0(f0, sigma_f, obj, air)
        h = 1e-4  # Hz; central difference of L_eff(f0)
        up = derive_from_f0(f0 + h, 0.0, obj, air).effective_neck_length_m
        down = derive_from_f0(f0 - h, 0.0, obj, air).effective_neck_length_m
        numeric = abs((up - down) / (2 * h)) * sigma_f
        assert d.effective_neck_length_stderr_m == pytest.approx(numeric, rel=1e-6)
        assert d.end_correction_stderr_m == pytest.approx(numeric, rel=1e-6)
        assert d.end_correction_over_radius_stderr == pytest.approx(numeric / 0.009, rel=1e-6)

    def test_high_f0_gives_short_neck(self):
        # common practice: a measured f0 above prediction means a smaller end correction
        obj, air = _bottle(), _sheet_air()
        p = predict(obj, air)
        d = derive_from_f0(1.05 * p.f0_hz, 0.1, obj, air)
        assert d.end_correction_m < p.end_correction_m
        assert d.effective_neck_length_m == pytest.approx(p.effective_neck_length_m / 1.05**2)

    def test_nan_stderr_propagates(self):
        d = derive_from_f0(205.0, math.nan, _bottle(), _sheet_air())
        assert math.isnan(d.effective_neck_length_stderr_m)
        assert math.isfinite(d.effective_neck_length_m)

    @pytest.mark.parametrize(("f0", "sigma"), [(0.0, 0.1), (-5.0, 0.1), (math.nan, 0.1),
                                               (205.0, -0.1), (205.0, math.inf)])
    def test_rejects_bad_arguments(self, f0, sigma):
        with pytest.raises(ValueError, match="f0"):
            derive_from_f0(f0, sigma, _bottle(), _sheet_air())

    def test_derived_to_dict(self):
        d = derive_from_f0(205.0, 0.2, _bottle(), _sheet_air()).to_dict()
        assert set(d) == {f.name for f in dataclasses.fields(Derived)}
        assert all(type(v) is float for v in d.values())
        assert json.loads(json.dumps(d)) == d
