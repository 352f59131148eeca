"""Geometry predictions against openwind's 1-D model on a seeded family (issue 15).

    python benchmarks/validate_geometry.py            # the full family (232 members)
    python benchmarks/validate_geometry.py --per 3    # 3 of each family

For each member the tool's headline f0, its like-for-like 1-D f0 (openwind's
physics: no end losses) and its smooth-wall Q are compared with openwind's
resonance for the same bore (tests/geometry_family.py says what openwind is
given for each family). Prints one Markdown row per family: the absolute
relative errors' median, 95th percentile and maximum, and the tolerance the
tests hold the maximum to. The table is copied into docs/geometry.md.
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tests"))

import geometry_family as g  # noqa: E402


def _stats(x: list[float]) -> str:
    a = 100 * np.abs(np.asarray(x))
    return f"{np.median(a):.2f} / {np.percentile(a, 95):.2f} / {a.max():.2f}"


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--per", type=int, default=None, help="members per family (default: full)")
    ap.add_argument("--seed", type=int, default=15)
    ap.add_argument("--family", action="append", choices=list(g.FULL_COUNTS),
                    help="only this family (repeatable)")
    args = ap.parse_args()
    counts = (dict(g.FULL_COUNTS) if args.per is None
              else {k: args.per for k in g.FULL_COUNTS})
    if args.family:
        counts = {k: v for k, v in counts.items() if k in args.family}
    air = g.openwind_air()
    rows: dict[str, list[dict[str, float]]] = {}
    for m in g.family(counts, args.seed):
        rows.setdefault(m.family, []).append(g.evaluate(m, air))
    print(f"{sum(len(v) for v in rows.values())} geometries, seed {args.seed}; "
          "|error| in %: median / 95th percentile / max\n")
    print("| family | n | f0 (headline) | f0 tolerance | f0 like-for-like | smooth-wall Q "
          "| Q held to | Q with end losses (signed median) |")
    print("|---|---|---|---|---|---|---|---|")
    for fam, r in rows.items():
        q_tol = "10 %" if fam in g.SAME_BORE_Q else "not held (see text)"
        q_end = 100 * float(np.median([x["q"] for x in r]))
        print(f"| {fam} | {len(r)} | {_stats([x['f0'] for x in r])} | "
              f"{100 * g.F0_TOLERANCE[fam]:g} % | {_stats([x['f0_like'] for x in r])} | "
              f"{_stats([x['q_smooth'] for x in r])} | {q_tol} | {q_end:+.1f} % |")


if __name__ == "__main__":
    main()
