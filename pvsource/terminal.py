"""Plain-text renderings of results for the terminal.

Pure functions from result records (the same dicts ``--json`` prints) to
text; no physics here.
"""

from __future__ import annotations

import math

from pvsource import cautions
from pvsource.ampacity import LIMIT_BY, PROTECTION_WORDS
from pvsource.module import Module, model_notes, temperature_coefficients
from pvsource.system import System


def _num(value, digits=2, unit=""):
    if value is None or (isinstance(value, float) and not math.isfinite(value)):
        return "n/a"
    text = f"{value:,.{digits}f}"
    return f"{text} {unit}".rstrip()


def _pct(value, digits=2):
    return "n/a" if value is None else f"{100.0 * value:.{digits}f} %"


def _rule(title: str) -> str:
    return f"\n{title}\n" + "-" * len(title)


def describe_load(system: System) -> str:
    if system.bank is not None:
        from pvsource.operating import controllers_in_words

        b = system.bank
        return (f"{b.chemistry.key} bank, {b.cells_in_series} cells x {b.strings} string(s), {b.capacity_ah:g} Ah, "
                f"through {controllers_in_words(system)}")
    load = system.load
    r_f = system.wiring.r_load_side_ohm
    through = f", through {r_f:.4g} ohm of load-side cables" if r_f else ""
    if load.kind == "mpp":
        return f"maximum-power tracker{through}"
    if load.kind == "resistor":
        return f"resistor of {load.resistance_ohm:.4g} ohm{through}"
    if load.kind == "voltage":
        return f"fixed {load.emf_v:.4g} V{through}"
    return f"battery: EMF {load.emf_v:.4g} V behind {load.resistance_ohm:.4g} ohm{through}"


def matching_note(m, i=None) -> str:
    """Where the point sits relative to the MPP, read from the matching ratio."""
    if m is None:
        return "no current flows: the ratio is undefined"
    if i is not None and i < 0:
        return ("current flows back into the array: the load's voltage is above what the array reaches, "
                "and the ratio says nothing about power transfer")
    if abs(m - 1.0) <= 0.02:
        return "at the maximum power point: the load's static resistance equals the source's dynamic resistance"
    if m < 1.0:
        return ("below V_mp, on the current-source side: the Norton view is the natural one, "
                "and the Thevenin EMF lies far above Voc")
    return "above V_mp, on the voltage-source side: the Thevenin view is the natural one"


