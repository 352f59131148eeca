"""Tests for characterize.physics.geometry: the object file."""

from __future__ import annotations

import dataclasses
import json
import math
import re

import pytest

from characterize.errors import InputError
from characterize.objectfile import load_object, parse_object
from characterize.physics.geometry import END_CONDITIONS, AirOverrides, ResonatorObject

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
        _raises(tmp_path, text,
                r"colour: unknown key; allowed here: name, kind, cavity, neck, tube, air")

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


# --------------------------------------------------------------------------
# Shapes, necks, water fills, tubes (issue 3)
# --------------------------------------------------------------------------

NECK = """[neck]
diameter = "18 mm"
length = "40 mm"
outer_end = "unflanged"
inner_end = "flanged"
"""


def _obj(tmp_path, cavity: str, neck: str = NECK, top: str = ""):
    return load_object(_write(tmp_path, top + "[cavity]\n" + cavity + neck))


class TestCavityShapes:
    def test_sphere(self, tmp_path):
        obj = _obj(tmp_path, 'shape = "sphere"\ndiameter = "100 mm"\n')
        assert obj.cavity.volume_m3 == pytest.approx(math.pi * 0.1**3 / 6, rel=1e-12)
        assert obj.cavity.wall_area_m2 == pytest.approx(math.pi * 0.1**2, rel=1e-12)
        assert obj.cavity.volume_source == "shape"

    def test_cylinder_and_box(self, tmp_path):
        cyl = _obj(tmp_path, 'shape = "cylinder"\ndiameter = "60 mm"\nlength = "120 mm"\n')
        assert cyl.cavity.volume_m3 == pytest.approx(math.pi * 0.03**2 * 0.12, rel=1e-12)
        assert cyl.cavity.axial_length_m == pytest.approx(0.12)
        box = _obj(tmp_path, 'shape = "box"\nwidth = "200 mm"\ndepth = "150 mm"\n'
                   'height = "300 mm"\n')
        assert box.cavity.volume_m3 == pytest.approx(0.009, rel=1e-12)
        assert box.cavity.wall_area_m2 == pytest.approx(2 * (0.03 + 0.06 + 0.045), rel=1e-12)

    def test_profile_volume_and_length(self, tmp_path):
        obj = _obj(tmp_path, 'shape = "profile"\nsections = [["80 mm", "90 mm"], '
                   '["50 mm", "15 mm"]]\n')
        expected = math.pi * (0.04**2 * 0.09 + 0.025**2 * 0.015)
        assert obj.cavity.volume_m3 == pytest.approx(expected, rel=1e-12)
        assert obj.cavity.axial_length_m == pytest.approx(0.105)
        assert obj.cavity.neck_side_area_m2 == pytest.approx(math.pi * 0.025**2)

    def test_consistent_volume_is_used_and_scales_the_shape(self, tmp_path):
        obj = _obj(tmp_path, 'shape = "cylinder"\ndiameter = "60 mm"\nlength = "120 mm"\n'
                   'volume = "345 mL"\n')
        assert obj.cavity.volume_m3 == pytest.approx(345e-6)
        assert obj.cavity.volume_source == "given"
        assert obj.cavity.area_scale == pytest.approx(345e-6 / (math.pi * 0.03**2 * 0.12))

    def test_inconsistent_volume_names_both(self, tmp_path):
        err = _raises(tmp_path, '[cavity]\nshape = "cylinder"\ndiameter = "60 mm"\n'
                      'length = "120 mm"\nvolume = "500 mL"\n' + NECK, r"cavity\.volume: ")
        assert "500 mL" in str(err) and "339.3 mL" in str(err)

    @pytest.mark.parametrize("bad", ['"0 mm"', '"-5 mm"'])
    def test_profile_with_non_positive_section(self, tmp_path, bad):
        _raises(tmp_path, f'[cavity]\nshape = "profile"\nsections = [["80 mm", "90 mm"], '
                f'["50 mm", {bad}]]\n' + NECK,
                r"cavity\.sections\[2\]\.length: .*greater than zero")

    def test_dimensions_without_shape(self, tmp_path):
        _raises(tmp_path, '[cavity]\ndiameter = "60 mm"\nlength = "1 m"\n' + NECK,
                r"cavity\.shape: dimensions given \(diameter, length\)")

    def test_dimension_not_of_the_shape(self, tmp_path):
        _raises(tmp_path, '[cavity]\nshape = "sphere"\ndiameter = "60 mm"\nwidth = "1 m"\n'
                + NECK, r"cavity\.width: not used by shape 'sphere'")

    def test_unknown_shape_names_nearest(self, tmp_path):
        _raises(tmp_path, '[cavity]\nshape = "cylindre"\n' + NECK,
                r"cavity\.shape: unknown value 'cylindre'; did you mean 'cylinder'\?")


