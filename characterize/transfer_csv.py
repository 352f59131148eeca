"""Measured transfer functions as CSV: read one exported by any analyzer, write ours.

Columns (header row required, names matched loosely, delimiter sniffed):
frequency (Hz) and either real/imaginary parts, or magnitude in dB and phase
in degrees (radians when the header says ``rad``). Lines starting with ``#``
are comments.

Our own export (``characterize.transfer-csv/1``, docs/result-schema.md) adds what
a refit needs to give the original fit's numbers: the columns ``noise_a``,
``noise_b`` (the per-bin noise model, :class:`~.transfer.TransferFunction`) and
``reference_db`` (the outside channel's level), and, for a Welch (H1/H2)
estimate, ``coherence`` (so that a refit raises the same coherence flags) and
the smoothing kernel the fit applies to its model, in comment lines
before the header::

    # characterize.transfer-csv/1
    # kernel_form: linear
    # kernel_offsets_hz: -12 -11.875 ...
    # kernel_weights: 1.2e-09 3.4e-09 ...

Without the kernel a refit of an H1 estimate reads Q low by the window's
resolution bias (1 to 3 %; Bendat & Piersol, *Random Data*, 4th ed. 2010, §8.5).
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
#: First comment line of our own export when it carries a kernel.
FORMAT = "characterize.transfer-csv/1"
KERNEL_FORMS = ("linear", "h2")
#: Our own extra columns, read by exact name (case-insensitive).
EXTRA_COLUMNS = ("noise_a", "noise_b", "reference_db", "coherence")
_KERNEL_LINE = re.compile(r"^#\s*(kernel_form|kernel_offsets_hz|kernel_weights)\s*:\s*(.*)$",
                          re.I)
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
    all_lines = text.splitlines()
    kernel, kernel_form = _read_kernel(p, all_lines)
    lines = [ln for ln in all_lines if ln.strip() and not ln.lstrip().startswith("#")]
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
    lower = [h.lower() for h in header]
    # the coherence column is read from our own export only (another program's
    # may be in percent or hold blanks; it was never read before)
    own = any(ln.lstrip("#").strip() == FORMAT for ln in all_lines if ln.lstrip().startswith("#"))
    extra = {name: lower.index(name) for name in EXTRA_COLUMNS
             if name in lower and (own or name != "coherence")}
    if ("noise_a" in extra) != ("noise_b" in extra):
        raise InputError(str(p), "header", "columns noise_a and noise_b come together")
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
                [float(cells[i_sig])] if i_sig is not None else []) + [
                float(cells[i]) for i in extra.values()]
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
    col = {name: arr[:, 3 + (i_sig is not None) + k] for k, name in enumerate(extra)}
    if "noise_a" in col:  # our own export: the noise model itself
        noise_a, noise_b = col["noise_a"], col["noise_b"]
        for name, v in (("noise_a", noise_a), ("noise_b", noise_b)):
            if np.any(v < 0):
                raise InputError(str(p), name, "must not be negative")
        if np.any(noise_a + np.abs(h) ** 2 * noise_b <= 0):
            raise InputError(str(p), "noise_a", "noise_a + |H|^2 noise_b must be greater "
                             "than zero")
    elif i_sig is not None:  # the per-bin noise (sqrt of E|n|^2) at the data's |H|
        sig = arr[:, 3]
        if np.any(sig <= 0):
            raise InputError(str(p), "sigma", "must be greater than zero")
        noise_a, noise_b = sig**2, np.zeros(f.size)
    else:
        noise_a = noise_b = np.full(f.size, np.nan)
    reference_db = col.get("reference_db", np.zeros(f.size))
    coherence = col.get("coherence")
    if coherence is not None and np.any((coherence < 0) | (coherence > 1)):
        k = int(np.flatnonzero((coherence < 0) | (coherence > 1))[0]) + 2
        raise InputError(str(p), f"row {k}", "coherence must lie between 0 and 1")
    return TransferFunction(f, h.astype(np.complex128), noise_a, noise_b,
                            (float(f[0]), float(f[-1])), "csv", reference_db,
                            coherence=coherence, kernel=kernel, kernel_form=kernel_form)


def _read_kernel(p: Path, lines: list[str]
                 ) -> tuple[tuple[np.ndarray, np.ndarray] | None, str]:
    """The kernel comment lines of our own export (module docstring), checked."""
    found: dict[str, str] = {}
    for ln in lines:
        m = _KERNEL_LINE.match(ln.strip())
        if m:
            key = m.group(1).lower()
            if key in found:
                raise InputError(str(p), key, "given twice")
            found[key] = m.group(2).strip()
    if not found:
        return None, "linear"
    missing = [k for k in ("kernel_form", "kernel_offsets_hz", "kernel_weights")
               if k not in found]
    if missing:
        raise InputError(str(p), missing[0], "missing: a kernel needs kernel_form, "
                         "kernel_offsets_hz and kernel_weights comment lines")
    form = found["kernel_form"].lower()
    if form not in KERNEL_FORMS:
        raise InputError(str(p), "kernel_form", f"must be one of {list(KERNEL_FORMS)}, "
                         f"got {found['kernel_form']!r}")
    arrays = []
    for key in ("kernel_offsets_hz", "kernel_weights"):
        try:
            v = np.array([float(x) for x in found[key].replace(",", " ").split()])
        except ValueError:
            raise InputError(str(p), key, "holds a non-numeric value") from None
        if v.size == 0 or not np.all(np.isfinite(v)):
            raise InputError(str(p), key, "needs finite numbers separated by spaces")
        arrays.append(v)
    off, wts = arrays
    if off.size != wts.size:
        raise InputError(str(p), "kernel_weights", f"has {wts.size} values, "
                         f"kernel_offsets_hz {off.size}")
    if np.any(np.diff(off) <= 0):
        raise InputError(str(p), "kernel_offsets_hz", "must increase strictly")
    if np.any(wts < 0) or wts.sum() <= 0:
        raise InputError(str(p), "kernel_weights", "must not be negative and must not all "
                         "be zero")
    return (off, wts / wts.sum()), form


def write_transfer_csv(path: str | Path, tf: TransferFunction) -> Path:
    """Write H inside its excited band as CSV with columns frequency_hz, real,
    imag, magnitude_db, phase_deg (and sigma, noise_a, noise_b when the noise is
    known, reference_db when the reference level is, coherence when the
    estimator gave one), and the estimator's
    smoothing kernel in comment lines before the header (module docstring)."""
    buf = io.StringIO()
    lo, hi = tf.excited_band_hz
    keep = np.isfinite(tf.h) & (tf.freqs_hz >= lo) & (tf.freqs_hz <= hi)
    if tf.kernel is not None:
        off, wts = tf.kernel
        buf.write(f"# {FORMAT}\n# kernel_form: {tf.kernel_form}\n"
                  f"# kernel_offsets_hz: {' '.join(f'{x:.17g}' for x in off)}\n"
                  f"# kernel_weights: {' '.join(f'{x:.17g}' for x in wts)}\n")
    w = csv.writer(buf, lineterminator="\n")
    sig = tf.sigma()
    has_sigma = bool(np.any(np.isfinite(sig)))
    extra = {}
    if has_sigma and np.all(np.isfinite(tf.noise_a[keep])) and np.all(
            np.isfinite(tf.noise_b[keep])):
        extra = {"noise_a": tf.noise_a, "noise_b": tf.noise_b}
    ref = np.asarray(tf.reference_db, dtype=np.float64)
    if ref.shape == tf.freqs_hz.shape and np.all(np.isfinite(ref[keep])):
        extra["reference_db"] = ref
    if (tf.kernel is not None and tf.method.startswith("cross-spectral")
            and tf.coherence is not None and np.all(np.isfinite(tf.coherence[keep]))):
        extra["coherence"] = np.asarray(tf.coherence, dtype=np.float64)
    w.writerow(["frequency_hz", "real", "imag", "magnitude_db", "phase_deg"]
               + (["sigma"] if has_sigma else []) + list(extra))
    with np.errstate(divide="ignore"):
        mag = 20 * np.log10(np.abs(tf.h))
    for k in np.flatnonzero(keep):
        row = [f"{tf.freqs_hz[k]:.9g}", f"{tf.h[k].real:.9g}", f"{tf.h[k].imag:.9g}",
               f"{mag[k]:.6f}", f"{np.degrees(np.angle(tf.h[k])):.6f}"]
        if has_sigma:
            row.append(f"{sig[k]:.6g}")
        row += [f"{v[k]:.9g}" for v in extra.values()]
        w.writerow(row)
    return atomic_write_text(path, buf.getvalue())
