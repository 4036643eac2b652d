"""Charging through a controller: stages, limits, curtailment and the energy balance."""

from dataclasses import replace

import numpy as np
import pytest

import reference as ref
from pvsource import bank as bank_model
from pvsource.controller import efficiency_at, make_controller
from pvsource.operating import operating_points
from pvsource.system import Load

from conftest import cable, make_system


def acceptance_a(bank):
    """Worked out here from the preset's stated rule (common practice): the bank
    accepts its full charge rate up to ``absorption_start_soc`` and a straight
    taper to zero at full charge."""
    c = bank.chemistry
    share = min(max((1.0 - bank.soc) / (1.0 - c.absorption_start_soc), 0.0), 1.0)
    return share * c.max_charge_c_rate * bank.capacity_ah


def bank_system(module, kind, chemistry="lfp", cells=8, capacity=280.0, soc=0.5, temp=25.0, groups=((3, 2),),
                **controller):
    runs = (cable("feeder", 18, 3.4), cable("bank", 2.5, 0.8))
    system = make_system(module, groups=groups, cables=runs, load=Load("mpp"))
    bank = bank_model.make_bank(chemistry, cells, 1, capacity, soc, temp)
    return replace(system, bank=bank, controller=make_controller(kind, **controller))


KINDS = [("direct", dict(groups=((1, 3),))), ("direct", dict(groups=((1, 3),), diode_drop_v=0.7)),
         ("pwm", dict(groups=((1, 3),))), ("mppt", dict(max_output_a=40.0)), ("mppt", dict(rated_power_w=2000.0)),
         ("mppt", dict(max_output_a=40.0, max_input_v=100.0))]


@pytest.mark.parametrize("kind, extra", KINDS, ids=lambda k: str(k))
def test_energy_balance_holds_for_every_controller(demo_module, rng, kind, extra):
    # Law: generated = array cables + controller + bank cables + bank internal + stored.
    system = bank_system(demo_module, kind, **extra)
    n = 300
    df = operating_points(system, rng.uniform(0, 1200, n), rng.uniform(-10, 70, n), soc=rng.uniform(0, 1, n),
                          bank_temp_c=rng.uniform(-10, 40, n))
    assert df["converged"].all()
    assert np.abs(df["energy_balance_residual"]).max() <= 1e-9
    parts = (df["string_loss_w"] + df["home_run_loss_w"] + df["feeder_loss_w"] + df["controller_loss_w"]
             + df["bank_loss_w"] + df["bank_internal_loss_w"] + df["stored_w"])
    np.testing.assert_allclose(df["generated_w"], parts, rtol=1e-9, atol=1e-9)
    assert (df["charge_current_a"] >= -1e-12).all() or kind == "direct"


def test_mppt_delivers_efficiency_times_the_maximum_power_when_nothing_limits(demo_module):
    # Law of a tracking converter: P_out = eta(P_out/rated) x P_mp at its input.
    system = bank_system(demo_module, "mppt", soc=0.3, rated_power_w=2000.0)
    r = operating_points(system, 700.0, 35.0).iloc[0]
    assert r["limit"] == "source" and r["stage"] == "bulk" and r["curtailed_w"] == pytest.approx(0.0, abs=1e-9)
    # Reference: the maximum power through the feeder from pvlib's i_from_v and
    # scipy's bounded maximisation (tests/reference.py).
    groups = [ref.group(ref.diode_at(demo_module.parameters, 700.0, 35.0), 3, 2)]
    p_mp_in, _ = ref.max_power(groups, system.wiring.r_feeder_ohm, 3 * 45.0)
    p_out = (r["bank_emf_v"] + r["charge_current_a"] * (r["bank_r_ohm"] + system.wiring.r_bank_ohm)) \
        * r["charge_current_a"]
    eta = efficiency_at(system.controller, p_mp_in / 2000.0)
    assert p_out == pytest.approx(eta * p_mp_in, rel=1e-9)


