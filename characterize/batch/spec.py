"""Batch specs (TOML): tolerances, Q limits, allowed mismatch, flags that fail,
defaults for the manifest."""

from __future__ import annotations

import difflib
import math
import os
import re
from collections.abc import Sequence
from pathlib import Path
from typing import Any

from ..batchdata import Spec
from ..errors import InputError
from ..fileio import read_toml

_FLAG_CODE = re.compile(r"^[a-z0-9][a-z0-9-]*$")


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
    for p in Path(__file__).resolve().parents[1].rglob("*.py"):
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
    from ..units import parse_quantity

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
    from ..units import parse_quantity

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
