"""Every recording path over the whole declared envelope, judged by its worst take.

Simulates seeded takes with known f0 and Q (characterize.simulate), writes each
as a user would have it on disk (WAV or FLAC, 16/24-bit or float, 44.1/48/96
kHz, channels in either order, a loopback channel in 3-channel files, the
sweep file with its sidecar, an analyzer-style CSV), fits it from the files
with ``characterize fit --json`` (in-process, through the command line), and
prints per path:

- takes, no-fit count (exit 1) and bad-input count (exit 2);
- max |f0 error| and max |Q error| over the fitted takes (bar: 0.1 %, 3 %);
- the 99th percentile of |error| / stderr for f0 and Q (bar: <= 3);
- 1-sigma and 2-sigma coverage of the reported standard errors (68.3 %, 95.4 %);
- false warnings: warning or error flags on takes whose fit meets the bar;
- silent misses: takes outside the bar with no warning saying why;
- the worst take (largest |Q error| in standard errors) with its seed, so it
  can be reproduced with ``--only PATH --seed-of N``.

Envelope (issue 11): f0 60 Hz to 3 kHz, Q 4 to 150, 1 to 12 s, SNR 20 to 60 dB.

Run:  python benchmarks/bench_envelope.py [--takes 150] [--workers 2] [--seed N]
      [--paths sweep,h1,...] [--json out.json] [--keep DIR]
(1,050 takes over 7 paths take roughly 15 to 30 minutes on the shared 2-core machine)
"""

from __future__ import annotations

import argparse
import json
import math
import os
import sys
import tempfile
import time
from dataclasses import dataclass
from pathlib import Path

os.environ.setdefault("OMP_NUM_THREADS", "1")

PATHS = ("sweep", "sweep-3ch", "sweep-nofile", "h1", "one-channel", "ringdown", "csv")
F0_BAR = 0.001
Q_BAR = 0.03
RATES = (44100.0, 48000.0, 96000.0)
FORMATS = (("wav", "PCM_16"), ("wav", "PCM_24"), ("wav", "FLOAT"),
           ("flac", "PCM_16"), ("flac", "PCM_24"))


@dataclass
class Take:
    path: str
    seed: int
    f0_hz: float
    q: float
    snr_db: float
    duration_s: float
    rate_hz: float
    container: str
    subtype: str
    swapped: bool
    exit_code: int = -1
    message: str = ""
    f0_fit: float = math.nan
    f0_se: float = math.nan
    q_fit: float = math.nan
    q_se: float = math.nan
    method: str = ""
    warnings: tuple[str, ...] = ()
    infos: tuple[str, ...] = ()
    seconds: float = 0.0

    @property
    def f0_err(self) -> float:
        return self.f0_fit / self.f0_hz - 1

    @property
    def q_err(self) -> float:
        return self.q_fit / self.q - 1

    @property
    def z_f0(self) -> float:
        return (self.f0_fit - self.f0_hz) / self.f0_se

    @property
    def z_q(self) -> float:
        return (self.q_fit - self.q) / self.q_se

    @property
    def within_bar(self) -> bool:
        return abs(self.f0_err) <= F0_BAR and abs(self.q_err) <= Q_BAR


def draw(path: str, seed: int) -> Take:
    """The take's parameters, drawn from the envelope with its own seed."""
    import numpy as np

    rng = np.random.default_rng([seed, PATHS.index(path)])
    f0 = float(math.exp(rng.uniform(math.log(60.0), math.log(3000.0))))
    q = float(math.exp(rng.uniform(math.log(4.0), math.log(150.0))))
    snr = float(rng.uniform(20.0, 60.0))
    dur = float(rng.uniform(1.0, 12.0))
    rate = float(RATES[rng.integers(len(RATES))])
    container, subtype = FORMATS[rng.integers(len(FORMATS))]
    swapped = bool(rng.integers(2)) and path not in ("one-channel", "ringdown", "csv")
    return Take(path, seed, f0, q, snr, dur, rate, container, subtype, swapped)


def _sweep_params(t: Take, rng):
    from characterize.excitation import SweepParams

    lo = max(10.0, t.f0_hz / rng.uniform(3.0, 10.0))
    hi = min(0.45 * t.rate_hz, t.f0_hz * rng.uniform(3.0, 10.0), 20000.0)
    tail = min(max(0.3, 0.25 * t.duration_s), 2.0)
    return SweepParams(start_hz=lo, stop_hz=hi, duration_s=max(0.5, t.duration_s - tail),
                       rate_hz=t.rate_hz, level_dbfs=-6.0, tail_s=tail)


