"""Safe output: atomic writes and no overwrite without ``force``."""

from __future__ import annotations

import os
import tempfile
from collections.abc import Callable
from pathlib import Path

from .errors import InputError


def check_writable(path: str | os.PathLike[str], *, force: bool, what: str = "output") -> Path:
    """Refuse to clobber an existing file unless ``force``; refuse directories.

    Raises :class:`InputError` (one line) naming the path.
    """
    p = Path(path)
    if p.is_dir():
        raise InputError(str(p), None, f"{what} path is a directory, expected a file name")
    if p.exists() and not force:
        raise InputError(str(p), None, f"{what} exists; use --force to overwrite")
    parent = p.parent if str(p.parent) else Path(".")
    if parent.exists() and not parent.is_dir():
        raise InputError(str(p), None, f"{parent} is not a directory")
    return p


def atomic_write(path: str | os.PathLike[str], writer: Callable[[str], None]) -> Path:
    """Write a file atomically: ``writer(tmp_path)`` fills a temporary file in
    the same directory, which is then renamed over ``path``.

    A killed process leaves either the old file or the new one, never half.
    """
    p = Path(path)
    parent = p.parent if str(p.parent) else Path(".")
    try:
        parent.mkdir(parents=True, exist_ok=True)
        fd, tmp = tempfile.mkstemp(prefix=f".{p.name}.", suffix=".part" + p.suffix, dir=parent)
    except OSError as exc:
        raise InputError(str(p), None, f"cannot write here: {exc.strerror}") from None
    os.close(fd)
    try:
        writer(tmp)
        with open(tmp, "rb+") as fh:
            os.fsync(fh.fileno())
        os.replace(tmp, p)
    except BaseException:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        raise
    return p


def atomic_write_text(path: str | os.PathLike[str], text: str) -> Path:
    """Atomically write UTF-8 text."""

    def _w(tmp: str) -> None:
        with open(tmp, "w", encoding="utf-8", newline="\n") as fh:
            fh.write(text)

    return atomic_write(path, _w)
