"""Tests for characterize.fitting.ringdown: free decays (taps, claps, pops).

Outside references:

- the damped-sinusoid law p(t) = A exp(-t/tau) cos(2 pi f_d t + phi) with
  f0 = sqrt(f_d^2 + (2 pi tau)^-2) and Q = pi f0 tau (textbook free vibration of
  a viscously damped oscillator; physics sheet §8 "Free decay");
- the physics sheet §8 check values: 0.2 s at 8 kHz, f0 = 256 Hz, Q = 30, noise
  1 % of the first peak, 200 trials: f0 = 255.9999 +- 0.0097 Hz, Q = 30.002 +- 0.062;
  matrix pencil (Hua & Sarkar, IEEE Trans. ASSP 38(5), 1990): noiseless
  f0 = 256.000000 Hz, Q = 30.000000, with noise the same scatter as least squares;
- scipy.signal.hilbert: the analytic-signal envelope of a decay, whose
  log-linear slope is -1/tau (an independent estimate of the decay rate);
- the inverse-variance weighted mean and its standard error (common practice;
  e.g. Bevington & Robinson, "Data Reduction and Error Analysis for the
  Physical Sciences", 3rd ed. 2003, §4.1, from memory).

The synthetic decays are made here from the law above, so the truth is known
exactly; no value is taken from the code under test.
"""

from __future__ import annotations

import math
import re
from pathlib import Path

import numpy as np
import pytest
import soundfile as sf
from click.testing import CliRunner
from scipy.signal import hilbert

from characterize.cli import main
from characterize.errors import FitError
from characterize.fitting.ringdown import (
    MIN_DECAY_DB,
    combine,
    find_decays,
    fit_decay,
    fit_ringdown,
    matrix_pencil,
)
from characterize.pipeline import analyze


def damped_cosine(f0_hz: float, q: float, rate_hz: float, duration_s: float,
                  amplitude: float = 1.0, phase: float = 0.0) -> np.ndarray:
    """A exp(-t/tau) cos(2 pi f_d t + phi), tau = Q/(pi f0), f_d = f0 sqrt(1 - 1/(4Q^2))."""
    tau = q / (math.pi * f0_hz)
    fd = f0_hz * math.sqrt(1.0 - 1.0 / (4.0 * q * q))
    t = np.arange(int(round(duration_s * rate_hz))) / rate_hz
    return amplitude * np.exp(-t / tau) * np.cos(2 * math.pi * fd * t + phase)


# --------------------------------------------------------------------------
# the physics sheet's check (§8)
# --------------------------------------------------------------------------

SHEET_FS = 8000.0
SHEET_F0, SHEET_Q = 256.0, 30.0
SHEET_TRIALS = 50  # the sheet used 200; the allowances below account for 50


@pytest.fixture(scope="module")
def sheet_trials() -> np.ndarray:
    """50 noisy decays as in the sheet: columns f0, Q (least squares), f0, Q
    (matrix pencil start values) and the reported standard errors of f0 and Q."""
    rng = np.random.default_rng(2024)
    clean = damped_cosine(SHEET_F0, SHEET_Q, SHEET_FS, 0.2)
    noise = 0.01 * float(np.max(np.abs(clean)))  # 1 % of the first peak
    rows = []
    for _ in range(SHEET_TRIALS):
        d = fit_decay(clean + noise * rng.standard_normal(clean.size), SHEET_FS, noise)
        rows.append((d.f0_hz, d.q, d.pencil_f0_hz, d.pencil_q, d.f0_stderr_hz, d.q_stderr))
    return np.asarray(rows)


