"""The one charge regulation: every limit, the stage and what binds, worked out by hand."""

import numpy as np
import pytest

from pvsource import regulation as reg

INF = float("inf")


def cv(i_free, soc, emf, r, v_target, i_ctrl=INF, i_rate=INF, start=0.5, room=INF, stage=reg.BULK, regulated=True,
       free_limit=reg.SOURCE, load=0.0):
    return reg.regulate(i_free, free_limit, soc, emf, r, i_ctrl, i_rate, v_target, v_target, start, room, INF,
                        stage, regulated, load)


def test_constant_voltage_current_is_ohms_law_in_a_worked_example():
    # Law (Ohm and Kirchhoff's voltage law on the Thevenin equivalent), worked
    # by hand from the LFP preset's table: a 4-cell 100 Ah LFP battery at 50 %
    # and 25 degC rests at E = 4 x 3.290 = 13.160 V behind R = 4 x 0.08 / 100 =
    # 3.2 mOhm. Held at 13.200 V it takes 0.040 V / 3.2 mOhm = 12.5 A; held at
    # or below its EMF it takes nothing (a charger cannot sink current).
    i, stage, limit = cv(100.0, 0.5, 13.160, 0.0032, 13.200)
    assert i == pytest.approx(12.5, rel=1e-9)
    assert stage == reg.ABSORPTION and limit == reg.VOLTAGE_REGULATION
    held = np.array([13.0, 13.160, 13.168])
    i, _, _ = reg.regulate_arrays(100.0, reg.SOURCE, 0.5, 13.160, 0.0032, INF, INF, held, held, 0.5, INF, INF,
                                  reg.BULK, True)
    np.testing.assert_allclose(i, [0.0, 0.0, 2.5], atol=1e-9)
    # The same voltage held as float: the stage says so.
    assert cv(100.0, 0.5, 13.160, 0.0032, 13.200, stage=reg.FLOAT)[1] == reg.FLOAT
    # The float target, not the absorption one, when the controller floats.
    i, _, _ = reg.regulate(100.0, reg.SOURCE, 0.5, 13.160, 0.0032, INF, INF, 14.0, 13.168, 0.5, INF, INF, reg.FLOAT,
                           True, 0.0)
    assert i == pytest.approx(2.5, rel=1e-9)


def test_the_tightest_limit_binds_and_is_named():
    # Worked by hand: 50 A on offer into a bank at E = 26 V, R = 10 mOhm, target
    # 28.4 V (Ohm: 240 A), rate 100 A, controller 40 A: the controller binds.
    assert cv(50.0, 0.3, 26.0, 0.01, 28.4, i_ctrl=40.0, i_rate=100.0) == (40.0, reg.BULK, reg.CONTROLLER_OUTPUT)
    # A 30 A charge rate is tighter.
    assert cv(50.0, 0.3, 26.0, 0.01, 28.4, i_ctrl=40.0, i_rate=30.0) == (30.0, reg.BULK, reg.BANK_RATE)
    # Near the target, Ohm's law: (26.2 - 26.0) / 0.01 = 20 A, absorption.
    i, stage, limit = cv(50.0, 0.3, 26.0, 0.01, 26.2, i_ctrl=40.0, i_rate=30.0)
    assert i == pytest.approx(20.0) and stage == reg.ABSORPTION and limit == reg.VOLTAGE_REGULATION
    # Room for 5 A in the step: the bank fills, and the stage is float.
    assert cv(50.0, 0.3, 26.0, 0.01, 28.4, i_ctrl=40.0, room=5.0) == (5.0, reg.FLOAT, reg.BANK_FULL)
    # Too cold to charge (rate 0): nothing, and the cold is named (not the rate).
    assert cv(50.0, 0.3, 26.0, 0.01, 28.4, i_rate=0.0) == (0.0, reg.IDLE, reg.BANK_COLD)
    # Less on offer than any limit: the source binds, or what the input window made of it.
    assert cv(10.0, 0.3, 26.0, 0.01, 28.4, i_ctrl=40.0) == (10.0, reg.BULK, reg.SOURCE)
    assert cv(0.0, 0.3, 26.0, 0.01, 28.4, free_limit=reg.DARK) == (0.0, reg.IDLE, reg.DARK)


