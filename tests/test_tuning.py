"""Tests for characterize.tuning: line fits, trim advice, series, matched sets, levels.

Outside references, named beside each check:

- numpy.polyfit (weighted, covariance) and scipy.stats.linregress (unweighted)
  for the straight-line fit, in linear and in log space;
- the leave-one-out definition of the externally studentized residual
  (Belsley, Kuh & Welsch 1980), evaluated by refitting with numpy.polyfit;
- itertools.combinations: an exhaustive search for the matched-set optimum;
- the physics sheet's recomputed check values (section 9 series, section 6 neck
  displacement, section 10 SPL), and the lumped law evaluated independently by
  characterize.physics.helmholtz.helmholtz_f0_hz on the *true* geometry;
- seeded Monte Carlo for every propagated standard error (JCGM 101:2008 style).

The synthetic cases are wide seeded families of geometries, end corrections,
noise levels and temperatures, not a few hand-picked examples.
"""

from __future__ import annotations

import itertools
import json
import math
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest
from scipy import stats

from characterize import SCHEMA, tuning
from characterize.errors import FitError, InputError
from characterize.physics.air import AirState, air_state
from characterize.physics.geometry import AirOverrides, Cavity, Neck, ResonatorObject
from characterize.physics.helmholtz import helmholtz_f0_hz
from characterize.tuning import (
    LevelPoint,
    SeriesPoint,
    advise_trim,
    fit_line,
    fit_power_law,
    fit_series,
    level_study,
    match_cost,
    match_sets,
    neck_displacement_over_diameter,
    result_from_dict,
    spl_to_pressure_pa,
)

# The physics sheet's air: dry air at 20 degC, 101325 Pa (CoolProp HEOS "Air").
SHEET_C_M_S = 343.344  # physics sheet header (CoolProp)
SHEET_RHO_KG_M3 = 1.20458  # physics sheet header (CoolProp)


def sheet_air() -> AirState:
    return replace(air_state(temperature_c=20.0, relative_humidity=0.0, pressure_pa=101325.0),
                   speed_of_sound_m_s=SHEET_C_M_S, density_kg_m3=SHEET_RHO_KG_M3)


def make_object(volume_m3: float, diameter_m: float, length_m: float,
                name: str = "jar") -> ResonatorObject:
    return ResonatorObject(name=name, cavity=Cavity(volume_m3),
                           neck=Neck(diameter_m, length_m, "unflanged", "flanged"),
                           air=AirOverrides(), source_path=f"{name}.toml")


def make_doc(obj: ResonatorObject | None, f0_hz: float, f0_stderr_hz: float, q: float = 30.0,
             q_stderr: float = 0.1, air: AirState | None = None, **extra: object) -> dict:
    """A result document with the keys of docs/result-schema.md (as `fit` writes it)."""
    air = air or air_state()
    doc = {"schema": SCHEMA, "tool_version": "test",
           "air": air.to_dict(),
           "fit": {"f0_hz": f0_hz, "f0_stderr_hz": f0_stderr_hz, "q": q, "q_stderr": q_stderr},
           "object": None if obj is None else obj.to_dict(), "flags": []}
    doc.update(extra)
    return doc


def random_object(rng: np.random.Generator) -> tuple[ResonatorObject, float]:
    """A random bottle- or jar-like object and its true end correction over radius."""
    obj = make_object(volume_m3=rng.uniform(0.1e-3, 3e-3), diameter_m=rng.uniform(10e-3, 40e-3),
                      length_m=rng.uniform(15e-3, 80e-3))
    return obj, rng.uniform(0.8, 1.9)


# ==========================================================================
# Straight line
# ==========================================================================


class TestFitLine:
    @pytest.mark.parametrize("seed", range(40))
    def test_weighted_equals_numpy_polyfit(self, seed: int) -> None:
        rng = np.random.default_rng(seed)
        n = int(rng.integers(3, 15))
        x = np.sort(rng.uniform(-5, 50, n)) * 10 ** rng.uniform(-4, 2)
        sigma = rng.uniform(0.01, 0.5, n) * 10 ** rng.uniform(-8, 1)
        y = rng.normal(0, 1) * x + rng.normal() + sigma * rng.standard_normal(n) \
            * rng.uniform(0.3, 3)
        line = fit_line(x, y, sigma)
        # numpy.polyfit: w = 1/sigma; cov="unscaled" is (X^T W X)^-1
        p, cov_u = np.polyfit(x, y, 1, w=1 / sigma, cov="unscaled")
        assert line.slope == pytest.approx(p[0], rel=1e-9, abs=1e-12 * abs(p[0]) + 1e-300)
        assert line.intercept == pytest.approx(p[1], rel=1e-8, abs=1e-9 * np.max(np.abs(y)))
        unscaled = np.array(line.covariance) / line.stderr_scale**2
        np.testing.assert_allclose(unscaled, cov_u, rtol=1e-8, atol=1e-12 * np.max(np.abs(cov_u)))
        if n > 3 and line.reduced_chi2 > 1:
            # numpy.polyfit with cov=True scales by chi2/(n - 2): equal when reduced chi2 > 1
            _, cov_s = np.polyfit(x, y, 1, w=1 / sigma, cov=True)
            np.testing.assert_allclose(np.array(line.covariance), cov_s, rtol=1e-6)
        else:
            assert line.stderr_scale == 1.0  # errors never scaled down

    @pytest.mark.parametrize("seed", range(40))
    def test_unweighted_equals_scipy_linregress(self, seed: int) -> None:
        rng = np.random.default_rng(100 + seed)
        n = int(rng.integers(3, 30))
        x = rng.uniform(0, 10, n)
        y = rng.normal(0, 3) * x + rng.normal(0, 10) + rng.normal(0, rng.uniform(0.01, 2), n)
        line = fit_line(x, y)
        ref = stats.linregress(x, y)  # scipy.stats.linregress: OLS with residual-based errors
        assert line.weighting == "residuals"
        assert line.slope == pytest.approx(ref.slope, rel=1e-10, abs=1e-12)
        assert line.intercept == pytest.approx(ref.intercept, rel=1e-10, abs=1e-12)
        assert line.slope_stderr == pytest.approx(ref.stderr, rel=1e-9)
        assert line.intercept_stderr == pytest.approx(ref.intercept_stderr, rel=1e-9)

    @pytest.mark.parametrize("weighted", [True, False])
    @pytest.mark.parametrize("seed", range(15))
    def test_studentized_equals_leave_one_out(self, seed: int, weighted: bool) -> None:
        """Externally studentized residual = (y_i - yhat_(i)) / its predicted sd, the
        prediction made by the fit without point i (Belsley, Kuh & Welsch 1980)."""
        rng = np.random.default_rng(300 + seed)
        n = int(rng.integers(4, 12))
        x = rng.uniform(0, 1, n)
        sigma = rng.uniform(0.5, 2.0, n) if weighted else np.ones(n)
        y = 2 * x + 1 + sigma * rng.standard_normal(n) * rng.uniform(0.5, 4)
        line = fit_line(x, y, sigma if weighted else None)
        w = 1 / sigma**2
        for i in range(n):
            keep = np.arange(n) != i
            p, cov_u = np.polyfit(x[keep], y[keep], 1, w=np.sqrt(w[keep]), cov="unscaled")
            chi2 = np.sum(w[keep] * (y[keep] - np.polyval(p, x[keep])) ** 2)
            s2 = chi2 / (n - 3)
            if weighted:
                s2 = max(1.0, s2)  # stated errors: never judged by a smaller scatter
            xi = np.array([x[i], 1.0])
            var_pred = s2 * (1 / w[i] + xi @ cov_u @ xi)
            t_ref = (y[i] - np.polyval(p, x[i])) / math.sqrt(var_pred)
            assert line.studentized[i] == pytest.approx(t_ref, rel=1e-7, abs=1e-9)

    def test_three_points_have_no_studentized_residuals(self) -> None:
        line = fit_line([0, 1, 2], [0, 1.1, 1.9])
        assert all(math.isnan(t) for t in line.studentized)

    @pytest.mark.parametrize("bad", [
        dict(x=[1, 2], y=[1, 2]),
        dict(x=[1, 1, 1], y=[1, 2, 3]),
        dict(x=[1, 2, 3], y=[1, 2, float("nan")]),
        dict(x=[1, 2, 3], y=[1, 2, 3], sigma=[1, 0, 1]),
        dict(x=[1, 2, 3], y=[1, 2], sigma=None),
    ])
    def test_rejects_bad_input(self, bad: dict) -> None:
        with pytest.raises(ValueError):
            fit_line(bad["x"], bad["y"], bad.get("sigma"))

    def test_ratio_error_against_monte_carlo(self) -> None:
        rng = np.random.default_rng(5)
        mean = np.array([2.0, 5.0])
        cov = np.array([[0.01, 0.004], [0.004, 0.04]])
        r, se = tuning.ratio_with_stderr(mean[0], mean[1], cov[0, 0], cov[1, 1], cov[0, 1])
        draws = rng.multivariate_normal(mean, cov, 200_000)
        mc = draws[:, 0] / draws[:, 1]
        assert r == pytest.approx(0.4)
        assert se == pytest.approx(np.std(mc), rel=0.03)  # seeded Monte Carlo, first order


