"""Design checks: cold Voc, hot Vmp, circuit and conductor currents."""

from dataclasses import replace

import numpy as np
import pytest
from pvlib import pvsystem

from pvsource.checks import design_checks, design_currents, max_string_voc, min_string_vmp
from pvsource.controller import Controller
from pvsource.module import fit_datasheet, parameters_at
from pvsource.system import Load

from conftest import DEMO_DATASHEET, cable, make_system

# NEC (NFPA 70) Table 690.7(A), voltage correction factors for crystalline and
# multicrystalline silicon modules, by lowest expected ambient temperature
# band (degC). Values from memory.
NEC_690_7_TABLE = [
    ((24, 20), 1.02), ((19, 15), 1.04), ((14, 10), 1.06), ((9, 5), 1.08), ((4, 0), 1.10),
    ((-1, -5), 1.12), ((-6, -10), 1.14), ((-11, -15), 1.16), ((-16, -20), 1.18), ((-21, -25), 1.20),
    ((-26, -30), 1.21), ((-31, -35), 1.23), ((-36, -40), 1.25),
]


@pytest.fixture(scope="module")
def typical_module():
    # The table was drawn up for crystalline silicon with a Voc coefficient of
    # about -0.39 %/degC; the demo module is given that coefficient here.
    return fit_datasheet(replace(DEMO_DATASHEET, voc_temp_coeff_pct=-0.39))


@pytest.mark.parametrize("band, factor", NEC_690_7_TABLE)
def test_cold_voc_matches_the_nec_690_7_correction_table(typical_module, band, factor):
    # Reference: NEC Table 690.7(A) (from memory). Evaluated at the cold end of
    # each band, the coefficient method agrees within the table's rounding (0.005).
    system = make_system(typical_module, groups=((12, 1),))
    check = max_string_voc(system, float(band[1]))
    ours = check.value / (12 * DEMO_DATASHEET.v_oc)
    assert ours == pytest.approx(factor, abs=0.0055)


def test_cold_voc_check_compares_with_the_controller_limit(demo_module):
    system = replace(make_system(demo_module, groups=((4, 2), (3, 1))), controller=Controller(max_input_v=150.0))
    c = max_string_voc(system, -20.0)
    # NEC 690.7(A)(1) worked by hand: 4 modules x 40.1 V x (1 + 0.29 %/degC x 45 degC)
    # = 160.4 V x 1.1305 = 181.33 V.
    expected = 181.33
    assert c.name == "max_string_voc" and c.unit == "V"
    assert c.value == pytest.approx(expected, abs=0.01)
    assert c.passed is False
    assert c.margin == pytest.approx((150.0 - expected) / 150.0, abs=1e-4)
    assert "690.7" in c.basis
    # 4 x 40.1 V x 1.1305 = 181.3 V at -20 degC, 190.6 V at -40 degC.
    roomy = replace(system, controller=Controller(max_input_v=190.0))
    assert max_string_voc(roomy, -20.0).passed is True
    assert max_string_voc(roomy, -40.0).passed is False


def test_hot_vmp_uses_the_single_diode_model(demo_module):
    # Reference: pvlib.pvsystem.singlediode on the fitted parameters at the hot cell temperature.
    system = replace(make_system(demo_module, groups=((2, 2),)), controller=Controller(min_input_v=50.0))
    c = min_string_vmp(system, 40.0, 30.0)
    st = parameters_at(demo_module.parameters, 1000.0, 70.0)
    ref = float(np.squeeze(pvsystem.singlediode(st.i_l_a, st.i_o_a, st.r_s_ohm, st.r_sh_ohm, st.a_v)["v_mp"]))
    assert c.value == pytest.approx(2 * ref, rel=1e-9)
    assert c.sense == "min" and c.passed is (2 * ref >= 50.0)
    assert "common practice" in c.basis