def test_controller_current_limit_moves_the_input_toward_voc(demo_module):
    system = bank_system(demo_module, "mppt", max_output_a=20.0, soc=0.3)
    r = operating_points(system, 1000.0, 30.0).iloc[0]
    assert r["charge_current_a"] == pytest.approx(20.0)
    assert r["limit"] == "controller output current"
    assert r["curtailed_w"] > 0
    # Above V_mp: the array sits on its voltage-source side (m > 1).
    assert r["matching_ratio"] > 1.0 and r["v"] > r["source_v_mp"]
    p_in = r["controller_input_v"] * r["i"]
    assert p_in - r["controller_loss_w"] == pytest.approx(
        (r["bank_emf_v"] + 20.0 * (r["bank_r_ohm"] + system.wiring.r_bank_ohm)) * 20.0, rel=1e-9)


def test_absorption_follows_the_constant_voltage_law(demo_module):
    # Law: in absorption the bank terminals sit at V_abs, so I = (V_abs - E) / R.
    # NMC's absorption voltage (4.10 V/cell) lies below its full OCV, so near
    # full the law itself, not the acceptance taper, sets the current.
    system = bank_system(demo_module, "mppt", chemistry="nmc", cells=7, capacity=200.0, soc=0.9,
                         max_output_a=80.0)
    v_abs, _ = bank_model.charge_voltages_v(system.bank)
    for soc in np.linspace(0.9, 0.99, 91):  # the state of charge where the law, not the taper, binds
        bank = replace(system.bank, soc=float(soc))
        emf, r_b = bank_model.thevenin(bank)
        law = (float(v_abs) - float(emf)) / float(r_b)
        if 0 < law < min(acceptance_a(bank), 20.0):
            break
    system = replace(system, bank=bank)
    r = operating_points(system, 1000.0, 30.0).iloc[0]
    assert 0 < law < 20.0
    assert r["stage"] == "absorption" and r["limit"] == "voltage regulation"
    assert r["charge_current_a"] == pytest.approx(law, rel=1e-9)
    assert r["load_v"] == pytest.approx(float(v_abs), rel=1e-9)  # the terminals at the absorption voltage


def test_absorption_tapers_with_the_banks_acceptance(demo_module):
    # Common practice: in the constant-voltage stage a lead-acid bank's current
    # tapers toward full charge; here it is the acceptance, below the ohmic law.
    system = bank_system(demo_module, "mppt", chemistry="lead-acid-flooded", cells=12, capacity=200.0, soc=0.9,
                         max_output_a=80.0)
    r = operating_points(system, 1000.0, 30.0).iloc[0]
    accept = acceptance_a(system.bank)
    # Common practice, from memory: a flooded bank at 90 % in absorption takes
    # a few per cent of C up to about C/8 (the tail falls to 1-2 % of C when full).
    assert 0.02 * 200.0 <= accept <= 0.125 * 200.0
    # Below Ohm's law at the absorption voltage, worked out from the bank's EMF and resistance.
    v_abs, _ = bank_model.charge_voltages_v(system.bank)
    assert accept < (float(v_abs) - r["bank_emf_v"]) / r["bank_r_ohm"]
    assert r["stage"] == "absorption"
    assert r["charge_current_a"] == pytest.approx(accept, rel=1e-9)
    assert r["curtailed_w"] > 0


def test_a_full_bank_floats_and_takes_nothing(demo_module):
    for chemistry, cells in (("lfp", 8), ("lead-acid-flooded", 12)):
        system = bank_system(demo_module, "mppt", chemistry=chemistry, cells=cells, soc=1.0, max_output_a=80.0)
        r = operating_points(system, 900.0, 30.0).iloc[0]
        assert r["stage"] == "float" and r["charge_current_a"] == 0.0 and r["stored_w"] == 0.0


def test_pwm_regulates_by_switching(demo_module):
    system = bank_system(demo_module, "pwm", groups=((1, 3),), chemistry="lead-acid-flooded", cells=12,
                         capacity=100.0, soc=0.9)
    r = operating_points(system, 1000.0, 30.0).iloc[0]
    accept = acceptance_a(system.bank)
    assert r["duty"] < 1.0 and r["stage"] == "absorption"
    assert r["charge_current_a"] == pytest.approx(accept, rel=1e-9)
    assert r["duty"] == pytest.approx(accept / r["i"], rel=1e-9)
    assert r["curtailed_w"] == pytest.approx((1 - r["duty"]) * r["p"], rel=1e-9)
    bulk = operating_points(replace(system, bank=replace(system.bank, soc=0.2)), 300.0, 30.0).iloc[0]
    assert bulk["duty"] == 1.0 and bulk["stage"] == "bulk"