# ==========================================================================
# Series (physics sheet section 9)
# ==========================================================================


def trim_points(obj: ResonatorObject, lengths_m: np.ndarray, delta_m: float, sigma_hz: float,
                rng: np.random.Generator | None, temps_c: np.ndarray | None = None
                ) -> tuple[list[SeriesPoint], np.ndarray]:
    temps_c = np.full(lengths_m.size, 20.0) if temps_c is None else temps_c
    pts, truth = [], []
    for i, (L, t) in enumerate(zip(lengths_m, temps_c)):
        c = air_state(temperature_c=float(t)).speed_of_sound_m_s
        f = helmholtz_f0_hz(c, obj.neck.area_m2, obj.cavity.volume_m3, L + delta_m)
        truth.append(f)
        noisy = f + (sigma_hz * rng.standard_normal() if rng is not None else 0.0)
        pts.append(SeriesPoint(f"p{i}", float(L), noisy, sigma_hz, c, float(t)))
    return pts, np.array(truth)


class TestSeries:
    def test_physics_sheet_trim_check(self) -> None:
        # Physics sheet section 9, "Check (trimming)": L = 20/30/40/50 mm, delta = 10 mm,
        # V = 0.35 L, a = 9 mm -> f = 269.012/232.972/208.376/190.221 Hz,
        # b = 4.60611e-4 s^2/m; with sigma_f = 0.1 Hz, sigma_delta = 0.068 mm.
        obj = make_object(0.35e-3, 18e-3, 0.04)
        c = SHEET_C_M_S
        lengths = np.array([0.02, 0.03, 0.04, 0.05])
        f = [helmholtz_f0_hz(c, obj.neck.area_m2, 0.35e-3, L + 0.01) for L in lengths]
        np.testing.assert_allclose(f, [269.012, 232.972, 208.376, 190.221], atol=6e-4)
        pts = [SeriesPoint(str(i), L, fi, 0.1, c, 20.0) for i, (L, fi) in
               enumerate(zip(lengths, f))]
        s = fit_series(pts, "neck-length", obj)
        assert s.line.slope == pytest.approx(4.60611e-4, rel=2e-6)
        assert s.end_correction_m == pytest.approx(0.010, abs=1e-12)
        assert s.end_correction_stderr_m == pytest.approx(0.068e-3, abs=0.0005e-3)
        assert s.volume_m3 == pytest.approx(0.35e-3, rel=1e-9)
        assert s.end_correction_over_radius == pytest.approx(10 / 9, rel=1e-9)

    def test_physics_sheet_fill_check(self) -> None:
        # Physics sheet section 9, "Check (filling)": 0-200 mL in 50 mL steps,
        # f = 208.376 ... 318.300 Hz, L_eff/S = 196.488 1/m, V0 = 350.00 mL.
        obj = make_object(0.35e-3, 18e-3, 0.04)
        c = SHEET_C_M_S
        vols = np.arange(5) * 50e-6
        f = [helmholtz_f0_hz(c, obj.neck.area_m2, 0.35e-3 - v, 0.05) for v in vols]
        assert f[0] == pytest.approx(208.376, abs=6e-4)
        assert f[-1] == pytest.approx(318.300, abs=6e-4)
        pts = [SeriesPoint(str(i), v, fi, 0.1, c, 20.0) for i, (v, fi) in enumerate(zip(vols, f))]
        s = fit_series(pts, "volume", obj)
        assert s.effective_length_over_area_m_inv == pytest.approx(196.488, abs=6e-4)
        assert s.volume_m3 * 1e6 == pytest.approx(350.00, abs=0.005)
        assert s.end_correction_m == pytest.approx(0.010, abs=1e-9)

    def test_trim_series_recovers_delta_within_its_stderr(self) -> None:
        """A wide seeded family of synthetic trim series (lumped law, random
        geometry, delta, steps and noise): the recovered delta lies within one
        standard error at the 68 % rate and within two at the 95 % rate, and the
        stated error matches the Monte Carlo scatter."""
        rng = np.random.default_rng(2024)
        z, ratio = [], []
        for _ in range(300):
            obj, k = random_object(rng)
            delta = k * obj.neck.radius_m
            n = int(rng.integers(4, 9))
            lengths = obj.neck.length_m * np.linspace(1.0, rng.uniform(0.35, 0.7), n)
            f_nom = helmholtz_f0_hz(343.0, obj.neck.area_m2, obj.cavity.volume_m3,
                                    obj.neck.length_m + delta)
            sigma = f_nom * 10 ** rng.uniform(-5, -3)
            pts, _ = trim_points(obj, lengths, delta, sigma, rng)
            s = fit_series(pts, "neck-length", obj)
            z.append((s.end_correction_m - delta) / s.end_correction_stderr_m)
            ratio.append(s.line.stderr_scale)
        z = np.abs(np.array(z))
        assert 0.62 <= np.mean(z <= 1) <= 0.80   # 68 % coverage (normal: 0.683)
        assert np.mean(z <= 2) >= 0.92            # 95 % coverage (normal: 0.954)

    def test_delta_stderr_against_monte_carlo(self) -> None:
        """Same series, many noise draws: the first-order sigma_delta equals the spread."""
        rng = np.random.default_rng(77)
        obj = make_object(0.6e-3, 22e-3, 0.044)
        delta = 1.3 * obj.neck.radius_m
        lengths = np.array([44, 40, 36, 32, 28, 24]) * 1e-3
        est, se = [], []
        for _ in range(2000):
            pts, _ = trim_points(obj, lengths, delta, 0.05, rng)
            s = fit_series(pts, "neck-length", obj)
            est.append(s.end_correction_m)
            se.append(s.end_correction_stderr_m / s.line.stderr_scale)  # unscaled: stated errors
        assert np.mean(est) == pytest.approx(delta, abs=3 * np.std(est) / math.sqrt(2000))
        assert np.median(se) == pytest.approx(np.std(est), rel=0.05)

    def test_fill_series_family(self) -> None:
        rng = np.random.default_rng(909)
        zv, zl = [], []
        for _ in range(200):
            obj, k = random_object(rng)
            l_eff = obj.neck.length_m + k * obj.neck.radius_m
            v0 = obj.cavity.volume_m3
            n = int(rng.integers(4, 8))
            vols = np.linspace(0, rng.uniform(0.2, 0.5) * v0, n)
            c = 343.5
            f = np.array([helmholtz_f0_hz(c, obj.neck.area_m2, v0 - v, l_eff) for v in vols])
            sigma = f * 10 ** rng.uniform(-5, -3.5)
            pts = [SeriesPoint(str(i), float(v), float(fi + si * rng.standard_normal()),
                               float(si), c, 20.0)
                   for i, (v, fi, si) in enumerate(zip(vols, f, sigma))]
            s = fit_series(pts, "volume", obj)
            zv.append((s.volume_m3 - v0) / s.volume_stderr_m3)
            zl.append((s.effective_neck_length_m - l_eff) / s.effective_neck_length_stderr_m)
        for z in (np.abs(zv), np.abs(zl)):
            assert 0.60 <= np.mean(z <= 1) <= 0.80
            assert np.mean(z <= 2) >= 0.92

    def test_temperature_correction(self) -> None:
        """Points at 17 to 25 degC: corrected to one speed of sound, delta is exact;
        fitted naively (no correction) it is not; the spread is flagged."""
        obj = make_object(0.5e-3, 20e-3, 0.05)
        delta = 1.4 * obj.neck.radius_m
        lengths = np.linspace(0.05, 0.02, 6)
        temps = np.linspace(17.0, 25.0, 6)
        pts, _ = trim_points(obj, lengths, delta, 0.01, None, temps)
        s = fit_series(pts, "neck-length", obj)
        assert s.end_correction_m == pytest.approx(delta, rel=1e-9)
        assert "temperature-spread" in [f.code for f in s.flags]
        naive = [replace(p, speed_of_sound_m_s=pts[0].speed_of_sound_m_s) for p in pts]
        assert abs(fit_series(naive, "neck-length", obj).end_correction_m - delta) > 1e-4
        steady, _ = trim_points(obj, lengths, delta, 0.01, None, np.full(6, 21.0))
        assert "temperature-spread" not in [f.code for f in fit_series(steady, "neck-length",
                                                                       obj).flags]

    @pytest.mark.parametrize("seed", range(10))
    def test_planted_outlier_is_flagged(self, seed: int) -> None:
        rng = np.random.default_rng(seed)
        obj = make_object(0.4e-3, 18e-3, 0.045)
        lengths = np.linspace(0.045, 0.02, 7)
        pts, _ = trim_points(obj, lengths, 0.011, 0.01, rng)
        j = int(rng.integers(0, 7))
        pts[j] = replace(pts[j], f0_hz=pts[j].f0_hz + 0.3)  # 30 standard errors off
        s = fit_series(pts, "neck-length", obj)
        assert s.outliers == (pts[j].id,)
        assert any(f.code == "outlier" and pts[j].id in f.message for f in s.flags)

    def test_end_correction_implausible_flag(self) -> None:
        obj = make_object(0.4e-3, 18e-3, 0.045)
        pts, _ = trim_points(obj, np.linspace(0.045, 0.02, 5), 4.0 * obj.neck.radius_m, 0.01, None)
        assert "end-correction-implausible" in [f.code for f in
                                                fit_series(pts, "neck-length", obj).flags]

    def test_bad_inputs(self) -> None:
        obj = make_object(0.4e-3, 18e-3, 0.045)
        pts, _ = trim_points(obj, np.array([0.04, 0.03, 0.02]), 0.01, 0.01, None)
        with pytest.raises(InputError, match="at least 3"):
            fit_series(pts[:2], "neck-length", obj, source="m.csv")
        with pytest.raises(InputError, match="duplicate"):
            fit_series([pts[0], pts[1], replace(pts[2], value=pts[0].value)], "neck-length", obj)
        with pytest.raises(InputError, match="--vary"):
            fit_series(pts, "diameter", obj)
        with pytest.raises(FitError, match="does not grow"):
            fit_series([replace(p, value=-p.value + 0.1) for p in pts], "neck-length", obj)
        with pytest.raises(FitError, match="does not fall"):
            fit_series(pts, "volume", obj)

    def test_no_object_gives_delta_but_no_ratio(self) -> None:
        obj = make_object(0.4e-3, 18e-3, 0.045)
        pts, _ = trim_points(obj, np.linspace(0.045, 0.02, 5), 0.01, 0.01, None)
        s = fit_series(pts, "neck-length", None)
        assert s.end_correction_m == pytest.approx(0.01, rel=1e-9)
        assert math.isnan(s.end_correction_over_radius) and math.isnan(s.volume_m3)
        json.dumps(s.to_dict(), default=str)


