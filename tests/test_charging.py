"""Charging through a controller: stages, limits, curtailment and the energy balance."""

from dataclasses import replace

import numpy as np
import pytest

from pvsource import bank as bank_model
from pvsource.controller import Controller, efficiency_at
from pvsource.network import evaluate_groups, solve_max_power
from pvsource.operating import operating_points
from pvsource.system import Load

from conftest import cable, make_system


def bank_system(module, kind, chemistry="lfp", cells=8, capacity=280.0, soc=0.5, temp=25.0, groups=((3, 2),),
                **controller):
    runs = (cable("feeder", 18, 3.4), cable("bank", 2.5, 0.8))
    system = make_system(module, groups=groups, cables=runs, load=Load("mpp"))
    bank = bank_model.make_bank(chemistry, cells, 1, capacity, soc, temp)
    return replace(system, bank=bank, controller=Controller(kind=kind, **controller))


KINDS = [("direct", dict(groups=((1, 3),))), ("direct", dict(groups=((1, 3),), diode_drop_v=0.7)),
         ("pwm", dict(groups=((1, 3),))), ("mppt", dict(max_output_a=40.0)), ("mppt", dict())]


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
    system = bank_system(demo_module, "mppt", soc=0.3)
    r = operating_points(system, 700.0, 35.0).iloc[0]
    assert r["limit"] == "source" and r["stage"] == "bulk" and r["curtailed_w"] == pytest.approx(0.0, abs=1e-9)
    # Reference: the maximum power through the feeder, found independently.
    from pvsource.module import parameters_at
    from pvsource.network import Network
    net = Network(parameters_at(demo_module.parameters, np.array([[700.0]]), np.array([[35.0]])),
                  np.array([3.0]), np.array([2.0]), np.zeros(1), np.zeros(1))
    r_f = system.wiring.r_feeder_ohm
    mp = solve_max_power(net, r_f)
    i = evaluate_groups(net, mp.x_v).group_i_a[0, 0]
    p_mp_in = (mp.bus_v[0] - i * r_f) * i
    p_out = (r["bank_emf_v"] + r["charge_current_a"] * (r["bank_r_ohm"] + system.wiring.r_bank_ohm)) \
        * r["charge_current_a"]
    rated = 1.0 * r["bank_target_v"]  # no max_output_a: rated as 1 A at the target voltage
    eta = efficiency_at(system.controller, p_mp_in / rated)
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
    # A lead-acid bank near full: E close to the absorption voltage.
    system = bank_system(demo_module, "mppt", chemistry="lead-acid-flooded", cells=12, capacity=200.0, soc=0.99)
    r = operating_points(system, 1000.0, 30.0).iloc[0]
    e, r_b = r["bank_emf_v"], r["bank_r_ohm"]
    v_abs, _ = bank_model.charge_voltages_v(system.bank)
    expected = max(0.0, (v_abs - e) / r_b)
    if expected < r["bank_max_charge_a"]:
        assert r["stage"] == "absorption"
        assert r["charge_current_a"] == pytest.approx(expected, rel=1e-9)


def test_float_holds_the_float_voltage_when_full(demo_module):
    system = bank_system(demo_module, "mppt", soc=1.0)
    r = operating_points(system, 900.0, 30.0).iloc[0]
    assert r["stage"] == "float"
    _, v_float = bank_model.charge_voltages_v(system.bank)
    assert r["charge_current_a"] == pytest.approx(max(0.0, (v_float - r["bank_emf_v"]) / r["bank_r_ohm"]), abs=1e-9)


def test_pwm_regulates_by_switching(demo_module):
    system = bank_system(demo_module, "pwm", groups=((1, 3),), chemistry="lead-acid-flooded", cells=12,
                         capacity=100.0, soc=0.99)
    r = operating_points(system, 1000.0, 30.0).iloc[0]
    v_abs, _ = bank_model.charge_voltages_v(system.bank)
    expected = min((v_abs - r["bank_emf_v"]) / r["bank_r_ohm"], r["bank_max_charge_a"])
    if r["duty"] < 1.0:
        assert r["charge_current_a"] == pytest.approx(expected, rel=1e-9)
        assert r["stage"] in ("absorption", "bulk")
    bulk = operating_points(replace(system, bank=replace(system.bank, soc=0.2)), 300.0, 30.0).iloc[0]
    assert bulk["duty"] == 1.0 and bulk["stage"] == "bulk"


def test_no_charging_of_lithium_below_freezing(demo_module):
    # Common practice: lithium cells must not be charged below 0 degC.
    system = bank_system(demo_module, "mppt", temp=-5.0)
    r = operating_points(system, 800.0, 10.0).iloc[0]
    assert r["charge_current_a"] == 0.0 and r["limit"] == "bank charge rate"


def test_a_blocking_diode_stops_back_feed_at_night(demo_module):
    with_diode = bank_system(demo_module, "direct", groups=((1, 1),), diode_drop_v=0.7, soc=0.9)
    without = bank_system(demo_module, "direct", groups=((1, 1),), soc=0.9)
    assert operating_points(with_diode, 0.0, 10.0).iloc[0]["charge_current_a"] == 0.0
    # Without one, a 24 V bank drives current back into a dark module (physics, not a fault).
    assert operating_points(without, 0.0, 10.0).iloc[0]["charge_current_a"] <= 0.0


def test_direct_coupled_current_matches_pvlib_at_the_bank_voltage(demo_module):
    # Reference: pvlib.pvsystem.i_from_v at the bank's terminal voltage E + I R
    # (one string of one module, no cables, no diode).
    from pvlib import pvsystem
    from pvsource.module import parameters_at
    system = replace(make_system(demo_module, groups=((1, 2),)), bank=bank_model.make_bank("lfp", 8, 1, 200, 0.5, 25),
                     controller=Controller(kind="direct"))
    r = operating_points(system, 800.0, 45.0).iloc[0]
    v_terminal = r["bank_emf_v"] + r["charge_current_a"] * r["bank_r_ohm"]
    st = parameters_at(demo_module.parameters, 800.0, 45.0)
    ref = 2 * float(pvsystem.i_from_v(v_terminal, st.i_l_a, st.i_o_a, st.r_s_ohm, st.r_sh_ohm, st.a_v,
                                      method="lambertw"))
    assert r["charge_current_a"] == pytest.approx(ref, rel=1e-9)
