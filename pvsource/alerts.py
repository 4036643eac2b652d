"""Alerts: the hazards an operating point implies, evaluated on every row.

A design check (:mod:`pvsource.checks`) asks whether a design survives its
worst case; an alert asks whether *this* point, at its own irradiance, cell
and bank temperature and state of charge, puts something outside its rating.
Each alert is a pure, vectorised comparison of columns of
:func:`pvsource.operating.operating_points` with a limit of the
:class:`~pvsource.system.System`, and never reads a setting that does not
bear on it (the over-voltage alert does not look at the output limit, the
cold-charge alert does not look at whether the model let the bank charge).

Per row the alerts are one small integer, a bit per alert (:data:`ALERTS`,
:func:`alert_codes`); names, values, limits, units and messages are made at
the display edge (:func:`point_alerts`, :func:`alert_hours`).

The alerts and their basis:

- ``pv_input_over_max_v``: the array's open-circuit voltage at the point's
  irradiance and cell temperature above the controller's ``max_input_v``.
  A controller sees Voc at every start-up and whenever it stops drawing
  current (a full bank, an output limit), so the rating must hold whatever
  the point's operating voltage is (NEC 690.7(A): the maximum PV system
  voltage is the open-circuit voltage at the cells' temperature).
- ``charge_below_min_temp``: the bank colder than its chemistry's minimum
  charging temperature while the array could charge it (its Voc above what
  the controller needs to start), whether or not the modelled controller
  withheld the charge: a controller without a temperature sensor would not
  (common practice: lithium plating below 0 degC; frozen lead-acid).
- ``charge_over_bank_rate``: the bank's own charge current above the
  chemistry's maximum charge rate times the capacity (its preset, with its
  source). In a season the loads' current at the bank (``bank_load_a``) is
  not the bank's: the controller may carry it on top.
- ``pv_input_over_max_isc``: the array's short-circuit current at the
  point's conditions above the controller's ``max_input_isc_a``: the current
  its input must carry when it shorts the array (NEC 690.8(A): the circuit
  current is the array's Isc).
- ``bank_over_absorption_v``: the bank's terminal voltage, E + I R at the
  bank's own charge current, above its absorption voltage at its temperature. A
  regulating controller never allows it; a direct connection does
  (IEEE Std 1361: overcharge gasses and dries lead-acid; lithium cells are
  damaged above their charge voltage).
- ``cable_over_ampacity``: a run's current above its ampacity where it has
  one (:func:`pvsource.wiring.run_ampacity`, the tables of
  :mod:`pvsource.ampacity` or the run's ``ampacity_a``): the smaller of the
  corrected ampacity and the termination's value, times the conductors in
  parallel (NEC 310.14, 110.14(C); IEC 60364-5-52). PWM's switched current
  heats as its RMS, ``I_on * sqrt(duty)``.
- ``string_reverse_over_fuse``: current driven backwards into a string
  (mismatched groups in parallel, or a bank through a direct connection)
  above the module's maximum series fuse rating, the reverse current the
  module is rated to withstand (IEC 61730-2 reverse current overload test;
  NEC 690.9).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from pvsource.system import System


@dataclass(frozen=True)
class AlertKind:
    """One alert: its stable name, its bit in the per-row code, and its words.

    Attributes
    ----------
    name : str
        Stable identifier, used in JSON and the season summary.
    bit : int
        Its bit in :func:`alert_codes`.
    unit : str
        Unit of its value and limit.
    label : str
        A short phrase for tables and reports.
    sense : str
        ``"max"`` (the value must not exceed the limit) or ``"min"``.
    basis : str
        The standard, or "common practice", it rests on.
    about : str
        The JSON key naming what it is about where there can be several
        (``run``, ``controller``); "" where there is one.
    """

    name: str
    bit: int
    unit: str
    label: str
    sense: str
    basis: str
    about: str = ""


ALERTS = (
    AlertKind("pv_input_over_max_v", 0, "V", "PV input above the controller's maximum voltage", "max",
              "NEC 690.7(A): the maximum voltage is Voc at the cells' temperature", "controller"),
    AlertKind("charge_below_min_temp", 1, "degC", "charging possible below the bank's minimum charging temperature",
              "min", "the chemistry's min_charge_temp_c (common practice)"),
    AlertKind("charge_over_bank_rate", 2, "A", "charge current above the bank's rate", "max",
              "the chemistry's max_charge_c_rate x capacity"),
    AlertKind("pv_input_over_max_isc", 3, "A", "PV short-circuit current above the controller's input rating", "max",
              "NEC 690.8(A): the array's Isc at the point's conditions", "controller"),
    AlertKind("bank_over_absorption_v", 4, "V", "bank voltage above its absorption voltage", "max",
              "the chemistry's absorption voltage at the bank's temperature (IEEE Std 1361)"),
    AlertKind("cable_over_ampacity", 5, "A", "cable current above its ampacity", "max",
              "NEC 310.14 and 110.14(C); IEC 60364-5-52", "run"),
    AlertKind("string_reverse_over_fuse", 6, "A", "reverse current into a string above the module's rating", "max",
              "the module's maximum series fuse (IEC 61730-2 reverse current test; NEC 690.9)"),
)
BY_NAME = {a.name: a for a in ALERTS}
# Rounding of a regulated point (E + I R landing on its target) is not an alert.
_REL_TOL = 1e-9


@dataclass(frozen=True)
class Measure:
    """One alert's value and limit on every row, and where it fires.

    Attributes
    ----------
    kind : AlertKind
    value, limit : arrays (N,)
        In ``kind.unit``.
    active : bool array (N,)
    subject : str
        What it is about when there can be several (a cable run's name), else "".
    """

    kind: AlertKind
    value: np.ndarray
    limit: np.ndarray
    active: np.ndarray
    subject: str = ""


def _col(frame, name):
    return frame[name].to_numpy(float) if name in frame else None


def _over(value, limit):
    """Where ``value`` exceeds ``limit`` beyond rounding; NaN never fires."""
    with np.errstate(invalid="ignore"):
        return value > limit + _REL_TOL * np.abs(limit)


def _measure(name, value, limit, active, subject="") -> Measure:
    value = np.asarray(value, float)
    return Measure(BY_NAME[name], value, np.broadcast_to(np.asarray(limit, float), value.shape), active, subject)


def start_floor_v(controller, bank_emf_v):
    """The lowest array voltage at which ``controller`` can push charge into the bank [V].

    A tracker needs its input above the bank by its headroom and above its
    own minimum; a switch or a wire needs the bank's EMF plus the diode drop.
    """
    c = controller
    if c.tracks:
        return np.maximum(bank_emf_v + c.min_headroom_v, c.min_input_v or 0.0)
    return bank_emf_v + c.diode_drop_v


def controller_inputs(system: System, frame):
    """Each controller, its name, and the open-circuit voltage and short-circuit current at its input [V], [A].

    One controller for the whole array sees the array's own ``source_v_oc``
    and ``source_i_sc``. Several each see their own groups: the highest of
    their groups' open-circuit voltages (exact for one group; for groups of
    unequal strings on one input, the voltage before they share it) and the
    sum of their short-circuit currents, from each group's irradiance and
    cell temperature on the row.
    """
    if not system.several_controllers:
        for a in system.controllers:
            yield a.controller, "", _col(frame, "source_v_oc"), _col(frame, "source_i_sc")
        return
    from pvsource.module import key_points, parameters_at

    names = system.group_names
    g = np.stack([_col(frame, f"group_{n}_irradiance_w_m2") for n in names], axis=-1)
    t = np.stack([_col(frame, f"group_{n}_cell_temp_c") for n in names], axis=-1)
    own = key_points(parameters_at(system.module.parameters, g, t))
    for a in system.controllers:
        k = [names.index(n) for n in a.groups]
        voc = (system.n_series[k] * own["v_oc"][:, k]).max(axis=-1)
        isc = (system.n_parallel[k] * own["i_sc"][:, k]).sum(axis=-1)
        yield a.controller, a.name, voc, isc


def _rms_on(frame, current, duty_column="duty"):
    """A switched (PWM) current heats as its RMS: the on-state current times sqrt(duty)."""
    duty = _col(frame, duty_column)
    return current if duty is None else current * np.sqrt(np.clip(duty, 0.0, 1.0))


def _duty_column(system: System, assigned) -> str:
    """The duty a run's current is switched with: its own controller's with several (``ctrl_<name>_duty``)."""
    from pvsource.operating import controller_column

    if system.several_controllers and assigned is not None:
        return controller_column(assigned.name, "duty")
    return "duty"


def _run_currents(system: System, frame):
    """Each run and its current at every row [A], by its role; runs the point says nothing about are left out.

    A string lead carries one string's current, a home run its group's, a
    feeder its controller's groups' (the whole array's with one controller).
    Behind a tracker the bank runs carry its smoothed output; behind a switch
    or a wire, the array's current. With several controllers a bank run
    carries its own controller's output, which a row gives only as
    ``ctrl_<name>_charge_current_a`` (:func:`pvsource.operating.controller_column`);
    the interconnects carry the total.
    """
    from pvsource.operating import controller_column

    strings = {g.name: g.strings for g in system.groups}
    group_i = {n: _col(frame, f"group_{n}_i_a") for n in system.group_names}
    charge = _col(frame, "charge_current_a")
    several = system.several_controllers
    for run in system.cables:
        mine = _run_controller(system, run)
        duty = _duty_column(system, mine)
        if run.role == "string":
            yield run, _rms_on(frame, np.abs(group_i[run.group]) / strings[run.group], duty)
        elif run.role == "home-run":
            yield run, _rms_on(frame, np.abs(group_i[run.group]), duty)
        elif run.role == "feeder" or charge is None or not (several or mine.controller.tracks):
            # The PV current: a feeder's, or the whole load side's without a bank or behind a switch or a wire.
            feeds = mine.groups if mine is not None and run.role == "feeder" else system.group_names
            yield run, _rms_on(frame, np.abs(sum(group_i[n] for n in feeds)), duty)
        elif run.role == "interconnect" or not several:
            yield run, np.abs(charge)  # a tracker's smoothed output, or every controller's together
        elif controller_column(mine.name, "charge_current_a") in frame:
            yield run, np.abs(_col(frame, controller_column(mine.name, "charge_current_a")))


def _run_controller(system: System, run):
    """The controller (``ControllerGroups``) a run belongs to, or None where there is none."""
    if run.group is not None:
        return system.controller_of(run.group)
    if len(system.controllers) == 1:
        return system.controllers[0]
    return next((a for a in system.controllers if a.name == run.controller), None)


def measures(system: System, frame) -> list[Measure]:
    """Every alert that applies to ``system``, evaluated on every row of ``frame``.

    Parameters
    ----------
    system : System
    frame : DataFrame
        Rows of :func:`pvsource.operating.operating_points` (a season's steps too).

    Returns
    -------
    list of Measure
        Alerts with no limit in the system (no controller rating, no bank,
        no datasheet fuse rating, no ampacity) are left out.
    """
    from pvsource import bank as bank_model
    from pvsource.wiring import run_ampacity

    out = []
    b = system.bank
    emf = _col(frame, "bank_emf_v")
    could = np.zeros(len(frame), bool)
    for c, name, voc, isc in controller_inputs(system, frame):
        if c.max_input_v is not None:
            out.append(_measure("pv_input_over_max_v", voc, c.max_input_v, _over(voc, c.max_input_v), name))
        if c.max_input_isc_a is not None:
            out.append(_measure("pv_input_over_max_isc", isc, c.max_input_isc_a, _over(isc, c.max_input_isc_a),
                                name))
        if emf is not None:
            with np.errstate(invalid="ignore"):
                could |= (isc > 0.0) & (voc > start_floor_v(c, emf))
    if b is not None and emf is not None:
        temp = _col(frame, "bank_temp_c")
        charge, r = _col(frame, "charge_current_a"), _col(frame, "bank_r_ohm")
        beside = _col(frame, "bank_load_a")
        if beside is not None:
            charge = charge - beside  # a season's loads take their part at the bank: the bank's own current
        chem = b.chemistry
        with np.errstate(invalid="ignore"):
            cold = could & (temp < chem.min_charge_temp_c)
        out.append(_measure("charge_below_min_temp", temp, chem.min_charge_temp_c, cold))
        rate = chem.max_charge_c_rate * b.capacity_ah
        out.append(_measure("charge_over_bank_rate", charge, rate, _over(charge, rate)))
        terminal = emf + charge * r
        v_abs, _ = bank_model.charge_voltages_v(b, temp)
        out.append(_measure("bank_over_absorption_v", terminal, v_abs, _over(terminal, v_abs)))
    for run, current in _run_currents(system, frame):
        a = run_ampacity(run)
        if a is None:
            continue
        limit = run.conductors_in_parallel * min(a.corrected_a, a.termination_a)
        out.append(_measure("cable_over_ampacity", current, limit, _over(current, limit), run.name))
    ds = system.module.datasheet
    if ds is not None and ds.max_series_fuse_a is not None:
        backward = np.zeros(len(frame))
        for g in system.groups:
            j = _rms_on(frame, _col(frame, f"group_{g.name}_i_a"), _duty_column(system, system.controller_of(g.name)))
            j = j / g.strings
            backward = np.fmax(backward, -j)
        out.append(_measure("string_reverse_over_fuse", backward, ds.max_series_fuse_a,
                            _over(backward, ds.max_series_fuse_a)))
    return out


def alert_codes(system: System, frame) -> np.ndarray:
    """One code per row: bit ``k`` set where alert ``ALERTS[k]`` fires (uint16, 0 where none)."""
    code = np.zeros(len(frame), np.uint16)
    for m in measures(system, frame):
        code |= (m.active.astype(np.uint16) << np.uint16(m.kind.bit))
    return code


def names(code: int) -> list[str]:
    """The names of the alerts set in one code."""
    return [a.name for a in ALERTS if int(code) >> a.bit & 1]


def message(m: Measure, k: int) -> str:
    """One alert at row ``k`` in words, with its value, its limit and why it matters."""
    v, lim = float(m.value[k]), float(m.limit[k])
    text = {
        "pv_input_over_max_v": f"the array's open-circuit voltage {v:.1f} V at these cells is above the controller's "
                               f"{lim:g} V maximum input; the controller sees it at every start-up, whatever its "
                               "output limit",
        "charge_below_min_temp": f"the bank is at {v:g} degC, below its {lim:g} degC minimum charging temperature, "
                                 "and the array could charge it; charge must be blocked (a temperature sensor or BMS)",
        "charge_over_bank_rate": f"{v:.1f} A charges the bank, above its {lim:.1f} A rate",
        "pv_input_over_max_isc": f"the array's short-circuit current {v:.2f} A is above the controller's {lim:g} A "
                                 "input rating",
        "bank_over_absorption_v": f"the bank's terminals reach {v:.2f} V, above its {lim:.2f} V absorption voltage: "
                                  "nothing regulates the charge",
        "cable_over_ampacity": f"{v:.1f} A, above the conductor's {lim:.1f} A ampacity",
        "string_reverse_over_fuse": f"{v:.2f} A flows backwards into a string, above the module's {lim:g} A maximum "
                                    "series fuse",
    }[m.kind.name]
    return f"{m.kind.label}: {m.subject + ': ' if m.subject else ''}{text} ({m.kind.basis})"


def point_alerts(system: System, frame, k: int = 0) -> list[dict]:
    """The alerts that fire at row ``k`` as JSON-ready dicts: name, value, limit, unit, message.

    Where there can be several of one alert, the dict also names what it is
    about: the ``run`` of a cable, the ``controller`` when there are several.
    """
    out = []
    for m in measures(system, frame):
        if not m.active[k]:
            continue
        rec = {"name": m.kind.name, "value": float(m.value[k]), "limit": float(m.limit[k]), "unit": m.kind.unit,
               "message": message(m, k)}
        if m.subject:
            rec[m.kind.about] = m.subject
        out.append(rec)
    return out


def alert_hours(codes, step_h: float) -> dict:
    """Hours during which each alert fired, by name, every alert listed (0.0 where none) [h].

    Parameters
    ----------
    codes : array (N,)
        :func:`alert_codes` of a span's steps.
    step_h : float
        Step length [h].
    """
    codes = np.asarray(codes).astype(np.uint16, copy=False)
    return {a.name: float(np.count_nonzero(codes >> np.uint16(a.bit) & np.uint16(1))) * step_h for a in ALERTS}
