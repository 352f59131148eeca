"""Tests for characterize.fitting: the oscillator model, the covariance (CRLB)
and truth families through the simulator.

Outside references: the physics sheet §2 check values for the oscillator, the
sheet §8 CRLB check (recomputed here from the sheet's analytic derivatives),
Kay 1993 (inverse Fisher information = CRLB), scipy.optimize for extrema and
half-power points, the binomial distribution (scipy.stats.binom) for coverage,
and simulate.Setup's stated truth for the families (NIST style: known f0 and
Q in, the fit must recover them).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import pytest
from scipy import optimize, stats

from characterize.errors import FitError
from characterize.fitting.fit import FitResult, covariance, fit_transfer, residual_at
from characterize.fitting.models import half_power_band, inside_outside, oscillator
from characterize.simulate import Setup, simulate
from characterize.transfer import TransferFunction, cross_spectral_transfer, sweep_transfer

# --------------------------------------------------------------------------
# models
# --------------------------------------------------------------------------


class TestOscillator:
    F0, Q = 256.0, 30.0

    def test_low_pass_peak_matches_sheet(self) -> None:
        def neg_mag(f: float) -> float:
            return -abs(oscillator(np.array([f]), self.F0, self.Q)[0])

        res = optimize.minimize_scalar(neg_mag, bounds=(240.0, 270.0), method="bounded",
                                       options={"xatol": 1e-9})
        assert res.x == pytest.approx(255.929, abs=6e-4)  # physics sheet §2 check
        assert -res.fun == pytest.approx(30.0042, abs=6e-5)  # physics sheet §2 check

    def test_band_pass_half_power_band_matches_sheet(self) -> None:
        # band-pass form (j f/(Q f0)) H(f): peak 1 at f0, half power at 1/sqrt 2
        def bp(f: float) -> float:
            return abs(1j * f / (self.Q * self.F0) * oscillator(np.array([f]), self.F0, self.Q)[0])

        assert bp(self.F0) == pytest.approx(1.0, abs=1e-12)
        lo = optimize.brentq(lambda f: bp(f) - 1 / math.sqrt(2), 200.0, self.F0, xtol=1e-12)
        hi = optimize.brentq(lambda f: bp(f) - 1 / math.sqrt(2), self.F0, 320.0, xtol=1e-12)
        assert hi - lo == pytest.approx(8.5333, abs=6e-5)  # physics sheet §2: BW = f0/Q
        band = half_power_band(self.F0, self.Q)
        assert band[0] == pytest.approx(lo, abs=1e-9)
        assert band[1] == pytest.approx(hi, abs=1e-9)
        assert math.sqrt(band[0] * band[1]) == pytest.approx(self.F0, rel=1e-12)  # geometric centre

    def test_phase_at_resonance_and_limits(self) -> None:
        h = oscillator(np.array([1e-3, self.F0, 1e6]), self.F0, self.Q)
        # textbook driven oscillator: in phase far below, -90 deg and |H| = Q at
        # f0, -180 deg and falling as (f0/f)^2 far above (e^{+j omega t} convention)
        assert h[0] == pytest.approx(1.0, abs=1e-6)
        assert np.angle(h[1]) == pytest.approx(-np.pi / 2, abs=1e-12)
        assert abs(h[1]) == pytest.approx(self.Q, rel=1e-12)
        assert abs(h[2]) == pytest.approx((self.F0 / 1e6) ** 2, rel=1e-3)
        assert abs(np.angle(h[2])) == pytest.approx(np.pi, abs=1e-3)

    def test_poles_match_sheet(self) -> None:
        # H = w0^2 / ((s - p1)(s - p2)) at s = j 2 pi f, with the poles of the
        # physics sheet §2 check: s = -26.8083 +- j1608.2720 rad/s
        p1, p2 = complex(-26.8083, 1608.2720), complex(-26.8083, -1608.2720)
        f = np.linspace(10.0, 1000.0, 991)
        s = 2j * np.pi * f
        ref = (2 * np.pi * self.F0) ** 2 / ((s - p1) * (s - p2))
        np.testing.assert_allclose(oscillator(f, self.F0, self.Q), ref, rtol=1e-5)

    def test_inside_outside_gain_delay_sign(self) -> None:
        f = np.linspace(50.0, 1000.0, 97)
        base = oscillator(f, self.F0, self.Q)
        h = inside_outside(f, self.F0, self.Q, 0.8, 1e-4, -1.0)
        np.testing.assert_allclose(np.abs(h), 0.8 * np.abs(base), rtol=1e-12)
        # a delay tau is a phase of -2 pi f tau (e^{+j omega t}); inversion adds pi
        ph = np.angle(h / base)
        np.testing.assert_allclose(np.angle(np.exp(1j * (ph - np.pi + 2 * np.pi * f * 1e-4))),
                                   0.0, atol=1e-12)


# --------------------------------------------------------------------------
# covariance and the Cramer-Rao bound (physics sheet §8)
# --------------------------------------------------------------------------

SHEET_F = np.arange(150.0, 401.0, 1.0)  # 251 points, 1 Hz steps (physics sheet §8)
SHEET_SIGMA = 0.30  # E|n|^2 = sigma^2, 1 % of the peak 30 (physics sheet §8)


def _sheet_derivatives(f: np.ndarray, f0: float, q: float, a: complex
                       ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """dH/df0, dH/dQ, dH/dA of H = A/D, D = 1 - (f/f0)^2 + j f/(Q f0),
    written out from the physics sheet §8 formulas."""
    d = 1 - (f / f0) ** 2 + 1j * f / (q * f0)
    d_f0 = -(a / d**2) * (2 * f**2 / f0**3 - 1j * f / (q * f0**2))
    d_q = (a / d**2) * 1j * f / (q**2 * f0)
    d_a = 1 / d
    return d_f0, d_q, d_a


def _fisher(cols: list[np.ndarray], sigma: float) -> np.ndarray:
    """I_ij = (2/sigma^2) sum Re[conj(dH_i) dH_j] (physics sheet §8; Kay 1993)."""
    j = np.stack(cols, axis=1)
    return 2 / sigma**2 * np.real(np.conj(j).T @ j)


class TestCramerRao:
    def test_sheet_gain_known(self) -> None:
        d_f0, d_q, _ = _sheet_derivatives(SHEET_F, 256.0, 30.0, 1.0)
        crlb = np.sqrt(np.diag(np.linalg.inv(_fisher([d_f0, d_q], SHEET_SIGMA))))
        assert crlb[0] == pytest.approx(0.0117, abs=6e-5)  # physics sheet §8
        assert crlb[1] == pytest.approx(0.0820, abs=6e-5)  # physics sheet §8

    def test_sheet_complex_gain_unknown(self) -> None:
        d_f0, d_q, d_a = _sheet_derivatives(SHEET_F, 256.0, 30.0, 1.0)
        crlb = np.sqrt(np.diag(np.linalg.inv(_fisher([d_f0, d_q, d_a, 1j * d_a], SHEET_SIGMA))))
        assert crlb[0] == pytest.approx(0.0167, abs=6e-5)  # physics sheet §8
        assert crlb[1] == pytest.approx(0.1171, abs=6e-5)  # physics sheet §8

    @staticmethod
    def _our_model_crlb(f: np.ndarray, f0: float, q: float, g: float, tau: float,
                        sign: float, sigma: float) -> np.ndarray:
        """Inverse Fisher matrix of H = s G R(f) e^{-j 2 pi f tau} for
        [f0, Q, G, tau], from the sheet's derivatives with A = s G e^{-j 2 pi f tau}."""
        rot = sign * np.exp(-2j * np.pi * f * tau)
        d_f0, d_q, d_a = _sheet_derivatives(f, f0, q, g * rot)
        h = g * rot * d_a
        return np.linalg.inv(_fisher([d_f0, d_q, rot * d_a, -2j * np.pi * f * h], sigma))

    @pytest.mark.parametrize("g, tau, sign", [(1.0, 0.0, 1.0), (0.7, 5e-5, -1.0),
                                              (2.5, -1.2e-4, 1.0)])
    def test_covariance_equals_analytic_crlb(self, g: float, tau: float, sign: float) -> None:
        p = np.array([256.0, 30.0, g, tau])
        h = inside_outside(SHEET_F, *p, sign)
        comp = np.full(SHEET_F.size, SHEET_SIGMA / math.sqrt(2))  # per real/imag component
        cov = covariance(lambda v: residual_at(v, SHEET_F, h, comp, sign), p)
        ref = self._our_model_crlb(SHEET_F, 256.0, 30.0, g, tau, sign, SHEET_SIGMA)
        np.testing.assert_allclose(np.sqrt(np.diag(cov)), np.sqrt(np.diag(ref)), rtol=0.01)
        corr = cov / np.sqrt(np.outer(np.diag(cov), np.diag(cov)))
        corr_ref = ref / np.sqrt(np.outer(np.diag(ref), np.diag(ref)))
        np.testing.assert_allclose(corr, corr_ref, atol=0.01)

    def test_our_model_lies_between_the_sheet_cases(self) -> None:
        # real gain + delay is two nuisance parameters, like the complex gain, so
        # its bound sits above the gain-known one (Fisher information of nested models)
        ref = np.sqrt(np.diag(self._our_model_crlb(SHEET_F, 256.0, 30.0, 1.0, 0.0, 1.0,
                                                   SHEET_SIGMA)))
        assert 0.0117 < ref[0] < 0.0167 * 1.05
        assert 0.0820 < ref[1] < 0.1171 * 1.05

    @staticmethod
    def _synthetic(rng: np.random.Generator, g: float = 1.0, tau: float = 0.0) -> TransferFunction:
        h = inside_outside(SHEET_F, 256.0, 30.0, g, tau)
        noise = SHEET_SIGMA / math.sqrt(2) * (rng.standard_normal(SHEET_F.size)
                                              + 1j * rng.standard_normal(SHEET_F.size))
        n = SHEET_F.size
        return TransferFunction(SHEET_F, h + noise, np.full(n, SHEET_SIGMA**2), np.zeros(n),
                                (150.0, 400.0), "synthetic", np.zeros(n))

    def test_fit_reports_the_bound(self) -> None:
        r = fit_transfer(self._synthetic(np.random.default_rng(8)), band_hz=(150.0, 400.0))
        ref = np.sqrt(np.diag(self._our_model_crlb(SHEET_F, r.f0_hz, r.q, r.gain, r.delay_s,
                                                   1.0, SHEET_SIGMA)))
        assert r.n_points == 251
        assert r.crlb_f0_hz == pytest.approx(ref[0], rel=0.01)
        assert r.crlb_q == pytest.approx(ref[1], rel=0.01)
        # the reported error is the bound, scaled up only when chi2 says so
        assert r.f0_stderr_hz == pytest.approx(ref[0] * max(1.0, math.sqrt(r.reduced_chi2)),
                                               rel=0.01)

    def test_monte_carlo_scatter_reaches_the_bound(self) -> None:
        # least squares is ML here, so its scatter should be close to the CRLB
        # (physics sheet §8: Monte Carlo LS 0.0162 Hz / 0.1168 against 0.0167 / 0.1171)
        rng = np.random.default_rng(2024)
        est = np.array([(r.f0_hz, r.q) for r in
                        (fit_transfer(self._synthetic(rng), band_hz=(150.0, 400.0))
                         for _ in range(120))])
        ref = np.sqrt(np.diag(self._our_model_crlb(SHEET_F, 256.0, 30.0, 1.0, 0.0, 1.0,
                                                   SHEET_SIGMA)))
        # the sample std of 120 draws is within +-20 % of the truth at ~3 sigma
        assert np.std(est[:, 0], ddof=1) == pytest.approx(ref[0], rel=0.2)
        assert np.std(est[:, 1], ddof=1) == pytest.approx(ref[1], rel=0.2)
        assert abs(np.mean(est[:, 0]) - 256.0) < 4 * ref[0] / math.sqrt(120)
        assert abs(np.mean(est[:, 1]) - 30.0) < 4 * ref[1] / math.sqrt(120)


