"""Design checks: cold Voc, hot Vmp, circuit and conductor currents."""

from dataclasses import replace

import numpy as np
import pytest
from pvlib import pvsystem, temperature

from pvsource.checks import (DEFAULT_CELL_RISE_C, design_checks, design_currents, max_string_voc,
                             min_string_vmp, noct_cell_rise_c)
from pvsource.controller import Controller, make_controller
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


def test_the_noct_rise_is_rosss_model_at_noct_conditions():
    # Reference, worked out by hand: NOCT is defined at 800 W/m2 and 20 degC
    # air (IEC 61215-2), so NOCT 45 degC means 25 K at 800 W/m2, and the
    # linear (Ross) model gives 25 x 1000/800 = 31.25 K in full sun.
    assert float(noct_cell_rise_c(45.0)) == pytest.approx(31.25, abs=1e-12)
    assert float(noct_cell_rise_c(45.0, 800.0)) == pytest.approx(25.0, abs=1e-12)
    # Reference: pvlib.temperature.ross with its noct parameter.
    g = np.array([200.0, 600.0, 1000.0, 1100.0])
    for noct in (42.0, 45.0, 48.5):
        np.testing.assert_allclose(noct_cell_rise_c(noct, g), temperature.ross(g, 30.0, noct=noct) - 30.0, rtol=1e-12)


def test_hot_vmp_takes_the_cell_rise_from_the_modules_noct_when_none_is_given():
    # Reference: pvlib.temperature.ross (noct=50) for the cell temperature and
    # pvlib.pvsystem.singlediode on the fitted parameters there: with NOCT
    # 50 degC, cells at 40 + 1.25 x 30 = 77.5 degC.
    module = fit_datasheet(replace(DEMO_DATASHEET, noct_c=50.0))
    system = replace(make_system(module, groups=((2, 2),)), controller=Controller(min_input_v=50.0))
    t_cell = float(temperature.ross(1000.0, 40.0, noct=50.0))
    assert t_cell == pytest.approx(77.5)
    st = parameters_at(module.parameters, 1000.0, t_cell)
    ref = float(np.squeeze(pvsystem.singlediode(st.i_l_a, st.i_o_a, st.r_s_ohm, st.r_sh_ohm, st.a_v)["v_mp"]))
    c = min_string_vmp(system, 40.0)
    assert c.value == pytest.approx(2 * ref, rel=1e-9)
    assert "(NOCT 50 - 20) x 1000/800 = 37.5 degC" in c.basis
    # A given rise wins over NOCT and says so; without NOCT the common-practice 35 degC.
    given = min_string_vmp(system, 40.0, 20.0)
    assert "as given" in given.basis and given.value > c.value
    plain = min_string_vmp(replace(system, module=fit_datasheet(DEMO_DATASHEET)), 40.0)
    assert "common practice" in plain.basis and f"{DEFAULT_CELL_RISE_C:g} degC" in plain.basis
    assert plain.value > c.value  # cells 2.5 K cooler than with NOCT 50: higher Vmp


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
    # Without a tracker the bank run carries the array's current (NEC 690.8(A)(1)).
    assert d["bank "]["circuit_current_a"] == pytest.approx(1.25 * 5 * isc)


def test_bank_side_current_behind_a_tracker_is_its_rated_output(demo_module):
    # NEC 690.8(A)(1): a DC-DC converter's output circuit current is its
    # continuous output rating, 40 A here; the conductor carries 1.25 x 40 = 50 A.
    from pvsource import bank as bank_model
    system = replace(make_system(demo_module, groups=((3, 2),), cables=(cable("bank", 2, 0.5),)),
                     bank=bank_model.make_bank("lfp", 8, 1, 280.0, 0.5, 25.0),
                     controller=make_controller("mppt", max_output_a=40.0, max_input_v=150.0))
    d = design_currents(system)[0]
    assert d["circuit_current_a"] == 40.0 and d["conductor_current_a"] == 50.0


