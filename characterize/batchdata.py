"""What a batch is made of, as data: the spec (:class:`Spec`), each item's
outcome, the statistics and the finished :class:`BatchSummary` (the summary
document, ``characterize.batch/1``). Both :mod:`characterize.batch` (which
makes them) and :mod:`characterize.report` (which shows them) import this
module; it imports neither."""

from __future__ import annotations

import datetime as _dt
from dataclasses import asdict, dataclass, field
from typing import Any

from ._version import __version__

#: Schema of the batch summary (summary.json) and of an item's failure document.
BATCH_SCHEMA = "characterize.batch/1"
FAILURE_SCHEMA = "characterize.batch-failure/1"


@dataclass(frozen=True)
class Spec:
    """Tolerances and defaults of a batch (SI units, fractions for percents).

    An item passes when ``|f0 - f0_target_hz| <= f0_tolerance_hz``, its Q is
    within ``[q_min, q_max]`` (each optional), its mismatch against the
    geometry's prediction is at most ``max_mismatch`` (optional) and it raised
    no flag listed in ``fail_flags`` (nor, when unlisted, one of severity
    ``error``).
    """

    path: str
    name: str
    f0_target_hz: float
    f0_tolerance_hz: float
    f0_tolerance_text: str
    q_min: float | None = None
    q_max: float | None = None
    max_mismatch: float | None = None
    fail_flags: tuple[str, ...] = ()
    warn_flags: tuple[str, ...] = ()
    default_object: str | None = None
    default_sweep: str | None = None
    default_inside: int = 1
    default_outside: int = 2

    @property
    def f0_lower_hz(self) -> float:
        return self.f0_target_hz - self.f0_tolerance_hz

    @property
    def f0_upper_hz(self) -> float:
        return self.f0_target_hz + self.f0_tolerance_hz

    def to_dict(self) -> dict[str, Any]:
        d = asdict(self)
        d["fail_flags"], d["warn_flags"] = list(self.fail_flags), list(self.warn_flags)
        d["f0_lower_hz"], d["f0_upper_hz"] = self.f0_lower_hz, self.f0_upper_hz
        return d


@dataclass(frozen=True)
class Verdict:
    status: str  # "pass", "fail" (against the spec) or "error" (no result)
    reasons: tuple[str, ...] = ()
    warnings: tuple[str, ...] = ()


@dataclass(frozen=True)
class Outlier:
    id: str
    index: int
    quantity: str  # "f0" or "q"
    value: float
    modified_z: float


@dataclass(frozen=True)
class BatchStats:
    """Counts and spread of a batch (f0 in Hz, Q dimensionless).

    ``pass_rate`` is passed items over all items (an item without a result
    has not passed). Means, standard deviations (n - 1), Cp/Cpk and the
    control limits are over the items that have a result (pass or fail).
    """

    n_items: int
    n_pass: int
    n_fail: int
    n_error: int
    pass_rate: float
    f0_mean_hz: float | None
    f0_std_hz: float | None
    f0_min_hz: float | None
    f0_max_hz: float | None
    q_mean: float | None
    q_std: float | None
    q_min: float | None
    q_max: float | None
    cp: float | None
    cpk: float | None
    control_centre_hz: float | None
    control_lcl_hz: float | None
    control_ucl_hz: float | None
    control_sigma_hz: float | None
    outliers: tuple[Outlier, ...] = ()

    @property
    def n_analyzed(self) -> int:
        return self.n_pass + self.n_fail

    def to_dict(self) -> dict[str, Any]:
        d = asdict(self)
        d["outliers"] = [asdict(o) for o in self.outliers]
        d["n_analyzed"] = self.n_analyzed
        return d


@dataclass(frozen=True)
class ItemOutcome:
    """One item of a finished batch, as the reports show it."""

    index: int
    row: int
    id: str
    status: str
    reasons: tuple[str, ...]
    warnings: tuple[str, ...]
    recording: str
    note: str
    document: str  # path relative to the output directory
    plot: str | None  # path relative to the output directory, or None
    f0_hz: float | None = None
    f0_stderr_hz: float | None = None
    q: float | None = None
    q_stderr: float | None = None
    predicted_f0_hz: float | None = None
    mismatch: float | None = None
    predicted_q: float | None = None
    predicted_q_range: tuple[float, float] | None = None
    method: str | None = None
    flags: tuple[str, ...] = ()
    outlier: tuple[str, ...] = ()

    def to_dict(self) -> dict[str, Any]:
        d = asdict(self)
        for k in ("reasons", "warnings", "flags", "outlier"):
            d[k] = list(d[k])
        if d.get("predicted_q_range") is not None:
            d["predicted_q_range"] = list(d["predicted_q_range"])
        return d


@dataclass(frozen=True)
class BatchSummary:
    """A finished (or resumed) batch: spec, items in manifest order, statistics."""

    spec: Spec
    manifest: str
    items: tuple[ItemOutcome, ...]
    stats: BatchStats
    run: dict[str, Any] = field(default_factory=dict)

    @property
    def all_passed(self) -> bool:
        return all(i.status == "pass" for i in self.items)

    def to_dict(self) -> dict[str, Any]:
        """The batch summary document (``characterize.batch/1``, docs/batch.md)."""
        return {"schema": BATCH_SCHEMA, "tool_version": __version__, "manifest": self.manifest,
                "spec": self.spec.to_dict(), "stats": self.stats.to_dict(),
                "items": [i.to_dict() for i in self.items], "run": dict(self.run)}


def timestamp_now() -> str:
    """The local time now, ISO 8601 to the second with its UTC offset (reports, run records)."""
    return _dt.datetime.now(_dt.timezone.utc).astimezone().isoformat(sep=" ", timespec="seconds")