# ==========================================================================
# Trim advice
# ==========================================================================


class TestTrim:
    @pytest.mark.parametrize("seed", range(60))
    def test_applying_the_advice_hits_the_target(self, seed: int) -> None:
        """Apply each advised change to the *true* geometry (true end correction,
        unknown to the advisor) and predict with the lumped law: the target within
        0.1 % (the issue's check)."""
        rng = np.random.default_rng(seed)
        obj, k = random_object(rng)
        air = air_state(temperature_c=rng.uniform(10, 30))
        c = air.speed_of_sound_m_s
        delta = k * obj.neck.radius_m
        f0 = helmholtz_f0_hz(c, obj.neck.area_m2, obj.cavity.volume_m3, obj.neck.length_m + delta)
        f0_meas = f0 * (1 + 1e-5 * rng.standard_normal())
        res = result_from_dict(make_doc(obj, f0_meas, 1e-5 * f0, air=air), "r.json")
        target = f0 * rng.uniform(1.01, 1.3)
        a = advise_trim(res, target)
        new_len = obj.neck.length_m - a.neck.cut_m
        assert new_len > 0
        f_cut = helmholtz_f0_hz(c, obj.neck.area_m2, obj.cavity.volume_m3, new_len + delta)
        assert f_cut == pytest.approx(target, rel=1e-3)
        f_vol = helmholtz_f0_hz(c, obj.neck.area_m2, a.volume.new_volume_m3,
                                obj.neck.length_m + delta)
        assert f_vol == pytest.approx(target, rel=1e-3)
        r_new = a.diameter.new_diameter_m / 2
        f_bore = helmholtz_f0_hz(c, math.pi * r_new**2, obj.cavity.volume_m3,
                                 obj.neck.length_m + k * r_new)
        assert f_bore == pytest.approx(target, rel=1e-3)
        assert a.neck.possible and a.diameter.possible_by_drilling
        assert a.volume.water_to_add_m3 > 0

    @pytest.mark.parametrize("seed", range(20))
    def test_measured_end_correction_beats_textbook(self, seed: int) -> None:
        """Where the true end correction differs from the textbook one, the textbook
        cut misses the target and the measured one does not."""
        rng = np.random.default_rng(1000 + seed)
        obj, _ = random_object(rng)
        air = air_state()
        textbook_k = tuning.textbook_end_correction_m(obj, air) / obj.neck.radius_m
        k = textbook_k * rng.choice([0.75, 1.25])
        delta = k * obj.neck.radius_m
        c = air.speed_of_sound_m_s
        f0 = helmholtz_f0_hz(c, obj.neck.area_m2, obj.cavity.volume_m3, obj.neck.length_m + delta)
        a = advise_trim(result_from_dict(make_doc(obj, f0, 0.0, air=air), "r.json"), 1.15 * f0)

        def hit(cut: float) -> float:
            return helmholtz_f0_hz(c, obj.neck.area_m2, obj.cavity.volume_m3,
                                   obj.neck.length_m - cut + delta) / (1.15 * f0) - 1

        assert abs(hit(a.neck.cut_m)) < 1e-9
        assert abs(hit(a.neck.textbook_cut_m)) > abs(hit(a.neck.cut_m)) + 1e-4

    def test_stderrs_against_monte_carlo(self) -> None:
        rng = np.random.default_rng(31)
        obj = make_object(0.62e-3, 22e-3, 0.044)
        air = air_state(temperature_c=19.6)
        f0, sf = 177.1, 0.3
        a = advise_trim(result_from_dict(make_doc(obj, f0, sf, air=air), "r.json"), 190.0)
        cuts, vols, bores = [], [], []
        for f in f0 + sf * rng.standard_normal(1500):
            b = advise_trim(result_from_dict(make_doc(obj, float(f), sf, air=air), "r.json"),
                            190.0)
            cuts.append(b.neck.cut_m)
            vols.append(b.volume.new_volume_m3)
            bores.append(b.diameter.new_diameter_m)
        # seeded Monte Carlo (1500 draws: the sd is known to about 2 %)
        assert a.neck.cut_stderr_m == pytest.approx(np.std(cuts), rel=0.06)
        assert a.volume.new_volume_stderr_m3 == pytest.approx(np.std(vols), rel=0.06)
        assert a.diameter.new_diameter_stderr_m == pytest.approx(np.std(bores), rel=0.06)

    def test_one_way_trimming(self) -> None:
        obj = make_object(0.5e-3, 20e-3, 0.04)
        res = result_from_dict(make_doc(obj, 200.0, 0.01), "r.json")
        a = advise_trim(res, 190.0)
        codes = [f.code for f in a.flags]
        assert "trim-one-way" in codes and "drill-one-way" in codes
        assert not a.neck.possible and a.neck.cut_m < 0
        assert a.volume.change_m3 > 0 and not a.diameter.possible_by_drilling

    def test_impossible_and_lumped_limit(self) -> None:
        obj = make_object(0.5e-3, 20e-3, 0.04)
        air = air_state()
        res = result_from_dict(make_doc(obj, 200.0, 0.01, air=air), "r.json")
        # max f0 with the whole neck removed: lumped law with L = 0 and the measured delta
        f_max = helmholtz_f0_hz(air.speed_of_sound_m_s, obj.neck.area_m2, obj.cavity.volume_m3,
                                res.end_correction_m)
        a = advise_trim(res, 1.01 * f_max)
        assert a.neck.max_f0_hz == pytest.approx(f_max, rel=1e-12)
        assert "trim-impossible" in [f.code for f in a.flags] and not a.neck.possible
        # a target just below the maximum leaves a neck shorter than its radius
        a = advise_trim(res, 0.99 * f_max)
        assert 0 < a.neck.new_length_m < obj.neck.radius_m
        assert "lumped-limit" in [f.code for f in a.flags]
        assert "volume-change-large" in [f.code for f in a.flags]

    def test_implausible_geometry_is_flagged_not_fatal(self) -> None:
        """An f0 far above what the object file allows means a negative end correction:
        the advice is still given (no traceback), flagged, and the bore route is NaN
        where no bore can reach the target."""
        obj = make_object(0.5e-3, 20e-3, 0.08)
        res = result_from_dict(make_doc(obj, 400.0, 0.01), "r.json")
        assert res.end_correction_m < 0
        a = advise_trim(res, 420.0)
        assert "end-correction-implausible" in [f.code for f in a.flags]
        a = advise_trim(res, 0.1)
        assert math.isnan(a.diameter.new_diameter_m)
        json.dumps(a.to_dict(), default=str)

    def test_slot_neck_and_several_openings(self) -> None:
        """A slot gets the neck and volume routes but no bore route; with several round
        openings the bore route drills every one (lumped law on the true geometry)."""
        air = air_state()
        c = air.speed_of_sound_m_s
        w, h = 40e-3, 6e-3
        slot = ResonatorObject("slot", Cavity(1.2e-3), Neck(2 * math.sqrt(w * h / math.pi), 0.02,
                                                            "flanged", "flanged", shape="slot",
                                                            width_m=w, height_m=h),
                               AirOverrides(), "slot.toml")
        delta = 0.9 * slot.neck.radius_m
        f0 = helmholtz_f0_hz(c, slot.neck.area_m2, 1.2e-3, 0.02 + delta)
        a = advise_trim(result_from_dict(make_doc(slot, f0, 0.0, air=air), "s.json"), 1.1 * f0)
        assert math.isnan(a.diameter.new_diameter_m)
        assert "no-bore-route" in [f.code for f in a.flags]
        f_cut = helmholtz_f0_hz(c, slot.neck.area_m2, 1.2e-3, 0.02 - a.neck.cut_m + delta)
        assert f_cut == pytest.approx(1.1 * f0, rel=1e-9)
        holes = ResonatorObject("panel", Cavity(2e-3), Neck(8e-3, 0.012, "flanged", "flanged",
                                                            shape="hole", count=5),
                                AirOverrides(), "panel.toml")
        k = 1.6
        f0 = helmholtz_f0_hz(c, holes.neck.area_m2, 2e-3, 0.012 + k * 4e-3)
        a = advise_trim(result_from_dict(make_doc(holes, f0, 0.0, air=air), "p.json"), 1.2 * f0)
        r_new = a.diameter.new_diameter_m / 2
        f_bore = helmholtz_f0_hz(c, 5 * math.pi * r_new**2, 2e-3, 0.012 + k * r_new)
        assert f_bore == pytest.approx(1.2 * f0, rel=1e-9)

    def test_bad_input(self) -> None:
        obj = make_object(0.5e-3, 20e-3, 0.04)
        res = result_from_dict(make_doc(obj, 200.0, 0.01), "r.json")
        for bad in (0.0, -5.0, float("nan")):
            with pytest.raises(InputError, match="--target"):
                advise_trim(res, bad)
        with pytest.raises(InputError, match="no geometry"):
            advise_trim(result_from_dict(make_doc(None, 200.0, 0.01), "r.json"), 210.0)

    def test_with_object_rederives_end_correction(self) -> None:
        obj = make_object(0.5e-3, 20e-3, 0.04)
        res = result_from_dict(make_doc(None, 200.0, 0.01), "r.json")
        res2 = res.with_object(obj)
        l_eff = obj.neck.area_m2 * res.air.speed_of_sound_m_s**2 / (
            (2 * math.pi * 200.0) ** 2 * obj.cavity.volume_m3)  # the lumped law inverted by hand
        assert res2.end_correction_m == pytest.approx(l_eff - 0.04, rel=1e-12)


