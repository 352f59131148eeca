"""Measured transfer functions as CSV (characterize.transfer_csv) and ``fit --transfer``.

Outside references:

- numpy.savetxt writes the foreign files (other delimiters, both forms: real/imag
  and magnitude in dB / phase in degrees or radians), standing in for an
  analyzer's export; the conversions dB = 20 log10|H| and degrees = 180/pi rad
  are the usual ones (common practice);
- the simulator's known truth (characterize.simulate) for the fitted f0 and Q;
- the CSV format itself: RFC 4180 (comma-separated values) for the tool's own
  files, read back here with the standard library's csv module.

Tolerances: the tool writes 9 significant digits for frequency, real and imag
and 6 decimals for dB and degrees, so values round-trip to ~1e-8 relative. A
CSV carries no noise estimate, so a fit from it uses equal weights; it then
agrees with the noise-weighted fit of the original recording within a few of
their combined standard errors, and both hold the truth.
"""

from __future__ import annotations

import csv
import math
import re
from pathlib import Path

import numpy as np
import pytest
import soundfile as sf
from click.testing import CliRunner

from characterize.cli import main
from characterize.errors import InputError
from characterize.excitation import sidecar_path, sidecar_text
from characterize.pipeline import analyze
from characterize.simulate import Setup, simulate, true_transfer, write_recording
from characterize.transfer_csv import read_transfer_csv, write_transfer_csv

FS = 16000.0
CASES = [(300.0, 20.0, 1), (820.0, 35.0, 2), (150.0, 8.0, 3)]  # f0 Hz, Q, seed


@pytest.fixture(scope="module")
def measured(tmp_path_factory) -> dict[float, tuple]:
    """For each case: (setup, result of analyze() on a two-microphone sweep at
    30 dB SNR, directory)."""
    out = {}
    for f0, q, seed in CASES:
        d = tmp_path_factory.mktemp(f"csv{int(f0)}")
        s = Setup(f0_hz=f0, q=q, rate_hz=FS, snr_db=30.0)
        data, sweep = simulate(s, seed)
        assert sweep is not None
        rec = d / "rec.wav"
        write_recording(str(rec), data, FS, "FLOAT")
        sp = d / "sweep.wav"
        sf.write(sp, sweep.samples, int(FS), subtype="FLOAT")
        sidecar_path(sp).write_text(sidecar_text(sweep.params), encoding="utf-8")
        out[f0] = (s, analyze(rec, sweep_path=sp), d)
    return out


def _in_band(tf):
    lo, hi = tf.excited_band_hz
    sel = (tf.freqs_hz >= lo) & (tf.freqs_hz <= hi) & np.isfinite(tf.h)
    return tf.freqs_hz[sel], tf.h[sel]


def _agree(a, b, sigmas: float = 3.0) -> None:
    """Two fits of the same data agree within ``sigmas`` combined standard errors."""
    assert abs(a.f0_hz - b.f0_hz) < sigmas * math.hypot(a.f0_stderr_hz, b.f0_stderr_hz)
    assert abs(a.q - b.q) < sigmas * math.hypot(a.q_stderr, b.q_stderr)


# --------------------------------------------------------------------------
# round trips
# --------------------------------------------------------------------------


@pytest.mark.parametrize("f0", [c[0] for c in CASES])
def test_own_csv_round_trips(measured, tmp_path: Path, f0: float) -> None:
    setup, res, _ = measured[f0]
    tf = res.transfer
    path = write_transfer_csv(tmp_path / "h.csv", tf)
    f, h = _in_band(tf)
    # the file is plain RFC 4180 CSV: the standard library reads it as written
    with open(path, newline="", encoding="utf-8") as fh:
        rows = list(csv.reader(fh))
    assert rows[0][:5] == ["frequency_hz", "real", "imag", "magnitude_db", "phase_deg"]
    assert len(rows) - 1 == f.size
    back = read_transfer_csv(path)
    np.testing.assert_allclose(back.freqs_hz, f, rtol=1e-8)
    np.testing.assert_allclose(back.h, h, rtol=0, atol=2e-8 * float(np.max(np.abs(h))))
    # the dB and degree columns say the same as real/imag (20 log10 |H|, 180/pi arg H)
    mag = np.array([float(r[3]) for r in rows[1:]])
    ph = np.array([float(r[4]) for r in rows[1:]])
    np.testing.assert_allclose(mag, 20 * np.log10(np.abs(h)), atol=2e-6)
    np.testing.assert_allclose(ph, np.degrees(np.angle(h)), atol=2e-6)
    # fitting the file gives what fitting the recording gave, and the truth
    fit_csv = analyze(None, transfer_path=path).fit
    _agree(fit_csv, res.fit)
    assert abs(fit_csv.f0_hz / setup.f0_hz - 1) < 1e-3
    assert abs(fit_csv.q / setup.q - 1) < 0.03
    # our own export carries the per-bin noise (sigma column), so the fit is weighted
    # as the original was
    assert fit_csv.weighting == "noise-estimate"


