"""Several fitted results side by side: before and after a cut, object against object.

:func:`compare` reads result documents (``fit --out DIR`` writes DIR/result.json)
and, beside each, the measured response ``fit --out`` writes (DIR/transfer.csv:
H with its per-bin noise, docs/result-schema.md). The result document holds the
fitted parameters but not the measured points (they would make it hundreds of
times larger); a result without a transfer.csv beside it is drawn from its fit
alone, and the comparison says so. The results may come from different sample
rates, methods (sweep, H1, a CSV from an analyzer) and fit bands: each response
is drawn on its own frequency points.

Differences are taken against the first result (the reference) with their
combined standard errors, sqrt(s_a^2 + s_b^2) (independent measurements). As
f0 scales with the speed of sound (Helmholtz 1863; Rayleigh, *The Theory of
Sound*, 1896, §303), the f0 difference is also given with the other result
brought to the reference's speed of sound, so that a change of room temperature
between two takes does not read as a change of the object.

    from characterize.compare import compare
    c = compare(["before/", "after/result.json"], out_dir="cut-1")
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from .errors import InputError

COMPARISON_SCHEMA = "characterize.comparison/1"
#: Files compare --out writes.
OUTPUT_FILES = ("comparison.json", "comparison.png", "report.html", "report.pdf")


@dataclass(frozen=True)
class Compared:
    """One result in a comparison: its document, where it came from and, when
    found beside it, its measured response (a TransferFunction)."""

    label: str
    path: str
    doc: dict[str, Any]
    transfer: Any | None = None
    transfer_path: str | None = None

    @property
    def fit(self) -> dict[str, Any]:
        return self.doc["fit"]

    @property
    def speed_of_sound_m_s(self) -> float | None:
        c = (self.doc.get("air") or {}).get("speed_of_sound_m_s")
        return None if c is None else float(c)


@dataclass(frozen=True)
class Comparison:
    """Results side by side, with the differences against the first."""

    items: tuple[Compared, ...]
    rows: tuple[dict[str, Any], ...] = field(default=())

    def to_dict(self) -> dict[str, Any]:
        from ._version import __version__

        return {"schema": COMPARISON_SCHEMA, "tool_version": __version__,
                "reference": self.items[0].label,
                "results": [dict(r) for r in self.rows]}


def _finite(x: Any) -> bool:
    try:
        return x is not None and math.isfinite(float(x))
    except (TypeError, ValueError):
        return False


def _diff(a: float, sa: Any, b: float, sb: Any) -> tuple[float, float | None]:
    d = b - a
    if _finite(sa) and _finite(sb):
        return d, math.hypot(float(sa), float(sb))
    return d, None


def read_compared(path: str | Path, label: str | None = None) -> Compared:
    """A result document (a file, or a folder holding result.json) and the
    transfer.csv beside it when there is one."""
    from ._version import SCHEMA
    from .fileio import read_text

    p = Path(path)
    if p.is_dir():
        p = p / "result.json"
    text = read_text(p, "a result document (JSON)", bom=False)
    try:
        doc = json.loads(text)
    except json.JSONDecodeError as exc:
        raise InputError(str(p), None, f"not valid JSON (line {exc.lineno}): expected a "
                         "result document from 'characterize fit --out'") from None
    if not isinstance(doc, dict) or doc.get("schema") != SCHEMA:
        got = doc.get("schema") if isinstance(doc, dict) else type(doc).__name__
        raise InputError(str(p), "schema", f"expected {SCHEMA!r} (a result from "
                         f"'characterize fit'), got {got!r}")
    for key in ("fit", "input", "air"):
        if not isinstance(doc.get(key), dict):
            raise InputError(str(p), key, "missing from the result document")
    for key in ("f0_hz", "q"):
        if not _finite(doc["fit"].get(key)):
            raise InputError(str(p), f"fit.{key}", "missing or not a number")
    tf = None
    tf_path = p.with_name("transfer.csv")
    if tf_path.is_file():
        from .transfer_csv import read_transfer_csv

        tf = read_transfer_csv(tf_path)
    if label is None:
        name = (doc.get("object") or {}).get("name")
        label = p.parent.name if p.parent.name else (name or p.stem)
    return Compared(label=label, path=str(p), doc=doc, transfer=tf,
                    transfer_path=str(tf_path) if tf is not None else None)


def _unique_labels(items: list[Compared]) -> list[Compared]:
    from dataclasses import replace

    seen: dict[str, int] = {}
    out = []
    for it in items:
        n = seen.get(it.label, 0)
        seen[it.label] = n + 1
        out.append(it if n == 0 else replace(it, label=f"{it.label} ({n + 1})"))
    return out


def comparison_rows(items: list[Compared] | tuple[Compared, ...]) -> list[dict[str, Any]]:
    """One row per result: f0, Q, the predictions, and the differences against
    the first result (with combined standard errors)."""
    ref = items[0]
    rf = ref.fit
    rows = []
    for it in items:
        f = it.fit
        pred = it.doc.get("prediction") or {}
        inp = it.doc["input"]
        row: dict[str, Any] = {
            "label": it.label, "path": it.path, "object": (it.doc.get("object") or {}).get("name"),
            "method": inp.get("method"), "sample_rate_hz": inp.get("sample_rate_hz"),
            "band_hz": f.get("band_hz"), "temperature_c": it.doc["air"].get("temperature_c"),
            "speed_of_sound_m_s": it.speed_of_sound_m_s,
            "f0_hz": f["f0_hz"], "f0_stderr_hz": f.get("f0_stderr_hz"),
            "q": f["q"], "q_stderr": f.get("q_stderr"),
            "predicted_f0_hz": pred.get("f0_hz"), "predicted_q": pred.get("q_predicted"),
            "predicted_q_range": pred.get("q_predicted_range"),
            "f0_vs_predicted": (f["f0_hz"] / pred["f0_hz"] - 1
                                if _finite(pred.get("f0_hz")) else None),
            "transfer": it.transfer_path,
        }
        d, s = _diff(rf["f0_hz"], rf.get("f0_stderr_hz"), f["f0_hz"], f.get("f0_stderr_hz"))
        row["delta_f0_hz"], row["delta_f0_stderr_hz"] = d, s
        c_ref, c = ref.speed_of_sound_m_s, it.speed_of_sound_m_s
        if c_ref and c:
            k = c_ref / c
            sb = f.get("f0_stderr_hz")
            d, s = _diff(rf["f0_hz"], rf.get("f0_stderr_hz"), f["f0_hz"] * k,
                         None if not _finite(sb) else float(sb) * k)  # type: ignore[arg-type]
            row["delta_f0_same_air_hz"], row["delta_f0_same_air_stderr_hz"] = d, s
        else:
            row["delta_f0_same_air_hz"] = row["delta_f0_same_air_stderr_hz"] = None
        d, s = _diff(rf["q"], rf.get("q_stderr"), f["q"], f.get("q_stderr"))
        row["delta_q"], row["delta_q_stderr"] = d, s
        rows.append(row)
    return rows


def compare(paths: list[str | Path] | tuple[str | Path, ...], *, out_dir: str | Path | None = None,
            labels: list[str] | None = None, force: bool = False) -> Comparison:
    """Compare fitted results (result.json files or ``fit --out`` folders).

    With ``out_dir``, writes comparison.json (the table), comparison.png (the
    measured responses, magnitude and phase with the fits, overlaid), report.html
    and report.pdf (the table and the figure on one page). Needs two results or
    more; existing outputs are kept unless ``force``.
    """
    if len(paths) < 2:
        raise InputError("compare", None, f"needs two results or more, got {len(paths)}")
    if labels is not None and len(labels) != len(paths):
        raise InputError("--label", None, f"{len(labels)} labels for {len(paths)} results")
    targets = []
    if out_dir is not None:
        from .fileio import out_folder

        targets = out_folder(out_dir, list(OUTPUT_FILES), force=force)
        inputs = {Path(p).resolve() for p in paths} | {
            (Path(p) / "result.json").resolve() for p in paths}
        for t in targets:
            if t.resolve() in inputs:
                raise InputError(str(t), None, "is one of the inputs; choose another --out")
    items = [read_compared(p, None if labels is None else labels[i])
             for i, p in enumerate(paths)]
    items = _unique_labels(items)
    comp = Comparison(tuple(items), tuple(comparison_rows(items)))
    if targets:
        from .report.compare_report import write_comparison

        write_comparison(comp, *targets)
    return comp
