"""Design checks of string voltage and circuit current, each with its basis.

The checks compare the array against the site's extreme air temperatures and
the equipment's limits:

- the highest string Voc at the record low (cells at air temperature: at
  first light the cells have not warmed yet; common practice) against the
  controller's maximum input voltage;
- the lowest string Vmp at the record high, with cells a stated rise above
  the air in full sun, against the lowest voltage the controller or bank needs;
- every run's maximum circuit current (NEC 690.8(A): 1.25 x Isc on the PV
  side, the controller's rated output behind a tracker) against its ampacity
  from the tables (:mod:`pvsource.ampacity`) or its typed rating;
- string fuses (NEC 690.9): whether they are needed, the rating, and the
  module's maximum series fuse;
- the controller's input short-circuit current and output power;
- the bank's prospective short-circuit current against the interrupting
  rating of its fuse or breaker, and each run's fuse against its conductor.

Every check names its basis: a published standard, or "common practice",
and the rule it applies in words (``rule``), for reasons and reports.

References
----------
.. [1] NFPA 70, National Electrical Code (2023), 690.7(A) (maximum PV system
   voltage, with Table 690.7(A) for crystalline silicon) and 690.8(A)(1),
   690.8(B)(1) (circuit current and conductor sizing factors), 690.9
   (overcurrent protection), 240.4(B) and 240.6(A) (standard ratings), 110.9
   (interrupting rating).
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass, field, replace

import numpy as np
from pvlib import pvsystem

from pvsource import ampacity as amp
from pvsource import conductors
from pvsource.module import STC_CELL_TEMP_C, STC_IRRADIANCE_W_M2, parameters_at
from pvsource.system import System
from pvsource.units import DEFAULT_CELL_RISE_C
from pvsource.wiring import BATTERY_SIDE_ROLES, PV_SIDE_ROLES, run_ampacity

# NOCT is measured at 800 W/m2, 20 degC air and 1 m/s wind on an open rack
# (IEC 61215); the rise scales with irradiance (Ross's linear model).
NOCT_IRRADIANCE_W_M2 = 800.0
NOCT_AIR_C = 20.0
CIRCUIT_CURRENT_FACTOR = 1.25      # NEC 690.8(A)(1): irradiance above 1000 W/m2
CONDUCTOR_CURRENT_FACTOR = 1.25    # NEC 690.8(B)(1): continuous current


@dataclass(frozen=True)
class Check:
    """One design check.

    Attributes
    ----------
    name : str
        Stable identifier, e.g. ``max_string_voc``.
    value : float
        The computed quantity.
    limit : float or None
        What it is compared with; None when the system file gives no limit.
    unit : str
    passed : bool or None
        None when there is no limit to compare with.
    basis : str
        The standard, or "common practice", the check rests on.
    sense : str
        ``"max"`` (value must not exceed the limit) or ``"min"`` (must reach it).
    detail : str
        How the value was obtained, in one sentence.
    rule : str
        The rule in words, e.g. "ampacity" or "voltage window".
    data : dict
        Further fields for the JSON record.
    advisory : bool
        True for a check that warns of lost energy rather than a hazard or a
        code rule: it never fails ``check`` nor excludes a design.
    unverified : bool
        True for a check that must be made but cannot be: a run whose
        ampacity is unknown (no size, or no table value, and no
        ``ampacity_a``). ``passed`` is None, and ``check``'s result is not a
        pass (:func:`verdict_of`).
    """

    name: str
    value: float
    limit: float | None
    unit: str
    passed: bool | None
    basis: str
    sense: str = "max"
    detail: str = ""
    rule: str = ""
    data: dict = field(default_factory=dict)
    advisory: bool = False
    unverified: bool = False

    @property
    def failed(self) -> bool:
        """A real failure: not passed, and not advisory."""
        return self.passed is False and not self.advisory

    @property
    def verdict(self) -> str:
        """Status code for the edges: ``pass``, ``fail``, ``advisory`` (failed but advisory), ``unverified`` or ``none``."""
        if self.passed is None:
            return "unverified" if self.unverified else "none"
        if self.passed:
            return "pass"
        return "advisory" if self.advisory else "fail"

    @property
    def margin(self) -> float | None:
        """Headroom as a fraction of the limit; negative when failed."""
        if self.limit is None or self.limit == 0:
            return None
        if self.sense == "max":
            return (self.limit - self.value) / self.limit
        return (self.value - self.limit) / self.limit

    def record(self) -> dict:
        rec = asdict(self)
        rec.update(rec.pop("data"))
        rec["margin"] = self.margin
        rec["verdict"] = self.verdict
        return rec

    def reason(self) -> str:
        """Why a failed check excludes a design, in words."""
        limit = "no limit" if self.limit is None else f"{self.limit:.1f} {self.unit}"
        return f"{self.rule or self.name} ({self.name}): {self.value:.1f} {self.unit} against {limit}"


def _modules(n: int) -> str:
    return f"{n} module" + ("s" if n != 1 else "")


def _compare(value, limit, sense):
    if limit is None:
        return None
    return bool(value <= limit) if sense == "max" else bool(value >= limit)


def module_voc_at(system: System, cell_temp_c: float) -> tuple[float, str]:
    """Module Voc at 1000 W/m2 and the given cell temperature [V], and how it was found.

    From the datasheet's Voc coefficient where there is a datasheet (NEC
    690.7(A)(1) uses the manufacturer's coefficient); otherwise from the
    single-diode model.
    """
    ds = system.module.datasheet
    if ds is not None:
        factor = 1.0 + ds.voc_temp_coeff_pct / 100.0 * (cell_temp_c - STC_CELL_TEMP_C)
        return ds.v_oc * factor, f"Voc {ds.v_oc:g} V x (1 + {ds.voc_temp_coeff_pct:g} %/degC x " \
                                 f"({cell_temp_c:g} - 25) degC) = x {factor:.4f}"
    state = parameters_at(system.module.parameters, STC_IRRADIANCE_W_M2, cell_temp_c)
    voc = float(np.squeeze(pvsystem.singlediode(state.i_l_a, state.i_o_a, state.r_s_ohm, state.r_sh_ohm,
                                                state.a_v)["v_oc"]))
    return voc, f"Voc from the single-diode model at 1000 W/m2 and {cell_temp_c:g} degC"


def module_isc_stc(system: System) -> float:
    """Module Isc at STC [A]: the datasheet's, or the model's."""
    ds = system.module.datasheet
    return ds.i_sc if ds is not None else float(system.module.fit.stc["i_sc"])


def max_string_voc(system: System, min_air_c: float) -> Check:
    """Highest string Voc at the record low air temperature, cells at air temperature."""
    voc, how = module_voc_at(system, min_air_c)
    n_s = max(g.modules_per_string for g in system.groups)
    value = n_s * voc
    limit = system.controller.max_input_v if system.controller else None
    detail = f"{_modules(n_s)} x {voc:.2f} V ({how}); cells taken at the {min_air_c:g} degC air temperature"
    if limit is None:
        detail += "; no [controller].max_input_v given to compare with"
    return Check("max_string_voc", value, limit, "V", _compare(value, limit, "max"),
                 "NEC 690.7(A)(1) (manufacturer's Voc coefficient); cells at air temperature at first light: "
                 "common practice", "max", detail,
                 "voltage window: the coldest string Voc must stay within the controller's maximum input")


def _pv_side_drop_v(system: System, string_current_a: float) -> float:
    """Worst drop from a string's terminals to the controller input, every string at the given current [V]."""
    worst = 0.0
    total = string_current_a * sum(g.strings for g in system.groups)
    feeder = total * sum(r.loop_resistance_ohm for r in system.cables if r.role == "feeder")
    for g in system.groups:
        own = sum(string_current_a * r.loop_resistance_ohm for r in system.cables if r.role == "string" and r.group == g.name)
        own += sum(string_current_a * g.strings * r.loop_resistance_ohm for r in system.cables
                   if r.role == "home-run" and r.group == g.name)
        worst = max(worst, own + feeder)
    return worst