FOREIGN = {
    # name: (delimiter, form, header)
    "semicolon-complex": (";", "complex", ["freq_hz", "re", "im"]),
    "semicolon-polar": (";", "polar", ["Frequency (Hz)", "Magnitude (dB)", "Phase (deg)"]),
    "tab-complex": ("\t", "complex", ["Frequency [Hz]", "Real", "Imaginary"]),
    "tab-polar": ("\t", "polar", ["freq", "magnitude_db", "phase_deg"]),
    "tab-polar-radians": ("\t", "polar-rad", ["f", "gain_db", "phase_rad"]),
}


def _savetxt(path: Path, f: np.ndarray, h: np.ndarray, delim: str, form: str,
             header: list[str]) -> Path:
    if form == "complex":
        cols = [f, h.real, h.imag]
    elif form == "polar":
        cols = [f, 20 * np.log10(np.abs(h)), np.degrees(np.angle(h))]
    else:
        cols = [f, 20 * np.log10(np.abs(h)), np.angle(h)]
    # comments="" so that the header row is a plain first line, as analyzers write it
    np.savetxt(path, np.column_stack(cols), delimiter=delim, header=delim.join(header),
               comments="")
    return path


@pytest.mark.parametrize("name", list(FOREIGN))
@pytest.mark.parametrize("f0", [c[0] for c in CASES])
def test_numpy_savetxt_files_round_trip(measured, tmp_path: Path, name: str, f0: float) -> None:
    setup, res, _ = measured[f0]
    f, h = _in_band(res.transfer)
    delim, form, header = FOREIGN[name]
    path = _savetxt(tmp_path / f"{name}.csv", f, h, delim, form, header)
    back = read_transfer_csv(path)
    np.testing.assert_allclose(back.freqs_hz, f, rtol=1e-12)
    np.testing.assert_allclose(back.h, h, rtol=1e-9)
    fit_csv = analyze(None, transfer_path=path).fit
    _agree(fit_csv, res.fit)
    assert abs(fit_csv.f0_hz / setup.f0_hz - 1) < 1e-3
    assert abs(fit_csv.q / setup.q - 1) < 0.03


@pytest.mark.parametrize("f0", [c[0] for c in CASES])
def test_every_form_fits_alike(measured, tmp_path: Path, f0: float) -> None:
    """Same numbers, different files: the fits agree to rounding (1e-6 relative).

    Foreign files carry no noise column, so they are compared with each other
    (equal weights); our own export, which carries sigma, is weighted instead."""
    _, res, _ = measured[f0]
    f, h = _in_band(res.transfer)
    first = next(iter(FOREIGN))
    d0, form0, header0 = FOREIGN[first]
    own = analyze(None, transfer_path=_savetxt(tmp_path / "ref.csv", f, h, d0, form0,
                                               header0)).fit
    for name, (delim, form, header) in FOREIGN.items():
        other = analyze(None, transfer_path=_savetxt(tmp_path / f"{name}.csv", f, h, delim,
                                                     form, header)).fit
        assert other.f0_hz == pytest.approx(own.f0_hz, rel=1e-6), name
        assert other.q == pytest.approx(own.q, rel=1e-6), name