def test_hot_vmp_falls_back_to_the_bank_voltage_and_says_when_there_is_no_limit(demo_module):
    battery = make_system(demo_module, groups=((1, 3),), load=Load("battery", emf_v=26.4, resistance_ohm=0.03))
    c = min_string_vmp(battery, 45.0)
    assert c.limit == 26.4
    assert c.passed is False  # one module per string sags below a 24 V bank on a hot day
    bare = make_system(demo_module)
    c = min_string_vmp(bare, 45.0)
    assert c.limit is None and c.passed is None and c.margin is None


def test_design_currents_follow_nec_690_8(demo_module):
    # NEC 690.8(A)(1): 1.25 x Isc of the parallel strings; 690.8(B)(1): x 1.25 again.
    runs = (cable("string", 3, 8.0, "g1"), cable("home-run", 10, 5.0, "g1"), cable("home-run", 12, 5.0, "g2"),
            cable("feeder", 20, 2.0), cable("bank", 2, 0.5))
    system = make_system(demo_module, groups=((2, 3), (2, 2)), cables=runs)
    d = {x["run"]: x for x in design_currents(system)}
    isc = DEMO_DATASHEET.i_sc
    assert d["string g1"]["circuit_current_a"] == pytest.approx(1.25 * isc)
    assert d["home-run g1"]["circuit_current_a"] == pytest.approx(1.25 * 3 * isc)
    assert d["home-run g2"]["conductor_current_a"] == pytest.approx(1.5625 * 2 * isc)
    assert d["feeder "]["conductor_current_a"] == pytest.approx(1.5625 * 5 * isc)
    assert "bank " not in d  # bank-side currents are set by the controller and the bank, not by Isc


def test_conductor_rating_check_appears_only_where_a_rating_is_given(demo_module):
    rated = replace(cable("feeder", 20, 2.0), ampacity_a=40.0)
    system = make_system(demo_module, groups=((2, 3),), cables=(rated, cable("home-run", 5, 5.0, "g1")))
    checks = design_checks(system, -10.0, 35.0)
    names = [c.name for c in checks]
    assert names[:2] == ["max_string_voc", "min_string_vmp"]
    current = [c for c in checks if c.name.startswith("conductor_current")]
    assert len(current) == 1
    assert current[0].value == pytest.approx(1.5625 * 3 * 9.8)
    assert current[0].passed is False and current[0].margin < 0


def test_hot_vmp_at_the_controller_input_subtracts_the_cable_drop(demo_module):
    # Law (Kirchhoff): what reaches the controller is the string's Vmp less the
    # drop of every PV-side run at that current.
    runs = (cable("string", 5.0, 8.0, "g1"), cable("home-run", 10.0, 5.0, "g1"), cable("feeder", 20.0, 2.0))
    bare = replace(make_system(demo_module, groups=((3, 2),)), controller=Controller(min_input_v=60.0))
    wired = replace(bare, cables=runs)
    st = parameters_at(demo_module.parameters, 1000.0, 75.0)
    imp = float(np.squeeze(pvsystem.singlediode(st.i_l_a, st.i_o_a, st.r_s_ohm, st.r_sh_ohm, st.a_v)["i_mp"]))
    drop = imp * runs[0].loop_resistance_ohm + 2 * imp * (runs[1].loop_resistance_ohm + runs[2].loop_resistance_ohm)
    assert min_string_vmp(wired, 40.0).value == pytest.approx(min_string_vmp(bare, 40.0).value - drop, rel=1e-12)


def test_hot_vmp_against_a_bank_uses_its_absorption_voltage(demo_module):
    from pvsource import bank as bank_model
    system = replace(make_system(demo_module, groups=((1, 3),)),
                     bank=bank_model.make_bank("lfp", 8, 1, 280.0, 0.5, 25.0), controller=Controller(kind="pwm"))
    c = min_string_vmp(system, 35.0)
    assert c.limit == pytest.approx(8 * 3.55)
    assert "absorption" in c.detail