def noct_cell_rise_c(noct_c, irradiance_w_m2=STC_IRRADIANCE_W_M2):
    """Cell temperature above the air from the module's NOCT [degC].

    ``(NOCT - 20) x G / 800``: Ross's model with its coefficient taken at
    NOCT conditions [2]_, as :func:`pvlib.temperature.ross` does with
    ``noct``. At 1000 W/m2 the rise is 1.25 (NOCT - 20).

    Parameters
    ----------
    noct_c : float or array
        Nominal operating cell temperature [degC].
    irradiance_w_m2 : float or array
        Plane-of-array irradiance [W/m2].

    References
    ----------
    .. [2] R. G. Ross, "Interface design considerations for terrestrial solar
       cell modules", Proc. 12th IEEE PVSC (1976) 801-806; NOCT conditions:
       IEC 61215-2 (800 W/m2, 20 degC air, 1 m/s wind, open rack).
    """
    return (np.asarray(noct_c, dtype=float) - NOCT_AIR_C) * np.asarray(irradiance_w_m2, dtype=float) \
        / NOCT_IRRADIANCE_W_M2


def cell_rise(system: System, given_c: float | None = None) -> tuple[float, str]:
    """Cells above the air in full sun (1000 W/m2) for the hot case [degC], and its basis.

    The given value; else, when the datasheet gives ``noct_c``, the NOCT rise
    (:func:`noct_cell_rise_c`); else :data:`DEFAULT_CELL_RISE_C`.
    """
    if given_c is not None:
        return float(given_c), f"cells {given_c:g} degC above the hottest air in full sun, as given"
    ds = system.module.datasheet
    if ds is not None and ds.noct_c is not None:
        rise = float(noct_cell_rise_c(ds.noct_c))
        return rise, (f"cells (NOCT {ds.noct_c:g} - 20) x 1000/800 = {rise:g} degC above the hottest air in full "
                      "sun (NOCT: IEC 61215, open rack at 1 m/s wind; roof-mounted modules run hotter, give "
                      "--cell-rise)")
    return DEFAULT_CELL_RISE_C, (f"cells {DEFAULT_CELL_RISE_C:g} degC above the hottest air in full sun (common "
                                 "practice; the datasheet gives no noct_c)")