# ==========================================================================
# Result documents
# ==========================================================================


class TestResultDocuments:
    def test_schema_is_checked(self, tmp_path: Path) -> None:
        doc = make_doc(None, 200.0, 0.01)
        doc["schema"] = "characterize.result/2"
        p = tmp_path / "r.json"
        p.write_text(json.dumps(doc))
        with pytest.raises(InputError, match="schema.*characterize.result/1"):
            tuning.load_result(p)

    @pytest.mark.parametrize("text,match", [
        ("{not json", "not valid JSON"),
        ("[1, 2]", "expected a result document"),
        (json.dumps({"schema": SCHEMA, "air": {}, "fit": {}}), "fit.f0_hz"),
        (json.dumps({"schema": SCHEMA, "fit": {"f0_hz": -1, "f0_stderr_hz": 0, "q": 3,
                                               "q_stderr": 0}}), "fit.f0_hz"),
    ])
    def test_malformed(self, tmp_path: Path, text: str, match: str) -> None:
        p = tmp_path / "r.json"
        p.write_text(text)
        with pytest.raises(InputError, match=match):
            tuning.load_result(p)

    def test_missing_and_directory(self, tmp_path: Path) -> None:
        with pytest.raises(InputError, match="file not found"):
            tuning.load_result(tmp_path / "nope.json")
        (tmp_path / "item").mkdir()
        (tmp_path / "item" / "result.json").write_text(json.dumps(make_doc(None, 123.0, 0.1)))
        r = tuning.load_result(tmp_path / "item")
        assert r.f0_hz == 123.0 and r.name == "item"

    def test_null_stderr_and_drive_block(self) -> None:
        doc = make_doc(None, 200.0, 0.01, drive={"cavity_spl_db": 121.5,
                                                 "displacement_over_diameter": 0.02})
        doc["fit"]["f0_stderr_hz"] = None  # NaN is written as null
        r = result_from_dict(doc, "r.json")
        assert math.isnan(r.f0_stderr_hz)
        assert r.drive_spl_db == 121.5 and r.drive_displacement_over_diameter == 0.02

    def test_from_the_pipeline(self, tmp_path: Path) -> None:
        """A real result document from analyze(): the summary carries its numbers."""
        import soundfile as sf

        from characterize.excitation import SweepParams, make_sweep, sidecar_text
        from characterize.pipeline import analyze
        from characterize.simulate import Setup, simulate, write_recording

        sp = SweepParams(start_hz=40, stop_hz=2000, duration_s=1.0, rate_hz=16000,
                         level_dbfs=-12, tail_s=0.6)
        sf.write(tmp_path / "s.wav", make_sweep(sp).samples, 16000, subtype="PCM_16")
        (tmp_path / "s.toml").write_text(sidecar_text(sp))
        data, _ = simulate(Setup(f0_hz=230.0, q=30, rate_hz=16000, snr_db=35, sweep=sp), seed=3)
        write_recording(str(tmp_path / "r.flac"), data, 16000, "PCM_16")
        obj_file = tmp_path / "jar.toml"
        obj_file.write_text('name = "jar"\n[cavity]\nvolume = "450 mL"\n[neck]\n'
                            'diameter = "20 mm"\nlength = "30 mm"\nouter_end = "unflanged"\n'
                            'inner_end = "flanged"\n')
        res = analyze(tmp_path / "r.flac", object_path=obj_file, sweep_path=tmp_path / "s.wav")
        doc = json.loads(json.dumps(res.to_dict(), default=float))
        s = result_from_dict(doc, "r.json")
        assert s.f0_hz == res.fit.f0_hz and s.q == res.fit.q
        assert s.air.speed_of_sound_m_s == res.air.speed_of_sound_m_s
        assert s.end_correction_m == pytest.approx(res.derived.end_correction_m, rel=1e-12)
        assert s.object is not None and s.object.neck.diameter_m == pytest.approx(0.02)