def test_noiseless_truth_from_csv_fits_exactly(tmp_path: Path) -> None:
    """The simulator's exact H written with numpy.savetxt: the fit returns the truth."""
    s = Setup(f0_hz=256.0, q=30.0, gain_inside=1.0, gain_outside=0.5, delay_s=1e-4)
    f = np.arange(150.0, 400.0, 0.5)
    path = _savetxt(tmp_path / "exact.csv", f, true_transfer(s, f), ";", "polar",
                    ["frequency_hz", "magnitude_db", "phase_deg"])
    fit = analyze(None, transfer_path=path).fit
    assert fit.f0_hz == pytest.approx(256.0, rel=1e-7)
    assert fit.q == pytest.approx(30.0, rel=1e-6)
    assert fit.gain == pytest.approx(2.0, rel=1e-6)
    assert fit.delay_s == pytest.approx(1e-4, rel=1e-4)


def test_whitespace_aligned_columns(tmp_path: Path) -> None:
    f = np.linspace(100.0, 500.0, 200)
    h = true_transfer(Setup(f0_hz=300.0, q=20.0), f)
    path = tmp_path / "aligned.txt"
    np.savetxt(path, np.column_stack([f, h.real, h.imag]), fmt="%14.8f",
               header="freq re im", comments="")
    back = read_transfer_csv(path)
    np.testing.assert_allclose(back.h, h, atol=1e-7)


# --------------------------------------------------------------------------
# bad files: one-line InputError naming the row or the header
# --------------------------------------------------------------------------

GOOD_ROWS = [f"{100 + 10 * k},{1 + 0.1 * k},{-0.05 * k}" for k in range(12)]


def _csv_text(header: str = "frequency_hz,real,imag", rows: list[str] | None = None) -> str:
    return "\n".join([header] + (GOOD_ROWS if rows is None else rows)) + "\n"


def _replace_row(i: int, new: str) -> list[str]:
    rows = list(GOOD_ROWS)
    rows[i] = new
    return rows


BAD = {
    # name: (file text, field named, what the message must say)
    "missing-imag-column": (_csv_text("frequency_hz,real", [r.rsplit(",", 1)[0]
                                                             for r in GOOD_ROWS]),
                            "header", r"real.*imag|imag"),
    "missing-phase-column": (_csv_text("frequency_hz,magnitude_db", [r.rsplit(",", 1)[0]
                                                                     for r in GOOD_ROWS]),
                             "header", r"phase"),
    "no-frequency-column": (_csv_text("hz_value,real,imag"), "header", r"frequency"),
    "short-row": (_csv_text(rows=_replace_row(4, "140,1.4")), "row 6", r"column"),
    "non-numeric": (_csv_text(rows=_replace_row(2, "120,1.2,abc")), "row 4", r"non-numeric"),
    "decimal-comma": (_csv_text(rows=_replace_row(7, '170,"1,7",-0.35')), "row 9",
                      r"non-numeric"),
    "repeated-frequency": (_csv_text(rows=_replace_row(5, "140,1.5,-0.25")), "row 7",
                           r"increas"),
    "decreasing-frequency": (_csv_text(rows=_replace_row(9, "100,1.9,-0.45")), "row 11",
                             r"increas"),
    "nan": (_csv_text(rows=_replace_row(3, "130,nan,-0.15")), "row 5", r"NaN"),
    "infinite": (_csv_text(rows=_replace_row(0, "100,1.0,inf")), "row 2", r"NaN|infinite"),
    "header-only": ("frequency_hz,real,imag\n", None, r"no data"),
    "too-few-rows": (_csv_text(rows=GOOD_ROWS[:5]), None, r"8"),
}


@pytest.mark.parametrize("name", list(BAD))
def test_bad_csv_is_a_one_line_input_error(tmp_path: Path, name: str) -> None:
    text, field, pattern = BAD[name]
    path = tmp_path / f"{name}.csv"
    path.write_text(text, encoding="utf-8")
    with pytest.raises(InputError) as err:
        read_transfer_csv(path)
    msg = str(err.value)
    assert "\n" not in msg
    assert err.value.source == str(path)
    if field is not None:
        assert err.value.field == field, msg
    assert re.search(pattern, msg, re.IGNORECASE), msg


