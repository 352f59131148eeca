"""Tests for characterize.physics.geometry: the object file."""

from __future__ import annotations

import dataclasses
import json
import math
import re

import pytest

from characterize.errors import InputError
from characterize.physics.geometry import (
    END_CONDITIONS,
    AirOverrides,
    ResonatorObject,
    load_object,
    parse_object,
)

GOOD = """\
name = "jar-07"
[cavity]
volume = "355 mL"
[neck]
diameter = "18 mm"
length = "40 mm"
outer_end = "unflanged"
inner_end = "flanged"
[air]
temperature = "21 degC"
relative_humidity = 0.45
pressure = "101.325 kPa"
"""


def _write(tmp_path, text: str, name: str = "jar.toml"):
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


def _replace(line_start: str, new_line: str) -> str:
    """GOOD with the line starting ``line_start`` replaced (or removed if new_line == '')."""
    lines = [new_line if ln.startswith(line_start) else ln for ln in GOOD.splitlines()]
    assert lines != GOOD.splitlines(), f"no line starts with {line_start!r}"
    return "\n".join(ln for ln in lines if ln) + "\n"


def _raises(tmp_path, text: str, field_pattern: str):
    path = _write(tmp_path, text)
    with pytest.raises(InputError, match=rf"^{re.escape(str(path))}: {field_pattern}") as info:
        load_object(path)
    assert "\n" not in str(info.value)
    return info.value


class TestGoodFile:
    def test_values_in_si(self, tmp_path):
        obj = load_object(_write(tmp_path, GOOD))
        assert obj.name == "jar-07"
        assert obj.cavity.volume_m3 == pytest.approx(355e-6, rel=1e-12)  # 1 mL = 1e-6 m^3
        assert obj.neck.diameter_m == pytest.approx(0.018, rel=1e-12)
        assert obj.neck.length_m == pytest.approx(0.040, rel=1e-12)
        assert obj.neck.radius_m == pytest.approx(0.009, rel=1e-12)
        assert obj.neck.area_m2 == pytest.approx(math.pi * 0.009**2, rel=1e-12)
        assert (obj.neck.outer_end, obj.neck.inner_end) == ("unflanged", "flanged")
        assert obj.air == AirOverrides(
            temperature_c=pytest.approx(21.0),
            relative_humidity=0.45,
            pressure_pa=pytest.approx(101325.0),
        )
        assert obj.source_path == str(tmp_path / "jar.toml")

    def test_round_trip_through_file_data(self, tmp_path):
        obj = load_object(_write(tmp_path, GOOD))
        again = parse_object(obj.to_file_data(), obj.source_path)
        assert again == obj

    def test_round_trip_without_air(self, tmp_path):
        text = GOOD.split("[air]")[0]
        obj = load_object(_write(tmp_path, text))
        assert obj.air == AirOverrides(None, None, None)
        assert "air" not in obj.to_file_data()
        assert parse_object(obj.to_file_data(), obj.source_path) == obj

    def test_to_dict_is_json_safe(self, tmp_path):
        obj = load_object(_write(tmp_path, GOOD))
        d = obj.to_dict()
        assert json.loads(json.dumps(d)) == d
        assert d["cavity"]["volume_m3"] == obj.cavity.volume_m3
        assert d["neck"]["area_m2"] == obj.neck.area_m2

    def test_name_defaults_to_stem(self, tmp_path):
        obj = load_object(_write(tmp_path, _replace("name", ""), name="flask-3.toml"))
        assert obj.name == "flask-3"

    def test_air_partial_and_percent(self, tmp_path):
        text = GOOD.split("[air]")[0] + '[air]\nrelative_humidity = "45 %"\n'
        obj = load_object(_write(tmp_path, text))
        assert obj.air == AirOverrides(None, 0.45, None)
        assert obj.air.air_state_kwargs() == {"relative_humidity": 0.45}

    def test_other_units(self, tmp_path):
        text = (
            _replace("volume", 'volume = "0.355 L"')
            .replace('"18 mm"', '"1.8 cm"')
            .replace('"21 degC"', '"294.15 K"')
        )
        obj = load_object(_write(tmp_path, text))
        assert obj.cavity.volume_m3 == pytest.approx(355e-6, rel=1e-12)
        assert obj.neck.diameter_m == pytest.approx(0.018, rel=1e-12)
        assert obj.air.temperature_c == pytest.approx(21.0, abs=1e-9)

    def test_end_condition_case_is_normalised(self, tmp_path):
        obj = load_object(_write(tmp_path, GOOD.replace('"unflanged"', '"Unflanged"')))
        assert obj.neck.outer_end == "unflanged"

    def test_frozen(self, tmp_path):
        obj = load_object(_write(tmp_path, GOOD))
        with pytest.raises(dataclasses.FrozenInstanceError):
            obj.name = "other"  # type: ignore[misc]
        assert isinstance(obj, ResonatorObject)


class TestFileErrors:
    def test_missing_file(self, tmp_path):
        path = tmp_path / "nope.toml"
        with pytest.raises(InputError, match=rf"^{re.escape(str(path))}: file not found"):
            load_object(path)

    def test_directory(self, tmp_path):
        with pytest.raises(InputError, match=rf"^{re.escape(str(tmp_path))}: is a directory"):
            load_object(tmp_path)

    def test_not_toml_names_the_line(self, tmp_path):
        text = GOOD.replace('length = "40 mm"', "length = 40 mm")
        _raises(tmp_path, text, r"not valid TOML: .*line 6")

    def test_not_utf8(self, tmp_path):
        path = tmp_path / "jar.toml"
        path.write_bytes(b'name = "\xff\xfe"\n')
        with pytest.raises(InputError, match=rf"^{re.escape(str(path))}: not UTF-8"):
            load_object(path)