def _write_sweep(folder: Path, sweep) -> Path:
    import soundfile as sf

    from characterize.excitation import sidecar_path, sidecar_text

    p = folder / "sweep.wav"
    sf.write(p, sweep.samples, int(sweep.params.rate_hz), subtype="FLOAT")
    sidecar_path(p).write_text(sidecar_text(sweep.params))
    return p


def _taps(t: Take, rng):
    """Free decays (taps): damped cosines A exp(-t/tau) cos(2 pi f_d t + phi),
    tau = Q/(pi f0), f_d = f0 sqrt(1 - 1/(4 Q^2)), at random times, with noise
    whose RMS is the first peak over the SNR."""
    import numpy as np

    fs = t.rate_hz
    n = int(t.duration_s * fs)
    x = np.zeros(n)
    tau = t.q / (math.pi * t.f0_hz)
    fd = t.f0_hz * math.sqrt(1.0 - 1.0 / (4.0 * t.q * t.q))
    n_taps = int(rng.integers(1, 4))
    starts = np.sort(rng.uniform(0.05, 0.6, n_taps)) * t.duration_s
    for t0 in starts:
        i = int(t0 * fs)
        m = n - i
        tt = np.arange(m) / fs
        x[i:] += rng.uniform(0.4, 1.0) * np.exp(-tt / tau) * np.cos(
            2 * math.pi * fd * tt + rng.uniform(0, 2 * math.pi))
    x += 10 ** (-t.snr_db / 20) * rng.standard_normal(n)
    return 0.5 * x / np.max(np.abs(x))


def _csv(t: Take, rng, folder: Path) -> Path:
    """An analyzer-style export: frequency, magnitude (dB), phase (deg) at six
    significant digits, complex noise 1/SNR of the pass-band level per bin."""
    import numpy as np

    from characterize.simulate import resonator_response

    bw = t.f0_hz / t.q
    df = bw / rng.uniform(3.0, 20.0)
    f = np.arange(max(1.0, t.f0_hz / 4), min(4 * t.f0_hz, 20000.0), df)
    if f.size > 40000:  # an analyzer's export is bounded; keep the bins near f0
        f = np.arange(max(1.0, t.f0_hz - 40 * bw), t.f0_hz + 40 * bw, df)
    h = 1.3 * resonator_response(f, t.f0_hz, t.q) * np.exp(-2j * np.pi * f * 60e-6)
    sigma = 1.3 * 10 ** (-t.snr_db / 20)
    h = h + sigma / math.sqrt(2) * (rng.standard_normal(f.size) + 1j * rng.standard_normal(f.size))
    p = folder / "transfer.csv"
    with open(p, "w") as fh:
        fh.write("frequency_hz,magnitude_db,phase_deg\n")
        for fi, hi in zip(f, h, strict=True):
            fh.write(f"{fi:.6g},{20 * math.log10(abs(hi)):.6g},"
                     f"{math.degrees(math.atan2(hi.imag, hi.real)):.6g}\n")
    return p


