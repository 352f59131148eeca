"""Command-line errors and exit codes (DESIGN.md section 3).

Rules checked (from DESIGN section 3 and the issue):

- bad input or usage: exit status 2 and ONE line on stderr that names the file
  (or the option) and what is wrong, never a traceback, nothing written to --out;
- readable data holding no resonance: exit status 1 with a one-line "no fit" reason;
- ``--strict``: exit status 1 when a warning flag is raised, 0 otherwise;
- outputs are not overwritten without ``--force``;
- ``characterize sweep`` writes the WAV and a sidecar with every parameter and
  shows the safety caution.

All recordings are made here, under pytest's tmp_path, with the seeded simulator.
"""

from __future__ import annotations

import json
import re
import subprocess
import sys
import tomllib
from pathlib import Path

import numpy as np
import pytest
import soundfile as sf
from click.testing import CliRunner

from characterize.cli import main
from characterize.simulate import Setup, simulate, write_recording

EXAMPLES = Path(__file__).resolve().parent.parent / "example_audio"

#: A well-described object (the bundled listening jar) used as the base for bad
#: object files: each bad file changes exactly one thing in it.
GOOD_OBJECT = """\
name = "jar-under-test"
[cavity]
volume = "480 mL"
[neck]
diameter = "24 mm"
length = "28 mm"
outer_end = "unflanged"
inner_end = "flanged"
[air]
temperature = "21 degC"
relative_humidity = 0.45
pressure = "101.1 kPa"
"""


# --------------------------------------------------------------------------
# helpers
# --------------------------------------------------------------------------


def run(*args: object):
    """Invoke the CLI in-process; stdout and stderr are kept apart (click >= 8.2)."""
    return CliRunner().invoke(main, [str(a) for a in args], catch_exceptions=True)


def assert_one_line_error(res, code: int, *patterns: str) -> str:
    """Exit ``code``, exactly one non-empty line on stderr matching every regex
    in ``patterns`` (case-insensitive), and no traceback anywhere."""
    assert isinstance(res.exception, SystemExit) or res.exception is None, (
        f"unhandled {type(res.exception).__name__}: {res.exception}")
    assert res.exit_code == code, (res.exit_code, res.stdout, res.stderr)
    assert "Traceback" not in res.output
    lines = [ln for ln in res.stderr.splitlines() if ln.strip()]
    assert len(lines) == 1, f"expected one line on stderr, got {lines!r}"
    for pat in patterns:
        assert re.search(pat, lines[0], re.IGNORECASE), (pat, lines[0])
    return lines[0]


def assert_nothing_written(out_dir: Path) -> None:
    assert not out_dir.exists() or not any(out_dir.iterdir()), sorted(out_dir.iterdir())


# --------------------------------------------------------------------------
# fixtures: small seeded recordings
# --------------------------------------------------------------------------