def min_string_vmp(system: System, max_air_c: float, cell_rise_c: float | None = None) -> Check:
    """Lowest Vmp reaching the controller in full sun at the record high, against what the equipment needs.

    The string's Vmp (single-diode model, 1000 W/m2, cells ``cell_rise_c``
    above the air; when None, from the module's NOCT or the common-practice
    default, see :func:`cell_rise`) less the drop of the PV-side cables at
    that current, then compared with the controller's minimum input; without
    one, with the bank's absorption voltage (plus the tracker's headroom), or
    the battery or voltage load's EMF.
    """
    from pvsource import bank as bank_model  # a bank is optional; import where used

    cell_rise_c, rise_basis = cell_rise(system, cell_rise_c)
    t_cell = max_air_c + cell_rise_c
    state = parameters_at(system.module.parameters, STC_IRRADIANCE_W_M2, t_cell)
    sd = pvsystem.singlediode(state.i_l_a, state.i_o_a, state.r_s_ohm, state.r_sh_ohm, state.a_v)
    vmp, imp = float(np.squeeze(sd["v_mp"])), float(np.squeeze(sd["i_mp"]))
    n_s = min(g.modules_per_string for g in system.groups)
    drop = _pv_side_drop_v(system, imp)
    value = n_s * vmp - drop
    c = system.controller
    if c is not None and c.min_input_v is not None:
        limit, against = c.min_input_v, "[controller].min_input_v"
    elif system.bank is not None:
        v_abs, _ = bank_model.charge_voltages_v(system.bank, system.bank.temp_c)
        headroom = c.min_headroom_v if c is not None and c.tracks else 0.0
        limit = float(v_abs) + headroom
        against = f"the bank's absorption voltage {float(v_abs):.2f} V" + (f" + {headroom:g} V headroom" if headroom else "")
    elif system.load.kind in ("battery", "voltage"):
        limit, against = system.load.emf_v, f"the {system.load.kind} load's {system.load.emf_v:g} V"
    else:
        limit, against = None, "nothing: no [controller].min_input_v, no [bank], no battery or voltage load"
    detail = (f"{_modules(n_s)} x {vmp:.2f} V at 1000 W/m2 with cells at {max_air_c:g} + {cell_rise_c:g} = "
              f"{t_cell:g} degC, less {drop:.2f} V in the PV-side cables at {imp:.2f} A per string; "
              f"compared with {against}")
    return Check("min_string_vmp", value, limit, "V", _compare(value, limit, "min"),
                 f"Vmp at the controller's input in full sun (common practice); {rise_basis}", "min", detail,
                 "voltage window: the hottest Vmp must stay above what the controller or bank needs")


