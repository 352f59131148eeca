"""Speed of the main job (a benchmark script, never a timed unit test).

Figures (machines are shared and noisy, so the ratios matter more than the
seconds). Whole processes are compared by CPU time (user + system of the
finished child), run interleaved (A B A B ...), and the median of the pairwise
ratios is quoted, so a change of load between runs moves both sides alike:

1. library call ``analyze`` on a 10 s, 48 kHz, two-channel sweep recording
   (imports done, as a batch would make it);
2. the whole ``characterize fit --json`` process on the bundled jar take and on
   that simulated 10 s take, each as a ratio to a process that only reads the
   file and takes one real FFT of both channels (the floor);
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


def _proc(args: list[str]) -> tuple[float, float]:
    """Run a whole process; return its wall time and its CPU time (user + system,
    from the kernel's accounting of the finished child)."""
    import resource

    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    t = time.perf_counter()
    subprocess.run(args, check=True, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    wall = time.perf_counter() - t
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    cpu = (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)
    return wall, cpu


def _paired(a: list[str], b: list[str], repeat: int) -> tuple[float, float, float, float]:
    """Run A and B interleaved (A B A B ...); return the medians of A's and B's CPU
    times, the median of the pairwise CPU ratios B/A and of the wall ratios."""
    ca, cb, rc, rw = [], [], [], []
    for _ in range(repeat):
        wa, xa = _proc(a)
        wb, xb = _proc(b)
        ca.append(xa)
        cb.append(xb)
        rc.append(xb / xa)
        rw.append(wb / wa)
    return (statistics.median(ca), statistics.median(cb), statistics.median(rc),
            statistics.median(rw))


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
    root = Path(__file__).resolve().parents[1] / "example_audio"
    ex_rec, ex_sweep = root / "listening-jar-04.flac", root / "sweep-48k.wav"
    floor_code = ("import soundfile as sf, numpy as np; x, fs = sf.read(%r); "
                  "np.fft.rfft(x, axis=0)")
    c_floor, c_cli, r_cli, w_cli = _paired(
        [sys.executable, "-c", floor_code % str(ex_rec)],
        exe + ["fit", str(ex_rec), "--sweep", str(ex_sweep), "--json"], opts.repeat)
    c_floor10, c_cli10, r_cli10, _ = _paired(
        [sys.executable, "-c", floor_code % str(rec)],
        exe + ["fit", str(rec), "--sweep", str(sw), "--json"], opts.repeat)
    c_pass, c_help, r_help, _ = _paired([sys.executable, "-c", "pass"], exe + ["--help"],
                                        opts.repeat)
    _, c_fit_help, r_fit_help, _ = _paired([sys.executable, "-c", "pass"],
                                           exe + ["fit", "--help"], opts.repeat)

    rows = [
        ("analyze(), 10 s 48 kHz stereo, sweep path (library, imports done)",
         f"{t_lib:.3f} s wall", "target < 0.3 s"),
        ("read + one FFT of both channels, bundled jar take (process floor)",
         f"{c_floor:.3f} s CPU", ""),
        ("characterize fit --json, bundled jar take (process)", f"{c_cli:.3f} s CPU",
         f"{r_cli:.1f}x the floor (CPU; wall {w_cli:.1f}x), target <= 5x"),
        ("read + one FFT, simulated 10 s 48 kHz take (process floor)",
         f"{c_floor10:.3f} s CPU", ""),
        ("characterize fit --json, simulated 10 s take (process)", f"{c_cli10:.3f} s CPU",
         f"{r_cli10:.1f}x the floor (CPU)"),
        ("python -c pass", f"{c_pass:.3f} s CPU", ""),
        ("characterize --help", f"{c_help:.3f} s CPU", f"{r_help:.1f}x python -c pass"),
        ("characterize fit --help", f"{c_fit_help:.3f} s CPU",
         f"{r_fit_help:.1f}x python -c pass"),
    ]
    print(f"| what (medians of {opts.repeat} interleaved pairs) | time | note |")
    print("|---|---|---|")
    for r in rows:
        print(f"| {r[0]} | {r[1]} | {r[2]} |")


if __name__ == "__main__":
    main()
