"""Batch manifests (CSV: one row per item, paths resolved against the
manifest's folder) and the items' file names."""

from __future__ import annotations

import csv
import hashlib
import io
import os
import re
from dataclasses import dataclass
from pathlib import Path

from ..batchdata import Spec
from ..errors import InputError
from ..fileio import read_text
from .spec import _channel, _nearest

#: Manifest columns; ``id`` and ``recording`` are required.
MANIFEST_COLUMNS = ("id", "recording", "object", "inside", "outside", "sweep", "note")


REQUIRED_COLUMNS = ("id", "recording")


_SAFE_ID = re.compile(r"^[A-Za-z0-9][A-Za-z0-9._-]{0,79}$")


_WINDOWS_RESERVED = {"CON", "PRN", "AUX", "NUL", *(f"COM{i}" for i in range(1, 10)),
                     *(f"LPT{i}" for i in range(1, 10))}


@dataclass(frozen=True)
class ManifestItem:
    """One row of the manifest, paths resolved against the manifest's folder."""

    index: int  # 1-based position in the manifest (the control chart's x)
    row: int  # spreadsheet row (the header is row 1)
    id: str
    recording: str  # as written in the manifest
    recording_path: str
    object_path: str | None
    sweep_path: str | None
    inside: int
    outside: int
    note: str = ""

    @property
    def file_stem(self) -> str:
        return item_file_stem(self.id)


@dataclass(frozen=True)
class Manifest:
    path: str
    columns: tuple[str, ...]
    items: tuple[ManifestItem, ...]


def item_file_stem(item_id: str) -> str:
    """File name (without suffix) of an item under DIR/items/: the id itself
    when it is a plain name, else a cleaned-up prefix and a hash of the id."""
    if _SAFE_ID.match(item_id) and item_id.split(".")[0].upper() not in _WINDOWS_RESERVED:
        return item_id
    clean = re.sub(r"[^A-Za-z0-9._-]+", "_", item_id).strip("._-")[:40] or "item"
    return f"{clean}-{hashlib.sha256(item_id.encode('utf-8')).hexdigest()[:10]}"


def _delimiter(header_line: str) -> str:
    counts = {d: header_line.count(d) for d in (",", ";", "\t")}
    best = max(counts, key=lambda d: counts[d])
    return best if counts[best] else ","


def read_manifest(path: str | os.PathLike[str], spec: Spec) -> Manifest:
    """Read a manifest (CSV, header row first; comma, semicolon or tab).

    Columns: ``id``, ``recording`` (required), ``object``, ``inside``,
    ``outside``, ``sweep``, ``note`` (optional; empty cells take the spec's
    ``[defaults]``). Paths are relative to the manifest's folder. Files are
    not opened here: a missing recording becomes a failed item, not an error.

    Raises :class:`InputError` (file, row and column named) for an empty
    manifest, an unknown or duplicated column, a missing id or recording,
    a bad channel number, or duplicate ids.
    """
    p = Path(path)
    source = str(p)
    text = read_text(p, "a manifest (CSV, saved as UTF-8)")
    if not text.strip():
        raise InputError(source, None, "empty manifest: expected a header row "
                         f"({', '.join(MANIFEST_COLUMNS)}) and one row per item")
    first = text.lstrip("\r\n").splitlines()[0]
    reader = csv.reader(io.StringIO(text, newline=""), delimiter=_delimiter(first))
    header: list[str] | None = None
    base = p.parent
    items: list[ManifestItem] = []
    seen: dict[str, int] = {}
    stems: dict[str, tuple[str, int]] = {}
    try:
        for cells in reader:
            row = reader.line_num
            if not any(c.strip() for c in cells):
                continue
            if header is None:
                header = [c.strip().lower() for c in cells]
                for i, col in enumerate(header):
                    if not col:
                        raise InputError(source, f"row {row}, column {i + 1}",
                                         "empty column name in the header")
                    if col not in MANIFEST_COLUMNS:
                        raise InputError(source, f"row {row}, column '{cells[i].strip()}'",
                                         f"unknown column; {_nearest(col, MANIFEST_COLUMNS)}"
                                         f"(valid: {', '.join(MANIFEST_COLUMNS)})")
                    if header.count(col) > 1:
                        raise InputError(source, f"row {row}, column '{col}'",
                                         "appears more than once in the header")
                for col in REQUIRED_COLUMNS:
                    if col not in header:
                        raise InputError(source, f"row {row}", f"missing required column "
                                         f"'{col}' (header: {', '.join(header)})")
                continue
            if len(cells) > len(header):
                raise InputError(source, f"row {row}", f"{len(cells)} cells but the header has "
                                 f"{len(header)} columns (a stray delimiter or an unquoted "
                                 "comma in a note?)")
            rec = dict(zip(header, (c.strip() for c in cells), strict=False))  # short rows: empty
            items.append(_item(rec, row, len(items) + 1, source, base, spec, seen, stems))
    except csv.Error as exc:
        raise InputError(source, f"row {reader.line_num}", f"not valid CSV ({exc})") from None
    if header is None:
        raise InputError(source, None, "empty manifest: no header row")
    if not items:
        raise InputError(source, None, "no items: the manifest has a header but no rows")
    return Manifest(source, tuple(header), tuple(items))


def _item(rec: dict[str, str], row: int, index: int, source: str, base: Path, spec: Spec,
          seen: dict[str, int], stems: dict[str, tuple[str, int]]) -> ManifestItem:
    item_id = rec.get("id", "")
    if not item_id:
        raise InputError(source, f"row {row}, column 'id'", "empty; every item needs an id")
    if any(ord(ch) < 32 for ch in item_id) or len(item_id) > 200:
        raise InputError(source, f"row {row}, column 'id'",
                         "must be one line of at most 200 characters")
    if item_id in seen:
        raise InputError(source, f"row {row}, column 'id'",
                         f"duplicate id {item_id!r} (also on row {seen[item_id]})")
    seen[item_id] = row
    stem = item_file_stem(item_id).casefold()
    if stem in stems:
        other, other_row = stems[stem]
        raise InputError(source, f"row {row}, column 'id'",
                         f"{item_id!r} and {other!r} (row {other_row}) differ only in case: "
                         "their result files would collide")
    stems[stem] = (item_id, row)
    recording = rec.get("recording", "")
    if not recording:
        raise InputError(source, f"row {row}, column 'recording'", "empty; give the audio file")

    def resolve(value: str | None) -> str:
        assert value is not None
        q = Path(value)
        return str(q if q.is_absolute() else base / q)

    obj = rec.get("object") or None
    sweep = rec.get("sweep") or None
    inside = (_channel(rec["inside"], source, f"row {row}, column 'inside'")
              if rec.get("inside") else spec.default_inside)
    outside = (_channel(rec["outside"], source, f"row {row}, column 'outside'")
               if rec.get("outside") else spec.default_outside)
    if inside == outside:
        raise InputError(source, f"row {row}, columns 'inside'/'outside'",
                         f"both are channel {inside}")
    return ManifestItem(
        index=index, row=row, id=item_id, recording=recording,
        recording_path=resolve(recording),
        object_path=resolve(obj) if obj else spec.default_object,
        sweep_path=resolve(sweep) if sweep else spec.default_sweep,
        inside=inside, outside=outside, note=rec.get("note", ""))
