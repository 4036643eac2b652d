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
# unlimited current; the last five say that nothing regulates (a direct
# connection) and what that breaks.
(SOURCE, CONTROLLER_OUTPUT, BANK_RATE, VOLTAGE_REGULATION, BANK_FULL, INPUT_WINDOW, DARK, INPUT_OVER_MAX,
 NONE, NONE_FULL, NONE_COLD, NONE_RATE, NONE_OVER_V) = range(13)
LIMIT_WORDS = ("source", "controller output current", "bank charge rate", "voltage regulation", "bank full",
               "input voltage window", "dark", "input above max_input_v: controller off", "none",
               "none: the bank is full and overcharged", "none: charging below the bank's minimum temperature",
               "none: above the bank's charge rate", "none: above the regulation voltage")


@kernel
def regulate(i_free_a, free_limit, soc, emf_v, r_ohm, i_ctrl_a, i_rate_a, v_target_v, accept_start_soc, room_a,
             floating, regulated):  # pragma: no cover - compiled
    """The bank current, stage code and limit code at one condition.

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
    v_target_v : float
        The regulation voltage of the stage in force [V].
    accept_start_soc : float
        State of charge from which the bank's acceptance tapers to zero at
        full [-]: the bank accepts ``i_rate_a (1 - soc) / (1 - start)``.
    room_a : float
        The current that just fills the bank within the step (infinite at a
        single operating point) [A].
    floating : bool
        The controller holds the float voltage, not the absorption voltage.
    regulated : bool
        False for a direct connection: nothing limits the current, and the
        limit code says which bound it breaks.

    Returns
    -------
    i_bank_a : float
    stage : int
    limit : int
    """
    share = min(max((1.0 - soc) / (1.0 - accept_start_soc), 0.0), 1.0)
    i_cv = min(max((v_target_v - emf_v) / r_ohm, 0.0), share * i_rate_a)
    if not regulated:
        i = i_free_a
        if i > room_a:
            limit = NONE_FULL
        elif i > 0.0 and i_rate_a <= 0.0:
            limit = NONE_COLD
        elif i > i_rate_a:
            limit = NONE_RATE
        elif emf_v + i * r_ohm > v_target_v:
            limit = NONE_OVER_V
        else:
            limit = NONE
        if free_limit == DARK and i <= 0.0:
            limit = DARK
        stage = UNREGULATED if i > 0.0 else (DISCHARGING if i < 0.0 else IDLE)
        return i, stage, limit
    i_max = min(min(i_ctrl_a, i_rate_a), min(i_cv, room_a))
    if i_free_a > i_max:
        if i_rate_a <= 0.0:
            limit = BANK_RATE
        elif i_max == room_a:
            limit = BANK_FULL
        elif i_max == i_rate_a:
            # Before the constant-voltage test: the acceptance equals the rate
            # until the taper starts, and that is still bulk.
            limit = BANK_RATE
        elif i_max == i_cv:
            limit = VOLTAGE_REGULATION
        else:
            limit = CONTROLLER_OUTPUT
        if limit == BANK_FULL or limit == VOLTAGE_REGULATION:
            # The constant-voltage stage holds even where it lets no current through.
            return i_max, FLOAT if (floating or limit == BANK_FULL) else ABSORPTION, limit
        return i_max, BULK if i_max > 0.0 else IDLE, limit
    stage = BULK if i_free_a > 0.0 else (DISCHARGING if i_free_a < 0.0 else IDLE)
    return i_free_a, stage, free_limit


@kernel
def _regulate_each(i_free, free_limit, soc, emf, r, i_ctrl, i_rate, v_target, start, room, floating,
                   regulated):  # pragma: no cover - compiled
    n = i_free.shape[0]
    i_bank = np.empty(n)
    stage = np.empty(n, np.int8)
    limit = np.empty(n, np.int8)
    for k in range(n):
        i_bank[k], stage[k], limit[k] = regulate(i_free[k], free_limit[k], soc[k], emf[k], r[k], i_ctrl,
                                                 i_rate[k], v_target[k], start, room[k], floating[k], regulated)
    return i_bank, stage, limit


def regulate_arrays(i_free_a, free_limit, soc, emf_v, r_ohm, i_ctrl_a, i_rate_a, v_target_v, accept_start_soc,
                    room_a, floating, regulated):
    """:func:`regulate` over arrays (N,) that broadcast; returns (i_bank_a, stage, limit), codes as int8."""
    arrays = np.broadcast_arrays(*(np.asarray(a, float) for a in (i_free_a, soc, emf_v, r_ohm, i_rate_a,
                                                                  v_target_v, room_a)),
                                 np.asarray(free_limit, np.int64), np.asarray(floating, np.bool_))
    i_free, soc, emf, r, i_rate, v_target, room, free_limit, floating = (np.ascontiguousarray(a).ravel()
                                                                         for a in arrays)
    return _regulate_each(i_free, free_limit, soc, emf, r, float(i_ctrl_a), i_rate, v_target,
                          float(accept_start_soc), room, floating, bool(regulated))