def render_point(system: System, rec: dict) -> str:
    """The readable table of ``pvsource point``."""
    src, op = rec["source"], rec["operating_point"]
    th, no = rec["thevenin"], rec["norton"]
    lines = [f"ALERT: {a['message']}" for a in rec.get("alerts", ())]
    lines += [f"pvsource operating point: {system.name or system.source}", f"file        {system.source}",
              f"load        {describe_load(system)}"]
    for g in rec["groups"]:
        lines.append(f"group {g['name']:<6} {g['modules_per_string']} modules x {g['strings']} strings at "
                     f"{_num(g['irradiance_w_m2'], 0, 'W/m2')}, cells {_num(g['cell_temp_c'], 1, 'degC')}")

    lines.append(_rule("Source: the ideal array (no cables), key points"))
    lines.append(f"  Voc {_num(src['v_oc'], 2, 'V')}   Isc {_num(src['i_sc'], 3, 'A')}   "
                 f"Vmp {_num(src['v_mp'], 2, 'V')}   Imp {_num(src['i_mp'], 3, 'A')}   Pmp {_num(src['p_mp'], 1, 'W')}")

    several = len(rec.get("controllers", ())) > 1
    if several:
        lines.append(_rule("Each controller at its own combiner bus"))
        for c in rec["controllers"]:
            lines.append(f"  {c['name']} ({', '.join(c['groups'])}): V {_num(c['bus_v'], 2, 'V')}   "
                         f"I {_num(c['array_i_a'], 3, 'A')}   generated {_num(c['generated_w'], 1, 'W')}")
        lines.append(f"  at the bank terminals: {_num(rec['load']['v'], 2, 'V')}")
        lines.extend(_power_lines(rec))
        lines.extend(_shared_charging_lines(rec))
        lines.extend(f"\nNOTE: {n}" for n in rec.get("notes", ()))
        lines.append(render_caution_list(rec.get("cautions", cautions.GENERAL)))
        return "\n".join(lines)
    lines.append(_rule("Operating point at the array terminals (combiner bus)"))
    lines.append(f"  V {_num(op['v'], 2, 'V')}   I {_num(op['i'], 3, 'A')}   P {_num(op['p'], 1, 'W')}")
    lines.append(f"  at the load: {_num(rec['load']['v'], 2, 'V')}")

    lines.append(_rule("The array linearised at this point"))
    lines.append(f"  Thevenin   E_th {_num(th['e_v'], 2, 'V')} behind R_th {_num(th['r_ohm'], 4, 'ohm')}")
    lines.append(f"  Norton     I_N  {_num(no['i_a'], 3, 'A')} beside R_N {_num(no['r_ohm'], 4, 'ohm')}")
    lines.append(f"  matching ratio m = (V/I)/R_th = {_num(rec['matching_ratio'], 4)}")
    lines.append(f"    {matching_note(rec['matching_ratio'], op['i'])}")
    ls = rec["load_side"]
    lines.append(f"  seen from the load (array + feeder): E {_num(ls['e_v'], 2, 'V')} behind "
                 f"{_num(ls['r_ohm'], 4, 'ohm')}, m = {_num(ls['matching_ratio'], 4)}")

    lines.extend(_power_lines(rec))
    if "stage" in rec:
        b, c = rec["bank"], rec["controller"]
        lines.append(_rule("Charging"))
        lines.append(f"  bank: {b['chemistry']}, EMF {_num(b['emf_v'], 2, 'V')} behind {_num(b['r_ohm'], 4, 'ohm')} "
                     f"at {_pct(b['soc'], 0)} charge and {b['temp_c']:g} degC; stage target {_num(b['target_v'], 2, 'V')}")
        lines.append(f"  charge current {_num(rec['charge_current_a'], 2, 'A')}   stage {rec['stage']}   "
                     f"limited by: {rec['limit']}")
        extra = f"   duty {_pct(c['duty'], 1)}" if c["kind"] == "pwm" else ""
        lines.append(f"  {c['kind']} controller input {_num(c['input_v'], 2, 'V')}{extra}   "
                     f"curtailed {_num(rec['curtailed_w'], 1, 'W')}")
    lines.append(_rule("How far the linear model holds (exact curve vs Thevenin line)"))
    for tag, label in (("low", "-10 %"), ("high", "+10 %")):
        d = rec["linear_drift"][tag]
        lines.append(f"  V {label} = {_num(d['v'], 2, 'V')}: exact {_num(d['i_exact_a'], 3, 'A')}, "
                     f"linear {_num(d['i_linear_a'], 3, 'A')}, "
                     + ("error n/a (no current at the operating point)" if d["error_fraction_of_i"] is None
                        else f"error {_pct(d['error_fraction_of_i'])} of I"))

    lines.append(_rule("Superposition: shares of the load current (linearised network)"))
    sp = rec["superposition"]
    for name, share_a in sp["groups_a"].items():
        lines.append(f"  group {name:<12} {_num(share_a, 4, 'A')}")
    lines.append(f"  load EMF           {_num(sp['load_emf_a'], 4, 'A')}")
    lines.append(f"  sum                {_num(sp['total_a'], 4, 'A')}  (solved: {_num(op['i'], 4, 'A')})")

    if len(rec["groups"]) > 1:
        lines.append(_rule("Each group at its own string terminals"))
        for g in rec["groups"]:
            lines.append(f"  {g['name']:<10} V {_num(g['v'], 2, 'V')}  I {_num(g['i'], 3, 'A')}  "
                         f"P {_num(g['p'], 1, 'W')}  E_th {_num(g['thevenin']['e_v'], 1, 'V')}  "
                         f"R_th {_num(g['thevenin']['r_ohm'], 3, 'ohm')}  m {_num(g['matching_ratio'], 3)}")
    if rec["operating_point"]["i"] is not None and rec["operating_point"]["i"] < 0:
        lines.append("\nNOTE: current flows back into the array: the load's voltage is above what the array "
                     "can reach at these conditions.")
    lines.extend(f"\nNOTE: {n}" for n in rec.get("notes", ()))
    lines.append(render_caution_list(rec.get("cautions") or cautions.for_command("point", system)))
    return "\n".join(lines)