class TestNoPeak:
    @staticmethod
    def _tf(h: np.ndarray) -> TransferFunction:
        n = SHEET_F.size
        return TransferFunction(SHEET_F, h, np.full(n, 1e-4), np.zeros(n), (150.0, 400.0),
                                "synthetic", np.zeros(n))

    def test_flat_response(self) -> None:
        with pytest.raises(FitError, match="peak"):
            fit_transfer(self._tf(np.ones(SHEET_F.size, dtype=complex)))

    def test_rising_response(self) -> None:
        with pytest.raises(FitError, match="peak"):
            fit_transfer(self._tf(1 + SHEET_F / 400 + 0j))

    def test_flat_response_with_noise(self) -> None:
        # flat within 1 % noise (the noise model says so): there is no resonance
        # to report, wherever the noise puts the largest bin (common practice)
        rng = np.random.default_rng(0)
        h = 1 + 0.01 / math.sqrt(2) * (rng.standard_normal(SHEET_F.size)
                                       + 1j * rng.standard_normal(SHEET_F.size))
        with pytest.raises(FitError):
            fit_transfer(self._tf(h))


# --------------------------------------------------------------------------
# truth families through the simulator
# --------------------------------------------------------------------------


@dataclass(frozen=True)
class Case:
    index: int
    setup: Setup
    result: FitResult | None
    error: str | None

    def describe(self) -> str:
        s = self.setup
        return (f"case {self.index}: f0={s.f0_hz:.2f} Q={s.q:.2f} snr={s.snr_db:.1f} "
                f"fs={s.rate_hz:g} delay={s.delay_s * 1e6:+.1f}us inv={s.inverted} -> "
                + (self.error if self.result is None else str(self.result)))