def test_good_rows_of_the_bad_files_are_good(tmp_path: Path) -> None:
    """The base of the bad files reads, so each failure above comes from its one change."""
    path = tmp_path / "good.csv"
    path.write_text(_csv_text(), encoding="utf-8")
    tf = read_transfer_csv(path)
    np.testing.assert_allclose(tf.freqs_hz, 100 + 10 * np.arange(12))
    np.testing.assert_allclose(tf.h, 1 + 0.1 * np.arange(12) - 0.05j * np.arange(12))


def _run(*args: object):
    return CliRunner().invoke(main, [str(a) for a in args], catch_exceptions=True)


@pytest.mark.parametrize("name", ["missing-imag-column", "non-numeric", "decreasing-frequency",
                                  "nan"])
def test_cli_bad_csv_exits_2_and_writes_nothing(tmp_path: Path, name: str) -> None:
    text, field, _ = BAD[name]
    path = tmp_path / f"{name}.csv"
    path.write_text(text, encoding="utf-8")
    out = tmp_path / "out"
    res = _run("fit", "--transfer", path, "--out", out)
    assert res.exit_code == 2, (res.stdout, res.stderr)
    assert "Traceback" not in res.output
    lines = [ln for ln in res.stderr.splitlines() if ln.strip()]
    assert len(lines) == 1, lines
    assert path.name in lines[0] and field in lines[0]
    assert not out.exists() or not any(out.iterdir())


def test_cli_good_csv_writes_the_result(measured, tmp_path: Path) -> None:
    import json

    setup, res, _ = measured[300.0]
    path = write_transfer_csv(tmp_path / "h.csv", res.transfer)
    out = tmp_path / "out"
    r = _run("fit", "--transfer", path, "--out", out)
    assert r.exit_code == 0, r.stderr
    doc = json.loads((out / "result.json").read_text(encoding="utf-8"))
    assert doc["input"]["method"] == "csv"
    assert doc["fit"]["weighting"] == "noise-estimate"  # our export carries sigma
    assert abs(doc["fit"]["f0_hz"] / setup.f0_hz - 1) < 1e-3
    assert "no-noise-estimate" not in [fl["code"] for fl in doc["flags"]]
    # the CSV the command writes is itself readable
    again = read_transfer_csv(out / "transfer.csv")
    assert again.freqs_hz.size > 100


# --------------------------------------------------------------------------
# Welch (H1/H2) exports carry the smoothing kernel and the noise model
# --------------------------------------------------------------------------

# f0 Hz, Q, rate Hz, seed, estimator; noise excitation, 30 dB SNR (the H1 acceptance
# cases of tests/test_methods.py and a few more); for H2 the inside microphone gets
# 12 dB more signal (H2 is biased by inside noise: Bendat & Piersol 2010, ch. 6)
WELCH_CASES = [(300.0, 20.0, 16000.0, 4, "h1"), (1200.0, 12.0, 48000.0, 5, "h1"),
               (600.0, 40.0, 16000.0, 6, "h1"), (150.0, 8.0, 16000.0, 7, "h1"),
               (820.0, 30.0, 16000.0, 8, "h1"), (600.0, 30.0, 16000.0, 9, "h2")]


@pytest.fixture(scope="module")
def welch(tmp_path_factory) -> dict[int, tuple]:
    """For each case: (setup, analyze() of the recording, the exported CSV)."""
    out = {}
    for f0, q, fs, seed, est in WELCH_CASES:
        d = tmp_path_factory.mktemp(f"welch{seed}")
        s = Setup(f0_hz=f0, q=q, rate_hz=fs, excitation="noise", noise_duration_s=4.0,
                  snr_db=30.0, gain_inside=4.0 if est == "h2" else 1.0)
        data, _ = simulate(s, seed)
        rec = d / "rec.wav"
        write_recording(str(rec), data, fs, "FLOAT")
        res = analyze(rec, method=est)
        out[seed] = (s, res, write_transfer_csv(d / "h.csv", res.transfer))
    return out