class TestSheetCheck:

    def test_noiseless_matrix_pencil_is_exact(self) -> None:
        # physics sheet §8 "Matrix pencil" check: 256.000000 Hz, Q 30.000000
        x = damped_cosine(SHEET_F0, SHEET_Q, SHEET_FS, 0.2)
        modes = matrix_pencil(x, SHEET_FS, 2)
        assert len(modes) == 1
        f0, q, amp = modes[0]
        assert f0 == pytest.approx(256.0, abs=5e-6)
        assert q == pytest.approx(30.0, abs=5e-6)
        # cos = (e^{j..} + e^{-j..})/2: the positive-frequency pole carries A/2
        assert abs(amp) == pytest.approx(0.5, rel=1e-6)

    def test_noiseless_least_squares_is_exact(self) -> None:
        x = damped_cosine(SHEET_F0, SHEET_Q, SHEET_FS, 0.2, amplitude=0.7, phase=1.1)
        d = fit_decay(x, SHEET_FS, 1e-6)
        assert d.f0_hz == pytest.approx(256.0, abs=1e-5)
        assert d.q == pytest.approx(30.0, abs=1e-4)
        assert d.amplitude == pytest.approx(0.7, rel=1e-5)

    def test_least_squares_scatter_matches_sheet(self, sheet_trials: np.ndarray) -> None:
        f0, q = sheet_trials[:, 0], sheet_trials[:, 1]
        n = f0.size
        # sheet §8: f0 = 255.9999 +- 0.0097 Hz, Q = 30.002 +- 0.062 (200 trials).
        # The mean is checked to 3.5 standard errors of a 50-trial mean (plus the
        # sheet's own 200-trial uncertainty); the scatter to +-35 %: a sample standard
        # deviation from 50 trials has a relative standard error 1/sqrt(2*49) = 10 %.
        assert abs(np.mean(f0) - 255.9999) < 3.5 * 0.0097 * math.sqrt(1 / n + 1 / 200)
        assert abs(np.mean(q) - 30.002) < 3.5 * 0.062 * math.sqrt(1 / n + 1 / 200)
        assert 0.65 < np.std(f0, ddof=1) / 0.0097 < 1.35
        assert 0.65 < np.std(q, ddof=1) / 0.062 < 1.35

    def test_matrix_pencil_scatter_matches_sheet(self, sheet_trials: np.ndarray) -> None:
        # sheet §8: with noise the matrix pencil has the same scatter as least
        # squares (+-0.0100 Hz, +-0.063); same allowances as above. (These are the
        # fit's start values, a pencil with M = 4 singular vectors where the sheet
        # keeps M = 2; the extra pair takes up noise and the scatter is the same.)
        f0, q = sheet_trials[:, 2], sheet_trials[:, 3]
        n = f0.size
        assert abs(np.mean(f0) - 256.0) < 3.5 * 0.0100 * math.sqrt(1 / n + 1 / 200)
        assert abs(np.mean(q) - 30.0) < 3.5 * 0.063 * math.sqrt(1 / n + 1 / 200)
        assert 0.65 < np.std(f0, ddof=1) / 0.0100 < 1.35
        assert 0.65 < np.std(q, ddof=1) / 0.063 < 1.35

    def test_reported_errors_match_the_scatter(self, sheet_trials: np.ndarray) -> None:
        # honest standard errors: the mean reported error equals the sheet's
        # Monte Carlo scatter within 20 % (the reported error varies little between trials)
        assert 0.8 < np.mean(sheet_trials[:, 4]) / 0.0097 < 1.2
        assert 0.8 < np.mean(sheet_trials[:, 5]) / 0.062 < 1.2


# --------------------------------------------------------------------------
# a seeded family: f0 50 Hz - 4 kHz, Q 4 - 200, noise 1 % of the first peak
# --------------------------------------------------------------------------


def _family(n: int, seed: int) -> list[tuple[float, float, float, float, float]]:
    """(f0, Q, rate, duration, phase). The rate is 8 to 24 samples per period
    (fewer for high Q, so that a decay of 3 time constants stays within 2000
    samples and the matrix pencil's SVD stays fast; never fewer than 7), the
    duration 3 time constants but at least 10 periods."""
    rng = np.random.default_rng(seed)
    out = []
    for _ in range(n):
        f0 = float(math.exp(rng.uniform(math.log(50.0), math.log(4000.0))))
        q = float(math.exp(rng.uniform(math.log(4.0), math.log(200.0))))
        tau = q / (math.pi * f0)
        spp = float(rng.uniform(8.0, 24.0))
        duration = max(3.0 * tau, 10.0 / f0)
        spp = max(7.0, min(spp, 2000.0 / (duration * f0)))
        out.append((f0, q, spp * f0, duration, float(rng.uniform(0, 2 * math.pi))))
    return out


FAMILY = _family(12, seed=7)


@pytest.mark.parametrize("f0, q, rate, duration, phase", FAMILY,
                         ids=[f"f{c[0]:.0f}-q{c[1]:.1f}" for c in FAMILY])
