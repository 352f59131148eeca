"""Matched sets: the K results that respond most alike near a target."""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import asdict, dataclass
from pathlib import Path
from typing import Any

import numpy as np

from ..checks import Flag
from ..errors import InputError
from ..stats import is_finite_number
from .common import (
    SERIES_TEMPERATURE_SPREAD_K,
    _flags_dicts,
)
from .document import (
    ResultSummary,
)


@dataclass(frozen=True)
class MatchItem:
    """One candidate for a matched set (f0 brought to the common speed of sound)."""

    id: str
    source: str
    f0_hz: float
    f0_stderr_hz: float
    q: float
    q_stderr: float
    f0_measured_hz: float
    temperature_c: float

    def to_dict(self) -> dict[str, Any]:
        return asdict(self)


@dataclass(frozen=True)
class MatchedSet:
    """K items and how alike they are.

    Attributes
    ----------
    ids : tuple of str
        Members, in order of f0.
    cost : float
        The ranking criterion (smaller is better; see :func:`match_cost`).
    max_deviation_hz : float
        Largest |f0 - target| among the members, Hz.
    f0_mean_hz, f0_std_hz, f0_range_hz : float
        Mean, sample standard deviation and max - min of the members' f0, Hz.
    offset_hz : float
        Mean f0 - target, Hz.
    q_mean, q_std, q_range : float
        The same for Q.
    """

    ids: tuple[str, ...]
    cost: float
    max_deviation_hz: float
    f0_mean_hz: float
    f0_std_hz: float
    f0_range_hz: float
    offset_hz: float
    q_mean: float
    q_std: float
    q_range: float

    def to_dict(self) -> dict[str, Any]:
        d = asdict(self)
        d["ids"] = list(self.ids)
        return d


@dataclass(frozen=True)
class MatchResult:
    """The best set, the next-best alternatives and the candidates."""

    target_f0_hz: float
    count: int
    by: str
    reference_speed_of_sound_m_s: float
    reference_temperature_c: float
    q_scale: float
    best: MatchedSet
    alternatives: tuple[MatchedSet, ...]
    items: tuple[MatchItem, ...]
    flags: tuple[Flag, ...] = ()

    def to_dict(self) -> dict[str, Any]:
        return {
            "schema": "characterize.match/1", "target_f0_hz": self.target_f0_hz,
            "count": self.count, "by": self.by,
            "reference_speed_of_sound_m_s": self.reference_speed_of_sound_m_s,
            "reference_temperature_c": self.reference_temperature_c,
            "q_scale": self.q_scale, "best": self.best.to_dict(),
            "alternatives": [a.to_dict() for a in self.alternatives],
            "items": [i.to_dict() for i in self.items], "flags": _flags_dicts(self.flags),
        }


def _set_of(idx: Sequence[int], items: Sequence[MatchItem], target: float,
            cost: float) -> MatchedSet:
    members = sorted(idx, key=lambda i: items[i].f0_hz)
    f = np.array([items[i].f0_hz for i in members])
    q = np.array([items[i].q for i in members])
    return MatchedSet(
        ids=tuple(items[i].id for i in members), cost=float(cost),
        max_deviation_hz=float(np.max(np.abs(f - target))), f0_mean_hz=float(f.mean()),
        f0_std_hz=float(f.std(ddof=1)) if f.size > 1 else 0.0, f0_range_hz=float(np.ptp(f)),
        offset_hz=float(f.mean() - target), q_mean=float(q.mean()),
        q_std=float(q.std(ddof=1)) if q.size > 1 else 0.0, q_range=float(np.ptp(q)))


def match_cost(f0_hz: Sequence[float], q: Sequence[float], target_hz: float, by: str,
               q_scale: float) -> float:
    r"""The ranking criterion of a candidate set (smaller is better).

    - ``by="f0"``: the spread of the members' f0 plus the offset of the set's
      centre (midrange) from the target, relative to the target:

      .. math::

          r = \frac{(f_\max - f_\min) + |(f_\max + f_\min)/2 - f_t|}{f_t}

      (how far apart the members are and how far off the set is count alike).
    - ``by="f0,q"``: :math:`\sqrt{(2\tilde Q r)^2 + (\Delta Q/\tilde Q)^2}`,
      where :math:`\tilde Q` is the median Q of all candidates and
      :math:`\Delta Q` the set's Q range. :math:`2\tilde Q r` expresses the f0
      figure in half-power half-bandwidths :math:`f_0/(2Q)`, :math:`\Delta Q/Q`
      is the relative Q spread; both are first-order relative changes of the
      response 1/(1 - (f/f0)^2 + j f/(Q f0)) at resonance, so they are added
      in quadrature (own derivation).
    """
    f = np.asarray(f0_hz, dtype=float)
    lo, hi = float(np.min(f)), float(np.max(f))
    r = ((hi - lo) + abs(0.5 * (lo + hi) - target_hz)) / target_hz
    if by == "f0":
        return r
    qa = np.asarray(q, dtype=float)
    return math.hypot(2.0 * q_scale * r, float(np.ptp(qa)) / q_scale)


def _label(r: ResultSummary) -> str:
    """A short id for a result: its folder for DIR/result.json, else its file stem."""
    p = Path(r.source)
    return p.parent.name if p.name == "result.json" and p.parent.name else p.stem


