"""The plant file: parsing, SI conversion and the errors people see."""

from __future__ import annotations

import math
from pathlib import Path

import pytest

from ingest.plant_file import PlantFileError, load_plant_file, parse_plant_text
from tests.conftest import TEST_DATA

PLANT = TEST_DATA / "plants" / "test_wide.toml"


def test_quantities_are_converted_to_si() -> None:
    plant = load_plant_file(PLANT)
    unit = plant.unit("U1")
    assert unit.rated_power == pytest.approx(60e6)
    # 428.6 rpm = 428.6 * 2*pi/60 rad/s (definition of the revolution per minute)
    assert unit.rated_speed == pytest.approx(428.6 * 2 * math.pi / 60)
    assert plant.plant.elevation == 612.0
    assert unit.reference_points[0].flow == pytest.approx(31.5)
    # degC -> K: T[K] = T[degC] + 273.15 (SI brochure definition of the Celsius scale)
    assert plant.tags["TWAT"].to_si() == pytest.approx((1.0, 273.15))
    # percent -> fraction
    assert plant.tags["GV1"].to_si() == pytest.approx((0.01, 0.0))


def _edit(old: str, new: str) -> str:
    text = PLANT.read_text()
    assert old in text, old
    return text.replace(old, new, 1)


@pytest.mark.parametrize(
    ("old", "new", "expected"),
    [
        ('rated_power = "60 MW"', 'rated_power = "60 m"',
         "units[0] (code 'U1').rated_power: '60 m' is not a quantity of 'W'"),
        ('rated_power = "60 MW"', 'rated_powr = "60 MW"',
         "units[0] (code 'U1').rated_powr: unknown field"),
        ('timezone = "Europe/Zurich"', 'timezone = "Europe/Zurik"',
         "plant.timezone: unknown IANA time zone 'Europe/Zurik'"),
        ('uom = "kPa" }', 'uom = "megawattish" }',
         "tags.DP1.uom: unknown unit 'megawattish' (tag 'DP1'"),
        ('uom = "kPa" }', 'uom = "m" }',
         "tags.DP1.uom: unit 'm' is not a unit of 'Pa'"),
        ('signal = "gate_opening"', 'signal = "gate"',
         "tags.GV1.signal: unknown signal 'gate'"),
        ('{ unit = "U2", signal = "active_power"', '{ unit = "U9", signal = "active_power"',
         "tags.P2.unit: unknown unit 'U9'"),
        ('efficiency = 0.935', 'efficiency = 1.2',
         "units[0] (code 'U1').reference_points[0].efficiency: Input should be less than or "
         "equal to 1"),
        ('decimal = "."', 'decimal = ","',
         "export: decimal ',' equals the delimiter"),
    ],
)
def test_errors_name_the_file_the_field_and_what_was_expected(
    old: str, new: str, expected: str
) -> None:
    with pytest.raises(PlantFileError) as caught:
        parse_plant_text(_edit(old, new), "plant.toml")
    message = str(caught.value)
    assert message.startswith("plant.toml:"), message
    assert expected in message, message


def test_missing_required_field_is_named() -> None:
    with pytest.raises(PlantFileError, match=r"units\[1\] \(code 'U2'\)\.rated_head: required"):
        parse_plant_text(_edit('rated_head = "180 m"\nrated_speed = "428.6 rpm"\n'
                               'runner_diameter = "2.1 m"\nrunner_reference_elevation = "600 m"\n'
                               '\n[tags]', 'rated_speed = "428.6 rpm"\nrunner_diameter = "2.1 m"\n'
                               'runner_reference_elevation = "600 m"\n\n[tags]'), "p.toml")


def test_toml_syntax_error_gives_line_and_column(tmp_path: Path) -> None:
    path = tmp_path / "broken.toml"
    path.write_text('[plant]\ncode = "X"\nname = \n')
    with pytest.raises(PlantFileError, match=r"broken\.toml: not valid TOML: .*line 3"):
        load_plant_file(path)


def test_non_utf8_plant_file_names_the_line(tmp_path: Path) -> None:
    path = tmp_path / "latin.toml"
    path.write_bytes(b'[plant]\ncode = "X"\nname = "Kraftwerk S\xfcd"\n')
    with pytest.raises(PlantFileError, match=r"line 3: byte 0xfc is not UTF-8"):
        load_plant_file(path)


def test_geometry_must_match_runner_type() -> None:
    text = PLANT.read_text().replace(
        "[[units.reference_points]]",
        "[units.geometry]\n  kind = \"pelton\"\n  pitch_diameter = \"2 m\"\n  jet_count = 2\n"
        "  nozzle_diameter = \"0.2 m\"\n  bucket_outlet_angle = \"165 deg\"\n"
        "  [[units.reference_points]]", 1)
    with pytest.raises(PlantFileError, match="geometry is for a pelton runner but runner_type"):
        parse_plant_text(text, "p.toml")
