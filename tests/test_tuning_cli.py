"""The tuning commands end to end: trim, series, match, levels (click CliRunner).

Checks against outside references (named beside each):

- the bundled examples' truth (example_audio/*/truth.json, written by their
  generators from the lumped law and the physics sheet's level model) and the
  lumped law evaluated independently with helmholtz_f0_hz on the true geometry;
- DESIGN.md section 3 for the error policy: bad input exits 2 with ONE line on
  stderr and no traceback; a failed item in a series exits 1 after the others
  were fitted; outputs are not overwritten without --force.

Recordings beyond the bundled ones are simulated here, under tmp_path, with the
seeded simulator at 16 kHz (short and fast).
"""

from __future__ import annotations

import base64
import itertools
import json
import math
import shutil
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner
from html_page import HtmlPage

from characterize import SCHEMA
from characterize.cli import main
from characterize.commands.levels import CAUTION
from characterize.objectfile import load_object
from characterize.physics.air import air_state
from characterize.physics.helmholtz import helmholtz_f0_hz

EXAMPLES = Path(__file__).resolve().parent.parent / "example_audio"
TRIM = EXAMPLES / "trim-series"
LEVELS = EXAMPLES / "level-series"


def run(*args: str) -> tuple[int, str, str]:
    r = CliRunner().invoke(main, [str(a) for a in args], catch_exceptions=False)
    return r.exit_code, r.stdout, r.stderr


def assert_one_line_error(code: int, err: str, *needles: str, status: int = 2) -> None:
    assert code == status, err
    lines = [ln for ln in err.strip().splitlines() if ln.strip()]
    assert len(lines) == 1, err
    assert "Traceback" not in err
    for n in needles:
        assert n in lines[0], lines[0]


@pytest.fixture(scope="module")
def trim_truth() -> dict:
    return json.loads((TRIM / "truth.json").read_text())


@pytest.fixture(scope="module")
def series_out(tmp_path_factory: pytest.TempPathFactory) -> tuple[Path, str]:
    out = tmp_path_factory.mktemp("series") / "out"
    code, stdout, err = run("series", TRIM / "manifest.csv", "--vary", "neck-length", "--out", out)
    assert code == 0, err
    return out, stdout