def _power_lines(rec: dict) -> list[str]:
    """Where the power goes: generated, cables, controller, bank, and the shortfall against the MPPs."""
    lines = [_rule("Power")]
    gen = rec["generated_w"]
    loss = rec["cable_loss_w"]
    lines.append(f"  generated by the modules  {_num(gen, 1, 'W')}")
    parts = {k: v for k, v in rec["losses_w"].items() if k not in ("array_cables", "controller", "bank_internal")}
    detail = ", ".join(f"{k.replace('_', ' ')} {_num(v, 2, 'W')}" for k, v in parts.items() if v)
    share = None if not gen or gen <= 0 else loss / gen
    lines.append(f"  lost in cables            {_num(loss, 2, 'W')} ({_pct(share)})" + (f": {detail}" if detail else ""))
    if "stage" in rec:
        lines.append(f"  lost in the controller    {_num(rec['losses_w']['controller'], 2, 'W')}")
        lines.append(f"  into the bank terminals   {_num(rec['delivered_w'], 1, 'W')}: stored "
                     f"{_num(rec['stored_w'], 1, 'W')}, bank internal {_num(rec['losses_w']['bank_internal'], 2, 'W')}")
    else:
        lines.append(f"  delivered to the load     {_num(rec['delivered_w'], 1, 'W')}")
    lines.append(f"  efficiency (delivered / generated) {_pct(rec['efficiency'])}")
    short, avail = rec["mpp_shortfall_w"], rec["groups_p_mp_w"]
    frac = None if not avail else short / avail
    lines.append(f"  shortfall against the MPP {_num(short, 1, 'W')} ({_pct(frac, 1)} of the {_num(avail, 1, 'W')} "
                 "the groups could give at their own MPPs)")
    if len(rec["groups"]) > 1 and len(rec.get("controllers", ())) <= 1:
        lines.append(f"  of which joining mismatched groups costs {_num(rec['parallel_mismatch_w'], 1, 'W')} "
                     "(their own MPPs against the directly paralleled array's)")
    return lines


def _shared_charging_lines(rec: dict) -> list[str]:
    """The bank's charge current, the controllers' sum, and each controller's part, stage and limit."""
    b = rec["bank"]
    lines = [_rule("Charging")]
    lines.append(f"  bank: {b['chemistry']}, EMF {_num(b['emf_v'], 2, 'V')} behind {_num(b['r_ohm'], 4, 'ohm')} "
                 f"at {_pct(b['soc'], 0)} charge and {b['temp_c']:g} degC; stage target {_num(b['target_v'], 2, 'V')}")
    lines.append(f"  charge current {_num(rec['charge_current_a'], 2, 'A')} (the controllers' sum)   "
                 f"stage {rec['stage']}   limited by: {rec['limit']}")
    for c in rec["controllers"]:
        extra = f"   duty {_pct(c['duty'], 1)}" if c["kind"] == "pwm" else ""
        lines.append(f"  {c['name']} ({c['kind']}): {_num(c['charge_current_a'], 2, 'A')}   stage {c['stage']}   "
                     f"limited by: {c['limit']}   input {_num(c['input_v'], 2, 'V')}{extra}   "
                     f"curtailed {_num(c['curtailed_w'], 1, 'W')}   loss {_num(c['loss_w'], 1, 'W')}")
    return lines


def render_caution_list(items) -> str:
    """The given cautions, in order (a command's own list ends with the closing deferral)."""
    return _rule("Cautions") + "\n" + "\n".join(f"  ! {c}" for c in items)


def _sizes_line(r: dict) -> list[str]:
    amp = f"no ampacity ({r['ampacity_note']})" if r["ampacity_a"] is None else \
        f"ampacity {_num(r['ampacity_a'], 1, 'A')} after corrections"
    if r.get("protection"):
        needed = "none in the preferred series" if r["protection_a"] is None else f"{r['protection_a']:g} A"
        amp += (f"; needs a {PROTECTION_WORDS[r['protection']]} of {needed}, and the conductor may sit behind "
                f"{_num(r['ampacity_limit_a'], 0, 'A')} at most (IEC 60364-4-43 433.1)")
    elif r["ampacity_a"] is not None:
        amp += (f"; the conductor design current may be {_num(r['ampacity_limit_a'], 1, 'A')} at most "
                f"({LIMIT_BY[r['ampacity_limit_by']]})")
    by_amp, by_drop, recommended = r["size_by_ampacity"], r["size_by_drop"], r["recommended_size"]
    binds = ("" if recommended is None else " (ampacity and drop agree)" if by_amp == by_drop == recommended else
             " (set by ampacity)" if recommended == by_amp else " (set by voltage drop)" if recommended == by_drop
             else "")
    lines = [f"  max current {_num(r['max_circuit_current_a'], 2, 'A')}, conductor design "
             f"{_num(r['design_current_a'], 2, 'A')} (x 1.25); {amp}",
             f"  size by ampacity {by_amp or '-'}   by drop {by_drop or '-'}   recommended {recommended or '-'}{binds}"]
    if r["recommendation_note"]:
        lines.append(f"    {r['recommendation_note']}")
    return lines




