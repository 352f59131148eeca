"""The large statistical run (``characterize selftest --full`` plus the regimes
where the method is expected to fail), as a benchmark script, never a unit test.

Prints Markdown tables: per method (sweep deconvolution, noise H1) and
parameter (f0, Q), overall and by Q, SNR and f0 thirds, the bias in units of
the standard deviation, the variance over the Cramer-Rao bound and the
coverage of the reported 1-sigma and 2-sigma intervals, each with the
allowance for its sampling error (see characterize/selftest.py); then the
same for very low Q, very low SNR and a resonance near the sweep's band edge,
with the flags the tool raised there.

Run:  python benchmarks/bench_statistics.py [--trials 400] [--regime-trials 100]
      [--seed N] [--json out.json]
(about 15 to 25 minutes on one core of the shared 2-core machine with the defaults)
"""

from __future__ import annotations

import argparse
import json
import os
import sys
import time
from dataclasses import replace

os.environ.setdefault("OMP_NUM_THREADS", "1")


def _md(table, title: str) -> str:
    from characterize.selftest import _METHOD_NAMES

    out = [f"### {title}", "",
           f"{sum(1 for _ in table.trials)} trials in {table.seconds:.0f} s; "
           f"f0 {table.plan.f0_range_hz[0]:g} to {table.plan.f0_range_hz[1]:g} Hz, "
           f"Q {table.plan.q_range[0]:g} to {table.plan.q_range[1]:g}, "
           f"SNR {table.plan.snr_range_db[0]:g} to {table.plan.snr_range_db[1]:g} dB, "
           f"seed {table.plan.seed}" + (f", sweep {table.plan.sweep}" if table.plan.sweep else ""),
           "",
           "| method | param | group | N | no fit | warned | median abs err | bias/sd | "
           "var/CRLB | 1σ cov | 2σ cov | result |",
           "|---|---|---|---|---|---|---|---|---|---|---|---|"]
    for r in table.rows:
        b, v, c1, c2 = r.criteria

        def mark(c, text):
            return text if c.passed else f"**{text}**"

        out.append(
            f"| {_METHOD_NAMES.get(r.method, r.method)} | {r.parameter} | {r.group} | {r.n} | "
            f"{r.n_failed + r.n_unbounded} | {100 * r.warned:.0f} % | "
            f"{100 * r.median_abs_rel_error:.3f} % | "
            f"{mark(b, f'{b.value:+.2f} (±{b.high:.2f})')} | "
            f"{mark(v, f'{v.value:.2f} ({v.low:.2f}–{v.high:.2f})')} | "
            f"{mark(c1, f'{100 * c1.value:.1f} %')} | {mark(c2, f'{100 * c2.value:.1f} %')} | "
            f"{'pass' if r.passed else 'FAIL'} |")
    out.append("")
    for a in table.accuracy:
        out.append(f"- accuracy at SNR ≥ 30 dB, {_METHOD_NAMES.get(a.method, a.method)}: "
                   f"f0 within 0.1 % in {a.f0_within}/{a.n} (worst {100 * a.worst_f0_rel:.4f} %), "
                   f"Q within 3 % in {a.q_within}/{a.n} (worst {100 * a.worst_q_rel:.2f} %)")
    for m, c in table.flag_counts.items():
        n = sum(1 for t in table.trials if t.case.method == m)
        if c:
            out.append(f"- flags, {_METHOD_NAMES.get(m, m)} ({n} trials): "
                       + ", ".join(f"`{k}` {v}" for k, v in c.items()))
    if table.failures:
        out.append(f"- no fit or no bound: {len(table.failures)}; first: "
                   + "; ".join(table.failures[:3]))
    return "\n".join(out) + "\n"


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--trials", type=int, default=400, help="resonators per method (nominal)")
    ap.add_argument("--regime-trials", type=int, default=100, help="resonators per regime")
    ap.add_argument("--seed", type=int, default=20261201)
    ap.add_argument("--json", dest="json_path", default=None, help="also write all trials here")
    ap.add_argument("--skip-nominal", action="store_true")
    opts = ap.parse_args()

    from characterize.selftest import full_plan, regime_plans, run_selftest

    def progress(done: int, total: int) -> None:
        if done % 20 == 0 or done == total:
            print(f"  {done}/{total}", file=sys.stderr, flush=True)

    t0 = time.perf_counter()
    docs = {}
    plans = {} if opts.skip_nominal else {
        "Nominal ranges (selftest --full)": replace(full_plan(opts.seed), trials=opts.trials)}
    plans.update(regime_plans(opts.regime_trials, opts.seed))
    for title, plan in plans.items():
        print(f"{title}: {plan.trials} per method", file=sys.stderr)
        table = run_selftest(plan, progress=progress)
        print(_md(table, title), flush=True)
        docs[title] = table.to_dict(with_trials=True)
    print(f"total {time.perf_counter() - t0:.0f} s", file=sys.stderr)
    if opts.json_path:
        with open(opts.json_path, "w", encoding="utf-8") as fh:
            json.dump(docs, fh, default=str)


if __name__ == "__main__":
    main()
