"""Operating points of a system, with the linearised view and the accounting.

This is the pipeline for a set of conditions: single-diode parameters at each
condition, the network's exact operating point, the source's key curve points,
the Thevenin/Norton equivalents at the point, superposition, the linear
model's drift, and the energy balance. All vectorised over conditions; large
inputs are processed in chunks that fit in cache.

Conventions
-----------
- The array's terminals are the combiner bus: string leads and group home
  runs belong to the array (as PV source circuits do); the feeder and all
  beyond it (bank and interconnect runs too) are the load side. ``v``, ``i``, ``p`` and the Thevenin/Norton
  equivalents refer to the bus.
- ``source_*`` are the key points of the ideal array: every group joined
  directly, no cables, at the same conditions.
- ``generated_w`` is the power the modules produce; ``efficiency`` is
  ``delivered_w / generated_w`` and ``cable_loss_w`` their difference.
- ``mpp_shortfall_w`` is ``groups_p_mp_w - generated_w``: the power left on
  the curves, with ``groups_p_mp_w`` the sum of each group's own maximum
  power. ``parallel_mismatch_w = groups_p_mp_w - source_p_mp`` is what joining
  mismatched groups directly would cost. One group: both references agree.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from dataclasses import dataclass

from pvsource import bank as bank_model
from pvsource import linear
from pvsource import regulation as reg
from pvsource.alerts import alert_codes
from pvsource.charging import FLOAT_SOC, BankPoint, ChargeResult, solve_charging
from pvsource.errors import ConvergenceError, InputError, PhysicsGuardError
from pvsource.module import key_points, parameters_at
from pvsource.network import (
    Network, Solution, evaluate_groups, solve_at_bus_voltage, solve_max_power, solve_thevenin,
)
from pvsource.system import System
from pvsource.units import CELL_TEMP_RANGE_C, IRRADIANCE_RANGE_W_M2

CHUNK_SIZE = 8192
DRIFT_FRACTION = 0.10
# The drift is reported as a fraction to a few digits; its two extra solves
# need not reach the operating point's precision (the step after the check
# squares a 1e-4 residual to about 1e-8).
DRIFT_TOLERANCE = 1e-4
# The ideal array's MPP is reported, not operated at: P is flat there, and
# the Newton step after the check brings V well inside 1e-5.
SOURCE_MPP_TOLERANCE = 1e-5
ENERGY_BALANCE_TOLERANCE = 1e-9


def _condition_array(system: System, value, name: str, attr: str, valid: tuple[float, float], unit: str):
    """Broadcast a condition to shape (N, G) from a scalar, (N,), (N, G) or {group: value}."""
    groups = system.groups
    if value is None:
        missing = [g.name for g in groups if getattr(g, attr) is None]
        if missing:
            raise InputError(system.source or name, f"group {missing[0]!r}",
                             f"has no {attr}, and none was given in the call")
        value = [getattr(g, attr) for g in groups]
        arr = np.asarray(value, float)[None, :]
    elif isinstance(value, dict):
        unknown = sorted(set(value) - {g.name for g in groups})
        if unknown:
            raise InputError(name, unknown[0], f"no such group; expected one of {', '.join(system.group_names)}")
        cols = []
        for g in groups:
            v = value.get(g.name, getattr(g, attr))
            if v is None:
                raise InputError(name, g.name, "no value given for this group")
            col = np.asarray(v, float)
            if col.ndim > 1:
                raise InputError(name, g.name, f"expected a scalar or shape (N,), got shape {col.shape}")
            cols.append(col)
        try:
            arr = np.stack(np.broadcast_arrays(*cols), axis=-1)
        except ValueError:
            raise InputError(name, None, f"the groups' arrays have different lengths: "
                                         f"{[c.shape for c in cols]}") from None
        arr = arr.reshape(-1, len(groups))
    else:
        arr = np.asarray(value, float)
        if arr.ndim == 0:
            arr = np.full((1, len(groups)), float(arr))
        elif arr.ndim == 1:
            arr = np.repeat(arr[:, None], len(groups), axis=1)
        elif arr.ndim != 2 or arr.shape[1] != len(groups):
            raise InputError(name, None, f"expected a scalar, shape (N,) or (N, {len(groups)}), got {arr.shape}")
    bad = ~np.isfinite(arr) | (arr < valid[0]) | (arr > valid[1])
    if bad.any():
        row, col = np.argwhere(bad)[0]
        raise InputError(name, f"condition {row}, group {groups[col].name!r}",
                         f"expected {valid[0]:g} to {valid[1]:g} {unit}, got {float(arr[row, col])!r}")
    return arr


def _over_groups(a):
    """Sum over the last (group) axis; column by column, which numpy does far
    faster than a reduction over a short inner axis."""
    total = a[..., 0].copy()
    for k in range(1, a.shape[-1]):
        total += a[..., k]
    return total


def _bank_condition(system: System, value, name: str, valid, n: int):
    """A bank condition broadcast to (n,), or None for the file's value."""
    if value is None:
        return None
    if system.bank is None:
        raise InputError(name, None, "applies only to a system with a [bank]")
    arr = np.asarray(value, float)
    if arr.ndim > 1 or (arr.ndim == 1 and len(arr) not in (1, n)):
        raise InputError(name, None, f"expected a scalar or {n} values, got shape {arr.shape}")
    bad = ~np.isfinite(arr) | (arr < valid[0]) | (arr > valid[1])
    if np.any(bad):
        raise InputError(name, None, f"expected {valid[0]:g} to {valid[1]:g}, got {float(np.ravel(arr)[np.argmax(np.ravel(bad))])!r}")
    return np.array(np.broadcast_to(arr, (n,)))


def _load_branch(system: System):
    """(EMF, resistance) of everything beyond the bus, the feeder included; None for mpp."""
    th = system.load.thevenin()
    if th is None:
        return None
    return th[0], th[1] + system.wiring.r_load_side_ohm