def fit_record(module: Module) -> dict:
    """A module fit as a JSON-ready dict."""
    p = module.parameters
    rec = {
        "module": module.name,
        "method": module.fit.method,
        "note": module.fit.note,
        "parameters": {
            "i_l_ref_a": p.i_l_ref_a, "i_o_ref_a": p.i_o_ref_a, "r_s_ohm": p.r_s_ohm,
            "r_sh_ref_ohm": p.r_sh_ref_ohm, "a_ref_v": p.a_ref_v, "alpha_sc_a_per_c": p.alpha_sc_a_per_c,
            "cells_in_series": p.cells_in_series, "eg_ref_ev": p.eg_ref_ev, "degdt_per_c": p.degdt_per_c,
            "adjust_pct": p.adjust_pct,
        },
        "stc": dict(module.fit.stc),
        "relative_error": dict(module.fit.relative_error),
        "notes": model_notes(module),
    }
    model = temperature_coefficients(p)
    ds = module.datasheet
    given = {"isc": ds.alpha_sc_a_per_c, "voc": ds.beta_voc_v_per_c, "pmax": ds.gamma_pmp_w_per_c} if ds else {}
    rec["temperature_coefficients"] = {
        label: {f"model_{unit}_per_c": model[f"d{short}_dt_{unit}_per_c"],
                "model_pct_per_c": model[f"{label}_temp_coeff_pct"],
                f"datasheet_{unit}_per_c": given.get(label),
                "datasheet_pct_per_c": getattr(ds, f"{label}_temp_coeff_pct", None)}
        for label, short, unit in (("isc", "isc", "a"), ("voc", "voc", "v"), ("pmax", "pmp", "w"))}
    if module.datasheet is not None:
        ds = module.datasheet
        rec["datasheet"] = {"v_oc": ds.v_oc, "i_sc": ds.i_sc, "v_mp": ds.v_mp, "i_mp": ds.i_mp,
                            "p_mp": ds.p_mp_w, "isc_temp_coeff_pct": ds.isc_temp_coeff_pct,
                            "voc_temp_coeff_pct": ds.voc_temp_coeff_pct,
                            "pmax_temp_coeff_pct": ds.pmax_temp_coeff_pct, "noct_c": ds.noct_c,
                            "cells_in_series": ds.cells_in_series}
    return rec


def render_fit(rec: dict) -> str:
    """The readable table of ``pvsource fit``."""
    p = rec["parameters"]
    lines = [f"pvsource module fit: {rec['module'] or '(unnamed module)'}",
             f"method      {rec['method']}: {rec['note']}"]
    lines.append(_rule(("CEC six-parameter" if rec["method"] == "six_parameter" else "De Soto") +
                       " single-diode parameters at STC"))
    rows = [("I_L  light current", p["i_l_ref_a"], "A"), ("I_0  saturation current", p["i_o_ref_a"], "A"),
            ("R_s  series resistance", p["r_s_ohm"], "ohm"), ("R_sh shunt resistance", p["r_sh_ref_ohm"], "ohm"),
            ("a    modified ideality n Ns kT/q", p["a_ref_v"], "V"),
            ("alpha_sc", p["alpha_sc_a_per_c"], "A/degC"), ("adjustment of alpha_sc (CEC)", p["adjust_pct"], "%")]
    for label, value, unit in rows:
        lines.append(f"  {label:<34} {value:.6g} {unit}")
    lines.append(f"  {'cells in series':<34} {p['cells_in_series']}")
    lines.append(_rule("Check: STC points recomputed from the parameters"))
    ds = rec.get("datasheet")
    header = f"  {'':<6} {'model':>12}" + (f" {'datasheet':>12} {'error':>10}" if ds else "")
    lines.append(header)
    units = {"v_oc": "V", "i_sc": "A", "v_mp": "V", "i_mp": "A", "p_mp": "W"}
    for k, unit in units.items():
        row = f"  {k:<6} {rec['stc'][k]:>10.4f} {unit}"
        if ds:
            row += f" {ds[k]:>10.4f} {unit} {100 * rec['relative_error'][k]:>+9.4f} %"
        lines.append(row)
    lines.append(_rule("Temperature coefficients at STC [%/degC]: the model's (finite differences)"))
    lines.append(f"  {'':<6} {'model':>12}" + (f" {'datasheet':>12}" if ds else ""))
    for k, tc in rec["temperature_coefficients"].items():
        given = tc["datasheet_pct_per_c"]
        lines.append(f"  {k:<6} {tc['model_pct_per_c']:>+12.4f}"
                     + (f" {'not given' if given is None else f'{given:+.4f}':>12}" if ds else ""))
    if ds and ds.get("noct_c") is not None:
        lines.append(f"  NOCT (datasheet) {ds['noct_c']:g} degC")
    lines.extend(f"\nNOTE: {n}" for n in rec["notes"])
    return "\n".join(lines)