# ==========================================================================
# Matched sets
# ==========================================================================


def summaries(f0: np.ndarray, q: np.ndarray, temps: np.ndarray | None = None
              ) -> list[tuning.ResultSummary]:
    temps = np.full(len(f0), 20.0) if temps is None else temps
    out = []
    for i, (f, qq, t) in enumerate(zip(f0, q, temps)):
        doc = make_doc(None, float(f), 0.01, float(qq), 0.1,
                       air=air_state(temperature_c=float(t)))
        s = result_from_dict(doc, f"item{i:02d}.json")
        out.append(replace(s, name=f"item{i:02d}"))
    return out


class TestMatch:
    @pytest.mark.parametrize("by", ["f0", "f0,q"])
    @pytest.mark.parametrize("seed", range(25))
    def test_search_is_exact(self, seed: int, by: str) -> None:
        """The chosen set has the least cost over all K-subsets (itertools.combinations)."""
        rng = np.random.default_rng(seed)
        n = int(rng.integers(5, 11))
        k = int(rng.integers(2, min(5, n) + 1))
        f0 = rng.normal(250, 3, n)
        q = rng.normal(30, 4, n)
        target = float(rng.normal(250, 2))
        m = match_sets(summaries(f0, q), k, target, by, alternatives=3)
        q_scale = float(np.median(q))
        best = min(match_cost(f0[list(c)], q[list(c)], target, by, q_scale)
                   for c in itertools.combinations(range(n), k))
        assert m.best.cost == pytest.approx(best, rel=1e-12, abs=1e-15)
        costs = [m.best.cost] + [a.cost for a in m.alternatives]
        assert costs == sorted(costs)
        assert len({frozenset(s.ids) for s in [m.best, *m.alternatives]}) == len(costs)

    @pytest.mark.parametrize("seed", range(10))
    def test_by_f0_is_spread_plus_offset(self, seed: int) -> None:
        """By f0 the best set minimises (max - min) + |midrange - target| over all
        K-subsets (evaluated here by brute force with itertools and numpy)."""
        rng = np.random.default_rng(50 + seed)
        n, k, target = 14, 4, 250.0
        f0 = rng.uniform(240, 260, n)
        m = match_sets(summaries(f0, np.full(n, 20.0)), k, target, "f0")
        best = min(itertools.combinations(range(n), k),
                   key=lambda c: np.ptp(f0[list(c)])
                   + abs((f0[list(c)].max() + f0[list(c)].min()) / 2 - target))
        assert set(m.best.ids) == {f"item{i:02d}" for i in best}
        chosen = np.array([f0[int(i[4:])] for i in m.best.ids])
        assert m.best.f0_std_hz == pytest.approx(np.std(chosen, ddof=1))  # numpy
        assert m.best.f0_range_hz == pytest.approx(np.ptp(chosen))

    def test_tight_group_beats_scattered_group(self) -> None:
        """Spread and offset count alike: a tight group 1.5 Hz off the target beats a
        group centred on it but 2 Hz wide (cost 1.8 against 2.0 Hz); 3 Hz off, it no
        longer does (3.3 against 2.0 Hz)."""
        for off, tight_wins in ((1.5, True), (3.0, False)):
            f0 = np.array([249.0, 250.0, 251.0, 250 + off, 250.1 + off, 250.2 + off])
            m = match_sets(summaries(f0, np.full(6, 30.0)), 3, 250.0)
            assert (set(m.best.ids) == {"item03", "item04", "item05"}) is tight_wins

    def test_temperatures_are_brought_together(self) -> None:
        temps = np.array([15.0, 20.0, 25.0])
        rs = summaries(np.array([240.0, 245.0, 250.0]), np.full(3, 30.0), temps)
        m = match_sets(rs, 2, 245.0)
        c = np.array([r.air.speed_of_sound_m_s for r in rs])
        np.testing.assert_allclose([i.f0_hz for i in m.items],
                                   np.array([240.0, 245.0, 250.0]) * c.mean() / c, rtol=1e-12)
        assert "temperature-spread" in [f.code for f in m.flags]

    def test_bad_input(self) -> None:
        rs = summaries(np.array([240.0, 245.0, 250.0]), np.full(3, 30.0))
        with pytest.raises(InputError, match="only 3 result"):
            match_sets(rs, 4, 245.0)
        with pytest.raises(InputError, match="at least 2"):
            match_sets(rs, 1, 245.0)
        with pytest.raises(InputError, match="--target"):
            match_sets(rs, 2, 0.0)
        with pytest.raises(InputError, match="--by"):
            match_sets(rs, 2, 245.0, "q")


