"""Batches: a manifest of recordings + a spec of tolerances -> per-item results,
pass/fail, batch statistics, reports.

    manifest.csv + spec.toml --read_manifest/read_spec--> items
        --run_batch (worker processes, analyze per item)--> DIR/items/ID.json
        --summarize--> BatchSummary --write_reports--> summary.csv/json, report.html/pdf

Each item's result document (``characterize.pipeline.analyze(...).to_dict()``
plus a ``batch_item`` key recording what it was made from) is written
atomically as soon as the item is done, so a batch that is killed loses
nothing: :func:`run_batch` with ``resume=True`` skips every item whose
document exists and was made from the same inputs. An item that cannot be
analysed (missing or broken file, no fit) gets a failure document with its
reason and the batch goes on; failure documents are retried on resume.

Python entry point, everything ``characterize batch`` does::

    from characterize.batch import run
    summary = run("manifest.csv", "spec.toml", "out/")
    summary.stats.pass_rate, [i.status for i in summary.items]

Modules: :mod:`.spec` (read_spec), :mod:`.manifest` (read_manifest),
:mod:`.runner` (run_batch, run: worker processes, resumable item documents),
:mod:`.items` (an item's documents), :mod:`.summary` (verdicts, outcomes,
batch statistics), :mod:`.reports` (write_reports). The data types (Spec,
BatchSummary, ...) are in :mod:`characterize.batchdata`, the statistics'
formulas in :mod:`characterize.stats`.

Files are described in docs/batch.md.
"""

from ..batchdata import (
    BATCH_SCHEMA,
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
    modified_z_scores,
    process_capability,
    sample_std,
)
from .manifest import (
    MANIFEST_COLUMNS,
    REQUIRED_COLUMNS,
    Manifest,
    ManifestItem,
    item_file_stem,
    read_manifest,
)
from .reports import (
    REPORT_FILES,
    report_paths,
    write_reports,
)
from .runner import (
    BatchInterrupted,
    check_outputs,
    default_workers,
    run,
    run_batch,
)
from .spec import (
    known_flag_codes,
    parse_tolerance,
    read_spec,
)
from .summary import (
    batch_stats,
    judge,
    mismatch,
    outcome,
    summarize,
)

__all__ = [
    "BATCH_SCHEMA",
    "BatchInterrupted",
    "BatchStats",
    "BatchSummary",
    "FAILURE_SCHEMA",
    "ItemOutcome",
    "MANIFEST_COLUMNS",
    "Manifest",
    "ManifestItem",
    "OUTLIER_MODIFIED_Z",
    "Outlier",
    "REPORT_FILES",
    "REQUIRED_COLUMNS",
    "Spec",
    "Verdict",
    "batch_stats",
    "check_outputs",
    "default_workers",
    "individuals_limits",
    "item_file_stem",
    "judge",
    "known_flag_codes",
    "mismatch",
    "modified_z_scores",
    "outcome",
    "parse_tolerance",
    "process_capability",
    "read_manifest",
    "read_spec",
    "report_paths",
    "run",
    "run_batch",
    "sample_std",
    "summarize",
    "write_reports",
]
