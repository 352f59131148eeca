"""Safe output: atomic writes and no overwrite without ``force``."""

from __future__ import annotations

import os
import stat
import tempfile
from collections.abc import Callable
from pathlib import Path
from typing import Any

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


def _new_file_mode(target: Path) -> int:
    """Mode for the file that replaces ``target``: the old file's permission bits
    when there is one, else what ``open()`` would give (0o666 less the umask).
    ``tempfile.mkstemp`` creates files readable by the owner only."""
    try:
        return stat.S_IMODE(target.stat().st_mode)
    except OSError:
        umask = os.umask(0)
        os.umask(umask)
        return 0o666 & ~umask


def _fsync_dir(parent: Path) -> None:
    """Make the rename durable (best effort: not every platform opens directories)."""
    try:
        fd = os.open(parent, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)


def atomic_write(path: str | os.PathLike[str], writer: Callable[[str], None]) -> Path:
    """Write a file atomically: ``writer(tmp_path)`` fills a temporary file in
    the same directory, which is then renamed over ``path``.

    A killed process leaves either the old file or the new one, never half
    (a killed writer may leave its hidden ``.NAME.*.part`` temporary behind).
    The new file keeps the old one's permission bits (or gets the usual
    0o666 less the umask). Operating-system failures (a directory in the way,
    no permission, a full disk) raise :class:`InputError` naming the path.
    """
    p = Path(path)
    parent = p.parent if str(p.parent) else Path(".")
    if p.is_dir():
        raise InputError(str(p), None, "output path is a directory, expected a file name")
    try:
        parent.mkdir(parents=True, exist_ok=True)
        fd, tmp = tempfile.mkstemp(prefix=f".{p.name}.", suffix=".part", dir=parent)
    except OSError as exc:
        raise InputError(str(p), None, f"cannot write here: {exc.strerror or exc}") from None
    os.close(fd)
    try:
        writer(tmp)
        with open(tmp, "rb+") as fh:
            os.fsync(fh.fileno())
        os.chmod(tmp, _new_file_mode(p))
        os.replace(tmp, p)
    except BaseException as exc:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        if isinstance(exc, OSError):
            raise InputError(str(p), None, f"cannot write: {exc.strerror or exc}") from None
        raise
    _fsync_dir(parent)
    return p


def atomic_write_text(path: str | os.PathLike[str], text: str) -> Path:
    """Atomically write UTF-8 text."""

    def _w(tmp: str) -> None:
        with open(tmp, "w", encoding="utf-8", newline="\n") as fh:
            fh.write(text)

    return atomic_write(path, _w)


def read_text(path: str | os.PathLike[str], what: str, *, bom: bool = True) -> str:
    """Read a UTF-8 text file (a byte-order mark is dropped when ``bom``); one-line
    :class:`InputError` naming the file for a missing or unreadable file, a
    directory or bad bytes. ``what`` names the kind of file ("a manifest (CSV)")."""
    source = str(path)
    try:
        raw = Path(path).read_bytes()
    except FileNotFoundError:
        raise InputError(source, None, "file not found") from None
    except IsADirectoryError:
        raise InputError(source, None, f"is a directory, expected {what}") from None
    except OSError as exc:
        raise InputError(source, None, f"cannot read file: {exc.strerror or exc}") from None
    try:
        return raw.decode("utf-8-sig" if bom else "utf-8")
    except UnicodeDecodeError as exc:
        raise InputError(source, None, f"not UTF-8 text (bad byte at offset {exc.start}); "
                         f"expected {what}") from None


def read_toml(path: str | os.PathLike[str], what: str) -> dict[str, Any]:
    """Read a UTF-8 TOML file (:func:`read_text`); bad TOML is a one-line
    :class:`InputError` with tomllib's line and column."""
    import tomllib

    text = read_text(path, f"{what} (TOML)", bom=False)
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise InputError(str(path), None,
                         f"not valid TOML: {' '.join(str(exc).split())}") from None


#: Names that are files, not folders: refused for --out (a folder on every command).
_FILE_SUFFIXES = (".json", ".toml", ".csv", ".png", ".svg", ".html", ".pdf", ".txt", ".wav")


def out_folder(out_dir: str | os.PathLike[str], names: list[str] | tuple[str, ...], *,
               force: bool, option: str = "--out") -> list[Path]:
    """The files ``names`` inside the output folder ``out_dir`` (``--out DIR`` means
    a folder on every command), each checked writable; a file given for the
    folder is refused in one line."""
    d = Path(out_dir)
    if not d.is_dir() and d.suffix.lower() in _FILE_SUFFIXES:
        raise InputError(str(d), option, f"{option} names a folder (it receives "
                         f"{', '.join(names)}), not a file")
    if d.exists() and not d.is_dir():
        raise InputError(str(d), option, f"is a file; {option} names a folder (it receives "
                         f"{', '.join(names)})")
    return [check_writable(d / n, force=force) for n in names]
