"""The command modules' error handling (same as characterize.cli's)."""

from __future__ import annotations

import functools
import os
import sys
from collections.abc import Callable
from typing import Any

import click

from ..errors import CharacterizeError, FitError, InputError


def handles_errors(fn: Callable[..., Any]) -> Callable[..., Any]:
    """Turn library errors into one line on stderr and an exit status:
    2 for bad input (InputError), 1 when no fit could be made (FitError) or
    on an internal error (a bug; CHARACTERIZE_DEBUG=1 shows its traceback)."""

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
        except MemoryError:
            click.echo("characterize: error: not enough memory for this input", err=True)
            sys.exit(2)
        except (KeyboardInterrupt, SystemExit, click.exceptions.ClickException,
                click.exceptions.Exit, click.exceptions.Abort):
            raise
        except Exception as exc:  # a bug, not the user's fault: one line, unless debugging
            if os.environ.get("CHARACTERIZE_DEBUG"):
                raise
            msg = str(exc).splitlines()[0] if str(exc) else ""
            click.echo(f"characterize: internal error: {type(exc).__name__}: {msg} "
                       "(set CHARACTERIZE_DEBUG=1 for the traceback, and please report it)",
                       err=True)
            sys.exit(1)

    return wrapper
