"""The battery bank Thevenin model and its chemistry presets."""

import tomllib
from pathlib import Path

import numpy as np
import pytest

from pvsource.bank import (CHEMISTRIES, PRESET_NAMES, charge_voltages_v, internal_resistance_ohm,
                           load_chemistry, make_bank, max_charge_current_a, open_circuit_v, thevenin)
from pvsource.errors import InputError

PRESETS = Path(__file__).resolve().parents[1] / "pvsource" / "data" / "chemistries"
# Cells in a nominal 12 V battery: six lead-acid cells, four LFP cells.
CELLS_12V = {"lfp": 4, "lead-acid-flooded": 6, "lead-acid-sealed": 6, "nmc": 3}


def bank(key="lfp", cells=None, strings=1, capacity_ah=100.0, soc=0.5, temp_c=25.0, overrides=None):
    return make_bank(key, CELLS_12V[key] if cells is None else cells, strings, capacity_ah, soc, temp_c, overrides)


# --- presets -----------------------------------------------------------------


@pytest.mark.parametrize("key", CHEMISTRIES)
def test_every_preset_value_has_a_source(key):
    # DEVELOPERS.md: a source beside every value, "from memory" where recalled.
    raw = tomllib.loads((PRESETS / f"{key}.toml").read_text())
    tables = {k: v for k, v in raw.items() if isinstance(v, dict)}
    assert set(tables) == {"ocv"} | set(PRESET_NAMES) - {"ocv_soc", "ocv_v_per_cell"}
    for name, table in tables.items():
        assert isinstance(table["source"], str) and table["source"].strip(), name
    chem = load_chemistry(key)
    assert all(chem.source(n) for n in PRESET_NAMES)


@pytest.mark.parametrize("key", CHEMISTRIES)
def test_ocv_tables_are_monotone_and_span_zero_to_one(key):
    # Law: the resting EMF rises with the charge stored (more reactant converted).
    chem = load_chemistry(key)
    assert chem.ocv_soc[0] == 0 and chem.ocv_soc[-1] == 1
    assert np.all(np.diff(chem.ocv_soc) > 0) and np.all(np.diff(chem.ocv_v_per_cell) > 0)
    # Common practice: every chemistry charges above its full resting voltage,
    # except NMC, whose 4.10 V absorption deliberately stops short of 4.20 V.
    if key != "nmc":
        assert chem.absorption_v_per_cell > chem.ocv_v_per_cell[-1]


def test_flooded_12v_reads_the_common_resting_voltages():
    # Common practice, from memory: a 12 V flooded battery at rest reads about
    # 12.6-12.7 V full and about 12.0-12.2 V at half charge; about 11.6-11.9 V empty.
    b = bank("lead-acid-flooded")
    assert 12.6 <= open_circuit_v(b, 1.0) <= 12.75
    assert 12.0 <= open_circuit_v(b, 0.5) <= 12.2
    assert 11.5 <= open_circuit_v(b, 0.0) <= 11.9


def test_agm_12v_reads_the_common_resting_voltages():
    # Common practice, from memory: a 12 V AGM battery reads about 12.8-12.9 V
    # full and about 12.2-12.4 V at half charge.
    b = bank("lead-acid-sealed")
    assert 12.8 <= open_circuit_v(b, 1.0) <= 12.95
    assert 12.2 <= open_circuit_v(b, 0.5) <= 12.4


def test_lfp_4_cells_sit_on_the_plateau_over_most_of_the_range():
    # Common practice, from memory: a 4-cell LFP battery reads about 13.0-13.6 V
    # at rest over most of its range, and falls steeply only near empty.
    b = bank("lfp")
    v = open_circuit_v(b, np.linspace(0.2, 1.0, 17))
    assert np.all((v >= 12.9) & (v <= 13.6))
    assert open_circuit_v(b, 0.0) < 11.0


def test_nmc_cell_spans_the_common_voltage_window():
    # Common practice, from memory: about 3.0 V empty, 3.6-3.8 V at half
    # charge, 4.1-4.2 V at rest when full.
    b = bank("nmc", cells=1)
    assert open_circuit_v(b, 0.0) == pytest.approx(3.0, abs=0.05)
    assert 3.6 <= open_circuit_v(b, 0.5) <= 3.8
    assert 4.1 <= open_circuit_v(b, 1.0) <= 4.2


def test_ocv_clips_soc_and_broadcasts():
    # The table's end points hold outside [0, 1]; the result takes the
    # broadcast shape of soc and temperature.
    b = bank("lfp")
    assert open_circuit_v(b, -0.3) == open_circuit_v(b, 0.0)
    assert open_circuit_v(b, 1.4) == open_circuit_v(b, 1.0)
    emf, r = thevenin(b, np.array([0.2, 0.5, 0.8]), np.array([[-10.0], [25.0]]))
    assert emf.shape == r.shape == (2, 3)


