"""The season study: a year (or any span) of weather through the whole system.

Pipeline, every step an explicit call on arrays:

1. each group's plane-of-array irradiance and cell temperature from the
   weather (:func:`pvsource.sky.poa_conditions`);
2. with a bank, the charge current at every step for a grid of states of
   charge (vectorised over the steps, one solve per grid value);
3. the state of charge, integrated step by step with the load: the one loop
   over time, on plain floats, interpolating the grid; it carries the
   controller's stage (bulk, absorption, float), the low-voltage disconnect
   and a generator's run in a :class:`BankState`;
4. the exact operating points along that state-of-charge path (vectorised);
5. summaries per month and for the whole span.

Energies are sums of power x step; the per-step energy balance holds to 1e-9
(:func:`pvsource.operating.operating_points` checks it), so the totals close.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd
from pvsource import bank as bank_model
from pvsource.alerts import alert_codes, alert_hours
from pvsource.compiled import kernel
from pvsource.errors import InputError
from pvsource.inputs import release_memory
from pvsource.module import model_notes
from pvsource.operating import CHUNK_SIZE, operating_points
from pvsource.regulation import (ABSORPTION, BANK_FULL, BULK, FLOAT, LIMIT_WORDS, NONE_FULL, SOURCE, STAGE_WORDS,
                                 VOLTAGE_REGULATION, next_stage, regulate)
from pvsource.system import System

# States of charge at which the charge current is solved before the time loop
# interpolates between them; the exact pass afterwards uses the true path.
SOC_GRID = np.linspace(0.0, 1.0, 11)


def soc_grid(system: System) -> np.ndarray:
    """:data:`SOC_GRID` with the breakpoints of the bank's OCV table, so the
    EMF interpolates exactly. The grid carries the unlimited current, smooth
    in the state of charge; the limits' kinks are applied in the time loop."""
    if system.bank is None:
        return SOC_GRID
    return np.unique(np.clip(np.concatenate([SOC_GRID, system.bank.chemistry.ocv_soc]), 0.0, 1.0))
FULL_SOC = 0.99  # a day "reaches full charge" when the state of charge gets here
ENERGY_KEYS = ("poa_insolation_kwh_m2", "energy_mpp_kwh", "energy_generated_kwh", "energy_delivered_kwh",
               "energy_stored_kwh", "wiring_loss_kwh", "controller_loss_kwh", "bank_internal_loss_kwh",
               "curtailed_kwh", "mpp_shortfall_kwh", "load_kwh", "unmet_load_kwh", "coulombic_loss_kwh")
# With a generator, per month too: its hours and starts add up like energies.
GENERATOR_KEYS = ("generator_hours", "generator_starts", "generator_energy_kwh", "generator_load_kwh",
                  "generator_charger_loss_kwh", "generator_bank_loss_kwh", "generator_stored_kwh", "generator_fuel_l")


@dataclass(frozen=True)
class SeasonResult:
    """What a season study returns.

    Attributes
    ----------
    steps : DataFrame
        One row per weather step, indexed by time.
    summary : dict
        Totals for the whole span (JSON-ready), with a ``monthly`` list.
    notes : tuple of str
        What was assumed, converted or skipped on the way.
    """

    steps: pd.DataFrame
    summary: dict
    notes: tuple = ()


def group_conditions(system: System, weather: pd.DataFrame, transposition: str = "perez"):
    """Effective irradiance and cell temperature of every group, (N, G) each, and the first group's POA."""
    from pvsource.sky import poa_conditions

    if system.site is None:
        raise InputError(system.source, "[site]", "is missing: a season study needs latitude and longitude")
    site = system.site
    irr, temp, poa = [], [], None
    for g in system.groups:
        cond = poa_conditions(weather, site.latitude, site.longitude, site.altitude_m, g.tilt_deg, g.azimuth_deg,
                              model=transposition, albedo=site.albedo, mounting=g.mounting)
        irr.append(cond["effective_irradiance_w_m2"].to_numpy(float))
        temp.append(cond["cell_temp_c"].to_numpy(float))
        if poa is None:
            poa = cond["poa_global_w_m2"].to_numpy(float)
    return np.clip(np.stack(irr, axis=-1), 0.0, 2000.0), np.stack(temp, axis=-1), poa


@dataclass(frozen=True)
class BankState:
    """What the time loop carries from one step to the next, and from one chunk of a season to the next.

    Attributes
    ----------
    soc : float
        State of charge [-].
    stage : int
        The controller's stage (:data:`~pvsource.regulation.BULK`,
        ``ABSORPTION`` or ``FLOAT``).
    absorption_h : float
        Time spent in the current absorption [h].
    generator_running : bool
        Whether a backup generator runs.
    generator_run_h : float
        Hours it has run since it last started [h].
    load_disconnected : bool
        Whether the low-voltage disconnect has cut the loads off.
    """

    soc: float
    stage: int = BULK
    absorption_h: float = 0.0
    generator_running: bool = False
    generator_run_h: float = 0.0
    load_disconnected: bool = False


@dataclass(frozen=True)
class TimeLoop:
    """The time loop's result: per step (arrays (N,)) and the state it ends in.

    Attributes
    ----------
    soc : state of charge as each step begins [-]
    mid_soc : the state of charge the step's current belongs to: half way through the step [-]
    stage : the controller's stage as each step begins (codes)
    unmet_w : load left unserved [W]
    cap_a : where the bank fills within a step, the charge current that just
        fills it (load included); infinite elsewhere [A]
    hold_a : where a constant voltage holds, the current averaged over the step; infinite elsewhere [A]
    coulombic_loss_a : the charge current that does not reach the state of charge (step mean) [A]
    load_disconnected : the share of each step the loads were cut off [-]
    load_a : array (N,)
        The loads' current at the bank that the step's charge was regulated
        with: the controller may carry it beside the bank's own limits (none
        while a generator carries the loads or the disconnect has cut them off) [A].
    held_share, limit_before : arrays (N,)
        Where a step reaches the held voltage within it: the share of the
        step under voltage regulation, and the limit code of the part before
        (1 and unused elsewhere), so hours by limit split the step too.
    stage_shares : array (N, 3)
        The share of each step the controller spent in bulk, absorption and
        float [-], in time rather than by the stage the step began in (zero
        for a connection that does not regulate); hours by stage are their sums.
    end : BankState after the last step
    generator : dict or None
        With a generator: ``running`` (share of each step run), ``starts``
        (per step) and ``charge_a`` (the charger's current, step mean).
    """

    soc: np.ndarray
    mid_soc: np.ndarray
    stage: np.ndarray
    unmet_w: np.ndarray
    cap_a: np.ndarray
    hold_a: np.ndarray
    coulombic_loss_a: np.ndarray
    load_disconnected: np.ndarray
    load_a: np.ndarray
    stage_shares: np.ndarray
    held_share: np.ndarray
    limit_before: np.ndarray
    end: BankState
    generator: dict | None = None


@kernel
def _cell(grid, j, soc):  # pragma: no cover - compiled
    # The state of charge moves little per step: walk to its grid cell from the last one.
    k_max = grid.shape[0] - 1
    while j > 0 and soc < grid[j]:
        j -= 1
    while j < k_max - 1 and soc > grid[j + 1]:
        j += 1
    return j


@kernel
def _at(grid, free, emf, j, k, soc):  # pragma: no cover - compiled
    # The unlimited current and the EMF at a state of charge, interpolated in its grid cell.
    w = (soc - grid[j]) / (grid[j + 1] - grid[j])
    return free[j, k] + (free[j + 1, k] - free[j, k]) * w, emf[j, k] + (emf[j + 1, k] - emf[j, k]) * w


@kernel
def _law_slope(soc, e, v_target, r_bank, i_rate, start, slope_e):  # pragma: no cover - compiled
    # How the bank's held current falls with its state of charge [A per unit]:
    # the acceptance taper where it is below Ohm's law at the target, else
    # Ohm's law on the EMF's slope.
    share = min(max((1.0 - soc) / (1.0 - start), 0.0), 1.0)
    if share * i_rate < (v_target - e) / r_bank:
        # The taper, from where it starts (the crossing lands on its start exactly).
        return -i_rate / (1.0 - start) if soc >= start - 1e-12 else 0.0
    return -slope_e / r_bank