def bank_point(system: System, soc, temp_c, history: dict | None = None) -> BankPoint:
    """The bank's Thevenin equivalent, charge voltages and charge limit at each condition.

    ``history`` holds what a season's time loop found at each step
    (``stage``, ``cap_a``, ``hold_a``, ``load_a``; see :func:`operating_points`). Without
    it, the stage is float where the state of charge is at least
    :data:`~pvsource.charging.FLOAT_SOC`, else bulk (a single point has no
    history to say which stage holds).
    """
    history = history or {}
    stage, cap_a, hold_a, load_a = (history.get(k) for k in ("stage", "cap_a", "hold_a", "load_a"))
    b = system.bank
    emf, r = bank_model.thevenin(b, soc, temp_c)
    v_abs, v_float = bank_model.charge_voltages_v(b, temp_c)
    soc_now = np.broadcast_to(b.soc if soc is None else soc, np.shape(emf))
    stage = np.where(soc_now >= FLOAT_SOC, reg.FLOAT, reg.BULK) if stage is None else stage
    shape = np.broadcast_shapes(np.shape(emf), np.shape(v_abs), np.shape(stage))
    as_array = lambda a, kind=float: np.array(np.broadcast_to(a, shape), dtype=kind)  # noqa: E731
    return BankPoint(as_array(emf), as_array(r), as_array(soc_now), as_array(v_abs), as_array(v_float),
                     as_array(stage, np.int8), as_array(bank_model.max_charge_current_a(b, temp_c)),
                     b.chemistry.absorption_start_soc, None if cap_a is None else as_array(cap_a),
                     None if hold_a is None else as_array(hold_a), None if load_a is None else as_array(load_a))


@dataclass(frozen=True)
class KeyPoints:
    """The ideal array's key points (no cables, groups joined directly), arrays (N,).

    ``groups_p_mp_w`` is the sum of each group's own maximum power;
    ``open_circuit`` the wired array at open circuit where it comes free (else None).
    """

    v_oc: np.ndarray
    i_sc: np.ndarray
    v_mp: np.ndarray
    i_mp: np.ndarray
    p_mp: np.ndarray
    groups_p_mp_w: np.ndarray
    converged: np.ndarray
    open_circuit: Solution | None


@dataclass(frozen=True)
class Point:
    """The solved operating point of a chunk.

    Attributes
    ----------
    x_v, bus_v : the groups' diode voltages (N, G) and the bus voltage (N,) [V]
    duty : the factor that turns the array's (on-state) point into averages [-]
    converged : (N,)
    branch : (EMF [V], resistance [ohm]) of the load branch beyond the bus, for
        the residuals and the linear views; None for a maximum-power load
    r_to_load_ohm : resistance from the bus to where the load (or the
        controller's input) sits [ohm]
    charge, bank : the charging result and the bank, where there is a bank
    """

    x_v: np.ndarray
    bus_v: np.ndarray
    duty: np.ndarray
    converged: np.ndarray
    branch: tuple | None
    r_to_load_ohm: float
    charge: ChargeResult | None = None
    bank: BankPoint | None = None


def _key_points(system: System, net: Network) -> KeyPoints:
    """Key points of each module, and of the ideal array.

    One group: the array is the module scaled. Several: the groups paralleled
    directly are solved as a network, and each group's own MPP bounds what it
    can give.
    """
    n_s, n_p, wiring = system.n_series, system.n_parallel, system.wiring
    own = key_points(net.state)
    converged = own["converged"].all(axis=-1)
    groups_p_mp = _over_groups(n_s * n_p * own["p_mp"])
    if len(n_s) == 1:
        v_oc, i_sc = n_s[0] * own["v_oc"][:, 0], n_p[0] * own["i_sc"][:, 0]
        v_mp, i_mp = n_s[0] * own["v_mp"][:, 0], n_p[0] * own["i_mp"][:, 0]
        # With no current flowing, cables change nothing: the open circuit of
        # the wired array is the module's.
        return KeyPoints(v_oc, i_sc, v_mp, i_mp, groups_p_mp, groups_p_mp, converged,
                         Solution(own["v_oc"].copy(), v_oc, converged, 0))
    ideal = net.without_cables()
    oc_ideal = solve_thevenin(ideal, 0.0, np.inf)
    mp_ideal = solve_max_power(ideal, 0.0, open_circuit=oc_ideal, relative_tolerance=SOURCE_MPP_TOLERANCE)
    v_mp = mp_ideal.bus_v
    # A shorted bus with no cables shorts every module: the array's Isc is
    # the sum of the strings' own.
    i_sc = _over_groups(n_p * own["i_sc"])
    i_mp = _over_groups(evaluate_groups(ideal, mp_ideal.x_v).group_i_a)
    no_cables = not wiring.r_string_ohm.any() and not wiring.r_home_ohm.any()
    return KeyPoints(oc_ideal.bus_v, i_sc, v_mp, i_mp, v_mp * i_mp, groups_p_mp,
                     converged & oc_ideal.converged & mp_ideal.converged, oc_ideal if no_cables else None)


def _operating_point(system: System, net: Network, keys: KeyPoints, soc, bank_temp_c, history=None) -> Point:
    """The exact operating point: into the load, or through the controller into the bank."""
    wiring = system.wiring
    branch = _load_branch(system)
    if system.bank is None:
        r_load_side = wiring.r_load_side_ohm
        sol = solve_max_power(net, r_load_side, open_circuit=keys.open_circuit) if branch is None else \
            solve_thevenin(net, branch[0], branch[1])
        return Point(sol.x_v, sol.bus_v, np.ones(len(sol.bus_v)), sol.converged, branch, r_load_side)
    bank_pt = bank_point(system, soc, bank_temp_c, history)
    charge = solve_charging(net, system.controller, bank_pt, wiring.r_feeder_ohm, wiring.r_bank_ohm)
    # For the linear views, the direct and PWM branch is the bank behind its
    # cables and diode; a tracker's input looks like a resistor.
    if not system.controller.tracks:
        branch = (bank_pt.emf_v + system.controller.diode_drop_v, bank_pt.r_ohm + wiring.r_load_side_ohm)
    return Point(charge.x_v, charge.bus_v, charge.duty, charge.converged, branch, wiring.r_feeder_ohm, charge,
                 bank_pt)


