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

Files are described in docs/batch.md.
"""

from __future__ import annotations

import csv
import datetime as _dt
import difflib
import hashlib
import io
import json
import math
import os
import re
from collections.abc import Callable, Sequence
from dataclasses import asdict, dataclass, field
from pathlib import Path
from typing import Any

from . import SCHEMA, __version__
from .errors import FitError, InputError
from .fileio import read_text, read_toml

#: Schema of the batch summary (summary.json) and of an item's failure document.
BATCH_SCHEMA = "characterize.batch/1"
FAILURE_SCHEMA = "characterize.batch-failure/1"

#: Manifest columns; ``id`` and ``recording`` are required.
MANIFEST_COLUMNS = ("id", "recording", "object", "inside", "outside", "sweep", "note")
REQUIRED_COLUMNS = ("id", "recording")

#: Modified z-score beyond which a value is an outlier (Iglewicz & Hoaglin 1993).
OUTLIER_MODIFIED_Z = 3.5
#: d2 for moving ranges of two (control-chart constant, common practice).
D2_MOVING_RANGE = 1.128

#: Report files written into the output directory.
REPORT_FILES = ("summary.json", "summary.csv", "report.html", "report.pdf")

_SAFE_ID = re.compile(r"^[A-Za-z0-9][A-Za-z0-9._-]{0,79}$")
_WINDOWS_RESERVED = {"CON", "PRN", "AUX", "NUL", *(f"COM{i}" for i in range(1, 10)),
                     *(f"LPT{i}" for i in range(1, 10))}
_FLAG_CODE = re.compile(r"^[a-z0-9][a-z0-9-]*$")


class BatchInterrupted(RuntimeError):
    """A worker process died (killed, out of memory): the batch stopped early.

    Every item finished before that has its document on disk; rerun with
    ``resume=True`` (``--resume``) to do the rest.
    """


# --------------------------------------------------------------------- spec


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


_SPEC_KEYS: dict[str, tuple[str, ...]] = {
    "": ("name", "f0", "q", "prediction", "flags", "defaults"),
    "f0": ("target", "tolerance"),
    "q": ("min", "max"),
    "prediction": ("max_mismatch",),
    "flags": ("fail", "warn"),
    "defaults": ("object", "sweep", "inside", "outside"),
}


#: Column and key names people write for ours (a spelling match would answer
#: 'file' with 'inside').
SYNONYMS = {"file": "recording", "filename": "recording", "path": "recording",
            "wav": "recording", "flac": "recording", "audio": "recording",
            "recording_path": "recording", "name": "id", "item": "id", "object_file": "object",
            "geometry": "object", "comment": "note", "notes": "note"}


def _nearest(word: str, choices: Sequence[str]) -> str:
    meant = SYNONYMS.get(word.strip().lower())
    if meant in choices:
        return f"did you mean '{meant}'? "
    close = difflib.get_close_matches(word.lower(), list(choices), n=1, cutoff=0.0)
    return f"did you mean '{close[0]}'? " if close else ""


def _check_keys(table: dict[str, Any], where: str, source: str) -> None:
    valid = _SPEC_KEYS[where]
    for key in table:
        if key not in valid:
            name = key if not where else f"{where}.{key}"
            raise InputError(source, name, f"unknown key; {_nearest(key, valid)}"
                             f"(valid: {', '.join(valid)})")


def _table(data: dict[str, Any], key: str, source: str) -> dict[str, Any]:
    t = data.get(key, {})
    if not isinstance(t, dict):
        raise InputError(source, key, f"expected a table [{key}], got {t!r}")
    _check_keys(t, key, source)
    return t


def _number(value: Any, source: str, fld: str, *, positive: bool = True) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise InputError(source, fld, f"expected a number, got {value!r}")
    v = float(value)
    if not math.isfinite(v) or (positive and v <= 0):
        raise InputError(source, fld, f"expected a number greater than zero, got {value!r}")
    return v


def _fraction_text(value: Any, source: str, fld: str) -> float:
    """'6 %' or a fraction 0 < x < 1."""
    if isinstance(value, str) and value.strip().endswith("%"):
        try:
            v = float(value.strip()[:-1]) / 100.0
        except ValueError:
            raise InputError(source, fld, f"expected e.g. '6 %', got {value!r}") from None
    elif isinstance(value, (int, float)) and not isinstance(value, bool):
        v = float(value)
    else:
        raise InputError(source, fld, f"expected a percent such as '6 %' or a fraction, "
                         f"got {value!r}")
    if not (0 < v < 1) or not math.isfinite(v):
        raise InputError(source, fld, f"must be greater than 0 % and less than 100 %, "
                         f"got {value!r}")
    return v


def _channel(value: Any, source: str, fld: str) -> int:
    if isinstance(value, bool):
        raise InputError(source, fld, f"expected a channel number from 1, got {value!r}")
    if isinstance(value, str):
        try:
            value = int(value.strip())
        except ValueError:
            raise InputError(source, fld,
                             f"expected a channel number from 1, got {value!r}") from None
    if not isinstance(value, int) or value < 1:
        raise InputError(source, fld, f"expected a channel number from 1, got {value!r}")
    return value


def known_flag_codes() -> frozenset[str]:
    """Flag codes the checks can raise, read off the package source
    (``Flag("code", ...)``); empty when the source is not available."""
    codes: set[str] = set()
    pat = re.compile(r"""Flag\(\s*["']([a-z0-9][a-z0-9-]*)["']""")
    for p in Path(__file__).resolve().parent.rglob("*.py"):
        try:
            codes.update(pat.findall(p.read_text(encoding="utf-8")))
        except OSError:
            continue
    if codes:
        codes.add("plot-failed")  # raised here, when an item's response plot cannot be drawn
    return frozenset(codes)


def _flag_list(value: Any, source: str, fld: str, known: frozenset[str]) -> tuple[str, ...]:
    if not isinstance(value, list) or not all(isinstance(v, str) for v in value):
        raise InputError(source, fld, f"expected a list of flag codes, got {value!r}")
    for code in value:
        if not _FLAG_CODE.match(code):
            raise InputError(source, fld, f"{code!r} is not a flag code (lower case, hyphens)")
        if known and code not in known:
            raise InputError(source, fld, f"unknown flag code {code!r}; "
                             f"{_nearest(code, sorted(known))}(known: {', '.join(sorted(known))})")
    return tuple(dict.fromkeys(value))


def parse_tolerance(text: Any, target_hz: float, source: str, fld: str) -> tuple[float, str]:
    """An f0 tolerance: absolute ("3 Hz") or relative to the target ("2 %").

    Returns the half-width in Hz and the text as given. Raises
    :class:`InputError` for zero, negative or unit-less values.
    """
    from .units import parse_quantity

    if isinstance(text, str) and text.strip().endswith("%"):
        try:
            pct = float(text.strip()[:-1])
        except ValueError:
            raise InputError(source, fld, f"expected e.g. '2 %' or '3 Hz', got {text!r}") from None
        if not math.isfinite(pct) or pct <= 0:
            raise InputError(source, fld, f"must be greater than zero, got {text!r}")
        if pct >= 100:
            raise InputError(source, fld, f"must be less than 100 %, got {text!r}")
        return target_hz * pct / 100.0, text.strip()
    if not isinstance(text, str):
        raise InputError(source, fld, f"expected a string with a unit such as '2 %' or '3 Hz', "
                         f"got {text!r}")
    try:
        value = parse_quantity(text, "frequency", source, fld, positive=False)
    except InputError:
        raise InputError(source, fld, f"expected '2 %' or '3 Hz', got {text!r}") from None
    if value <= 0:
        raise InputError(source, fld, f"must be greater than zero, got {text!r}")
    if value >= target_hz:
        raise InputError(source, fld, f"{text!r} is as wide as the target itself")
    return value, text.strip()


def read_spec(path: str | os.PathLike[str]) -> Spec:
    """Read a batch spec (TOML); see docs/batch.md for the keys.

    Paths in ``[defaults]`` are relative to the spec file. Raises
    :class:`InputError` naming the file and key for anything missing,
    unknown or out of range.
    """
    from .units import parse_quantity

    p = Path(path)
    source = str(p)
    data = read_toml(p, "a spec file")
    _check_keys(data, "", source)
    name = data.get("name", p.stem)
    if not isinstance(name, str):
        raise InputError(source, "name", f"expected a string, got {name!r}")
    if "f0" not in data:
        raise InputError(source, "f0", "missing table [f0] with target and tolerance")
    f0 = _table(data, "f0", source)
    for key in ("target", "tolerance"):
        if key not in f0:
            raise InputError(source, f"f0.{key}", "missing (e.g. target = \"243 Hz\", "
                             "tolerance = \"2 %\")")
    target = parse_quantity(f0["target"], "frequency", source, "f0.target")
    tol_hz, tol_text = parse_tolerance(f0["tolerance"], target, source, "f0.tolerance")
    q = _table(data, "q", source)
    q_min = _number(q["min"], source, "q.min") if "min" in q else None
    q_max = _number(q["max"], source, "q.max") if "max" in q else None
    if q_min is not None and q_max is not None and q_min >= q_max:
        raise InputError(source, "q", f"min ({q_min:g}) must be less than max ({q_max:g})")
    pred = _table(data, "prediction", source)
    max_mismatch = (_fraction_text(pred["max_mismatch"], source, "prediction.max_mismatch")
                    if "max_mismatch" in pred else None)
    flags = _table(data, "flags", source)
    known = known_flag_codes()
    fail = _flag_list(flags.get("fail", []), source, "flags.fail", known)
    warn = _flag_list(flags.get("warn", []), source, "flags.warn", known)
    both = sorted(set(fail) & set(warn))
    if both:
        raise InputError(source, "flags", f"{', '.join(both)} listed under both fail and warn")
    defaults = _table(data, "defaults", source)
    paths: dict[str, str | None] = {}
    for key in ("object", "sweep"):
        v = defaults.get(key)
        if v is None:
            paths[key] = None
            continue
        if not isinstance(v, str) or not v.strip():
            raise InputError(source, f"defaults.{key}", f"expected a file name, got {v!r}")
        full = (p.parent / v.strip()) if not Path(v.strip()).is_absolute() else Path(v.strip())
        if not full.is_file():
            raise InputError(source, f"defaults.{key}", f"{full} not found")
        paths[key] = str(full)
    inside = _channel(defaults.get("inside", 1), source, "defaults.inside")
    outside = _channel(defaults.get("outside", 2), source, "defaults.outside")
    if inside == outside:
        raise InputError(source, "defaults", f"inside and outside are both channel {inside}")
    return Spec(path=source, name=name, f0_target_hz=target, f0_tolerance_hz=tol_hz,
                f0_tolerance_text=tol_text, q_min=q_min, q_max=q_max, max_mismatch=max_mismatch,
                fail_flags=fail, warn_flags=warn, default_object=paths["object"],
                default_sweep=paths["sweep"], default_inside=inside, default_outside=outside)


# ----------------------------------------------------------------- manifest


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


# ---------------------------------------------------------------- verdicts


@dataclass(frozen=True)
class Verdict:
    status: str  # "pass", "fail" (against the spec) or "error" (no result)
    reasons: tuple[str, ...] = ()
    warnings: tuple[str, ...] = ()


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
    if not pred or not _finite(pred.get("f0_hz")) or not _finite(f0) or pred["f0_hz"] == 0:
        return None
    return float(f0 / pred["f0_hz"] - 1.0)


# -------------------------------------------------------------- statistics


def sample_std(values: Sequence[float]) -> float | None:
    """Sample standard deviation (n - 1 in the denominator); None for n < 2."""
    n = len(values)
    if n < 2:
        return None
    m = sum(values) / n
    return math.sqrt(sum((v - m) ** 2 for v in values) / (n - 1))


def process_capability(values: Sequence[float], lower: float, upper: float
                       ) -> tuple[float | None, float | None]:
    r"""Process capability indices Cp and Cpk of values against two limits.

    .. math::

        C_p = \frac{USL - LSL}{6 s}, \qquad
        C_{pk} = \frac{\min(USL - \bar x,\ \bar x - LSL)}{3 s}

    with :math:`\bar x` the mean and :math:`s` the sample standard deviation
    (n - 1), the usual formula in quality engineering (common practice; with
    the overall s, some texts call the same number Ppk).

    Parameters
    ----------
    values : sequence of float
        Measured values (here f0 in Hz).
    lower, upper : float
        Specification limits LSL and USL, same unit as the values.

    Returns
    -------
    (Cp, Cpk) : floats (dimensionless), or None when fewer than two values or
    no spread.

    References
    ----------
    Kane, V. E. (1986). Process capability indices. Journal of Quality
    Technology 18(1), 41-52.
    """
    s = sample_std(values)
    if s is None or s == 0:
        return None, None
    m = sum(values) / len(values)
    return (upper - lower) / (6 * s), min(upper - m, m - lower) / (3 * s)


def modified_z_scores(values: Sequence[float]) -> list[float] | None:
    r"""Modified z-scores for outlier labelling.

    .. math::

        M_i = \frac{0.6745\,(x_i - \tilde x)}{\mathrm{MAD}}, \qquad
        \mathrm{MAD} = \operatorname{median}_i |x_i - \tilde x|

    with :math:`\tilde x` the median; :math:`|M_i| > 3.5` labels an outlier.

    Returns None when there are fewer than three values or the MAD is zero.

    References
    ----------
    Iglewicz, B. and Hoaglin, D. C. (1993). How to Detect and Handle
    Outliers. ASQC Basic References in Quality Control, vol. 16.
    """
    if len(values) < 3:
        return None
    med = _median(values)
    mad = _median([abs(v - med) for v in values])
    if mad == 0:
        return None
    return [0.6745 * (v - med) / mad for v in values]


def _median(values: Sequence[float]) -> float:
    s = sorted(values)
    n = len(s)
    return s[n // 2] if n % 2 else 0.5 * (s[n // 2 - 1] + s[n // 2])


def individuals_limits(values: Sequence[float]) -> tuple[float, float, float, float] | None:
    r"""Shewhart individuals control chart: centre line and 3-sigma limits.

    .. math::

        \hat\sigma = \frac{\overline{MR}}{d_2}, \quad d_2 = 1.128, \qquad
        UCL, LCL = \bar x \pm 3\hat\sigma

    with :math:`\overline{MR}` the mean moving range of successive values (in
    manifest order). Returns ``(centre, lcl, ucl, sigma)`` in the values'
    unit, or None for fewer than two values.

    References
    ----------
    Montgomery, D. C. (2009). Introduction to Statistical Quality Control,
    6th ed., Wiley, section 6.4 (control charts for individual measurements);
    d2 = 1.128 for subgroups of two from its Appendix VI (from memory).
    """
    if len(values) < 2:
        return None
    mr = sum(abs(b - a) for a, b in zip(values[:-1], values[1:], strict=True)) / (len(values) - 1)
    sigma = mr / D2_MOVING_RANGE
    c = sum(values) / len(values)
    return c, c - 3 * sigma, c + 3 * sigma, sigma


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


def batch_stats(outcomes: Sequence[ItemOutcome], spec: Spec) -> BatchStats:
    """Counts, spread, capability, control limits and outliers of a batch."""
    n = len(outcomes)
    n_pass = sum(o.status == "pass" for o in outcomes)
    n_err = sum(o.status == "error" for o in outcomes)
    with_f0 = [o for o in outcomes if o.status != "error" and _finite(o.f0_hz)]
    with_q = [o for o in outcomes if o.status != "error" and _finite(o.q)]
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


def _finite(v: Any) -> bool:
    return isinstance(v, (int, float)) and math.isfinite(v)


# ------------------------------------------------------------------ workers


@dataclass(frozen=True)
class _Task:
    item: ManifestItem
    settings: dict[str, Any]
    items_dir: str
    analyze_fn: Callable[..., Any] | None = None


def _settings(item: ManifestItem, spec: Spec) -> dict[str, Any]:
    """What an item's result is made from (compared on resume)."""
    from .checks import F0_TOLERANCE

    return {"id": item.id, "recording": item.recording_path, "object": item.object_path,
            "sweep": item.sweep_path, "inside": item.inside, "outside": item.outside,
            "tolerance": spec.max_mismatch if spec.max_mismatch is not None else F0_TOLERANCE}


def _one_line(text: str) -> str:
    return " ".join(str(text).split()) or "(no message)"


def _failure(settings: dict[str, Any], kind: str, message: str) -> dict[str, Any]:
    return {"schema": FAILURE_SCHEMA, "tool_version": __version__,
            "batch_item": dict(settings, plot=None),
            "error": {"kind": kind, "message": _one_line(message)}}


def _work(task: _Task) -> dict[str, Any]:
    """Analyse one item in a worker process and write its document (and plot)."""
    from .report.document import write_document

    s = task.settings
    items_dir = Path(task.items_dir)
    stem = item_file_stem(s["id"])
    doc_path = items_dir / f"{stem}.json"
    try:
        if task.analyze_fn is None:
            from .pipeline import analyze as fn
        else:
            fn = task.analyze_fn
        result = fn(s["recording"], object_path=s["object"], sweep_path=s["sweep"],
                    inside=s["inside"], outside=s["outside"], tolerance=s["tolerance"])
    except InputError as exc:
        doc = _failure(s, "input", str(exc))
    except FitError as exc:
        doc = _failure(s, "no-fit", f"no fit: {exc}")
    except Exception as exc:  # noqa: BLE001  (a batch survives a bad item)
        doc = _failure(s, "unexpected", f"{type(exc).__name__}: {exc}")
    else:
        doc = result.to_dict()
        plot: str | None = f"{stem}.png"
        try:
            from .report.plots import response_plot

            response_plot(result, items_dir / f"{stem}.png")
        except Exception as exc:  # noqa: BLE001  (the numbers matter more than the picture)
            plot = None
            doc.setdefault("flags", []).append(
                {"code": "plot-failed", "severity": "info",
                 "message": _one_line(f"the response plot could not be drawn: {exc}")})
        doc["batch_item"] = dict(s, plot=plot)
    write_document(doc_path, doc)
    return doc


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


def default_workers() -> int:
    """All the cores this process may use."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except (AttributeError, OSError):
        return max(1, os.cpu_count() or 1)


def _mp_context() -> Any:
    """Worker start method: the platform's default (fork on Linux up to Python
    3.13, a fork server from 3.14, spawn on macOS and Windows; a program may
    choose another with ``multiprocessing.set_start_method``). With a fork
    server the heavy modules are imported once, in the server.

    With spawn or a fork server, a script that calls :func:`run_batch` must
    guard its top level with ``if __name__ == "__main__":``.
    """
    import multiprocessing as mp

    ctx = mp.get_context()
    if ctx.get_start_method() == "forkserver":
        ctx.set_forkserver_preload(["characterize.pipeline", "characterize.report.plots",
                                    "characterize.report.document"])
    return ctx


def _init_worker() -> None:
    """Worker start-up: the modules an item needs, and matplotlib's backend and
    fonts, loaded once (in the parent before forking, so workers start warm)."""
    import io as _io

    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    from . import pipeline  # noqa: F401
    from .report import document, plots  # noqa: F401

    fig = plt.figure(figsize=(1, 1))
    fig.text(0.5, 0.5, "f0 (Hz)")
    fig.savefig(_io.BytesIO(), format="png")
    plt.close(fig)


def _worker_start(warm_up: bool) -> None:
    """Worker process start: leave Ctrl-C to the parent (which stops handing out
    items and lets the running ones finish), and warm up unless forked warm."""
    import signal

    signal.signal(signal.SIGINT, signal.SIG_IGN)
    if warm_up:
        _init_worker()


def check_outputs(manifest: Manifest, out_dir: str | os.PathLike[str], *, resume: bool,
                  force: bool) -> Path:
    """Refuse to overwrite a previous batch's files without ``resume`` or ``force``."""
    out = Path(out_dir)
    if out.exists() and not out.is_dir():
        raise InputError(str(out), None, "--out must be a directory")
    if resume or force:
        return out
    for name in REPORT_FILES:
        if (out / name).exists():
            raise InputError(str(out / name), None, "exists; use --resume to continue that "
                             "batch or --force to start over")
    for item in manifest.items:
        p = out / "items" / f"{item.file_stem}.json"
        if p.exists():
            raise InputError(str(p), None, "exists; use --resume to continue that batch "
                             "or --force to start over")
    return out


def run_batch(manifest: Manifest, spec: Spec, out_dir: str | os.PathLike[str], *,
              workers: int | None = None, resume: bool = False, force: bool = False,
              progress: Callable[[ItemOutcome], None] | None = None,
              analyze_fn: Callable[..., Any] | None = None) -> BatchSummary:
    """Analyse every item in worker processes and summarise the batch.

    Parameters
    ----------
    manifest, spec
        From :func:`read_manifest` and :func:`read_spec`.
    out_dir : path
        Output directory; item documents go to ``out_dir/items/ID.json``
        (and the response plot to ``ID.png``) as each item finishes.
    workers : int, optional
        Worker processes; default all cores (never more than items to do).
    resume : bool
        Keep every item whose document exists and was made from the same
        inputs; do the rest (failed items are retried).
    force : bool
        Recompute and overwrite previous documents.
    progress : callable, optional
        Called in this process with each item's :class:`ItemOutcome` as it is
        done (kept items first, at once).
    analyze_fn : callable, optional
        Replacement for :func:`characterize.pipeline.analyze` (tests); must
        be picklable (a module-level function).

    Raises
    ------
    InputError
        Existing outputs without ``resume``/``force``; an unwritable ``out_dir``.
    BatchInterrupted
        A worker process died; finished items are on disk (resume).
    """
    from concurrent.futures import ProcessPoolExecutor, as_completed
    from concurrent.futures.process import BrokenProcessPool

    out = check_outputs(manifest, out_dir, resume=resume, force=force)
    items_dir = out / "items"
    try:
        items_dir.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise InputError(str(items_dir), None, f"cannot create: {exc.strerror or exc}") from None
    started = _now()
    docs: dict[str, dict[str, Any]] = {}
    todo: list[_Task] = []
    for item in manifest.items:
        s = _settings(item, spec)
        doc = _load_valid(item, s, items_dir) if resume else None
        if doc is not None:
            docs[item.id] = doc
            if progress is not None:
                progress(outcome(item, doc, spec))
        else:
            todo.append(_Task(item, s, str(items_dir), analyze_fn))
    kept = len(docs)
    n_workers = 0
    if todo:
        n_workers = max(1, min(workers or default_workers(), len(todo)))
        ctx = _mp_context()
        forked = ctx.get_start_method() == "fork"
        if forked:
            _init_worker()  # once here; the forked workers inherit it
        pool = ProcessPoolExecutor(n_workers, mp_context=ctx, initializer=_worker_start,
                                   initargs=(not forked,))
        try:
            futures = {pool.submit(_work, t): t for t in todo}
            for fut in as_completed(futures):
                task = futures[fut]
                try:
                    doc = fut.result()
                except BrokenProcessPool:
                    raise
                except Exception as exc:  # noqa: BLE001  (e.g. the document could not be written)
                    doc = _failure(task.settings, "unexpected", f"{type(exc).__name__}: {exc}")
                    from .report.document import write_document

                    write_document(items_dir / f"{task.item.file_stem}.json", doc)
                docs[task.item.id] = doc
                if progress is not None:
                    progress(outcome(task.item, doc, spec))
        except BrokenProcessPool:
            pool.shutdown(wait=True, cancel_futures=True)
            done = len(docs)
            raise BatchInterrupted(
                f"a worker process died after {done} of {len(manifest.items)} items were done; "
                "the finished items are saved: rerun with --resume") from None
        except BaseException:
            pool.shutdown(wait=True, cancel_futures=True)
            raise
        pool.shutdown(wait=True)
    run = {"started": started, "finished": _now(), "workers": n_workers,
           "kept_items": kept, "computed_items": len(todo)}
    return summarize(manifest, spec, docs, run)


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


def _now() -> str:
    return _dt.datetime.now(_dt.timezone.utc).astimezone().isoformat(sep=" ", timespec="seconds")


# ------------------------------------------------------------------ reports


def report_paths(out_dir: str | os.PathLike[str]) -> dict[str, Path]:
    out = Path(out_dir)
    return {name: out / name for name in REPORT_FILES}


def write_reports(summary: BatchSummary, out_dir: str | os.PathLike[str], *,
                  formats: Sequence[str] = ("json", "csv", "html", "pdf")) -> list[Path]:
    """Write summary.json, summary.csv, report.html and report.pdf into ``out_dir``.

    Reports are derived from the item documents, so they are always rewritten.
    """
    from .report.document import write_document

    out = Path(out_dir)
    paths = report_paths(out)
    written: list[Path] = []
    if "json" in formats:
        written.append(write_document(paths["summary.json"], summary.to_dict()))
    if "csv" in formats:
        from .report.csv_ import write_summary_csv

        written.append(write_summary_csv(summary, paths["summary.csv"]))
    if "html" in formats:
        from .report.html import write_batch_html

        written.append(write_batch_html(summary, out, paths["report.html"]))
    if "pdf" in formats:
        from .report.pdf import write_batch_pdf

        written.append(write_batch_pdf(summary, out, paths["report.pdf"]))
    return written


def run(manifest_path: str | os.PathLike[str], spec_path: str | os.PathLike[str],
        out_dir: str | os.PathLike[str], *, workers: int | None = None, resume: bool = False,
        force: bool = False, progress: Callable[[ItemOutcome], None] | None = None,
        analyze_fn: Callable[..., Any] | None = None) -> BatchSummary:
    """Everything ``characterize batch`` does: read, run, summarise, write reports."""
    spec = read_spec(spec_path)
    manifest = read_manifest(manifest_path, spec)
    check_outputs(manifest, out_dir, resume=resume, force=force)
    summary = run_batch(manifest, spec, out_dir, workers=workers, resume=resume, force=force,
                        progress=progress, analyze_fn=analyze_fn)
    write_reports(summary, out_dir)
    return summary


__all__ = [
    "BATCH_SCHEMA", "FAILURE_SCHEMA", "MANIFEST_COLUMNS", "BatchInterrupted", "BatchStats",
    "BatchSummary", "ItemOutcome", "Manifest", "ManifestItem", "Outlier", "Spec", "Verdict",
    "batch_stats", "check_outputs", "default_workers", "individuals_limits", "item_file_stem",
    "judge", "known_flag_codes", "mismatch", "modified_z_scores", "outcome",
    "process_capability", "read_manifest", "read_spec", "run", "run_batch", "sample_std",
    "summarize", "write_reports",
]