@pytest.fixture(scope="module")
def files(tmp_path_factory) -> dict[str, Path]:
    d = tmp_path_factory.mktemp("cli")
    out: dict[str, Path] = {}

    # H1 recording (noise excitation): f0 300 Hz, Q 20, 48 kHz
    noise_setup = Setup(f0_hz=300.0, q=20.0, rate_hz=48000.0, snr_db=40.0,
                        excitation="noise", noise_duration_s=4.0)
    data, _ = simulate(noise_setup, seed=11)
    out["good"] = d / "good.wav"
    write_recording(str(out["good"]), data, 48000.0, "PCM_24")

    out["mono"] = d / "mono.wav"
    sf.write(out["mono"], data[:, 0], 48000, subtype="PCM_24")

    silent = data.copy()
    silent[:, 1] = 0.0
    out["silent"] = d / "silent-outside.wav"
    sf.write(out["silent"], silent, 48000, subtype="PCM_24")

    out["text"] = d / "notes.wav"
    out["text"].write_text("this is a text file, not audio\n", encoding="utf-8")

    # sweep recording at 48 kHz and its sweep
    sweep_setup = Setup(f0_hz=300.0, q=20.0, rate_hz=48000.0, snr_db=40.0)
    sdata, sweep = simulate(sweep_setup, seed=12)
    assert sweep is not None
    out["sweep_rec"] = d / "sweep-rec.wav"
    write_recording(str(out["sweep_rec"]), sdata, 48000.0, "PCM_24")
    out["sweep"] = d / "sweep.wav"
    sf.write(out["sweep"], sweep.samples, 48000, subtype="FLOAT")
    # the same sweep samples written as if at 44.1 kHz (no sidecar)
    out["sweep_44k"] = d / "sweep-44k.wav"
    sf.write(out["sweep_44k"], sweep.samples, 44100, subtype="FLOAT")
    # a recording that stops after 1 s of a longer sweep
    assert sweep.params.duration_s > 1.5
    out["short"] = d / "short-rec.wav"
    write_recording(str(out["short"]), sdata[:48000], 48000.0, "PCM_24")

    # two channels of the same broadband noise: H = 1 at every frequency
    rng = np.random.default_rng(2024)
    n = 0.1 * rng.standard_normal(4 * 48000)
    out["flat"] = d / "identical-noise.wav"
    sf.write(out["flat"], np.stack([n, n], axis=1), 48000, subtype="FLOAT")
    return out


def write_object(tmp_path: Path, text: str, name: str = "object.toml") -> Path:
    p = tmp_path / name
    p.write_text(text, encoding="utf-8")
    return p


# --------------------------------------------------------------------------
# fit: bad recordings, channels and sweeps -> exit 2, one line
# --------------------------------------------------------------------------


def test_missing_recording(tmp_path, files):
    missing = tmp_path / "no-such-recording.wav"
    out = tmp_path / "out"
    res = run("fit", missing, "--out", out)
    assert_one_line_error(res, 2, re.escape(missing.name), r"not found|no such|missing|exist")
    assert_nothing_written(out)


def test_text_file_named_wav(tmp_path, files):
    out = tmp_path / "out"
    res = run("fit", files["text"], "--out", out)
    assert_one_line_error(res, 2, re.escape(files["text"].name), r"audio|read|format")
    assert_nothing_written(out)


def test_mono_file(tmp_path, files):
    out = tmp_path / "out"
    # read as taps (ringdown): noise holds no free decay, a refusal (exit 1) that
    # names the two-channel methods
    res = run("fit", files["mono"], "--out", out)
    assert_one_line_error(res, 1, re.escape(files["mono"].name), r"no free decay",
                          r"one-channel recording", r"two channels")
    assert_nothing_written(out)


def test_channel_out_of_range(tmp_path, files):
    out = tmp_path / "out"
    res = run("fit", files["good"], "--inside", 3, "--out", out)
    assert_one_line_error(res, 2, r"--inside", r"\b3\b", re.escape(files["good"].name))
    assert_nothing_written(out)


def test_inside_equals_outside(tmp_path, files):
    out = tmp_path / "out"
    res = run("fit", files["good"], "--inside", 2, "--outside", 2, "--out", out)
    assert_one_line_error(res, 2, r"--inside", r"--outside", r"differ|same|both")
    assert_nothing_written(out)


def test_silent_channel(tmp_path, files):
    out = tmp_path / "out"
    res = run("fit", files["silent"], "--out", out)
    assert_one_line_error(res, 2, re.escape(files["silent"].name), r"silent", r"\b2\b|outside")
    assert_nothing_written(out)


def test_sweep_at_another_rate(tmp_path, files):
    out = tmp_path / "out"
    res = run("fit", files["sweep_rec"], "--sweep", files["sweep_44k"], "--out", out)
    assert_one_line_error(res, 2, re.escape(files["sweep_44k"].name), r"rate",
                          r"44100|44\.1", r"48000|48 ?k")
    assert_nothing_written(out)