@pytest.fixture(scope="module")
def fitted_l44(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """The first trim step fitted with the object file, as the README's tour does."""
    out = tmp_path_factory.mktemp("fit") / "jar07"
    code, _, err = run("fit", TRIM / "jar07-L44.flac", "--object", TRIM / "listening-jar-07.toml",
                       "--sweep", TRIM / "sweep-16k.wav", "--temperature", "19.6", "--out", out)
    assert code == 0, err
    return out / "result.json"


# ==========================================================================
# series
# ==========================================================================


def test_series_example_recovers_the_true_end_correction(series_out: tuple[Path, str],
                                                         trim_truth: dict) -> None:
    out, stdout = series_out
    doc = json.loads((out / "series.json").read_text())
    assert (out / "series.png").stat().st_size > 0
    assert doc["schema"] == "characterize.series/1" and len(doc["points"]) == 6
    delta, se = doc["end_correction_m"], doc["end_correction_stderr_m"]
    # example truth: the generator's end correction (1.32 neck radii)
    assert abs(delta - trim_truth["end_correction_m"]) <= 3 * se
    assert abs(delta - trim_truth["end_correction_m"]) < 0.1e-3
    assert doc["volume_m3"] == pytest.approx(620e-6, rel=2e-3)  # the object file's volume
    # the per-point temperatures (19.6 to 22.4 degC) are flagged and corrected
    assert "temperature-spread" in [f["code"] for f in doc["flags"]]
    assert "end correction" in stdout and "neck radii" in stdout


def test_series_json_and_no_overwrite(series_out: tuple[Path, str]) -> None:
    out, _ = series_out
    code, _, err = run("series", TRIM / "manifest.csv", "--vary", "neck-length", "--out", out)
    assert_one_line_error(code, err, "series.json", "--force")


def test_series_with_failed_item_exits_1(tmp_path: Path) -> None:
    """A broken recording among good ones: the others are fitted, exit status 1."""
    lines = (TRIM / "manifest.csv").read_text().splitlines()
    bad = tmp_path / "broken.flac"
    bad.write_bytes(b"not audio at all" * 50)
    rows = [lines[0]]
    for ln in lines[1:]:
        cells = ln.split(",")
        for i in (1, 2, 3, 4):
            if cells[i]:
                cells[i] = str(TRIM / cells[i])
        rows.append(",".join(cells))
    rows.append(f"broken,{bad},,{TRIM / 'listening-jar-07.toml'},{TRIM / 'sweep-16k.wav'},"
                "20 mm,22.5 degC,")
    m = tmp_path / "m.csv"
    m.write_text("\n".join(rows) + "\n")
    code, stdout, err = run("series", m, "--vary", "neck-length", "--json")
    assert code == 1, err
    doc = json.loads(stdout)
    assert len(doc["points"]) == 6
    assert [f["id"] for f in doc["failures"]] == ["broken"]
    assert "item-failed" in [f["code"] for f in doc["flags"]]


def _simulate(path: Path, f0: float, q: float, seed: int, sweep: Path) -> None:
    from characterize.excitation import load_sweep
    from characterize.simulate import Setup, simulate, write_recording

    sw = load_sweep(sweep)
    data, _ = simulate(Setup(f0_hz=f0, q=q, rate_hz=16000.0, snr_db=34.0, sweep=sw.params),
                       seed=seed)
    write_recording(str(path), data, 16000.0, "PCM_16")


def test_fill_series_from_recordings(tmp_path: Path) -> None:
    """A simulated fill series (water poured into the jar): the empty volume and the
    effective length come back within their errors (truth: the lumped law)."""
    shutil.copy(TRIM / "sweep-16k.wav", tmp_path)
    shutil.copy(TRIM / "sweep-16k.toml", tmp_path)
    obj_path = tmp_path / "jar.toml"
    obj_path.write_text((TRIM / "listening-jar-07.toml").read_text())
    obj = load_object(obj_path)
    air = air_state(temperature_c=20.0, relative_humidity=0.55, pressure_pa=101200.0)
    l_eff = obj.neck.length_m + 1.3 * obj.neck.radius_m
    rows = ["id,recording,object,sweep,fill_volume,temperature"]
    for i, v_ml in enumerate((0, 60, 120, 180, 240)):
        f0 = helmholtz_f0_hz(air.speed_of_sound_m_s, obj.neck.area_m2,
                             obj.cavity.volume_m3 - v_ml * 1e-6, l_eff)
        _simulate(tmp_path / f"w{v_ml}.flac", f0, 35.0, 60 + i, tmp_path / "sweep-16k.wav")
        rows.append(f"w{v_ml},w{v_ml}.flac,jar.toml,sweep-16k.wav,{v_ml} mL,20 degC")
    (tmp_path / "fill.csv").write_text("\n".join(rows) + "\n")
    code, stdout, err = run("series", tmp_path / "fill.csv", "--vary", "volume", "--json")
    assert code == 0, err
    doc = json.loads(stdout)
    assert abs(doc["volume_m3"] - obj.cavity.volume_m3) <= 4 * doc["volume_stderr_m3"]
    assert abs(doc["effective_neck_length_m"] - l_eff) <= 4 * doc["effective_neck_length_stderr_m"]
    # the wrong column for this manifest: one line, exit 2
    code, _, err = run("series", tmp_path / "fill.csv", "--vary", "neck-length")
    assert_one_line_error(code, err, "fill_volume", "unknown column")


@pytest.mark.parametrize("edit,needles", [
    (lambda rows: rows[:3], ("at least 3",)),
    (lambda rows: rows[:2] + [rows[2].replace("40 mm", "44 mm")] + rows[3:], ("duplicate",)),
    (lambda rows: [rows[0].replace("neck_length", "neck_len")] + rows[1:],
     ("neck_len", "did you mean 'neck_length'")),
    (lambda rows: [rows[0].replace(",neck_length", ",note2")] + rows[1:], ("unknown column",)),
    (lambda rows: rows[:1], ("no items",)),
    (lambda rows: rows[:1] + [rows[1].replace("44 mm", "44")] + rows[2:], ("no unit",)),
])
def test_series_bad_manifests(tmp_path: Path, edit, needles: tuple[str, ...]) -> None:
    rows = (TRIM / "manifest.csv").read_text().splitlines()
    for name in ("listening-jar-07.toml", "sweep-16k.wav", "sweep-16k.toml", "jar07-L24.json"):
        shutil.copy(TRIM / name, tmp_path)
    for name in ("jar07-L44.flac", "jar07-L40.flac", "jar07-L36.flac", "jar07-L32.flac",
                 "jar07-L28.flac"):
        (tmp_path / name).symlink_to(TRIM / name)
    m = tmp_path / "m.csv"
    m.write_text("\n".join(edit(rows)) + "\n")
    code, _, err = run("series", m, "--vary", "neck-length")
    assert_one_line_error(code, err, str(m), *needles)


def test_series_rejects_other_schema(tmp_path: Path) -> None:
    doc = json.loads((TRIM / "jar07-L24.json").read_text())
    rows = ["id,result,neck_length"]
    for i, length in enumerate((40, 32, 24)):
        d = dict(doc, schema="characterize.result/9" if i == 1 else SCHEMA)
        (tmp_path / f"r{i}.json").write_text(json.dumps(d))
        rows.append(f"r{i},r{i}.json,{length} mm")
    (tmp_path / "m.csv").write_text("\n".join(rows) + "\n")
    code, _, err = run("series", tmp_path / "m.csv", "--vary", "neck-length")
    assert_one_line_error(code, err, "r1.json", "schema", "characterize.result/1")


# ==========================================================================
# trim
# ==========================================================================


def test_trim_advice_hits_the_target(fitted_l44: Path, trim_truth: dict) -> None:
    code, stdout, err = run("trim", fitted_l44, "--target", "195", "--json")
    assert code == 0, err
    adv = json.loads(stdout)
    assert adv["schema"] == "characterize.trim/1"
    obj = load_object(TRIM / "listening-jar-07.toml")
    c = trim_truth["steps"][0]["speed_of_sound_m_s"]
    delta = trim_truth["end_correction_m"]  # the jar's true end correction (example truth)
    new_len = obj.neck.length_m - adv["neck"]["cut_m"]
    f = helmholtz_f0_hz(c, obj.neck.area_m2, obj.cavity.volume_m3, new_len + delta)
    assert f == pytest.approx(195.0, rel=1e-3)  # the check: within 0.1 %
    f_v = helmholtz_f0_hz(c, obj.neck.area_m2, adv["volume"]["new_volume_m3"],
                          obj.neck.length_m + delta)
    assert f_v == pytest.approx(195.0, rel=1e-3)
    code, text, _ = run("trim", fitted_l44, "--target", "195")
    assert code == 0 and "cut" in text and "mm" in text and "mL" in text


def test_trim_one_way_and_impossible(fitted_l44: Path) -> None:
    code, stdout, _ = run("trim", fitted_l44, "--target", "170", "--json")
    assert code == 0
    adv = json.loads(stdout)
    assert not adv["neck"]["possible"] and adv["neck"]["cut_m"] < 0
    assert "trim-one-way" in [f["code"] for f in adv["flags"]]
    code, stdout, _ = run("trim", fitted_l44, "--target", "500")
    assert code == 0 and "impossible" in stdout and "trim-impossible" in stdout


def test_trim_with_object_option(tmp_path: Path, fitted_l44: Path) -> None:
    doc = json.loads(fitted_l44.read_text())
    doc["object"] = doc["prediction"] = doc["derived"] = None
    bare = tmp_path / "bare.json"
    bare.write_text(json.dumps(doc))
    code, _, err = run("trim", bare, "--target", "190")
    assert_one_line_error(code, err, "bare.json", "--object")
    code, stdout, err = run("trim", bare, "--target", "190", "--object",
                            TRIM / "listening-jar-07.toml", "--json")
    assert code == 0, err
    with_obj = json.loads(run("trim", fitted_l44, "--target", "190", "--json")[1])
    assert json.loads(stdout)["neck"]["cut_m"] == pytest.approx(with_obj["neck"]["cut_m"],
                                                                rel=1e-12)


@pytest.mark.parametrize("target", ["0", "-10"])
def test_trim_bad_target(fitted_l44: Path, target: str) -> None:
    code, _, err = run("trim", fitted_l44, "--target", target)
    assert_one_line_error(code, err, "--target", "> 0")


def test_trim_bad_documents(tmp_path: Path) -> None:
    p = tmp_path / "r.json"
    p.write_text(json.dumps({"schema": "characterize.result/0", "fit": {}}))
    code, _, err = run("trim", p, "--target", "200")
    assert_one_line_error(code, err, "r.json", "schema")
    code, _, err = run("trim", tmp_path / "missing.json", "--target", "200")
    assert_one_line_error(code, err, "missing.json", "not found")
    p.write_text("{")
    code, _, err = run("trim", p, "--target", "200")
    assert_one_line_error(code, err, "not valid JSON")


# ==========================================================================
# match
# ==========================================================================


@pytest.fixture()
def jar_docs(tmp_path: Path) -> list[Path]:
    """Twelve result documents of sibling jars (the example document with its f0 and
    Q changed, seeded)."""
    base = json.loads((TRIM / "jar07-L24.json").read_text())
    rng = np.random.default_rng(12)
    paths = []
    for i in range(12):
        d = json.loads(json.dumps(base))
        d["object"]["name"] = f"jar-{i:02d}"
        d["fit"]["f0_hz"] = float(rng.normal(220, 4))
        d["fit"]["q"] = float(rng.normal(32, 3))
        p = tmp_path / f"jar-{i:02d}" / "result.json"
        p.parent.mkdir()
        p.write_text(json.dumps(d))
        paths.append(p)
    return paths


def test_match_picks_the_best_set(jar_docs: list[Path]) -> None:
    code, stdout, err = run("match", *jar_docs, "--count", "4", "--target", "221", "--json")
    assert code == 0, err
    m = json.loads(stdout)
    f0 = {p.parent.name: json.loads(p.read_text())["fit"]["f0_hz"] for p in jar_docs}
    # brute force over all 4-subsets (itertools): spread + offset of the centre
    best = min(itertools.combinations(f0, 4),
               key=lambda c: (max(f0[k] for k in c) - min(f0[k] for k in c))
               + abs((max(f0[k] for k in c) + min(f0[k] for k in c)) / 2 - 221))
    assert set(m["best"]["ids"]) == set(best)
    assert len(m["alternatives"]) == 3
    chosen = [f0[k] for k in m["best"]["ids"]]
    assert m["best"]["f0_range_hz"] == pytest.approx(max(chosen) - min(chosen))
    # folders holding result.json work too, and --by f0,q runs
    code, text, err = run("match", *[p.parent for p in jar_docs], "--count", "3", "--target",
                          "221", "--by", "f0,q")
    assert code == 0, err and "best" in text


def test_match_bad_input(jar_docs: list[Path], tmp_path: Path) -> None:
    code, _, err = run("match", *jar_docs[:3], "--count", "4", "--target", "220")
    assert_one_line_error(code, err, "--count", "only 3")
    code, _, err = run("match", *jar_docs[:3], "--count", "2", "--target", "0")
    assert_one_line_error(code, err, "--target")
    other = tmp_path / "other.json"
    doc = json.loads(jar_docs[0].read_text())
    doc["schema"] = "something.else/1"
    other.write_text(json.dumps(doc))
    code, _, err = run("match", *jar_docs[:3], other, "--count", "2", "--target", "220")
    assert_one_line_error(code, err, "other.json", "schema")


# ==========================================================================
# levels
# ==========================================================================


def test_levels_example(tmp_path: Path) -> None:
    truth = json.loads((LEVELS / "truth.json").read_text())
    out = tmp_path / "lv"
    code, stdout, err = run("levels", LEVELS / "manifest.csv", "--out", out)
    assert code == 0, err
    assert "hearing protection" in err and "regulations" in err  # the caution above 110 dB
    doc = json.loads((out / "levels.json").read_text())
    assert (out / "levels.png").stat().st_size > 0
    # example truth: Q from the sheet's quasi-steady model, 1/Q = 1/Q0 + beta p; the
    # onset (Q down 10 %) where beta p = (1/9)/Q0
    q0 = truth["q0"]
    lv = truth["levels"][-1]
    p_top = 20e-6 * 10 ** (lv["spl_db"] / 20)
    beta = (1 / lv["q"] - 1 / q0) / p_top
    onset_true = 20 * math.log10((1 / 9) / (q0 * beta) / 20e-6)
    assert abs(doc["q_small_signal"] - q0) <= 4 * doc["q_small_signal_stderr"]
    assert abs(doc["onset_spl_db"] - onset_true) <= max(4 * doc["onset_spl_stderr_db"], 0.05)
    xd = [p["displacement_over_diameter"] for p in doc["points"]]
    np.testing.assert_allclose(xd, [t["displacement_over_diameter"] for t in truth["levels"]],
                               rtol=1e-9)
    assert "onset" in stdout


def test_levels_force_table(tmp_path: Path) -> None:
    code, stdout, err = run("levels", LEVELS / "balance.csv", "--json")
    assert code == 0, err
    p = json.loads(stdout)
    assert p["schema"] == "characterize.power-law/1"
    # the example's balance readings follow F ~ p^2 (a second-order effect)
    assert abs(p["exponent"] - 2.0) <= 3 * p["exponent_stderr"]
    assert p["consistent_with_square_law"]
    out = tmp_path / "pl"
    code, _, err = run("levels", LEVELS / "balance.csv", "--out", out)
    assert code == 0 and (out / "levels.png").stat().st_size > 0


def test_levels_from_calibrated_documents(tmp_path: Path) -> None:
    """Result documents with a drive block (calibrated levels): no spl_db column needed."""
    base = json.loads((TRIM / "jar07-L24.json").read_text())
    rows = ["id,result"]
    q0, beta = 33.0, (1 / 9) / (33.0 * 20.0)  # onset at 20 Pa rms = 120.0 dB
    for i, spl in enumerate((100.0, 110.0, 116.0, 122.0, 128.0)):
        d = json.loads(json.dumps(base))
        p = 20e-6 * 10 ** (spl / 20)
        d["fit"]["q"] = 1 / (1 / q0 + beta * p)
        d["fit"]["q_stderr"] = 0.01
        d["drive"] = {"cavity_spl_db": spl, "displacement_over_diameter": 1e-3 * p}
        (tmp_path / f"d{i}.json").write_text(json.dumps(d))
        rows.append(f"d{i},d{i}.json")
    (tmp_path / "m.csv").write_text("\n".join(rows) + "\n")
    code, stdout, err = run("levels", tmp_path / "m.csv", "--json")
    assert code == 0, err
    doc = json.loads(stdout)
    assert {p["spl_source"] for p in doc["points"]} == {"result"}
    assert doc["onset_spl_db"] == pytest.approx(20 * math.log10(20.0 / 20e-6), abs=1e-6)
    assert doc["onset_displacement_over_diameter"] == pytest.approx(0.02, rel=1e-6)


@pytest.mark.parametrize("text,needles", [
    ("spl_db,force_n\n120,1e-4\n130,-1e-3\n140,1e-2\n", ("> 0",)),
    ("spl_db,force_n\n120,1e-4\n130,1e-3\n", ("at least 3",)),
    ("spl_db,force_n\n120,1e-4\n120,1e-3\n130,1e-2\n", ("duplicate",)),
    ("spl_db,newtons\n120,1e-4\n", ("unknown column", "newtons")),
    ("level,force_n\n120,1e-4\n", ("level",)),
])
def test_levels_bad_tables(tmp_path: Path, text: str, needles: tuple[str, ...]) -> None:
    p = tmp_path / "t.csv"
    p.write_text(text)
    code, _, err = run("levels", p)
    assert_one_line_error(code, err, *needles)


def test_levels_manifest_needs_levels(tmp_path: Path) -> None:
    rows = ["id,result"] + [f"r{i},{TRIM / 'jar07-L24.json'}" for i in range(3)]
    (tmp_path / "m.csv").write_text("\n".join(rows) + "\n")
    code, _, err = run("levels", tmp_path / "m.csv")
    assert_one_line_error(code, err, "spl_db")
    (tmp_path / "m.csv").write_text("id,result,spl_db\nr0," + str(TRIM / "jar07-L24.json")
                                    + ",100\n")
    code, _, err = run("levels", tmp_path / "m.csv")
    assert_one_line_error(code, err, "at least 3")


def test_levels_help_has_the_caution() -> None:
    code, stdout, _ = run("levels", "--help")
    assert code == 0
    text = " ".join(stdout.split())
    for needle in ("hearing protection", "110 dB", "exposure", "regulations"):
        assert needle in text


# ==========================================================================
# Start-up: the command modules import only click and the standard library
# ==========================================================================


def test_command_modules_are_light() -> None:
    code = ("import sys\n"
            "import characterize.commands.trim, characterize.commands.series, "
            "characterize.commands.match, characterize.commands.levels\n"
            "heavy = [m for m in ('numpy', 'scipy', 'matplotlib', 'lmfit', 'pint') "
            "if m in sys.modules]\n"
            "print(','.join(heavy))\n")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True).stdout.strip()
    assert out == ""