def _draw_setup(rng: np.random.Generator, excitation: str) -> Setup:
    """f0 log-uniform 50 Hz-4 kHz, Q log-uniform 4-200, SNR 15-60 dB, rate
    44.1/48/96 kHz, delay +-0.2 ms, random polarity."""
    f0 = math.exp(rng.uniform(math.log(50.0), math.log(4000.0)))
    q = math.exp(rng.uniform(math.log(4.0), math.log(200.0)))
    snr = float(rng.uniform(15.0, 60.0))
    rate = float(rng.choice([44100.0, 48000.0, 96000.0]))
    delay = float(rng.uniform(-2e-4, 2e-4))
    inverted = bool(rng.random() < 0.5)
    setup = Setup(f0_hz=f0, q=q, rate_hz=rate, snr_db=snr, delay_s=delay, inverted=inverted)
    if excitation == "noise":
        # long enough for segments of 8 bandwidths (1/bandwidth = Q/f0) and
        # enough averages: about max(8, 80 Q/f0) s
        setup = setup.with_(excitation="noise", noise_duration_s=max(8.0, 80.0 * q / f0))
    return setup


def _family(excitation: str, size: int, base_seed: int) -> list[Case]:
    cases = []
    for i in range(size):
        rng = np.random.default_rng([base_seed, i])
        setup = _draw_setup(rng, excitation)
        data, sweep = simulate(setup, rng)
        try:
            if excitation == "sweep":
                assert sweep is not None
                tf = sweep_transfer(data[:, 0], data[:, 1], setup.rate_hz, sweep)
            else:
                tf = cross_spectral_transfer(data[:, 0], data[:, 1], setup.rate_hz)
            cases.append(Case(i, setup, fit_transfer(tf), None))
        except FitError as exc:
            cases.append(Case(i, setup, None, f"FitError: {exc}"))
    return cases