# --- the Thevenin model -------------------------------------------------------


def test_the_thevenin_model_of_a_worked_example():
    # Worked by hand from the LFP preset's table, not through pvsource.bank: a
    # 4-cell 100 Ah LFP battery at 50 % and 25 degC rests at E = 4 x 3.290 =
    # 13.160 V behind R = 4 x 0.08 / 100 = 3.2 mOhm (the constant-voltage law
    # on these figures is tested in test_regulation.py).
    emf, r = thevenin(bank("lfp", soc=0.5, temp_c=25.0))
    assert emf == pytest.approx(13.160, rel=1e-12) and r == pytest.approx(0.0032, rel=1e-12)


@pytest.mark.parametrize("key, low_mohm, high_mohm", [
    # Common practice, from memory (the presets' sources): DC resistance of a
    # 12 V 100 Ah battery.
    ("lead-acid-flooded", 6.0, 10.0),   # deep-cycle flooded, about 6-10 mOhm
    ("lead-acid-sealed", 4.0, 10.0),    # AGM, about 4-6 mOhm at 1 kHz, DC higher
    ("lfp", 2.0, 4.0),                  # four prismatic cells of 0.5-1 mOhm
    ("nmc", 1.5, 4.0),                  # three cells of about 0.75 mOhm at 100 Ah (1.5 mOhm at 50 Ah)
])
def test_a_12v_100ah_battery_has_the_common_resistance(key, low_mohm, high_mohm):
    assert low_mohm <= 1e3 * internal_resistance_ohm(bank(key, capacity_ah=100.0, temp_c=25.0)) <= high_mohm


def test_resistance_follows_the_series_and_parallel_laws():
    # Law (series resistances add, parallel conductances add), worked out in the
    # test from one measured cell: 16 cells in series in each of 3 parallel
    # strings of 100 Ah cells (300 Ah bank) is 16 R_cell / 3.
    r_cell = internal_resistance_ohm(bank("lfp", cells=1, strings=1, capacity_ah=100.0))
    string = 16 * r_cell
    expected = 1.0 / (1.0 / string + 1.0 / string + 1.0 / string)
    assert internal_resistance_ohm(bank("lfp", cells=16, strings=3, capacity_ah=300.0)) == pytest.approx(expected,
                                                                                                          rel=1e-12)
    # A cell twice as large is two of the same cells in parallel: half the resistance.
    assert internal_resistance_ohm(bank("lfp", cells=1, capacity_ah=200.0)) == pytest.approx(r_cell / 2, rel=1e-12)


@pytest.mark.parametrize("key", CHEMISTRIES)
def test_resistance_rises_in_the_cold(key):
    # Common practice, from memory: cell resistance rises as the cell cools
    # (electrolyte conductivity and charge-transfer kinetics fall), roughly
    # doubling by 0 degC for lithium and by -20 degC for lead-acid; it is held
    # at its 25 degC value above.
    r = internal_resistance_ohm(bank(key), temp_c=np.array([-20.0, 0.0, 25.0, 45.0]))
    assert r[0] > r[1] > r[2] == r[3]
    if key.startswith("lead"):
        assert 1.5 <= r[0] / r[2] <= 2.5
    else:
        assert 1.7 <= r[1] / r[2] <= 3.0


# --- charging -----------------------------------------------------------------


def test_flooded_temperature_compensation_is_minus_30_mv_per_degc_for_12v():
    # Common practice, from memory: about -30 mV/degC for a 12 V flooded
    # battery (-5 mV/degC per cell), referred to 25 degC.
    b = bank("lead-acid-flooded")
    (abs_25, float_25), (abs_35, float_35) = charge_voltages_v(b, 25.0), charge_voltages_v(b, 35.0)
    # Common practice, from memory: a 12 V flooded battery absorbs at about
    # 14.4-14.8 V and floats at about 13.2-13.6 V at 25 degC.
    assert 14.4 <= abs_25 <= 14.8 and 13.2 <= float_25 <= 13.6
    assert (abs_35 - abs_25) / 10 == pytest.approx(-0.030, abs=1e-9)
    assert (float_35 - float_25) / 10 == pytest.approx(-0.030, abs=1e-9)
    # Colder raises both, by the same coefficient.
    abs_0, _ = charge_voltages_v(b, 0.0)
    assert abs_0 - abs_25 == pytest.approx(0.75, abs=1e-9)


def test_agm_temperature_compensation_has_the_common_sign_and_size():
    # Common practice, from memory: -3 to -5 mV/degC per cell for VRLA.
    b = bank("lead-acid-sealed", cells=1)
    a = charge_voltages_v(b, np.array([15.0, 25.0, 35.0]))[0]
    slope = np.diff(a) / 10
    assert np.all((slope >= -0.005) & (slope <= -0.003))