def test_conductor_check_needs_a_size_or_a_rating(demo_module):
    rated = replace(cable("feeder", 20, 2.0), ampacity_a=40.0)
    system = make_system(demo_module, groups=((2, 3),), cables=(rated, cable("home-run", 5, 5.0, "g1")))
    checks = design_checks(system, -10.0, 35.0)
    names = [c.name for c in checks]
    assert names[:2] == ["max_string_voc", "min_string_vmp"]
    current = [c for c in checks if c.name.startswith("conductor_current")]
    assert len(current) == 2
    assert current[0].value == pytest.approx(1.5625 * 3 * 9.8)
    assert current[0].passed is False and current[0].margin < 0
    # The home run has neither a size nor a rating: reported as unverified, never skipped.
    assert current[1].unverified and current[1].passed is None


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
                     bank=bank_model.make_bank("lfp", 8, 1, 280.0, 0.5, 25.0), controller=make_controller("pwm"))
    c = min_string_vmp(system, 35.0)
    assert c.limit == pytest.approx(8 * 3.55)
    assert "absorption" in c.detail


# ---------------------------------------------------------------- protection

def _with_fuse_max(module, max_fuse):
    from pvsource.module import Module  # noqa: F401 - the dataclass replaced below
    return replace(module, datasheet=replace(module.datasheet, max_series_fuse_a=max_fuse))


@pytest.mark.parametrize("strings, max_fuse, needed, passed", [
    (2, 15.0, False, True),    # one other string backfeeds 1.25 x 9.8 = 12.25 A <= 15 A
    (3, 15.0, True, False),    # two others: 24.5 A > 15 A; the 20 A fuse exceeds the 15 A maximum
    (3, 20.0, True, True),     # the 20 A fuse is within a 20 A maximum
    (2, 10.0, True, False),
])
def test_string_fuse_follows_nec_690_9(demo_module, strings, max_fuse, needed, passed):
    # NEC 690.9(A): fuses are needed when the other strings' current (N - 1) x
    # 1.25 x Isc exceeds the module's maximum series fuse; 690.9(B): rated at
    # 1.25 x 1.25 x Isc = 1.56 x 9.8 A = 15.3 A, rounded up to NEC 240.6(A)'s 20 A.
    from pvsource.checks import string_fuse_check
    system = make_system(_with_fuse_max(demo_module, max_fuse), groups=((2, strings),))
    c = string_fuse_check(system)
    assert c.name == "string_fuse" and c.value == 20.0 and c.limit == max_fuse
    assert c.record()["needed"] is needed and c.passed is passed


def test_string_fuse_without_a_module_maximum(demo_module):
    # Common practice: from three strings in parallel fuses are needed; with no
    # maximum in the datasheet there is nothing to compare the rating with.
    from pvsource.checks import string_fuse_check
    c = string_fuse_check(make_system(demo_module, groups=((2, 4),)))
    assert c.record()["needed"] is True and c.passed is None and c.limit is None


def test_controller_input_isc(demo_module):
    # NEC 690.8(A)(1): 1.25 x the array's Isc, 5 strings x 9.8 A x 1.25 = 61.25 A.
    from pvsource.checks import controller_checks
    system = replace(make_system(demo_module, groups=((2, 3), (2, 2))),
                     controller=Controller(max_input_v=150.0, max_input_isc_a=60.0))
    c = controller_checks(system)[0]
    assert c.name == "controller_input_isc" and c.value == pytest.approx(61.25) and c.passed is False