@kernel
def _held_moved(own, slope, c, t):  # pragma: no cover - compiled
    # The state of charge a held bank current ``own`` moves in a share ``t``
    # of the step, decaying as exp(c slope t) (constant where the slope is 0).
    return own / -slope * (1.0 - np.exp(c * slope * t)) if slope < 0.0 else c * own * t


@kernel
def _held_step(i_charge, holding, load_a, soc, e, slope_e, cell_top, r_bank, v_target, i_rate, start, per_ah,
               coulombic, i_cap, tail_a, absorbing, left, v_float):  # pragma: no cover - compiled
    # A step at a constant voltage, or one that reaches it. Held, the current
    # falls as the bank fills, linearly in the state of charge (the
    # acceptance taper, or Ohm's law on the EMF's slope), so the state of
    # charge follows an exponential: integrated here exactly, whatever the
    # step's length. Returns the step's average current, the current at its
    # end and half a step later, the share of the step before the voltage
    # was reached (1: never reached, nothing changed), the share after it
    # while the current stays above the tail, and the share with the current
    # at or below the tail (none, before the voltage is reached). A load that drains the
    # bank draws the held current up toward it, but never above what the
    # source and the limits allow (i_cap): from there the source binds.
    # ``absorbing``: the target is the absorption voltage, held only until
    # the bank's current tapers to the tail or ``left`` (the share of the
    # step absorption may still last) runs out; the rest of the step floats
    # at ``v_float`` (the same laws at the float voltage, from the state
    # reached), so a long step does not charge on at the absorption voltage.
    surplus = i_charge - load_a
    start_at = 0.0
    reached = 0.0
    if holding and v_target + load_a * r_bank <= e and slope_e > 0.0:
        # The EMF so far above the target that the bank carries the whole
        # load: no current from the controller until the EMF falls to where
        # the held voltage takes over part of it.
        drop = (e - v_target - load_a * r_bank) / slope_e
        fall = per_ah * load_a
        if fall <= drop:
            return 0.0, 0.0, 0.0, 0.0, 0.0, 1.0  # no current: at or below the tail throughout
        start_at = drop / fall
        soc -= drop
        e = v_target + load_a * r_bank
        i_charge = 0.0
        surplus = -load_a
    elif not holding:
        if surplus <= 0.0:
            return i_charge, i_charge, i_charge, 1.0, 0.0, 0.0
        # Where the bank's held part would fall to what the source now gives it (the load beside it).
        soc_star = 1.0 - surplus * (1.0 - start) / i_rate
        if slope_e > 0.0:
            # The EMF's slope holds within its grid cell only (cell_top: the cell's upper state of charge).
            soc_law = soc + (v_target - surplus * r_bank - e) / slope_e
            if soc_law <= cell_top:
                soc_star = min(soc_star, soc_law)
        rise = per_ah * coulombic * surplus
        if soc + rise <= soc_star or soc_star <= soc:
            return i_charge, i_charge, i_charge, 1.0, 0.0, 0.0
        start_at = (soc_star - soc) / rise
        reached = start_at
        e += slope_e * (soc_star - soc)
        soc = soc_star
    slope = _law_slope(soc, e, v_target, r_bank, i_rate, start, slope_e)
    c = per_ah * (coulombic if surplus > 0.0 else 1.0)
    rest = 1.0 - start_at
    before = c * surplus * start_at
    if slope < 0.0 and surplus < 0.0 and i_cap < load_a:
        t_cap = np.log((i_cap - load_a) / (i_charge - load_a)) / (c * slope)
        if t_cap < rest:
            moved = _held_moved(surplus, slope, c, t_cap) + c * (i_cap - load_a) * (rest - t_cap)
            return load_a + (before + moved) / c, i_cap, i_cap, reached, rest, 1.0 - reached - rest
    # The tail is the bank's own current, the held current less the load
    # beside it (a controller with a battery monitor, or with no load on its bus).
    above = rest
    if surplus <= tail_a:
        above = 0.0  # held from at or below the tail: absorption is over as soon as the voltage is reached
    elif slope < 0.0 and tail_a > 0.0:
        above = min(rest, np.log(tail_a / surplus) / (c * slope))
    if absorbing:
        above = min(above, max(left, 0.0))
        if above < rest:
            # Absorption ends within the step: held at the absorption voltage until then, then at the float voltage.
            moved = _held_moved(surplus, slope, c, above)
            soc_f = soc + moved
            e_f = e + slope_e * moved
            accept = min(max((1.0 - soc_f) / (1.0 - start), 0.0), 1.0) * i_rate
            own = max(min(min((v_float - e_f) / r_bank, accept), i_cap - load_a), -load_a)  # the load beside it
            # Where the source binds the current is constant; else the held law at the float voltage.
            slope_f = 0.0 if own >= i_cap - load_a else _law_slope(soc_f, e_f, v_float, r_bank, i_rate, start, slope_e)
            c_f = per_ah * (coulombic if own > 0.0 else 1.0)
            own_end = own * np.exp(c_f * slope_f * (rest - above))
            return (load_a + (before + moved) / c + _held_moved(own, slope_f, c_f, rest - above) / c_f,
                    load_a + own_end, load_a + own_end * np.exp(0.5 * c_f * slope_f), reached, above,
                    1.0 - reached - above)
    moved = _held_moved(surplus, slope, c, rest)
    i_end = i_charge + slope * moved
    # What is left is at or below the tail: the time the held current waited
    # (no current while a load drew the EMF down to the target) and after the taper.
    return (load_a + (before + moved) / c, i_end, load_a + (i_end - load_a) * np.exp(0.5 * c * slope), reached, above,
            1.0 - reached - above)


@kernel
def _stage_shares(out, stage_in, stage_out, held, after, absorption_h, max_absorption_h, step_h, before, soc,
                  rebulk_soc):  # pragma: no cover - compiled
    # The share of one step spent in bulk, absorption and float (out[0:3]),
    # in time, not by the step's label: so hours by stage add up the same at
    # any step. ``held``: the share before the absorption voltage was reached
    # (from bulk); ``after``: the share after the current tapered to the
    # tail. Absorption also ends at its maximum time, and float falls back
    # to bulk where the state of charge crosses the re-bulk threshold
    # (linear within the step).
    out[0] = out[1] = out[2] = 0.0
    left = max(max_absorption_h - absorption_h, 0.0) / step_h
    if stage_in == BULK:
        out[0] = held
        out[1] = min(max(1.0 - held - after, 0.0), left if max_absorption_h < np.inf else 1.0)
        out[2] = 1.0 - out[0] - out[1]
    elif stage_in == ABSORPTION:
        out[1] = min(max(1.0 - after, 0.0), left if max_absorption_h < np.inf else 1.0)
        out[2] = 1.0 - out[1]
    elif stage_out == BULK and before > soc:
        out[2] = min(max((before - rebulk_soc) / (before - soc), 0.0), 1.0)
        out[0] = 1.0 - out[2]
    else:
        out[2] = 1.0