def test_family_recovers_f0_and_q(f0: float, q: float, rate: float, duration: float,
                                  phase: float) -> None:
    rng = np.random.default_rng(int(f0 * 1000) % 2**31)
    clean = damped_cosine(f0, q, rate, duration, amplitude=0.5, phase=phase)
    noise = 0.01 * float(np.max(np.abs(clean)))  # 1 % of the first peak
    x = clean + noise * rng.standard_normal(clean.size)
    d = fit_decay(x, rate, noise)
    # the requirement: f0 within 0.1 %, Q within 2 %
    assert abs(d.f0_hz / f0 - 1) < 1e-3, d
    assert abs(d.q / q - 1) < 0.02, d
    # the matrix pencil, run here on its own (Hua & Sarkar 1990, M = 2), as well
    f_mp, q_mp, _ = matrix_pencil(x, rate, 2)[0]
    assert abs(f_mp / f0 - 1) < 1e-3
    assert abs(q_mp / q - 1) < 0.02
    # and the fit's own start values
    assert abs(d.pencil_f0_hz / f0 - 1) < 1e-3
    assert abs(d.pencil_q / q - 1) < 0.02
    # the errors are honest: truth within 4.5 reported standard errors
    assert abs(d.f0_hz - f0) < 4.5 * d.f0_stderr_hz
    assert abs(d.q - q) < 4.5 * d.q_stderr


def test_family_spans_the_requested_ranges() -> None:
    f0s = [c[0] for c in FAMILY]
    qs = [c[1] for c in FAMILY]
    assert min(f0s) < 150 and max(f0s) > 1500  # log-uniform over 50 Hz - 4 kHz
    assert min(qs) < 10 and max(qs) > 60  # log-uniform over 4 - 200


# --------------------------------------------------------------------------
# decay rate against scipy.signal.hilbert
# --------------------------------------------------------------------------


@pytest.mark.parametrize("f0, q", [(256.0, 30.0), (1000.0, 10.0), (90.0, 40.0)])
def test_decay_rate_matches_hilbert_envelope(f0: float, q: float) -> None:
    fs = 16 * f0  # 16 samples per period
    tau = q / (math.pi * f0)
    x = damped_cosine(f0, q, fs, 7 * tau, phase=0.3)
    d = fit_decay(x, fs, 1e-6)
    # scipy.signal.hilbert: ln|analytic signal| is linear in t with slope -1/tau;
    # fitted from 1 to 4 time constants (away from the abrupt start, where the
    # analytic signal of a truncated record is disturbed, and from the tail,
    # where that disturbance exceeds the decayed signal)
    env = np.abs(hilbert(x))
    t = np.arange(x.size) / fs
    sel = (t > tau) & (t < 4 * tau)
    slope = float(np.polyfit(t[sel], np.log(env[sel]), 1)[0])
    rate_fit = math.pi * d.f0_hz / d.q  # 1/tau = pi f0 / Q
    assert rate_fit == pytest.approx(-slope, rel=1e-3)
    # and both equal the truth (guards against both being wrong alike)
    assert -slope == pytest.approx(1 / tau, rel=1e-3)


# --------------------------------------------------------------------------
# several decays in one file
# --------------------------------------------------------------------------

TAPS = [(0.2, 1.0), (1.0, 0.45), (1.8, 0.8)]  # (start s, amplitude)


def _taps(f0: float, q: float, fs: float, noise: float, seed: int,
          taps: list[tuple[float, float]] = TAPS, total_s: float = 2.4) -> np.ndarray:
    rng = np.random.default_rng(seed)
    x = np.zeros(int(total_s * fs))
    for t0, a in taps:
        seg = damped_cosine(f0, q, fs, 0.5, a, float(rng.uniform(0, 2 * math.pi)))
        i = int(t0 * fs)
        x[i:i + seg.size] += seg[: x.size - i]
    return x + noise * rng.standard_normal(x.size)


@pytest.fixture(scope="module")
def decays():
    """Three taps of a 440 Hz, Q 25 resonator in one 2.4 s file at 8 kHz."""
    return fit_ringdown(_taps(440.0, 25.0, 8000.0, 1e-3, seed=3), 8000.0)