def match_sets(results: Sequence[ResultSummary], count: int, target_hz: float, by: str = "f0",
               *, alternatives: int = 3) -> MatchResult:
    """Pick the ``count`` results most alike and nearest a target f0.

    Every f0 is first brought to the mean speed of sound of all results
    (f0 c_ref / c_i), so items measured at different temperatures compare
    as they would side by side. Sets are ranked by :func:`match_cost`. The
    best set is found exactly, because shrinking the f0 interval a set spans
    never raises the f0 part of the cost (the spread falls by as much as the
    centre can move away from the target, times two):

    - ``by="f0"``: the best set is a run of ``count`` consecutive items in f0
      order; all runs are ranked and the next best are the alternatives.
    - ``by="f0,q"``: for every f0 interval (pruned once its f0 part alone
      exceeds the costs already found), the ``count`` items in it that are
      consecutive in Q with the smallest Q range.

    Parameters
    ----------
    results : sequence of ResultSummary
    count : int
        Set size K, 2 <= K <= len(results).
    target_hz : float
        Target f0, Hz, > 0.
    by : str
        ``"f0"`` or ``"f0,q"``.
    alternatives : int
        How many next-best sets to report.

    Raises
    ------
    InputError
        K outside 2..len(results), target not > 0, unknown ``by``.
    """
    import bisect

    if by not in ("f0", "f0,q"):
        raise InputError("--by", None, f"must be one of 'f0', 'f0,q', got {by!r}")
    if not is_finite_number(target_hz) or target_hz <= 0:
        raise InputError("--target", None, f"must be a frequency > 0 Hz, got {target_hz!r}")
    n = len(results)
    if count < 2:
        raise InputError("--count", None, f"a matched set needs at least 2 items, got {count}")
    if count > n:
        raise InputError("--count", None, f"asks for {count} items but only {n} result(s) "
                         "were given")
    c = np.array([r.air.speed_of_sound_m_s for r in results])
    c_ref = float(c.mean())
    ids: list[str] = []
    for r in results:
        rid = _label(r)
        ids.append(r.source if rid in ids else rid)
    items = tuple(
        MatchItem(id=i, source=r.source, f0_hz=r.f0_hz * c_ref / r.air.speed_of_sound_m_s,
                  f0_stderr_hz=r.f0_stderr_hz * c_ref / r.air.speed_of_sound_m_s, q=r.q,
                  q_stderr=r.q_stderr, f0_measured_hz=r.f0_hz,
                  temperature_c=r.air.temperature_c)
        for i, r in zip(ids, results, strict=False))
    f = np.array([it.f0_hz for it in items])
    q = np.array([it.q for it in items])
    q_scale = float(np.median(q))
    order = np.argsort(f, kind="stable")
    fs = f[order]
    keep = alternatives + 1
    cands: dict[frozenset[int], float] = {}
    top: list[float] = []  # the `keep` smallest costs found so far

    def add(idx: np.ndarray) -> None:
        key = frozenset(int(i) for i in idx)
        if key in cands:
            return
        cost = match_cost(f[idx], q[idx], target_hz, by, q_scale)
        cands[key] = cost
        bisect.insort(top, cost)
        del top[keep:]

    def threshold() -> float:
        return top[-1] if len(top) >= keep else math.inf

    for i in range(n - count + 1):
        for j in range(i + count - 1, n):
            cf = ((fs[j] - fs[i]) + abs(0.5 * (fs[i] + fs[j]) - target_hz)) / target_hz
            bound = cf if by == "f0" else 2.0 * q_scale * cf
            if bound > threshold():
                break
            if by == "f0":
                add(order[i:i + count])
                break
            inner = order[i:j + 1]
            by_q = inner[np.argsort(q[inner], kind="stable")]
            qs = q[by_q]
            ranges = qs[count - 1:] - qs[:qs.size - count + 1]
            for s0 in np.argsort(ranges, kind="stable")[:keep]:
                add(by_q[s0:s0 + count])
    ranked = sorted(cands.items(), key=lambda kv: (kv[1], sorted(kv[0])))
    sets = [_set_of(sorted(k), items, target_hz, v) for k, v in ranked[:keep]]
    best = sets[0]
    flags: list[Flag] = []
    member_se = [it.f0_stderr_hz for it in items if it.id in best.ids]
    se = float(np.nanmedian(member_se)) if np.any(np.isfinite(member_se)) else math.nan
    if math.isfinite(se) and best.f0_range_hz < 2.0 * se:
        flags.append(Flag("match-below-precision", "info",
                          f"the chosen set spans {best.f0_range_hz:.3g} Hz, less than twice "
                          f"the members' f0 standard error ({se:.3g} Hz): they are "
                          "indistinguishable at this precision"))
    t_spread = float(np.ptp([it.temperature_c for it in items]))
    if t_spread > SERIES_TEMPERATURE_SPREAD_K:
        flags.append(Flag("temperature-spread", "info",
                          f"the results were measured {t_spread:.1f} K apart; f0 values were "
                          f"brought to c = {c_ref:.2f} m/s before matching"))
    return MatchResult(target_f0_hz=float(target_hz), count=count, by=by,
                       reference_speed_of_sound_m_s=c_ref,
                       reference_temperature_c=float(np.mean([it.temperature_c
                                                              for it in items])),
                       q_scale=q_scale, best=best, alternatives=tuple(sets[1:]), items=items,
                       flags=tuple(flags))
