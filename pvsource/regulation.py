"""Charge regulation: what the bank takes of what the controller could give.

One pure, element-wise function, :func:`regulate`, holds every charge limit:
the controller's output current, the bank's charge rate (zero when too cold
to charge), the constant-voltage law at the stage's target, the bank's
acceptance near full charge, and the room left in the bank within a time
step. It is compiled with numba, so the season's time loop calls it on plain
floats; :func:`regulate_arrays` calls it element by element for the
operating-point pipeline. No other copy of these limits exists.

Stage and limit are integer codes; :data:`STAGE_WORDS` and
:data:`LIMIT_WORDS` give the words the terminal, the report and the tables
show.
"""

from __future__ import annotations

import numpy as np

from pvsource.compiled import kernel

# Stage codes.
IDLE, BULK, ABSORPTION, FLOAT, UNREGULATED, DISCHARGING = range(6)
STAGE_WORDS = ("idle", "bulk", "absorption", "float", "unregulated", "discharging")

# Limit codes: the first is the source itself; the next four are the
# regulation's own; then what the controller's input window does to the
# unlimited current; the next five say that nothing regulates (a direct
# connection) and what that breaks; the last is the regulation's too (a
# bank too cold to take charge: its charge rate is zero), added after the others.
(SOURCE, CONTROLLER_OUTPUT, BANK_RATE, VOLTAGE_REGULATION, BANK_FULL, INPUT_WINDOW, DARK, INPUT_OVER_MAX,
 NONE, NONE_FULL, NONE_COLD, NONE_RATE, NONE_OVER_V, BANK_COLD) = range(14)
LIMIT_WORDS = ("source", "controller output current", "bank charge rate", "voltage regulation", "bank full",
               "input voltage window", "dark", "input above max_input_v: controller off", "none",
               "none: the bank is full and overcharged", "none: charging below the bank's minimum temperature",
               "none: above the bank's charge rate", "none: above the regulation voltage",
               "bank below its minimum charging temperature: charging blocked")


