"""Measured transfer functions as CSV: read one exported by any analyzer, write ours.

Columns (header row required, names matched loosely, delimiter sniffed):
frequency (Hz) and either real/imaginary parts, or magnitude in dB and phase
in degrees (radians when the header says ``rad``).
"""

from __future__ import annotations

import csv
import io
import math
import re
from pathlib import Path

import numpy as np

from .errors import InputError
from .fileio import atomic_write_text, read_text
from .transfer import TransferFunction

_PATTERNS = {
    "frequency": re.compile(r"^(f|freq|frequency)(\b|_|\s|\(|\[|$)", re.I),
    "real": re.compile(r"^(re|real)(\b|_|\s|\(|\[|$)", re.I),
    "imag": re.compile(r"^(im|imag|imaginary)(\b|_|\s|\(|\[|$)", re.I),
    "magnitude_db": re.compile(r"(mag|magnitude|level|gain|amplitude).*db|^db", re.I),
    "phase": re.compile(r"^(phase|phi|arg)", re.I),
    "sigma": re.compile(r"^(sigma|std|uncertainty)(\b|_|\s|\(|\[|$)", re.I),
}
HEADER_HELP = ("expected a header with 'frequency_hz' and either 'real','imag' or "
               "'magnitude_db','phase_deg'")


def _find(header: list[str], kind: str) -> int | None:
    for i, name in enumerate(header):
        if _PATTERNS[kind].search(name.strip()):
            return i
    return None


def read_transfer_csv(path: str | Path) -> TransferFunction:
    """Read a transfer function from CSV (see the module docstring).

    Without a ``sigma`` column (the per-bin noise our own export writes) the
    noise is unknown, so the fit uses equal weights and takes its standard
    errors from the residuals (``fit.weighting = "residuals"``).
    """
    p = Path(path)
    text = read_text(p, "a transfer function (CSV)")
    lines = [ln for ln in text.splitlines() if ln.strip() and not ln.lstrip().startswith("#")]
    if len(lines) < 2:
        raise InputError(str(p), None, f"no data rows; {HEADER_HELP}")
    first = lines[0]
    if not any(d in first for d in ",;\t"):
        delim = " "  # aligned columns separated by spaces
    else:
        try:
            dialect = csv.Sniffer().sniff(lines[0] + "\n" + lines[1], delimiters=",;\t")
            delim = dialect.delimiter
        except csv.Error:
            delim = ","
    if delim == " ":
        rows = [ln.split() for ln in lines]
    else:
        rows = list(csv.reader(io.StringIO("\n".join(lines)), delimiter=delim,
                               skipinitialspace=True))
    header = [h.strip() for h in rows[0] if h.strip() != ""] if delim == " " else \
        [h.strip() for h in rows[0]]
    i_f = _find(header, "frequency")
    i_re, i_im = _find(header, "real"), _find(header, "imag")
    i_mag, i_ph = _find(header, "magnitude_db"), _find(header, "phase")
    i_sig = _find(header, "sigma")
    if i_f is None:
        raise InputError(str(p), "header", f"no frequency column in {header}; {HEADER_HELP}")
    if i_re is not None and i_im is not None:
        form, cols = "complex", (i_f, i_re, i_im)
    elif i_mag is not None and i_ph is not None:
        form, cols = "polar", (i_f, i_mag, i_ph)
    else:
        raise InputError(str(p), "header", f"columns {header}: {HEADER_HELP}")
    data = []
    for k, row in enumerate(rows[1:], start=2):
        cells = [c for c in row if c.strip() != ""] if delim == " " else row
        try:
            vals = [float(cells[c]) for c in cols] + (
                [float(cells[i_sig])] if i_sig is not None else [])
        except IndexError:
            raise InputError(str(p), f"row {k}", f"has {len(cells)} columns, "
                             f"expected at least {max(cols) + 1}") from None
        except ValueError:
            raise InputError(str(p), f"row {k}", "holds a non-numeric value") from None
        if not all(math.isfinite(v) for v in vals):
            raise InputError(str(p), f"row {k}", "holds NaN or an infinite value")
        data.append(vals)
    arr = np.asarray(data, dtype=np.float64)
    f = arr[:, 0]
    if f.size < 8:
        raise InputError(str(p), None, f"only {f.size} rows; at least 8 frequencies needed")
    if np.any(np.diff(f) <= 0):
        k = int(np.flatnonzero(np.diff(f) <= 0)[0]) + 3
        raise InputError(str(p), f"row {k}", "frequencies must increase strictly")
    if f[0] < 0:
        raise InputError(str(p), "row 2", "negative frequency")
    if form == "complex":
        h = arr[:, 1] + 1j * arr[:, 2]
    else:
        ph = arr[:, 2] if "rad" in header[cols[2]].lower() else np.radians(arr[:, 2])
        h = 10 ** (arr[:, 1] / 20) * np.exp(1j * ph)
    if i_sig is not None:  # our own export: the per-bin noise (sqrt of E|n|^2)
        sig = arr[:, 3]
        if np.any(sig <= 0):
            raise InputError(str(p), "sigma", "must be greater than zero")
        noise_a, noise_b = sig**2, np.zeros(f.size)
    else:
        noise_a = noise_b = np.full(f.size, np.nan)
    return TransferFunction(f, h.astype(np.complex128), noise_a, noise_b,
                            (float(f[0]), float(f[-1])), "csv", np.zeros(f.size))


def write_transfer_csv(path: str | Path, tf: TransferFunction) -> Path:
    """Write H inside its excited band as CSV with columns frequency_hz, real,
    imag, magnitude_db, phase_deg (and sigma when the noise is known)."""
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    sig = tf.sigma()
    has_sigma = bool(np.any(np.isfinite(sig)))
    w.writerow(["frequency_hz", "real", "imag", "magnitude_db", "phase_deg"]
               + (["sigma"] if has_sigma else []))
    with np.errstate(divide="ignore"):
        mag = 20 * np.log10(np.abs(tf.h))
    lo, hi = tf.excited_band_hz
    for k in range(tf.freqs_hz.size):
        if not np.isfinite(tf.h[k]) or not (lo <= tf.freqs_hz[k] <= hi):
            continue
        row = [f"{tf.freqs_hz[k]:.9g}", f"{tf.h[k].real:.9g}", f"{tf.h[k].imag:.9g}",
               f"{mag[k]:.6f}", f"{np.degrees(np.angle(tf.h[k])):.6f}"]
        if has_sigma:
            row.append(f"{sig[k]:.6g}")
        w.writerow(row)
    return atomic_write_text(path, buf.getvalue())
