"""What the user types (issue 14, points 9 to 13): units on every quantity option,
typos that change the magnitude, values plausible in another unit, one --out /
--json convention, Ctrl-C, the top-level help and the messages for common slips.

Outside references: the SI prefixes (SI Brochure, 9th ed., 2019, table 7: M is
10^6, m is 10^-3, so "ML" is 10^9 times "mL"); 1013 hPa and 294 K as sea-level
pressure and room temperature (common practice); exit status 130 after Ctrl-C
(128 + SIGINT 2, the POSIX shells' convention); f0 scales with the speed of sound,
c ~ sqrt(T) (ideal gas, common practice).
"""

from __future__ import annotations

import json
import shutil
from pathlib import Path

import pytest
from click.testing import CliRunner

from characterize.cli import main
from characterize.errors import InputError
from characterize.units import parse_quantity

EXAMPLES = Path(__file__).resolve().parent.parent / "example_audio"
JAR = EXAMPLES / "listening-jar-04.toml"

OBJECT = """\
name = "jar"
[cavity]
volume = "{volume}"
[neck]
diameter = "18 mm"
length = "{length}"
outer_end = "unflanged"
inner_end = "flanged"
"""


def run(*args):
    return CliRunner().invoke(main, [*map(str, args)])


def one_line_exit_2(res):
    assert res.exit_code == 2, (res.exit_code, res.output)
    assert len(res.stderr.strip().splitlines()) == 1, res.stderr
    assert "Traceback" not in res.output
    return res.stderr


# --- 10: case typos that change the magnitude ----------------------------------

@pytest.mark.parametrize("text,dimension,meant", [
    ("480 ML", "volume", "mL"), ("355 Ml", "volume", "mL"), ("24 Mm", "length", "mm"),
    ("2 KHz", "frequency", "kHz"), ("1 mPa", "pressure", "MPa")])
def test_case_typo_refused_with_did_you_mean(text, dimension, meant):
    with pytest.raises(InputError, match=f"did you mean {meant}\\?"):
        parse_quantity(text, dimension, "f.toml", "x")


@pytest.mark.parametrize("text,dimension,si", [
    ("355 mL", "volume", 355e-6), ("355 ml", "volume", 355e-6), ("24 mm", "length", 0.024),
    ("1.2 kHz", "frequency", 1200.0), ("3 ft", "length", 0.9144)])
def test_proper_units_still_read(text, dimension, si):
    # SI Brochure 2019 prefixes; 1 ft = 0.3048 m exactly (international foot)
    assert parse_quantity(text, dimension, "f.toml", "x") == pytest.approx(si, rel=1e-12)


@pytest.mark.parametrize("volume,length", [("480 ML", "40 mm"), ("355 mL", "24 Mm")])
def test_predict_refuses_magnitude_typos_in_object_files(tmp_path, volume, length):
    p = tmp_path / "jar.toml"
    p.write_text(OBJECT.format(volume=volume, length=length), encoding="utf-8")
    err = one_line_exit_2(run("predict", p))
    assert "did you mean m" in err and "jar.toml" in err


def test_predict_warns_on_implausible_geometry(tmp_path):
    # a 12 m neck on a 5000 L cavity: f0 well below 1 Hz (lumped law, f0 =
    # c/(2 pi) sqrt(S/(V L')) = 343/6.28 * sqrt(2.5e-4/(5 * 12)) = 0.11 Hz)
    p = tmp_path / "jar.toml"
    p.write_text(OBJECT.format(volume="5 m**3", length="12 m"), encoding="utf-8")
    res = run("predict", p)
    assert res.exit_code == 0, res.output
    assert "[warning] geometry-implausible" in res.stdout
    assert "below" not in res.stdout or "1 Hz" in res.stdout
    assert "neck length 12 m is over 10 m" in res.stdout
    doc = json.loads(run("predict", p, "--json").stdout)
    assert [f["code"] for f in doc["flags"]] == ["geometry-implausible"]
    # the bundled objects are plausible: no flag
    for obj in sorted(EXAMPLES.glob("*.toml")):
        if obj.name.startswith("sweep"):
            continue
        d = json.loads(run("predict", obj, "--json").stdout)
        assert d["flags"] == [], obj.name