def _options_table(options, indent="      ") -> list[str]:
    lines = [f"{indent}{'size':<11}{'loop R':>11}{'drop':>10}{'drop %':>8}{'loss':>10}{'loss %':>8}{'metal':>9}"]
    for o in options:
        lines.append(f"{indent}{o['size']:<11}{o['resistance_ohm']:>7.4f} ohm{o['drop_v']:>8.3f} V"
                     f"{_num(o['drop_pct'], 2):>8}{o['loss_w']:>8.2f} W{_num(o['loss_pct'], 2):>8}"
                     f"{o['mass_kg']:>6.2f} kg")
    return lines


def render_wire(system: System, rec: dict, conditions: str) -> str:
    """The readable table of ``pvsource wire`` for a system file."""
    lines = [f"pvsource wiring budget: {system.name or system.source}", f"file        {system.source}",
             f"design point {conditions}; load: {describe_load(system)}"]
    budget = rec["budget_pct"]
    lines.append(f"budget      {budget:g} % voltage drop per circuit (PV side and battery side apart), "
                 "shared along each path by length")
    if not rec["runs"]:
        lines.append("\nThe system file has no [[cable]] runs.")
    for r in rec["runs"]:
        where = f", group {r['group']}" if r["group"] else ""
        size = r["size"] or "given as ohm/km"
        lines.append(_rule(f"{r['name']} ({r['role']}{where}): {size} {r['material']}, {r['length_m']:g} m one way"
                           + (f", {r['conductors_in_parallel']} in parallel" if r["conductors_in_parallel"] > 1 else "")))
        each = " per string" if r["copies"] > 1 else ""
        lines.append(f"  current {_num(r['current_a'], 2, 'A')}{each}   loop R {_num(r['resistance_ohm'], 4, 'ohm')} "
                     f"at {r['temp_c']:g} degC   circuit {_num(r['circuit_v'], 2, 'V')}")
        flag = ""
        if r["breaks_budget"]:
            flag = "   OVER BUDGET"
        lines.append(f"  drop {_num(r['drop_v'], 3, 'V')} ({_num(r['drop_pct'], 2)} %)   loss "
                     f"{_num(r['loss_w'], 2, 'W')} ({_num(r['loss_pct'], 2)} % of {_num(r['power_w'], 1, 'W')})"
                     + (f" over {r['copies']} strings" if r["copies"] > 1 else "") + flag)
        lines.extend(_sizes_line(r))
        if r["options"]:
            lines.append("  this size and the next ones up:")
            lines.extend(_options_table(r["options"]))
    t = rec["total"]
    lines.append(_rule("Total"))
    lines.append(f"  cable loss {_num(t['loss_w'], 2, 'W')} ({_num(t['loss_pct'], 2)} % of the generated power)")
    for c in rec["circuits"]:
        path = f", worst path from group {c['worst_group']}" if c["worst_group"] else ""
        lines.append(f"  {c['circuit']} circuit{path}: drop {_num(c['drop_v'], 3, 'V')} ({_num(c['drop_pct'], 2)} % "
                     f"against {c['budget_pct']:g} %)" + ("   OVER BUDGET" if c["over_budget"] else ""))
    over = rec["over_budget"]
    lines.append(f"  runs over their share of the budget: {', '.join(over) if over else 'none'}")
    lines.append(render_caution_list(rec["cautions"]))
    return "\n".join(lines)


def render_quick_wire(rec: dict) -> str:
    """The readable result of ``pvsource wire`` without a system file."""
    lines = [f"pvsource wiring: {rec['size']} {rec['material']}, {rec['length_m']:g} m one way "
             f"(a {2 * rec['length_m']:g} m loop), {rec['current_a']:g} A at {rec['temp_c']:g} degC"
             + (f", {rec['conductors_in_parallel']} in parallel" if rec["conductors_in_parallel"] > 1 else "")]
    lines.append(f"  loop resistance {rec['resistance_ohm']:.5f} ohm   drop {rec['drop_v']:.3f} V"
                 + (f" ({rec['drop_pct']:.2f} % of the circuit)" if rec["drop_pct"] is not None else "")
                 + f"   loss {rec['loss_w']:.2f} W   metal {rec['mass_kg']:.2f} kg")
    inst = rec["installation"]
    lines.append(f"  installed: {inst['install']}, {inst['insulation_c']:g} degC insulation, {inst['ambient_c']:g} degC "
                 f"ambient, {inst['conductors_together']} conductors together, "
                 + (f"{PROTECTION_WORDS[inst['protection']]}" if rec["size"].endswith("mm2") else
                    f"{inst['termination_c']:g} degC terminations")
                 + (f"; drop budget {rec['budget_pct']:g} %" if rec["budget_pct"] is not None else ""))
    lines.extend(_sizes_line(rec))
    if rec["options"]:
        lines.append("  this size and the next ones up:")
        lines.extend(_options_table(rec["options"], "    "))
    lines.append(render_caution_list(rec["cautions"]))
    return "\n".join(lines)


