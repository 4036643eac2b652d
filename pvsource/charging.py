"""Charging a bank through a controller: the charge current, the stage, the limits.

At one set of conditions the array, its cables, the controller, the bank-side
cables and the bank (its Thevenin equivalent E, R) settle at one point. This
module finds it for each controller kind (:mod:`pvsource.controller`) and
accounts for every watt:

    generated = array-side cables + controller + bank-side cables
                + bank internal resistance + stored (E I).

Stages at an operating point
----------------------------
- bulk: the current is limited by the source, the controller's output
  current, or the bank's maximum charge rate;
- absorption: the bank terminals are held at the absorption voltage, so the
  current is (V_abs - E) / R (the constant-voltage law);
- float: the same law at the float voltage, once the bank is full;
- unregulated: a direct connection, where nothing limits the voltage.

A PWM controller in regulation switches the array on and off; averages are
reported and the array's point is its on-state.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from pvsource.controller import Controller, efficiency_at
from pvsource.errors import InputError
from pvsource.network import (
    Network, evaluate_groups, solve_max_power, solve_power_above_mpp, solve_thevenin, subset_rows,
)

# Above this state of charge the bank is treated as full: the controller holds
# float rather than absorption (common practice: absorption ends when the
# current has tapered, near full charge).
FLOAT_SOC = 0.995


@dataclass(frozen=True)
class BankPoint:
    """The bank at each condition, as the charging solver needs it (arrays (N,)).

    Attributes
    ----------
    emf_v, r_ohm : Thevenin EMF [V] and internal resistance [ohm]
    target_v : the regulation voltage of the stage in force (absorption or float) [V]
    floating : True where the target is the float voltage
    max_charge_a : the bank's maximum charge current (0 where charging is not allowed) [A]
    accept_a : what the bank accepts in the constant-voltage stage near full charge [A]
    cap_a : in a season study, the current that fills the bank within the step [A]
    """

    emf_v: np.ndarray
    r_ohm: np.ndarray
    target_v: np.ndarray
    floating: np.ndarray
    max_charge_a: np.ndarray
    accept_a: np.ndarray
    cap_a: np.ndarray | None = None

    def head(self, m: int) -> "BankPoint":
        """The first ``m`` conditions."""
        return BankPoint(*(None if a is None else a[:m] for a in (getattr(self, k) for k in self.__dataclass_fields__)))

    def room_a(self):
        """What still fits in the bank this step (a season study's cap); infinite by default [A]."""
        return np.full_like(self.emf_v, np.inf) if self.cap_a is None else self.cap_a

    def cv_current_a(self):
        """The constant-voltage stage's current: the law (V - E)/R, within the bank's acceptance."""
        with np.errstate(divide="ignore", invalid="ignore"):
            law = np.maximum((self.target_v - self.emf_v) / self.r_ohm, 0.0)
        return np.minimum(law, self.accept_a)


def controller_rated_w(controller: Controller, bank: BankPoint):
    """The power an MPPT efficiency curve's load fractions refer to [W].

    ``rated_power_w``, or else the maximum output current at the bank's
    regulation voltage.
    """
    if controller.rated_power_w is not None:
        return controller.rated_power_w
    if controller.max_output_a is None:
        raise InputError("controller", "max_output_a", "a tracking controller needs max_output_a or rated_power_w")
    return controller.max_output_a * np.maximum(bank.target_v, 1.0)


def _quadratic_current(p_out_w, emf_v, r_ohm):
    """Current I >= 0 with (E + I R) I = P: the bank current a converter output power drives."""
    p = np.maximum(p_out_w, 0.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        root = 2.0 * p / (emf_v + np.sqrt(emf_v * emf_v + 4.0 * r_ohm * p))
    return np.where(p > 0.0, root, 0.0)


def _stage_names(cv_binds, floating, limit_other):
    return np.where(cv_binds, np.where(floating, "float", "absorption"), limit_other)


def array_side(net: Network, r_feeder_ohm: float):
    """What a tracker's array side looks like whatever the bank does: open circuit and MPP.

    Solve it once and pass it to :func:`solve_charging` for every state of
    charge of the same conditions.
    """
    oc = solve_thevenin(net, 0.0, np.inf)
    return oc, solve_max_power(net, r_feeder_ohm, open_circuit=oc)


def unlimited_current_a(net: Network, controller: Controller, bank: BankPoint, r_feeder_ohm: float,
                        r_bank_cables_ohm: float, array=None):
    """The charge current before any bank or controller limit, (N,) [A].

    For a tracker: its efficiency times what it takes at the MPP within its
    input window, into the bank's EMF behind the bank-side resistance. Smooth
    in the state of charge, so a season study can interpolate it; the limits,
    with their kinks, are applied afterwards.
    """
    if controller.kind != "mppt":
        return solve_charging(net, controller, bank, r_feeder_ohm, r_bank_cables_ohm)["free_current_a"]
    oc, mp = array if array is not None else array_side(net, r_feeder_ohm)
    p_avail, _, _, _, dead, _ = _tracker_input(net, controller, bank, r_feeder_ohm, oc, mp)
    rated = controller_rated_w(controller, bank)
    p_out = efficiency_at(controller, p_avail / rated) * p_avail
    return np.where(dead, 0.0, _quadratic_current(p_out, bank.emf_v, bank.r_ohm + r_bank_cables_ohm))


def solve_charging(net: Network, controller: Controller, bank: BankPoint, r_feeder_ohm: float,
                   r_bank_cables_ohm: float, array=None) -> dict:
    """Operating point, charge current, stage and loss split for every condition.

    Parameters
    ----------
    net : Network
        The array and its PV-side cables (string leads and home runs).
    controller : Controller
    bank : BankPoint
    r_feeder_ohm : float
        Loop resistance from the combiner bus to the controller input [ohm].
    r_bank_cables_ohm : float
        Loop resistance from the controller output to the bank, interconnects included [ohm].
    array : tuple, optional
        :func:`array_side` of the same network, when already solved (trackers only).

    Returns
    -------
    dict of arrays (N,) and (N, G)
        ``x_v`` (N, G) and ``bus_v``: the array's point (on-state for PWM);
        ``converged``; ``duty``; ``input_v``: controller input voltage;
        ``charge_current_a``; ``stage``; ``limit``; ``stored_w``;
        ``curtailed_w``; ``controller_loss_w``; ``bank_cable_loss_w``;
        ``free_current_a``: the current before any bank or controller limit;
        ``bank_internal_loss_w``; ``scale``: the factor (duty) that turns
        on-state array quantities into averages.
    """
    if controller.kind == "mppt":
        return _mppt(net, controller, bank, r_feeder_ohm, r_bank_cables_ohm,
                     array if array is not None else array_side(net, r_feeder_ohm))
    return _switched(net, controller, bank, r_feeder_ohm, r_bank_cables_ohm)


def _switched(net, controller, bank, r_f, r_bc):
    """Direct connection and PWM: the array sees the bank through the cables and a diode drop."""
    v_d = controller.diode_drop_v
    sol = solve_thevenin(net, bank.emf_v + v_d, bank.r_ohm + r_bc + r_f)
    i_on = evaluate_groups(net, sol.x_v).group_i_a.sum(axis=-1)
    blocked = i_on < 0.0
    if controller.kind == "pwm" or v_d > 0.0:
        # A diode or an open switch stops the bank feeding the array.
        if blocked.any():
            oc = solve_thevenin(net, 0.0, np.inf)
            x = np.where(blocked[:, None], oc.x_v, sol.x_v)
            bus = np.where(blocked, oc.bus_v, sol.bus_v)
            sol = type(sol)(x, bus, sol.converged & (oc.converged | ~blocked), sol.iterations)
            i_on = np.where(blocked, 0.0, i_on)
    i_cv = bank.cv_current_a()
    room = bank.room_a()
    if controller.kind == "pwm":
        i_target = np.minimum(np.minimum(i_cv, bank.max_charge_a), room)
        regulating = i_on > i_target
        with np.errstate(divide="ignore", invalid="ignore"):
            duty = np.where(regulating, i_target / i_on, 1.0)
        i_bank = np.where(regulating, i_target, i_on)
        full = regulating & (room <= np.minimum(i_cv, bank.max_charge_a))
        cv = regulating & ~full & (i_cv <= bank.max_charge_a)
        limit = np.where(regulating, np.where(full, "bank full", np.where(cv, "voltage regulation",
                                                                          "bank charge rate")), "source")
        stage = _stage_names(cv | full, bank.floating | full, "bulk")
    else:
        duty = np.ones_like(i_on)
        i_bank = i_on
        # Nothing regulates a direct connection; say when the bank is charged
        # outside what its chemistry allows.
        over = bank.emf_v + i_on * bank.r_ohm > bank.target_v
        stage = np.full(i_on.shape, "unregulated", dtype=object)
        limit = np.select([i_on > room, (i_on > 0) & (bank.max_charge_a <= 0), i_on > bank.max_charge_a, over],
                          ["none: the bank is full and overcharged",
                           "none: charging below the bank's minimum temperature",
                           "none: above the bank's charge rate", "none: above the regulation voltage"], "none")
    dark = net.state.i_l_a.sum(axis=-1) <= 0.0
    limit = np.where(dark & (i_on <= 0.0), "dark", limit)
    held = np.isin(stage, ("absorption", "float"))
    stage = np.where((i_bank > 0.0) | held, stage, np.where(i_bank < 0.0, "discharging", "idle")).astype(object)
    i_on_avg = duty * i_on
    return {
        "x_v": sol.x_v, "bus_v": sol.bus_v, "converged": sol.converged, "duty": duty,
        "input_v": sol.bus_v - i_on * r_f,
        "charge_current_a": i_bank, "free_current_a": i_on, "stage": stage, "limit": limit.astype(object),
        # Past full, a direct connection's charge cannot be stored: it heats
        # (and, in lead-acid, gasses) the bank.
        "stored_w": bank.emf_v * np.minimum(i_bank, room),
        # A switch that is open part of the time leaves that share of the on-state power on the curve.
        "curtailed_w": (1.0 - duty) * np.maximum(sol.bus_v * i_on, 0.0),
        "controller_loss_w": v_d * np.maximum(i_on_avg, 0.0),
        "bank_cable_loss_w": duty * i_on * i_on * r_bc,
        "bank_internal_loss_w": duty * i_on * i_on * bank.r_ohm
        + bank.emf_v * np.maximum(i_bank - np.minimum(i_bank, room), 0.0),
        "scale": duty,
    }


def _tracker_input(net, controller, bank, r_f, oc, mp):
    """Where a tracker takes its input: the MPP, or the bottom of its window; nothing if the array cannot reach it.

    Returns (power available at the input [W], x, bus voltage, converged, dead, held low).
    """
    i_mp = evaluate_groups(net, mp.x_v).group_i_a.sum(axis=-1)
    v_in_mp = mp.bus_v - i_mp * r_f
    # The input window: above the bank voltage by the headroom, and above the
    # controller's own minimum.
    v_in_min = np.maximum(bank.emf_v + controller.min_headroom_v, controller.min_input_v or 0.0)
    low = v_in_mp < v_in_min
    x, bus, converged = mp.x_v, mp.bus_v, mp.converged & oc.converged
    if low.any():
        held = solve_thevenin(net, v_in_min, r_f)
        x = np.where(low[:, None], held.x_v, x)
        bus = np.where(low, held.bus_v, bus)
        converged = converged & (held.converged | ~low)
    i_in = evaluate_groups(net, x).group_i_a.sum(axis=-1)
    dead = i_in <= 0.0  # the window lies above what the array can reach
    if dead.any():
        # The converter draws nothing: the array rests at open circuit.
        x = np.where(dead[:, None], oc.x_v, x)
        bus = np.where(dead, oc.bus_v, bus)
        i_in = np.where(dead, 0.0, i_in)
    p_avail = np.where(dead, 0.0, (bus - i_in * r_f) * i_in)

    return p_avail, x, bus, converged, dead, low


def _mppt(net, controller, bank, r_f, r_bc, array):
    """A tracking converter: input at the maximum power point within its window and limits."""
    r_tot = bank.r_ohm + r_bc
    oc, mp = array
    p_avail, x, bus, converged, dead, low = _tracker_input(net, controller, bank, r_f, oc, mp)
    rated = controller_rated_w(controller, bank)
    p_out = efficiency_at(controller, p_avail / rated) * p_avail
    i_free = _quadratic_current(p_out, bank.emf_v, r_tot)
    i_cv = bank.cv_current_a()
    i_ctrl = np.full_like(i_free, np.inf if controller.max_output_a is None else controller.max_output_a)
    room = bank.room_a()
    i_max = np.minimum(np.minimum(np.minimum(i_ctrl, bank.max_charge_a), i_cv), room)
    limited = i_free > i_max
    i_bank = np.where(limited, i_max, i_free)
    p_out_actual = np.where(limited, (bank.emf_v + i_bank * r_tot) * i_bank, p_out)
    # Input power that gives this output, with the efficiency taken at the
    # input's own load fraction as above (a few fixed-point steps; the
    # curve is flat enough), and never more than is available.
    p_in_needed = p_out_actual / efficiency_at(controller, p_out_actual / rated)
    for _ in range(8):
        p_in_needed = p_out_actual / efficiency_at(controller, p_in_needed / rated)
    # Where even all that is available would not give the limit (the curve's
    # rising part can make the limited input exceed it), the source binds.
    short = limited & (p_in_needed >= p_avail)
    limited = limited & ~short
    i_bank = np.where(short, i_free, i_bank)
    p_out_actual = np.where(short, p_out, p_out_actual)
    p_in_needed = np.where(limited, p_in_needed, p_avail)

    if limited.any():
        # Take less: move the input toward Voc until it delivers what is needed.
        rows = np.flatnonzero(limited & (p_in_needed > 0))
        if rows.size:
            sub = subset_rows(net, rows)
            cut = solve_power_above_mpp(sub, p_in_needed[rows], r_f, bus[rows], oc.bus_v[rows], x[rows])
            x = x.copy()
            bus = bus.copy()
            x[rows], bus[rows] = cut.x_v, cut.bus_v
            converged = converged.copy()
            converged[rows] &= cut.converged
        off = np.flatnonzero(limited & (p_in_needed <= 0))
        if off.size:
            x = x.copy()
            bus = bus.copy()
            x[off], bus[off] = oc.x_v[off], oc.bus_v[off]
    i_in = evaluate_groups(net, x).group_i_a.sum(axis=-1)
    # Above its maximum input voltage a controller shuts down (if it
    # survives): no charge, and the array rests at open circuit.
    over_v = np.zeros_like(dead)
    if controller.max_input_v is not None:
        over_v = (bus - i_in * r_f > controller.max_input_v) & ~dead
        if over_v.any():
            x = np.where(over_v[:, None], oc.x_v, x)
            bus = np.where(over_v, oc.bus_v, bus)
            i_in = np.where(over_v, 0.0, i_in)
            i_bank = np.where(over_v, 0.0, i_bank)
            dead = dead | over_v
            p_out_actual = np.where(over_v, 0.0, p_out_actual)
            p_out = np.where(over_v, 0.0, p_out)
    p_in = np.where(dead, 0.0, (bus - i_in * r_f) * i_in)
    p_out_final = np.where(dead, 0.0, np.where(limited, p_out_actual, p_out))

    which = np.select([bank.max_charge_a <= 0.0, i_max == room, i_max == i_cv, i_max == bank.max_charge_a],
                      ["bank charge rate", "bank full", "voltage regulation", "bank charge rate"],
                      "controller output current")
    limit = np.where(limited, which, np.where(low & ~dead, "input voltage window", "source"))
    dark = oc.bus_v <= controller.min_headroom_v  # no usable light at all
    limit = np.where(dead, np.where(dark, "dark", "input voltage window"), limit)
    limit = np.where(over_v, "input above max_input_v: controller off", limit).astype(object)
    full = limited & (which == "bank full")
    cv = limited & ((which == "voltage regulation") | full)
    stage = _stage_names(cv, bank.floating | full, "bulk")
    stage = np.where((i_bank > 0.0) | cv, stage, "idle").astype(object)
    return {
        "x_v": x, "bus_v": bus, "converged": converged, "duty": np.ones_like(bus),
        "input_v": bus - i_in * r_f,
        "charge_current_a": i_bank, "stage": stage, "limit": limit,
        "free_current_a": np.where(dead, 0.0, i_free),
        "stored_w": bank.emf_v * i_bank,
        "curtailed_w": np.where(over_v, 0.0, np.maximum(p_avail - p_in, 0.0)),
        "controller_loss_w": p_in - p_out_final,
        "bank_cable_loss_w": i_bank * i_bank * r_bc,
        "bank_internal_loss_w": i_bank * i_bank * bank.r_ohm,
        "scale": np.ones_like(bus),
    }