@kernel
def regulate(i_free_a, free_limit, soc, emf_v, r_ohm, i_ctrl_a, i_rate_a, v_abs_v, v_float_v, accept_start_soc,
             room_a, hold_a, stage_in, regulated, load_a):  # pragma: no cover - compiled
    """The charge current, stage code and limit code at one condition.

    The charge current is what the controller puts out at the bank, where
    the loads draw ``load_a`` in parallel with the bank: the bank's own
    limits (its charge rate, its acceptance near full, the constant-voltage
    law) bind the bank's part, the current less the load, so a controller
    holding the bank at its voltage also carries the load while the array can.
    The controller's output limit and the room in the step bind the whole.

    Parameters
    ----------
    i_free_a : float
        What the controller would put into the bank with no limit [A].
    free_limit : int
        The limit code that applies when no bank or controller limit binds
        (:data:`SOURCE`, or what the input window made of the source).
    soc : float
        State of charge [-].
    emf_v, r_ohm : float
        The bank's Thevenin EMF [V] and resistance [ohm].
    i_ctrl_a : float
        The controller's output current limit [A] (infinite if none).
    i_rate_a : float
        The bank's maximum charge current [A] (0 where it may not charge).
    v_abs_v, v_float_v : float
        The absorption and float voltages [V]; the float voltage is the
        target when ``stage_in`` is :data:`FLOAT`.
    accept_start_soc : float
        State of charge from which the bank's acceptance tapers to zero at
        full [-]: the bank accepts ``i_rate_a (1 - soc) / (1 - start)``.
    room_a : float
        The current that just fills the bank within the step (infinite at a
        single operating point) [A].
    hold_a : float
        The constant-voltage current averaged over the step, where the time
        loop integrated it exactly (infinite otherwise) [A]: over a long
        step the held current falls as the bank fills, or rises as a load
        drains it; it then replaces the law at the step's start.
    stage_in : int
        The controller's stage as the step begins (:data:`BULK`,
        :data:`ABSORPTION` or :data:`FLOAT`). In absorption or float it is
        the stage reported whenever the array gives something, whatever
        binds; from bulk, a binding constant-voltage law reports absorption
        (unless a time loop's ``hold_a`` says the step only reached the
        voltage in its second half: the time loop passes absorption for a
        step mostly held).
    regulated : bool
        False for a direct connection: nothing limits the current, and the
        limit code says which bound it breaks.
    load_a : float
        The current the loads draw at the bank [A] (0 at a single operating
        point, or while a generator carries them).

    Returns
    -------
    i_bank_a : float
    stage : int
    limit : int
    """
    floating = stage_in == FLOAT
    v_target_v = v_float_v if floating else v_abs_v
    share = min(max((1.0 - soc) / (1.0 - accept_start_soc), 0.0), 1.0)
    if hold_a < np.inf:
        i_cv = hold_a
    else:
        # The bank's part at the held voltage (negative where its EMF stands
        # above it: the bank then helps carry the load), within its acceptance.
        i_cv = max(load_a + min((v_target_v - emf_v) / r_ohm, share * i_rate_a), 0.0)
    i_rate_cap = load_a + i_rate_a
    if not regulated:
        i = i_free_a
        own = i - load_a  # the bank's part
        if i > room_a:
            limit = NONE_FULL
        elif own > 0.0 and i_rate_a <= 0.0:
            limit = NONE_COLD
        elif own > i_rate_a:
            limit = NONE_RATE
        elif emf_v + own * r_ohm > v_target_v:
            limit = NONE_OVER_V
        else:
            limit = NONE
        if free_limit == DARK and i <= 0.0:
            limit = DARK
        stage = UNREGULATED if i > 0.0 else (DISCHARGING if i < 0.0 else IDLE)
        return i, stage, limit
    i_max = min(min(i_ctrl_a, i_rate_cap), min(i_cv, room_a))
    if i_free_a > i_max:
        if i_rate_a <= 0.0 and i_max == i_rate_cap:
            limit = BANK_COLD  # the bank's charge rate is zero only below its minimum charging temperature
        elif i_max == room_a:
            limit = BANK_FULL
        elif i_max == i_ctrl_a:
            # The controller can give no more: its limit, also where the bank's rate happens to equal it.
            limit = CONTROLLER_OUTPUT
        elif i_max == i_rate_cap:
            # Before the constant-voltage test: the acceptance equals the rate
            # until the taper starts, and that is still bulk.
            limit = BANK_RATE
        elif i_max == i_cv:
            limit = VOLTAGE_REGULATION
        else:
            limit = CONTROLLER_OUTPUT
        if limit == VOLTAGE_REGULATION and stage_in == BULK and hold_a < np.inf:
            # A time loop's step that reached the voltage in its second half: mostly bulk.
            return i_max, BULK, limit
        if limit == BANK_FULL or limit == VOLTAGE_REGULATION:
            # The constant-voltage stage holds even where it lets no current through.
            return i_max, FLOAT if (floating or limit == BANK_FULL) else ABSORPTION, limit
        if stage_in != BULK:
            return i_max, stage_in, limit
        return i_max, BULK if i_max > 0.0 else IDLE, limit
    if i_free_a > 0.0:
        stage = BULK if stage_in == BULK else stage_in
    else:
        stage = DISCHARGING if i_free_a < 0.0 else IDLE
    return i_free_a, stage, free_limit