@kernel
def _soc_kernel(grid, free, emf, loads, step_h, per_ah, coulombic, soc, stage, absorption_h, limits, stages,
                regulated, gen, gen_power_w, disconnect, disconnected):  # pragma: no cover - compiled
    # limits: controller current, bank charge current, acceptance start, R,
    # absorption V, float V, each an array (N,) (the bank's temperature may
    # follow the air); stages: tail current, maximum absorption time, re-bulk
    # state of charge.
    ctrl_a, rate_a, start_a, r_a, abs_a, float_a = limits
    tail_a, max_absorption_h, rebulk_soc = stages
    # gen: present (0/1), start and stop state of charge, shortest run [h],
    # charger current [A], running at the start (0/1), hours run so far.
    has_gen, g_start, g_stop, g_min_h, g_amps, g_running, g_run_h = gen
    running = g_running > 0.0
    run_h = g_run_h
    # disconnect: the loads' cut-off and return states of charge (no cut-off at 0).
    min_soc, reconnect_soc = disconnect
    n = loads.shape[0]
    soc_path = np.empty(n)
    mid_path = np.empty(n)
    stage_path = np.empty(n, np.int8)
    unmet = np.zeros(n)
    cap = np.full(n, np.inf)
    hold = np.full(n, np.inf)
    run_frac = np.zeros(n)
    starts = np.zeros(n, np.int32)
    gen_a = np.zeros(n)
    lost = np.zeros(n)
    shed = np.zeros(n)
    shares = np.zeros((n, 3))
    served = np.zeros(n)
    # Where a step reaches the held voltage: the share under it, and what limited the charge before.
    held_share = np.ones(n)
    before_limit = np.full(n, SOURCE, np.int8)
    j = 0
    for k in range(n):
        i_ctrl, i_rate, start, r_bank, v_abs, v_float = ctrl_a[k], rate_a[k], start_a[k], r_a[k], abs_a[k], float_a[k]
        soc_path[k] = soc
        stage_path[k] = stage
        stage_in, absorption_in, soc_in = stage, absorption_h, soc
        if min_soc > 0.0 and not disconnected and soc <= min_soc:
            disconnected = True
        w_load = 0.0 if disconnected else loads[k]  # what the bank's loads draw
        j = _cell(grid, j, soc)
        i_free, e = _at(grid, free, emf, j, k, soc)
        load_a = w_load / e
        # What fills the bank within the step, the load served on the way
        # included (unless a running generator carries it).
        on_bank = 0.0 if running else load_a  # the load the controller may carry beside the bank's own limits
        room = on_bank + (1.0 - soc) / (per_ah * coulombic)
        # The grid carries only the smooth, unlimited current: the limits
        # apply here, exact in the state of charge.
        i_charge, _, limit = regulate(i_free, SOURCE, soc, e, r_bank, i_ctrl, i_rate, v_abs, v_float, start, room,
                                      np.inf, stage, regulated, on_bank)
        served[k] = on_bank
        if has_gen > 0.0 and (running or soc - 1.1 * load_a * per_ah <= g_start):
            # The generator's steps (it runs, or the load alone could bring
            # the bank to its start within the step; 10 % margin for the
            # EMF's fall): its start and stop placed within the step
            # (generator_step), the array's current that of the step's start.
            mid_path[k] = soc
            if limit == BANK_FULL or limit == NONE_FULL:
                cap[k] = room
                i_charge = room
            # The generator's charger tops the array up to the bank's own limit, whatever the controller.
            i_bank = regulate(np.inf, SOURCE, soc, e, r_bank, np.inf, i_rate, v_abs, v_float, start, np.inf, np.inf,
                              stage, True, 0.0)[0]
            before = soc
            soc, running, run_h, run_frac[k], starts[k], gen_a[k], lost_ah = generator_step(
                soc, running, run_h, i_charge, load_a, min(g_amps, gen_power_w[k] / e), i_bank, step_h,
                step_h / per_ah, coulombic, g_start, g_stop, g_min_h)
            # Disconnected from the bank, the loads are still served while the generator runs.
            shed[k] = 1.0 - run_frac[k] if disconnected else 0.0
            unmet[k] = lost_ah / step_h * e + loads[k] * shed[k]
            # The charge that went in, less the load the bank served, less what the state of charge gained.
            lost[k] = max(i_charge + gen_a[k] - (load_a * (1.0 - run_frac[k]) - lost_ah / step_h)
                          - (soc - before) / per_ah, 0.0)
            if min_soc > 0.0:
                if not disconnected and soc <= min_soc:
                    disconnected = True
                elif disconnected and soc >= reconnect_soc:
                    disconnected = False
            if regulated:
                stage, absorption_h = next_stage(stage, absorption_h, limit, i_charge - on_bank, i_free, soc, step_h,
                                                 tail_a, max_absorption_h, rebulk_soc, 0.5 * step_h)
                _stage_shares(shares[k], stage_in, stage, 1.0, 0.0, absorption_in, max_absorption_h, step_h, soc_in,
                              soc, rebulk_soc)
            continue
        i_end = i_charge
        held_h = step_h
        mid = -1.0
        held = 1.0
        after = 0.0
        if limit == BANK_FULL and regulated:
            # Would fill within the step: unless the constant voltage is reached first.
            i_charge, _, limit = regulate(i_free, SOURCE, soc, e, r_bank, i_ctrl, i_rate, v_abs, v_float, start,
                                          np.inf, np.inf, stage, regulated, load_a)
        if limit == NONE_FULL:
            cap[k] = room
            i_charge = room  # past full, an unregulated charge is not stored
        elif regulated and (i_charge > 0.0 or limit == VOLTAGE_REGULATION):
            v_target = v_float if stage == FLOAT else v_abs
            slope_e = (emf[j + 1, k] - emf[j, k]) / (grid[j + 1] - grid[j])
            i_avg, i_end, _, held, above, after = _held_step(i_charge, limit == VOLTAGE_REGULATION, load_a, soc, e,
                                                            slope_e, grid[j + 1], r_bank, v_target, i_rate, start, per_ah, coulombic,
                                                     min(i_free, min(i_ctrl, load_a + i_rate)), tail_a, stage != FLOAT,
                                                     (max_absorption_h - (absorption_h if stage == ABSORPTION else 0.0))
                                                     / step_h, v_float)
            if held < 1.0 and load_a + (1.0 - soc) / (per_ah * coulombic) < i_avg:
                # Even so it fills within the step.
                held = 1.0
                after = 0.0
                limit = BANK_FULL
                cap[k] = room
                i_charge = room
            elif held < 1.0:
                # The constant voltage held for this share of the step: it carries the average current.
                held_share[k] = 1.0 - held
                before_limit[k] = limit
                limit = VOLTAGE_REGULATION
                held_h = (1.0 - held) * step_h
                i_charge = i_avg
                hold[k] = i_avg
                # The bank's current at the step's end: absorption ends within the step where it ends (_held_step).
                if stage == BULK:
                    # The step's label: what most of it was (bulk, absorption, or float after the tail).
                    if held >= above and held >= 1.0 - held - above:
                        stage_path[k] = BULK
                    elif above >= 1.0 - held - above:
                        stage_path[k] = ABSORPTION
                    else:
                        stage_path[k] = FLOAT
        elif limit == BANK_FULL:
            cap[k] = room
            i_charge = room
        if held == 1.0 and limit != BANK_FULL and limit != NONE_FULL:
            # The midpoint rule: the step's current is the one at the state
            # of charge half way through it, so a long step neither lags
            # behind the bank's EMF nor behind its limits.
            net = i_charge - load_a
            mid = min(max(soc + 0.5 * net * per_ah * (coulombic if net > 0.0 else 1.0), 0.0), 1.0)
            jm = _cell(grid, j, mid)
            i_free, e = _at(grid, free, emf, jm, k, mid)
            load_a = w_load / e
            i_charge, _, limit = regulate(i_free, SOURCE, mid, e, r_bank, i_ctrl, i_rate, v_abs, v_float, start,
                                          room, np.inf, stage, regulated, load_a)
            served[k] = load_a
            if limit == BANK_FULL or limit == NONE_FULL:
                cap[k] = room
                i_charge = room
            i_end = i_charge
        before = soc
        net = i_charge - load_a
        soc += net * per_ah * (coulombic if net > 0.0 else 1.0)
        if mid < 0.0:
            # A held or filling step: its load is drawn at the EMF half way
            # along, where the exact pass evaluates it.
            mid = min(max(0.5 * (before + soc), 0.0), 1.0)
            _, e = _at(grid, free, emf, _cell(grid, j, mid), k, mid)
            load_a = w_load / e
            net = i_charge - load_a
            soc = before + net * per_ah * (coulombic if net > 0.0 else 1.0)
        # The low-voltage disconnect, placed within the step: the loads are
        # cut off where the state of charge reaches min_soc, and return
        # where it reaches reconnect_soc, so its hours do not depend on the step.
        cut = 1.0 if disconnected else 0.0
        if min_soc > 0.0 and not disconnected and soc < min_soc and net < 0.0:
            on = (before - min_soc) / (before - soc)
            soc = min_soc + (1.0 - on) * i_charge * per_ah * (coulombic if i_charge > 0.0 else 1.0)
            cut = 1.0 - on
            disconnected = True
        elif disconnected and soc >= reconnect_soc and soc > before:
            off = (reconnect_soc - before) / (soc - before)
            back = i_charge - loads[k] / e
            soc = reconnect_soc + (1.0 - off) * back * per_ah * (coulombic if back > 0.0 else 1.0)
            cut = off
            disconnected = False
        shed[k] = cut
        unmet[k] = loads[k] * cut
        if soc < 0.0:
            # The bank is empty: the rest of this step's load goes unserved.
            unmet[k] += -soc / per_ah * e
            soc = 0.0
        elif soc > 1.0:
            soc = 1.0
        # Charge that does not reach the state of charge: the coulombic loss
        # (what went in, less the load the bank served, less what the state of charge gained).
        served_a = (loads[k] * (1.0 - cut) - (unmet[k] - loads[k] * cut)) / e
        lost[k] = max(i_charge - served_a - (soc - before) / per_ah, 0.0)
        # Where the exact pass evaluates the step.
        mid_path[k] = mid
        if regulated:
            stage, absorption_h = next_stage(stage, absorption_h, limit, i_end - load_a, i_free, soc, held_h, tail_a,
                                             max_absorption_h, rebulk_soc, 0.5 * held_h if held == 1.0 else 0.0)
            if stage_in != FLOAT and held < 1.0 and after > 0.0 and limit == VOLTAGE_REGULATION:
                stage = FLOAT  # absorption ended within the step, which floated on (_held_step)
            _stage_shares(shares[k], stage_in, stage, held, after, absorption_in, max_absorption_h, step_h, before,
                          soc, rebulk_soc)
    return (soc_path, mid_path, stage_path, unmet, cap, hold, lost, shed, soc, stage, absorption_h, run_frac, starts,
            gen_a, running, run_h, disconnected, shares, served, held_share, before_limit)