def test_acceptance_tapers_straight_to_zero_at_full():
    # Common practice (the presets' absorption_start_soc): full rate at the
    # start, a straight line to zero at full. From 0.8 with a 40 A rate, at
    # 0.9 the bank accepts 40 x (1 - 0.9) / (1 - 0.8) = 20 A, at 1.0 nothing.
    for soc, expected in ((0.7, 40.0), (0.8, 40.0), (0.9, 20.0), (0.95, 10.0), (1.0, 0.0)):
        i, _, _ = cv(100.0, soc, 26.0, 0.01, 30.0, i_rate=40.0, start=0.8)
        assert i == pytest.approx(expected, abs=1e-9), soc


def test_a_direct_connection_is_not_limited_but_says_what_it_breaks():
    # Nothing regulates a wire: the current is what the array gives; the limit
    # code names the first bound it breaks (full, cold, rate, voltage).
    assert cv(50.0, 0.5, 26.0, 0.01, 28.4, i_rate=100.0, regulated=False) == (50.0, reg.UNREGULATED, reg.NONE)
    assert cv(50.0, 0.5, 26.0, 0.01, 28.4, room=20.0, regulated=False)[2] == reg.NONE_FULL
    assert cv(50.0, 0.5, 26.0, 0.01, 28.4, i_rate=0.0, regulated=False)[2] == reg.NONE_COLD
    assert cv(50.0, 0.5, 26.0, 0.01, 28.4, i_rate=40.0, regulated=False)[2] == reg.NONE_RATE
    # 26 + 50 x 0.01 = 26.5 V at the terminals, above a 26.4 V target.
    assert cv(50.0, 0.5, 26.0, 0.01, 26.4, regulated=False)[2] == reg.NONE_OVER_V
    # A bank driving current back into a dark array.
    assert cv(-1.0, 0.5, 26.0, 0.01, 28.4, regulated=False, free_limit=reg.DARK)[1:] == (reg.DISCHARGING, reg.DARK)


def test_every_code_has_words():
    assert len(reg.STAGE_WORDS) == 6 and len(reg.LIMIT_WORDS) == 14 == reg.BANK_COLD + 1
    assert len(set(reg.LIMIT_WORDS)) == len(reg.LIMIT_WORDS)


def test_a_stage_in_force_is_reported_whatever_binds():
    # A cloud in absorption: the source limits, yet the controller is in absorption.
    assert cv(5.0, 0.9, 26.0, 0.01, 28.4, stage=reg.ABSORPTION) == (5.0, reg.ABSORPTION, reg.SOURCE)
    assert cv(50.0, 0.9, 26.0, 0.01, 28.4, i_ctrl=40.0, stage=reg.FLOAT)[1:] == (reg.FLOAT, reg.CONTROLLER_OUTPUT)
    # At night nothing is in force.
    assert cv(0.0, 0.9, 26.0, 0.01, 28.4, stage=reg.FLOAT)[1] == reg.IDLE


def _walk(steps, step_h, tail_a=2.0, max_h=4.0, rebulk=0.85):
    """Run next_stage over (limit, i_bank, i_free, soc_next) steps from bulk; the stage before each step."""
    stage, hours, out = reg.BULK, 0.0, []
    for limit, i_bank, i_free, soc in steps:
        out.append(stage)
        stage, hours = reg.next_stage(stage, hours, limit, i_bank, i_free, soc, step_h, tail_a, max_h, rebulk,
                                      0.5 * step_h)
    return out, stage, hours


def test_stage_hysteresis_law_worked_by_hand():
    # The law of issue 12 (common practice for three-stage charging): bulk until
    # the absorption voltage binds; absorption until the held current tapers to
    # the tail (2 A here) or the maximum time (4 h); float until the state of
    # charge falls below the re-bulk threshold (0.85); then bulk again.
    src, vr = reg.SOURCE, reg.VOLTAGE_REGULATION
    steps = [(src, 30.0, 30.0, 0.70), (vr, 20.0, 40.0, 0.80), (vr, 8.0, 40.0, 0.90), (vr, 2.0, 40.0, 0.97),
             (src, 0.0, 0.0, 0.92), (src, 0.0, 0.0, 0.86), (src, 0.0, 0.0, 0.84), (src, 10.0, 10.0, 0.86)]
    stages, _, _ = _walk(steps, 1.0)
    B, A, F = reg.BULK, reg.ABSORPTION, reg.FLOAT
    assert stages == [B, B, A, A, F, F, F, B]
    # A flicker of the voltage above re-bulk changes nothing: float holds from 0.97 down to 0.85.
    # The maximum time: 4 h in absorption at a held current that never tapers to 2 A.
    # (The first step begins in bulk; the voltage law binding in it makes it
    # the first hour of absorption.)
    stages, stage, hours = _walk([(vr, 20.0, 40.0, 0.9)] * 6, 1.0)
    assert stages == [B, A, A, A, F, F] and stage == F and hours == 4.0
    # Counted in hours, not steps: at 15-minute steps the same 4 h are 16 steps.
    stages, _, hours = _walk([(vr, 20.0, 40.0, 0.9)] * 20, 0.25)
    assert 1 + stages.count(A) == 16 and hours == 4.0
    # The absorption clock stops at night (nothing from the array) and restarts at the next bulk.
    stages, _, hours = _walk([(vr, 20.0, 40.0, 0.9)] * 2 + [(src, 0.0, 0.0, 0.9)] * 5, 1.0)
    assert stages[-1] == A and hours == 2.0