def test_recording_shorter_than_sweep(tmp_path, files):
    out = tmp_path / "out"
    res = run("fit", files["short"], "--sweep", files["sweep"], "--out", out)
    assert_one_line_error(res, 2, re.escape(files["short"].name), r"short")
    assert_nothing_written(out)


# --------------------------------------------------------------------------
# fit: bad object files -> exit 2, one line naming file and field
# --------------------------------------------------------------------------

BAD_OBJECTS = {
    # id: (replace this, with that, field named, what is wrong)
    "missing-field": ('length = "28 mm"\n', "", r"neck\.length", r"missing|required"),
    "negative-dimension": ('"24 mm"', '"-24 mm"', r"neck\.diameter", r"greater than zero|> ?0|positive"),
    "zero-volume": ('"480 mL"', '"0 mL"', r"cavity\.volume", r"greater than zero|> ?0|positive"),
    "length-without-unit": ('"28 mm"', '"18"', r"neck\.length", r"unit"),
    "wrong-kind-of-unit": ('"28 mm"', '"18 kg"', r"neck\.length", r"not a length|length"),
    "unknown-end-condition": ('outer_end = "unflanged"', 'outer_end = "baffled"',
                              r"neck\.outer_end", r"baffled.*flanged|unknown"),
    "unknown-key": ("[neck]\n", '[neck]\ncolour = "green"\n', r"neck\.colour|colour",
                    r"unknown"),
}


@pytest.mark.parametrize("case", list(BAD_OBJECTS), ids=list(BAD_OBJECTS))
def test_bad_object_file(tmp_path, files, case):
    old, new, field, wrong = BAD_OBJECTS[case]
    assert old in GOOD_OBJECT
    obj = write_object(tmp_path, GOOD_OBJECT.replace(old, new, 1), f"{case}.toml")
    out = tmp_path / "out"
    res = run("fit", files["good"], "--object", obj, "--out", out)
    assert_one_line_error(res, 2, re.escape(obj.name), field, wrong)
    assert_nothing_written(out)


def test_good_object_file_is_accepted(tmp_path, files):
    """The base of the bad object files is itself fine (so each failure above is
    caused by its one change)."""
    obj = write_object(tmp_path, GOOD_OBJECT)
    res = run("fit", files["good"], "--object", obj, "--json")
    assert res.exit_code == 0, res.stderr
    assert json.loads(res.stdout)["prediction"] is not None


# --------------------------------------------------------------------------
# fit: bad --band
# --------------------------------------------------------------------------


@pytest.mark.parametrize("band, wrong", [
    ((10.0, 30000.0), r"outside|beyond|nyquist|24000"),  # above Nyquist at 48 kHz
    ((400.0, 200.0), r"LO|HI|<"),
    ((300.0, 300.0), r"LO|HI|<"),
], ids=["outside-data", "lo-above-hi", "lo-equals-hi"])
def test_bad_band(tmp_path, files, band, wrong):
    out = tmp_path / "out"
    res = run("fit", files["good"], "--band", band[0], band[1], "--out", out)
    assert_one_line_error(res, 2, r"--band", wrong)
    assert_nothing_written(out)


# --------------------------------------------------------------------------
# fit: existing outputs and --force
# --------------------------------------------------------------------------


def test_existing_result_needs_force(tmp_path, files):
    out = tmp_path / "out"
    out.mkdir()
    result = out / "result.json"
    result.write_text('{"sentinel": true}\n', encoding="utf-8")

    res = run("fit", files["good"], "--out", out)
    assert_one_line_error(res, 2, r"result\.json", r"--force")
    assert result.read_text(encoding="utf-8") == '{"sentinel": true}\n'
    assert sorted(p.name for p in out.iterdir()) == ["result.json"]

    res = run("fit", files["good"], "--out", out, "--force")
    assert res.exit_code == 0, res.stderr
    doc = json.loads(result.read_text(encoding="utf-8"))
    assert doc["schema"] == "characterize.result/1"
    assert abs(doc["fit"]["f0_hz"] / 300.0 - 1) < 0.01  # the simulated f0