class TestSeveralDecays:

    def test_each_tap_is_found_where_it_starts(self, decays) -> None:
        assert len(decays) == len(TAPS)
        for d, (t0, _) in zip(decays, TAPS, strict=True):
            # the fit starts just after the tap's first peak (within 5 ms of it)
            assert t0 <= d.start_s < t0 + 0.005

    def test_each_decay_recovers_the_truth(self, decays) -> None:
        for d in decays:
            assert abs(d.f0_hz / 440.0 - 1) < 1e-3
            assert abs(d.q / 25.0 - 1) < 0.02

    def test_amplitudes_keep_their_order(self, decays) -> None:
        amps = [d.amplitude for d in decays]
        assert np.argsort(amps).tolist() == np.argsort([a for _, a in TAPS]).tolist()

    def test_combine_is_the_inverse_variance_mean(self, decays) -> None:
        f0, sf0, q, sq = combine(decays)
        # inverse-variance weighted mean (Bevington & Robinson 2003, §4.1, from memory)
        w = np.array([1 / d.f0_stderr_hz**2 for d in decays])
        v = np.array([d.f0_hz for d in decays])
        mean = float(np.sum(w * v) / np.sum(w))
        se = 1 / math.sqrt(float(np.sum(w)))
        chi = float(np.sum(w * (v - mean) ** 2) / (v.size - 1))
        assert f0 == pytest.approx(mean, rel=1e-12)
        assert sf0 == pytest.approx(se * math.sqrt(max(1.0, chi)), rel=1e-9)
        wq = np.array([1 / d.q_stderr**2 for d in decays])
        assert q == pytest.approx(float(np.sum(wq * [d.q for d in decays]) / np.sum(wq)),
                                  rel=1e-12)
        # combining beats the best single decay, and holds the truth
        assert sf0 <= min(d.f0_stderr_hz for d in decays) * math.sqrt(max(1.0, chi)) + 1e-15
        assert abs(f0 - 440.0) < 4.5 * sf0
        assert abs(q - 25.0) < 4.5 * sq

    def test_disagreeing_decays_widen_the_error(self, decays) -> None:
        # two copies of each decay, one moved by 40 of its standard errors:
        # the reduced chi-square is then ~800, and the error is scaled by its root
        from dataclasses import replace

        moved = [replace(d, f0_hz=d.f0_hz + 40 * d.f0_stderr_hz) for d in decays]
        _, s_same, _, _ = combine(list(decays) + list(decays))
        _, s_moved, _, _ = combine(list(decays) + moved)
        assert s_moved > 10 * s_same


# --------------------------------------------------------------------------
# through analyze() and the command line
# --------------------------------------------------------------------------


def _write(path: Path, x: np.ndarray, fs: float) -> Path:
    sf.write(path, x, int(fs), subtype="FLOAT")
    return path


# Time constants of 19 to 71 ms. Shorter decays carry too little information at
# this SNR for the 3 % bound: at 700 Hz, Q 15 (tau = 6.8 ms) the reported 1-sigma
# error of Q is already 1.6 % (a statistical limit, checked by the stderr test below).
RINGDOWN_CASES = [(180.0, 40.0), (300.0, 20.0), (500.0, 30.0)]
SHORT_DECAY_CASES = [(1200.0, 12.0), (2000.0, 20.0)]  # tau = 3.2 ms


@pytest.mark.parametrize("f0, q", RINGDOWN_CASES,
                         ids=[f"{a:g}Hz-Q{b:g}" for a, b in RINGDOWN_CASES])
def test_analyze_ringdown_at_30_db(tmp_path: Path, f0: float, q: float) -> None:
    """Two taps, each with its first peak 30 dB above the noise RMS (the SNR here)."""
    fs = 16000.0
    x = _taps(f0, q, fs, 10 ** (-30 / 20), seed=int(f0), taps=[(0.3, 1.0), (1.5, 1.0)])
    rec = _write(tmp_path / "taps.wav", 0.5 * x, fs)
    res = analyze(rec)  # one channel, no excitation: auto picks ringdown
    assert res.input.method == "ringdown"
    assert res.fit.method == "damped-sinusoid"
    assert abs(res.fit.f0_hz / f0 - 1) < 1e-3  # the issue: 0.1 % at 30 dB
    assert abs(res.fit.q / q - 1) < 0.03  # the issue: 3 % at 30 dB
    assert abs(res.fit.f0_hz - f0) < 4.5 * res.fit.f0_stderr_hz
    assert abs(res.fit.q - q) < 4.5 * res.fit.q_stderr
    doc = res.to_dict()
    assert len(doc["fit"]["decays"]) == 2
    assert doc["quality"]["decays"] == 2
    assert len(doc["fit"]["modes"]) == 1
    mode = doc["fit"]["modes"][0]
    assert set(mode) >= {"f0_hz", "f0_stderr_hz", "q", "q_stderr", "gain"}
    assert mode["f0_hz"] == res.fit.f0_hz
    # the matrix-pencil cross-check is reported per decay
    for mp in doc["quality"]["matrix_pencil"]:
        assert abs(mp["f0_hz"] / f0 - 1) < 2e-3 and abs(mp["q"] / q - 1) < 0.05


