"""Speed of the main job (a benchmark script, never a timed unit test).

Figures (medians of repeated runs; machines are shared and noisy, so the
ratios matter more than the seconds):

1. library call ``analyze`` on a 10 s, 48 kHz, two-channel sweep recording
   (imports done, as a batch would make it);
2. the whole ``characterize fit`` process on that file, as a ratio to a process
   that only reads the file and takes one real FFT of both channels;
3. ``characterize --help`` and ``characterize fit --help`` start-up, as a ratio
   to ``python -c pass``.

Run:  python benchmarks/bench_fit.py [--repeat N]
"""

from __future__ import annotations

import argparse
import os
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path


def _median_time(fn, repeat: int) -> float:
    times = []
    for _ in range(repeat):
        t = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t)
    return statistics.median(times)


def _proc(args: list[str]) -> None:
    subprocess.run(args, check=True, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--repeat", type=int, default=7)
    opts = ap.parse_args()
    os.environ.setdefault("OMP_NUM_THREADS", "1")  # one core, as a batch worker has

    import soundfile as sf

    from characterize.excitation import SweepParams, sidecar_text
    from characterize.pipeline import analyze
    from characterize.simulate import Setup, simulate, write_recording

    tmp = Path(tempfile.mkdtemp(prefix="characterize-bench-"))
    params = SweepParams(start_hz=20, stop_hz=4000, duration_s=8.0, rate_hz=48000,
                         level_dbfs=-12, tail_s=2.0)
    setup = Setup(f0_hz=256.0, q=30.0, snr_db=40.0, sweep=params, latency_s=0.0)
    data, sweep = simulate(setup, seed=1)
    rec = tmp / "rec.wav"
    write_recording(str(rec), data, 48000, "PCM_24")
    sw = tmp / "sweep.wav"
    sf.write(sw, sweep.samples, 48000, subtype="PCM_24")
    (tmp / "sweep.toml").write_text(sidecar_text(params))

    analyze(rec, sweep_path=sw)  # warm up imports and caches
    t_lib = _median_time(lambda: analyze(rec, sweep_path=sw), opts.repeat)

    exe = [sys.executable, "-m", "characterize"]
    floor_code = ("import soundfile as sf, numpy as np; x, fs = sf.read(%r); "
                  "np.fft.rfft(x, axis=0)" % str(rec))
    t_floor = _median_time(lambda: _proc([sys.executable, "-c", floor_code]), opts.repeat)
    t_cli = _median_time(lambda: _proc(exe + ["fit", str(rec), "--sweep", str(sw), "--json"]),
                         opts.repeat)
    t_pass = _median_time(lambda: _proc([sys.executable, "-c", "pass"]), opts.repeat)
    t_help = _median_time(lambda: _proc(exe + ["--help"]), opts.repeat)
    t_fit_help = _median_time(lambda: _proc(exe + ["fit", "--help"]), opts.repeat)

    rows = [
        ("analyze(), 10 s 48 kHz stereo, sweep path (library)", f"{t_lib:.3f} s", "target < 0.3 s"),
        ("read + one FFT of both channels (process floor)", f"{t_floor:.3f} s", ""),
        ("characterize fit --json (process)", f"{t_cli:.3f} s",
         f"{t_cli / t_floor:.1f}x the floor"),
        ("python -c pass", f"{t_pass:.3f} s", ""),
        ("characterize --help", f"{t_help:.3f} s", f"{t_help / t_pass:.1f}x python -c pass"),
        ("characterize fit --help", f"{t_fit_help:.3f} s",
         f"{t_fit_help / t_pass:.1f}x python -c pass"),
    ]
    print(f"| what (median of {opts.repeat}) | time | note |")
    print("|---|---|---|")
    for r in rows:
        print(f"| {r[0]} | {r[1]} | {r[2]} |")


if __name__ == "__main__":
    main()