# ==========================================================================
# Levels and power laws
# ==========================================================================


class TestLevels:
    def test_spl_reference_values(self) -> None:
        # Physics sheet section 10: 94 dB SPL is 1.00237 Pa rms, 114 dB is 10.0237 Pa rms.
        assert spl_to_pressure_pa(94.0) == pytest.approx(1.00237, abs=5e-6)
        assert spl_to_pressure_pa(114.0) == pytest.approx(10.0237, abs=5e-5)
        assert tuning.pressure_to_spl_db(spl_to_pressure_pa(123.4)) == pytest.approx(123.4)

    def test_neck_displacement_sheet_bottle(self) -> None:
        # Physics sheet section 6, bottle check: at 100 dB SPL inside xi = 27.4 um,
        # and xi = d at 156.35 dB.
        obj = make_object(0.35e-3, 18e-3, 0.04)
        xd = neck_displacement_over_diameter(100.0, 208.4, obj, sheet_air())
        assert xd * 18e-3 == pytest.approx(27.4e-6, abs=0.05e-6)
        xd_one = neck_displacement_over_diameter(156.35, 208.4, obj, sheet_air())
        assert xd_one == pytest.approx(1.0, abs=2e-3)

    def _points(self, rng: np.random.Generator, q0: float, beta: float, spl: np.ndarray,
                rel_sigma: float) -> list[LevelPoint]:
        p = spl_to_pressure_pa(spl)
        q = 1.0 / (1.0 / q0 + beta * p)
        sq = rel_sigma * q
        qn = q + sq * rng.standard_normal(q.size)
        return [LevelPoint(f"L{s:.0f}", float(s), "manifest", 243.0, 0.01, float(a), float(b))
                for s, a, b in zip(spl, qn, sq)]

    def test_onset_family_and_monte_carlo(self) -> None:
        """Seeded family: Q from 1/Q = 1/Q0 + beta p with noise. The onset is
        recovered at its stated rate, and its stated error matches the scatter."""
        rng = np.random.default_rng(8)
        z = []
        for _ in range(300):
            q0 = rng.uniform(10, 80)
            onset_true = rng.uniform(110, 135)
            beta = (1 / 0.9 - 1) / (q0 * float(spl_to_pressure_pa(onset_true)))
            spl = np.sort(rng.uniform(90, 145, int(rng.integers(5, 10))))
            spl[0], spl[-1] = 90.0, 145.0
            s = level_study(self._points(rng, q0, beta, spl, rng.uniform(0.002, 0.02)))
            z.append((s.onset_spl_db - onset_true) / s.onset_spl_stderr_db)
        z = np.abs(np.array(z))
        assert 0.60 <= np.mean(z <= 1) <= 0.80
        assert np.mean(z <= 2) >= 0.92
        # one fixed case, many noise draws (seeded Monte Carlo)
        spl = np.arange(96.0, 140.0, 6.0)
        beta = (1 / 9) / (38.0 * float(spl_to_pressure_pa(120.0)))
        est, se = [], []
        for _ in range(1000):
            s = level_study(self._points(rng, 38.0, beta, spl, 0.004))
            est.append(s.onset_spl_db)
            se.append(s.onset_spl_stderr_db / s.line.stderr_scale)
        assert np.mean(est) == pytest.approx(120.0, abs=4 * np.std(est) / math.sqrt(1000))
        assert np.median(se) == pytest.approx(np.std(est), rel=0.07)

    def test_noise_free_onset_is_exact(self) -> None:
        rng = np.random.default_rng(1)
        spl = np.arange(90.0, 146.0, 5.0)
        beta = (1 / 9) / (40.0 * float(spl_to_pressure_pa(127.0)))
        pts = [replace(p, q_stderr=0.01) for p in self._points(rng, 40.0, beta, spl, 0.0)]
        s = level_study(pts)
        assert s.onset_spl_db == pytest.approx(127.0, abs=1e-9)
        assert s.q_small_signal == pytest.approx(40.0, rel=1e-12)
        assert s.q_model(s.onset_spl_db) == pytest.approx(0.9 * 40.0, rel=1e-12)

    def test_no_level_dependence(self) -> None:
        rng = np.random.default_rng(4)
        spl = np.arange(80.0, 110.0, 5.0)
        pts = self._points(rng, 30.0, 0.0, spl, 0.01)
        s = level_study(pts)
        assert math.isnan(s.onset_spl_db)
        assert "no-level-dependence" in [f.code for f in s.flags]

    def test_displacement_at_onset_and_f0_shift(self) -> None:
        obj = make_object(0.48e-3, 24e-3, 0.028)
        air = air_state()
        rng = np.random.default_rng(2)
        spl = np.arange(96.0, 140.0, 6.0)
        beta = (1 / 9) / (38.0 * float(spl_to_pressure_pa(120.0)))
        pts = [replace(p, displacement_over_diameter=neck_displacement_over_diameter(
            p.spl_db, 243.0, obj, air), f0_hz=243.0 + 0.02 * i)
            for i, p in enumerate(self._points(rng, 38.0, beta, spl, 0.002))]
        s = level_study(pts)
        assert s.onset_displacement_over_diameter == pytest.approx(
            neck_displacement_over_diameter(s.onset_spl_db, 243.0, obj, air), rel=1e-9)
        assert s.f0_shift_hz == pytest.approx(0.02 * (len(spl) - 1))
        assert "f0-level-dependent" in [f.code for f in s.flags]

    def test_bad_input(self) -> None:
        rng = np.random.default_rng(0)
        pts = self._points(rng, 30.0, 1e-4, np.array([90.0, 100.0, 110.0]), 0.01)
        with pytest.raises(InputError, match="at least 3"):
            level_study(pts[:2])
        with pytest.raises(InputError, match="duplicate"):
            level_study([pts[0], pts[1], replace(pts[2], spl_db=90.0)])
        with pytest.raises(FitError, match="small-signal"):
            level_study([replace(p, q=q) for p, q in zip(pts, [10.0, 1.0, 0.6])])

    def test_level_points_drive_block_first(self) -> None:
        obj = make_object(0.48e-3, 24e-3, 0.028)
        row = tuning.ManifestRow(line=2, id="a", recording=None, result=Path("a.json"),
                                 object=None, sweep=None, inside=1, outside=2,
                                 temperature_c=None, values={"spl_db": 100.0})
        with_drive = result_from_dict(make_doc(obj, 243.0, 0.01, drive={
            "cavity_spl_db": 121.0, "displacement_over_diameter": 0.01}), "a.json")
        plain = result_from_dict(make_doc(obj, 243.0, 0.01), "a.json")
        p1, p2 = tuning.level_points([tuning.Measured(row, with_drive),
                                      tuning.Measured(row, plain)], "m.csv")
        assert (p1.spl_db, p1.spl_source, p1.displacement_over_diameter) == (121.0, "result",
                                                                             0.01)
        assert (p2.spl_db, p2.spl_source) == (100.0, "manifest")
        assert p2.displacement_over_diameter == pytest.approx(
            neck_displacement_over_diameter(100.0, 243.0, obj, plain.air))
        with pytest.raises(InputError, match="spl_db"):
            tuning.level_points([tuning.Measured(replace(row, values={}), plain)], "m.csv")


