"""An item's documents: what its result is made from (compared on resume),
the failure document of an item without a result, and reading a finished one."""

from __future__ import annotations

import json
import os
from pathlib import Path
from typing import Any

from .._version import SCHEMA, __version__
from ..batchdata import FAILURE_SCHEMA, Spec
from .manifest import ManifestItem


def _settings(item: ManifestItem, spec: Spec) -> dict[str, Any]:
    """What an item's result is made from (compared on resume)."""
    from ..checks import F0_TOLERANCE

    return {"id": item.id, "recording": item.recording_path, "object": item.object_path,
            "sweep": item.sweep_path, "inside": item.inside, "outside": item.outside,
            "tolerance": spec.max_mismatch if spec.max_mismatch is not None else F0_TOLERANCE}


def _one_line(text: str) -> str:
    return " ".join(str(text).split()) or "(no message)"


def _failure(settings: dict[str, Any], kind: str, message: str) -> dict[str, Any]:
    return {"schema": FAILURE_SCHEMA, "tool_version": __version__,
            "batch_item": dict(settings, plot=None),
            "error": {"kind": kind, "message": _one_line(message)}}


def _load_valid(item: ManifestItem, settings: dict[str, Any], items_dir: Path
                ) -> dict[str, Any] | None:
    """An item's finished result document, when it exists, parses, carries this
    schema and was made from the same inputs (and its plot is there)."""
    p = items_dir / f"{item.file_stem}.json"
    try:
        doc = json.loads(p.read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None
    if not isinstance(doc, dict) or doc.get("schema") != SCHEMA:
        return None
    made = doc.get("batch_item")
    if not isinstance(made, dict):
        return None
    for k, v in settings.items():
        old = made.get(k)
        if k in ("recording", "object", "sweep") and old is not None and v is not None:
            old, v = os.path.abspath(old), os.path.abspath(v)  # same file, other cwd
        if old != v:
            return None
    if not isinstance(doc.get("fit"), dict):
        return None
    plot = made.get("plot")
    if plot is not None and not (items_dir / str(plot)).is_file():
        return None
    return doc