def integrate_soc(charge_grid_a, emf_grid_v, load_w, step_h: float, capacity_ah: float, coulombic: float,
                  start, grid=None, limits=None, regulated: bool = False, stages=None, generator=None,
                  disconnect=None) -> TimeLoop:
    """The bank through time: state of charge and controller stage at every step, and the load left unmet.

    Coulomb counting, with charge scaled by the coulombic efficiency; the
    unlimited charge current and EMF at the current state of charge are
    interpolated in the grid, the regulation
    (:func:`pvsource.regulation.regulate`) applied to it at the stage in
    force, and the stage moved on by :func:`pvsource.regulation.next_stage`.
    This is the one loop over time, compiled with numba. Every state it
    carries is in hours or fractions, never in steps, so the same weather at
    any step gives the same stages.

    Parameters
    ----------
    charge_grid_a, emf_grid_v : arrays (K, N)
        Unlimited charge current and bank EMF at each grid state of charge (:data:`SOC_GRID`) and step.
    load_w : array (N,)
        Power drawn from the bank [W].
    step_h : float
        Step length [h].
    capacity_ah : float
        Bank capacity [Ah].
    coulombic : float
        Coulombic efficiency of charging [-].
    start : BankState or float
        The state as the first step begins (a float: the state of charge, in bulk).
    grid : array (K,), optional
        The states of charge of the grid's rows, rising from 0 to 1; default :data:`SOC_GRID`.
    limits : tuple, optional
        (controller current [A], bank charge current [A], absorption start
        [-], bank resistance [ohm], absorption [V], float [V]), each a number
        or an array (N,) of one per step; none by default.
    regulated : bool
        Whether the controller regulates (False for a direct connection).
    stages : tuple, optional
        (tail current [A], maximum absorption time [h], re-bulk state of
        charge [-]); by default absorption never ends.
    generator : Generator, optional
        A backup generator (:func:`generator_step`); the bank's ``limits``
        apply to its charger, and ``start`` says whether it runs and for how
        long it has.
    disconnect : (float, float), optional
        The low-voltage disconnect: loads are cut off at or below the first
        state of charge and return at or above the second; the shed load
        counts as unmet. None (or a cut-off at 0): loads are never cut off.

    Returns
    -------
    TimeLoop
    """
    from pvsource.generator import charger_limits

    grid = np.asarray(SOC_GRID if grid is None else grid, dtype=float)
    state = start if isinstance(start, BankState) else BankState(float(start))
    if limits is None:
        limits, regulated = (np.inf, np.inf, 0.0, 1.0, np.inf, np.inf), False
    stages = (0.0, np.inf, 0.0) if stages is None else stages
    loads = np.ascontiguousarray(load_w, dtype=float)
    # Each limit a number for the whole span or one per step.
    limits = tuple(np.ascontiguousarray(np.broadcast_to(np.asarray(v, dtype=float), loads.shape)) for v in limits)
    gen_tuple, power = (0.0,) * 7, np.zeros(len(loads))
    if generator is not None:
        amps, power = charger_limits(generator, loads)
        gen_tuple = (1.0, generator.start_soc, generator.stop_soc, generator.min_run_h, amps,
                     float(state.generator_running), float(state.generator_run_h))
    (soc, mid, stage, unmet, cap, hold, lost, shed, end_soc, end_stage, end_h, run_frac, starts, gen_a, running,
     run_h, disconnected, shares, served, held_share, before_limit) = _soc_kernel(grid, np.ascontiguousarray(charge_grid_a, dtype=float),
                          np.ascontiguousarray(emf_grid_v, dtype=float), loads, float(step_h), step_h / capacity_ah,
                          float(coulombic), float(state.soc), int(state.stage), float(state.absorption_h),
                          limits, tuple(float(v) for v in stages), bool(regulated),
                          tuple(float(v) for v in gen_tuple), np.ascontiguousarray(power, dtype=float),
                          tuple(float(v) for v in (disconnect or (0.0, 1.0))), bool(state.load_disconnected))
    end = BankState(float(end_soc), int(end_stage), float(end_h), bool(running), float(run_h), bool(disconnected))
    run = None if generator is None else {"running": run_frac, "starts": starts, "charge_a": gen_a}
    return TimeLoop(soc, mid, stage, unmet, cap, hold, lost, shed, served, shares, held_share, before_limit, end, run)


def bank_temperature_c(system: System, weather: pd.DataFrame):
    """The bank's cell temperature at each step [°C]: the air's plus ``[bank] air_offset_c`` (held to the
    bank's -40 to 70 °C), or None where the bank stays at its ``temp_c``."""
    b = system.bank
    if b is None or b.air_offset_c is None:
        return None
    return np.clip(weather["temp_air"].to_numpy(float) + b.air_offset_c, -40.0, 70.0)


def loop_settings(system: System, bank_temp_c=None):
    """The bank's and controllers' figures the time loop needs: (limits, stages, regulated, disconnect) of
    :func:`integrate_soc`; with ``bank_temp_c`` (N,) the bank's limits are one per step."""
    b = system.bank
    # Several controllers: each one's own limit is in the grid already, and all of them regulate.
    c = system.controller or system.controllers[0].controller
    v_abs, v_float = bank_model.charge_voltages_v(b, bank_temp_c)
    chem = b.chemistry
    as_limit = lambda x: float(x) if bank_temp_c is None else np.asarray(x, float)  # noqa: E731
    limits = (np.inf if system.several_controllers else c.output_limit_a,
              as_limit(bank_model.max_charge_current_a(b, bank_temp_c)), chem.absorption_start_soc,
              as_limit(bank_model.internal_resistance_ohm(b, None, bank_temp_c)), as_limit(v_abs),
              as_limit(v_float))
    stages = (chem.tail_current_c_rate * b.capacity_ah, chem.max_absorption_h, chem.rebulk_soc)
    return limits, stages, c.regulates, (chem.min_soc, chem.reconnect_soc)


