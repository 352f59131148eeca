"""The cross-spectral path (two microphones, no sweep file: noise, or a sweep
played without its file) over the declared envelope (issue 11): right on every
take, honest errors, refusals where the data hold no resonance.

Seeded families of simulated takes with known truth (characterize.simulate),
written as files (WAV/FLAC, 16/24-bit and float, 44.1/48/96 kHz, channels in
either order) and fitted through analyze() as a user would, judged by their
WORST member. Check values and sources:

- accuracy bar |f0 error| <= 0.1 %, |Q error| <= 3 % (DESIGN.md §4, issue 11);
- |error| / stderr: for honest Gaussian errors the largest of 2n values exceeds
  4 with probability about 2n * 6.3e-5 (normal tail; common practice), below
  1 % for the families here;
- no warning on a clean take (SNR >= 20 dB, inside the envelope).
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest

from characterize.errors import FitError
from characterize.excitation import SweepParams
from characterize.pipeline import analyze
from characterize.simulate import Setup, simulate, write_recording

RATES = (44100.0, 48000.0, 96000.0)
FORMATS = (("wav", "PCM_16"), ("wav", "PCM_24"), ("wav", "FLOAT"), ("flac", "PCM_16"),
           ("flac", "PCM_24"))
F0_BAR, Q_BAR = 1e-3, 0.03
MAX_Z = 4.0


def _take(tmp: Path, rng: np.random.Generator, excitation: str,
          durations_s: tuple[float, float]) -> tuple[Setup, Path, int, int]:
    f0 = float(np.exp(rng.uniform(math.log(60.0), math.log(3000.0))))
    q = float(np.exp(rng.uniform(math.log(4.0), math.log(150.0))))
    dur = float(rng.uniform(*durations_s))
    rate = float(RATES[rng.integers(len(RATES))])
    container, subtype = FORMATS[rng.integers(len(FORMATS))]
    setup = Setup(f0_hz=f0, q=q, rate_hz=rate, snr_db=float(rng.uniform(20.0, 60.0)),
                  excitation=excitation, noise_duration_s=dur,
                  delay_s=float(rng.uniform(0.0, 1e-4)), inverted=bool(rng.integers(2)))
    if excitation == "sweep":
        tail = min(max(0.3, 0.25 * dur), 2.0)
        setup = setup.with_(sweep=SweepParams(
            start_hz=max(10.0, f0 / rng.uniform(3.0, 10.0)),
            stop_hz=min(0.45 * rate, f0 * rng.uniform(3.0, 10.0), 20000.0),
            duration_s=max(0.5, dur - tail), rate_hz=rate, level_dbfs=-6.0, tail_s=tail))
    data, _ = simulate(setup, seed=int(rng.integers(2**31)))
    swapped = bool(rng.integers(2))
    path = tmp / f"take.{container}"
    write_recording(str(path), data, rate, subtype, order=(1, 0) if swapped else (0, 1))
    return setup, path, (2 if swapped else 1), (1 if swapped else 2)


def _family(tmp: Path, seed: int, n: int, excitation: str,
            durations_s: tuple[float, float]) -> list[dict]:
    rng = np.random.default_rng(seed)
    out = []
    for i in range(n):
        d = tmp / f"{excitation}{seed}-{i}"
        d.mkdir()
        setup, path, inside, outside = _take(d, rng, excitation, durations_s)
        res = analyze(path, inside=inside, outside=outside)
        fit = res.fit
        out.append({
            "case": (setup.f0_hz, setup.q, setup.noise_duration_s, setup.rate_hz, setup.snr_db),
            "ef": fit.f0_hz / setup.f0_hz - 1, "eq": fit.q / setup.q - 1,
            "zf": (fit.f0_hz - setup.f0_hz) / fit.f0_stderr_hz,
            "zq": (fit.q - setup.q) / fit.q_stderr,
            "warnings": [f.code for f in res.flags if f.severity != "info"],
            "polarity": fit.polarity_inverted == setup.inverted,
            "method": res.input.method})
    return out


def _judge(takes: list[dict]) -> None:
    worst_f = max(takes, key=lambda t: abs(t["ef"]))
    worst_q = max(takes, key=lambda t: abs(t["eq"]))
    worst_z = max(takes, key=lambda t: max(abs(t["zf"]), abs(t["zq"])))
    assert abs(worst_f["ef"]) <= F0_BAR, worst_f
    assert abs(worst_q["eq"]) <= Q_BAR, worst_q
    assert max(abs(worst_z["zf"]), abs(worst_z["zq"])) <= MAX_Z, worst_z
    assert not [t for t in takes if t["warnings"]], [t for t in takes if t["warnings"]]
    assert all(t["polarity"] for t in takes)


@pytest.mark.parametrize("excitation", ["noise", "sweep"])
def test_envelope_family_short_takes(tmp_path: Path, excitation: str) -> None:
    """1 to 4 s takes, where the old Welch path ran out of resolution (issue 11:
    "no fit: only N frequency points", Q 8 to 27 % off at about 20 stderr)."""
    takes = _family(tmp_path, 1101 if excitation == "noise" else 1102, 10, excitation,
                    (1.0, 4.0))
    assert all(t["method"] == "cross-spectral-h1" for t in takes)
    _judge(takes)


@pytest.mark.slow
@pytest.mark.parametrize("excitation", ["noise", "sweep"])
def test_envelope_family_whole_range(tmp_path: Path, excitation: str) -> None:
    takes = _family(tmp_path, 1201 if excitation == "noise" else 1202, 30, excitation,
                    (1.0, 12.0))
    _judge(takes)
    # 2-sigma coverage: 95.4 % of 60 values; allow three binomial standard errors
    z = np.abs([t["zf"] for t in takes] + [t["zq"] for t in takes])
    p = 0.9545
    assert np.mean(z <= 2) >= p - 3 * math.sqrt(p * (1 - p) / z.size), sorted(z)[-5:]


@pytest.mark.parametrize("f0, q, rate, excitation", [
    (60.0, 150.0, 44100.0, "noise"),   # issue 11, item 3: Q 150 at 60 Hz in an 8 s take
    (100.0, 80.0, 44100.0, "sweep"),   # issue 11: "only N frequency points" before
])
def test_narrow_resonance_in_an_8_s_take(tmp_path: Path, f0: float, q: float, rate: float,
                                        excitation: str) -> None:
    setup = Setup(f0_hz=f0, q=q, rate_hz=rate, snr_db=40.0, excitation=excitation,
                  noise_duration_s=8.0)
    if excitation == "sweep":
        setup = setup.with_(sweep=SweepParams(start_hz=20.0, stop_hz=2000.0, duration_s=6.0,
                                              rate_hz=rate, level_dbfs=-6.0, tail_s=2.0))
    data, _ = simulate(setup, seed=31)
    rec = tmp_path / "take.wav"
    write_recording(str(rec), data, rate, "PCM_24")
    res = analyze(rec)
    assert abs(res.fit.f0_hz / f0 - 1) <= F0_BAR
    assert abs(res.fit.q / q - 1) <= Q_BAR
    assert abs(res.fit.q - q) <= 3 * res.fit.q_stderr
    assert not [f for f in res.flags if f.severity != "info"]


def _write(tmp: Path, name: str, data: np.ndarray, rate: float = 48000.0) -> Path:
    import soundfile as sf

    p = tmp / name
    sf.write(p, data, int(rate), subtype="FLOAT")
    return p


def test_refusals(tmp_path: Path) -> None:
    """Issue 11, item 7: no resonance in the data is a refusal (FitError, exit 1)
    with a reason, never a result."""
    rng = np.random.default_rng(7)
    fs = 48000.0
    # unrelated channels (coherence near zero)
    with pytest.raises(FitError, match="unrelated"):
        analyze(_write(tmp_path, "unrelated.wav", 0.1 * rng.standard_normal((int(4 * fs), 2))))
    # the same noise on both channels: H flat, no resonance
    n = 0.1 * rng.standard_normal(int(4 * fs))
    with pytest.raises(FitError, match="resonance|peak"):
        analyze(_write(tmp_path, "flat.wav", np.stack([n, n + 1e-3 * rng.standard_normal(n.size)],
                                                      axis=1)))
    # 10 ms of noise, and the first 10 ms of a real take (a truncated file)
    with pytest.raises(FitError):
        analyze(_write(tmp_path, "10ms.wav", 0.1 * rng.standard_normal((int(0.01 * fs), 2))))
    data, _ = simulate(Setup(f0_hz=300.0, q=20.0, rate_hz=fs, excitation="noise",
                             noise_duration_s=2.0, snr_db=40.0), seed=3)
    with pytest.raises(FitError):
        analyze(_write(tmp_path, "cut.wav", data[: int(0.01 * fs)]))


def test_imprecise_flag() -> None:
    """checks.check_precision: a 2-sigma interval wider than the bar (0.1 % in f0,
    3 % in Q; DESIGN.md §4) is a warning; one just inside it is not."""
    from characterize.checks import check_precision
    from characterize.fitting.fit import FitResult

    def fit(f0_se: float, q_se: float) -> FitResult:
        return FitResult(f0_hz=100.0, f0_stderr_hz=f0_se, q=20.0, q_stderr=q_se, gain=1.0,
                         gain_stderr=0.0, delay_s=0.0, delay_stderr_s=0.0,
                         polarity_inverted=False, band_hz=(90.0, 110.0), n_points=100,
                         chi2=200.0, reduced_chi2=1.0, stderr_scale=1.0,
                         weighting="noise-estimate", correlation_f0_q=0.0, nfev=1)

    assert check_precision(fit(0.049, 0.29)) == []
    assert [f.code for f in check_precision(fit(0.051, 0.1))] == ["imprecise"]
    assert [f.severity for f in check_precision(fit(0.01, 0.31))] == ["warning"]
