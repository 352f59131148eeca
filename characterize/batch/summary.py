"""From item documents to the batch summary: pass/fail against the spec,
each item's outcome, the batch statistics (capability, control limits,
outliers; formulas in :mod:`characterize.stats`)."""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import Any

from ..batchdata import (
    FAILURE_SCHEMA,
    BatchStats,
    BatchSummary,
    ItemOutcome,
    Outlier,
    Spec,
    Verdict,
)
from ..stats import (
    OUTLIER_MODIFIED_Z,
    individuals_limits,
    is_finite_number,
    modified_z_scores,
    process_capability,
    sample_std,
)
from .items import _failure, _settings
from .manifest import Manifest, ManifestItem


def judge(doc: dict[str, Any], spec: Spec) -> Verdict:
    """Pass or fail one result document against the spec (pure)."""
    if doc.get("schema") == FAILURE_SCHEMA:
        return Verdict("error", (doc["error"]["message"],))
    reasons: list[str] = []
    warnings: list[str] = []
    fit = doc.get("fit") or {}
    f0, q = fit.get("f0_hz"), fit.get("q")
    if not isinstance(f0, (int, float)) or not math.isfinite(f0):
        reasons.append("no f0 in the result")
    else:
        dev = f0 - spec.f0_target_hz
        if abs(dev) > spec.f0_tolerance_hz:
            reasons.append(f"f0 {f0:.2f} Hz is {dev:+.2f} Hz ({100 * dev / spec.f0_target_hz:+.2f} "
                           f"%) from the target {spec.f0_target_hz:.2f} Hz "
                           f"(tolerance ±{spec.f0_tolerance_hz:.2f} Hz)")
    if not isinstance(q, (int, float)) or not math.isfinite(q):
        reasons.append("no Q in the result")
    else:
        if spec.q_min is not None and q < spec.q_min:
            reasons.append(f"Q {q:.1f} is below the minimum {spec.q_min:g}")
        if spec.q_max is not None and q > spec.q_max:
            reasons.append(f"Q {q:.1f} is above the maximum {spec.q_max:g}")
    if spec.max_mismatch is not None:
        mis = mismatch(doc)
        if mis is None:
            warnings.append("no prediction (no object file): mismatch not checked")
        elif abs(mis) > spec.max_mismatch:
            reasons.append(f"f0 is {100 * mis:+.2f} % from the predicted "
                           f"{doc['prediction']['f0_hz']:.2f} Hz (allowed "
                           f"±{100 * spec.max_mismatch:g} %)")
    for flag in doc.get("flags", []):
        code, sev = flag.get("code", "?"), flag.get("severity", "info")
        text = f"{code}: {flag.get('message', '')}"
        if code in spec.fail_flags or (code not in spec.warn_flags and sev == "error"):
            reasons.append(text)
        elif code in spec.warn_flags or sev == "warning":
            warnings.append(text)
    return Verdict("fail" if reasons else "pass", tuple(reasons), tuple(warnings))


def mismatch(doc: dict[str, Any]) -> float | None:
    """Measured f0 over predicted f0, minus 1; None without a prediction."""
    pred = doc.get("prediction")
    f0 = (doc.get("fit") or {}).get("f0_hz")
    if (not pred or not is_finite_number(pred.get("f0_hz")) or not is_finite_number(f0)
            or pred["f0_hz"] == 0):
        return None
    return float(f0 / pred["f0_hz"] - 1.0)