@kernel
def generator_step(soc, running, run_h, i_array, load_a, i_gen_max, i_bank_max, step_h, capacity_ah, coulombic,
                   start_soc, stop_soc, min_run_h):  # pragma: no cover - compiled
    """One step of the bank with a backup generator, its start and stop placed within the step.

    The array's current comes first; while the generator runs it carries the
    load and its charger tops the bank up to the bank's own limit:
    ``I_gen = min(i_gen_max, max(i_bank_max - i_array, 0))``. It starts when
    the state of charge falls to ``start_soc`` and stops once it has reached
    ``stop_soc`` and run ``min_run_h`` hours, at the moment within the step
    where both hold. So run time is counted in hours, whatever the step.
    Currents are those at the step's start, held through it.

    Parameters
    ----------
    soc : float
        State of charge at the step's start [-].
    running : bool
        Whether the generator runs at the step's start.
    run_h : float
        Hours it has run since it last started [h].
    i_array, load_a : float
        The array's charge current and the load's current at the bank's EMF [A].
    i_gen_max : float
        What the charger can deliver [A].
    i_bank_max : float
        The bank's charge limit at this state of charge [A].
    step_h, capacity_ah, coulombic : float
        Step [h], bank capacity [Ah], coulombic efficiency of charging [-].
    start_soc, stop_soc, min_run_h : float
        The generator's settings.

    Returns
    -------
    soc, running, run_h : the state at the step's end
    run_fraction : float
        Share of the step it ran [-].
    starts : int
        Starts within the step.
    gen_a : float
        The charger's current into the bank, averaged over the step [A].
    unmet_ah : float
        Load the empty bank could not serve [Ah] (only with ``start_soc`` 0 and no charge).
    """
    i_gen = min(i_gen_max, max(i_bank_max - i_array, 0.0))
    t = 0.0
    on_h = 0.0
    gen_ah = 0.0
    starts = 0
    flips = 0
    while t < step_h and flips < 64:
        left = step_h - t
        if running:
            net = i_array + i_gen
            rate = net * (coulombic if net > 0.0 else 1.0) / capacity_ah
            need = max(min_run_h - run_h, 0.0)
            if soc < stop_soc:
                need = max(need, (stop_soc - soc) / rate if rate > 0.0 else np.inf)
            dt = min(need, left)
            i_seg = i_gen
            if rate > 0.0 and soc + rate * dt > 1.0:
                # Kept running past full by min_run_h: the charger gives only what fits.
                i_seg = max(min((1.0 - soc) * capacity_ah / (coulombic * dt) - i_array, i_gen), 0.0)
                net = i_array + i_seg
                rate = net * (coulombic if net > 0.0 else 1.0) / capacity_ah
            soc += rate * dt
            gen_ah += i_seg * dt
            run_h += dt
            on_h += dt
            t = step_h if dt >= left else t + dt
            if need <= left:
                running = False
                flips += 1
        elif soc <= start_soc:
            running = True
            run_h = 0.0
            starts += 1
            flips += 1
        else:
            net = i_array - load_a
            rate = net * (coulombic if net > 0.0 else 1.0) / capacity_ah
            need = (soc - start_soc) / -rate if rate < 0.0 else np.inf
            dt = min(need, left)
            soc = start_soc if need <= left else soc + rate * dt
            t = step_h if dt >= left else t + dt
    unmet_ah = 0.0
    if soc < 0.0:
        unmet_ah = -soc * capacity_ah
        soc = 0.0
    return min(soc, 1.0), running, run_h, on_h / step_h, starts, gen_ah / step_h, unmet_ah


def charge_grid_a(system: System, g, t, done=lambda k: None, chunk_size: int = CHUNK_SIZE, bank_temp_c=None):
    """Unlimited charge current at every step for every state of charge of :func:`soc_grid`, and the bank's EMF.

    Only what the time loop needs: no linearisation, no key points. Dark
    steps (no irradiance on any group) charge nothing and are not solved; a
    tracker's array side is solved once per step for all states of charge.
    ``bank_temp_c`` (N,): the bank's temperature at each step (its
    resistance and charge voltages follow it); by default the file's.

    Returns
    -------
    charge_a, emf_v : arrays (K, N)
    """
    from pvsource.charging import array_side, unlimited_current_a
    from pvsource.module import parameters_at
    from pvsource.network import Network

    n = len(g)
    grid = soc_grid(system)
    k_grid = len(grid)
    charge = np.zeros((k_grid, n))
    emf = np.empty((k_grid, n))
    for k, soc in enumerate(grid):
        emf[k] = bank_model.open_circuit_v(system.bank, float(soc))
    lit = np.flatnonzero((np.asarray(g) > 0.0).any(axis=-1))
    banks = _grid_banks(system, grid, min(chunk_size, lit.size), bank_temp_c)
    wiring = system.wiring
    if system.several_controllers:
        _shared_grid(system, g, t, lit, banks, charge, chunk_size)
        lit = lit[:0]
    for start in range(0, lit.size, chunk_size):
        rows = lit[start:start + chunk_size]
        state = parameters_at(system.module.parameters, g[rows], t[rows])
        net = Network(state, system.n_series, system.n_parallel, wiring.r_string_ohm, wiring.r_home_ohm)
        side = array_side(net, wiring.r_feeder_ohm) if system.controller.tracks else None
        for k, bank_pt in enumerate(banks(rows)):
            charge[k, rows] = unlimited_current_a(net, system.controller, bank_pt, wiring.r_feeder_ohm,
                                                  wiring.r_bank_ohm, side)
    for k in range(k_grid):
        done(k)
    return charge, emf


def _grid_banks(system: System, grid, size: int, bank_temp_c=None):
    """The bank at each grid state of charge for a chunk's rows: ``banks(rows)`` -> list of BankPoint.

    At the file's temperature the bank is the same in every chunk: built
    once for ``size`` rows and sliced. A temperature per step makes each
    chunk's bank its own.
    """
    from pvsource.operating import bank_point

    if bank_temp_c is not None:
        temp = np.asarray(bank_temp_c, float)
        return lambda rows: [bank_point(system, np.full(rows.size, float(soc)), temp[rows]) for soc in grid]
    whole = [bank_point(system, np.full(size, float(soc)), None) for soc in grid]
    return lambda rows: [b if rows.size == size else b.head(rows.size) for b in whole]


def _shared_grid(system: System, g, t, lit, banks, charge, chunk_size: int) -> None:
    """:func:`charge_grid_a` with several controllers: each within its own output limit, their sum
    (:func:`pvsource.sharing.free_total_a`); the time loop applies the bank's limits to it.
    ``banks``: :func:`_grid_banks`."""
    from pvsource.charging import array_side
    from pvsource.module import parameters_at
    from pvsource.network import Network
    from pvsource.sharing import free_total_a

    parts = system.parts()
    index = {name: k for k, name in enumerate(system.group_names)}
    cols = [[index[name] for name in part.group_names] for part in parts]
    r_interconnect = sum(r.loop_resistance_ohm for r in system.cables if r.role == "interconnect")
    for start in range(0, lit.size, chunk_size):
        rows = lit[start:start + chunk_size]
        nets = [Network(parameters_at(system.module.parameters, g[rows][:, c], t[rows][:, c]), part.n_series,
                        part.n_parallel, part.wiring.r_string_ohm, part.wiring.r_home_ohm)
                for part, c in zip(parts, cols)]
        sides = [array_side(net, part.wiring.r_feeder_ohm) if part.controller.tracks else None
                 for net, part in zip(nets, parts)]
        for k, bank_pt in enumerate(banks(rows)):
            charge[k, rows] = free_total_a(nets, [p.controller for p in parts], bank_pt,
                                           [p.wiring.r_feeder_ohm for p in parts],
                                           [p.wiring.r_bank_ohm for p in parts], r_interconnect, sides)


#: Rows a chunk of the season study aims at: whole calendar months are joined
#: up to this many steps, and a longer month is cut at clock-hour boundaries.
#: Memory then follows the chunk, not the span (about 1.6 kB per step in flight).
CHUNK_ROWS = 50_000

#: Per-step columns a season study drops from the steps it keeps for its
#: summary and figures when ``keep="summary"``: the linear views, residuals,
#: per-group detail, the split of the cable loss by run, and the bank's and
#: controller's per-step parameters. Everything else (every energy the
#: summary counts, the charge current, state of charge, stage and limit, each
#: group's irradiance and cell temperature, and any column added later) is kept.
DETAIL_PREFIXES = ("drift_", "share_", "thevenin_", "norton_", "superposition_", "load_side_", "source_",
                   "kvl_", "kcl_", "energy_balance_", "matching_ratio")
DETAIL_COLUMNS = frozenset({"p", "load_v", "parallel_mismatch_w", "string_loss_w", "home_run_loss_w",
                            "feeder_loss_w", "bank_loss_w", "efficiency", "duty", "controller_input_v",
                            "bank_r_ohm", "bank_target_v", "bank_soc", "bank_temp_c", "bank_max_charge_a",
                            "bank_load_a", "converged"})
_GROUP_KEPT = ("_irradiance_w_m2", "_cell_temp_c")


