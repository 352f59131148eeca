"""Peak memory of the main job on a long recording (a benchmark script, never a test).

A 10-minute, 96 kHz, two-channel recording (PCM 24-bit WAV) is made on disk
for each path -- broadband noise for the cross-spectral (H1) path, a
9.5-minute exponential sweep plus a 30 s tail for the deconvolution path --
and ``characterize.pipeline.analyze`` runs on it in a fresh process (the sweep
once with its TOML sidecar and once without, when its parameters are read off
the samples). The
child's peak resident set size (``ru_maxrss`` from ``resource.getrusage``,
standard library) is reported as a ratio to the raw float32 data size
(frames x channels x 4 bytes), with and without the baseline of a process that
only imports the same modules. Target (issue 6): under 4x.

The recordings are made with a digital resonator (scipy.signal.lfilter of the
bilinear-transformed oscillator, f0 250 Hz, Q 30) in chunks, so that making
them does not need the memory being measured.

Run:  python benchmarks/bench_memory.py [--minutes 10] [--rate 96000] [--keep DIR]
"""

from __future__ import annotations

import argparse
import os
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

CHILD = r"""
import resource, sys, time
sys.argv = sys.argv[1:]
import numpy, scipy.fft, scipy.signal, lmfit, soundfile
import characterize.pipeline, characterize.transfer, characterize.fitting.fit
base = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
t = time.perf_counter()
if sys.argv[0] != "imports-only":
    from characterize.pipeline import analyze
    rec = sys.argv[0]
    sweep = sys.argv[1] if len(sys.argv) > 1 and sys.argv[1] else None
    res = analyze(rec, sweep_path=sweep)
    print("fit", res.fit.f0_hz, res.fit.q, file=sys.stderr)
print(base, time.perf_counter() - t)
"""


def _make(path: Path, rate: int, minutes: float, kind: str, sweep_path: Path | None) -> int:
    """Write the recording (and the sweep with its sidecar); return frames."""
    import numpy as np
    import soundfile as sf
    from scipy.signal import bilinear, lfilter, lfilter_zi

    from characterize.excitation import SweepParams, make_sweep, sidecar_text

    f0, q = 250.0, 30.0
    w0 = 2 * np.pi * f0
    # H(s) = 1 / (1 + s/(Q w0) + s^2/w0^2)  (the low-pass oscillator, Rayleigh 1896)
    b, a = bilinear([1.0], [1 / w0**2, 1 / (q * w0), 1.0], fs=rate)
    n = int(minutes * 60 * rate)
    rng = np.random.default_rng(1)
    if kind == "sweep":
        tail = min(30.0, minutes * 6)
        params = SweepParams(start_hz=20.0, stop_hz=4000.0, duration_s=minutes * 60 - tail,
                             rate_hz=float(rate), level_dbfs=-6.0, tail_s=tail)
        exc = make_sweep(params).samples
        assert sweep_path is not None
        sf.write(str(sweep_path), exc, rate, subtype="PCM_24")
        sweep_path.with_suffix(".toml").write_text(sidecar_text(params), encoding="utf-8")
        n = exc.size
    zi = lfilter_zi(b, a) * 0.0
    chunk = 1 << 20
    with sf.SoundFile(str(path), "w", rate, 2, subtype="PCM_24", format="WAV") as fh:
        for i in range(0, n, chunk):
            m = min(chunk, n - i)
            x = exc[i:i + m] if kind == "sweep" else 0.05 * rng.standard_normal(m)
            y, zi = lfilter(b, a, x, zi=zi)
            noise = 1e-4 * rng.standard_normal((m, 2))
            fh.write(np.stack([0.02 * y, 0.5 * x], axis=1) + noise)
    return n


#: A helper parent per measurement: RUSAGE_CHILDREN holds the largest child
#: so far, so each measured run gets a parent of its own.
HELPER = ("import subprocess, sys, resource; r = subprocess.run(sys.argv[1:], check=True, "
          "capture_output=True, text=True); sys.stderr.write(r.stderr); print(r.stdout.strip(), "
          "resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss)")


def _peak(args: list[str]) -> tuple[float, float, float]:
    """Run CHILD with ``args`` in a fresh process: (peak RSS MiB, RSS after the
    imports MiB, seconds inside the child)."""
    out = subprocess.run([sys.executable, "-c", HELPER, sys.executable, "-c", CHILD, *args],
                         check=True, capture_output=True, text=True)
    sys.stderr.write(out.stderr)
    base_kib, secs, peak_kib = out.stdout.split()
    return int(peak_kib) / 1024, int(base_kib) / 1024, float(secs)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--minutes", type=float, default=10.0)
    ap.add_argument("--rate", type=int, default=96000)
    ap.add_argument("--keep", default=None, help="make the files here and keep them")
    opts = ap.parse_args()
    os.environ.setdefault("OMP_NUM_THREADS", "1")
    work = Path(opts.keep) if opts.keep else Path(tempfile.mkdtemp(prefix="characterize-mem-"))
    work.mkdir(parents=True, exist_ok=True)
    rows = []
    try:
        peak0, _, _ = _peak(["imports-only"])
        for kind in ("noise", "sweep"):
            rec = work / f"long-{kind}.wav"
            sw = work / "long-sweep-excitation.wav" if kind == "sweep" else None
            t = time.perf_counter()
            frames = _make(rec, opts.rate, opts.minutes, kind, sw)
            made = time.perf_counter() - t
            raw_mib = frames * 2 * 4 / 2**20
            peak, _, secs = _peak([str(rec), str(sw) if sw else ""])
            rows.append((kind, frames, raw_mib, peak, peak0, secs, made))
        # the same sweep without its sidecar: its parameters are read off the samples
        assert sw is not None
        side = sw.with_suffix(".toml")
        side.rename(side.with_suffix(".toml.off"))
        try:
            peak, _, secs = _peak([str(rec), str(sw)])
        finally:
            side.with_suffix(".toml.off").rename(side)
        rows.append(("sweep-no-sidecar", frames, raw_mib, peak, peak0, secs, 0.0))
    finally:
        if not opts.keep:
            shutil.rmtree(work, ignore_errors=True)
    print(f"{opts.minutes:g}-minute {opts.rate / 1000:g} kHz two-channel PCM_24 WAV through "
          "analyze() (peak RSS of a fresh process; imports alone "
          f"{peak0:.0f} MiB)\n")
    print("| path | frames | raw float32 | peak RSS | ratio | ratio net of imports | time |")
    print("|---|---|---|---|---|---|---|")
    for kind, frames, raw, peak, p0, secs, _ in rows:
        name = {"noise": "noise (H1)", "sweep": "sweep (deconvolution)",
                "sweep-no-sidecar": "sweep, parameters read off the samples"}[kind]
        print(f"| {name} | {frames:,} | {raw:.0f} MiB | {peak:.0f} MiB | {peak / raw:.2f}x | "
              f"{(peak - p0) / raw:.2f}x | {secs:.1f} s |")


if __name__ == "__main__":
    main()
