"""Exceptions the library raises for the command line to report in one line."""

from __future__ import annotations


def _one_line(text: str) -> str:
    """User text (keys, file names) may hold line breaks or control characters:
    escape them, so that a message stays one line."""
    return "".join(ch if ch.isprintable() else repr(ch)[1:-1] for ch in text)


class CharacterizeError(Exception):
    """Base class of the tool's own errors."""


class InputError(CharacterizeError):
    """Bad user input: a file, a field in it, or an option.

    The message is one line naming the file (or option), the field and what
    was expected; the command line prints it and exits with status 2.
    """

    def __init__(self, source: str, field: str | None, expected: str) -> None:
        self.source = _one_line(str(source))
        self.field = None if field is None else _one_line(str(field))
        self.expected = _one_line(str(expected))
        where = self.source if self.field is None else f"{self.source}: {self.field}"
        super().__init__(f"{where}: {self.expected}")


class FitError(CharacterizeError):
    """Readable data from which no fit could be made (exit status 1).

    :func:`characterize.pipeline.analyze` attaches ``document``: the result
    document of a run that made no fit (``status`` "no fit", the ``reason``, the
    input and the flags raised before it stopped), which ``fit --json`` prints.
    """

    document: dict | None = None
