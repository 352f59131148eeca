"""Speed of the other ways of recording (a benchmark script, not a timed test).

For a 10 s, 48 kHz file: the ringdown path (taps on the inside microphone), the
H1 path (two microphones, noise), and a 3-mode fit on a sweep recording; the
library call ``analyze`` with imports done, medians of repeated runs.

Run:  python benchmarks/bench_methods.py [--repeat N]
"""

from __future__ import annotations

import argparse
import math
import os
import tempfile
from pathlib import Path

from bench_fit import _median_time as _median  # the same timer (this folder is on sys.path)


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--repeat", type=int, default=5)
    opts = ap.parse_args()
    os.environ.setdefault("OMP_NUM_THREADS", "1")

    import numpy as np
    import soundfile as sf

    from characterize.excitation import SweepParams, sidecar_text
    from characterize.pipeline import analyze
    from characterize.simulate import Setup, simulate, write_recording

    tmp = Path(tempfile.mkdtemp(prefix="characterize-bench-"))
    fs = 48000
    # ringdown: five taps of a 256 Hz, Q 30 resonator in 10 s, noise 40 dB down
    rng = np.random.default_rng(1)
    f0, q = 256.0, 30.0
    tau = q / (math.pi * f0)
    t = np.arange(int(1.5 * fs)) / fs
    x = np.zeros(10 * fs)
    for k in range(5):
        i = int((0.5 + 1.9 * k) * fs)
        x[i:i + t.size] += 0.5 * np.exp(-t / tau) * np.cos(2 * np.pi * f0 * t)
    x += 0.005 * rng.standard_normal(x.size)
    taps = tmp / "taps.wav"
    sf.write(taps, x, fs, subtype="PCM_24")
    # H1: two microphones, 10 s of noise
    data, _ = simulate(Setup(f0_hz=f0, q=q, excitation="noise", noise_duration_s=10.0), 2)
    noise = tmp / "noise.wav"
    write_recording(str(noise), data, fs, "PCM_24")
    # three modes on a sweep recording (a resonator and two body modes), 10 s
    params = SweepParams(start_hz=20, stop_hz=4000, duration_s=8.0, rate_hz=fs,
                         level_dbfs=-12, tail_s=2.0)
    data, sweep = simulate(Setup(f0_hz=200.0, q=30.0, sweep=params, latency_s=0.0,
                                 body_modes=((330.0, 40.0, 0.4), (520.0, 50.0, 0.3))), 3)
    rec = tmp / "modes.wav"
    write_recording(str(rec), data, fs, "PCM_24")
    sw = tmp / "sweep.wav"
    assert sweep is not None
    sf.write(sw, sweep.samples, fs, subtype="PCM_24")
    (tmp / "sweep.toml").write_text(sidecar_text(params))

    runs = {
        "ringdown, 10 s 48 kHz, 5 taps": (lambda: analyze(taps), "target < 0.5 s"),
        "H1, 10 s 48 kHz stereo noise": (lambda: analyze(noise), "target < 0.5 s"),
        "3-mode fit, 10 s 48 kHz sweep": (lambda: analyze(rec, sweep_path=sw, modes=3),
                                          "target < 1 s"),
    }
    print(f"| what (analyze(), median of {opts.repeat}) | time | note |")
    print("|---|---|---|")
    for name, (fn, note) in runs.items():
        fn()  # warm up
        print(f"| {name} | {_median(fn, opts.repeat):.3f} s | {note} |")


if __name__ == "__main__":
    main()
