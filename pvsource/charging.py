"""Charging a bank through a controller: the charge current, the stage, the limit.

At one set of conditions the array, its cables, the controller, the bank-side
cables and the bank (its Thevenin equivalent E, R) settle at one point.
:func:`solve_charging` finds it in three steps:

1. the controller's unlimited current (:meth:`Controller.free`);
2. the regulation: every bank and controller limit, the stage and what binds
   (:func:`pvsource.regulation.regulate`, the one place the limits live);
3. the controller operated at that current (:meth:`Controller.operate`) and
   its watts (:meth:`Controller.losses`):

    generated = array-side cables + controller + bank-side cables
                + bank internal resistance + stored (E I).

Stages at an operating point
----------------------------
- bulk: the current is limited by the source, the controller's output
  current, or the bank's maximum charge rate;
- absorption: the bank terminals are held at the absorption voltage, so the
  current is (V_abs - E) / R (the constant-voltage law), within the bank's
  acceptance;
- float: the same law at the float voltage;
- unregulated: a direct connection, where nothing limits the voltage.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from pvsource import regulation as reg
from pvsource.controller import Controller
from pvsource.network import Network, solve_max_power, solve_thevenin

# At a single operating point, with no history to say which stage holds, a
# bank at or above this state of charge is taken as floating (common
# practice: absorption ends when the current has tapered, near full charge).
FLOAT_SOC = 0.995


@dataclass(frozen=True)
class BankPoint:
    """The bank at each condition, as the charging solver needs it (arrays (N,)).

    Attributes
    ----------
    emf_v, r_ohm : Thevenin EMF [V] and internal resistance [ohm]
    soc : state of charge [-]
    absorption_v, float_v : the regulation voltages [V]
    stage : the controller's stage as the step begins, codes of :mod:`pvsource.regulation`
        (bulk, absorption or float: float holds the float voltage)
    max_charge_a : the bank's maximum charge current (0 where charging is not allowed) [A]
    accept_start_soc : where the bank's acceptance starts to taper [-] (a scalar)
    cap_a : in a season study, the current that fills the bank within the step [A]
    hold_a : in a season study, the constant-voltage current averaged over the step [A]
    """

    emf_v: np.ndarray
    r_ohm: np.ndarray
    soc: np.ndarray
    absorption_v: np.ndarray
    float_v: np.ndarray
    stage: np.ndarray
    max_charge_a: np.ndarray
    accept_start_soc: float
    cap_a: np.ndarray | None = None
    hold_a: np.ndarray | None = None
    load_a: np.ndarray | None = None

    def head(self, m: int) -> "BankPoint":
        """The first ``m`` conditions."""
        return BankPoint(*(a[:m] if isinstance(a, np.ndarray) else a
                           for a in (getattr(self, k) for k in self.__dataclass_fields__)))

    @property
    def target_v(self):
        """The regulation voltage of the stage in force [V]."""
        return np.where(self.stage == reg.FLOAT, self.float_v, self.absorption_v)

    def room_a(self):
        """What still fits in the bank this step (a season study's cap); infinite by default [A]."""
        return np.full_like(self.emf_v, np.inf) if self.cap_a is None else self.cap_a

    def hold(self):
        """The constant-voltage current averaged over a season's step; infinite by default [A]."""
        return np.full_like(self.emf_v, np.inf) if self.hold_a is None else self.hold_a

    def load(self):
        """The current a season's loads draw at the bank in parallel with the charge; none by default [A]."""
        return np.zeros_like(self.emf_v) if self.load_a is None else self.load_a


@dataclass(frozen=True)
class ChargeResult:
    """A charging point at every condition (arrays (N,), ``x_v`` (N, G)).

    Attributes
    ----------
    x_v, bus_v, converged : the array's point (a PWM switch's on-state)
    duty : the factor (a PWM switch's duty) that turns on-state array quantities into averages [-]
    input_v : the controller's input voltage [V]
    charge_current_a : into the bank (averaged) [A]
    free_current_a : what the controller would give with no limit [A]
    stage, limit : codes of :mod:`pvsource.regulation` (``STAGE_WORDS``, ``LIMIT_WORDS``)
    stored_w, curtailed_w, controller_loss_w, bank_cable_loss_w, bank_internal_loss_w : [W]
    """

    x_v: np.ndarray
    bus_v: np.ndarray
    converged: np.ndarray
    duty: np.ndarray
    input_v: np.ndarray
    charge_current_a: np.ndarray
    free_current_a: np.ndarray
    stage: np.ndarray
    limit: np.ndarray
    stored_w: np.ndarray
    curtailed_w: np.ndarray
    controller_loss_w: np.ndarray
    bank_cable_loss_w: np.ndarray
    bank_internal_loss_w: np.ndarray


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

    Smooth in the state of charge, so a season study can interpolate it; the
    limits, with their kinks, are applied afterwards by
    :func:`pvsource.regulation.regulate`.
    """
    return controller.free(net, bank, r_feeder_ohm, r_bank_cables_ohm, array).current_a


def solve_charging(net: Network, controller: Controller, bank: BankPoint, r_feeder_ohm: float,
                   r_bank_cables_ohm: float, array=None) -> ChargeResult:
    """Operating point, charge current, stage and loss split for every condition.

    Parameters
    ----------
    net : Network
        The array and its PV-side cables (string leads and home runs).
    controller : Controller
        One of the kinds of :mod:`pvsource.controller`.
    bank : BankPoint
    r_feeder_ohm : float
        Loop resistance from the combiner bus to the controller input [ohm].
    r_bank_cables_ohm : float
        Loop resistance from the controller output to the bank, interconnects included [ohm].
    array : tuple, optional
        :func:`array_side` of the same network, when already solved (trackers only).

    Returns
    -------
    ChargeResult
    """
    free = controller.free(net, bank, r_feeder_ohm, r_bank_cables_ohm, array)
    i_bank, stage, limit = reg.regulate_arrays(
        free.current_a, free.limit, bank.soc, bank.emf_v, bank.r_ohm, controller.output_limit_a,
        bank.max_charge_a, bank.absorption_v, bank.float_v, bank.accept_start_soc, bank.room_a(), bank.hold(),
        bank.stage, controller.regulates, bank.load())
    op = controller.operate(net, free, bank, i_bank, r_feeder_ohm, r_bank_cables_ohm)
    short = ~op.reached
    if short.any():
        # The controller could not deliver the regulated current: the source binds.
        i_bank = np.where(short, free.current_a, i_bank)
        stage = np.where(short, reg.BULK, stage).astype(np.int8)
        limit = np.where(short, free.limit, limit).astype(np.int8)
    watts = controller.losses(free, op, bank, i_bank, r_feeder_ohm, r_bank_cables_ohm)
    return ChargeResult(op.x_v, op.bus_v, op.converged, op.duty, watts.input_v, i_bank, free.current_a, stage,
                        limit, watts.stored_w, watts.curtailed_w, watts.controller_loss_w, watts.bank_cable_loss_w,
                        watts.bank_internal_loss_w)