def summary_columns(columns) -> list[str]:
    """The columns of a steps table that the summary and the report's figures read (see :data:`DETAIL_COLUMNS`)."""
    return [c for c in columns if not str(c).startswith(DETAIL_PREFIXES) and str(c) not in DETAIL_COLUMNS
            and not (str(c).startswith("group_") and not str(c).endswith(_GROUP_KEPT))]


class _KeptSteps:
    """The kept columns of every chunk, filled into arrays sized for the whole span once.

    Numbers and flags go into one preallocated array per column (no copy of
    the whole when the span ends); labels are kept as category codes.
    """

    def __init__(self, n: int, index: pd.DatetimeIndex, columns):
        self.n, self.index, self.columns = n, index, columns
        self.arrays, self.labels = {}, {}
        self.filled = 0

    def add(self, steps: pd.DataFrame) -> None:
        a, b = self.filled, self.filled + len(steps)
        for name in self.columns:
            col = steps[name]
            if col.dtype.kind in "fiub":
                if name not in self.arrays:
                    self.arrays[name] = np.empty(self.n, dtype=col.dtype)
                self.arrays[name][a:b] = col.to_numpy()
            else:
                self.labels.setdefault(name, []).append(pd.Categorical(col.to_numpy(dtype=object)))
        self.filled = b

    def frame(self) -> pd.DataFrame:
        data = {}
        for name in self.columns:
            if name in self.arrays:
                data[name] = self.arrays[name]
            else:
                parts = self.labels[name]
                data[name] = parts[0] if len(parts) == 1 else pd.api.types.union_categoricals(parts)
        return pd.DataFrame(data, index=self.index, copy=False)