# ==========================================================================
# report.html and report.pdf of series and levels
# ==========================================================================


def _check_report(out: Path, png_name: str) -> tuple[str, str]:
    """report.html is self-contained (the plot embedded byte for byte as a data URI,
    no scripts, scoped headers); report.pdf is a PDF whose last page holds the plot.
    Returns the page's text and the PDF's text."""
    from pypdf import PdfReader

    page = HtmlPage()
    page.feed((out / "report.html").read_text(encoding="utf-8"))
    assert page.scripts == 0
    assert len(page.imgs) == 1 and len(page.imgs[0].get("alt", "")) > 40
    src = page.imgs[0]["src"]
    assert src.startswith("data:image/png;base64,")
    assert base64.b64decode(src.split(",", 1)[1]) == (out / png_name).read_bytes()
    assert page.th_scopes and all(s in ("col", "row") for s in page.th_scopes)
    pdf = out / "report.pdf"
    assert pdf.read_bytes()[:5] == b"%PDF-"  # the PDF signature (ISO 32000-1, 7.5.2)
    reader = PdfReader(str(pdf))
    assert len(reader.pages) >= 2 and len(reader.pages[-1].images) == 1
    pdf_text = " ".join(" ".join(p.extract_text().split()) for p in reader.pages)
    assert f"page 1 of {len(reader.pages)}" in pdf_text
    return " ".join("".join(page.text).split()), pdf_text


