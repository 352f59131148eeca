"""The cross-spectral (H1) path's standard errors by regime, and the flag that
marks where they are too small (issue 6: "where a regime fails, make the tool
flag that regime rather than pretend").

Seeded families of simulated noise recordings (characterize.selftest's case
draw: f0 60 Hz to 3 kHz, Q 4 to 150, SNR 15 to 45 dB, and a clean one at 45 to
60 dB; 16 and 48 kHz) through cross_spectral_transfer, fit_transfer and
checks.check_signal_quality. The seeds differ from the runs that set the
flag's threshold (docs/quality.md), so these are held-out checks.

Check value and source: a standard error is the rms of (estimate - truth) /
stderr, which is 1 for honest errors (definition; S.M. Kay, *Fundamentals of
Statistical Signal Processing: Estimation Theory*, 1993, ch. 3). Allowance:
the issue's 1.2x variance target (1.1 in rms) plus two sampling standard
errors of an rms of n Gaussian values (rms/sqrt(2n)).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from characterize import checks
from characterize import selftest as st
from characterize.fitting.fit import fit_transfer
from characterize.pipeline import signal_quality
from characterize.simulate import simulate
from characterize.transfer import cross_spectral_transfer


def _run(name: str, seed: int, snr_db: tuple[float, float]) -> list[tuple[bool, float, float]]:
    """(flagged errors-understated, z of f0, z of Q) per trial of a seeded family."""
    plan = st.Plan(name, trials=60, seed=seed, methods=("noise",), snr_range_db=snr_db,
                   rates_hz=(16000.0, 48000.0))
    out = []
    for case in st.draw_cases(plan):
        setup = case.setup()
        data, _ = simulate(setup, seed=case.seed)
        x = data.astype(np.float32)  # as read_audio holds it
        tf = cross_spectral_transfer(x[:, 0], x[:, 1], setup.rate_hz)
        fit = fit_transfer(tf)
        codes = {f.code for f in checks.check_signal_quality(signal_quality(tf, fit), True)}
        out.append(("errors-understated" in codes,
                    (fit.f0_hz - setup.f0_hz) / fit.f0_stderr_hz,
                    (fit.q - setup.q) / fit.q_stderr))
    return out


@pytest.fixture(scope="module")
def family() -> list[tuple[bool, float, float]]:
    return _run("h1-regimes", 4242, (15.0, 45.0))


@pytest.fixture(scope="module")
def clean_family() -> list[bool]:
    """Whether errors-understated was raised, on clean high-SNR noise recordings."""
    return [t[0] for t in _run("h1-clean", 4343, (45.0, 60.0))]


def test_flag_is_quiet_on_clean_recordings(clean_family) -> None:
    # at 45 to 60 dB the errors are not too small (docs/quality.md); the leakage of
    # the ringing lowers the coherence near the peak, which the flag must ignore
    assert sum(clean_family) <= 2, sum(clean_family)  # of 60; 1 % in docs/quality.md


def _rms(z: list[float]) -> float:
    return math.sqrt(float(np.mean(np.square(z))))


def _allowance(n: int) -> float:
    return 1.1 * (1 + 2 / math.sqrt(2 * n))


@pytest.mark.parametrize("column, name", [(1, "f0"), (2, "q")])
def test_unflagged_errors_are_not_too_small(family, column: int, name: str) -> None:
    z = [t[column] for t in family if not t[0]]
    assert len(z) >= 25
    assert _rms(z) <= _allowance(len(z)), (name, _rms(z), len(z))


def test_flag_marks_understated_errors(family) -> None:
    flagged = [t for t in family if t[0]]
    assert len(flagged) >= 8  # the low-SNR part of the family is flagged
    # where flagged, the errors understate the scatter (rms z above 1) in f0 and Q together
    both = _rms([t[1] for t in flagged] + [t[2] for t in flagged])
    assert both > 1.1, both
