"""Tests for characterize.physics.losses and radiation: resistances, Q budget,
boundary layers, end corrections, and the outside-microphone correction."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.integrate import dblquad

from characterize.objectfile import parse_object
from characterize.physics import losses, radiation
from characterize.physics.air import AirState
from characterize.physics.radiation import (
    flanged_rectangle_end_correction_m,
    ingard_inner_end_correction_m,
    outside_mic_correction,
    rectangle_self_integral_m3,
    step_end_correction_m,
)

SHEET_AIR = AirState(20.0, 0.0, 101325.0, 0.0, 343.344, 1.20458, 1.8206e-5, 0.025874,
                     1.40197, 1006.14, 0.7080)
F_SHEET = 208.433  # physics sheet section 2: the bottle's lumped f0
A, L, V = 0.009, 0.040, 0.35e-3
S = math.pi * A * A
L_EFF = 49.973e-3
RC = 0.030
LC = V / (math.pi * RC**2)
A_WALL = 0.02873  # physics sheet section 5: all cavity walls


def _dv(f=F_SHEET):
    return losses.viscous_boundary_layer_m(SHEET_AIR.viscosity_pa_s, SHEET_AIR.density_kg_m3, f)


def _dt(f=F_SHEET):
    return losses.thermal_boundary_layer_m(SHEET_AIR.thermal_conductivity_w_mk,
                                           SHEET_AIR.density_kg_m3, SHEET_AIR.cp_j_kgk, f)


class TestSheetBottle:
    """Physics sheet section 5, 'Bottle check' table (values at 208.433 Hz)."""

    def test_boundary_layers(self):
        # physics sheet section 1.8: delta_v = 0.1519 mm, delta_t = 0.1806 mm at 208.433 Hz
        assert _dv() == pytest.approx(0.1519e-3, abs=5e-8)
        assert _dt() == pytest.approx(0.1806e-3, abs=5e-8)

    @pytest.mark.parametrize(("baffle", "expected", "q"), [("unflanged", 478.84, 647.0),
                                                           ("flanged", 957.68, 323.5)])
    def test_radiation(self, baffle, expected, q):
        r = radiation.radiation_resistance_pa_s_m3(SHEET_AIR.density_kg_m3,
                                                   SHEET_AIR.speed_of_sound_m_s, F_SHEET, baffle)
        assert r == pytest.approx(expected, abs=0.05)
        wm = 2 * math.pi * F_SHEET * SHEET_AIR.density_kg_m3 * L_EFF / S
        assert wm / r == pytest.approx(q, abs=0.1)
        # KFCS 2000 section 10.8: Q_rad = 2 pi sqrt(V (L/S)^3) flanged, twice unflanged
        closed = 2 * math.pi * math.sqrt(V * (L_EFF / S) ** 3) * (2 if baffle == "unflanged" else 1)
        assert wm / r == pytest.approx(closed, rel=2e-3)

    @pytest.mark.parametrize(("end_over_a", "expected", "q"), [(0.0, 4185.9, 74.0),
                                                               (1.0, 5127.8, 60.4),
                                                               (2.0, 6069.6, 51.0)])
    def test_viscous_neck(self, end_over_a, expected, q):
        r = losses.viscous_resistance_pa_s_m3(SHEET_AIR.density_kg_m3, F_SHEET, _dv(),
                                              L + end_over_a * A, S, 2 * math.pi * A)
        assert r == pytest.approx(expected, rel=5e-4)
        wm = 2 * math.pi * F_SHEET * SHEET_AIR.density_kg_m3 * L_EFF / S
        assert wm / r == pytest.approx(q, abs=0.1)

    def test_cavity_terms_and_total(self):
        wm = 2 * math.pi * F_SHEET * SHEET_AIR.density_kg_m3 * L_EFF / S
        c = V / (SHEET_AIR.density_kg_m3 * SHEET_AIR.speed_of_sound_m_s**2)
        sc = math.pi * RC**2
        r_cav = losses.cavity_viscous_resistance_pa_s_m3(
            SHEET_AIR.density_kg_m3, F_SHEET, _dv(), [(sc, LC, 2 * math.pi * RC)])
        g = losses.thermal_conductance_m3_pa_s(F_SHEET, SHEET_AIR.gamma, _dt(), A_WALL,
                                               SHEET_AIR.density_kg_m3,
                                               SHEET_AIR.speed_of_sound_m_s)
        assert wm / r_cav == pytest.approx(2657, rel=2e-3)  # sheet: 2657
        assert 2 * math.pi * F_SHEET * c / g == pytest.approx(335.7, rel=1e-3)  # sheet: 335.7
        for end_over_a, total in ((0.0, 54.31), (1.0, 46.61), (2.0, 40.83)):  # sheet totals
            r_rad = radiation.radiation_resistance_pa_s_m3(
                SHEET_AIR.density_kg_m3, SHEET_AIR.speed_of_sound_m_s, F_SHEET, "unflanged")
            r_v = losses.viscous_resistance_pa_s_m3(SHEET_AIR.density_kg_m3, F_SHEET, _dv(),
                                                    L + end_over_a * A, S, 2 * math.pi * A)
            b = losses.QBudget.from_elements(F_SHEET, wm / (2 * math.pi * F_SHEET), c, r_rad,
                                             r_v, r_cav, g, 0.0)
            assert b.q == pytest.approx(total, abs=0.02)
            assert 1 / b.q == pytest.approx(sum(1 / x for x in (
                b.q_radiation, b.q_viscous_neck, b.q_viscous_cavity, b.q_thermal_cavity)))
            assert b.q_without_radiation > b.q

    def test_boundary_layer_shift(self):
        # physics sheet section 5: -0.676 % (viscous), -0.149 % (thermal)
        sv, st = losses.boundary_layer_shift(_dv(), L, S, 2 * math.pi * A, L_EFF,
                                             SHEET_AIR.gamma, _dt(), A_WALL, V)
        assert sv == pytest.approx(-0.00676, abs=2e-5)
        assert st == pytest.approx(-0.00149, abs=2e-5)


class TestCavityInertia:
    def test_cylinder_is_one_third(self):
        # Rayleigh's one-third rule: S Lc / (3 Sc)
        sc = math.pi * RC**2
        assert losses.cavity_inertia_length_m(S, [(sc, LC)]) == pytest.approx(
            S * LC / (3 * sc), rel=1e-12)

    def test_sphere_sheet_value(self):
        # physics sheet section 4: sphere cut where its radius equals a: 3.609 mm
        r = 0.04372
        z_top = r + math.sqrt(r * r - A * A)
        n = 4000
        edges = np.linspace(0, z_top, n + 1)
        secs = []
        for z0, z1 in zip(edges, edges[1:], strict=False):
            h = z1 - z0
            vol = math.pi * (r * r * h - ((z1 - r) ** 3 - (z0 - r) ** 3) / 3)
            secs.append((vol / h, h))
        assert losses.cavity_inertia_length_m(S, secs) == pytest.approx(3.609e-3, abs=0.01e-3)

    def test_stacked_sections_split_exactly(self):
        # splitting a cylinder into pieces must not change the integral
        sc = math.pi * RC**2
        whole = losses.cavity_inertia_length_m(S, [(sc, LC)])
        parts = losses.cavity_inertia_length_m(S, [(sc, LC / 3)] * 3)
        assert parts == pytest.approx(whole, rel=1e-12)


class TestEndCorrections:
    @pytest.mark.parametrize(("aspect", "expected"), [(1, 0.4732), (2, 0.4598), (4, 0.4234),
                                                      (10, 0.3552)])
    def test_rectangle_sheet_table(self, aspect, expected):
        # physics sheet section 3 table: delta / sqrt(S) for a flanged rectangle
        h = 0.01
        w = aspect * h
        assert flanged_rectangle_end_correction_m(w, h) / math.sqrt(w * h) == pytest.approx(
            expected, abs=1e-4)

    @pytest.mark.parametrize(("w", "h"), [(1.0, 1.0), (3.0, 1.0), (0.02, 0.007)])
    def test_rectangle_integral_against_scipy(self, w, h):
        # the 4-fold integral reduces to 4 int int (w-u)(h-v)/sqrt(u^2+v^2) du dv;
        # scipy's dblquad as the reference
        val, _ = dblquad(lambda v, u: (w - u) * (h - v) / math.hypot(u, v), 0, w, 0, h,
                         epsabs=1e-13, epsrel=1e-10)
        assert rectangle_self_integral_m3(w, h) == pytest.approx(4 * val, rel=1e-7)

    def test_unit_square_closed_form(self):
        # physics sheet: (4/3)(1 - sqrt 2) + 4 ln(1 + sqrt 2) = 2.97321
        assert rectangle_self_integral_m3(1.0, 1.0) == pytest.approx(2.97321, abs=1e-5)

    def test_circle_limit_of_piston(self):
        # Rayleigh 1896: the same integral for a disc gives 8a/(3 pi)
        assert radiation.PISTON_END_FACTOR == pytest.approx(0.84883, abs=1e-5)

    def test_step_and_ingard_sheet_values(self):
        # physics sheet section 3: xi = 0.3 gives 0.4948a (Kergomard & Garcia 1987)
        # and 0.5317a (Ingard 1953 form, from memory)
        assert step_end_correction_m(A, 0.3) == pytest.approx(4.453e-3, abs=1e-6)
        assert ingard_inner_end_correction_m(A, 0.3) == pytest.approx(4.786e-3, abs=2e-6)
        assert step_end_correction_m(A, 0.0) == pytest.approx(0.82 * A)
        assert step_end_correction_m(A, 1.0) == 0.0  # clamped: equal radii, no step

    def test_step_rejects_bad_ratio(self):
        with pytest.raises(ValueError, match="radius_ratio"):
            step_end_correction_m(A, 1.5)


def _bottle_obj():
    return parse_object({"cavity": {"volume": "0.35 L"},
                         "neck": {"diameter": "18 mm", "length": "40 mm",
                                  "outer_end": "unflanged", "inner_end": "flanged"}}, "bottle")


class TestOutsideMicrophone:
    def test_lumped_equivalence(self):
        # physics sheet section 7: the bias lowers M by rho cos(kr)/(4 pi r) and R by
        # R_rad,unfl sinc(kr); so the corrected 1/H equals the biased 1/H plus
        # omega^2 C [rho cos(kr)/(4 pi r)] - j omega C R_rad sinc(kr)
        obj, air = _bottle_obj(), SHEET_AIR
        f = np.linspace(150, 260, 50)
        h_m = 1 / (1 - (f / 210) ** 2 + 1j * f / (59 * 210))
        r = 0.05
        h = outside_mic_correction(f, h_m, r, None, obj, air)
        k = 2 * np.pi * f / air.speed_of_sound_m_s
        w = 2 * np.pi * f
        c = obj.cavity.volume_m3 / (air.density_kg_m3 * air.speed_of_sound_m_s**2)
        rrad = air.density_kg_m3 * air.speed_of_sound_m_s * k**2 / (4 * np.pi)
        expected_inv = (1 / h_m - w**2 * c * air.density_kg_m3 * np.cos(k * r) / (4 * np.pi * r)
                        + 1j * w * c * rrad * np.sinc(k * r / np.pi))
        assert np.allclose(1 / h, expected_inv, rtol=1e-10)

    def test_round_trip_with_gain_and_delay(self):
        obj, air = _bottle_obj(), SHEET_AIR
        f = np.linspace(100, 400, 301)
        true = 1 / (1 - (f / 208.4) ** 2 + 1j * f / (54.3 * 208.4))
        gain, tau = -1.23, 60e-6
        k = 2 * np.pi * f / air.speed_of_sound_m_s
        g = 2 * np.exp(-1j * k * 0.08) / (4 * np.pi * 0.08)  # flanged: twice
        measured_ratio = true / (1 + k**2 * obj.cavity.volume_m3 * g * true)
        h_m = gain * np.exp(-2j * np.pi * f * tau) * measured_ratio
        back = outside_mic_correction(f, h_m, 0.08, "flanged", obj, air, gain=gain, delay_s=tau)
        assert np.allclose(back, gain * np.exp(-2j * np.pi * f * tau) * true, rtol=1e-10)

    @pytest.mark.parametrize("bad", [0.0, -0.05, 0.004, math.nan])
    def test_rejects_distance_inside_the_mouth(self, bad):
        from characterize.errors import InputError

        with pytest.raises(InputError, match="--outside-distance"):
            outside_mic_correction(np.array([200.0]), np.array([1 + 0j]), bad, None,
                                   _bottle_obj(), SHEET_AIR)

    def test_simulated_bias_and_its_correction(self):
        # physics sheet section 7 table: for the bottle (f0 208.433 Hz, Q 54.31) a mouth
        # microphone at 5 cm reads f0 +0.40 % and Q 59.03. Simulated here with
        # characterize.simulate (the outside channel gets the monopole field of the
        # neck flow added), then fitted raw and after the correction.
        from characterize.fitting.fit import fit_transfer
        from characterize.simulate import Setup, simulate
        from characterize.transfer import sweep_transfer

        obj, air = _bottle_obj(), SHEET_AIR
        f0, q, r = 208.433, 54.31, 0.05
        setup = Setup(f0_hz=f0, q=q, snr_db=70.0, gain_inside=1.0, gain_outside=1.0,
                      delay_s=0.0, reflections=())
        data, sweep = simulate(setup, seed=7)
        inside, outside = data[:, 0], data[:, 1]
        n = inside.size
        fr = np.fft.rfftfreq(n, 1 / setup.rate_hz)
        k = 2 * np.pi * fr / air.speed_of_sound_m_s
        green = np.exp(-1j * k * r) / (4 * np.pi * r)
        biased = np.fft.irfft(np.fft.rfft(outside) + k**2 * obj.cavity.volume_m3 * green
                              * np.fft.rfft(inside), n)
        assert sweep is not None
        tf = sweep_transfer(inside, biased, setup.rate_hz, sweep)
        raw = fit_transfer(tf)
        assert raw.f0_hz / f0 - 1 == pytest.approx(0.0040, abs=0.0006)
        assert raw.q == pytest.approx(59.03, rel=0.03)
        from dataclasses import replace

        sign = -1.0 if raw.polarity_inverted else 1.0
        fixed = replace(tf, h=outside_mic_correction(tf.freqs_hz, tf.h, r, "unflanged", obj,
                                                     air, gain=sign * raw.gain,
                                                     delay_s=raw.delay_s))
        corr = fit_transfer(fixed)
        assert corr.f0_hz == pytest.approx(f0, rel=1e-3)
        assert corr.q == pytest.approx(q, rel=0.03)
