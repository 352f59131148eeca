"""Tuning manifests (CSV: recordings or result documents with the varied value)
and measuring their rows (the main job on recordings, result documents read)."""

from __future__ import annotations

import csv
import difflib
import io
import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path

from ..errors import FitError, InputError
from ..fileio import read_text
from ..objectfile import load_object
from ..physics.geometry import ResonatorObject
from ..units import parse_quantity, parse_temperature_c
from .document import (
    ResultSummary,
    load_result,
    result_from_dict,
)

#: Columns a manifest may have besides the value columns.
BASE_COLUMNS = ("id", "recording", "result", "object", "sweep", "inside", "outside",
                "temperature", "note")


@dataclass(frozen=True)
class ManifestRow:
    """One row of a manifest (paths resolved against the manifest's folder).

    Attributes
    ----------
    line : int
        Line number in the file (for messages).
    id : str
    recording, result, object, sweep : pathlib.Path or None
    inside, outside : int
        1-based channels.
    temperature_c : float or None
        Air temperature override, degC.
    values : dict of str to float
        Value columns (SI), e.g. ``neck_length`` in m, ``spl_db`` in dB.
    note : str
    """

    line: int
    id: str
    recording: Path | None
    result: Path | None
    object: Path | None
    sweep: Path | None
    inside: int
    outside: int
    temperature_c: float | None
    values: dict[str, float]
    note: str = ""


def _read_csv(path: Path) -> tuple[list[str], list[tuple[int, dict[str, str]]]]:
    source = str(path)
    text = read_text(path, "a CSV file")
    lines = [(i + 1, ln) for i, ln in enumerate(text.splitlines())
             if ln.strip() and not ln.lstrip().startswith("#")]
    if not lines:
        raise InputError(source, None, "empty: expected a header row and at least one item")
    reader = csv.reader(io.StringIO("\n".join(ln for _, ln in lines)))
    try:
        table = list(reader)
    except csv.Error as exc:
        raise InputError(source, None, f"not valid CSV: {exc}") from None
    header = [h.strip() for h in table[0]]
    if len(set(header)) != len(header):
        dup = next(h for h in header if header.count(h) > 1)
        raise InputError(source, f"column {dup!r}", "appears twice in the header")
    rows = []
    for (lineno, _), cells in zip(lines[1:], table[1:], strict=False):
        if len(cells) > len(header):
            raise InputError(source, f"line {lineno}", f"{len(cells)} cells for "
                             f"{len(header)} columns")
        cells = cells + [""] * (len(header) - len(cells))
        rows.append((lineno, {h: c.strip() for h, c in zip(header, cells, strict=False)}))
    return header, rows


def _check_columns(header: Sequence[str], allowed: Sequence[str], required: Sequence[str],
                   source: str) -> None:
    for h in header:
        if h not in allowed:
            close = difflib.get_close_matches(h, list(allowed), n=1, cutoff=0.5)
            hint = f"did you mean {close[0]!r}? " if close else ""
            raise InputError(source, f"column {h!r}", f"unknown column; {hint}allowed: "
                             f"{', '.join(allowed)}")
    missing = [r for r in required if r not in header]
    if missing:
        raise InputError(source, None, f"missing column(s) {', '.join(missing)} (header has "
                         f"{', '.join(header) or 'nothing'})")


def _channel(text: str, default: int, source: str, field: str) -> int:
    if not text:
        return default
    try:
        n = int(text)
    except ValueError:
        raise InputError(source, field, f"expected a channel number from 1, got {text!r}") \
            from None
    if n < 1:
        raise InputError(source, field, f"channels are numbered from 1, got {n}")
    return n


def _value(text: str, kind: str, source: str, field: str) -> float:
    if not text:
        raise InputError(source, field, "empty; every row needs a value")
    if kind == "db":
        try:
            v = float(text)
        except ValueError:
            raise InputError(source, field, f"expected a level in dB (a number), got {text!r}") \
                from None
        if not math.isfinite(v):
            raise InputError(source, field, f"expected a finite level, got {text!r}")
        return v
    if kind == "volume":
        v = parse_quantity(text, "volume", source, field, positive=False)
        if v < 0:
            raise InputError(source, field, f"{text!r} must not be negative")
        return v
    return parse_quantity(text, kind, source, field, positive=True)