class TestPowerLaw:
    def test_pure_square_law(self) -> None:
        spl = np.arange(120.0, 146.0, 3.0)
        force = 3e-8 * spl_to_pressure_pa(spl) ** 2
        p = fit_power_law(spl, force)
        assert round(p.exponent, 3) == 2.000
        assert p.exponent == pytest.approx(2.0, abs=1e-10)
        assert p.ratio_per_10_db == pytest.approx(10.0, rel=1e-9)  # tenfold per 10 dB
        assert p.coefficient_n == pytest.approx(3e-8, rel=1e-9)
        assert p.consistent_with_square_law and not p.flags

    @pytest.mark.parametrize("seed", range(25))
    def test_equals_linregress_in_log_space(self, seed: int) -> None:
        rng = np.random.default_rng(seed)
        spl = np.sort(rng.choice(np.arange(100.0, 150.0), int(rng.integers(3, 12)),
                                 replace=False))
        n = rng.uniform(1.0, 3.0)
        clean = rng.uniform(1e-9, 1e-6) * spl_to_pressure_pa(spl) ** n
        for noisy, force in ((False, clean),
                             (True, clean * np.exp(0.05 * rng.standard_normal(spl.size)))):
            p = fit_power_law(spl, force)
            # scipy.stats.linregress on log10 F against log10 p
            ref = stats.linregress(np.log10(spl_to_pressure_pa(spl)), np.log10(force))
            assert p.exponent == pytest.approx(ref.slope, rel=1e-10)
            assert math.log10(p.coefficient_n) == pytest.approx(ref.intercept, rel=1e-9,
                                                                abs=1e-12)
            if noisy or spl.size == 3:
                assert p.exponent_stderr == pytest.approx(ref.stderr, rel=1e-7, abs=1e-12)
            else:
                # noise-free: both errors are rounding noise (linregress's goes through
                # 1 - r^2, so it sits near sqrt(machine epsilon))
                assert p.exponent_stderr < 1e-6 and ref.stderr < 1e-6
                assert p.exponent == pytest.approx(n, rel=1e-10)

    def test_weighted_against_polyfit_and_monte_carlo(self) -> None:
        rng = np.random.default_rng(12)
        spl = np.arange(126.0, 145.0, 3.0)
        truth = 7e-8 * spl_to_pressure_pa(spl) ** 2
        se = 1e-5 + 0.0 * truth
        est, stated = [], []
        for _ in range(1500):
            f = truth + se * rng.standard_normal(spl.size)
            p = fit_power_law(spl, f, se)
            w = f * math.log(10) / se  # numpy.polyfit weights 1/sigma of log10 F
            ref = np.polyfit(np.log10(spl_to_pressure_pa(spl)), np.log10(f), 1, w=w)
            assert p.exponent == pytest.approx(ref[0], rel=1e-9)
            est.append(p.exponent)
            stated.append(p.exponent_stderr / p.line.stderr_scale)
        assert np.median(stated) == pytest.approx(np.std(est), rel=0.08)  # seeded Monte Carlo

    def test_cube_law_is_not_square(self) -> None:
        rng = np.random.default_rng(3)
        spl = np.arange(120.0, 146.0, 3.0)
        force = 1e-10 * spl_to_pressure_pa(spl) ** 3 * np.exp(0.02 * rng.standard_normal(9))
        p = fit_power_law(spl, force)
        assert not p.consistent_with_square_law
        assert "not-square-law" in [f.code for f in p.flags]

    def test_bad_input(self) -> None:
        with pytest.raises(InputError, match="> 0"):
            fit_power_law([120, 130, 140], [1e-4, -1e-4, 1e-3])
        with pytest.raises(InputError, match="at least 3"):
            fit_power_law([120, 130], [1e-4, 1e-3])
        with pytest.raises(InputError, match="duplicate"):
            fit_power_law([120, 130, 130], [1e-4, 1e-3, 1e-3])

    def test_force_table(self, tmp_path: Path) -> None:
        p = tmp_path / "b.csv"
        p.write_text("# balance readings\nspl_db,excess_mass_kg,note\n120,0.001,a\n130,0.01,\n"
                     "140,0.1,\n")
        t = tuning.read_force_table(p)
        assert tuning.is_force_table(p)
        # standard gravity 9.80665 m/s^2 (3rd CGPM, 1901)
        np.testing.assert_allclose(t.force_n, [0.00980665, 0.0980665, 0.980665])
        assert t.quantity == "excess_mass_kg" and t.force_stderr_n is None
        bad = tmp_path / "c.csv"
        bad.write_text("spl_db,force_n,excess_mass_kg\n120,1,1\n")
        with pytest.raises(InputError, match="exactly one"):
            tuning.read_force_table(bad)
        bad.write_text("spl_db,force_n,weight\n120,1,1\n")
        with pytest.raises(InputError, match="unknown column"):
            tuning.read_force_table(bad)