def outcome(item: ManifestItem, doc: dict[str, Any], spec: Spec) -> ItemOutcome:
    """An item's row in the reports, from its document and the spec."""
    v = judge(doc, spec)
    made = doc.get("batch_item") or {}
    stem = item.file_stem
    plot = made.get("plot")
    common = dict(index=item.index, row=item.row, id=item.id, status=v.status,
                  reasons=v.reasons, warnings=v.warnings, recording=item.recording,
                  note=item.note, document=f"items/{stem}.json",
                  plot=f"items/{plot}" if plot else None)
    if v.status == "error":
        return ItemOutcome(**common)  # type: ignore[arg-type]
    fit = doc.get("fit") or {}
    pred = doc.get("prediction") or {}
    return ItemOutcome(
        **common,  # type: ignore[arg-type]
        f0_hz=fit.get("f0_hz"), f0_stderr_hz=fit.get("f0_stderr_hz"), q=fit.get("q"),
        q_stderr=fit.get("q_stderr"), predicted_f0_hz=pred.get("f0_hz"),
        predicted_q=pred.get("q_predicted"),
        predicted_q_range=(None if not pred.get("q_predicted_range") else
                           tuple(sorted(pred["q_predicted_range"]))),  # type: ignore[arg-type]
        mismatch=mismatch(doc), method=(doc.get("input") or {}).get("method"),
        flags=tuple(f.get("code", "?") for f in doc.get("flags", [])))


def batch_stats(outcomes: Sequence[ItemOutcome], spec: Spec) -> BatchStats:
    """Counts, spread, capability, control limits and outliers of a batch."""
    n = len(outcomes)
    n_pass = sum(o.status == "pass" for o in outcomes)
    n_err = sum(o.status == "error" for o in outcomes)
    with_f0 = [o for o in outcomes if o.status != "error" and is_finite_number(o.f0_hz)]
    with_q = [o for o in outcomes if o.status != "error" and is_finite_number(o.q)]
    f0 = [float(o.f0_hz) for o in with_f0]  # type: ignore[arg-type]
    q = [float(o.q) for o in with_q]  # type: ignore[arg-type]
    cp, cpk = process_capability(f0, spec.f0_lower_hz, spec.f0_upper_hz)
    lim = individuals_limits(f0)
    outliers: list[Outlier] = []
    for name, group, vals in (("f0", with_f0, f0), ("q", with_q, q)):
        z = modified_z_scores(vals)
        if z is None:
            continue
        for o, v, zi in zip(group, vals, z, strict=True):
            if abs(zi) > OUTLIER_MODIFIED_Z:
                outliers.append(Outlier(o.id, o.index, name, v, zi))
    outliers.sort(key=lambda o: (o.index, o.quantity))
    return BatchStats(
        n_items=n, n_pass=n_pass, n_fail=n - n_pass - n_err, n_error=n_err,
        pass_rate=n_pass / n if n else 0.0,
        f0_mean_hz=sum(f0) / len(f0) if f0 else None, f0_std_hz=sample_std(f0),
        f0_min_hz=min(f0) if f0 else None, f0_max_hz=max(f0) if f0 else None,
        q_mean=sum(q) / len(q) if q else None, q_std=sample_std(q),
        q_min=min(q) if q else None, q_max=max(q) if q else None, cp=cp, cpk=cpk,
        control_centre_hz=lim[0] if lim else None, control_lcl_hz=lim[1] if lim else None,
        control_ucl_hz=lim[2] if lim else None, control_sigma_hz=lim[3] if lim else None,
        outliers=tuple(outliers))



def summarize(manifest: Manifest, spec: Spec, docs: dict[str, dict[str, Any]],
              run: dict[str, Any] | None = None) -> BatchSummary:
    """The batch summary from every item's document (items in manifest order)."""
    outs = []
    for item in manifest.items:
        doc = docs.get(item.id) or _failure(_settings(item, spec), "missing", "no result")
        outs.append(outcome(item, doc, spec))
    stats = batch_stats(outs, spec)
    flagged: dict[int, list[str]] = {}
    for o in stats.outliers:
        flagged.setdefault(o.index, []).append(o.quantity)
    outs = [_with_outlier(o, tuple(flagged.get(o.index, ()))) for o in outs]
    return BatchSummary(spec, manifest.path, tuple(outs), stats, dict(run or {}))


def _with_outlier(o: ItemOutcome, which: tuple[str, ...]) -> ItemOutcome:
    from dataclasses import replace

    return replace(o, outlier=which) if which else o