def _battery_side_current(system: System) -> tuple[float, str] | None:
    """Maximum current of the bank-side runs behind a tracker [A], and its basis; None when the PV current flows."""
    c = system.controller
    if system.bank is None or c is None or not c.tracks:
        return None
    if c.max_output_a is not None:
        return c.max_output_a, f"the controller's rated output {c.max_output_a:g} A (NEC 690.8(A)(1), converter output)"
    from pvsource import bank as bank_model

    v_abs, _ = bank_model.charge_voltages_v(system.bank, system.bank.temp_c)
    return c.rated_power_w / float(v_abs), (f"the controller's rated power {c.rated_power_w:g} W over the bank's "
                                            f"{float(v_abs):.1f} V absorption voltage")


def _circuit_current(system: System, run, isc: float) -> tuple[int | None, float, str]:
    """(strings carried or None behind a tracker, maximum circuit current [A], how) of one run.

    With several controllers a feeder or bank run carries its own
    controller's current, and the bank's interconnects the sum of all of them.
    """
    if system.several_controllers:
        if run.role == "interconnect":
            parts = [(c.name, _circuit_current(system.for_controller(c), run, isc)) for c in system.controllers]
            carried = [p[0] for _, p in parts]
            return (None if None in carried else sum(carried), sum(p[1] for _, p in parts),
                    " + ".join(f"{name}: {p[2]}" for name, p in parts))
        if run.role in ("feeder", "bank"):
            own = next(c for c in system.controllers if c.name == run.controller)
            return _circuit_current(system.for_controller(own), run, isc)
    battery = _battery_side_current(system)
    if run.role in BATTERY_SIDE_ROLES and battery is not None:
        return None, *battery
    strings = {g.name: g.strings for g in system.groups}
    carried = 1 if run.role == "string" else strings[run.group] if run.role == "home-run" else sum(strings.values())
    return carried, CIRCUIT_CURRENT_FACTOR * carried * isc, \
        f"{carried} string(s) x Isc {isc:g} A x 1.25 (NEC 690.8(A)(1))"


def design_currents(system: System, defaults: amp.Installation = amp.Installation()) -> list[dict]:
    """Maximum circuit current, conductor design current and ampacity of every run.

    I_max is 1.25 x the Isc of the strings the run carries (NEC 690.8(A)(1))
    on the PV side, and the controller's rated output on a tracker's bank
    side; the conductor must carry 1.25 x I_max (NEC 690.8(B)). The ampacity
    comes from the tables for the run's installation (``defaults`` fill what
    the file leaves out), or from the run's typed ``ampacity_a`` for its own size.
    """
    isc = module_isc_stc(system)
    out = []
    for run in system.cables:
        carried, circuit, how = _circuit_current(system, run, isc)
        a = run_ampacity(run, defaults)
        n = run.conductors_in_parallel
        out.append({"run": run.name, "role": run.role, "strings_carried": carried,
                    "circuit_current_a": circuit, "conductor_current_a": CONDUCTOR_CURRENT_FACTOR * circuit,
                    "current_basis": how,
                    "ampacity_a": None if a is None else n * a.corrected_a,
                    "ampacity_limit_a": None if a is None else a.limit_for(n),
                    "ampacity_limit_by": None if a is None else a.limit_by(n),
                    "ampacity_basis": None if a is None else a.basis,
                    "protection": None if a is None else a.protection,
                    "protection_a": None if a is None or a.protection is None else
                    amp.needed_protection_a(CONDUCTOR_CURRENT_FACTOR * circuit, a.protection)})
    return out


#: The rules of the conductor check, in words, by the size's standard.
AMPACITY_RULE = "ampacity: the conductor must carry 125 % of the circuit's maximum current"
UNVERIFIED_RULE = "ampacity unknown: a conductor whose rating is unknown cannot be shown to carry its current"
PROTECTION_RULE = ("overload protection: the conductor's current-carrying capacity must be at least the rating of "
                   "the fuse or breaker the circuit needs (IEC 60364-4-43 433.1: I_B <= I_n <= I_z, "
                   "I_2 <= 1.45 I_z)")


