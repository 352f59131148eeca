"""Speed of a batch (a benchmark script, never a timed unit test).

200 simulated items (5 s, 48 kHz, two channels, 16-bit FLAC, seeded spread of
f0 and Q) run with 2 worker processes:

1. one item's work in this process, imports done (analyze + response plot +
   result document), median over a sample: the single-item time;
2. the batch's wall time with 2 workers, against the ideal
   200 x single-item time / 2 (target: within 1.3x);
3. report generation (summary.json, summary.csv, report.html, report.pdf) for
   the 200 items (target: under 10 s).

Run:  python benchmarks/bench_batch.py [--items 200] [--workers 2] [--sample 12]
"""

from __future__ import annotations

import argparse
import os
import resource
import shutil
import statistics
import tempfile
import time
from pathlib import Path


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--items", type=int, default=200)
    ap.add_argument("--workers", type=int, default=2)
    ap.add_argument("--sample", type=int, default=12, help="items timed one by one")
    ap.add_argument("--keep", action="store_true", help="keep the temporary folder")
    opts = ap.parse_args()

    import numpy as np
    import soundfile as sf

    from characterize import batch as B
    from characterize.batch import runner as R
    from characterize.excitation import SweepParams, make_sweep, sidecar_text
    from characterize.simulate import Setup, simulate, write_recording

    tmp = Path(tempfile.mkdtemp(prefix="characterize-bench-batch-"))
    try:
        rate = 48000.0
        sweep = SweepParams(start_hz=20.0, stop_hz=4000.0, duration_s=3.5, rate_hz=rate,
                            level_dbfs=-12.0, tail_s=1.5)
        s = make_sweep(sweep)
        sf.write(tmp / "sweep.wav", s.samples, int(rate), subtype="PCM_24")
        (tmp / "sweep.toml").write_text(sidecar_text(sweep), encoding="utf-8")
        rng = np.random.default_rng(5)
        rows = ["id,recording"]
        t = time.perf_counter()
        for k in range(opts.items):
            setup = Setup(f0_hz=243.0 * (1 + rng.normal(0, 0.01)), q=float(rng.uniform(25, 50)),
                          rate_hz=rate, snr_db=40.0, sweep=sweep, latency_s=0.0)
            data, _ = simulate(setup, seed=k)
            write_recording(str(tmp / f"jar-{k:03d}.flac"), data, rate, "PCM_16")
            rows.append(f"jar-{k:03d},jar-{k:03d}.flac")
        (tmp / "manifest.csv").write_text("\n".join(rows) + "\n", encoding="utf-8")
        (tmp / "spec.toml").write_text(
            'name = "benchmark"\n[f0]\ntarget = "243 Hz"\ntolerance = "2 %"\n[q]\nmin = 20\n'
            '[defaults]\nsweep = "sweep.wav"\n', encoding="utf-8")
        made = time.perf_counter() - t
        spec = B.read_spec(tmp / "spec.toml")
        manifest = B.read_manifest(tmp / "manifest.csv", spec)

        # 1. single-item time in this process (imports and fonts loaded first)
        R._init_worker()
        single_dir = tmp / "single" / "items"
        single_dir.mkdir(parents=True)
        times, cpu = [], []
        for item in manifest.items[: opts.sample + 1]:
            task = R._Task(item, R._settings(item, spec), str(single_dir))
            t, c = time.perf_counter(), time.process_time()
            R._work(task)
            times.append(time.perf_counter() - t)
            cpu.append(time.process_time() - c)
        single = statistics.median(times[1:])  # the first is a warm-up
        single_cpu = statistics.median(cpu[1:])

        # 2. the batch with N workers
        load0 = os.getloadavg()[0]
        ch0 = resource.getrusage(resource.RUSAGE_CHILDREN)
        t = time.perf_counter()
        summary = B.run_batch(manifest, spec, tmp / "out", workers=opts.workers)
        wall = time.perf_counter() - t
        ch1 = resource.getrusage(resource.RUSAGE_CHILDREN)
        workers_cpu = (ch1.ru_utime + ch1.ru_stime) - (ch0.ru_utime + ch0.ru_stime)
        load1 = os.getloadavg()[0]
        ideal = opts.items * single / opts.workers

        # 3. reports
        report_times, report_cpu = {}, {}
        for fmt in ("json", "csv", "html", "pdf"):
            t, c = time.perf_counter(), time.process_time()
            B.write_reports(summary, tmp / "out", formats=(fmt,))
            report_times[fmt] = time.perf_counter() - t
            report_cpu[fmt] = time.process_time() - c
        reports = sum(report_times.values())
        sizes = {n: (tmp / "out" / n).stat().st_size / 1e6 for n in B.REPORT_FILES}
    finally:
        if opts.keep:
            print(f"kept {tmp}")  # noqa: T201
        else:
            shutil.rmtree(tmp, ignore_errors=True)

    st = summary.stats
    rows_out = [
        ("what", "time", "note"),
        ("---", "---", "---"),
        (f"one item in-process (analyze + plot + JSON), median of {opts.sample}",
         f"{single:.3f} s", f"CPU {single_cpu:.3f} s; 5 s, 48 kHz stereo FLAC"),
        (f"batch of {opts.items} with {opts.workers} workers (wall)", f"{wall:.1f} s",
         f"{wall / ideal:.2f}x the ideal {opts.items} x {single:.3f} s / {opts.workers} "
         f"= {ideal:.1f} s (target <= 1.3x)"),
        ("workers' CPU time per item", f"{workers_cpu / opts.items:.3f} s",
         f"{workers_cpu / (wall * opts.workers):.0%} of {opts.workers} cores busy with the "
         f"batch; load average {load0:.1f} to {load1:.1f} (other work on the machine)"),
        ("reports: summary.json + summary.csv",
         f"{report_times['json'] + report_times['csv']:.2f} s", ""),
        ("report.html", f"{report_times['html']:.2f} s",
         f"CPU {report_cpu['html']:.2f} s; {sizes['report.html']:.1f} MB"),
        ("report.pdf", f"{report_times['pdf']:.2f} s",
         f"CPU {report_cpu['pdf']:.2f} s; {sizes['report.pdf']:.1f} MB, "
         f"{1 + -(-opts.items // 34) + 3 + -(-opts.items // 2)} pages"),
        ("all reports", f"{reports:.2f} s",
         f"CPU {sum(report_cpu.values()):.2f} s; target < 10 s"),
    ]
    for r in rows_out:
        print(f"| {r[0]} | {r[1]} | {r[2]} |")  # noqa: T201
    tail = (f"\n(simulating the {opts.items} recordings took {made:.0f} s; "
            f"{st.n_pass} pass, {st.n_fail} fail, {st.n_error} errors)")
    print(tail)  # noqa: T201


if __name__ == "__main__":
    main()