def test_the_bank_limits_bind_the_banks_part_and_the_controller_carries_the_load():
    # Kirchhoff's current law at the bank terminals: the controller's output is the bank's current plus the
    # loads'. The bank's limits bind its own part. Worked by hand on the LFP example above (E 13.160 V,
    # R 0.0032 ohm, target 13.200 V, so the bank takes (13.200 - 13.160) / 0.0032 = 12.5 A) with a 5 A load:
    # the controller gives 17.5 A and the terminal stays at the target.
    i, stage, limit = cv(100.0, 0.5, 13.160, 0.0032, 13.200, load=5.0)
    assert i == pytest.approx(17.5) and limit == reg.VOLTAGE_REGULATION
    assert 13.160 + (i - 5.0) * 0.0032 == pytest.approx(13.200)
    # The acceptance near full (rate 40 A, taper from 80 %: at 97.6 % the bank accepts 40 x 0.024 / 0.2 =
    # 4.8 A) binds the bank's part, not the whole: with a 4.74 A load the controller gives 9.54 A, so the bank
    # still fills (it used to give 4.8 A in all, and the bank stalled where acceptance met the load).
    i, _, limit = cv(100.0, 0.976, 12.0, 0.01, 14.4, i_rate=40.0, start=0.8, load=4.74)
    assert i == pytest.approx(4.74 + 4.8) and limit == reg.VOLTAGE_REGULATION
    # The charge rate binds the bank's part too; the controller's own output limit binds the whole.
    assert cv(100.0, 0.3, 12.0, 0.01, 14.4, i_rate=20.0, load=3.0)[0::2] == (23.0, reg.BANK_RATE)
    assert cv(100.0, 0.3, 12.0, 0.01, 14.4, i_ctrl=21.0, i_rate=20.0, load=3.0)[0::2] == (21.0, reg.CONTROLLER_OUTPUT)
    # The EMF above the target (after absorption, now floating): the bank gives (13.160 - 13.168) / 0.0032 =
    # -2.5 A toward the 5 A load and the controller the other 2.5 A; with a 2 A load, the controller nothing.
    assert cv(100.0, 0.5, 13.168, 0.0032, 13.160, load=5.0)[0] == pytest.approx(2.5)
    assert cv(100.0, 0.5, 13.168, 0.0032, 13.160, load=2.0)[0] == 0.0
    # Too cold to charge: the bank takes nothing, the controller may still carry the load.
    i, _, limit = cv(100.0, 0.3, 12.0, 0.01, 14.4, i_rate=0.0, load=3.0)
    assert i == pytest.approx(3.0) and limit == reg.BANK_COLD


def test_a_controller_limit_equal_to_the_banks_rate_is_the_controllers():
    # Where the controller's output limit equals the bank's rate, the controller can give no more: the limit
    # is the controller's, whether or not a load draws beside the bank (so the label does not flip with a
    # load switched in or out). A rate strictly below it is the bank's.
    assert cv(100.0, 0.3, 12.0, 0.01, 14.4, i_ctrl=40.0, i_rate=40.0)[0::2] == (40.0, reg.CONTROLLER_OUTPUT)
    assert cv(100.0, 0.3, 12.0, 0.01, 14.4, i_ctrl=40.0, i_rate=40.0, load=4.0)[0::2] == (40.0, reg.CONTROLLER_OUTPUT)
    assert cv(100.0, 0.3, 12.0, 0.01, 14.4, i_ctrl=40.0, i_rate=30.0)[0::2] == (30.0, reg.BANK_RATE)