def conductor_current_checks(system: System, defaults: amp.Installation = amp.Installation()) -> list[Check]:
    """1.25 x I_max of every sized run against its ampacity limit (NEC 690.8(B), 110.14(C))."""
    checks = []
    for d in design_currents(system, defaults):
        run = next(r for r in system.cables if r.name == d["run"])
        limit = d["ampacity_limit_a"]
        if limit is None:
            # A conductor whose rating is unknown cannot be passed: it is reported, and the result is no pass.
            why = ("no size (resistance_ohm_per_km only), so no table to read" if run.size is None else
                   f"no table value for {run.size.label} {run.material} in this installation")
            against, rule = (f"nothing: {why}; give the run's size or its ampacity_a (the cable's own rating)",
                             UNVERIFIED_RULE)
        elif d["protection"] is None:
            against, rule = f"{d['ampacity_basis']}: min(termination value, 1.25 x corrected ampacity)", AMPACITY_RULE
        else:
            needed = ("above the largest preferred rating" if d["protection_a"] is None else
                      f"{d['protection_a']:g} A")
            against = (f"{d['ampacity_basis']}; I_z {d['ampacity_a']:.1f} A; the circuit needs a device of at least "
                       f"{d['conductor_current_a']:.1f} A, so {needed}, and the largest preferred rating I_z can "
                       f"sit behind is {limit:g} A")
            rule = PROTECTION_RULE
        checks.append(Check(
            f"conductor_current[{d['run']}]", d["conductor_current_a"], limit, "A",
            _compare(d["conductor_current_a"], limit, "max"),
            "NEC 690.8(A) and 690.8(B), 110.14(C), 310.15, Table 310.16/310.17; IEC 60364-5-52 and "
            "IEC 60364-4-43 433.1 for metric sizes",
            "max", f"{d['current_basis']}, x 1.25 for the conductor; against {against}", rule,
            {"circuit_current_a": d["circuit_current_a"], "ampacity_a": d["ampacity_a"],
             "protection": d["protection"], "protection_a": d["protection_a"]}, unverified=limit is None))
    return checks


def string_fuse_check(system: System) -> Check:
    """NEC 690.9: are string fuses needed, their rating, and the module's maximum series fuse.

    A faulted string takes the others' current backwards: (N − 1) x 1.25 x
    Isc. Fuses are needed when that exceeds the module's maximum series fuse
    (or, without one, from three strings in parallel: common practice). The
    rating is 1.25 x 1.25 x Isc = 1.56 x Isc (690.9(B)), rounded up to a
    standard rating of NEC 240.6(A), and must not exceed the module's maximum.
    """
    isc = module_isc_stc(system)
    n = sum(g.strings for g in system.groups)
    backfeed = (n - 1) * CIRCUIT_CURRENT_FACTOR * isc
    ds = system.module.datasheet
    limit = ds.max_series_fuse_a if ds is not None else None
    needed = backfeed > limit if limit is not None else n >= 3
    rating = amp.next_standard_rating(CIRCUIT_CURRENT_FACTOR * CONDUCTOR_CURRENT_FACTOR * isc)
    passed = True if not needed else _compare(rating, limit, "max")
    why = (f"{n} string(s) in parallel: a faulted string takes up to ({n} - 1) x 1.25 x {isc:g} A = "
           f"{backfeed:.1f} A backwards, " + (f"{'above' if needed else 'within'} the module's {limit:g} A maximum "
                                              "series fuse" if limit is not None else
                                              "and the datasheet gives no max_series_fuse_a"))
    detail = (f"{why}; fuses {'are' if needed else 'are not'} needed; rating 1.56 x {isc:g} A = "
              f"{1.5625 * isc:.1f} A, rounded up to {rating:g} A (NEC 240.6(A))")
    return Check("string_fuse", rating, limit, "A", passed, "NEC 690.9(A) and (B), 240.6(A)", "max", detail,
                 "fuse: a string fuse must open before the module's maximum series fuse rating is exceeded",
                 {"needed": bool(needed), "backfeed_a": backfeed})