@kernel
def next_stage(stage, absorption_h, limit, i_bank_a, i_free_a, soc_next, step_h, tail_a, max_absorption_h,
               rebulk_soc, ahead_h):  # pragma: no cover - compiled
    """The controller's stage after a step, and its time in absorption: the stages' hysteresis.

    - bulk, until the absorption voltage is reached (the constant-voltage law binds);
    - absorption, until the current held at the absorption voltage has
      tapered to the tail current, or after the maximum absorption time
      (counted in hours while the array gives something, so it does not
      depend on the time step). Where the time loop integrates a held step
      it ends absorption within the step and passes the bank's current at
      the step's end, and ``ahead_h`` is 0; elsewhere the time ends at the
      step nearest to it: ``ahead_h`` is half a step, so whole steps neither
      lengthen nor shorten absorption on average;
    - float, until the state of charge falls below the re-bulk threshold.

    A bank that fills within the step floats.

    Parameters
    ----------
    stage : int
        :data:`BULK`, :data:`ABSORPTION` or :data:`FLOAT` as the step began.
    absorption_h : float
        Time spent in absorption so far [h].
    limit : int
        What bound the step's charge (:func:`regulate`).
    i_bank_a, i_free_a : float
        The held charge current half a step after the step's end (or the
        step's current where nothing is held), and what the controller
        could have given [A].
    soc_next : float
        State of charge at the end of the step [-].
    step_h : float
        Step length [h].
    tail_a, max_absorption_h, rebulk_soc : float
        Tail current [A], maximum absorption time [h], re-bulk state of charge [-].
    ahead_h : float
        How far ahead of the time in absorption the maximum is judged [h].

    Returns
    -------
    stage : int
    absorption_h : float
    """
    if stage == FLOAT:
        if soc_next < rebulk_soc:
            return BULK, 0.0
        return FLOAT, absorption_h
    if limit == BANK_FULL:
        return FLOAT, absorption_h
    if stage == BULK:
        if limit != VOLTAGE_REGULATION:
            return BULK, absorption_h
        # The absorption voltage is reached: this step is the first of absorption.
        stage, absorption_h = ABSORPTION, 0.0
    if i_free_a > 0.0:
        absorption_h += step_h
    if (limit == VOLTAGE_REGULATION and i_bank_a <= tail_a) or absorption_h + ahead_h >= max_absorption_h:
        return FLOAT, absorption_h
    return ABSORPTION, absorption_h


@kernel
def _regulate_each(i_free, free_limit, soc, emf, r, i_ctrl, i_rate, v_abs, v_float, start, room, hold, stage_in,
                   regulated, load):  # pragma: no cover - compiled
    n = i_free.shape[0]
    i_bank = np.empty(n)
    stage = np.empty(n, np.int8)
    limit = np.empty(n, np.int8)
    for k in range(n):
        i_bank[k], stage[k], limit[k] = regulate(i_free[k], free_limit[k], soc[k], emf[k], r[k], i_ctrl,
                                                 i_rate[k], v_abs[k], v_float[k], start, room[k], hold[k],
                                                 stage_in[k], regulated, load[k])
    return i_bank, stage, limit


def regulate_arrays(i_free_a, free_limit, soc, emf_v, r_ohm, i_ctrl_a, i_rate_a, v_abs_v, v_float_v,
                    accept_start_soc, room_a, hold_a, stage_in, regulated, load_a=0.0):
    """:func:`regulate` over arrays (N,) that broadcast; returns (i_bank_a, stage, limit), codes as int8."""
    arrays = np.broadcast_arrays(*(np.asarray(a, float) for a in (i_free_a, soc, emf_v, r_ohm, i_rate_a,
                                                                  v_abs_v, v_float_v, room_a, hold_a, load_a)),
                                 np.asarray(free_limit, np.int64), np.asarray(stage_in, np.int64))
    i_free, soc, emf, r, i_rate, v_abs, v_float, room, hold, load, free_limit, stage_in = (
        np.ascontiguousarray(a).ravel() for a in arrays)
    return _regulate_each(i_free, free_limit, soc, emf, r, float(i_ctrl_a), i_rate, v_abs, v_float,
                          float(accept_start_soc), room, hold, stage_in, bool(regulated), load)