def test_bank_short_circuit_against_the_interrupting_rating(demo_module):
    # Ohm's law worked here: the fuse at the bank must clear a fault at its own
    # load-side terminal, where no cable limits the current, so the available
    # fault current is the bank's full-charge OCV over its internal resistance
    # alone (NEC 110.9). The cable's loop (1/0 AWG copper, 2 m one way: NEC
    # Ch. 9 Table 8 0.122 ohm/kft at 75 degC, x (1 - 0.00323 x 55) at 20 degC)
    # lowers only the current at the far end, which is reported for context.
    from pvsource import bank as bank_model
    from pvsource.checks import protection_checks
    from pvsource.conductors import parse_size
    from pvsource.wiring import CableRun
    bank = bank_model.make_bank("lfp", 8, 1, 280.0, 0.5, 25.0)
    run = CableRun("bank cable", "bank", 2.0, 0.4, size=parse_size("1/0 AWG"), fuse_a=150.0,
                   fuse_interrupting_a=5000.0)
    system = replace(make_system(demo_module, groups=((3, 2),), cables=(run,)), bank=bank,
                     controller=make_controller("mppt", max_output_a=40.0, max_input_v=150.0))
    checks = {c.name: c for c in protection_checks(system)}
    r_cable = 2 * 2.0 * 0.122 / 304.8 * (1 - 0.00323 * 55)
    e, r_int = bank_model.open_circuit_v(bank, 1.0), bank_model.internal_resistance_ohm(bank, 1.0, 25.0)
    sc = checks["bank_short_circuit"]
    assert sc.value == pytest.approx(float(e) / float(r_int), rel=1e-9)
    assert f"{float(e) / (float(r_int) + r_cable):.0f} A" in sc.detail
    assert sc.limit == 5000.0 and sc.passed is (sc.value <= 5000.0)
    # A rating between the far-end and the terminal fault current must fail:
    # with the cable counted, it would have passed.
    between = 0.5 * (float(e) / float(r_int) + float(e) / (float(r_int) + r_cable))
    tight = replace(system, cables=(replace(run, fuse_interrupting_a=between),))
    assert {c.name: c for c in protection_checks(tight)}["bank_short_circuit"].passed is False
    # NEC 240.4 with Table 310.16: 1/0 AWG at 90 degC carries 170 A, but 75 degC
    # terminations (110.14(C)) hold it to 150 A, so a 150 A fuse protects it.
    fuse = checks["fuse_rating[bank cable]"]
    assert fuse.limit == 150.0 and fuse.passed is True


def test_fuse_may_be_the_next_standard_rating_up(demo_module):
    # NEC 240.4(B): 8 AWG copper in a 75 degC column carries 50 A; at 40 degC
    # 90 degC insulation gives 55 x 0.91 = 50.05 A, held to 50 A by 75 degC
    # terminations; a 50 A fuse is a standard rating (240.6(A)), so the limit is 50 A.
    # With six conductors together: 55 x 0.91 x 0.8 = 40.04 A, not a standard
    # rating, so the next one up, 45 A, is allowed.
    from pvsource.ampacity import Installation
    from pvsource.checks import protection_checks
    from pvsource.conductors import parse_size
    from pvsource.wiring import CableRun
    run = CableRun("feeder", "feeder", 10.0, 2.0, size=parse_size("8 AWG"), fuse_a=50.0)
    system = make_system(demo_module, groups=((2, 2),), cables=(run,))
    c = protection_checks(system, Installation(90, 40.0, 2, "raceway", 75))[0]
    assert c.limit == 50.0 and c.passed is True
    c = protection_checks(system, Installation(90, 40.0, 6, "raceway", 75))[0]
    assert c.limit == 45.0 and c.passed is False


def test_conductor_check_uses_the_tables_for_a_sized_run(demo_module):
    # NEC 690.8(B) with Table 310.16: 3 strings x 9.8 A x 1.25 = 36.75 A, 45.94 A
    # for the conductor. 10 AWG: 75 degC column 35 A < 45.94 A, fails; 8 AWG: 50 A passes.
    from pvsource.conductors import parse_size
    from pvsource.wiring import CableRun
    for size, ok in (("10 AWG", False), ("8 AWG", True)):
        run = CableRun("feeder", "feeder", 10.0, 2.0, size=parse_size(size))
        checks = design_checks(make_system(demo_module, groups=((2, 3),), cables=(run,)), -10.0, 35.0)
        c = next(c for c in checks if c.name == "conductor_current[feeder]")
        assert c.value == pytest.approx(1.5625 * 3 * 9.8) and c.passed is ok
        assert c.rule.startswith("ampacity")