def make_files(t: Take, folder: Path) -> list[str]:
    """Write the take's files; return the ``fit`` arguments a user would type."""
    import numpy as np
    import soundfile as sf

    from characterize.simulate import Setup, simulate

    rng = np.random.default_rng([t.seed, 7, PATHS.index(t.path)])
    rec = folder / f"take.{t.container}"
    if t.path == "csv":
        return ["--transfer", str(_csv(t, rng, folder))]
    if t.path == "ringdown":
        sf.write(rec, _taps(t, rng), int(t.rate_hz), subtype=t.subtype)
        return [str(rec)]
    if t.path == "h1":
        setup = Setup(f0_hz=t.f0_hz, q=t.q, rate_hz=t.rate_hz, snr_db=t.snr_db,
                      excitation="noise", noise_duration_s=t.duration_s)
    else:
        setup = Setup(f0_hz=t.f0_hz, q=t.q, rate_hz=t.rate_hz, snr_db=t.snr_db,
                      sweep=_sweep_params(t, rng))
    data, sweep = simulate(setup, seed=int(rng.integers(2**31)))
    if t.path == "one-channel":
        sf.write(rec, data[:, 0], int(t.rate_hz), subtype=t.subtype)
        return [str(rec), "--sweep", str(_write_sweep(folder, sweep))]
    cols = [data[:, 0], data[:, 1]]
    inside, outside = 1, 2
    if t.swapped:
        cols = cols[::-1]
        inside, outside = 2, 1
    if t.path == "sweep-3ch":
        loop = np.zeros(data.shape[0])
        n_lat = int(round(setup.latency_s * t.rate_hz))
        s = sweep.samples[: loop.size - n_lat]
        loop[n_lat:n_lat + s.size] = 0.5 * s
        cols.append(loop)
    sf.write(rec, np.stack(cols, axis=1), int(t.rate_hz), subtype=t.subtype)
    args = [str(rec), "--inside", str(inside), "--outside", str(outside)]
    if t.path in ("sweep", "sweep-3ch"):
        args += ["--sweep", str(_write_sweep(folder, sweep))]
    return args


def run_take(key: tuple[str, int], keep: str | None = None) -> Take:
    from click.testing import CliRunner

    from characterize.cli import main as cli

    t = draw(*key)
    t0 = time.perf_counter()
    with tempfile.TemporaryDirectory(prefix="envelope-") as tmp:
        folder = Path(keep) / f"{t.path}-{t.seed}" if keep else Path(tmp)
        folder.mkdir(parents=True, exist_ok=True)
        args = ["fit", *make_files(t, folder), "--json"]
        r = CliRunner().invoke(cli, args, catch_exceptions=True)
    t.seconds = time.perf_counter() - t0
    t.exit_code = r.exit_code
    if r.exception is not None and not isinstance(r.exception, SystemExit):
        t.exit_code = 99
        t.message = f"{type(r.exception).__name__}: {r.exception}"
        return t
    t.message = r.stderr.strip()[-300:]
    try:
        doc = json.loads(r.stdout)
    except (json.JSONDecodeError, ValueError):
        return t
    fit = doc.get("fit") or {}
    if fit.get("f0_hz") is not None:
        t.f0_fit, t.f0_se = fit["f0_hz"], fit.get("f0_stderr_hz") or math.nan
        t.q_fit, t.q_se = fit["q"], fit.get("q_stderr") or math.nan
    t.method = (doc.get("input") or {}).get("method", "")
    flags = doc.get("flags") or []
    t.warnings = tuple(f["code"] for f in flags if f.get("severity") in ("warning", "error"))
    t.infos = tuple(f["code"] for f in flags if f.get("severity") == "info")
    return t


def _pct(x, q):
    import numpy as np

    return float(np.percentile(np.asarray(x), q)) if len(x) else math.nan


def summarize(takes: list[Take]) -> list[dict]:
    import numpy as np

    rows = []
    for path in PATHS:
        ts = [t for t in takes if t.path == path]
        if not ts:
            continue
        fitted = [t for t in ts if t.exit_code == 0 and math.isfinite(t.f0_fit)]
        zf = np.array([abs(t.z_f0) for t in fitted])
        zq = np.array([abs(t.z_q) for t in fitted])
        worst = max(fitted, key=lambda t: abs(t.z_q) if math.isfinite(t.z_q) else 1e9,
                    default=None)
        worst_err = max(fitted, key=lambda t: abs(t.q_err), default=None)
        rows.append({
            "path": path, "n": len(ts),
            "no_fit": sum(t.exit_code == 1 for t in ts),
            "bad_input": sum(t.exit_code == 2 for t in ts),
            "crash": sum(t.exit_code not in (0, 1, 2) for t in ts),
            "max_f0_err": max((abs(t.f0_err) for t in fitted), default=math.nan),
            "max_q_err": max((abs(t.q_err) for t in fitted), default=math.nan),
            "p99_z_f0": _pct(zf, 99), "p99_z_q": _pct(zq, 99),
            "cov1_f0": float(np.mean(zf <= 1)) if zf.size else math.nan,
            "cov1_q": float(np.mean(zq <= 1)) if zq.size else math.nan,
            "cov2_f0": float(np.mean(zf <= 2)) if zf.size else math.nan,
            "cov2_q": float(np.mean(zq <= 2)) if zq.size else math.nan,
            "false_warnings": sum(bool(t.warnings) and t.within_bar for t in fitted),
            "silent_misses": sum((not t.warnings) and not t.within_bar for t in fitted),
            "worst_z": None if worst is None else (worst.seed, round(worst.z_q, 2)),
            "worst_err": None if worst_err is None else (worst_err.seed,
                                                         round(100 * worst_err.q_err, 2)),
            "seconds": sum(t.seconds for t in ts),
        })
    return rows