# --- 9 and 11: unit strings on every quantity option -----------------------------

def test_air_options_take_unit_strings_and_bare_celsius():
    base = json.loads(run("predict", JAR, "--json", "--temperature", "21 degC").stdout)
    bare = json.loads(run("predict", JAR, "--json", "--temperature", "21").stdout)
    kelvin = json.loads(run("predict", JAR, "--json", "--temperature", "294.15 K").stdout)
    for d in (bare, kelvin):
        assert d["air"]["temperature_c"] == pytest.approx(21.0, abs=1e-9)
        assert d["prediction"]["f0_hz"] == pytest.approx(base["prediction"]["f0_hz"], rel=1e-12)
    hpa = json.loads(run("predict", JAR, "--json", "--pressure", "1013 hPa").stdout)
    assert hpa["air"]["pressure_pa"] == pytest.approx(101300.0)
    pct = json.loads(run("predict", JAR, "--json", "--humidity", "45 %").stdout)
    assert pct["air"]["relative_humidity"] == pytest.approx(0.45)


@pytest.mark.parametrize("option,value,hint", [
    ("--pressure", "1013", "did you mean '1013 hPa'?"),
    ("--pressure", "101.3", "did you mean '101.3 kPa'?"),
    ("--pressure", "1013 Pa", "did you mean '1013 hPa'?"),
    ("--temperature", "294", "did you mean '294 K'?"),
    ("--humidity", "45", "did you mean '45 %'?")])
def test_values_plausible_in_another_unit(option, value, hint):
    err = one_line_exit_2(run("predict", JAR, option, value))
    assert hint in err and option in err


def _fit(*args):
    return run("fit", EXAMPLES / "listening-jar-04.flac", "--object", JAR, "--sweep",
               EXAMPLES / "sweep-48k.wav", *args)


def test_fit_bare_length_refused_asking_for_unit():
    err = one_line_exit_2(_fit("--outside-distance", "50"))
    assert "--outside-distance" in err and "has no unit" in err and "'18 mm'" in err


def test_fit_tolerance_and_band_with_units():
    a = json.loads(_fit("--json", "--tolerance", "3 %", "--band", "200 Hz", "0.29 kHz").stdout)
    b = json.loads(_fit("--json", "--tolerance", "0.03", "--band", "200", "290").stdout)
    assert a["checks"]["f0_tolerance"] == pytest.approx(0.03) == b["checks"]["f0_tolerance"]
    assert a["fit"]["band_hz"] == b["fit"]["band_hz"]
    assert a["fit"]["f0_hz"] == b["fit"]["f0_hz"]
    err = one_line_exit_2(_fit("--tolerance", "3"))
    assert "did you mean '3 %'?" in err


def test_sweep_options_with_units_and_json(tmp_path):
    out = tmp_path / "s.wav"
    res = run("sweep", out, "--start", "20 Hz", "--stop", "3 kHz", "--duration", "1500 ms",
              "--level", "-20 dBFS", "--rate", 16000, "--json")
    assert res.exit_code == 0, res.output
    doc = json.loads(res.stdout)
    assert doc["sweep"]["stop_hz"] == 3000.0 and doc["sweep"]["duration_s"] == 1.5
    assert doc["sweep"]["level_dbfs"] == -20.0
    assert "hearing" in res.stderr  # the caution is shown with --json too


# --- 12: one convention ----------------------------------------------------------

