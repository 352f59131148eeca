"""The command modules' error handling (same as characterize.cli's)."""

from __future__ import annotations

import functools
import sys
from collections.abc import Callable
from typing import Any

import click

from ..errors import CharacterizeError, FitError, InputError


def handles_errors(fn: Callable[..., Any]) -> Callable[..., Any]:
    """Turn library errors into one line on stderr and an exit status:
    2 for bad input (InputError), 1 when no fit could be made (FitError)."""

    @functools.wraps(fn)
    def wrapper(*args: Any, **kwargs: Any) -> Any:
        try:
            return fn(*args, **kwargs)
        except InputError as exc:
            click.echo(f"characterize: error: {exc}", err=True)
            sys.exit(2)
        except FitError as exc:
            click.echo(f"characterize: no fit: {exc}", err=True)
            sys.exit(1)
        except CharacterizeError as exc:
            click.echo(f"characterize: error: {exc}", err=True)
            sys.exit(2)

    return wrapper