def markdown(rows: list[dict], seed0: int) -> str:
    out = ["| path | takes | no fit | bad input | crash | max f0 err | max Q err | "
           "p99 \\|z\\| f0 / Q | 1σ cov f0 / Q | 2σ cov f0 / Q | false warnings | "
           "silent misses | worst Q take (seed: z) |",
           "|---|---|---|---|---|---|---|---|---|---|---|---|---|"]
    for r in rows:
        out.append(
            f"| {r['path']} | {r['n']} | {r['no_fit']} | {r['bad_input']} | {r['crash']} | "
            f"{100 * r['max_f0_err']:.3f} % | {100 * r['max_q_err']:.2f} % | "
            f"{r['p99_z_f0']:.2f} / {r['p99_z_q']:.2f} | "
            f"{100 * r['cov1_f0']:.1f} / {100 * r['cov1_q']:.1f} % | "
            f"{100 * r['cov2_f0']:.1f} / {100 * r['cov2_q']:.1f} % | "
            f"{r['false_warnings']} | {r['silent_misses']} | "
            f"{'%s: %s' % tuple(r['worst_z']) if r['worst_z'] else '-'} |")
    out.append("")
    out.append(f"Seeds {seed0} onwards; bars: |f0 err| <= {100 * F0_BAR:g} %, "
               f"|Q err| <= {100 * Q_BAR:g} %, p99 |z| <= 3, 2σ coverage 95 ± 3 %.")
    return "\n".join(out)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--takes", type=int, default=150, help="takes per path")
    ap.add_argument("--workers", type=int, default=2)
    ap.add_argument("--seed", type=int, default=1000, help="first seed")
    ap.add_argument("--paths", default=",".join(PATHS))
    ap.add_argument("--json", dest="json_path", default=None)
    ap.add_argument("--keep", default=None, help="keep each take's files under this folder")
    ap.add_argument("--seed-of", type=int, default=None, help="run only this seed (verbose)")
    opts = ap.parse_args()
    paths = [p.strip() for p in opts.paths.split(",") if p.strip()]
    for p in paths:
        if p not in PATHS:
            sys.exit(f"--paths: unknown path {p!r}; one of {', '.join(PATHS)}")
    if opts.seed_of is not None:
        for p in paths:
            t = run_take((p, opts.seed_of), opts.keep)
            print(json.dumps({**t.__dict__, "f0_err": t.f0_err, "q_err": t.q_err,
                              "z_f0": t.z_f0, "z_q": t.z_q}, indent=1, default=str))
        return
    keys = [(p, opts.seed + i) for p in paths for i in range(opts.takes)]
    t0 = time.perf_counter()
    takes: list[Take] = []
    if opts.workers > 1:
        from concurrent.futures import ProcessPoolExecutor
        from functools import partial

        with ProcessPoolExecutor(opts.workers) as ex:
            for i, t in enumerate(ex.map(partial(run_take, keep=opts.keep), keys,
                                         chunksize=4)):
                takes.append(t)
                if (i + 1) % 50 == 0:
                    print(f"{i + 1}/{len(keys)} takes, {time.perf_counter() - t0:.0f} s",
                          file=sys.stderr)
    else:
        for i, k in enumerate(keys):
            takes.append(run_take(k, opts.keep))
            if (i + 1) % 50 == 0:
                print(f"{i + 1}/{len(keys)} takes", file=sys.stderr)
    rows = summarize(takes)
    print(markdown(rows, opts.seed))
    print(f"\n{len(takes)} takes in {time.perf_counter() - t0:.0f} s")
    if opts.json_path:
        Path(opts.json_path).write_text(json.dumps(
            {"rows": rows, "takes": [{**t.__dict__, "within_bar": t.within_bar}
                                     for t in takes]}, indent=1, default=str))


if __name__ == "__main__":
    main()
