"""The result document on disk (JSON), written atomically."""

from __future__ import annotations

import json
import math
from pathlib import Path
from typing import Any

from ..fileio import atomic_write_text


def _clean(value: Any) -> Any:
    """JSON-safe: NaN and infinities become null (JSON has no NaN)."""
    if isinstance(value, float):
        return value if math.isfinite(value) else None
    if isinstance(value, dict):
        return {k: _clean(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_clean(v) for v in value]
    if hasattr(value, "item"):  # numpy scalar
        return _clean(value.item())
    return value


def to_json(doc: dict[str, Any]) -> str:
    return json.dumps(_clean(doc), indent=2, allow_nan=False) + "\n"


def write_document(path: str | Path, doc: dict[str, Any]) -> Path:
    return atomic_write_text(path, to_json(doc))