@dataclass(frozen=True)
class Accounts:
    """Every watt of the point, the array's own quantities, and the residuals of the laws (arrays (N,))."""

    groups: object  # network.GroupPoint
    v_string: np.ndarray
    i: np.ndarray
    generated_w: np.ndarray
    string_loss_w: np.ndarray
    home_run_loss_w: np.ndarray
    feeder_loss_w: np.ndarray
    bank_loss_w: np.ndarray
    cable_loss_w: np.ndarray
    controller_loss_w: np.ndarray
    delivered_w: np.ndarray
    load_v: np.ndarray
    load_side_v: np.ndarray
    kvl_residual_v: np.ndarray
    kcl_residual_a: np.ndarray
    energy_balance_residual: np.ndarray


def _accounting(system: System, net: Network, point: Point) -> Accounts:
    """Generated = cable losses + controller loss + delivered, each part, and the residuals."""
    wiring, n_s, n_p = system.wiring, system.n_series, system.n_parallel
    rated_w = float((n_s * n_p).sum()) * float(system.module.fit.stc["p_mp"])
    v, duty, charge = point.bus_v, point.duty, point.charge
    pt = evaluate_groups(net, point.x_v)
    j = pt.group_i_a
    i = _over_groups(j)
    v_string = n_s * pt.module_v
    # PWM in regulation switches the array: energies are duty-weighted
    # averages of the on-state, at which the array's point is reported.
    generated = duty * _over_groups(v_string * j)
    string_loss = duty * _over_groups(n_p * (j / n_p) ** 2 * wiring.r_string_ohm)
    home_loss = duty * _over_groups(j**2 * wiring.r_home_ohm)
    feeder_loss = duty * i**2 * wiring.r_feeder_ohm
    if charge is None:
        bank_loss = i**2 * wiring.r_bank_ohm
        v_load = v - i * point.r_to_load_ohm
        delivered = v_load * i
        controller_loss = np.zeros_like(i)
        load_side_v = v_load
    else:
        bank_loss = charge.bank_cable_loss_w
        controller_loss = charge.controller_loss_w
        delivered = charge.stored_w + charge.bank_internal_loss_w
        with np.errstate(divide="ignore", invalid="ignore"):
            on_current = np.where(duty > 0, charge.charge_current_a / duty, 0.0)
        v_load = point.bank.emf_v + on_current * point.bank.r_ohm
        load_side_v = charge.input_v
    cable_loss = string_loss + home_loss + feeder_loss + bank_loss

    # Residuals of the laws the solution must satisfy.
    kvl = np.abs(pt.bus_v - v[:, None]).max(axis=-1)
    if point.branch is None:
        kcl = np.zeros_like(i)
    else:
        e_l, r_l = point.branch
        with np.errstate(divide="ignore", invalid="ignore"):
            stiff = r_l < 1e-12
            expected_i = np.where(stiff, i, (v - e_l) / np.where(stiff, 1.0, r_l))
        kcl = np.abs(i - expected_i)
        if charge is not None:
            kcl = np.where(charge.stage == reg.IDLE, 0.0, kcl)  # a blocking diode or open switch
    # Relative to everything flowing, not to the net: mismatched groups can
    # circulate far more power among themselves than reaches the load.
    # The diode-voltage term n_s |x| |J| bounds the rounding of each string
    # voltage (x - I R_s cancels near short circuit); a thousandth of the
    # array's STC power keeps an open circuit's stray picoamps, or a night,
    # from reading as a broken balance.
    scale = duty * _over_groups(n_s * (np.abs(pt.x_v) + np.abs(pt.module_i_a * net.state.r_s_ohm)) * np.abs(j)) \
        + cable_loss + np.abs(controller_loss) + np.abs(delivered) + 1e-3 * rated_w
    balance = (generated - cable_loss - controller_loss - delivered) / scale
    return Accounts(pt, v_string, i, generated, string_loss, home_loss, feeder_loss, bank_loss, cable_loss,
                    controller_loss, delivered, v_load, load_side_v, kvl, kcl, balance)


def _linear_views(system: System, net: Network, point: Point, acc: Accounts) -> dict:
    """Thevenin/Norton equivalents of each group at its string terminals, of the
    array at the bus, of the array as the load sees it, and superposition at the bus."""
    n_s, n_p = system.n_series, system.n_parallel
    v, i, pt, j = point.bus_v, acc.i, acc.groups, acc.groups.group_i_a
    g_string = -n_p * pt.di_dx / (n_s * (1.0 - pt.di_dx * net.state.r_s_ohm))
    group_eq = linear.linearise(acc.v_string, j, g_string)
    g_bus = pt.conductance_s
    array_eq = linear.linearise(v, i, _over_groups(g_bus))
    r_seen = array_eq.r_ohm + point.r_to_load_ohm
    # Superposition at the bus: each group's Thevenin as seen from the bus,
    # and the load branch (for a tracker or a maximum-power load, its static resistance).
    with np.errstate(divide="ignore", invalid="ignore"):
        e_group_bus = pt.bus_v + j / g_bus
        if point.branch is None:
            e_l = np.zeros_like(v)
            r_l = np.where(i != 0.0, acc.load_side_v / i, np.inf) + point.r_to_load_ohm
        else:
            e_l, r_l = np.broadcast_to(point.branch[0], v.shape), np.broadcast_to(point.branch[1], v.shape)
        shares, load_share, share_total = linear.superposition(e_group_bus, 1.0 / g_bus, e_l, r_l)
    out = {
        "thevenin_e_v": array_eq.e_v, "thevenin_r_ohm": array_eq.r_ohm, "norton_i_a": array_eq.i_a,
        "matching_ratio": linear.matching_ratio(v, i, array_eq.r_ohm),
        "load_side_r_ohm": r_seen, "load_side_matching_ratio": linear.matching_ratio(acc.load_side_v, i, r_seen),
        "share_load_emf_a": load_share, "superposition_total_a": share_total,
    }
    for k, g in enumerate(system.groups):
        pre = f"group_{g.name}_"
        out.update({
            pre + "thevenin_e_v": group_eq.e_v[:, k], pre + "thevenin_r_ohm": group_eq.r_ohm[:, k],
            pre + "matching_ratio": linear.matching_ratio(acc.v_string[:, k], j[:, k], group_eq.r_ohm[:, k]),
            f"share_{g.name}_a": shares[:, k],
        })
    return out