# ==========================================================================
# Manifests
# ==========================================================================


class TestManifest:
    def _files(self, tmp_path: Path) -> None:
        for name in ("a.flac", "b.flac", "c.json", "jar.toml"):
            (tmp_path / name).write_text("x")

    def test_reads_rows(self, tmp_path: Path) -> None:
        self._files(tmp_path)
        m = tmp_path / "m.csv"
        m.write_text("# a trim series\nid,recording,result,object,neck_length,temperature,inside\n"
                     "s0,a.flac,,jar.toml,44 mm,19.5 degC,2\n"
                     ",b.flac,,jar.toml,4 cm,,\n"
                     "s2,,c.json,,0.036 m,,\n")
        rows = tuning.read_tuning_manifest(m, {"neck_length": "length"}, ("neck_length",))
        assert [r.id for r in rows] == ["s0", "b", "s2"]
        assert [r.values["neck_length"] for r in rows] == pytest.approx([0.044, 0.04, 0.036])
        assert rows[0].temperature_c == 19.5 and rows[0].inside == 2 and rows[1].inside == 1
        assert rows[0].object == tmp_path / "jar.toml" and rows[2].result == tmp_path / "c.json"

    @pytest.mark.parametrize("text,match", [
        ("id,recording,neck_lenght\ns0,a.flac,44 mm\n", "did you mean 'neck_length'"),
        ("id,recording\ns0,a.flac\n", "missing column"),
        ("id,object,neck_length\ns0,jar.toml,44 mm\n", "recording or result"),
        ("id,recording,result,neck_length\ns0,a.flac,c.json,44 mm\n", "exactly one"),
        ("id,recording,neck_length\ns0,zzz.flac,44 mm\n", "does not exist"),
        ("id,recording,neck_length\ns0,a.flac,44 mm\ns0,b.flac,40 mm\n", "duplicate id"),
        ("id,recording,neck_length\ns0,a.flac,44\n", "no unit"),
        ("id,recording,neck_length\ns0,a.flac,44 mL\n", "not a length"),
        ("id,recording,neck_length\n", "no items"),
        ("# nothing\n", "empty"),
        ("id,recording,neck_length,inside\ns0,a.flac,44 mm,0\n", "from 1"),
    ])
    def test_bad_manifests(self, tmp_path: Path, text: str, match: str) -> None:
        self._files(tmp_path)
        m = tmp_path / "m.csv"
        m.write_text(text)
        with pytest.raises(InputError, match=match):
            tuning.read_tuning_manifest(m, {"neck_length": "length"}, ("neck_length",))


# ==========================================================================
# Plots (only check that plotting runs and writes a file)
# ==========================================================================


def test_plots_write_files(tmp_path: Path) -> None:
    from characterize.report.tuning_plots import levels_plot, power_law_plot, series_plot

    obj = make_object(0.4e-3, 18e-3, 0.045)
    rng = np.random.default_rng(0)
    pts, _ = trim_points(obj, np.linspace(0.045, 0.02, 5), 0.011, 0.01, rng)
    assert series_plot(fit_series(pts, "neck-length", obj), tmp_path / "s.png").stat().st_size
    vols = np.linspace(0, 1e-4, 4)
    fpts = [SeriesPoint(str(i), float(v), helmholtz_f0_hz(343.0, obj.neck.area_m2,
                                                          0.4e-3 - v, 0.056), 0.01, 343.0, 20.0)
            for i, v in enumerate(vols)]
    assert series_plot(fit_series(fpts, "volume", obj), tmp_path / "f.png").stat().st_size
    spl = np.arange(96.0, 140.0, 6.0)
    p = spl_to_pressure_pa(spl)
    lp = [LevelPoint(str(s), float(s), "manifest", 243.0, 0.01, float(1 / (1 / 38 + 1e-4 * x)),
                     0.05) for s, x in zip(spl, p)]
    assert levels_plot(level_study(lp), tmp_path / "l.png").stat().st_size
    pl = fit_power_law(spl, 1e-8 * p**2 * np.exp(0.02 * rng.standard_normal(spl.size)))
    assert power_law_plot(pl, tmp_path / "p.png").stat().st_size