def render_checks(system: System, rec: dict) -> str:
    """The readable table of ``pvsource check``."""
    lines = [f"pvsource design checks: {system.name or system.source}", f"file        {system.source}",
             f"site        record low {rec['min_air_c']:g} degC, record high {rec['max_air_c']:g} degC "
             f"(cells {rec['cell_rise_c']:g} degC above the air in full sun"
             + (", from the module's NOCT)" if "NOCT" in rec.get("cell_rise_basis", "") else ")")]
    lines.append(_rule("Checks"))
    for c in rec["checks"]:
        state = {"pass": "pass", "fail": "FAIL", "advisory": "note", "none": "----",
                 "unverified": "UNVERIFIED"}[c["verdict"]]
        if c["limit"] is not None:
            limit = f"{'<=' if c['sense'] == 'max' else '>='} {c['limit']:.2f} {c['unit']}"
        else:
            limit = "ampacity unknown" if c["verdict"] == "unverified" else "no limit given"
        margin = "" if c["margin"] is None else f"  margin {100 * c['margin']:+.1f} %"
        lines.append(f"  [{state}] {c['name']}: {c['value']:.2f} {c['unit']} ({limit}){margin}")
        lines.append(f"         {c['detail']}")
        lines.append(f"         basis: {c['basis']}")
    if rec["design_currents"]:
        lines.append(_rule("Design currents of the runs (NEC 690.8)"))
        for d in rec["design_currents"]:
            rating = "no ampacity" if d["ampacity_a"] is None else (
                f"ampacity {d['ampacity_a']:.1f} A   limit {d['ampacity_limit_a']:.1f} A "
                f"({LIMIT_BY[d['ampacity_limit_by']]})")
            lines.append(f"  {d['run']:<24} circuit {d['circuit_current_a']:7.2f} A   conductor "
                         f"{d['conductor_current_a']:7.2f} A   {rating}")
    lines.extend(f"\nNOTE: {n}" for n in rec.get("notes", ()))
    verdict = {"pass": "all checks pass", "fail": "some checks FAIL (exit code 1)", "none": "nothing to compare",
               "unverified": "NOT VERIFIED: no check fails, but a conductor's ampacity is unknown, so the design "
                             "is not shown safe (exit code 1)"}
    lines.append(f"\n{verdict[rec['verdict']]}")
    unchecked = [c["name"] for c in rec["checks"] if c["verdict"] == "none"]
    if unchecked and rec["verdict"] != "none":
        # A pass covers only what had a limit: say what was not checked.
        lines.append(f"{len(unchecked)} not checked, no limit given in the file: {', '.join(unchecked)}")
    lines.append(render_caution_list(rec["cautions"]))
    return "\n".join(lines)