def _drift(net: Network, point: Point, acc: Accounts, views: dict, check: bool) -> tuple[dict, np.ndarray]:
    """How far the linear model drifts from the curve at +/- 10 % of V; and where those solves converged."""
    v, i = point.bus_v, acc.i
    out, converged = {}, np.ones(v.shape, bool)
    for tag, factor in (("low", 1.0 - DRIFT_FRACTION), ("high", 1.0 + DRIFT_FRACTION)):
        if not check:
            out.update({f"drift_{tag}_i_exact_a": np.full_like(v, np.nan), f"drift_{tag}_error": np.full_like(v, np.nan)})
            continue
        v_d = v * factor
        sol_d = solve_at_bus_voltage(net, v_d, point.x_v, relative_tolerance=DRIFT_TOLERANCE)
        converged &= sol_d.converged
        i_exact = _over_groups(evaluate_groups(net, sol_d.x_v).group_i_a)
        i_lin = (views["thevenin_e_v"] - v_d) / views["thevenin_r_ohm"]
        with np.errstate(divide="ignore", invalid="ignore"):
            # A share of the operating current; undefined where next to none flows (open circuit, an idle
            # controller): a solver's 1e-13 A would turn any difference into an absurd percentage.
            flows = np.abs(i) > 1e-6 * np.maximum(np.abs(i_exact), np.abs(i_lin))
            err = np.where(flows, (i_lin - i_exact) / np.abs(i), np.nan)
        out.update({f"drift_{tag}_i_exact_a": i_exact, f"drift_{tag}_error": err})
    return out, converged


def _solve_chunk(system: System, g_w_m2, t_c, soc=None, bank_temp_c=None, drift_check: bool = True,
                 history=None) -> dict:
    """All outputs for one chunk of conditions, as a dict of 1-D arrays."""
    if system.several_controllers:
        return _solve_shared_chunk(system, g_w_m2, t_c, soc, bank_temp_c, drift_check, history)
    state = parameters_at(system.module.parameters, g_w_m2, t_c)
    net = Network(state, system.n_series, system.n_parallel, system.wiring.r_string_ohm, system.wiring.r_home_ohm)
    keys = _key_points(system, net)
    point = _operating_point(system, net, keys, soc, bank_temp_c, history)
    acc = _accounting(system, net, point)
    views = _linear_views(system, net, point, acc)
    drift, drift_converged = _drift(net, point, acc, views, drift_check)
    return _columns(system, g_w_m2, t_c, keys, point, acc, views, drift,
                    keys.converged & point.converged & drift_converged, soc, bank_temp_c)


#: Each controller's own columns when several share the bank, as ``ctrl_<name>_<key>``.
CONTROLLER_KEYS = ("charge_current_a", "stage", "limit", "input_v", "curtailed_w", "loss_w", "generated_w", "v",
                   "i_a", "duty")
CONTROLLER_PREFIX = "ctrl_"
# A part's column for each of a controller's own keys.
_PART_KEY = {"input_v": "controller_input_v", "loss_w": "controller_loss_w", "i_a": "i"}
# Columns that add up over the controllers' parts.
_SUMMED = ("i", "p", "generated_w", "string_loss_w", "home_run_loss_w", "feeder_loss_w", "controller_loss_w",
           "curtailed_w")
# Columns of one bus, which several controllers do not share: each has its own (``ctrl_<name>_v``).
_NO_COMMON_BUS = ("v", "thevenin_e_v", "thevenin_r_ohm", "norton_i_a", "matching_ratio", "load_side_r_ohm",
                  "load_side_matching_ratio", "share_load_emf_a", "superposition_total_a", "drift_low_i_exact_a",
                  "drift_low_error", "drift_high_i_exact_a", "drift_high_error", "duty", "controller_input_v")


def controller_column(name: str, key: str) -> str:
    """The column of one controller's own ``key`` (one of :data:`CONTROLLER_KEYS`) with several controllers."""
    return f"{CONTROLLER_PREFIX}{name}_{key}"