def chunk_bounds(index: pd.DatetimeIndex, rows: int = CHUNK_ROWS) -> list[tuple[int, int]]:
    """Row ranges [start, stop) that cut the span into chunks of whole months, each near ``rows`` steps.

    Months of the weather's own clock are joined while they fit in ``rows``;
    only a month longer than that is cut, where a clock hour starts (as
    :func:`hourly_table` starts its rows), so every hour lies within one chunk.
    """
    n = len(index)
    if n == 0:
        return []
    wall_ns, offset_ns = clock_ns(index)
    local = index.tz_localize(None) if index.tz is not None else index
    month = local.year.to_numpy() * 12 + local.month.to_numpy()
    hour_start = np.concatenate([[True], (np.diff(wall_ns // _HOUR_NS) != 0) | (np.diff(offset_ns) != 0)])
    month_start = np.concatenate([[True], np.diff(month) != 0])
    month_ends = np.append(np.flatnonzero(month_start)[1:], n)
    hours = np.flatnonzero(hour_start)
    bounds, start, fits = [], 0, 0
    for end in month_ends:
        if end - start > rows:
            if fits > start:  # close the chunk at the last month end that fitted
                bounds.append((start, fits))
                start = fits
            while end - start > rows:  # a month too long on its own: cut it where hours start
                cuts = hours[(hours > start) & (hours <= start + rows)]
                later = hours[hours > start]
                cut = int(cuts[-1]) if cuts.size else int(later[0]) if later.size else end
                if cut >= end:
                    break
                bounds.append((start, cut))
                start = cut
        fits = int(end)
    bounds.append((start, n))
    return bounds


def run_season(system: System, weather: pd.DataFrame, *, transposition: str = "perez",
               soc0: float | None = None, progress=None, each_chunk=None, keep: str = "all",
               chunk_rows: int = CHUNK_ROWS) -> SeasonResult:
    """Run the season study, a chunk of whole months at a time.

    The weather is solved in chunks (:func:`chunk_bounds`); the time loop's
    state (the bank's state of charge) is carried from each chunk into the
    next, so the result does not depend on where the chunks are cut.

    Parameters
    ----------
    system : System
        With a ``[site]``; groups carry tilt, azimuth and mounting.
    weather : DataFrame
        From :func:`pvsource.weather.read_weather`; ``load_w`` is optional.
    transposition : {"perez", "haydavies", "isotropic"}
    soc0 : float, optional
        State of charge at the start; default the system file's.
    progress : callable, optional
        Called with (done, total) as the chunks finish.
    each_chunk : callable, optional
        Called with every chunk's complete steps table, in time order (a
        writer streams them to disk).
    keep : {"all", "summary"}
        Which columns :attr:`SeasonResult.steps` keeps: every column, or only
        :func:`summary_columns` (enough for the summary and the figures),
        filled into arrays sized once for the span, so memory grows by about
        0.15 kB per step instead of twice 0.5 kB.
    chunk_rows : int
        Steps per chunk, about (:data:`CHUNK_ROWS`).

    Returns
    -------
    SeasonResult
    """
    if keep not in ("all", "summary"):
        raise ValueError(f"keep must be 'all' or 'summary', not {keep!r}")
    notes = list(weather.attrs.get("notes", []))
    notes.extend(model_notes(system.module))
    step_h = step_hours(weather)
    time_label = weather.attrs.get("time_label")
    if time_label is None:
        from pvsource.weather import time_note

        time_label = "instant"
        notes.insert(0, time_note(time_label, step_h, "no convention came with the weather"))
    report = progress or (lambda done, total: None)
    load_w = weather["load_w"].to_numpy(float) if "load_w" in weather else np.zeros(len(weather))
    if "load_w" not in weather and system.bank is not None:
        notes.append("no load_w column: the bank feeds no load")
    if "load_w" in weather and system.bank is None:
        notes.append("load_w is reported but not drawn: the system has no bank")
        load_w = np.zeros(len(weather))
    file_site = weather.attrs.get("site")
    if file_site and system.site and (abs(file_site["latitude"] - system.site.latitude) > 1.0
                                      or abs(file_site["longitude"] - system.site.longitude) > 1.0):
        notes.append(f"the weather file's site ({file_site['latitude']:g}, {file_site['longitude']:g}) is more "
                     f"than a degree from [site] ({system.site.latitude:g}, {system.site.longitude:g})")
    if system.site is None:
        raise InputError(system.source, "[site]", "is missing: a season study needs latitude and longitude")
    bounds = chunk_bounds(weather.index, chunk_rows)
    state = None if system.bank is None else BankState(system.bank.soc if soc0 is None else soc0)
    kept = [] if keep == "all" else None
    report(0, len(bounds))
    for k, (a, b) in enumerate(bounds):
        steps, state = _solve_span(system, weather.iloc[a:b], load_w[a:b], step_h, state, transposition)
        if each_chunk is not None:
            each_chunk(steps)
        if keep == "all":
            kept.append(steps)
        else:
            if kept is None:
                kept = _KeptSteps(len(weather), weather.index, summary_columns(steps.columns))
            kept.add(steps)
        del steps
        release_memory()  # the chunk's temporaries: the next chunk starts from what is kept
        report(k + 1, len(bounds))
    if keep == "all":
        steps = kept[0] if len(kept) == 1 else pd.concat(kept)
    else:
        steps = kept.frame()
    del kept
    summary = summarise(system, steps, step_h)
    summary["time_label"] = time_label
    summary["notes"] = notes
    if system.bank is not None and summary["poa_insolation_kwh_m2"] > 1.0 and summary["energy_stored_kwh"] <= 0.0:
        # A study of nothing must not look like a result.
        why = steps["limit"].value_counts().index[0] if len(steps) else "unknown"
        cold = summary["alert_hours"]["charge_below_min_temp"]
        raise InputError(system.source, "[bank] temp_c" if cold > 0 else "[array]",
                         f"the array never charged the bank over the whole span (most often limited by: {why}); "
                         + ((f"the bank's temp_c {system.bank.temp_c:g} degC" if system.bank.air_offset_c is None
                             else f"the bank, at the air's {system.bank.air_offset_c:+g} degC,")
                            + f" is below its minimum charging temperature "
                            f"{system.bank.chemistry.min_charge_temp_c:g} degC for the {cold:,.0f} h it could have "
                            "charged" if cold > 0 else
                            "check modules_per_string against the bank voltage and the controller's input window"))
    return SeasonResult(steps, summary, tuple(notes))


def _solve_span(system: System, weather: pd.DataFrame, load_w: np.ndarray, step_h: float, state,
                transposition: str):
    """Every step of one chunk, and the time loop's state at its end (a :class:`BankState`; None without a bank)."""
    g, t, poa = group_conditions(system, weather, transposition)
    loop = None
    if system.bank is not None:
        b = system.bank
        temp = bank_temperature_c(system, weather)
        charge_grid, emf_grid = charge_grid_a(system, g, t, bank_temp_c=temp)
        limits, stages, regulated, disconnect = loop_settings(system, temp)
        gen = system.generator
        loop = integrate_soc(charge_grid, emf_grid, load_w, step_h, b.capacity_ah, b.chemistry.coulombic_efficiency,
                             state, soc_grid(system), limits, regulated, stages, gen, disconnect)
        del charge_grid, emf_grid
        state = loop.end
        steps = operating_points(system, g, t, soc=loop.mid_soc, bank_temp_c=temp, charge_cap_a=loop.cap_a,
                                 hold_a=loop.hold_a, stage=loop.stage, load_a=loop.load_a, drift_check=False)
        if gen is not None:
            steps = _with_generator(steps, gen, loop.generator, load_w)
    else:
        steps = operating_points(system, g, t, drift_check=False)
    steps.index = weather.index
    steps["poa_global_w_m2"] = poa
    steps["load_w"] = load_w
    steps["unmet_load_w"] = loop.unmet_w if loop is not None else 0.0
    if loop is not None:
        steps["soc"] = loop.soc
        # The share of the stored energy (E I) that never reaches the state of charge.
        steps["coulombic_loss_w"] = steps["bank_emf_v"].to_numpy() * loop.coulombic_loss_a
        steps["load_disconnected"] = loop.load_disconnected
        if regulated:
            # The share of each step in each charge stage, by time: hours by stage are their sums.
            for code in STAGE_SHARED:
                steps[stage_share_column(code)] = loop.stage_shares[:, code - BULK].astype(np.float32)
            # A step that reaches the held voltage is under it only for a share: hours by limit split it.
            steps["limit_share"] = loop.held_share.astype(np.float32)
            steps["limit_before"] = pd.Categorical.from_codes(loop.limit_before, LIMIT_WORDS)
    return steps, state


#: The charge stages a regulating controller moves through, each with a
#: per-step column of the share of the step spent in it (:func:`stage_share_column`).
STAGE_SHARED = (BULK, ABSORPTION, FLOAT)


def stage_share_column(code: int) -> str:
    """The steps' column with the share of each step spent in a charge stage: ``bulk_share`` and so on [-]."""
    return f"{STAGE_WORDS[code]}_share"


def step_hours(weather: pd.DataFrame) -> float:
    """The weather's step [h]: as its reader measured it, else the median spacing of its stamps."""
    return float(weather.attrs.get("step_h") or _step_hours(weather.index))


def _with_generator(steps: pd.DataFrame, gen, run: dict, load_w) -> pd.DataFrame:
    """The steps with the generator's columns: share of the step run, starts, and its energy accounts."""
    from pvsource.generator import step_accounts

    accounts = step_accounts(gen, run["running"], run["charge_a"], load_w, steps["bank_emf_v"].to_numpy(),
                             steps["bank_r_ohm"].to_numpy(), steps["charge_current_a"].to_numpy())
    return steps.assign(generator_running=run["running"], generator_starts=run["starts"], **accounts)


def _step_hours(index) -> float:
    if len(index) < 2:
        raise InputError("weather", None, "needs at least two time steps")
    return float(pd.Series(index).diff().median().total_seconds() / 3600.0)


def _energies(steps: pd.DataFrame, step_h: float) -> dict:
    kwh = lambda col: float(np.nansum(steps[col].to_numpy()) * step_h / 1000.0) if col in steps else 0.0  # noqa: E731
    out = {
        "poa_insolation_kwh_m2": kwh("poa_global_w_m2"),
        "energy_mpp_kwh": kwh("groups_p_mp_w"),
        "energy_generated_kwh": kwh("generated_w"),
        "energy_delivered_kwh": kwh("delivered_w"),
        "energy_stored_kwh": kwh("stored_w"),
        "wiring_loss_kwh": kwh("cable_loss_w"),
        "controller_loss_kwh": kwh("controller_loss_w"),
        "bank_internal_loss_kwh": kwh("bank_internal_loss_w"),
        "curtailed_kwh": kwh("curtailed_w"),
        "mpp_shortfall_kwh": kwh("mpp_shortfall_w"),
        "load_kwh": kwh("load_w"),
        "unmet_load_kwh": kwh("unmet_load_w"),
        "coulombic_loss_kwh": kwh("coulombic_loss_w"),
        # Hours, summed like the energies: a span's are its months' sum.
        "load_disconnected_hours": float(np.nansum(steps["load_disconnected"].to_numpy()) * step_h)
        if "load_disconnected" in steps else 0.0,
    }
    if "generator_w" in steps:
        out.update({
            "generator_hours": float(steps["generator_running"].sum() * step_h),
            "generator_starts": int(steps["generator_starts"].sum()),
            "generator_energy_kwh": kwh("generator_w"),
            "generator_load_kwh": kwh("generator_load_w"),
            "generator_charger_loss_kwh": kwh("generator_charger_loss_w"),
            "generator_bank_loss_kwh": kwh("generator_bank_loss_w"),
            "generator_stored_kwh": kwh("generator_stored_w"),
            "generator_fuel_l": float(steps["generator_fuel_l_per_h"].sum() * step_h),
        })
    gen, avail = out["energy_generated_kwh"], out["energy_mpp_kwh"]
    for key in ("wiring_loss", "controller_loss", "bank_internal_loss"):
        out[f"{key}_pct"] = 100.0 * out[f"{key}_kwh"] / gen if gen > 0 else None
    # Curtailed energy was never generated: a share of what was available.
    out["curtailed_pct"] = 100.0 * out["curtailed_kwh"] / avail if avail > 0 else None
    return out


def _span_stats(steps: pd.DataFrame, step_h: float, whole_span: bool = True) -> dict:
    """Charge-current and state-of-charge statistics; the hours by stage and limit only for the ``whole_span``."""
    out = {}
    if "charge_current_a" in steps:
        lit = steps["charge_current_a"].to_numpy()
        out["peak_charge_current_a"] = float(np.nanmax(lit)) if len(lit) else 0.0
        positive = lit[lit > 0]
        out["p95_charge_current_a"] = float(np.percentile(positive, 95)) if positive.size else 0.0
        if whole_span:
            out["hours_by_stage"] = _stage_hours(steps, "stage", step_h)
            out["hours_by_limit"] = _limit_hours(steps, "limit", step_h)
    if "soc" in steps:
        soc = steps["soc"].to_numpy()
        out["min_soc"] = float(soc.min())
        out["max_soc"] = float(soc.max())
        # Days of the weather's own clock; the steps are in time order, so each day is one run.
        day = clock_ns(steps.index)[0] // _DAY_NS
        starts = np.flatnonzero(np.concatenate([[True], np.diff(day) != 0]))
        out["days_reaching_full"] = int((np.maximum.reduceat(soc, starts) >= FULL_SOC).sum())
    return out


def controller_summaries(system: System, steps: pd.DataFrame, step_h: float, whole_span: bool = True) -> list[dict]:
    """Each controller's energy and hours by limit over the steps (its stage too for the ``whole_span``).

    ``energy_stored_kwh`` is the bank's EMF times the controller's own
    current (with one controller, the stored energy itself), so the
    controllers' stored energies add up to the span's.
    """
    from pvsource.operating import controller_column

    if system.bank is None or "charge_current_a" not in steps:
        return []
    kwh = lambda values: float(np.nansum(values) * step_h / 1000.0)  # noqa: E731
    out = []
    for assigned in system.controllers:
        if system.several_controllers:
            col = lambda key, a=assigned: controller_column(a.name, key)  # noqa: E731
            current = steps[col("charge_current_a")].to_numpy()
            stored = steps["bank_emf_v"].to_numpy() * current
        else:
            col = {"loss_w": "controller_loss_w"}.get
            col = lambda key, own=col: own(key) or key  # noqa: E731
            current, stored = steps["charge_current_a"].to_numpy(), steps["stored_w"].to_numpy()
        rec = {"name": assigned.name, "groups": list(assigned.groups),
               "energy_generated_kwh": kwh(steps[col("generated_w")].to_numpy()),
               "energy_stored_kwh": kwh(stored), "curtailed_kwh": kwh(steps[col("curtailed_w")].to_numpy()),
               "controller_loss_kwh": kwh(steps[col("loss_w")].to_numpy()),
               "charge_ah": float(np.nansum(current) * step_h),
               "peak_charge_current_a": float(np.nanmax(current)) if len(current) else 0.0,
               "hours_by_limit": _limit_hours(steps, col("limit"), step_h)}
        if whole_span:
            rec["hours_by_stage"] = _stage_hours(steps, col("stage"), step_h)
        out.append(rec)
    return out


def _hours_by(codes: pd.Series, step_h: float) -> dict:
    """Hours in each stage or limit that occurs, longest first, by its words."""
    return {str(k): float(v) * step_h for k, v in codes.value_counts().items() if v > 0}


def _limit_hours(steps: pd.DataFrame, column: str, step_h: float) -> dict:
    """Hours under each limit, longest first: a step that reached the held voltage split at that moment.

    Such a step is labelled voltage regulation; ``limit_share`` of it was,
    and the rest was under ``limit_before`` (the source, the controller's
    output, the bank's rate), so an hour-long step counts as its minutes do.
    """
    hours = _hours_by(steps[column], step_h)
    if "limit_share" not in steps:
        return hours
    held = LIMIT_WORDS[VOLTAGE_REGULATION]
    share = steps["limit_share"].to_numpy(float)
    split = (steps[column] == held).to_numpy() & (share < 1.0)
    if split.any():
        moved = pd.Series((1.0 - share[split]) * step_h).groupby(
            np.asarray(steps["limit_before"].to_numpy()[split], dtype=object)).sum()
        for word, h in moved.items():
            hours[held] -= h
            hours[str(word)] = hours.get(str(word), 0.0) + h
    return dict(sorted(((k, v) for k, v in hours.items() if v > 0.0), key=lambda kv: -kv[1]))


def _stage_hours(steps: pd.DataFrame, column: str, step_h: float) -> dict:
    """Hours in each stage, longest first: a charging step's hours split by its stage shares.

    A step labelled bulk, absorption or float adds each stage's share of it
    (absorption may last minutes of an hour-long step); idle, discharging
    and unregulated steps count whole, by their label.
    """
    labels = steps[column]
    if stage_share_column(BULK) not in steps:
        return _hours_by(labels, step_h)
    charging = labels.isin([STAGE_WORDS[c] for c in STAGE_SHARED]).to_numpy()
    out = _hours_by(labels[~charging], step_h)
    for code in STAGE_SHARED:
        hours = float(steps[stage_share_column(code)].to_numpy()[charging].sum(dtype=float)) * step_h
        if hours > 0.0:
            out[STAGE_WORDS[code]] = hours
    return dict(sorted(out.items(), key=lambda kv: -kv[1]))


def clock_ns(index: pd.DatetimeIndex):
    """Wall-clock time of each stamp in its own time zone, and that zone's offset from UTC, both [ns]."""
    wall = index.tz_localize(None) if index.tz is not None else index
    wall_ns = np.asarray(wall.as_unit("ns").asi8)
    return wall_ns, wall_ns - np.asarray(index.as_unit("ns").asi8)


_DAY_NS = 86_400_000_000_000
_HOUR_NS = 3_600_000_000_000


def hourly_table(steps: pd.DataFrame, step_h: float) -> pd.DataFrame:
    """The steps gathered into the clock hours they fall in: what a spreadsheet user opens.

    - every power column ``*_w`` becomes the energy of the hour ``*_wh``
      (the sum of power x step [Wh]), the same way the summary counts energy;
    - every other number is the hour's mean (NaN steps left out);
    - ``converged`` holds if it held at every step; ``stage`` and ``limit``
      are the ones that held longest; ``alerts`` has the bit of every alert
      that fired in the hour (:mod:`pvsource.alerts`); ``generator_starts``
      counts the generator's starts within the hour (``generator_running``,
      a mean, is the share of the hour it ran);
    - ``covered_h`` is the time the row's steps cover [h]: 1 for a complete
      hour, less where steps are missing.

    Hours are those of the weather's own clock, labelled by their start, with
    the steps whose timestamps fall in [start, start + 1 h). A clock hour
    that happens twice (daylight saving ending) is two rows. Steps longer than
    an hour are not split: each stays one row, labelled by its own timestamp,
    with its energy over the whole step.

    Parameters
    ----------
    steps : DataFrame
        :attr:`SeasonResult.steps`, indexed by time, at least one row.
    step_h : float
        Step length [h], as in the summary.

    Returns
    -------
    DataFrame
        One row per hour that has steps, indexed by ``hour_start``.
    """
    index = steps.index
    wall_ns, offset_ns = clock_ns(index)
    # A new row where the clock hour or the clock's offset (DST) changes.
    hour = wall_ns // _HOUR_NS
    change = (np.diff(hour) != 0) | (np.diff(offset_ns) != 0)
    starts = np.flatnonzero(np.concatenate([[True], change]))
    counts = np.diff(np.append(starts, len(steps)))
    label = index[starts] - pd.to_timedelta(wall_ns[starts] % _HOUR_NS, unit="ns")
    out = {"covered_h": counts * step_h}
    for name in steps.columns:
        col = steps[name].to_numpy()
        if name == "alerts":
            out[name] = np.bitwise_or.reduceat(col, starts)  # every alert that fired within the hour
        elif name == "generator_starts":
            out[name] = np.add.reduceat(col, starts)  # a count, not a mean
        elif col.dtype.kind == "b":
            out[name] = np.add.reduceat(~col, starts) == 0
        elif col.dtype.kind in "iuf":
            col = col.astype(float, copy=False)
            total, count = np.add.reduceat(col, starts), counts
            if np.isnan(total).any():  # only then pay for leaving NaN steps out
                missing = np.isnan(col)
                total, count = np.add.reduceat(np.where(missing, 0.0, col), starts), counts - np.add.reduceat(
                    missing, starts)
            if name.endswith("_w"):
                out[name[:-2] + "_wh"] = total * step_h
            else:
                with np.errstate(invalid="ignore", divide="ignore"):
                    out[name] = total / count
        else:
            codes, labels = pd.factorize(steps[name], use_na_sentinel=False)
            tally = np.add.reduceat(np.eye(len(labels), dtype=np.int32)[codes], starts)
            out[name] = np.asarray(labels, dtype=object)[tally.argmax(axis=1)]
    return pd.DataFrame(out, index=pd.Index(label, name="hour_start"))


def summarise(system: System, steps: pd.DataFrame, step_h: float) -> dict:
    """Totals and statistics for the whole span, with a ``monthly`` list of the same energies."""
    if not steps.index.is_monotonic_increasing:
        steps = steps.sort_index()  # months and days below are runs of rows in time order
    summary = {"steps": int(len(steps)), "step_h": step_h, "start": str(steps.index[0]), "end": str(steps.index[-1])}
    summary.update(_energies(steps, step_h))
    summary.update(_span_stats(steps, step_h))
    if system.bank is not None:
        summary["controllers"] = controller_summaries(system, steps, step_h)
    codes = steps["alerts"].to_numpy() if "alerts" in steps else alert_codes(system, steps)
    monthly = []
    # Months of the weather's own local calendar. The steps are in time
    # order, so each month is one run of rows: slices, not a group-by's copies.
    local = steps.index.tz_localize(None) if steps.index.tz is not None else steps.index
    month = local.year.to_numpy() * 12 + local.month.to_numpy() - 1
    edges = np.append(np.flatnonzero(np.concatenate([[True], np.diff(month) != 0])), len(steps))
    for start, stop in zip(edges[:-1], edges[1:]):
        part = steps.iloc[start:stop]
        row = {"month": f"{month[start] // 12:04d}-{month[start] % 12 + 1:02d}"}
        row.update(_energies(part, step_h))
        row.update(_span_stats(part, step_h, whole_span=False))
        if system.bank is not None:
            row["controllers"] = controller_summaries(system, part, step_h, whole_span=False)
        row["alert_hours"] = alert_hours(codes[start:stop], step_h)
        monthly.append(row)
    summary["monthly"] = monthly
    # The span's alert hours are its months' sum, by construction.
    summary["alert_hours"] = {name: sum(m["alert_hours"][name] for m in monthly) for name in alert_hours([], step_h)}
    if system.bank is not None:
        v_abs, _ = bank_model.charge_voltages_v(system.bank)
        summary["bank_absorption_v"] = float(v_abs)
    return summary