def controller_checks(system: System) -> list[Check]:
    """The controller's input short-circuit current and output power against the array's."""
    c = system.controller
    if c is None:
        return []
    isc = module_isc_stc(system)
    n = sum(g.strings for g in system.groups)
    out = []
    value = CIRCUIT_CURRENT_FACTOR * n * isc
    out.append(Check("controller_input_isc", value, c.max_input_isc_a, "A", _compare(value, c.max_input_isc_a, "max"),
                     "NEC 690.8(A)(1): 1.25 x the array's Isc", "max",
                     f"{n} string(s) x Isc {isc:g} A x 1.25" + ("" if c.max_input_isc_a is not None else
                                                                  "; no [controller].max_input_isc_a given"),
                     "controller input: the array's short-circuit current must stay within the input's rating"))
    if c.tracks and system.bank is not None:
        from pvsource import bank as bank_model

        v_abs, _ = bank_model.charge_voltages_v(system.bank, system.bank.temp_c)
        capability = c.rated_power_w if c.rated_power_w is not None else c.max_output_a * float(v_abs)
        p_array = sum(g.modules_per_string * g.strings for g in system.groups) * _module_pmp_stc(system)
        out.append(Check("controller_output_power", p_array, capability, "W", _compare(p_array, capability, "max"),
                         "common practice: power beyond the controller's output is clipped", "max",
                         "array STC power against " + (f"rated_power_w {capability:g} W" if c.rated_power_w else
                                                        f"max_output_a {c.max_output_a:g} A x {float(v_abs):.1f} V"),
                         "controller output: the array should not make more than the controller can deliver",
                         advisory=True))
    return out


def _module_pmp_stc(system: System) -> float:
    ds = system.module.datasheet
    if ds is not None:
        return ds.p_mp_w
    state = parameters_at(system.module.parameters, STC_IRRADIANCE_W_M2, STC_CELL_TEMP_C)
    return float(np.squeeze(pvsystem.singlediode(state.i_l_a, state.i_o_a, state.r_s_ohm, state.r_sh_ohm,
                                                 state.a_v)["p_mp"]))


def _loop_ohm_at_20c(run) -> float:
    if run.size is None:
        return run.loop_resistance_ohm
    r, _ = conductors.size_resistance(run.size, run.material, 20.0, run.conductor_class, run.resistance_basis)
    return 2.0 * run.length_m * float(r) / run.conductors_in_parallel


