"""Tests for characterize.physics.distributed: the 1-D bore model."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.optimize import brentq
from scipy.special import jv

from characterize.objectfile import parse_object
from characterize.physics.air import AirState, air_state
from characterize.physics.distributed import (
    Bore,
    Duct,
    bessel_ratio,
    characteristic_function,
    find_resonance,
    resonances,
    transverse_cutoff_hz,
)
from characterize.physics.helmholtz import bore_from_object, predict

# The physics sheet's air: dry air at 20 degC, 101325 Pa from CoolProp HEOS Air.
SHEET_AIR = AirState(20.0, 0.0, 101325.0, 0.0, 343.344, 1.20458, 1.8206e-5, 0.025874,
                     1.40197, 1006.14, 0.7080)


def _tan_tan_roots(l_neck: float, a: float, l_cav: float, r_cav: float, c: float,
                   f_max: float) -> list[float]:
    """Roots of tan(k L') tan(k Lc) = S/Sc (KFCS ch. 10; Chaigne & Kergomard 2016
    ch. 7, from memory), bracketed between the tangents' poles, by scipy's brentq."""
    ratio = (a / r_cav) ** 2

    def g(f: float) -> float:
        k = 2 * math.pi * f / c
        return math.sin(k * l_neck) * math.sin(k * l_cav) - ratio * math.cos(k * l_neck) * math.cos(
            k * l_cav)

    grid = np.linspace(1.0, f_max, 20000)
    vals = [g(f) for f in grid]
    return [brentq(g, grid[i], grid[i + 1]) for i in range(len(grid) - 1)
            if vals[i] * vals[i + 1] < 0]


class TestLosslessRoots:
    def test_sheet_bottle_roots(self):
        # physics sheet section 4: first roots 199.95, 1398.8, 2721.9, 3441.1 Hz
        cav = Duct.round(0.060, 0.35e-3 / (math.pi * 0.03**2))
        bore = Bore((cav,), Duct.round(0.018, 0.049973))
        found = resonances(bore, SHEET_AIR, 208.4, 3600.0, 6, lossless=True)
        got = [r.f_hz for r in found]
        assert got == pytest.approx([199.95, 1398.8, 2721.9, 3441.1], abs=0.1)

    @pytest.mark.parametrize("seed", range(8))
    def test_tan_tan_condition_family(self, seed):
        # the textbook condition, solved independently with scipy's brentq
        rng = np.random.default_rng(seed)
        a = rng.uniform(0.004, 0.02)
        l_neck = rng.uniform(0.01, 0.12)
        r_cav = rng.uniform(2.5, 6.0) * a
        l_cav = rng.uniform(0.03, 0.3)
        c = SHEET_AIR.speed_of_sound_m_s
        bore = Bore((Duct.round(2 * r_cav, l_cav),), Duct.round(2 * a, l_neck))
        f_max = 0.9 * transverse_cutoff_hz(bore, SHEET_AIR)
        ref = _tan_tan_roots(l_neck, a, l_cav, r_cav, c, f_max)
        got = [r.f_hz for r in resonances(bore, SHEET_AIR, ref[0] * 1.03,
                                          0.9 * transverse_cutoff_hz(bore, SHEET_AIR), 8,
                                          lossless=True)]
        assert got[: len(ref)] == pytest.approx(ref[: len(got)], rel=1e-7)

    def test_tube_odd_series(self):
        # closed-open tube: f_n = (2n-1) c / (4 (L + 0.6133 a)) (Levine & Schwinger 1948);
        # the sheet's check f1 = 280.388 Hz for L = 0.30 m, a = 10 mm
        a, length = 0.010, 0.30
        bore = Bore((), Duct.round(2 * a, length), outer_correction_m=0.6133 * a)
        found = resonances(bore, SHEET_AIR, 280.0, 2000.0, 4, lossless=True)
        c = SHEET_AIR.speed_of_sound_m_s
        expected = [(2 * n - 1) * c / (4 * (length + 0.6133 * a)) for n in range(1, 5)]
        assert found[0].f_hz == pytest.approx(280.388, abs=0.01)
        # the end correction as a mass is exact to O((k delta)^3): 0.05 % at n = 4
        assert [r.f_hz for r in found] == pytest.approx(expected, rel=5e-4)


class TestLosses:
    def test_bessel_ratio_against_scipy(self):
        # scipy.special.jv as the reference for 2 J1(z)/(z J0(z))
        mags = np.geomspace(0.05, 2000.0, 60)
        for phase in (-math.pi / 4, -math.pi / 4 + 0.05, -math.pi / 4 - 0.05):
            z = mags * np.exp(1j * phase)
            ok = np.abs(z) < 600  # scipy's jv overflows beyond
            ref = 2 * jv(1, z[ok]) / (z[ok] * jv(0, z[ok]))
            assert np.allclose(bessel_ratio(z[ok]), ref, rtol=1e-6, atol=1e-12)

    def test_wide_duct_limit_matches_bessel(self):
        # Keefe 1984: for a >> delta the Bessel function tends to (1-j) delta/a,
        # i.e. the rectangular (perimeter) form with P/S = 2/a
        air = air_state(20.0, 0.5)
        w = 2 * math.pi * np.array([100.0, 300.0, 1000.0]) + 0j
        rnd = Duct.round(0.08, 0.1)
        as_rect = Duct(0.1, rnd.area_m2, rnd.perimeter_m, circular=False, width_m=0.08)
        from characterize.physics.distributed import duct_parameters

        g1, z1, _ = duct_parameters(rnd, w, air)
        g2, z2, _ = duct_parameters(as_rect, w, air)
        assert np.allclose(g1, g2, rtol=2e-4)
        assert np.allclose(z1, z2, rtol=2e-4)

    def test_attenuation_of_a_wide_tube(self):
        # Kirchhoff's wide-tube attenuation alpha = (k/(2a)) (delta_v + (gamma-1) delta_t)
        # (Keefe 1984; KFCS 2000 ch. 8, from memory)
        from characterize.physics.distributed import duct_parameters

        air = SHEET_AIR
        f, a = 500.0, 0.01
        omega = 2 * math.pi * f
        g, _, _ = duct_parameters(Duct.round(2 * a, 1.0), np.array([omega + 0j]), air)
        dv = math.sqrt(2 * air.viscosity_pa_s / (air.density_kg_m3 * omega))
        dt = dv / math.sqrt(air.prandtl)
        k = omega / air.speed_of_sound_m_s
        assert g[0].real == pytest.approx(k / (2 * a) * (dv + (air.gamma - 1) * dt), rel=0.03)

    def test_root_is_a_zero(self):
        bore = bore_from_object(parse_object(
            {"cavity": {"shape": "cylinder", "diameter": "60 mm", "length": "124 mm"},
             "neck": {"diameter": "18 mm", "length": "40 mm", "outer_end": "unflanged",
                      "inner_end": "flanged"}}, "b"))
        r = find_resonance(bore, SHEET_AIR, 200.0)
        # reconstruct the complex root from (f0, Q) and check D vanishes there
        wmag = 2 * math.pi * r.f_hz
        wi = wmag / (2 * r.q)
        root = complex(math.sqrt(wmag**2 - wi**2), wi)
        d0 = abs(characteristic_function(bore, np.array([root]), SHEET_AIR)[0])
        d_off = abs(characteristic_function(bore, np.array([root * 1.01]), SHEET_AIR)[0])
        assert d0 < 1e-6 * d_off

    def test_no_root_far_away_raises(self):
        bore = Bore((), Duct.round(0.02, 0.3))
        with pytest.raises(ArithmeticError):
            find_resonance(bore, SHEET_AIR, 1e-9, max_iter=2)


class TestCorrectedLumpedAgreement:
    @pytest.mark.parametrize("seed", range(10))
    def test_compact_bottles(self, seed):
        # physics sheet section 5: the corrected lumped model (one-third rules plus the
        # boundary-layer shift) is within 0.2 % of a 1-D visco-thermal model; allow
        # 0.5 % for compact bottles (X = k sqrt(L'^2 + Lc^2) < 0.5)
        rng = np.random.default_rng(100 + seed)
        d_neck = rng.uniform(10, 30)
        d_cav = d_neck * rng.uniform(2.5, 5)
        data = {"cavity": {"shape": "cylinder", "diameter": f"{d_cav:.2f} mm",
                           "length": f"{rng.uniform(40, 150):.1f} mm"},
                "neck": {"diameter": f"{d_neck:.2f} mm", "length": f"{rng.uniform(10, 60):.1f} mm",
                         "outer_end": str(rng.choice(["flanged", "unflanged"])),
                         "inner_end": "flanged"}}
        p = predict(parse_object(data, "b"), air_state(20.0, 0.5))
        if p.lumped_wave_parameter is not None and p.lumped_wave_parameter < 0.5:
            assert p.f0_corrected_lumped_hz == pytest.approx(p.f0_distributed_hz, rel=5e-3)
            # and the lossy Q of the 1-D model agrees with the lumped budget within 5 %
            assert p.q_lumped == pytest.approx(p.q_distributed, rel=0.05)
        # the sheet's rule: the plain lumped f0 runs high by about X^2/6
        x = p.lumped_wave_parameter
        assert p.f0_lumped_hz > p.f0_distributed_hz
        assert x is not None
        assert p.f0_lumped_hz / p.f0_corrected_lumped_hz - 1 < x * x / 6 * 1.6 + 0.01
