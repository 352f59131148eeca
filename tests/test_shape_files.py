"""Object files for the shapes of issue 15 (neck profiles with cones, conical
cavity sections, ellipsoids, elliptic cylinders, tubes open at both ends):
parsing, the examples' predictions, and the one-line refusals (exit 2 naming the
file and the field)."""

from __future__ import annotations

import json
import math
from pathlib import Path

import pytest
from click.testing import CliRunner

from characterize.cli import main
from characterize.physics.air import air_state
from characterize.physics.helmholtz import predict

EXAMPLES = Path(__file__).resolve().parent.parent / "example_audio"

TAPERED = """\
name = "tapered"
[cavity]
shape = "profile"
sections = [["76 mm", "200 mm"], ["76 mm", "28 mm", "50 mm"]]
[neck]
shape = "profile"
sections = [["19 mm", "45 mm"], ["19 mm", "28 mm", "30 mm"]]
outer_end = "unflanged"
inner_end = "flanged"
"""
ELLIPSOID = """\
[cavity]
shape = "ellipsoid"
semi_axes = ["50 mm", "35 mm", "60 mm"]
[neck]
diameter = "18 mm"
length = "30 mm"
outer_end = "unflanged"
inner_end = "flanged"
"""
OVAL = """\
[cavity]
shape = "elliptic-cylinder"
semi_axes = ["40 mm", "25 mm"]
length = "100 mm"
[neck]
diameter = "20 mm"
length = "25 mm"
outer_end = "flanged"
inner_end = "flanged"
"""
OPEN_TUBE = """\
kind = "tube"
[tube]
diameter = "20 mm"
length = "300 mm"
open_end = "unflanged"
far_end = "flanged"
"""


def _load(tmp_path, text, name="obj.toml"):
    from characterize.objectfile import load_object

    p = tmp_path / name
    p.write_text(text, encoding="utf-8")
    return load_object(p)


def _predict_cli(tmp_path, text, *extra):
    p = tmp_path / "obj.toml"
    p.write_text(text, encoding="utf-8")
    return CliRunner().invoke(main, ["predict", str(p), *extra])


class TestParsing:
    def test_tapered_neck_and_conical_shoulder(self, tmp_path):
        obj = _load(tmp_path, TAPERED)
        neck, cav = obj.neck, obj.cavity
        assert neck.shape == "profile"
        assert neck.sections == ((0.019, 0.019, 0.045), (0.019, 0.028, 0.030))
        assert neck.diameter_m == 0.019 and neck.length_m == pytest.approx(0.075)
        assert neck.inner_diameter_m == 0.028
        assert cav.sections == ((0.076, 0.2), (0.076, 0.028, 0.05))
        # frustum volume pi L (D0^2 + D0 D1 + D1^2)/12 (textbook)
        v = math.pi * 0.076**2 / 4 * 0.2 + math.pi * 0.05 * (0.076**2 + 0.076 * 0.028
                                                             + 0.028**2) / 12
        assert cav.volume_m3 == pytest.approx(v, rel=1e-12)

    def test_round_trip_through_file_data(self, tmp_path):
        from characterize.objectfile import parse_object

        for text in (TAPERED, ELLIPSOID, OVAL, OPEN_TUBE):
            obj = _load(tmp_path, text)
            again = parse_object(obj.to_file_data(), obj.source_path)
            assert again.cavity == obj.cavity and again.neck == obj.neck

    def test_ellipsoid_and_oval(self, tmp_path):
        e = _load(tmp_path, ELLIPSOID).cavity
        assert e.semi_axes_m == (0.05, 0.035, 0.06)
        assert e.volume_m3 == pytest.approx(4 / 3 * math.pi * 0.05 * 0.035 * 0.06)
        o = _load(tmp_path, OVAL).cavity
        assert o.volume_m3 == pytest.approx(math.pi * 0.04 * 0.025 * 0.1)

    def test_open_tube(self, tmp_path):
        obj = _load(tmp_path, OPEN_TUBE)
        assert obj.kind == "tube" and obj.neck.inner_end == "flanged"
        # a tube without far_end is closed-open, as before
        closed = _load(tmp_path, OPEN_TUBE.replace('far_end = "flanged"\n', ""))
        assert closed.neck.inner_end == "closed"


