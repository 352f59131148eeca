"""summary.csv: one row per item, stable column names with units in them.

The columns (and their order) are :data:`SUMMARY_COLUMNS`; new columns may be
appended later, existing ones keep their name and meaning. Numbers are written
in full precision with a dot; empty cells mean "no value". Text cells that a
spreadsheet would read as a formula (starting with ``= + - @``, tab or CR) get
a leading apostrophe (the usual guard against CSV formula injection).
"""

from __future__ import annotations

import csv
import io
import math
from pathlib import Path
from typing import TYPE_CHECKING, Any

from ..fileio import atomic_write_text

if TYPE_CHECKING:
    from ..batchdata import BatchSummary

#: (column, meaning). The unit is in the name: _hz in Hz, _percent in percent;
#: q is dimensionless.
SUMMARY_COLUMNS: tuple[tuple[str, str], ...] = (
    ("index", "position in the manifest, from 1"),
    ("id", "item id"),
    ("status", "pass, fail (against the spec) or error (no result)"),
    ("f0_hz", "fitted resonance frequency (Hz)"),
    ("f0_stderr_hz", "its standard error (Hz)"),
    ("f0_deviation_hz", "f0 minus the target (Hz)"),
    ("f0_deviation_percent", "f0 minus the target, in percent of the target"),
    ("q", "fitted quality factor (dimensionless)"),
    ("q_stderr", "its standard error"),
    ("predicted_f0_hz", "f0 predicted from the geometry (Hz)"),
    ("mismatch_percent", "measured over predicted f0, minus 1, in percent"),
    ("method", "transfer-function method"),
    ("outlier", "quantities for which the item is an outlier (f0, q)"),
    ("reasons", "why the item failed (semicolon-separated)"),
    ("warnings", "warnings (semicolon-separated)"),
    ("flags", "flag codes raised by the checks"),
    ("recording", "recording, as written in the manifest"),
    ("note", "the manifest's note"),
    ("document", "the item's result document, relative to the output folder"),
    ("predicted_q", "Q predicted from the geometry"),
    ("predicted_q_low", "low end of the predicted Q range"),
    ("predicted_q_high", "high end of the predicted Q range"),
)

_FORMULA_START = ("=", "+", "-", "@", "\t", "\r")


def _num(v: Any) -> str:
    if v is None or (isinstance(v, float) and not math.isfinite(v)):
        return ""
    return repr(float(v)) if isinstance(v, float) else str(v)


def _text(v: str) -> str:
    return "'" + v if v.startswith(_FORMULA_START) else v


def summary_rows(summary: BatchSummary) -> list[list[str]]:
    """The CSV rows (header first) as strings."""
    target = summary.spec.f0_target_hz
    rows = [[c for c, _ in SUMMARY_COLUMNS]]
    for it in summary.items:
        dev = None if it.f0_hz is None else it.f0_hz - target
        rows.append([
            str(it.index), _text(it.id), it.status, _num(it.f0_hz), _num(it.f0_stderr_hz),
            _num(dev), _num(None if dev is None else 100 * dev / target), _num(it.q),
            _num(it.q_stderr), _num(it.predicted_f0_hz),
            _num(None if it.mismatch is None else 100 * it.mismatch), it.method or "",
            " ".join(it.outlier), _text("; ".join(it.reasons)), _text("; ".join(it.warnings)),
            " ".join(it.flags), _text(it.recording), _text(it.note), it.document,
            _num(it.predicted_q),
            _num(None if it.predicted_q_range is None else it.predicted_q_range[0]),
            _num(None if it.predicted_q_range is None else it.predicted_q_range[1]),
        ])
    return rows


def summary_csv(summary: BatchSummary) -> str:
    buf = io.StringIO(newline="")
    csv.writer(buf, lineterminator="\n").writerows(summary_rows(summary))
    return buf.getvalue()


def write_summary_csv(summary: BatchSummary, path: str | Path) -> Path:
    """Write summary.csv atomically (UTF-8, comma-separated, ``\\n`` line ends)."""
    return atomic_write_text(path, summary_csv(summary))