@pytest.mark.parametrize("seed", [c[3] for c in WELCH_CASES])
def test_welch_csv_refit_gives_the_original_fit(welch, seed: int) -> None:
    setup, res, path = welch[seed]
    tf = res.transfer
    assert tf.kernel is not None
    back = read_transfer_csv(path)
    # the kernel comes back as written (17 significant digits) and in the same form
    assert back.kernel is not None and back.kernel_form == tf.kernel_form
    np.testing.assert_allclose(back.kernel[0], tf.kernel[0], rtol=1e-15, atol=1e-12)
    np.testing.assert_allclose(back.kernel[1], tf.kernel[1], rtol=1e-12, atol=1e-18)
    a, b = res.fit, analyze(None, transfer_path=path).fit
    # the recording was fitted on its whole-record spectra (fitting/record.py); the
    # CSV holds the smoothed estimate shown to the user, whose refit (with the
    # kernel) is a different estimator from the same data: both hold the truth
    # (simulator input) and agree within their combined errors
    assert b.weighting == a.weighting == "noise-estimate"
    for fit in (a, b):
        assert abs(fit.f0_hz - setup.f0_hz) < 4 * fit.f0_stderr_hz
        assert abs(fit.q - setup.q) < 4 * fit.q_stderr
    assert abs(b.f0_hz - a.f0_hz) < 4 * math.hypot(a.f0_stderr_hz, b.f0_stderr_hz)
    assert abs(b.q - a.q) < 4 * math.hypot(a.q_stderr, b.q_stderr)
    # the coherence comes back (9 significant digits), so the refit raises the same
    # coherence-based flags
    assert back.coherence is not None
    lo, hi = tf.excited_band_hz  # the rows written: finite H inside the excited band
    keep = np.isfinite(tf.h) & (tf.freqs_hz >= lo) & (tf.freqs_hz <= hi)
    np.testing.assert_allclose(back.coherence, tf.coherence[keep], rtol=1e-8)
    assert res.quality["coherence_min_in_band"] == pytest.approx(
        analyze(None, transfer_path=path).quality["coherence_min_in_band"], rel=1e-8)


def _strip_kernel(path: Path, tmp_path: Path) -> Path:
    text = path.read_text(encoding="utf-8")
    out = tmp_path / "no-kernel.csv"
    out.write_text("".join(ln for ln in text.splitlines(keepends=True)
                           if not ln.startswith("#")), encoding="utf-8")
    return out


def test_without_the_kernel_h1_q_reads_low(welch, tmp_path: Path) -> None:
    """What the kernel lines fix: the same file without them fits the Welch-smoothed
    peak as if it were the true one, so Q reads low (resolution bias, Bendat &
    Piersol 2010, §8.5), in every H1 case; the file still reads (a plain CSV)."""
    for f0, q, _, seed, est in WELCH_CASES:
        if est != "h1":
            continue
        _, res, path = welch[seed]
        plain = read_transfer_csv(_strip_kernel(path, tmp_path))
        assert plain.kernel is None
        b = analyze(None, transfer_path=_strip_kernel(path, tmp_path)).fit
        assert b.q < res.fit.q - 0.5 * res.fit.q_stderr, (f0, q, b.q, res.fit.q)


def test_sweep_csv_has_no_kernel_lines(measured, tmp_path: Path) -> None:
    """A sweep estimate is not smoothed: no comment lines, the header comes first."""
    _, res, _ = measured[300.0]
    path = write_transfer_csv(tmp_path / "h.csv", res.transfer)
    first = path.read_text(encoding="utf-8").splitlines()[0]
    assert first.startswith("frequency_hz,")
    assert read_transfer_csv(path).kernel is None


def _kernel_file(tmp_path: Path, lines: list[str], extra_cols: str = "",
                 extra: list[str] | None = None) -> Path:
    head = "frequency_hz,real,imag" + extra_cols
    rows = GOOD_ROWS if extra is None else [r + e for r, e in zip(GOOD_ROWS, extra,
                                                                   strict=True)]
    p = tmp_path / "k.csv"
    p.write_text("\n".join(lines + [head] + rows) + "\n", encoding="utf-8")
    return p


KERNEL_OK = ["# characterize.transfer-csv/1", "# kernel_form: linear",
             "# kernel_offsets_hz: -1 0 1", "# kernel_weights: 0.25 0.5 0.25"]

