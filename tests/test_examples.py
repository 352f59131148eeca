"""The bundled example recordings against the truth they were simulated with.

example_audio/truth.json records what example_audio/make_examples.py put into
the simulator (f0, Q, channels, sweep). For every entry the command line must
recover f0 within 0.1 % and Q within 3 % (DESIGN.md section 4), write a result
document with the keys the issue lists, raise no warning for a clean recording
of a well-described object, and report the effective neck length as the
closed-form inversion of the lumped formula, computed here from the object
file's own numbers.
"""

from __future__ import annotations

import json
import math
import re
import tomllib
from pathlib import Path

import pytest
from click.testing import CliRunner

from characterize.cli import main

EXAMPLES = Path(__file__).resolve().parent.parent / "example_audio"
TRUTH = json.loads((EXAMPLES / "truth.json").read_text(encoding="utf-8"))

F0_REL_TOL = 1e-3  # 0.1 %, DESIGN.md section 4
Q_REL_TOL = 0.03  # 3 %, DESIGN.md section 4

#: The keys the issue lists, section by section (a listed section must be a dict).
REQUIRED_KEYS = {
    "input": ["recording", "sample_rate_hz", "inside_channel", "outside_channel", "method",
              "polarity_inverted"],
    "air": ["temperature_c", "relative_humidity", "pressure_pa", "speed_of_sound_m_s",
            "density_kg_m3"],
    "fit": ["f0_hz", "f0_stderr_hz", "q", "q_stderr", "gain", "delay_s", "band_hz",
            "n_points", "reduced_chi2"],
    "prediction": ["f0_hz", "effective_neck_length_m", "end_correction_m"],
    "derived": ["effective_neck_length_m", "end_correction_m", "end_correction_over_radius"],
}
FLAG_KEYS = {"code", "severity", "message"}

# Unit factors for the few unit strings the example object files use (test-side
# parsing, independent of characterize.units).
_LENGTH_M = {"m": 1.0, "cm": 1e-2, "mm": 1e-3}
_VOLUME_M3 = {"L": 1e-3, "mL": 1e-6, "m**3": 1.0, "cm**3": 1e-6}
_PRESSURE_PA = {"Pa": 1.0, "kPa": 1e3, "hPa": 1e2}


def _q(text: str, table: dict[str, float]) -> float:
    m = re.fullmatch(r"\s*([-+0-9.eE]+)\s*(\S+)\s*", text)
    assert m and m.group(2) in table, text
    return float(m.group(1)) * table[m.group(2)]


def _object_numbers(path: Path) -> dict[str, float]:
    data = tomllib.loads(path.read_text(encoding="utf-8"))
    air = data.get("air", {})
    out = {
        "volume_m3": _q(data["cavity"]["volume"], _VOLUME_M3),
        "diameter_m": _q(data["neck"]["diameter"], _LENGTH_M),
        "length_m": _q(data["neck"]["length"], _LENGTH_M),
    }
    if "temperature" in air:
        m = re.fullmatch(r"\s*([-+0-9.]+)\s*degC\s*", air["temperature"])
        assert m, air["temperature"]
        out["temperature_c"] = float(m.group(1))
    if "relative_humidity" in air:
        rh = air["relative_humidity"]
        out["relative_humidity"] = (float(rh.strip().rstrip("%")) / 100
                                    if isinstance(rh, str) else float(rh))
    if "pressure" in air:
        out["pressure_pa"] = _q(air["pressure"], _PRESSURE_PA)
    return out


def _args(entry: dict, *, with_object: bool = True) -> list[str]:
    args = ["fit", str(EXAMPLES / entry["recording"]),
            "--inside", str(entry["inside"]), "--outside", str(entry["outside"]), "--json"]
    if with_object:
        args += ["--object", str(EXAMPLES / entry["object"])]
    if entry.get("sweep"):
        args += ["--sweep", str(EXAMPLES / entry["sweep"])]
    return args


def _run(args: list[str]):
    res = CliRunner().invoke(main, args)
    assert res.exit_code == 0, (res.exit_code, res.stderr, res.exception)
    return json.loads(res.stdout)


@pytest.fixture(scope="module", params=sorted(TRUTH), ids=sorted(TRUTH))
def example(request, tmp_path_factory):
    """One CLI run per example with --json and --out: (name, entry, doc, out dir)."""
    name = request.param
    entry = TRUTH[name]
    out = tmp_path_factory.mktemp(name) / "out"
    doc = _run(_args(entry) + ["--out", str(out)])
    return name, entry, doc, out


def test_truth_file_lists_every_example():
    recordings = {p.name for p in EXAMPLES.glob("*.flac")} | {p.name for p in
                                                              EXAMPLES.glob("*.wav")}
    listed = {e["recording"] for e in TRUTH.values()}
    sweeps = {e["sweep"] for e in TRUTH.values() if e.get("sweep")}
    assert listed, "truth.json is empty"
    assert recordings - sweeps == listed