def test_a_typed_rating_stays_with_its_size(demo_module):
    # The exploration's complaint: a rating typed for 6 AWG (65 A) must not
    # judge 2 AWG. 2 AWG copper: NEC 310.16 115 A (75 degC column).
    from pvsource import explore as ex
    from pvsource.conductors import parse_size
    from pvsource.wiring import CableRun
    run = CableRun("feeder", "feeder", 10.0, 1.3, size=parse_size("6 AWG"), ampacity_a=65.0)
    system = make_system(demo_module, groups=((2, 12),), cables=(run,))
    before = next(c for c in design_checks(system, -10, 35) if c.name == "conductor_current[feeder]")
    assert before.limit == 65.0 and before.passed is False   # 12 x 9.8 x 1.5625 = 183.75 A
    bigger = ex.apply(system, {"size:feeder": parse_size("2 AWG")})
    after = next(c for c in design_checks(bigger, -10, 35) if c.name == "conductor_current[feeder]")
    assert after.limit == pytest.approx(min(115.0, 1.25 * 130.0))
    assert "ampacity" in after.reason() and "conductor_current[feeder]" in after.reason()


@pytest.mark.parametrize("size, material, fuse, limit", [
    ("10 AWG", "copper", 35.0, 30.0),     # NEC 240.4(D)(7): 30 A, though 310.16 gives 35 A at 75 degC
    ("12 AWG", "copper", 20.0, 20.0),     # 240.4(D)(5)
    ("10 AWG", "aluminium", 30.0, 25.0),  # 240.4(D)(8)
    ("8 AWG", "copper", 50.0, 50.0),      # not a small conductor: 310.16 75 degC column, 50 A
])
def test_small_conductors_keep_their_240_4_d_limits(demo_module, size, material, fuse, limit):
    # NEC 240.4(D) (from memory) caps the protection of 14-10 AWG copper and
    # 12-10 AWG aluminium below their table ampacity.
    from pvsource.checks import protection_checks
    from pvsource.conductors import parse_size
    from pvsource.wiring import CableRun
    run = CableRun("feeder", "feeder", 10.0, 2.0, size=parse_size(size), material=material, fuse_a=fuse)
    c = protection_checks(make_system(demo_module, groups=((2, 1),), cables=(run,)))[0]
    assert c.limit == limit and c.passed is (fuse <= limit)


@pytest.mark.parametrize("protection, fuse, limit", [
    ("gpv", 32.0, 33.0),              # I_n <= I_z = 33 A; I_2 = 1.45 I_n <= 1.45 I_z is the same condition
    ("gpv", 40.0, 33.0),
    ("breaker", 32.0, 33.0),
    ("gg", 32.0, 1.45 * 33.0 / 1.6),  # I_2 = 1.6 I_n <= 1.45 I_z: I_n <= 29.9 A, so a 32 A gG fuse fails
    ("gg", 25.0, 1.45 * 33.0 / 1.6),
    ("gg", 10.0, 1.45 * 33.0 / 1.9),  # below 16 A, I_2 = 1.9 I_n
])
def test_a_metric_fuse_is_coordinated_with_its_conductor(demo_module, protection, fuse, limit):
    # IEC 60364-4-43 433.1 (no rounding up past the conductor, unlike NEC 240.4(B)) with 2.5 mm2 XLPE,
    # method C: I_z 33 A (IEC 60364-5-52 B.52.4, from memory); k2 from IEC 60269-1/-6 and 60898 (from memory).
    from pvsource.checks import protection_checks
    from pvsource.conductors import parse_size
    from pvsource.wiring import CableRun
    run = CableRun("feeder", "feeder", 10.0, 2.0, size=parse_size("2.5 mm2"), fuse_a=fuse,
                   installed=(("install", "C"), ("protection", protection)))
    c = protection_checks(make_system(demo_module, groups=((2, 1),), cables=(run,)))[0]
    assert c.limit == pytest.approx(limit) and c.passed is (fuse <= limit) and "433.1" in c.basis


