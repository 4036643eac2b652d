"""Design checks of string voltage and circuit current, each with its basis.

The checks compare the array against the site's extreme air temperatures and
the equipment's limits:

- the highest string Voc at the record low (cells at air temperature: at
  first light the cells have not warmed yet; common practice) against the
  controller's maximum input voltage;
- the lowest string Vmp at the record high, with cells a stated rise above
  the air in full sun, against the lowest voltage the controller or bank needs;
- the maximum circuit current 1.25 x Isc and the conductor current
  1.25 x 1.25 x Isc of each PV-side run against its rating, where given.

Every check names its basis: a published standard, or "common practice".

References
----------
.. [1] NFPA 70, National Electrical Code (2023), 690.7(A) (maximum PV system
   voltage, with Table 690.7(A) for crystalline silicon) and 690.8(A)(1),
   690.8(B)(1) (circuit current and conductor sizing factors).
"""

from __future__ import annotations

from dataclasses import asdict, dataclass

import numpy as np
from pvlib import pvsystem

from pvsource.module import STC_CELL_TEMP_C, STC_IRRADIANCE_W_M2, parameters_at
from pvsource.system import System
from pvsource.wiring import PV_SIDE_ROLES

# Common practice: in full sun, cells of rack- or roof-mounted modules run
# some 25-35 degC above the air; the high end makes the low-Vmp check cautious.
DEFAULT_CELL_RISE_C = 35.0
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
    """

    name: str
    value: float
    limit: float | None
    unit: str
    passed: bool | None
    basis: str
    sense: str = "max"
    detail: str = ""

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
        rec["margin"] = self.margin
        return rec


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
                 "common practice", "max", detail)


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


def min_string_vmp(system: System, max_air_c: float, cell_rise_c: float = DEFAULT_CELL_RISE_C) -> Check:
    """Lowest Vmp reaching the controller in full sun at the record high, against what the equipment needs.

    The string's Vmp (single-diode model, 1000 W/m2, cells ``cell_rise_c``
    above the air) less the drop of the PV-side cables at that current, then
    compared with the controller's minimum input; without one, with the
    bank's absorption voltage (plus the tracker's headroom), or the
    battery or voltage load's EMF.
    """
    from pvsource import bank as bank_model  # a bank is optional; import where used

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
        headroom = c.min_headroom_v if c is not None and c.kind == "mppt" else 0.0
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
                 f"common practice: Vmp in full sun with cells {cell_rise_c:g} degC above the hottest air, "
                 "at the controller's input", "min", detail)


def design_currents(system: System) -> list[dict]:
    """Maximum circuit current and conductor design current of every PV-side run.

    1.25 x the Isc of the strings the run carries (NEC 690.8(A)(1)), and 1.25
    times that for the conductor (NEC 690.8(B)(1)).
    """
    isc = module_isc_stc(system)
    strings = {g.name: g.strings for g in system.groups}
    total = sum(strings.values())
    out = []
    for run in system.cables:
        if run.role not in PV_SIDE_ROLES:
            continue
        carried = 1 if run.role == "string" else strings[run.group] if run.role == "home-run" else total
        circuit = CIRCUIT_CURRENT_FACTOR * carried * isc
        out.append({"run": run.name, "role": run.role, "strings_carried": carried,
                    "circuit_current_a": circuit,
                    "conductor_current_a": CONDUCTOR_CURRENT_FACTOR * circuit,
                    "ampacity_a": run.ampacity_a})
    return out


def conductor_current_checks(system: System) -> list[Check]:
    """Conductor design current against the rating, for the runs whose rating is given."""
    checks = []
    for d in design_currents(system):
        if d["ampacity_a"] is None:
            continue
        checks.append(Check(
            f"conductor_current[{d['run']}]", d["conductor_current_a"], d["ampacity_a"], "A",
            _compare(d["conductor_current_a"], d["ampacity_a"], "max"),
            "NEC 690.8(A)(1) and 690.8(B): 1.25 x Isc, and 1.25 x that for the conductor", "max",
            f"{d['strings_carried']} string(s) x Isc {module_isc_stc(system):g} A x 1.25 x 1.25 against the "
            "given rating; conservative when the rating already includes temperature and bundling corrections "
            "(690.8(B)(2) then asks only 1.25 x Isc)"))
    return checks


def design_checks(system: System, min_air_c: float, max_air_c: float,
                  cell_rise_c: float = DEFAULT_CELL_RISE_C) -> list[Check]:
    """Every check, in a stable order."""
    return [max_string_voc(system, min_air_c), min_string_vmp(system, max_air_c, cell_rise_c),
            *conductor_current_checks(system)]