def test_series_reports(series_out: tuple[Path, str]) -> None:
    out, _ = series_out
    doc = json.loads((out / "series.json").read_text())
    html, pdf = _check_report(out, "series.png")
    delta_mm = f"{1e3 * doc['end_correction_m']:.3f}"
    for text in (html, pdf):
        assert f"end correction δ = {delta_mm}" in text  # the fitted value, as printed
        assert all(p["id"] in text for p in doc["points"])
        assert "temperature-spread" in text  # the example's flag (a 2.8 K drift)
        assert "hearing protection" not in text  # no drive-level caution on a series


def test_levels_reports_carry_the_caution(tmp_path: Path) -> None:
    out = tmp_path / "lv"
    code, _, err = run("levels", LEVELS / "manifest.csv", "--out", out)
    assert code == 0, err
    doc = json.loads((out / "levels.json").read_text())
    html, pdf = _check_report(out, "levels.png")
    for text in (html, pdf):
        # the example reaches 136 dB: the caution of the levels command is on the report
        assert " ".join(CAUTION.split()) in text
        assert f"{doc['onset_spl_db']:.2f}" in text
    # the force table's report: its own table and plot, and the caution (up to 140 dB)
    out2 = tmp_path / "pl"
    code, _, err = run("levels", LEVELS / "balance.csv", "--out", out2)
    assert code == 0, err
    doc2 = json.loads((out2 / "levels.json").read_text())
    html, pdf = _check_report(out2, "levels.png")
    assert f"n = {doc2['exponent']:.3f}" in html and f"n = {doc2['exponent']:.3f}" in pdf
    assert (" ".join(CAUTION.split()) in html) == (max(doc2["spl_db"]) >= 110)


