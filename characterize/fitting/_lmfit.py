"""lmfit without its optional matplotlib import.

lmfit's ``model`` module imports matplotlib when it is installed, only to
offer ``ModelResult.plot`` (lmfit 1.3, ``lmfit/model.py``: ``try: import
matplotlib``). We never use lmfit's own plots (report/ draws ours), and that
import costs about a third of a second of a ``fit --json`` process. So the
first import of lmfit in a process that has not loaded matplotlib yet hides
matplotlib for the duration of that import: lmfit then records that it has
no matplotlib, and its ``plot`` methods print a note instead of drawing.
matplotlib itself stays importable as usual afterwards (report/ imports it
when a plot is asked for).
"""

from __future__ import annotations

import sys
from types import ModuleType


def import_lmfit() -> ModuleType:
    """Import and return lmfit, keeping its optional matplotlib import from running."""
    done = sys.modules.get("lmfit")
    if done is not None:
        return done
    if "matplotlib" in sys.modules:
        import lmfit

        return lmfit
    sys.modules["matplotlib"] = None  # type: ignore[assignment]  # import -> ImportError
    try:
        import lmfit
    finally:
        if sys.modules.get("matplotlib", 0) is None:
            del sys.modules["matplotlib"]
    return lmfit