def test_metric_conductor_check_names_the_protection_rule(demo_module):
    # 1 string x 9.8 A x 1.25 = 12.25 A (NEC 690.8(A)); the conductor's device is at least 1.25 x 12.25 =
    # 15.3 A, so 16 A (IEC 60269-1 series). 1.5 mm2 XLPE at 55 degC in B1: 23 x 0.76 = 17.5 A >= 16 A,
    # passes; at 65 degC: 23 x 0.65 = 14.95 A < 16 A (B.52.4, B.52.14, from memory) fails, although
    # 14.95 A still carries the 12.25 A and 1.25 x 14.95 = 18.7 A exceeds the 15.3 A design current.
    from pvsource.conductors import parse_size
    from pvsource.wiring import CableRun
    for ambient, ok in ((55.0, True), (65.0, False)):
        run = CableRun("string", "string", 5.0, 12.0, group="g1", size=parse_size("1.5 mm2"),
                       installed=(("ambient_c", ambient),))
        system = make_system(demo_module, groups=((2, 1),), cables=(run,))
        c = next(c for c in design_checks(system, -10.0, 35.0) if c.name == "conductor_current[string]")
        assert c.passed is ok and c.data["protection_a"] == 16.0
        assert c.limit == (16.0 if ok else 12.0)
        if not ok:
            assert c.reason().startswith("overload protection") and "433.1" in c.reason()


def _two_trackers(demo_module, cables=()):
    """Four modules a string on g1 and three on g2, each group on its own tracker, one LFP bank."""
    from pvsource import bank as bank_model
    from pvsource.system import ControllerGroups
    base = make_system(demo_module, groups=((4, 2), (3, 3)), cables=cables)
    east = make_controller("mppt", name="east", max_input_v=150.0, max_output_a=40.0, max_input_isc_a=30.0)
    west = make_controller("mppt", name="west", max_input_v=150.0, max_output_a=30.0, max_input_isc_a=30.0)
    return replace(base, bank=bank_model.make_bank("lfp", 8, 1, 280.0, 0.5, 25.0),
                   controllers=(ControllerGroups(east, ("g1",)), ControllerGroups(west, ("g2",))))


def test_each_controller_is_checked_against_its_own_groups(demo_module):
    from pvsource.wiring import CableRun
    links = CableRun("links", "interconnect", 0.5, 0.5, size=None)
    system = _two_trackers(demo_module, (links,))
    checks = {c.name: c for c in design_checks(system, -15.0, 40.0)}
    # NEC 690.7(A)(1) with the datasheet's coefficient, by hand:
    # 40.1 V x (1 - 0.0029 x (-15 - 25)) = 44.75 V a module; 4 modules = 179.0 V
    # against the east tracker's 150 V (fails), 3 modules = 134.3 V on the west one (passes).
    voc = 40.1 * (1 - 0.0029 * (-40.0))
    assert checks["max_string_voc[east]"].value == pytest.approx(4 * voc, rel=1e-9)
    assert checks["max_string_voc[east]"].passed is False
    assert checks["max_string_voc[west]"].value == pytest.approx(3 * voc, rel=1e-9)
    assert checks["max_string_voc[west]"].passed is True
    # NEC 690.8(A)(1) per controller input: 1.25 x 2 x 9.8 = 24.5 A (east), 1.25 x 3 x 9.8 = 36.75 A (west)
    # against each tracker's 30 A.
    assert checks["controller_input_isc[east]"].value == pytest.approx(24.5) and \
        checks["controller_input_isc[east]"].passed is True
    assert checks["controller_input_isc[west]"].value == pytest.approx(36.75) and \
        checks["controller_input_isc[west]"].passed is False
    assert checks["controller_input_isc[west]"].record()["controller"] == "west"
    # Each tracker has its own combiner: 3 strings on the west one, 2 on the east.
    assert checks["string_fuse[west]"].record()["backfeed_a"] == pytest.approx(2 * 1.25 * 9.8)
    assert checks["string_fuse[east]"].record()["backfeed_a"] == pytest.approx(1 * 1.25 * 9.8)
    # Output power, STC: 8 modules x 33 x 9.2 W against 40 A x the absorption
    # voltage (8 cells x 3.55 V = 28.4 V, the preset's value worked out here).
    assert checks["controller_output_power[east]"].value == pytest.approx(8 * 33.0 * 9.2)
    assert checks["controller_output_power[east]"].limit == pytest.approx(40.0 * 28.4)
    assert "max_string_voc" not in checks and "controller_input_isc" not in checks