SWEEP_FAMILY_SIZE = 40
NOISE_FAMILY_SIZE = 16


@pytest.fixture(scope="module")
def sweep_family() -> list[Case]:
    return _family("sweep", SWEEP_FAMILY_SIZE, base_seed=1)


@pytest.fixture(scope="module")
def noise_family() -> list[Case]:
    return _family("noise", NOISE_FAMILY_SIZE, base_seed=2)


def _coverage_floor(n: int) -> float:
    """Lower bound on the fraction of cases within 2 standard errors.

    For honest errors each case is inside with p = 0.9545 (Gaussian 2 sigma),
    so the count is binomial(n, p); the floor is 0.88 (brief) or, for a small
    family, the binomial 1 % quantile, whichever is lower (scipy.stats.binom).
    For n = 40 the 0.88 floor (>= 36 of 40) is reached by chance with ~3 %.
    """
    return min(0.88, float(stats.binom.ppf(0.01, n, 0.9545)) / n)


def _check_accuracy(cases: list[Case]) -> None:
    bad = [c.describe() for c in cases
           if c.result is None
           or abs(c.result.f0_hz / c.setup.f0_hz - 1) > 1e-3  # brief: f0 within 0.1 %
           or abs(c.result.q / c.setup.q - 1) > 0.03]  # brief: Q within 3 %
    assert not bad, "\n".join(bad)