class TestPredictOutput:
    @pytest.mark.parametrize("text, needles", [
        (TAPERED, ("profile (outside in)", "mass length", "inner (flanged)", "distributed")),
        (ELLIPSOID, ("cavity ellipsoid", "wall area", "3-D inner end correction")),
        (OVAL, ("cavity elliptic-cylinder", "distributed")),
        (OPEN_TUBE, ("open at both ends", "tube-distributed", "modes")),
    ])
    def test_intermediate_figures(self, tmp_path, text, needles):
        res = _predict_cli(tmp_path, text)
        assert res.exit_code == 0, res.stderr
        for needle in ("m/s", "mm", "kg/m⁴", "m³/Pa", "Pa·s/m³", "Q ", "lumped terms",
                       "sources", "smooth walls", *needles):
            assert needle in res.stdout, needle

    @pytest.mark.parametrize("name", ["flagon-neck-f5", "speaking-pipe-o2"])
    def test_examples_predict_and_sketch(self, tmp_path, name):
        out = tmp_path / f"{name}.png"
        res = CliRunner().invoke(main, ["predict", str(EXAMPLES / f"{name}.toml"), "--json",
                                        "--sketch", str(out)])
        assert res.exit_code == 0, res.stderr
        doc = json.loads(res.stdout)
        assert doc["prediction"]["f0_hz"] > 0
        assert out.stat().st_size > 0


@pytest.mark.parametrize("text, field", [
    # a neck profile whose sections do not join (the cone starts at 21 mm, not 19 mm)
    (TAPERED.replace('["19 mm", "28 mm", "30 mm"]', '["21 mm", "28 mm", "30 mm"]'),
     "neck.sections[2]"),
    # a cavity cone that does not join the cylinder below it
    (TAPERED.replace('["76 mm", "28 mm", "50 mm"]', '["70 mm", "28 mm", "50 mm"]'),
     "cavity.sections[2]"),
    # a cone with a negative length
    (TAPERED.replace('["19 mm", "28 mm", "30 mm"]', '["19 mm", "28 mm", "-30 mm"]'),
     "neck.sections[2].length"),
    # an ellipsoid with a zero axis
    (ELLIPSOID.replace('"35 mm"', '"0 mm"'), "cavity.semi_axes[2]"),
    # an ellipsoid with two axes
    (ELLIPSOID.replace(', "60 mm"]', "]"), "cavity.semi_axes"),
    # a tube without an end condition
    (OPEN_TUBE.replace('open_end = "unflanged"\n', ""), "tube.open_end"),
    (OPEN_TUBE.replace('far_end = "flanged"', 'far_end = "stopped"'), "tube.far_end"),
])
def test_bad_input_one_line_exit_2(tmp_path, text, field):
    res = _predict_cli(tmp_path, text)
    assert res.exit_code == 2
    err = res.stderr.strip()
    assert "\n" not in err and "Traceback" not in err
    assert "obj.toml" in err and field in err, err


def test_examples_against_their_own_closed_forms():
    from characterize.objectfile import load_object

    air = air_state(20.0, 0.0)
    pipe = predict(load_object(EXAMPLES / "speaking-pipe-o2.toml"), air)
    # half-wave, unflanged mouth and flanged far end: c/(2 (L + 0.6133a + 0.8216a))
    a = 0.014
    assert pipe.f0_lumped_hz == pytest.approx(
        air.speed_of_sound_m_s / (2 * (0.45 + (0.6133 + 0.8216) * a)), rel=1e-12)
    flagon = predict(load_object(EXAMPLES / "flagon-neck-f5.toml"), air)
    # the neck's mass length S_mouth * sum L/(pi r0 r1) (cone) + L (straight)
    s0 = math.pi * 0.011**2
    ml = 0.035 + s0 * 0.025 / (math.pi * 0.011 * 0.016)
    assert flagon.neck_mass_length_m == pytest.approx(ml, rel=1e-12)
