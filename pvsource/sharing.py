"""Several controllers charging one bank: each tracks its own groups, the bank takes their sum.

Controller k has its own array (its groups), its own feeder and its own run
to the bank (``R_k``); all of them meet at the bank's terminals, behind the
interconnects every controller's current shares (``R_ic``) and the bank's
Thevenin equivalent (E, ``R_b``). So the voltage controller k works into is

    E + (R_b + R_ic) (I_1 + ... + I_n) + R_k I_k,

which is what a single controller sees when the bank's EMF is raised by
``(R_b + R_ic) x`` the other controllers' current. :func:`solve_shared` finds
that point by Jacobi sweeps over the others' currents. Each sweep changes a
current by about ``(R_b + R_ic) dI_k/dV`` of the last change (milliohms
against a few amperes per volt), so a handful of sweeps reach 1e-10 A.

Regulation (the rule)
---------------------
1. Each controller gives what it could within its own limits: its unlimited
   current (:meth:`Controller.free`, within its own input window) cut to its
   own ``max_output_a``: ``a_k = min(free_k, max_output_a_k)``.
2. The bank regulates the sum: :func:`pvsource.regulation.regulate` on
   ``a_1 + ... + a_n`` against the bank's rate, the constant-voltage law at
   the stage's target, the acceptance near full charge and the room in the
   step, gives the bank current ``I``.
3. Where the bank cuts (``I < sum a``), every controller is cut in the same
   proportion: ``I_k = I a_k / sum a``, pro rata to what each could give.
   Real controllers sharing a bank each regulate the same bank voltage, so
   each backs off in step; the pro-rata rule is that behaviour's steady
   state, and it keeps a controller's share independent of the order the
   file lists them in.

A direct connection cannot be cut, so every controller sharing a bank must
regulate (``pwm`` or ``mppt``); :mod:`pvsource.config` refuses a
``direct`` one among several.

Each controller's stage is the bank's; its limit is the bank's limit where
the bank cuts, else its own (its output current, its input window, the
source).
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from pvsource import regulation as reg
from pvsource.charging import BankPoint, ChargeResult, array_side

MAX_SWEEPS = 30
# A sweep's change below this is the fixed point (well within the energy
# balance's 1e-9 relative guard at any real current).
SWEEP_TOLERANCE_A = 1e-10


@dataclass(frozen=True)
class SharedCharge:
    """Several controllers into one bank, at every condition.

    Attributes
    ----------
    charges : tuple of ChargeResult
        Each controller's point, its watts taken against the bank as it sees it.
    banks : tuple of BankPoint
        The bank as each controller sees it: its EMF raised by the shared
        resistance times the other controllers' current.
    charge_current_a : (N,) the bank current, the controllers' sum [A]
    stage, limit : (N,) the bank's stage and what limits the sum (codes of :mod:`pvsource.regulation`)
    stored_w, bank_internal_loss_w, shared_cable_loss_w : (N,) [W]
        Stored (E I), the bank's internal loss, and the loss in the
        interconnects beyond each controller's own: the parts of every
        controller's output that its own books cannot split, split here.
    converged : (N,)
    """

    charges: tuple
    banks: tuple
    charge_current_a: np.ndarray
    stage: np.ndarray
    limit: np.ndarray
    stored_w: np.ndarray
    bank_internal_loss_w: np.ndarray
    shared_cable_loss_w: np.ndarray
    converged: np.ndarray


def share_pro_rata(own_a, bank_a):
    """Each controller's part of the bank current ``bank_a``, pro rata to ``own_a`` (C, N) [A].

    Where the bank takes all they could give, each keeps its own.
    """
    own_a = np.asarray(own_a, float)
    total = own_a.sum(axis=0)
    with np.errstate(divide="ignore", invalid="ignore"):
        factor = np.where(total > bank_a, np.asarray(bank_a, float) / total, 1.0)
    return own_a * np.where(total > 0.0, factor, 0.0)


def free_total_a(nets, controllers, bank: BankPoint, r_feeders_ohm, r_bank_cables_ohm, r_interconnect_ohm: float,
                 arrays=None):
    """What the controllers together could give before the bank's limits, each within its own output limit (N,) [A].

    The season's grid carries this sum (step 1 of the rule); the time loop
    applies the bank's limits to it. Each controller sees the bank's EMF
    raised by the others' current, found by the same Jacobi sweeps as
    :func:`solve_shared`.
    """
    m, n = len(controllers), len(bank.emf_v)
    r_shared = bank.r_ohm + r_interconnect_ohm
    if arrays is None:
        arrays = [array_side(net, r_f) if c.tracks else None for net, c, r_f in zip(nets, controllers, r_feeders_ohm)]
    own = np.zeros((m, n))
    for _ in range(MAX_SWEEPS):
        total = own.sum(axis=0)
        new = np.array([np.minimum(c.output_limit_a, c.free(net, replace(bank, emf_v=bank.emf_v + r_shared * (
            total - own[k])), r_f, r_bc, arr).current_a) for k, (c, net, r_f, r_bc, arr)
            in enumerate(zip(controllers, nets, r_feeders_ohm, r_bank_cables_ohm, arrays))])
        change = np.abs(new - own).max()
        own = new
        if change <= SWEEP_TOLERANCE_A * (1.0 + np.abs(new).sum(axis=0).max(initial=0.0)):
            break
    return own.sum(axis=0)


def solve_shared(nets, controllers, bank: BankPoint, r_feeders_ohm, r_bank_cables_ohm, r_interconnect_ohm: float,
                 arrays=None) -> SharedCharge:
    """Every controller's point when several charge one bank.

    Parameters
    ----------
    nets : sequence of Network
        Each controller's array and its PV-side cables.
    controllers : sequence of Controller
        Regulating kinds (``pwm``, ``mppt``).
    bank : BankPoint
        The bank itself.
    r_feeders_ohm : sequence of float
        Each controller's feeder loop resistance [ohm].
    r_bank_cables_ohm : sequence of float
        Each controller's bank-side loop resistance: its own bank runs and
        the shared interconnects [ohm].
    r_interconnect_ohm : float
        The shared interconnects' loop resistance [ohm].
    arrays : sequence, optional
        Each tracker's :func:`~pvsource.charging.array_side`, when already solved.

    Returns
    -------
    SharedCharge
    """
    m, n = len(controllers), len(bank.emf_v)
    r_shared = bank.r_ohm + r_interconnect_ohm
    if arrays is None:
        arrays = [array_side(net, r_f) if c.tracks else None for net, c, r_f in zip(nets, controllers, r_feeders_ohm)]
    room = bank.room_a()
    i_k = np.zeros((m, n))
    converged = np.zeros(n, bool)
    for _ in range(MAX_SWEEPS):
        total = i_k.sum(axis=0)
        banks = [replace(bank, emf_v=bank.emf_v + r_shared * (total - i_k[k])) for k in range(m)]
        frees = [c.free(net, b, r_f, r_bc, arr) for c, net, b, r_f, r_bc, arr
                 in zip(controllers, nets, banks, r_feeders_ohm, r_bank_cables_ohm, arrays)]
        own = np.array([np.minimum(f.current_a, c.output_limit_a) for f, c in zip(frees, controllers)])
        own_limit = np.array([np.where(f.current_a > c.output_limit_a, reg.CONTROLLER_OUTPUT, f.limit)
                              for f, c in zip(frees, controllers)])
        # What limits the sum when the bank does not: the largest contributor's own limit.
        top = own_limit[own.argmax(axis=0), np.arange(n)]
        i_bank, stage, limit = reg.regulate_arrays(
            own.sum(axis=0), top, bank.soc, bank.emf_v, bank.r_ohm, np.inf, bank.max_charge_a, bank.absorption_v,
            bank.float_v, bank.accept_start_soc, room, bank.hold(), bank.stage, True, bank.load())
        wanted = share_pro_rata(own, i_bank)
        ops = [c.operate(net, f, b, w, r_f, r_bc) for c, net, f, b, w, r_f, r_bc
               in zip(controllers, nets, frees, banks, wanted, r_feeders_ohm, r_bank_cables_ohm)]
        # A tracker that cannot deliver less than asked (its efficiency
        # curve's rising part) gives its unlimited current: the source binds.
        got = np.array([np.where(op.reached, w, f.current_a) for op, w, f in zip(ops, wanted, frees)])
        change = np.abs(got - i_k).max(axis=0)
        i_k = got
        converged = change <= SWEEP_TOLERANCE_A * (1.0 + np.abs(got).sum(axis=0))
        if converged.all():
            break
    cut = own.sum(axis=0) > i_bank
    charges = []
    for k, (c, f, op, b, r_f, r_bc) in enumerate(zip(controllers, frees, ops, banks, r_feeders_ohm,
                                                     r_bank_cables_ohm)):
        mine = i_k[k]
        # Not cut, each controller is in the bank's stage while it gives something.
        stage_k = np.where(cut, stage, np.where(mine > 0.0, bank.stage, reg.IDLE)).astype(np.int8)
        limit_k = np.where(cut & op.reached, limit, own_limit[k]).astype(np.int8)
        w = c.losses(f, op, b, mine, r_f, r_bc)
        charges.append(ChargeResult(op.x_v, op.bus_v, op.converged & converged, op.duty, w.input_v, mine,
                                    f.current_a, stage_k, limit_k, w.stored_w, w.curtailed_w, w.controller_loss_w,
                                    w.bank_cable_loss_w, w.bank_internal_loss_w))
    total = i_k.sum(axis=0)
    # Each controller booked E' I_k with E' the EMF it sees; the excess over
    # E I is the shared resistance's cross terms, split by resistance.
    cross = sum(ch.stored_w for ch in charges) - bank.emf_v * total
    with np.errstate(divide="ignore", invalid="ignore"):
        bank_part = np.where(r_shared > 0.0, bank.r_ohm / r_shared, 1.0)
    return SharedCharge(
        tuple(charges), tuple(banks), total, stage, limit, bank.emf_v * total,
        sum(ch.bank_internal_loss_w for ch in charges) + cross * bank_part,
        cross * (1.0 - bank_part), converged)
