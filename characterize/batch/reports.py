"""The batch's reports: summary.json, summary.csv, report.html, report.pdf."""

from __future__ import annotations

import os
from collections.abc import Sequence
from pathlib import Path

from ..batchdata import BatchSummary

#: Report files written into the output directory.
REPORT_FILES = ("summary.json", "summary.csv", "report.html", "report.pdf")


def report_paths(out_dir: str | os.PathLike[str]) -> dict[str, Path]:
    out = Path(out_dir)
    return {name: out / name for name in REPORT_FILES}


def write_reports(summary: BatchSummary, out_dir: str | os.PathLike[str], *,
                  formats: Sequence[str] = ("json", "csv", "html", "pdf")) -> list[Path]:
    """Write summary.json, summary.csv, report.html and report.pdf into ``out_dir``.

    Reports are derived from the item documents, so they are always rewritten.
    """
    from ..report.document import write_document

    out = Path(out_dir)
    paths = report_paths(out)
    written: list[Path] = []
    if "json" in formats:
        written.append(write_document(paths["summary.json"], summary.to_dict()))
    if "csv" in formats:
        from ..report.csv_ import write_summary_csv

        written.append(write_summary_csv(summary, paths["summary.csv"]))
    if "html" in formats:
        from ..report.html import write_batch_html

        written.append(write_batch_html(summary, out, paths["report.html"]))
    if "pdf" in formats:
        from ..report.pdf import write_batch_pdf

        written.append(write_batch_pdf(summary, out, paths["report.pdf"]))
    return written