BAD_KERNEL = {
    # name: (comment lines, field named, what the message must say)
    "no-weights": (KERNEL_OK[:3], "kernel_weights", r"missing"),
    "bad-form": ([KERNEL_OK[0], "# kernel_form: circular", *KERNEL_OK[2:]], "kernel_form",
                 r"linear.*h2"),
    "length-mismatch": ([*KERNEL_OK[:3], "# kernel_weights: 0.5 0.5"], "kernel_weights",
                        r"2 values.*3"),
    "non-numeric": ([*KERNEL_OK[:3], "# kernel_weights: 0.25 x 0.25"], "kernel_weights",
                    r"non-numeric"),
    "negative-weight": ([*KERNEL_OK[:3], "# kernel_weights: 0.25 -0.5 0.25"],
                        "kernel_weights", r"negative"),
    "offsets-not-increasing": ([*KERNEL_OK[:2], "# kernel_offsets_hz: 1 0 -1", KERNEL_OK[3]],
                               "kernel_offsets_hz", r"increas"),
    "nan-offset": ([*KERNEL_OK[:2], "# kernel_offsets_hz: -1 nan 1", KERNEL_OK[3]],
                   "kernel_offsets_hz", r"finite"),
    "twice": ([*KERNEL_OK, "# kernel_form: h2"], "kernel_form", r"twice"),
}


@pytest.mark.parametrize("name", list(BAD_KERNEL))
def test_bad_kernel_lines_are_one_line_input_errors(tmp_path: Path, name: str) -> None:
    lines, field, pattern = BAD_KERNEL[name]
    path = _kernel_file(tmp_path, lines)
    with pytest.raises(InputError) as err:
        read_transfer_csv(path)
    msg = str(err.value)
    assert "\n" not in msg and err.value.source == str(path)
    assert err.value.field == field, msg
    assert re.search(pattern, msg, re.IGNORECASE), msg


def test_kernel_lines_read_and_weights_normalised(tmp_path: Path) -> None:
    lines = [*KERNEL_OK[:3], "# kernel_weights: 1 2 1"]  # sums to 4: normalised to 1
    tf = read_transfer_csv(_kernel_file(tmp_path, lines))
    assert tf.kernel is not None and tf.kernel_form == "linear"
    np.testing.assert_allclose(tf.kernel[0], [-1.0, 0.0, 1.0])
    np.testing.assert_allclose(tf.kernel[1], [0.25, 0.5, 0.25])
    # other comment lines are ignored, as before
    tf2 = read_transfer_csv(_kernel_file(tmp_path, ["# exported by an analyzer"]))
    assert tf2.kernel is None


def test_noise_columns_come_in_pairs_and_are_checked(tmp_path: Path) -> None:
    with pytest.raises(InputError, match="noise_a and noise_b") as err:
        read_transfer_csv(_kernel_file(tmp_path, [], ",noise_a", [",1e-4"] * len(GOOD_ROWS)))
    assert err.value.field == "header"
    with pytest.raises(InputError, match="negative") as err:
        read_transfer_csv(_kernel_file(tmp_path, [], ",noise_a,noise_b",
                                       [",1e-4,-1e-4"] * len(GOOD_ROWS)))
    assert err.value.field == "noise_b"
    tf = read_transfer_csv(_kernel_file(tmp_path, [], ",noise_a,noise_b,reference_db",
                                        [",1e-4,2e-4,-20"] * len(GOOD_ROWS)))
    np.testing.assert_allclose(tf.noise_a, 1e-4)
    np.testing.assert_allclose(tf.noise_b, 2e-4)
    np.testing.assert_allclose(tf.reference_db, -20.0)
    with pytest.raises(InputError, match="coherence must lie between 0 and 1") as err:
        read_transfer_csv(_kernel_file(tmp_path, ["# characterize.transfer-csv/1"],
                                       ",coherence",
                                       [",0.5"] * (len(GOOD_ROWS) - 1) + [",1.5"]))
    assert err.value.field == f"row {len(GOOD_ROWS) + 1}"
    # another program's coherence column (here in percent) is not ours to read
    tf = read_transfer_csv(_kernel_file(tmp_path, [], ",coherence",
                                        [",95"] * len(GOOD_ROWS)))
    assert tf.coherence is None