def _check_polarity(cases: list[Case]) -> None:
    bad = [c.describe() for c in cases
           if c.result is None or c.result.polarity_inverted != c.setup.inverted]
    assert not bad, "\n".join(bad)


def _check_coverage(cases: list[Case], name: str) -> None:
    ok = [c for c in cases if c.result is not None]
    assert len(ok) == len(cases)
    if name == "f0":
        inside = [abs(c.result.f0_hz - c.setup.f0_hz) < 2 * c.result.f0_stderr_hz for c in ok]
    else:
        inside = [abs(c.result.q - c.setup.q) < 2 * c.result.q_stderr for c in ok]
    frac = float(np.mean(inside))
    assert _coverage_floor(len(cases)) <= frac <= 1.0, (
        f"{name} coverage {frac:.3f}; outside: "
        + "; ".join(c.describe() for c, i in zip(ok, inside) if not i))
    # the upper end cannot catch errors that are too large; the spread of the
    # normalised errors can: its rms is 1 for honest errors, with a sampling
    # spread of about 1/sqrt(2 n) (0.11 for 40 cases, 0.18 for 16)
    if name == "f0":
        z = [(c.result.f0_hz - c.setup.f0_hz) / c.result.f0_stderr_hz for c in ok]
    else:
        z = [(c.result.q - c.setup.q) / c.result.q_stderr for c in ok]
    rms = float(np.sqrt(np.mean(np.square(z))))
    assert 0.5 <= rms <= 1.5, f"{name}: rms of normalised errors {rms:.2f}"


def _check_residuals(cases: list[Case]) -> None:
    # with honest per-bin noise the reduced chi2 is 1 +- sqrt(2/dof) (dof >= 40
    # here); a factor 3 in power means the weights (and the unscaled
    # covariance) are wrong, and the coverage would then only hold because
    # the errors are scaled by sqrt(chi2_r); a third means the noise is overstated
    bad = [f"{c.describe()} chi2_r={c.result.reduced_chi2:.2f}" for c in cases
           if c.result is not None and not (1 / 3 < c.result.reduced_chi2 < 3.0)]
    assert not bad, "\n".join(bad)


class TestSweepFamily:
    def test_size(self, sweep_family: list[Case]) -> None:
        assert len(sweep_family) >= 40

    def test_f0_and_q_recovered(self, sweep_family: list[Case]) -> None:
        _check_accuracy(sweep_family)

    def test_polarity_detected(self, sweep_family: list[Case]) -> None:
        _check_polarity(sweep_family)

    @pytest.mark.parametrize("name", ["f0", "q"])
    def test_coverage(self, sweep_family: list[Case], name: str) -> None:
        _check_coverage(sweep_family, name)

    def test_residuals_match_noise_model(self, sweep_family: list[Case]) -> None:
        _check_residuals(sweep_family)


class TestNoiseFamily:
    def test_size(self, noise_family: list[Case]) -> None:
        assert len(noise_family) >= 16

    def test_f0_and_q_recovered(self, noise_family: list[Case]) -> None:
        _check_accuracy(noise_family)

    def test_polarity_detected(self, noise_family: list[Case]) -> None:
        _check_polarity(noise_family)

    @pytest.mark.parametrize("name", ["f0", "q"])
    def test_coverage(self, noise_family: list[Case], name: str) -> None:
        _check_coverage(noise_family, name)

    def test_residuals_match_noise_model(self, noise_family: list[Case]) -> None:
        _check_residuals(noise_family)