def test_trim_target_unit_and_out_folder(tmp_path):
    res = _fit("--out", tmp_path / "r")
    assert res.exit_code == 0, res.output
    a = run("trim", tmp_path / "r" / "result.json", "--target", "250 Hz", "--json")
    b = run("trim", tmp_path / "r" / "result.json", "--target", "250", "--out",
            tmp_path / "t")
    assert a.exit_code == 0 and b.exit_code == 0, (a.output, b.output)
    written = json.loads((tmp_path / "t" / "trim.json").read_text())
    assert written == json.loads(a.stdout)
    assert (tmp_path / "t" / "trim.txt").read_text().startswith(written["name"])
    # match writes to a folder too, and neither overwrites without --force
    assert _fit("--out", tmp_path / "r2", "--temperature", "20 degC").exit_code == 0
    m = run("match", tmp_path / "r", tmp_path / "r2", "--count", 2, "--target", "243 Hz",
            "--out", tmp_path / "m")
    assert m.exit_code == 0, m.output
    assert json.loads((tmp_path / "m" / "match.json").read_text())["count"] == 2
    assert "--force" in one_line_exit_2(run("match", tmp_path / "r", tmp_path / "r2",
                                            "--count", 2, "--target", 243, "--out",
                                            tmp_path / "m"))


def test_batch_json_prints_the_summary_document(tmp_path):
    src = EXAMPLES / "batch"
    for name in ("spec.toml", "reed-walk-jar.toml", "sweep-16k.wav", "sweep-16k.toml",
                 "jar-01.flac"):
        shutil.copy(src / name, tmp_path / name)
    (tmp_path / "m.csv").write_text("id,recording\njar-01,jar-01.flac\n", encoding="utf-8")
    res = run("batch", tmp_path / "m.csv", "--spec", tmp_path / "spec.toml", "--out",
              tmp_path / "out", "--workers", 1, "--json")
    doc = json.loads(res.stdout)
    assert doc == json.loads((tmp_path / "out" / "summary.json").read_text())
    assert [i["id"] for i in doc["items"]] == ["jar-01"]
    assert res.exit_code == (0 if doc["items"][0]["status"] == "pass" else 1)


def test_ctrl_c_exits_130(monkeypatch):
    import characterize.objectfile as objectfile

    def interrupted(*_a, **_k):
        raise KeyboardInterrupt

    monkeypatch.setattr(objectfile, "load_object", interrupted)
    res = run("predict", JAR)
    assert res.exit_code == 130
    assert "interrupted" in res.stderr and "Traceback" not in res.output


def test_top_level_help_shows_whole_summaries():
    res = run("--help")
    assert res.exit_code == 0
    commands = res.stdout.split("Commands:")[1]
    for name, cmd in main.commands.items():
        summary = " ".join((cmd.short_help or "").split())
        assert summary and summary in " ".join(commands.split()), name
        assert not summary.endswith("..."), name
    assert "..." not in commands


# --- 13: messages ----------------------------------------------------------------

def test_manifest_file_column_suggests_recording(tmp_path):
    (tmp_path / "m.csv").write_text("id,file\na,a.flac\n", encoding="utf-8")
    err = one_line_exit_2(run("batch", tmp_path / "m.csv", "--spec",
                              EXAMPLES / "batch" / "spec.toml", "--out", tmp_path / "o"))
    assert "did you mean 'recording'?" in err


def test_swapped_recording_and_sweep_says_so():
    err = one_line_exit_2(run("fit", EXAMPLES / "sweep-48k.wav", "--object", JAR, "--sweep",
                              EXAMPLES / "listening-jar-04.flac"))
    assert "swapped" in err and "object file" in err


def test_readme_tour_outputs_are_ignored():
    # every output folder or file the README's tour writes in the working folder
    # is either outside the checkout or in .gitignore
    import re

    root = Path(__file__).resolve().parent.parent
    ignored = (root / ".gitignore").read_text(encoding="utf-8").split()
    readme = (root / "README.md").read_text(encoding="utf-8")
    outs = set(re.findall(r"--out\s+\"?([a-z][\w./-]*)", readme))  # not DIR
    outs |= set(re.findall(r"characterize sweep (\S+)", readme))
    outs |= set(re.findall(r"--sketch (\S+)", readme))
    assert outs
    for o in outs:
        top = o.split("/")[0]
        assert (f"/{top}/" in ignored or f"/{top}" in ignored or o.startswith(("/", "~"))
                ), o
