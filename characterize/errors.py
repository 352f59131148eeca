"""Exceptions the library raises for the command line to report in one line."""

from __future__ import annotations


class CharacterizeError(Exception):
    """Base class of the tool's own errors."""


class InputError(CharacterizeError):
    """Bad user input: a file, a field in it, or an option.

    The message is one line naming the file (or option), the field and what
    was expected; the command line prints it and exits with status 2.
    """

    def __init__(self, source: str, field: str | None, expected: str) -> None:
        self.source = str(source)
        self.field = field
        self.expected = expected
        where = self.source if field is None else f"{self.source}: {field}"
        super().__init__(f"{where}: {expected}")


class FitError(CharacterizeError):
    """Readable data from which no fit could be made (exit status 1)."""
