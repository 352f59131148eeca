"""Command modules beyond ``sweep`` and ``fit``.

Each module defines one click command and imports only click and the standard
library at module level (heavy imports go inside the command), so registering
them keeps ``characterize --help`` fast.
"""

from __future__ import annotations

import importlib
import importlib.util

import click

#: module name -> command attribute. A module listed here but not yet written is
#: skipped (work in progress in this session; see the issue notes).
COMMANDS = {
    "predict": "predict",
    "calibrate": "calibrate",
    "trim": "trim",
    "series": "series",
    "match": "match",
    "levels": "levels",
    "batch": "batch",
    "selftest": "selftest",
    "compare": "compare",
}
#: modules holding several commands: module -> attributes
GROUPED = {"live": ("devices", "measure", "tune")}


def register(group: click.Group) -> None:
    for module, attr in COMMANDS.items():
        name = f"{__name__}.{module}"
        if importlib.util.find_spec(name) is None:
            continue
        group.add_command(getattr(importlib.import_module(name), attr))
    for module, attrs in GROUPED.items():
        mod = importlib.import_module(f"{__name__}.{module}")
        for attr in attrs:
            group.add_command(getattr(mod, attr))