class TestWater:
    @pytest.mark.parametrize(("t_c", "rho"), [(4.0, 999.9750), (20.0, 998.2067),
                                              (30.0, 995.6488)])
    def test_tanaka_table(self, t_c, rho):
        # Tanaka et al. 2001 (Metrologia 38, 301), the CIPM recommended table
        # (values from memory): 999.9750, 998.2067, 995.6488 kg/m^3
        from characterize.physics.water import water_density_kg_m3

        assert water_density_kg_m3(t_c) == pytest.approx(rho, abs=2e-4)

    @pytest.mark.parametrize("t_c", [1.0, 4.0, 10.0, 20.0, 25.0, 30.0, 39.0])
    def test_against_coolprop_iapws95(self, t_c):
        # CoolProp's IAPWS-95 water at 101.325 kPa: within 2 ppm over 0-40 degC
        from CoolProp.CoolProp import PropsSI

        from characterize.physics.water import water_density_kg_m3

        ref = PropsSI("D", "T", t_c + 273.15, "P", 101325.0, "Water")
        assert water_density_kg_m3(t_c) == pytest.approx(ref, rel=2e-6)

    def test_fill_in_the_object_file(self, tmp_path):
        from characterize.physics.water import water_density_kg_m3

        obj = _obj(tmp_path, 'volume_by_water = "355 g"\nwater_temperature = "30 degC"\n')
        assert obj.cavity.volume_m3 == pytest.approx(0.355 / water_density_kg_m3(30.0))
        assert obj.cavity.volume_source == "water"
        again = parse_object(obj.to_file_data(), obj.source_path)
        assert again.cavity.volume_m3 == pytest.approx(obj.cavity.volume_m3, rel=1e-12)

    def test_both_volume_and_water(self, tmp_path):
        _raises(tmp_path, '[cavity]\nvolume = "355 mL"\nvolume_by_water = "355 g"\n' + NECK,
                r"cavity\.volume_by_water: give either")

    def test_water_out_of_range(self, tmp_path):
        _raises(tmp_path, '[cavity]\nvolume_by_water = "355 g"\nwater_temperature = '
                '"60 degC"\n' + NECK, r"cavity\.water_temperature: .*outside 0 to 40")


class TestNecks:
    def test_slot_equivalents(self, tmp_path):
        obj = _obj(tmp_path, 'volume = "9 L"\n', '[neck]\nshape = "slot"\nwidth = "100 mm"\n'
                   'height = "10 mm"\nlength = "30 mm"\nouter_end = "flanged"\n'
                   'inner_end = "flanged"\n')
        assert obj.neck.area_m2 == pytest.approx(1e-3)
        assert obj.neck.radius_m == pytest.approx(math.sqrt(1e-3 / math.pi))  # equal-area
        assert obj.neck.narrow_dimension_m == pytest.approx(0.01)

    def test_slot_wider_than_its_cavity(self, tmp_path):
        _raises(tmp_path, '[cavity]\nshape = "box"\nwidth = "80 mm"\ndepth = "60 mm"\n'
                'height = "100 mm"\n[neck]\nshape = "slot"\nwidth = "100 mm"\n'
                'height = "10 mm"\nlength = "30 mm"\nouter_end = "flanged"\n'
                'inner_end = "flanged"\n', r"neck\.width: the slot .* is wider than the cavity")

    def test_hole_and_count(self, tmp_path):
        obj = _obj(tmp_path, 'volume = "1 L"\n', '[neck]\nshape = "hole"\ndiameter = "8 mm"\n'
                   'wall_thickness = "2 mm"\ncount = 4\n')
        assert obj.neck.length_m == pytest.approx(0.002)
        assert (obj.neck.outer_end, obj.neck.inner_end) == ("flanged", "flanged")
        assert obj.neck.area_m2 == pytest.approx(4 * math.pi * 0.004**2)
        assert parse_object(obj.to_file_data(), obj.source_path) == obj

    @pytest.mark.parametrize("bad", ["0", "2.5", '"3"', "true"])
    def test_bad_count(self, tmp_path, bad):
        _raises(tmp_path, GOOD.replace('length = "40 mm"', f'length = "40 mm"\ncount = {bad}'),
                r"neck\.count: expected a whole number")

    def test_explicit_end_correction(self, tmp_path):
        obj = load_object(_write(tmp_path, GOOD.replace(
            'inner_end = "flanged"', 'inner_end = "flanged"\nouter_end_correction = "7 mm"')))
        assert obj.neck.outer_end_correction_m == pytest.approx(0.007)
        assert parse_object(obj.to_file_data(), obj.source_path) == obj


class TestTubeAndAir:
    def test_tube(self, tmp_path):
        obj = load_object(_write(tmp_path, 'kind = "tube"\n[tube]\ndiameter = "20 mm"\n'
                                 'length = "300 mm"\nopen_end = "unflanged"\n'))
        assert obj.kind == "tube"
        assert obj.cavity.volume_m3 == pytest.approx(math.pi * 0.01**2 * 0.3)
        assert obj.neck.inner_end == "closed"
        assert parse_object(obj.to_file_data(), obj.source_path) == obj

    def test_tube_table_with_helmholtz(self, tmp_path):
        _raises(tmp_path, GOOD + '[tube]\ndiameter = "20 mm"\n',
                r"tube: \[tube\] is not used by kind = 'helmholtz'")

    @pytest.mark.parametrize(("value", "expected"), [('"400 ppm"', 4e-4), ('"0.04 %"', 4e-4),
                                                     ("0.0005", 5e-4)])
    def test_co2(self, tmp_path, value, expected):
        obj = load_object(_write(tmp_path, GOOD + f"co2 = {value}\n"))
        assert obj.air.co2_fraction == pytest.approx(expected)
        assert obj.air.air_state_kwargs()["co2_fraction"] == pytest.approx(expected)

    def test_humidity_in_percent_without_saying_so(self, tmp_path):
        _raises(tmp_path, _replace("relative_humidity", "relative_humidity = 45"),
                r"air\.relative_humidity: .*outside 0\.\.1 \(write '45 %' for a percent\)")