def test_level_report_without_high_levels_has_no_caution() -> None:
    from characterize.report.tuning_report import levels_page, power_law_page
    from characterize.tuning import LevelPoint, fit_power_law, level_study

    spl = np.array([70.0, 76.0, 82.0, 88.0, 94.0])
    pts = [LevelPoint(f"p{k}", float(s), "manifest", 243.0, 0.01, 38.0 - 0.01 * k, 0.05)
           for k, s in enumerate(spl)]
    assert levels_page(level_study(pts), "m.csv").caution is None
    p = 20e-6 * 10 ** (spl / 20)
    assert power_law_page(fit_power_law(spl, 1e-8 * p**2), "f.csv").caution is None
    loud = [LevelPoint("loud", 110.0, "manifest", 243.0, 0.01, 37.0, 0.05)]
    assert levels_page(level_study(pts + loud), "m.csv").caution == CAUTION


@pytest.mark.parametrize("command", [("series", str(TRIM / "manifest.csv"), "--vary",
                                      "neck-length"),
                                     ("levels", str(LEVELS / "manifest.csv"))])
@pytest.mark.parametrize("name", ["report.html", "report.pdf"])
def test_study_reports_are_not_overwritten(tmp_path: Path, command: tuple[str, ...],
                                           name: str) -> None:
    out = tmp_path / "out"
    out.mkdir()
    (out / name).write_text("keep me", encoding="utf-8")
    code, _, err = run(*command, "--out", out)
    assert_one_line_error(code, err, name, "--force")
    assert (out / name).read_text(encoding="utf-8") == "keep me"
    assert sorted(p.name for p in out.iterdir()) == [name]  # nothing written before the check
    code, _, err = run(*command, "--out", out, "--force")
    assert code == 0, err
    assert (out / name).read_bytes()[:2] in (b"<!", b"%P")


def test_study_report_unwritable_is_one_line(tmp_path: Path) -> None:
    out = tmp_path / "out"
    (out / "report.pdf").mkdir(parents=True)  # a directory where the PDF should go
    code, _, err = run("series", TRIM / "manifest.csv", "--vary", "neck-length", "--out", out)
    assert_one_line_error(code, err, "report.pdf", "directory")