def render_sweep(system: System, rows, design: dict, plot) -> str:
    """The readable table of ``pvsource sweep``."""
    unit = design["unit"]
    lines = [f"pvsource sweep over {design['variable']}: {system.name or system.source}",
             f"design point: m = {_num(design['matching_ratio'], 3)}, delivered {_num(design['delivered_w'], 1, 'W')}, "
             f"array linearised as E {_num(design['e_v'], 2, 'V')} behind {_num(design['r_ohm'], 4, 'ohm')}",
             f"swept: {design['changes']}"]
    if design.get("replaced"):
        lines.append(f"REPLACED: {design['replaced']}; the other results describe that changed system")
    lines.append(f"\n{'value':>12} {'delivered':>11} {'effic.':>8} {'m':>9} {'charge':>9} {'array P':>10} "
                 f"{'linear P':>10} {'linear eff':>10}")
    lines.append(f"{'[' + unit + ']':>12} {'[W]':>11} {'[%]':>8} {'[-]':>9} {'[A]':>9} {'[W]':>10} {'[W]':>10} "
                 f"{'[%]':>10}")
    best = rows["delivered_w"].astype(float).idxmax() if rows["delivered_w"].notna().any() else None
    for k, r in rows.iterrows():
        value = r["value"] if isinstance(r["value"], str) else f"{r['value']:.4g}"
        charge = "" if r["charge_current_a"] is None or not math.isfinite(float(r["charge_current_a"])) \
            else f"{r['charge_current_a']:.2f}"
        eff = "n/a" if not math.isfinite(r["efficiency"]) else f"{100 * r['efficiency']:.2f}"
        flag = "  <- most delivered" if k == best else ""
        lin_eff = "n/a" if not math.isfinite(r["linear_efficiency"]) else f"{100 * r['linear_efficiency']:.2f}"
        lines.append(f"{value:>12} {r['delivered_w']:>11.1f} {eff:>8} {_num(r['matching_ratio'], 4):>9} "
                     f"{charge:>9} {r['p']:>10.1f} {_num(r['linear_p_w'], 1):>10} {lin_eff:>10}{flag}")
    for _, r in rows.iterrows():
        if r.get("alerts"):
            value = r["value"] if isinstance(r["value"], str) else f"{r['value']:.4g}"
            lines.append(f"ALERT at {value} {unit}: {', '.join(r['alerts'])}")
    lines.append("\n'array P' is the exact power at the array terminals; the linear columns are what the array's "
                 "Thevenin equivalent at the design point predicts there at the same matching ratio: its power "
                 "peaks at m = 1 with 50 % efficiency. An open circuit has no ratio (n/a).")
    if plot is not None:
        lines.append(f"plot written to {plot}")
    lines.append(render_caution_list(cautions.for_command("sweep", system)))
    return "\n".join(lines)


def alert_hour_lines(summary: dict) -> list[str]:
    """One ``ALERT`` line per alert that fired during the span, with its hours."""
    from pvsource.alerts import ALERTS

    hours = summary.get("alert_hours") or {}
    return [f"ALERT: {a.label}: {hours[a.name]:,.1f} h ({a.basis})" for a in ALERTS if (hours.get(a.name) or 0) > 0]


#: Season lines that only a study with a bank has.
BANK_ONLY_ROWS = ("coulombic_loss_kwh", "load_disconnected_hours")


def render_season(system: System, summary: dict, folder, notes=()) -> str:
    """The readable summary of ``pvsource season`` and ``pvsource demo``."""
    lines = [f"pvsource season study: {system.name or system.source}",
             f"{summary['start']} to {summary['end']}, {summary['steps']:,} steps of {summary['step_h']:g} h"]
    lines.extend(alert_hour_lines(summary))
    lines.append(_rule("Energy over the span"))
    rows = (("poa_insolation_kwh_m2", "plane-of-array insolation (first group)", "kWh/m2"),
            ("energy_mpp_kwh", "available at the groups' MPPs", "kWh"),
            ("energy_generated_kwh", "generated", "kWh"), ("wiring_loss_kwh", "lost in cables", "kWh"),
            ("controller_loss_kwh", "lost in the controller", "kWh"),
            ("curtailed_kwh", "curtailed by the controller", "kWh"),
            ("energy_delivered_kwh", "into the bank or load", "kWh"), ("energy_stored_kwh", "stored", "kWh"),
            ("coulombic_loss_kwh", "  of it lost to coulombic efficiency", "kWh"),
            ("load_kwh", "load", "kWh"), ("unmet_load_kwh", "load not met", "kWh"),
            ("load_disconnected_hours", "loads disconnected (low-voltage disconnect)", "h"))
    for key, label, unit in rows:
        if key in BANK_ONLY_ROWS and key not in summary:
            continue
        lines.append(f"  {label:<42} {_num(summary.get(key), 1):>10} {unit}")
    if "min_soc" in summary:
        lines.append(_rule("Bank"))
        lines.append(f"  lowest state of charge {_pct(summary['min_soc'], 1)}; days reaching full "
                     f"{summary['days_reaching_full']}; peak charge {_num(summary['peak_charge_current_a'], 1, 'A')}, "
                     f"95th percentile {_num(summary['p95_charge_current_a'], 1, 'A')}")
        stages = ", ".join(f"{k} {v:,.0f} h" for k, v in summary.get("hours_by_stage", {}).items())
        limits = ", ".join(f"{k} {v:,.0f} h" for k, v in summary.get("hours_by_limit", {}).items())
        lines.append(f"  hours by stage: {stages}")
        lines.append(f"  hours by limit: {limits}")
    if "generator_hours" in summary:
        lines.append(_rule("Backup generator"))
        lines.append(f"  ran {_num(summary['generator_hours'], 1, 'h')} in {summary['generator_starts']} starts; "
                     f"output {_num(summary['generator_energy_kwh'], 1, 'kWh')}, of which "
                     f"{_num(summary['generator_load_kwh'], 1, 'kWh')} carried the load and "
                     f"{_num(summary['generator_stored_kwh'], 1, 'kWh')} was stored; "
                     f"fuel {_num(summary['generator_fuel_l'], 1, 'l')}")
    if len(summary.get("controllers", ())) > 1:
        lines.append(_rule("Each controller"))
        for c in summary["controllers"]:
            limits = ", ".join(f"{k} {v:,.0f} h" for k, v in c["hours_by_limit"].items())
            lines.append(f"  {c['name']} ({', '.join(c['groups'])}): generated {_num(c['energy_generated_kwh'], 1)} kWh, "
                         f"stored {_num(c['energy_stored_kwh'], 1)} kWh, curtailed {_num(c['curtailed_kwh'], 1)} kWh, "
                         f"lost in it {_num(c['controller_loss_kwh'], 1)} kWh; peak "
                         f"{_num(c['peak_charge_current_a'], 1, 'A')}")
            lines.append(f"    hours by limit: {limits}")
    lines.append(_rule("Month by month [kWh]"))
    lines.append(f"  {'month':<8}{'at MPPs':>10}{'generated':>11}{'cables':>9}{'curtailed':>11}{'stored':>9}")
    for m in summary["monthly"]:
        lines.append(f"  {m['month']:<8}{_num(m['energy_mpp_kwh'], 1):>10}{_num(m['energy_generated_kwh'], 1):>11}"
                     f"{_num(m['wiring_loss_kwh'], 2):>9}{_num(m['curtailed_kwh'], 1):>11}"
                     f"{_num(m['energy_stored_kwh'], 1):>9}")
    if notes:
        lines.append(_rule("Notes"))
        lines.extend(f"  - {n}" for n in notes)
    lines.append(f"\nTables, figures and report.html written to {folder}")
    lines.append(render_caution_list(cautions.for_command("season", system)))
    return "\n".join(lines)