def test_the_interconnect_carries_every_controllers_output(demo_module):
    from pvsource.checks import design_currents
    from pvsource.wiring import CableRun
    runs = (CableRun("east out", "bank", 2.0, 1.0, controller="east"),
            CableRun("west feeder", "feeder", 10.0, 3.0, controller="west"),
            CableRun("links", "interconnect", 0.5, 0.5))
    currents = {d["run"]: d for d in design_currents(_two_trackers(demo_module, runs))}
    # NEC 690.8(A)(1): a converter's output circuit carries its rated output;
    # the west feeder carries 1.25 x its own 3 strings' Isc; the interconnect both outputs.
    assert currents["east out"]["circuit_current_a"] == pytest.approx(40.0)
    assert currents["west feeder"]["circuit_current_a"] == pytest.approx(1.25 * 3 * 9.8)
    assert currents["links"]["circuit_current_a"] == pytest.approx(40.0 + 30.0)


def test_a_run_without_a_known_ampacity_is_unverified_not_passed(demo_module):
    # A run given only by resistance_ohm_per_km has no size, so no table: its conductor check cannot be made.
    # It must be reported, and the result is not a pass; its own ampacity_a makes it checkable.
    from pvsource.checks import all_passed, verdict_of
    from pvsource.wiring import CableRun
    run = CableRun("feeder", "feeder", 10.0, 2.0)
    checks = design_checks(make_system(demo_module, groups=((2, 3),), cables=(run,)), -10.0, 35.0)
    c = next(c for c in checks if c.name == "conductor_current[feeder]")
    assert c.unverified and c.passed is None and c.verdict == "unverified" and not c.failed
    assert c.value == pytest.approx(1.5625 * 3 * 9.8)   # NEC 690.8: 3 strings x Isc 9.8 A x 1.25 x 1.25
    assert "size" in c.detail and "ampacity_a" in c.detail and c.reason().startswith("ampacity unknown")
    # No limit in the file for the voltages (no controller, mpp load): without the run nothing compares.
    assert all_passed(checks) is False and verdict_of(checks) == "unverified"
    rated = design_checks(make_system(demo_module, groups=((2, 3),), cables=(replace(run, ampacity_a=60.0),)),
                          -10.0, 35.0)
    c = next(c for c in rated if c.name == "conductor_current[feeder]")
    assert c.passed is True and c.limit == 60.0 and verdict_of(rated) == "pass"
    # A sized run the tables do not hold (400 mm2 copper: IEC 60364-5-52 stops at 300) is unverified too.
    from pvsource.conductors import parse_size
    big = design_checks(make_system(demo_module, groups=((2, 3),),
                                    cables=(replace(run, size=parse_size("400 mm2")),)), -10.0, 35.0)
    assert next(c for c in big if c.name == "conductor_current[feeder]").unverified
    # A failure still reads as a failure when another check is unverified.
    small = CableRun("lead", "feeder", 10.0, 2.0, size=parse_size("1.5 mm2"))
    both = design_checks(make_system(demo_module, groups=((2, 3),), cables=(run, small)), -10.0, 35.0)
    assert verdict_of(both) == "fail"
