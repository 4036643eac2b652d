"""What a value outside its range says about the unit it was typed in."""

import pytest

from pvsource.units import (
    CELL_TEMP_RANGE_C, design_irradiance_note, irradiance_hint, temperature_hint, with_hint,
)


@pytest.mark.parametrize("value, unit, celsius", [
    (212.0, "degF", "100.0"),   # water boils at 212 degF = 100 degC (the Fahrenheit scale's definition)
    (158.0, "degF", "70.0"),    # (158 - 32) x 5/9 = 70
    (373.15, "kelvin", "100.0"),  # 373.15 K = 100 degC (the kelvin's definition)
    (233.15, "kelvin", "-40.0"),
])
def test_a_cell_temperature_out_of_range_names_degf_or_kelvin(value, unit, celsius):
    hint = temperature_hint(value, *CELL_TEMP_RANGE_C)
    assert unit in hint and f"{celsius} degC" in hint


def test_no_unit_is_guessed_inside_the_range_or_where_none_fits():
    assert temperature_hint(45.0, *CELL_TEMP_RANGE_C) is None
    assert temperature_hint(-100.0, *CELL_TEMP_RANGE_C) is None   # -100 degF = -73 degC: below the range too
    assert temperature_hint(5000.0, *CELL_TEMP_RANGE_C) is None


def test_irradiance_notes_and_hints():
    # 0.7 kW/m2 = 700 W/m2: the note gives the W/m2 value meant.
    assert "700 W/m2" in design_irradiance_note(0.7) and "kW/m2" in design_irradiance_note(0.7)
    assert "dusk" in design_irradiance_note(40.0)
    assert design_irradiance_note(0.0) is None and design_irradiance_note(850.0) is None
    # Full sun is about 100,000 lux (from memory): such a value is illuminance, not W/m2.
    assert "lux" in irradiance_hint(100_000.0)
    assert irradiance_hint(1e9) is None


def test_with_hint_adds_only_a_hint():
    assert with_hint("bad", None) == "bad"
    assert with_hint("bad", "try degC") == "bad; try degC"