def protection_checks(system: System, defaults: amp.Installation = amp.Installation()) -> list[Check]:
    """The bank's prospective short-circuit current, and each fused run's fuse against its conductor."""
    out = []
    if system.bank is not None:
        from pvsource import bank as bank_model

        ocv = float(bank_model.open_circuit_v(system.bank, 1.0))
        r_int = float(bank_model.internal_resistance_ohm(system.bank, 1.0, max(system.bank.temp_c, 25.0)))
        bank_runs = [r for r in system.cables if r.role in BATTERY_SIDE_ROLES]
        # The fuse sits at the bank and must clear a fault anywhere after it,
        # its own load-side terminal included, where no cable limits the
        # current: only the bank's own resistance does (a bolted fault at its
        # terminals). At the far end of the shortest bank-side path the cable
        # lowers it; that figure is given for context only.
        owners = [c.name for c in system.controllers] if system.several_controllers else [None]
        r_cable = sum(_loop_ohm_at_20c(r) for r in bank_runs if r.role == "interconnect") + min(
            sum(_loop_ohm_at_20c(r) for r in bank_runs if r.role == "bank" and r.controller == owner)
            for owner in owners)
        value = ocv / r_int
        ratings = [r.fuse_interrupting_a for r in bank_runs if r.fuse_interrupting_a is not None]
        limit = min(ratings) if ratings else None
        out.append(Check(
            "bank_short_circuit", value, limit, "A", _compare(value, limit, "max"),
            "NEC 110.9 (interrupting rating at least the available fault current); a fault at the fuse's own "
            "terminals: OCV / R_internal",
            "max", f"full-charge OCV {ocv:.2f} V over {r_int * 1000:.2f} mOhm inside the bank (a fault right after "
                   f"the fuse; at the controller end, through {r_cable * 1000:.2f} mOhm of bank-side cable at 20 degC, "
                   f"{ocv / (r_int + r_cable):.0f} A), against "
                   + (f"the smallest fuse_interrupting_a, {limit:g} A" if limit is not None else
                      "nothing: no fuse_interrupting_a on a bank or interconnect run"),
            "fault current: the bank's fuse or breaker must interrupt the bank's short-circuit current"))
    for run in system.cables:
        if run.fuse_a is None:
            continue
        a = run_ampacity(run, defaults)
        basis = "NEC 240.4, 240.4(B) and (D), 240.6(A)"
        if a is None:
            limit, how = None, "no ampacity for this run; give its ampacity_a"
        elif a.protection is not None:
            # IEC 60364-4-43 433.1: no rounding up past the conductor; I_2 = k2 I_n <= 1.45 I_z.
            capacity = run.conductors_in_parallel * a.corrected_a
            k2 = amp.conventional_factor(a.protection, run.fuse_a)
            limit = min(capacity, amp.IEC_I2_LIMIT * capacity / k2)
            how = (f"the conductor's I_z {capacity:.1f} A ({a.basis}); I_2 = {k2:g} x I_n for a "
                   f"{amp.PROTECTION_WORDS[a.protection]}, so I_n <= min(I_z, 1.45 I_z / {k2:g})")
            basis = "IEC 60364-4-43 433.1; IEC 60269-1, 60269-6, 60898 (conventional operating current)"
        else:
            usable = run.conductors_in_parallel * min(a.corrected_a, a.termination_a)
            std = any(abs(usable - r) < 1e-9 for r in amp.STANDARD_RATINGS_A)
            limit = usable if std or usable > 800.0 else min(amp.next_standard_rating(usable), 800.0)
            how = (f"the conductor's {usable:.1f} A ({a.basis})"
                   + ("" if limit == usable else f", next standard rating up {limit:g} A (NEC 240.4(B))"))
            small = amp.SMALL_CONDUCTOR_MAX_A.get((run.size.label, run.material)) if run.size else None
            if small is not None and run.ampacity_a is None and small * run.conductors_in_parallel < limit:
                limit = small * run.conductors_in_parallel
                how += f", but at most {small:g} A for {run.size.label} {run.material} (NEC 240.4(D))"
        out.append(Check(f"fuse_rating[{run.name}]", run.fuse_a, limit, "A", _compare(run.fuse_a, limit, "max"),
                         basis, "max", f"fuse_a {run.fuse_a:g} A against {how}",
                         "fuse: the fuse must protect the conductor it feeds"))
    return out


def all_passed(checks: list[Check]) -> bool | None:
    """True when every check with a limit passes; False when any non-advisory one fails or is unverified; None
    with nothing to compare."""
    if any(c.unverified for c in checks):
        return False
    verdicts = [c.passed for c in checks if c.passed is not None and not c.advisory]
    return all(verdicts) if verdicts else None


def verdict_of(checks: list[Check]) -> str:
    """The result as a code: ``fail`` (a check fails), ``unverified`` (none fails, but one could not be made),
    ``pass``, or ``none`` (nothing to compare)."""
    if any(c.failed for c in checks):
        return "fail"
    if any(c.unverified for c in checks):
        return "unverified"
    return {True: "pass", None: "none"}[all_passed(checks)]


def design_checks(system: System, min_air_c: float, max_air_c: float,
                  cell_rise_c: float | None = None, defaults: amp.Installation = amp.Installation()
                  ) -> list[Check]:
    """Every check, in a stable order.

    With several controllers, the string voltages, the string fuses and the
    controller's own checks are made for each controller against its own
    groups (each controller has its own combiner), named ``max_string_voc[east
    tracker]`` and so on, with ``controller`` in their data.
    """
    parts, several = system.parts(), system.several_controllers

    def each(check_of):
        return [_for_controller(c, part) if several else c for part in parts for c in check_of(part)]

    return [*each(lambda part: [max_string_voc(part, min_air_c)]),
            *each(lambda part: [min_string_vmp(part, max_air_c, cell_rise_c)]),
            *conductor_current_checks(system, defaults), *each(lambda part: [string_fuse_check(part)]),
            *each(controller_checks), *protection_checks(system, defaults)]


def _for_controller(check: Check, part: System) -> Check:
    """A check of one controller's part (:meth:`System.for_controller`), named for that controller."""
    name = part.controller.name
    return replace(check, name=f"{check.name}[{name}]", data={**check.data, "controller": name},
                   detail=f"{name} ({', '.join(part.group_names)}): {check.detail}")