# --------------------------------------------------------------------------
# no fit (exit 1) and --strict
# --------------------------------------------------------------------------


def test_no_resonance_is_no_fit(tmp_path, files):
    """Identical channels: H(f) = 1 everywhere, no resonance to fit."""
    out = tmp_path / "out"
    res = run("fit", files["flat"], "--out", out)
    assert_one_line_error(res, 1, r"no fit", re.escape(files["flat"].name) + r"|resonance|peak")
    assert_nothing_written(out)


def test_no_fit_with_json_prints_a_no_fit_document(files):
    """Issue 11, item 7: exit 1 with --json still gives a machine-readable answer
    on stdout (docs/result-schema.md), and the one-line reason on stderr."""
    res = run("fit", files["flat"], "--json")
    line = assert_one_line_error(res, 1, r"no fit")
    doc = json.loads(res.stdout)
    assert doc["schema"] == "characterize.result/1"
    assert doc["status"] == "no fit"
    assert doc["reason"] and doc["reason"] in line
    assert doc["fit"] is None
    assert doc["input"]["recording"] == str(files["flat"])
    assert doc["input"]["method"] == "cross-spectral-h1"
    assert isinstance(doc["flags"], list)
    # a fitted document says so
    res = run("fit", files["good"], "--json")
    assert res.exit_code == 0, res.stderr
    doc = json.loads(res.stdout)
    assert doc["status"] == "fitted" and doc["reason"] is None


def test_ringdown_without_a_decay_is_no_fit_document(tmp_path):
    """Noise alone on the one-microphone ringdown path: a refusal (exit 1), with
    the no-fit document under --json."""
    rec = tmp_path / "hiss.wav"
    sf.write(rec, 0.05 * np.random.default_rng(5).standard_normal(48000), 48000)
    res = run("fit", rec, "--json")
    assert_one_line_error(res, 1, r"no fit", r"no free decay")
    doc = json.loads(res.stdout)
    assert doc["status"] == "no fit" and doc["input"]["method"] == "ringdown"


@pytest.mark.parametrize("which", [1, 2])
def test_constant_channel_is_refused(tmp_path, files, which):
    """A channel holding only a DC level (a dead microphone on a biased input)."""
    data, rate = sf.read(files["good"])
    data[:, which - 1] = 0.25
    rec = tmp_path / "dc.wav"
    sf.write(rec, data, rate, subtype="FLOAT")
    res = run("fit", rec, "--json")
    assert_one_line_error(res, 2, re.escape(rec.name), rf"channel {which}", r"constant")
    assert res.stdout == ""


def test_strict_exits_1_on_warning_and_0_when_clean(tmp_path):
    rec = EXAMPLES / "listening-jar-04.flac"
    sweep = EXAMPLES / "sweep-48k.wav"
    # the bundled jar recording with its own (good) geometry: no warning
    res = run("fit", rec, "--object", EXAMPLES / "listening-jar-04.toml", "--sweep", sweep,
              "--json", "--strict")
    assert res.exit_code == 0, res.stderr
    assert not [f for f in json.loads(res.stdout)["flags"]
                if f["severity"] in ("warning", "error")]

    # the same geometry with a cavity 30 % larger than the real one: the
    # predicted f0 falls by 1/sqrt(1.3) (12 %), past the default 5 % tolerance
    obj = write_object(tmp_path, GOOD_OBJECT.replace('"480 mL"', '"624 mL"'), "jar-off.toml")
    res = run("fit", rec, "--object", obj, "--sweep", sweep, "--json", "--strict")
    assert res.exit_code == 1, res.stderr
    assert "Traceback" not in res.output
    codes = [f["code"] for f in json.loads(res.stdout)["flags"]]
    assert "f0-mismatch" in codes

    # without --strict the same warning does not fail the run
    res = run("fit", rec, "--object", obj, "--sweep", sweep, "--json")
    assert res.exit_code == 0, res.stderr
    assert "f0-mismatch" in [f["code"] for f in json.loads(res.stdout)["flags"]]