def read_tuning_manifest(path: str | Path, value_columns: Mapping[str, str],
                  required_values: Sequence[str] = ()) -> list[ManifestRow]:
    """Read a manifest CSV of recordings or result documents.

    Columns: ``id`` (optional; default the file's stem), exactly one of
    ``recording`` (audio file) or ``result`` (result document) per row,
    optional ``object``, ``sweep``, ``inside``, ``outside`` (channels from
    1; default 1 and 2), ``temperature`` (e.g. "21.5 degC", overrides the
    air), ``note``, and the value columns. Paths are relative to the
    manifest's folder. Lines starting with ``#`` are comments.

    Parameters
    ----------
    path : path
        The CSV file.
    value_columns : mapping of str to str
        Column -> kind (``"length"``, ``"volume"`` with unit strings such as
        "28 mm" or "50 mL", or ``"db"`` for a plain number in dB).
    required_values : sequence of str
        Value columns that must be present.

    Raises
    ------
    InputError
        Unknown or missing columns, bad cells, missing files, duplicate ids,
        rows with neither or both of recording and result, no rows.
    """
    p = Path(path)
    source = str(p)
    header, rows = _read_csv(p)
    allowed = list(BASE_COLUMNS) + list(value_columns)
    _check_columns(header, allowed, required_values, source)
    if "recording" not in header and "result" not in header:
        raise InputError(source, None, "missing column recording or result (each row names a "
                         "recording or a result document)")
    if not rows:
        raise InputError(source, None, "no items: expected one row per recording or result")
    base = p.parent
    out: list[ManifestRow] = []
    ids: dict[str, int] = {}

    def path_of(cell: str, field: str, lineno: int) -> Path | None:
        if not cell:
            return None
        q = Path(cell)
        q = q if q.is_absolute() else base / q
        if not q.exists():
            raise InputError(source, f"line {lineno}, {field}", f"{cell!r} does not exist "
                             f"(paths are relative to {base})")
        return q

    for lineno, r in rows:
        rec = path_of(r.get("recording", ""), "recording", lineno)
        res = path_of(r.get("result", ""), "result", lineno)
        if (rec is None) == (res is None):
            raise InputError(source, f"line {lineno}", "give exactly one of recording or result")
        rid = r.get("id", "") or (rec or res).stem  # type: ignore[union-attr]
        if rid in ids:
            raise InputError(source, f"line {lineno}, id", f"duplicate id {rid!r} (also on line "
                             f"{ids[rid]})")
        ids[rid] = lineno
        temp = r.get("temperature", "")
        values = {col: _value(r[col], kind, source, f"line {lineno}, {col}")
                  for col, kind in value_columns.items() if col in r and
                  (r[col] or col in required_values)}
        out.append(ManifestRow(
            line=lineno, id=rid, recording=rec, result=res,
            object=path_of(r.get("object", ""), "object", lineno),
            sweep=path_of(r.get("sweep", ""), "sweep", lineno),
            inside=_channel(r.get("inside", ""), 1, source, f"line {lineno}, inside"),
            outside=_channel(r.get("outside", ""), 2, source, f"line {lineno}, outside"),
            temperature_c=parse_temperature_c(temp, source, f"line {lineno}, temperature")
            if temp else None,
            values=values, note=r.get("note", "")))
    return out


@dataclass(frozen=True)
class Measured:
    """A manifest row and what was measured for it."""

    row: ManifestRow
    result: ResultSummary


@dataclass(frozen=True)
class Failure:
    """A manifest row that could not be measured, with the reason (one line)."""

    id: str
    reason: str

    def to_dict(self) -> dict[str, str]:
        return {"id": self.id, "reason": self.reason}


def measure_rows(rows: Sequence[ManifestRow]) -> tuple[list[Measured], list[Failure]]:
    """Read each row's result document, or run the main job on its recording.

    Result documents are read first, so a wrong schema or a malformed
    document stops everything with an :class:`InputError` before any
    recording is analysed. A recording that cannot be read or fitted becomes
    a :class:`Failure` and the others go on (a batch survives a bad item).
    Object files named in the manifest are read once each.
    """
    objects: dict[Path, ResonatorObject] = {}

    def obj_for(row: ManifestRow) -> ResonatorObject | None:
        if row.object is None:
            return None
        if row.object not in objects:
            objects[row.object] = load_object(row.object)
        return objects[row.object]

    docs: dict[int, ResultSummary] = {}
    for i, row in enumerate(rows):
        if row.result is not None:
            s = load_result(row.result)
            o = obj_for(row)
            if o is not None:
                s = s.with_object(o)
            if row.temperature_c is not None:
                s = s.with_temperature(row.temperature_c)
            docs[i] = s
        else:
            obj_for(row)
    from ..pipeline import analyze

    measured: list[Measured] = []
    failures: list[Failure] = []
    for i, row in enumerate(rows):
        if i in docs:
            measured.append(Measured(row, docs[i]))
            continue
        try:
            res = analyze(row.recording, object_path=row.object,  # type: ignore[arg-type]
                          sweep_path=row.sweep, inside=row.inside, outside=row.outside,
                          temperature_c=row.temperature_c)
            doc = res.to_dict()
            measured.append(Measured(row, result_from_dict(doc, str(row.recording))))
        except (InputError, FitError) as exc:
            failures.append(Failure(row.id, str(exc)))
    return measured, failures
