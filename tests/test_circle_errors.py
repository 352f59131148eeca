"""The circle fit's (Kennedy-Pancu) standard errors against its actual scatter.

Seeded families of simulated two-microphone sweep recordings of one resonator
each (characterize.simulate), deconvolved and fitted as the pipeline does; the
circle fit's reported standard error must match the standard deviation of its
estimates over the family. Check value and source: a standard error is the
standard deviation of the estimator (definition; S.M. Kay, *Fundamentals of
Statistical Signal Processing: Estimation Theory*, 1993, ch. 3); allowance
0.6 to 1.6 for a standard deviation of 30 values (chi-square sampling limits,
about +-26 % at 2 sigma) and a median of stderrs that vary between replicas.
Before the parametric bootstrap the rough figure was 1.3 to 2.6 times too small.
"""

from __future__ import annotations

import numpy as np
import pytest

from characterize.fitting.circle import circle_fit
from characterize.fitting.fit import fit_transfer
from characterize.simulate import Setup, simulate
from characterize.transfer import sweep_transfer

N = 30


@pytest.mark.parametrize("f0_hz, q, snr_db", [(300.0, 20.0, 30.0), (1200.0, 60.0, 40.0),
                                              (150.0, 8.0, 25.0)])
def test_circle_stderr_matches_its_scatter(f0_hz: float, q: float, snr_db: float) -> None:
    f0s, qs, se_f0, se_q = [], [], [], []
    for seed in range(N):
        setup = Setup(f0_hz=f0_hz, q=q, rate_hz=16000.0, snr_db=snr_db)
        data, sweep = simulate(setup, seed)
        tf = sweep_transfer(data[:, 0], data[:, 1], setup.rate_hz, sweep)
        fit = fit_transfer(tf)
        c = circle_fit(tf.freqs_hz, tf.h, fit.f0_hz, fit.q, fit.delay_s,
                       -1.0 if fit.polarity_inverted else 1.0,
                       sigma=tf.sigma(np.abs(fit.model(tf.freqs_hz))), seed=seed)
        f0s.append(c.f0_hz)
        qs.append(c.q)
        se_f0.append(c.f0_stderr_hz)
        se_q.append(c.q_stderr)
    for est, se, name in ((f0s, se_f0, "f0"), (qs, se_q, "q")):
        ratio = float(np.std(est, ddof=1) / np.median(se))
        assert 0.6 < ratio < 1.6, (name, ratio)
    # and the estimate is unbiased within its scatter (simulator truth)
    assert abs(np.mean(qs) - q) < 3 * np.std(qs) / np.sqrt(N)
    assert abs(np.mean(f0s) - f0_hz) < 3 * np.std(f0s) / np.sqrt(N)