@pytest.mark.parametrize("key", ["lfp", "nmc"])
def test_lithium_charge_voltages_are_not_compensated(key):
    # Common practice: lithium chargers hold fixed voltages; the BMS guards temperature.
    b = bank(key)
    a, f = charge_voltages_v(b, np.array([-10.0, 25.0, 50.0]))
    assert np.ptp(a) == 0 and np.ptp(f) == 0 and np.all(f < a)


@pytest.mark.parametrize("key", ["lfp", "nmc"])
def test_no_lithium_charging_below_zero_degc(key):
    # Common practice: no charging of lithium-ion cells below 0 degC (lithium plating).
    b = bank(key, capacity_ah=200.0)
    i = max_charge_current_a(b, np.array([-10.0, -0.1, 0.0, 25.0]))
    assert np.all(i[:2] == 0.0)
    # Common practice, from memory: lithium storage cells take 0.2C to 1C
    # continuously from 0 degC up (40-200 A for 200 Ah).
    assert i[2] == i[3] and 40.0 <= i[3] <= 200.0


def test_lead_acid_charges_in_the_cold_at_its_c_rate():
    # Common practice: flooded bulk at about C/5, allowed down to -20 degC.
    b = bank("lead-acid-flooded", capacity_ah=400.0, strings=2)
    assert np.all(max_charge_current_a(b, np.array([-25.0, -20.0, 25.0])) == np.array([0.0, 80.0, 80.0]))


# --- overrides and bad input ------------------------------------------------------


def test_overrides_replace_any_preset_value_and_are_recorded():
    b = bank("lfp", overrides={"absorption_v_per_cell": 3.5, "max_charge_c_rate": 0.3,
                               "resistance_ohm_ah": 0.1, "coulombic_efficiency": 0.95,
                               "float_v_per_cell": 3.35, "min_charge_temp_c": 5.0})
    c = b.chemistry
    assert (c.absorption_v_per_cell, c.max_charge_c_rate, c.resistance_ohm_ah) == (3.5, 0.3, 0.1)
    assert c.source("max_charge_c_rate") == "override"
    assert c.source("ocv_soc") == load_chemistry("lfp").source("ocv_soc")
    assert dict(b.overrides)["coulombic_efficiency"] == 0.95
    assert max_charge_current_a(b, 3.0) == 0.0
    assert charge_voltages_v(b)[0] == pytest.approx(14.0)
    # The shipped preset is untouched.
    assert load_chemistry("lfp").absorption_v_per_cell == 3.55


@pytest.mark.parametrize("args, field", [
    (dict(key="lithium-titanate"), "chemistry"),
    (dict(soc=1.5), "soc"),
    (dict(soc=float("nan")), "soc"),
    (dict(capacity_ah=-100.0), "capacity_ah"),
    (dict(strings=0), "strings"),
    (dict(cells=2.5), "cells_in_series"),
    (dict(cells=True), "cells_in_series"),
    (dict(temp_c=90.0), "temp_c"),
    (dict(overrides={"absorb_v": 3.5}), "overrides.absorb_v"),
    (dict(overrides={"float_v_per_cell": 3.6}), "overrides.float_v_per_cell"),
    (dict(overrides={"absorption_v_per_cell": 3.3}), "overrides.absorption_v_per_cell"),
    (dict(overrides={"coulombic_efficiency": 1.05}), "overrides.coulombic_efficiency"),
    (dict(overrides={"max_charge_c_rate": -0.2}), "overrides.max_charge_c_rate"),
    (dict(overrides={"temp_comp_v_per_c_per_cell": 0.003}), "overrides.temp_comp_v_per_c_per_cell"),
    (dict(overrides={"ocv_v_per_cell": [3.0, 2.9]}), "overrides.ocv_v_per_cell"),
])
def test_bad_input_is_an_input_error_naming_the_field(args, field):
    key = args.pop("key", "lfp")
    with pytest.raises(InputError) as err:
        make_bank(key, args.get("cells", 4), args.get("strings", 1), args.get("capacity_ah", 100.0),
                  args.get("soc", 0.5), args.get("temp_c", 25.0), args.get("overrides"))
    assert err.value.field == field
    assert str(err.value).startswith(f"bank: {field}: ") and "\n" not in str(err.value)


def test_error_messages_list_the_valid_names():
    with pytest.raises(InputError, match="lfp, lead-acid-flooded, lead-acid-sealed, nmc"):
        load_chemistry("li-ion")
    with pytest.raises(InputError) as err:
        bank("lfp", overrides={"absorb_v": 3.5})
    assert all(n in str(err.value) for n in PRESET_NAMES)


def test_whole_numbers_given_as_floats_are_accepted():
    b = make_bank("lead-acid-flooded", 24.0, 2.0, 400, 1, -5, None)
    assert (b.cells_in_series, b.strings) == (24, 2) and isinstance(b.strings, int)