def test_no_charging_of_lithium_below_freezing(demo_module):
    # Common practice: lithium cells must not be charged below 0 degC.
    system = bank_system(demo_module, "mppt", temp=-5.0, max_output_a=40.0)
    r = operating_points(system, 800.0, 10.0).iloc[0]
    assert r["charge_current_a"] == 0.0 and r["limit"] == "bank below its minimum charging temperature: charging blocked"
    direct = bank_system(demo_module, "direct", groups=((1, 3),), temp=-5.0)
    r = operating_points(direct, 800.0, 10.0).iloc[0]
    assert r["charge_current_a"] > 0 and "minimum temperature" in r["limit"]  # nothing stops it: say so


def test_the_controller_stops_above_its_maximum_input(demo_module):
    system = bank_system(demo_module, "mppt", groups=((4, 1),), max_output_a=40.0, max_input_v=100.0)
    r = operating_points(system, 1000.0, 10.0).iloc[0]
    assert r["charge_current_a"] == 0.0 and "max_input_v" in r["limit"]
    assert abs(r["energy_balance_residual"]) <= 1e-9


def test_mppt_at_night_and_below_its_window_rests_at_open_circuit(demo_module):
    system = bank_system(demo_module, "mppt", groups=((1, 1),), cells=16, max_output_a=40.0)
    df = operating_points(system, [0.0, 800.0], 25.0)
    assert (df["charge_current_a"] == 0.0).all()
    assert list(df["limit"]) == ["dark", "input voltage window"]
    assert np.abs(df["energy_balance_residual"]).max() <= 1e-9


def test_a_blocking_diode_stops_back_feed_at_night(demo_module):
    with_diode = bank_system(demo_module, "direct", groups=((1, 1),), diode_drop_v=0.7, soc=0.9)
    without = bank_system(demo_module, "direct", groups=((1, 1),), soc=0.9)
    assert operating_points(with_diode, 0.0, 10.0).iloc[0]["charge_current_a"] == 0.0
    # Without one, a 24 V bank drives current back into a dark module (physics, not a fault).
    assert operating_points(without, 0.0, 10.0).iloc[0]["charge_current_a"] <= 0.0


def test_direct_coupled_current_matches_pvlib_at_the_bank_voltage(demo_module):
    # Reference: pvlib.pvsystem.i_from_v at the bank's terminal voltage E + I R
    # (two strings of one module, no cables, no diode; tests/reference.py).
    system = replace(make_system(demo_module, groups=((1, 2),)), bank=bank_model.make_bank("lfp", 8, 1, 200, 0.5, 25),
                     controller=make_controller("direct"))
    r = operating_points(system, 800.0, 45.0).iloc[0]
    v_terminal = r["bank_emf_v"] + r["charge_current_a"] * r["bank_r_ohm"]
    groups = [ref.group(ref.diode_at(demo_module.parameters, 800.0, 45.0), 1, 2)]
    assert r["charge_current_a"] == pytest.approx(ref.array_current(groups, v_terminal), rel=1e-9)


def test_a_charge_current_above_the_arrays_isc_is_withheld(demo_module, monkeypatch):
    # Guard rail: through a wire or a switch the bank cannot get more than Isc.
    import pvsource.operating as op
    from pvsource.errors import PhysicsGuardError
    real = op.solve_charging

    def inflated(*args, **kwargs):
        out = real(*args, **kwargs)
        return replace(out, charge_current_a=out.charge_current_a * 10.0)

    monkeypatch.setattr(op, "solve_charging", inflated)
    monkeypatch.setattr(op, "ENERGY_BALANCE_TOLERANCE", 1e9)  # let the current guard speak first
    system = bank_system(demo_module, "direct", groups=((1, 3),))
    with pytest.raises(PhysicsGuardError, match="short-circuit"):
        operating_points(system, 800.0, 40.0)