@pytest.mark.parametrize("f0, q", SHORT_DECAY_CASES,
                         ids=[f"{a:g}Hz-Q{b:g}" for a, b in SHORT_DECAY_CASES])
def test_analyze_short_ringdown_at_30_db(tmp_path: Path, f0: float, q: float) -> None:
    fs = 16000.0
    x = _taps(f0, q, fs, 10 ** (-30 / 20), seed=int(f0), taps=[(0.3, 1.0), (1.5, 1.0)])
    res = analyze(_write(tmp_path / "taps.wav", 0.5 * x, fs))
    assert abs(res.fit.f0_hz / f0 - 1) < 1e-3
    assert abs(res.fit.q / q - 1) < 0.03


NO_DECAY = {
    "noise-only": lambda rng, n, fs: 0.01 * rng.standard_normal(n),
    "steady-tone": lambda rng, n, fs: 0.3 * np.sin(2 * np.pi * 440.0 * np.arange(n) / fs)
                   + 1e-3 * rng.standard_normal(n),
}


@pytest.mark.parametrize("kind", list(NO_DECAY))
def test_no_decay_is_no_fit(tmp_path: Path, kind: str) -> None:
    """Noise alone or a steady tone holds no resonance to fit: a refusal (FitError,
    exit status 1; issue 11, item 7), never a result."""
    fs = 16000.0
    x = NO_DECAY[kind](np.random.default_rng(5), int(fs), fs)
    with pytest.raises(FitError) as err:
        fit_ringdown(x, fs, "taps.wav")
    msg = str(err.value)
    assert "\n" not in msg
    assert "taps.wav" in msg
    assert f"{MIN_DECAY_DB:g} dB" in msg  # says what level was expected
    assert find_decays(x, fs) == []
    rec = _write(tmp_path / f"{kind}.wav", x, fs)
    with pytest.raises(FitError, match=re.escape(f"{MIN_DECAY_DB:g} dB")):
        analyze(rec, method="ringdown")


def test_no_decay_on_the_command_line(tmp_path: Path) -> None:
    fs = 16000.0
    rec = _write(tmp_path / "hiss.wav", 0.01 * np.random.default_rng(9).standard_normal(
        int(fs)), fs)
    out = tmp_path / "out"
    res = CliRunner().invoke(main, ["fit", str(rec), "--method", "ringdown", "--out", str(out)])
    assert res.exit_code == 1, (res.stdout, res.stderr)
    assert "Traceback" not in res.output
    lines = [ln for ln in res.stderr.splitlines() if ln.strip()]
    assert len(lines) == 1, lines
    assert "hiss.wav" in lines[0] and "dB" in lines[0]
    assert not out.exists() or not any(out.iterdir())


def test_second_tap_inside_a_decay_is_a_decay_of_its_own() -> None:
    """A tap while the previous one still rings (issue 11: one damped cosine fitted
    to both gave Q 155 % off): each stretch ends where the next tap begins, so the
    fit holds the DESIGN.md §4 bar (0.1 %, 3 %) against the simulated truth."""
    f0, q, fs = 600.0, 85.0, 44100.0  # tau = 45 ms; taps 60 ms apart
    x = _taps(f0, q, fs, 1e-3, seed=8, taps=[(0.3, 1.0), (0.36, 0.8), (1.2, 0.6)])
    decays = fit_ringdown(x, fs)
    assert len(decays) >= 3
    f, _, qq, _ = combine(decays)
    assert abs(f / f0 - 1) < 1e-3
    assert abs(qq / q - 1) < 0.03