def _solve_shared_chunk(system: System, g_w_m2, t_c, soc, bank_temp_c, drift_check, history) -> dict:
    """One chunk of a system whose groups share several controllers into one bank (:mod:`pvsource.sharing`).

    Each controller's part (:meth:`System.parts`) is solved as its own array
    and accounted with its own books; the bank's side is split once for all
    (:class:`pvsource.sharing.SharedCharge`), and the columns add up.
    """
    from pvsource.sharing import solve_shared

    parts = system.parts()
    index = {name: k for k, name in enumerate(system.group_names)}
    cols = [np.array([index[n] for n in part.group_names]) for part in parts]
    state = parameters_at(system.module.parameters, g_w_m2, t_c)
    whole = Network(state, system.n_series, system.n_parallel, system.wiring.r_string_ohm, system.wiring.r_home_ohm)
    keys = _key_points(system, whole)
    nets = [Network(parameters_at(system.module.parameters, g_w_m2[:, c], t_c[:, c]), part.n_series,
                    part.n_parallel, part.wiring.r_string_ohm, part.wiring.r_home_ohm) for part, c in zip(parts, cols)]
    n = len(g_w_m2)
    bank_pt = bank_point(system, np.broadcast_to(system.bank.soc if soc is None else soc, (n,)), bank_temp_c,
                         history)
    r_interconnect = sum(r.loop_resistance_ohm for r in system.cables if r.role == "interconnect")
    shared = solve_shared(nets, [part.controller for part in parts], bank_pt,
                          [part.wiring.r_feeder_ohm for part in parts], [part.wiring.r_bank_ohm for part in parts],
                          r_interconnect)
    out, residual = {}, np.zeros(len(bank_pt.emf_v))
    converged = keys.converged & shared.converged
    for part, c, net, charge, seen in zip(parts, cols, nets, shared.charges, shared.banks):
        ctrl = part.controller
        branch = None if ctrl.tracks else (seen.emf_v + ctrl.diode_drop_v, seen.r_ohm + part.wiring.r_load_side_ohm)
        point = Point(charge.x_v, charge.bus_v, charge.duty, charge.converged, branch, part.wiring.r_feeder_ohm,
                      charge, seen)
        acc = _accounting(part, net, point)
        views = _linear_views(part, net, point, acc)
        drift, drift_converged = _drift(net, point, acc, views, drift_check)
        own = _columns(part, g_w_m2[:, c], t_c[:, c], _key_points(part, net), point, acc, views, drift,
                       point.converged & drift_converged, soc, bank_temp_c)
        converged &= own["converged"]
        residual = np.maximum(residual, np.abs(own["energy_balance_residual"]))
        for key in CONTROLLER_KEYS:
            out[controller_column(ctrl.name, key)] = own[_PART_KEY.get(key, key)]
        for key in _SUMMED:
            out[key] = out.get(key, 0.0) + own[key]
        out["bank_loss_w"] = out.get("bank_loss_w", 0.0) + own["bank_loss_w"]
        out["kvl_residual_v"] = np.maximum(out.get("kvl_residual_v", 0.0), own["kvl_residual_v"])
        out["kcl_residual_a"] = np.maximum(out.get("kcl_residual_a", 0.0), own["kcl_residual_a"])
        out.update({k: a for k, a in own.items() if k.startswith(("group_", "share_")) and k != "share_load_emf_a"})
    out["bank_loss_w"] = out["bank_loss_w"] + shared.shared_cable_loss_w
    delivered = shared.stored_w + shared.bank_internal_loss_w
    cable = out["string_loss_w"] + out["home_run_loss_w"] + out["feeder_loss_w"] + out["bank_loss_w"]
    generated = out["generated_w"]
    rated_w = float((system.n_series * system.n_parallel).sum()) * float(system.module.fit.stc["p_mp"])
    # Each part's books close to their own residual; splitting the bank's
    # side anew is an identity, so only its rounding is added here.
    split = (generated - cable - out["controller_loss_w"] - delivered) / (
        np.abs(generated) + cable + np.abs(out["controller_loss_w"]) + np.abs(delivered) + 1e-3 * rated_w)
    with np.errstate(divide="ignore", invalid="ignore"):
        efficiency = np.where(generated > 0.0, delivered / generated, np.nan)
    nan = np.full(len(residual), np.nan)
    out.update({
        "source_v_oc": keys.v_oc, "source_i_sc": keys.i_sc, "source_v_mp": keys.v_mp,
        "source_i_mp": keys.i_mp, "source_p_mp": keys.p_mp, "groups_p_mp_w": keys.groups_p_mp_w,
        "parallel_mismatch_w": keys.groups_p_mp_w - keys.p_mp, **{k: nan for k in _NO_COMMON_BUS},
        "load_v": bank_pt.emf_v + shared.charge_current_a * bank_pt.r_ohm, "delivered_w": delivered,
        "cable_loss_w": cable, "efficiency": efficiency, "mpp_shortfall_w": keys.groups_p_mp_w - generated,
        "energy_balance_residual": residual + np.abs(split), "converged": converged,
        "charge_current_a": shared.charge_current_a, "stored_w": shared.stored_w,
        "bank_internal_loss_w": shared.bank_internal_loss_w, "bank_emf_v": bank_pt.emf_v,
        "bank_r_ohm": bank_pt.r_ohm, "bank_target_v": bank_pt.target_v, "bank_soc": bank_pt.soc,
        "bank_temp_c": np.broadcast_to(system.bank.temp_c if bank_temp_c is None else bank_temp_c,
                                       residual.shape).astype(float),
        "bank_max_charge_a": bank_pt.max_charge_a, "stage": shared.stage, "limit": shared.limit,
    })
    return out