def render_explore(ranked, folder, years: float | None = None, caution_items=None) -> str:
    """The ranked table of ``pvsource explore``: the choices, what each delivers, leaves unmet, runs the
    generator and holds in reserve, and its lifetime cost (the parts are columns of the results files)."""
    from pvsource.explore import COST_COLUMNS, RESULTS

    shown = {"energy_delivered_kwh_per_year": ("kWh/yr out", 12, 1),
             "wiring_loss_kwh_per_year": ("cable kWh/yr", 12, 2),
             "unmet_load_kwh_per_year": ("unmet kWh/yr", 12, 1), "generator_hours_per_year": ("gen h/yr", 8, 0),
             "autonomy_days": ("autonomy d", 10, 1), "lifetime_cost": ("lifetime cost", 13, 2)}
    choice_cols = list(ranked.columns[:ranked.columns.get_loc("excluded")].drop(["rank", "id"], errors="ignore"))
    lines = [f"pvsource design search: {len(ranked)} combinations, {int((~ranked['excluded']).sum())} feasible"]
    head = "  ".join(f"{c:>14}" for c in choice_cols)
    lines.append(f"\n{'rank':>4}  {head}  " + " ".join(f"{label:>{width}}" for label, width, _ in shown.values())
                 + "  front")

    def cell(r, column, width, digits):
        value = r.get(column)
        return f"{'-':>{width}}" if value is None or value != value else f"{value:>{width},.{digits}f}"

    for _, r in ranked.iterrows():
        values = "  ".join(f"{str(r[c]):>14}" for c in choice_cols)
        if r["excluded"]:
            lines.append(f"{'-':>4}  {values}  excluded: {r['reason']}")
        else:
            lines.append(f"{int(r['rank']):>4}  {values}  "
                         + " ".join(cell(r, c, w, d) for c, (_, w, d) in shown.items())
                         + f"  {'*' if r['pareto'] else ''}")
    over = f" over {years:g} years" if years is not None else ""
    lines.append(f"\nlifetime cost{over}: conductor metal and the bank once; cable loss, generator fuel and unmet "
                 f"load each year. Its parts ({', '.join(COST_COLUMNS)}) are columns of {' and '.join(RESULTS)}.")
    lines.append("kWh/yr out: energy delivered into the bank or load per year; cable kWh/yr: lost in the cables; "
                 "unmet kWh/yr: load not supplied; gen h/yr: generator run hours; autonomy d: days.")
    lines.append("autonomy: the bank's usable energy (down to the state of charge its loads are disconnected at) "
                 "over the mean daily load.")
    lines.append("* on the front: no other combination is both cheaper over its life and delivers more.")
    lines.append(f"Results written to {folder}")
    lines.append(render_caution_list(caution_items or cautions.for_command("explore")))
    return "\n".join(lines)