# --------------------------------------------------------------------------
# sweep command
# --------------------------------------------------------------------------


@pytest.mark.parametrize("options, option, wrong", [
    (["--stop", "30000"], r"stop", r"nyquist|24000"),
    (["--level", "3"], r"level", r"0 ?dBFS|<= ?0|above 0|positive"),
], ids=["stop-above-nyquist", "level-above-0"])
def test_sweep_bad_options(tmp_path, options, option, wrong):
    out = tmp_path / "sweep.wav"
    res = run("sweep", out, *options)
    assert_one_line_error(res, 2, option, wrong)
    assert not out.exists()
    assert not out.with_suffix(".toml").exists()


def test_sweep_existing_file_needs_force(tmp_path):
    out = tmp_path / "sweep.wav"
    out.write_bytes(b"not yet a sweep")
    res = run("sweep", out)
    assert_one_line_error(res, 2, re.escape(out.name), r"--force|exists")
    assert out.read_bytes() == b"not yet a sweep"
    assert not out.with_suffix(".toml").exists()
    res = run("sweep", out, "--force", "--duration", "1", "--tail", "0.5")
    assert res.exit_code == 0, res.stderr
    assert sf.info(str(out)).samplerate == 48000


def test_sweep_writes_wav_sidecar_and_caution(tmp_path):
    out = tmp_path / "s.wav"
    given = {"start_hz": 30.0, "stop_hz": 5000.0, "duration_s": 2.0, "rate_hz": 44100,
             "level_dbfs": -18.0, "fade_in_s": 0.02, "fade_out_s": 0.03, "tail_s": 1.5}
    res = run("sweep", out, "--start", 30, "--stop", 5000, "--duration", 2, "--rate", 44100,
              "--level", -18, "--fade-in", 0.02, "--fade-out", 0.03, "--tail", 1.5)
    assert res.exit_code == 0, res.stderr
    assert "Traceback" not in res.output

    x, rate = sf.read(str(out), always_2d=True)
    assert rate == 44100
    assert x.shape == (round((2.0 + 1.5) * 44100), 1)
    # peak at the requested level (PCM quantisation aside)
    assert 20 * np.log10(np.max(np.abs(x))) == pytest.approx(-18.0, abs=0.05)
    # the tail is silent
    assert np.max(np.abs(x[round(2.0 * 44100):])) == 0.0

    side = out.with_suffix(".toml")
    table = tomllib.loads(side.read_text(encoding="utf-8"))
    table = table.get("sweep", table)
    for key, value in given.items():
        assert key in table, key
        assert float(table[key]) == pytest.approx(value), key

    caution = res.output.lower()
    assert "hearing protection" in caution
    assert "110 db" in caution
    assert re.search(r"occupational|regulation|rules", caution)


# --------------------------------------------------------------------------
# the real process: no traceback reaches stderr
# --------------------------------------------------------------------------


def test_subprocess_error_is_one_line_without_traceback(tmp_path, files):
    out = tmp_path / "out"
    proc = subprocess.run(
        [sys.executable, "-m", "characterize", "fit", str(files["text"]), "--out", str(out)],
        capture_output=True, text=True, timeout=120)
    assert proc.returncode == 2, proc.stderr
    assert "Traceback" not in proc.stderr
    lines = [ln for ln in proc.stderr.splitlines() if ln.strip()]
    assert len(lines) == 1, lines
    assert files["text"].name in lines[0]
    assert proc.stdout == ""
    assert_nothing_written(out)