def _columns(system, g_w_m2, t_c, keys: KeyPoints, point: Point, acc: Accounts, views: dict, drift: dict,
             converged, soc, bank_temp_c) -> dict:
    """The chunk's results as the columns of :func:`operating_points`."""
    v, i = point.bus_v, acc.i
    with np.errstate(divide="ignore", invalid="ignore"):
        efficiency = np.where(acc.generated_w > 0.0, acc.delivered_w / acc.generated_w, np.nan)
    out = {
        "source_v_oc": keys.v_oc, "source_i_sc": keys.i_sc, "source_v_mp": keys.v_mp,
        "source_i_mp": keys.i_mp, "source_p_mp": keys.p_mp, "groups_p_mp_w": keys.groups_p_mp_w,
        "parallel_mismatch_w": keys.groups_p_mp_w - keys.p_mp,
        "v": v, "i": i, "p": v * i,
        **{k: views[k] for k in ("thevenin_e_v", "thevenin_r_ohm", "norton_i_a", "matching_ratio")},
        "load_v": acc.load_v, "delivered_w": acc.delivered_w, "generated_w": acc.generated_w,
        "cable_loss_w": acc.cable_loss_w, "string_loss_w": acc.string_loss_w, "home_run_loss_w": acc.home_run_loss_w,
        "feeder_loss_w": acc.feeder_loss_w, "bank_loss_w": acc.bank_loss_w, "efficiency": efficiency,
        "mpp_shortfall_w": keys.groups_p_mp_w - acc.generated_w,
        **{k: views[k] for k in ("load_side_r_ohm", "load_side_matching_ratio", "share_load_emf_a",
                                 "superposition_total_a")},
        **drift,
        "controller_loss_w": acc.controller_loss_w,
        "kvl_residual_v": acc.kvl_residual_v, "kcl_residual_a": acc.kcl_residual_a,
        "energy_balance_residual": acc.energy_balance_residual,
        "converged": converged,
    }
    charge, bank_pt = point.charge, point.bank
    if charge is not None:
        out.update({
            "charge_current_a": charge.charge_current_a, "stored_w": charge.stored_w,
            "curtailed_w": charge.curtailed_w, "bank_internal_loss_w": charge.bank_internal_loss_w,
            "duty": point.duty, "controller_input_v": charge.input_v, "bank_emf_v": bank_pt.emf_v,
            "bank_r_ohm": bank_pt.r_ohm, "bank_target_v": bank_pt.target_v,
            "bank_soc": bank_pt.soc,
            "bank_temp_c": np.broadcast_to(system.bank.temp_c if bank_temp_c is None else bank_temp_c,
                                           v.shape).astype(float),
            "bank_max_charge_a": bank_pt.max_charge_a,
            "stage": charge.stage, "limit": charge.limit,
        })
    for k, g in enumerate(system.groups):
        pre = f"group_{g.name}_"
        out.update({
            pre + "irradiance_w_m2": g_w_m2[:, k], pre + "cell_temp_c": t_c[:, k],
            pre + "v": acc.v_string[:, k], pre + "i_a": acc.groups.group_i_a[:, k],
            pre + "p_w": acc.v_string[:, k] * acc.groups.group_i_a[:, k],
        })
        out.update({key: views[key] for key in (pre + "thevenin_e_v", pre + "thevenin_r_ohm",
                                                 pre + "matching_ratio", f"share_{g.name}_a")})
    return out


def _frame_from_chunks(system: System, g, t, chunk_size: int, soc=None, bank_temp_c=None,
                       drift_check: bool = True, history=None) -> pd.DataFrame:
    """Solve chunk by chunk into one preallocated column-major block.

    One block of the float columns, filled in place, becomes the DataFrame
    without a copy: at a year of minutes this saves about a second of memory
    traffic. Flags and codes (``converged``, ``stage``, ``limit``) follow;
    stage and limit become categorical columns: their codes, with the words
    (:data:`~pvsource.regulation.STAGE_WORDS`, ``LIMIT_WORDS``) as categories.
    """
    n = len(g)
    block = columns = others = None
    for start in range(0, n, chunk_size):
        sl = slice(start, start + chunk_size)
        part = _solve_chunk(system, g[sl], t[sl], None if soc is None else soc[sl],
                            None if bank_temp_c is None else bank_temp_c[sl], drift_check,
                            None if history is None else {k: a[sl] for k, a in history.items()})
        if block is None:
            columns = [k for k, a in part.items() if np.asarray(a).dtype.kind == "f"]
            others = {k: np.empty(n, np.asarray(a).dtype) for k, a in part.items() if k not in columns}
            block = np.empty((n, len(columns)), order="F")
        stop = start + len(part["v"])
        for k, name in enumerate(columns):
            block[start:stop, k] = part[name]
        for name, arr in others.items():
            arr[start:stop] = part[name]
    frame = pd.DataFrame(block, columns=columns, copy=False)
    words = {"stage": reg.STAGE_WORDS, "limit": reg.LIMIT_WORDS}
    for name, arr in others.items():
        kind = name.rsplit("_", 1)[-1] if name.startswith(CONTROLLER_PREFIX) else name
        frame[name] = pd.Categorical.from_codes(arr, words[kind]) if kind in words else arr
    return frame