class TestFieldErrors:
    @pytest.mark.parametrize(
        ("line", "field"),
        [("volume", "cavity.volume"), ("diameter", "neck.diameter"), ("length", "neck.length"),
         ("outer_end", "neck.outer_end"), ("inner_end", "neck.inner_end")],
    )
    def test_missing_required_field(self, tmp_path, line, field):
        err = _raises(tmp_path, _replace(line, ""), rf"{re.escape(field)}: missing required field")
        assert err.field == field

    def test_missing_table(self, tmp_path):
        text = GOOD.replace("[cavity]\nvolume = \"355 mL\"\n", "")
        _raises(tmp_path, text, r"cavity: missing required table \[cavity\]")

    @pytest.mark.parametrize("value", ['"0 mm"', '"-18 mm"'])
    def test_zero_or_negative_dimension(self, tmp_path, value):
        _raises(tmp_path, _replace("diameter", f"diameter = {value}"),
                r"neck\.diameter: .*greater than zero")

    def test_zero_volume(self, tmp_path):
        _raises(
            tmp_path, _replace("volume", 'volume = "0 mL"'), r"cavity\.volume: .*greater than zero"
        )

    def test_no_unit(self, tmp_path):
        _raises(tmp_path, _replace("length", 'length = "40"'), r"neck\.length: '40' has no unit")

    @pytest.mark.parametrize(
        ("line", "new", "field", "kind"),
        [
            ("diameter", 'diameter = "18 kg"', "neck.diameter", "length"),
            ("volume", 'volume = "355 mm"', "cavity.volume", "volume"),
            ("pressure", 'pressure = "21 degC"', "air.pressure", "pressure"),
            ("temperature", 'temperature = "3 m"', "air.temperature", "temperature"),
        ],
    )
    def test_wrong_kind_of_unit(self, tmp_path, line, new, field, kind):
        _raises(tmp_path, _replace(line, new), rf"{re.escape(field)}: .* is not a {kind}")

    def test_unknown_unit(self, tmp_path):
        _raises(tmp_path, _replace("diameter", 'diameter = "18 furlongz"'),
                r"neck\.diameter: '18 furlongz' is not a length")

    def test_unknown_end_condition_lists_allowed(self, tmp_path):
        err = _raises(tmp_path, _replace("outer_end", 'outer_end = "flangd"'),
                      r"neck\.outer_end: unknown end condition 'flangd'")
        assert "did you mean 'flanged'" in str(err)
        for allowed in END_CONDITIONS:
            assert repr(allowed) in str(err)

    @pytest.mark.parametrize(
        ("text_change", "field", "suggestion"),
        [
            (("diameter =", "diamter ="), "neck.diamter", "diameter"),
            (("[neck]", "[nek]"), "nek", "neck"),
            (("volume =", "volme ="), "cavity.volme", "volume"),
            (("relative_humidity", "humidity"), "air.humidity", "relative_humidity"),
        ],
    )
    def test_unknown_key_names_nearest(self, tmp_path, text_change, field, suggestion):
        text = GOOD.replace(*text_change)
        err = _raises(tmp_path, text, rf"{re.escape(field)}: unknown key; did you mean "
                      rf"'{suggestion}'\?")
        assert err.field == field

    def test_unknown_key_without_near_match_lists_allowed(self, tmp_path):
        text = GOOD.replace("[cavity]", "colour = \"blue\"\n[cavity]")
        _raises(tmp_path, text, r"colour: unknown key; allowed here: name, cavity, neck, air")

    @pytest.mark.parametrize(
        ("line", "new", "field"),
        [
            ("diameter", "diameter = 18", "neck.diameter"),
            ("volume", "volume = 355.0", "cavity.volume"),
            ("temperature", "temperature = 21", "air.temperature"),
            ("pressure", "pressure = 101325", "air.pressure"),
        ],
    )
    def test_number_where_unit_string_needed(self, tmp_path, line, new, field):
        _raises(tmp_path, _replace(line, new),
                rf"{re.escape(field)}: .* is a number without a unit")

    @pytest.mark.parametrize(
        ("line", "new", "field", "pattern"),
        [
            ("diameter", "diameter = true", "neck.diameter", "expected a string with a unit"),
            ("length", 'length = ["40 mm"]', "neck.length", "expected a string with a unit"),
            ("outer_end", "outer_end = 1", "neck.outer_end", "expected one of"),
            ("name", "name = 7", "name", "expected a non-empty string"),
            ("relative_humidity", "relative_humidity = 45", "air.relative_humidity",
             r"outside 0\.\.1"),
        ],
    )
    def test_wrong_types(self, tmp_path, line, new, field, pattern):
        _raises(tmp_path, _replace(line, new), rf"{re.escape(field)}: .*{pattern}")

    def test_section_not_a_table(self, tmp_path):
        text = GOOD.replace('[cavity]\nvolume = "355 mL"\n', "").replace(
            "name =", 'cavity = "355 mL"\nname ='
        )
        _raises(tmp_path, text, r"cavity: expected a table \[cavity\]")


class TestParseObject:
    def test_source_used_in_errors_and_name(self):
        with pytest.raises(InputError, match=r"^batch\.toml\[3\]: cavity: missing required table"):
            parse_object({"neck": {}}, "batch.toml[3]")

    def test_not_a_mapping(self):
        with pytest.raises(InputError, match=r"^x\.toml: expected a TOML table"):
            parse_object(["cavity"], "x.toml")  # type: ignore[arg-type]
