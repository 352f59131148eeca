"""Fast start: importing the command line loads no heavy module (STYLE.md,
"Fast start"; DESIGN.md section 4: ``characterize --help`` starts fast), and
the help screens work in a real process."""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path


def _command() -> list[str]:
    """The installed ``characterize`` script beside this interpreter, else ``-m``."""
    script = Path(sys.executable).with_name("characterize")
    if script.exists() and os.access(script, os.X_OK):
        return [str(script)]
    return [sys.executable, "-m", "characterize"]


def test_importing_cli_loads_no_heavy_module():
    code = ("import characterize.cli, sys; "
            "print('matplotlib' in sys.modules, 'lmfit' in sys.modules, 'scipy' in sys.modules)")
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                          timeout=60)
    assert proc.returncode == 0, proc.stderr
    assert proc.stdout.split() == ["False", "False", "False"], proc.stdout


def test_help_exits_0():
    proc = subprocess.run(_command() + ["--help"], capture_output=True, text=True, timeout=60)
    assert proc.returncode == 0, proc.stderr
    assert "Traceback" not in proc.stderr
    for command in ("fit", "sweep"):
        assert command in proc.stdout


def test_fit_help_exits_0():
    proc = subprocess.run(_command() + ["fit", "--help"], capture_output=True, text=True,
                          timeout=60)
    assert proc.returncode == 0, proc.stderr
    assert "Traceback" not in proc.stderr
    for option in ("--object", "--sweep", "--inside", "--outside", "--band", "--out",
                   "--json", "--strict", "--force"):
        assert option in proc.stdout, option