def operating_points(system: System, irradiance_w_m2=None, cell_temp_c=None, *, soc=None, bank_temp_c=None,
                     charge_cap_a=None, hold_a=None, stage=None, load_a=None, drift_check: bool = True,
                     on_failure: str = "raise",
                     chunk_size: int = CHUNK_SIZE) -> pd.DataFrame:
    """Exact operating points, linearised equivalents and accounting per condition.

    Parameters
    ----------
    system : System
    irradiance_w_m2 : float, array (N,), array (N, G) or dict, optional
        Effective irradiance on each group [W/m2]. A dict maps group names to
        values; groups it leaves out, and a ``None`` argument, take the value
        from the system file.
    cell_temp_c : same forms, optional
        Cell temperature [degC].
    soc, bank_temp_c : float or array (N,), optional
        The bank's state of charge [-] and temperature [degC], where the
        system has a bank; by default the system file's.
    charge_cap_a : array (N,), optional
        A season study's cap on the charge current: what still fits in the
        bank within each step [A]; infinite where it does not bind.
    hold_a : array (N,), optional
        A season study's constant-voltage current averaged over each step,
        where its time loop integrated the taper [A]; infinite elsewhere.
    stage : array of int (N,), optional
        The controller's stage as each step begins (a season study's
        stages, codes of :mod:`pvsource.regulation`); by default float
        where the state of charge is at least
        :data:`~pvsource.charging.FLOAT_SOC`, else bulk.
    load_a : array (N,), optional
        A season study's load current at the bank in each step [A]: the
        controller may carry it on top of what the bank's own limits let
        into the bank (:func:`pvsource.regulation.regulate`); none by default.
    drift_check : bool
        Solve the exact curve at +/-10 % of the operating voltage to show how
        far the linear model holds (two extra solves); off, those columns are NaN.
    on_failure : {"raise", "flag"}
        What to do if the solver does not converge for some conditions:
        raise :class:`~pvsource.errors.ConvergenceError`, or return those rows
        with ``converged`` False and NaN results.
    chunk_size : int
        Conditions solved together; tuned for cache, not for results.

    Returns
    -------
    pandas.DataFrame
        A row per condition; see the module docstring for the conventions and
        DEVELOPERS.md for the columns.

    Raises
    ------
    InputError
        For conditions outside physical ranges.
    ConvergenceError
        If ``on_failure="raise"`` and some condition did not converge.
    PhysicsGuardError
        If a solution breaks the energy balance (never expected).
    """
    if on_failure not in ("raise", "flag"):
        raise InputError("on_failure", None, f"expected 'raise' or 'flag', got {on_failure!r}")
    if system.several_controllers and system.bank is None:
        raise InputError(system.source or "system", "[[controller]]",
                         "several controllers without a [bank] are input limits for `check` only; "
                         "give the [bank] they charge to solve an operating point")
    g = _condition_array(system, irradiance_w_m2, "irradiance_w_m2", "irradiance_w_m2", IRRADIANCE_RANGE_W_M2,
                         "W/m2")
    t = _condition_array(system, cell_temp_c, "cell_temp_c", "cell_temp_c", CELL_TEMP_RANGE_C, "degC")
    if isinstance(chunk_size, bool) or not isinstance(chunk_size, (int, np.integer)) or chunk_size < 1:
        raise InputError("chunk_size", None, f"expected a whole number of conditions, 1 or more, got {chunk_size!r}")
    try:
        g, t = np.broadcast_arrays(g, t)
    except ValueError:
        raise InputError("cell_temp_c", None, f"has {len(t)} conditions but irradiance_w_m2 has {len(g)}; "
                                              "give the same number, or a scalar") from None
    if len(g) == 0:
        raise InputError("irradiance_w_m2", None, "no conditions given (an empty array)")
    if len(g) == 1 and system.bank is not None:
        # One set of array conditions against many bank states.
        n_bank = max(np.size(soc) if soc is not None else 1, np.size(bank_temp_c) if bank_temp_c is not None else 1)
        g, t = np.repeat(g, n_bank, axis=0), np.repeat(t, n_bank, axis=0)
    soc = _bank_condition(system, soc, "soc", (0.0, 1.0), len(g))
    bank_temp_c = _bank_condition(system, bank_temp_c, "bank_temp_c", (-40.0, 70.0), len(g))
    history = {}
    for name, value in (("cap_a", charge_cap_a), ("hold_a", hold_a), ("load_a", load_a)):
        if value is not None:
            history[name] = np.array(np.broadcast_to(np.asarray(value, float), (len(g),)))
            if np.any(np.isnan(history[name]) | (history[name] < 0)):
                raise InputError("charge_cap_a" if name == "cap_a" else name, None,
                                 "expected currents of 0 A or more (inf where no cap)")
    if stage is not None:
        history["stage"] = np.array(np.broadcast_to(np.asarray(stage, np.int8), (len(g),)))
    frame = _frame_from_chunks(system, g, t, chunk_size, soc, bank_temp_c, drift_check, history or None)

    bad = ~frame["converged"].to_numpy()
    if bad.any():
        first = int(np.flatnonzero(bad)[0])
        if on_failure == "raise":
            raise ConvergenceError(
                f"the operating point did not converge for {int(bad.sum())} of {len(frame)} conditions "
                f"(first: condition {first}, irradiance {g[first].tolist()} W/m2, cell temperature "
                f"{t[first].tolist()} degC)")
        numeric = [c for c in frame.columns if c != "converged" and not c.endswith(("irradiance_w_m2", "cell_temp_c"))]
        frame.loc[bad, numeric] = np.nan
    ok = ~bad
    worst = np.nanmax(np.abs(frame["energy_balance_residual"].to_numpy()[ok]), initial=0.0)
    if worst > ENERGY_BALANCE_TOLERANCE:
        raise PhysicsGuardError(f"energy balance broken by {worst:.2e} (relative); result withheld")
    eff = frame["efficiency"].to_numpy()[ok]
    if np.any(eff > 1.0 + ENERGY_BALANCE_TOLERANCE):
        raise PhysicsGuardError("an efficiency above 1 was computed; result withheld")
    if system.bank is not None and system.controller is not None and not system.controller.tracks:
        # Through a switch or a wire the bank cannot get more than the array's short-circuit current.
        over = frame["charge_current_a"].to_numpy()[ok] > frame["source_i_sc"].to_numpy()[ok] * (1 + 1e-9) + 1e-12
        if np.any(over):
            raise PhysicsGuardError("a charge current above the array's short-circuit current was computed "
                                    "through a direct or PWM connection; result withheld")
    if "load_a" in history:
        # The loads' current beside the bank's charge (the bank's own current is charge_current_a less it):
        # the alerts on the bank's rate and voltage judge the bank's own.
        frame["bank_load_a"] = history["load_a"]
    # The hazards each point implies, from its columns (pvsource.alerts).
    frame["alerts"] = alert_codes(system, frame)
    return frame


def _clean(value):
    """A JSON-safe float: NaN and infinities become None."""
    value = float(value)
    return value if np.isfinite(value) else None