def test_f0_and_q_match_truth(example):
    _, entry, doc, _ = example
    fit = doc["fit"]
    assert fit["f0_hz"] == pytest.approx(entry["f0_hz"], rel=F0_REL_TOL), fit
    assert fit["q"] == pytest.approx(entry["q"], rel=Q_REL_TOL), fit


def test_document_schema_and_keys(example):
    _, entry, doc, _ = example
    assert doc["schema"] == "characterize.result/1"
    for section, keys in REQUIRED_KEYS.items():
        assert isinstance(doc[section], dict), section
        missing = [k for k in keys if k not in doc[section]]
        assert not missing, f"{section} lacks {missing}"
    assert isinstance(doc["flags"], list)
    for flag in doc["flags"]:
        assert set(flag) == FLAG_KEYS, flag
        assert flag["severity"] in ("info", "warning", "error")
        assert flag["message"] and "\n" not in flag["message"]

    inp = doc["input"]
    assert Path(inp["recording"]).name == entry["recording"]
    assert inp["sample_rate_hz"] == entry["rate_hz"]
    assert inp["inside_channel"] == entry["inside"]
    assert inp["outside_channel"] == entry["outside"]
    assert isinstance(inp["method"], str) and inp["method"]
    # make_examples.py does not invert any channel
    assert inp["polarity_inverted"] is bool(entry.get("polarity_inverted", False))

    fit = doc["fit"]
    lo, hi = fit["band_hz"]
    assert lo < fit["f0_hz"] < hi
    assert isinstance(fit["n_points"], int) and fit["n_points"] > 4
    assert fit["f0_stderr_hz"] > 0 and fit["q_stderr"] > 0
    assert math.isfinite(fit["reduced_chi2"]) and fit["reduced_chi2"] > 0
    assert fit["gain"] == pytest.approx(entry["gain"], rel=0.02)
    assert fit["delay_s"] == pytest.approx(entry["delay_s"], abs=20e-6)


def test_air_from_the_object_file(example):
    _, entry, doc, _ = example
    given = _object_numbers(EXAMPLES / entry["object"])
    air = doc["air"]
    for key in ("temperature_c", "relative_humidity", "pressure_pa"):
        if key in given:
            assert air[key] == pytest.approx(given[key], rel=1e-9), key
    t_k = air["temperature_c"] + 273.15
    # dry-air ideal gas, c = 331.3 sqrt(T/273.15) m/s (common practice); humidity
    # raises c by well under 1 % at room temperature
    assert air["speed_of_sound_m_s"] == pytest.approx(331.3 * math.sqrt(t_k / 273.15), rel=0.01)
    # rho = p / (R_dry T), R_dry = 287.05 J/(kg K) (common practice); humid air is lighter
    assert air["density_kg_m3"] == pytest.approx(air["pressure_pa"] / (287.05 * t_k), rel=0.02)


def test_no_warning_flags(example):
    _, _, doc, _ = example
    bad = [f for f in doc["flags"] if f["severity"] in ("warning", "error")]
    assert not bad, bad


def test_derived_length_is_the_closed_form_inversion(example):
    _, entry, doc, _ = example
    obj = _object_numbers(EXAMPLES / entry["object"])
    c = doc["air"]["speed_of_sound_m_s"]
    f0 = doc["fit"]["f0_hz"]
    radius = obj["diameter_m"] / 2
    area = math.pi * radius**2
    # L_eff = S c^2 / ((2 pi f0)^2 V): the lumped Helmholtz formula inverted
    # (Rayleigh 1896, Theory of Sound II, sections 303-306; from memory)
    l_eff = area * c**2 / ((2 * math.pi * f0) ** 2 * obj["volume_m3"])
    derived = doc["derived"]
    assert derived["effective_neck_length_m"] == pytest.approx(l_eff, rel=1e-9)
    assert derived["end_correction_m"] == pytest.approx(l_eff - obj["length_m"], rel=1e-9)
    assert derived["end_correction_over_radius"] == pytest.approx(
        (l_eff - obj["length_m"]) / radius, rel=1e-9)

    pred = doc["prediction"]
    assert pred["effective_neck_length_m"] == pytest.approx(
        obj["length_m"] + pred["end_correction_m"], rel=1e-12)
    assert pred["f0_hz"] == pytest.approx(
        c / (2 * math.pi) * math.sqrt(area / (obj["volume_m3"] * pred["effective_neck_length_m"])),
        rel=1e-9)


def test_out_writes_result_and_png(example):
    _, _, doc, out = example
    written = json.loads((out / "result.json").read_text(encoding="utf-8"))
    assert written == doc
    png = (out / "response.png").read_bytes()
    assert len(png) > 1000
    assert png.startswith(b"\x89PNG\r\n\x1a\n")


@pytest.mark.parametrize("name", sorted(TRUTH))
def test_without_object_prediction_and_derived_are_null(name):
    entry = TRUTH[name]
    doc = _run(_args(entry, with_object=False))
    assert doc["schema"] == "characterize.result/1"
    assert doc["prediction"] is None
    assert doc["derived"] is None
    assert doc["fit"]["f0_hz"] == pytest.approx(entry["f0_hz"], rel=F0_REL_TOL)
