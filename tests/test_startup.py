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


def test_fit_json_does_not_import_matplotlib_or_scipy_signal():
    """A fit that draws nothing never loads matplotlib (lmfit's optional import of it
    is kept from running, characterize/fitting/_lmfit.py) nor scipy.signal (the band
    limit and the peak finder are numpy, characterize/dsp.py), and lmfit still works."""
    root = Path(__file__).resolve().parents[1] / "example_audio"
    code = ("import sys; from characterize.pipeline import analyze; "
            f"r = analyze({str(root / 'listening-jar-04.flac')!r}, "
            f"sweep_path={str(root / 'sweep-48k.wav')!r}); "
            "print(round(r.fit.f0_hz), 'matplotlib' in sys.modules, 'lmfit' in sys.modules, "
            "'scipy.signal' in sys.modules)")
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                          timeout=120)
    assert proc.returncode == 0, proc.stderr
    # 243 Hz: the bundled jar's truth (example_audio/truth.json, simulated demo data)
    assert proc.stdout.split() == ["243", "False", "True", "False"], proc.stdout


def test_matplotlib_still_importable_after_lmfit():
    code = ("from characterize.fitting._lmfit import import_lmfit; import_lmfit(); "
            "import matplotlib; print(matplotlib.__name__)")
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                          timeout=120)
    assert proc.returncode == 0, proc.stderr
    assert proc.stdout.strip() == "matplotlib"