def point_record(system: System, row: pd.Series) -> dict:
    """One operating point as a nested, JSON-ready dict (SI units, NaN as None).

    The top-level keys ``source``, ``operating_point``, ``thevenin``,
    ``norton``, ``matching_ratio``, ``delivered_w``, ``cable_loss_w``,
    ``efficiency`` and ``mpp_shortfall_w`` are the stable interface; the rest
    add detail.
    """
    r = {k: (bool(v) if k == "converged" else v if isinstance(v, str) else _clean(v)) for k, v in row.items()}
    groups = []
    for g in system.groups:
        pre = f"group_{g.name}_"
        groups.append({
            "name": g.name, "modules_per_string": g.modules_per_string, "strings": g.strings,
            "irradiance_w_m2": r[pre + "irradiance_w_m2"], "cell_temp_c": r[pre + "cell_temp_c"],
            "v": r[pre + "v"], "i": r[pre + "i_a"], "p": r[pre + "p_w"],
            "thevenin": {"e_v": r[pre + "thevenin_e_v"], "r_ohm": r[pre + "thevenin_r_ohm"]},
            "matching_ratio": r[pre + "matching_ratio"],
            "load_current_share_a": r[f"share_{g.name}_a"],
        })
    drift = {}
    for tag, factor in (("low", 1.0 - DRIFT_FRACTION), ("high", 1.0 + DRIFT_FRACTION)):
        v_d = None if r["v"] is None else r["v"] * factor
        i_lin = None if v_d is None or r["thevenin_r_ohm"] is None else \
            (r["thevenin_e_v"] - v_d) / r["thevenin_r_ohm"]
        drift[tag] = {"v": v_d, "i_exact_a": r[f"drift_{tag}_i_exact_a"], "i_linear_a": _clean(i_lin)
                      if i_lin is not None else None, "error_fraction_of_i": r[f"drift_{tag}_error"]}
    rec = {
        "source": {k: r[f"source_{k}"] for k in ("v_oc", "i_sc", "v_mp", "i_mp", "p_mp")},
        "operating_point": {"v": r["v"], "i": r["i"], "p": r["p"]},
        "thevenin": {"e_v": r["thevenin_e_v"], "r_ohm": r["thevenin_r_ohm"]},
        "norton": {"i_a": r["norton_i_a"], "r_ohm": r["thevenin_r_ohm"]},
        "matching_ratio": r["matching_ratio"],
        "delivered_w": r["delivered_w"],
        "cable_loss_w": r["cable_loss_w"],
        "efficiency": r["efficiency"],
        "mpp_shortfall_w": r["mpp_shortfall_w"],
        "generated_w": r["generated_w"],
        "groups_p_mp_w": r["groups_p_mp_w"],
        "parallel_mismatch_w": r["parallel_mismatch_w"],
        "losses_w": {"array_cables": r["string_loss_w"] + r["home_run_loss_w"] + r["feeder_loss_w"],
                     "string_leads": r["string_loss_w"], "home_runs": r["home_run_loss_w"],
                     "feeder": r["feeder_loss_w"], "controller": r["controller_loss_w"],
                     "bank_cables": r["bank_loss_w"], "bank_internal": r.get("bank_internal_loss_w") or 0.0},
        "load": {"kind": system.load.kind, "v": r["load_v"], "i": r["i"]},
        "load_side": {"e_v": r["thevenin_e_v"], "r_ohm": r["load_side_r_ohm"],
                      "matching_ratio": r["load_side_matching_ratio"]},
        "linear_drift": drift,
        "superposition": {"groups_a": {g["name"]: g["load_current_share_a"] for g in groups},
                          "load_emf_a": r["share_load_emf_a"], "total_a": r["superposition_total_a"]},
        "groups": groups,
        "residuals": {"kvl_v": r["kvl_residual_v"], "kcl_a": r["kcl_residual_a"],
                      "energy_balance": r["energy_balance_residual"]},
        "converged": r["converged"],
    }
    if system.bank is not None:
        rec["load"] = {"kind": f"{system.bank.chemistry.key} bank through {controllers_in_words(system)}",
                       "v": r["load_v"], "i": r["charge_current_a"]}
        rec.update({
            "charge_current_a": r["charge_current_a"], "stage": row["stage"], "limit": row["limit"],
            "stored_w": r["stored_w"], "curtailed_w": r["curtailed_w"],
            "controllers": controller_records(system, row),
            "bank": {"chemistry": system.bank.chemistry.key, "emf_v": r["bank_emf_v"], "r_ohm": r["bank_r_ohm"],
                     "target_v": r["bank_target_v"], "max_charge_a": r["bank_max_charge_a"],
                     "soc": r["bank_soc"], "temp_c": r["bank_temp_c"]},
        })
        if not system.several_controllers:
            rec["controller"] = {"kind": system.controller.kind, "input_v": r["controller_input_v"], "duty": r["duty"]}
    return rec


def controllers_in_words(system: System) -> str:
    """``a mppt controller``, or ``2 controllers (east tracker: mppt, west tracker: mppt)``."""
    if not system.several_controllers:
        return f"a {system.controller.kind} controller"
    return f"{len(system.controllers)} controllers (" + ", ".join(
        f"{c.name}: {c.controller.kind}" for c in system.controllers) + ")"


def controller_records(system: System, row: pd.Series) -> list[dict]:
    """Each controller at one operating point: what it charges, its stage and limit, its input, its losses.

    With one controller these are the row's own columns; with several, each
    controller's ``ctrl_<name>_...`` columns. The charge currents add up to
    the row's ``charge_current_a``.
    """
    out = []
    for assigned in system.controllers:
        if system.several_controllers:
            get = lambda key, a=assigned: row[controller_column(a.name, key)]  # noqa: E731
        else:
            own = {"input_v": "controller_input_v", "loss_w": "controller_loss_w", "i_a": "i"}
            get = lambda key, own=own: row[own.get(key, key)]  # noqa: E731
        out.append({"name": assigned.name, "kind": assigned.controller.kind, "groups": list(assigned.groups),
                    "charge_current_a": _clean(get("charge_current_a")), "stage": str(get("stage")),
                    "limit": str(get("limit")), "input_v": _clean(get("input_v")),
                    "curtailed_w": _clean(get("curtailed_w")), "loss_w": _clean(get("loss_w")),
                    "generated_w": _clean(get("generated_w")), "bus_v": _clean(get("v")),
                    "array_i_a": _clean(get("i_a")), "duty": _clean(get("duty"))})
    return out
