"""The season study as one self-contained HTML page.

Words at the edge: every label is a phrase with its unit, never a key of the
summary. The page reads top-down as an engineer reviews a design: what needs
attention, the headline figures, what was studied, where the energy went,
month by month, the figures, the checks, then notes and cautions. A print
stylesheet turns the browser's print-to-PDF into a clean document.
"""

from __future__ import annotations

import base64
import html
import math
from datetime import datetime, timezone

import numpy as np

from pvsource import bank as bank_model
from pvsource import cautions

# Unmet load or an emptied bank below these is rounding, not a finding.
UNMET_SHARE_NOTED = 0.001
EMPTY_SOC = 0.005

FIGURE_CAPTIONS = {
    "monthly_energy.png": "Where each month's available energy went: stored, lost on the way, curtailed, or left on "
                          "the curves. With a generator, below: each month's load by where it came from, what the "
                          "generator put into the bank, and its run hours.",
    "wiring_loss_heatmap.png": "Cable loss as a share of the power generated, by hour of day and month.",
    "charge_duration.png": "How many hours of the span the bank saw at least each charge current.",
    "state_of_charge.png": "The bank's state of charge: the range within each day and its daily mean.",
    "iv_curves.png": "The array's I-V and P-V curves at its terminals at telling hours. Each operating point carries "
                     "its Thevenin tangent, the linear model the tool reasons with: it holds where the dashed line "
                     "stays on the curve.",
}

CHECK_LABELS = {
    "max_string_voc": "Highest string open-circuit voltage, at the record low",
    "min_string_vmp": "Lowest string maximum-power voltage, at the record high",
    "conductor_current": "Conductor design current against its ampacity",
    "string_fuse": "String fuse",
    "controller_input_isc": "Array short-circuit current at the controller's input",
    "controller_output_power": "Array power against the controller's output",
    "fuse_rating": "Fuse rating against its conductor",
    "bank_short_circuit": "Bank fault current against the fuse's interrupting rating",
}
ROLE_WORDS = {"string": "string lead", "home-run": "home run to the combiner", "feeder": "feeder to the controller",
              "bank": "controller to bank", "interconnect": "bank interconnect"}
MOUNTING_WORDS = {"open_rack": "open rack, glass-glass", "open_rack_polymer": "open rack, glass-polymer",
                  "close_roof": "close to the roof", "insulated_back": "insulated back",
                  "faiman_open": "open rack (Faiman model)"}
METHOD_WORDS = {"six_parameter": "six-parameter fit (Dobos)",
                "desoto": "De Soto fit to the datasheet", "batzelis": "Batzelis explicit estimate from the datasheet",
                "given": "entered directly"}
CONTROLLER_WORDS = {"mppt": "maximum power point tracker", "pwm": "PWM switch", "direct": "direct connection"}
LOAD_WORDS = {"mpp": "a maximum-power tracker at the end of the feeder", "resistor": "a resistor",
              "voltage": "a fixed voltage", "battery": "a battery (EMF behind a resistance)"}

CSS = """
:root{--ink:#1f2d36;--soft:#5b6b74;--rule:#e4e0d8;--paper:#f7f5f0;--slate:#2f4858;--amber:#d08c2a;
--sage:#7a9e7e;--red:#b3261e}
*{box-sizing:border-box}
body{margin:0;background:var(--paper);color:var(--ink);font:15px/1.5 system-ui,-apple-system,"Segoe UI",sans-serif}
main{max-width:66rem;margin:1.5rem auto;overflow-wrap:break-word;background:#fff;padding:2rem 2.4rem 2.5rem;
box-shadow:0 1px 3px rgba(0,0,0,.08)}
header{border-left:6px solid var(--amber);padding:.2rem 0 .2rem 1rem;margin-bottom:1.2rem}
header h1{margin:0;font-size:1.55rem;letter-spacing:.01em}
header p{margin:.25rem 0 0;color:var(--soft)}
h2{font-size:.95rem;text-transform:uppercase;letter-spacing:.08em;color:var(--slate);margin:2.2rem 0 .6rem;
padding-bottom:.3rem;border-bottom:1px solid var(--amber)}
h3{font-size:1rem;margin:1.2rem 0 .3rem;color:var(--slate)}
p.lead{color:var(--soft);margin:.2rem 0 .6rem}
.tiles{display:grid;grid-template-columns:repeat(auto-fit,minmax(9.5rem,1fr));gap:.7rem;margin:.6rem 0}
.tile{border:1px solid var(--rule);border-top:3px solid var(--slate);padding:.55rem .75rem;background:#fcfbf8}
.tile b{display:block;font-size:1.35rem;font-variant-numeric:tabular-nums}
.tile span{color:var(--soft);font-size:.82rem}
.tile.bad{border-top-color:var(--red)}.tile.bad b{color:var(--red)}
ul.findings{list-style:none;padding:0;margin:.4rem 0}
ul.findings li{padding:.45rem .8rem;margin:.35rem 0;border-left:5px solid var(--sage);background:#f0f5f0}
ul.findings li.alert{border-left-color:var(--red);background:#fbeceb}
ul.findings li.warn{border-left-color:var(--amber);background:#fdf3e2}
ul.findings li.info{border-left-color:#b9c2c7;background:#f4f5f6}
ul.findings li strong{margin-right:.4rem}
table{border-collapse:collapse;margin:.4rem 0 .8rem;font-size:.9rem;width:auto}
th,td{padding:.28rem .65rem;text-align:left;vertical-align:top}
thead th{border-bottom:2px solid var(--slate);font-weight:600;color:var(--slate);font-size:.82rem}
tbody td{border-bottom:1px solid var(--rule)}
tbody tr:nth-child(even) td{background:#fbfaf7}
td.num,th.num{text-align:right;font-variant-numeric:tabular-nums}
td.num,.nowrap{white-space:nowrap}
td.val{text-align:right;font-variant-numeric:tabular-nums}
table.compact{font-size:.84rem}
table.compact th{font-size:.76rem}
tfoot td{border-top:2px solid var(--slate);font-weight:600}
tr.fail td{background:#fbeceb !important}
td.warn{color:#8a4b00;font-weight:600}
.badge{display:inline-block;padding:0 .45rem;border-radius:3px;font-size:.8rem;font-weight:700;letter-spacing:.04em}
.badge.pass{color:#2f6b3a;border:1px solid #8fb897}
.badge.fail{color:#fff;background:var(--red)}
.badge.none{color:var(--soft);border:1px solid var(--rule)}
.badge.advice{color:#8a4b00;border:1px solid var(--amber)}
.pair{display:flex;flex-wrap:wrap;gap:0 2.5rem;align-items:flex-start}
.pair>div{flex:0 1 auto;max-width:30rem}
figure{margin:1.2rem 0;break-inside:avoid}
figure img{max-width:100%;display:block;border:1px solid var(--rule)}
figcaption{color:var(--soft);font-size:.86rem;margin-top:.3rem;max-width:48rem}
ul.cautions li{margin:.25rem 0}
footer{margin-top:2rem;color:var(--soft);font-size:.8rem;border-top:1px solid var(--rule);padding-top:.6rem}
@media print{
@page{size:A4;margin:14mm 13mm}
body{background:#fff;font-size:9.5pt}
main{max-width:none;margin:0;padding:0;box-shadow:none}
h2{break-after:avoid;margin-top:1.3rem}
h3,h2+p.lead{break-after:avoid}
.tile b{font-size:1.1rem}
table,figure,.tile,ul.findings li,.pair>div{break-inside:avoid}
.pair{flex-wrap:nowrap;gap:0 1.2rem}
.pair>div{max-width:none;flex:1 1 0}
.tiles{grid-template-columns:repeat(auto-fit,minmax(7rem,1fr))}
figure img{max-height:10.5cm;width:auto;border:none}
*{-webkit-print-color-adjust:exact;print-color-adjust:exact}
}
"""


def _esc(value) -> str:
    """Escaped text, with the ASCII unit spellings of messages shown as printed units."""
    text = str(value).replace("degC", "°C").replace("W/m2", "W/m²").replace("mm2", "mm²")
    return html.escape(text)


def fmt(value, digits: int = 1, unit: str = "") -> str:
    """A number for the page: thousands separated, n/a for missing or not finite."""
    if value is None or (isinstance(value, (float, np.floating)) and not math.isfinite(value)):
        return "n/a"
    if isinstance(value, (int, float, np.integer, np.floating)):
        text = f"{value:,.{digits}f}"
        return f"{text} {unit}" if unit else text
    return str(value)


def pct(fraction, digits: int = 1) -> str:
    return "n/a" if fraction is None or not math.isfinite(fraction) else f"{100 * fraction:.{digits}f} %"


def table(head, rows, numeric=(), row_classes=None, cell_classes=None, foot=None, css_class="") -> str:
    """An HTML table; ``numeric`` are column indexes aligned right."""
    def cells(row, tag, k_row=None):
        out = []
        for k, c in enumerate(row):
            classes = ["num"] if k in numeric else []
            if cell_classes and k_row is not None and (k_row, k) in cell_classes:
                classes.append(cell_classes[(k_row, k)])
            attr = f' class="{" ".join(classes)}"' if classes else ""
            out.append(f"<{tag}{attr}>{c}</{tag}>")
        return "".join(out)

    def opening(k):
        return f'<tr class="{row_classes[k]}">' if row_classes and row_classes[k] else "<tr>"

    body = "".join(f"{opening(k)}{cells(r, 'td', k)}</tr>" for k, r in enumerate(rows))
    tfoot = f"<tfoot><tr>{cells(foot, 'td')}</tr></tfoot>" if foot else ""
    attr = f' class="{css_class}"' if css_class else ""
    return f"<table{attr}><thead><tr>{cells(head, 'th')}</tr></thead><tbody>{body}</tbody>{tfoot}</table>"


def pairs(rows) -> str:
    """A two-column table of (label, value) pairs."""
    body = "".join(f"<tr><td class=nowrap>{_esc(label)}</td><td class=val>{_esc(value)}</td></tr>"
                   for label, value in rows)
    return f"<table><tbody>{body}</tbody></table>"


def span_words(summary: dict) -> str:
    """"1 Jan 2025 00:00 to 31 Dec 2025 23:00 (UTC+01:00), 8,760 steps of 1 h"."""
    import pandas as pd

    try:
        start, end = pd.Timestamp(summary["start"]), pd.Timestamp(summary["end"])
    except (ValueError, TypeError):
        return f"{summary['start']} to {summary['end']}, {summary['steps']:,} steps of {summary['step_h']:g} h"
    offset = start.strftime("%z")
    zone = f" (UTC{offset[:3]}:{offset[3:]})" if offset else ""
    when = lambda t: f"{t.day} {t.strftime('%b %Y %H:%M')}"  # noqa: E731
    minutes = summary["step_h"] * 60.0
    step = f"{summary['step_h']:g} h" if minutes >= 60 else f"{minutes:g} min"
    return f"{when(start)} to {when(end)}{zone}, {summary['steps']:,} steps of {step}"


def _facing(azimuth_deg: float) -> str:
    points = ("north", "north-east", "east", "south-east", "south", "south-west", "west", "north-west")
    return f"{azimuth_deg:g}° ({points[int(((azimuth_deg % 360) + 22.5) // 45) % 8]})"


def check_label(name: str) -> str:
    """Words for a check's stable identifier, e.g. ``conductor_current[feeder]``."""
    base, _, rest = name.partition("[")
    label = CHECK_LABELS.get(base, base.replace("_", " ").capitalize())
    return f"{label}: {rest.rstrip(']')}" if rest else label


# ---------------------------------------------------------------- sections

def alert_items(summary: dict) -> list:
    """One finding per alert that fired during the span: its words, its hours, the months it fired in."""
    from pvsource.alerts import ALERTS

    hours = summary.get("alert_hours") or {}
    items = []
    for a in ALERTS:
        h = hours.get(a.name) or 0.0
        if h <= 0.0:
            continue
        months = [m["month"] for m in summary.get("monthly", ()) if (m.get("alert_hours") or {}).get(a.name)]
        when = f" in {', '.join(months)}" if 0 < len(months) <= 3 else f" in {len(months)} months" if months else ""
        items.append(("alert", "Alert.", f"{a.label[0].upper()}{a.label[1:]}: {fmt(h, 1, 'h')}{when} ({a.basis})."))
    return items


def findings(system, summary: dict, checks) -> str:
    """What needs attention first: alerts during the span, failed checks, unmet load, an emptied bank; never empty."""
    items = alert_items(summary)
    for c in checks:
        if c.passed is False:
            sense = "above the limit" if c.sense == "max" else "below the minimum"
            # An advisory check warns of lost energy; a failed one is a hazard or a code rule.
            kind, head = ("warn", "Advisory.") if c.advisory else ("alert", "Check failed.")
            items.append((kind, head, f"{check_label(c.name)}: {fmt(c.value, 1, c.unit)}, {sense} of "
                                      f"{fmt(c.limit, 1, c.unit)} ({c.basis})."))
    load, unmet = summary.get("load_kwh") or 0.0, summary.get("unmet_load_kwh") or 0.0
    if load > 0 and unmet > UNMET_SHARE_NOTED * load:
        items.append(("warn", "Load not met.", f"{fmt(unmet, 1, 'kWh')} of {fmt(load, 1, 'kWh')} "
                                               f"({pct(unmet / load)}) could not be supplied from the bank."))
    if system.bank is not None and summary.get("min_soc") is not None and summary["min_soc"] <= EMPTY_SOC:
        items.append(("warn", "Bank emptied.", "The state of charge reached "
                      f"{pct(summary['min_soc'])} during the span; a real system disconnects its loads first, "
                      "so plan for a low-voltage disconnect and more storage or generation."))
    if summary.get("load_disconnected_hours"):
        items.append(("warn", "Loads disconnected.",
                      f"The low-voltage disconnect cut the loads off for {fmt(summary['load_disconnected_hours'], 0, 'h')} "
                      f"to protect the bank (its state of charge stayed at or above {pct(summary.get('min_soc'))}); "
                      "the load it shed is counted as not met."))
    if summary.get("generator_hours"):
        share = f" ({pct(summary['generator_load_kwh'] / load)} of the load)" if load > 0 else ""
        items.append(("info", "Generator ran.",
                      f"{fmt(summary['generator_hours'], 0, 'h')} in {summary['generator_starts']} starts: it carried "
                      f"{fmt(summary['generator_load_kwh'], 1, 'kWh')} of load{share}, put "
                      f"{fmt(summary['generator_stored_kwh'], 1, 'kWh')} into the bank and burnt "
                      f"{fmt(summary['generator_fuel_l'], 0, 'l')} of fuel."))
    for c in checks:
        if c.passed is None:
            items.append(("info", "Not checked.", f"{check_label(c.name)}: no limit in the system file to compare "
                                                  f"{fmt(c.value, 1, c.unit)} with."))
    if not any(kind in ("alert", "warn") for kind, _, _ in items):
        met = ", and the load was met" if load > 0 else ""
        items.insert(0, ("ok", "No problems found.", f"No alert fired, no design check with a limit failed{met}."))
    body = "".join(f'<li class="{kind}"><strong>{_esc(head)}</strong>{_esc(text)}</li>' for kind, head, text in items)
    return f'<section id="findings"><h2>What needs attention</h2><ul class="findings">{body}</ul></section>'


def headline(system, summary: dict, checks) -> str:
    failed = sum(c.failed for c in checks)
    checked = sum(c.passed is not None for c in checks)
    cable_pct = summary.get("wiring_loss_pct")
    tiles = [(fmt(summary.get("energy_stored_kwh" if system.bank is not None else "energy_delivered_kwh"), 0, "kWh"),
              "stored in the bank" if system.bank is not None else "delivered to the load", False),
             (pct(None if cable_pct is None else cable_pct / 100.0), "of the generated energy lost in cables", False)]
    load = summary.get("load_kwh") or 0.0
    if load > 0:
        met = 1.0 - (summary.get("unmet_load_kwh") or 0.0) / load
        tiles.append((pct(met), "of the load met", met < 1.0 - UNMET_SHARE_NOTED))
    if summary.get("min_soc") is not None:
        tiles.append((pct(summary["min_soc"], 0), "lowest state of charge", summary["min_soc"] <= EMPTY_SOC))
    if summary.get("generator_hours") is not None:
        tiles.append((fmt(summary["generator_hours"], 0, "h"), "generator running", False))
        tiles.append((fmt(summary["generator_fuel_l"], 0, "l"), "generator fuel", False))
    if checked:
        tiles.append((f"{checked - failed} / {checked}", "design checks with a limit passed", failed > 0))
    else:
        tiles.append(("none", "design checks with a limit (no limits given)", False))
    body = "".join(f'<div class="tile{" bad" if bad else ""}"><b>{_esc(v)}</b><span>{_esc(label)}</span></div>'
                   for v, label, bad in tiles)
    return f'<div class="tiles" id="headline">{body}</div>'


def system_section(system, summary: dict) -> str:
    """What was studied: site, module and its fitted model, groups, cables, controller, bank, load."""
    parts = []
    site = system.site
    if site is not None:
        parts.append("<h3>Site</h3>" + pairs([
            ("name", site.name or "not named"), ("latitude, longitude", f"{site.latitude:g}°, {site.longitude:g}°"),
            ("altitude", fmt(site.altitude_m, 0, "m")), ("ground reflectance (albedo)", fmt(site.albedo, 2))]))
    parts.append(_module_block(system.module))
    rated_module_w = float(system.module.fit.stc["p_mp"])
    group_rows = [(_esc(g.name), f"{g.modules_per_string} in series × {g.strings}",
                   fmt(g.modules_per_string * g.strings * rated_module_w / 1000.0, 2),
                   f"{g.tilt_deg:g}°", _facing(g.azimuth_deg), _esc(MOUNTING_WORDS.get(g.mounting, g.mounting)))
                  for g in system.groups]
    parts.append("<h3>Array</h3>" + table(
        ("group", "modules per string × strings", "rated power at STC [kW]", "tilt", "facing (azimuth)",
         "mounting"), group_rows, numeric=(2,)))
    if system.cables:
        rows = [(_esc(r.name), _esc(ROLE_WORDS.get(r.role, r.role) + (f" ({r.group})" if r.group else "")),
                 f'<span class=nowrap>{_esc(r.size.label)}</span>' if r.size is not None
                 else "resistance given", fmt(r.length_m, 1),
                 _esc(r.material), str(r.conductors_in_parallel), fmt(r.temp_c, 0),
                 fmt(1000.0 * r.loop_resistance_ohm, 1)) for r in system.cables]
        parts.append("<h3>Cables</h3>" + table(
            ("run", "where", "size", "length, one way [m]", "material", "conductors per pole",
             "conductor temperature [°C]", "loop resistance [mΩ]"), rows, numeric=(3, 5, 6, 7), css_class="compact"))
    else:
        parts.append("<h3>Cables</h3><p>No cable runs were given: the groups join the load directly.</p>")
    parts.append(_equipment_block(system, summary))
    return ('<section id="system"><h2>What was studied</h2>' + "".join(parts) + "</section>")


def _module_block(module) -> str:
    ds = module.datasheet
    p = module.parameters
    left = ""
    if ds is not None:
        rows = [("open-circuit voltage Voc", fmt(ds.v_oc, 2, "V")), ("short-circuit current Isc", fmt(ds.i_sc, 2, "A")),
                ("maximum-power voltage Vmp", fmt(ds.v_mp, 2, "V")), ("maximum-power current Imp", fmt(ds.i_mp, 2, "A")),
                ("maximum power Pmp", fmt(ds.v_mp * ds.i_mp, 1, "W")),
                ("Isc temperature coefficient", fmt(ds.isc_temp_coeff_pct, 3, "%/°C")),
                ("Voc temperature coefficient", fmt(ds.voc_temp_coeff_pct, 3, "%/°C"))]
        if ds.pmax_temp_coeff_pct is not None:
            rows.append(("Pmp temperature coefficient", fmt(ds.pmax_temp_coeff_pct, 3, "%/°C")))
        if ds.noct_c is not None:
            rows.append(("nominal operating cell temperature", fmt(ds.noct_c, 0, "°C")))
        rows.append(("cells in series", str(ds.cells_in_series)))
        left = f"<div><h3>Module datasheet at STC</h3>{pairs(rows)}</div>"
    thermal_v = 8.617333262e-5 * 298.15 * p.cells_in_series  # k T / q per cell at 25 °C, CODATA 2018
    err = module.fit.relative_error
    worst = max((abs(v) for v in err.values() if v is not None), default=None)
    rows = [("light current I_L", fmt(p.i_l_ref_a, 3, "A")), ("saturation current I_0", f"{p.i_o_ref_a:.3e} A"),
            ("series resistance R_s", fmt(p.r_s_ohm, 3, "Ω")), ("shunt resistance R_sh", fmt(p.r_sh_ref_ohm, 0, "Ω")),
            ("diode ideality factor n", fmt(p.a_ref_v / thermal_v, 3)),
            ("how it was obtained", METHOD_WORDS.get(module.fit.method, module.fit.method))]
    if worst is not None:
        rows.append(("largest error at STC", pct(worst, 3)))
    right = f"<div><h3>Fitted single-diode model at STC</h3>{pairs(rows)}<p class=lead>{_esc(module.fit.note)}</p></div>"
    name = module.name or (ds.name if ds is not None else "")
    title = f"<h3>Module: {_esc(name)}</h3>" if name else ""
    return f"{title}<div class=pair>{left}{right}</div>"


def _equipment_block(system, summary: dict) -> str:
    parts = []
    for assigned in system.controllers:
        c = assigned.controller
        rows = [("name", c.name or "not named"),
                ("kind", CONTROLLER_WORDS.get(c.kind, "input limits only") if c.kind else "input limits only")]
        for label, value, digits, unit in (("highest input voltage", c.max_input_v, 0, "V"),
                                           ("lowest input voltage", c.min_input_v, 0, "V"),
                                           ("output current limit", c.max_output_a, 0, "A"),
                                           ("rated output power", c.rated_power_w, 0, "W")):
            if value is not None:
                rows.append((label, fmt(value, digits, unit)))
        if c.tracks:
            eta = np.array(c.efficiency_curve, float)[:, 1]
            rows.append(("conversion efficiency", f"{100 * eta.min():.0f} to {100 * eta.max():.0f} % over its load"))
            rows.append(("input headroom above the bank", fmt(c.min_headroom_v, 1, "V")))
        elif c.diode_drop_v:
            rows.append(("blocking diode drop", fmt(c.diode_drop_v, 2, "V")))
        if system.several_controllers:
            rows.insert(1, ("tracks the groups", ", ".join(assigned.groups)))
        parts.append(f"<div><h3>Charge controller</h3>{pairs(rows)}</div>")
    b = system.bank
    if b is not None:
        v_abs, v_float = bank_model.charge_voltages_v(b)
        e_mid = float(bank_model.open_circuit_v(b, 0.5))
        rows = [("chemistry", b.chemistry.name), ("cells", f"{b.cells_in_series} in series × {b.strings}"),
                ("resting voltage at half charge", fmt(e_mid, 1, "V")), ("capacity", fmt(b.capacity_ah, 0, "Ah")),
                ("energy at that voltage", fmt(b.capacity_ah * e_mid / 1000.0, 1, "kWh")),
                ("absorption / float voltage", f"{float(v_abs):.1f} / {float(v_float):.1f} V"),
                ("largest charge current", fmt(float(bank_model.max_charge_current_a(b)), 0, "A")),
                ("internal resistance", fmt(1000.0 * float(bank_model.internal_resistance_ohm(b)), 1, "mΩ")),
                ("state of charge at the start", pct(b.soc, 0)),
                ("cell temperature", fmt(b.temp_c, 0, "°C") if b.air_offset_c is None else
                 f"the air's {b.air_offset_c:+.0f} °C through the season")]
        if b.overrides:
            rows.append(("preset values replaced", ", ".join(k.replace("_", " ") for k, _ in b.overrides)))
        parts.append(f"<div><h3>Battery bank</h3>{pairs(rows)}</div>")
    if system.generator is not None:
        parts.append(f"<div><h3>Backup generator</h3>{pairs(_generator_rows(system.generator))}</div>")
    if b is not None:
        # A bank's load is the weather file's load column, whatever else the system holds.
        load = summary.get("load_kwh") or 0.0
        text = (f"The bank feeds a load of {fmt(load, 1, 'kWh')} over the span, from the weather file's load column."
                if load > 0 else "The bank feeds no load (the weather file has no load column).")
    else:
        text = f"The array feeds {LOAD_WORDS.get(system.load.kind, system.load.kind)}."
    return f"<div class=pair>{''.join(parts)}</div><h3>Load</h3><p>{_esc(text)}</p>"


FUEL_WORDS = {"constant": "a constant rate", "curve": "the given curve against load",
              "linear": "the linear law of a diesel set (0.08145 l/h per kW rated + 0.246 l/kWh)"}


def _generator_rows(gen) -> list:
    rows = [("name", gen.name or "not named"),
            ("starts at / stops at state of charge", f"{pct(gen.start_soc, 0)} / {pct(gen.stop_soc, 0)}"),
            ("shortest run", fmt(gen.min_run_h, 1, "h"))]
    if gen.charger_current_a is not None:
        rows.append(("charger current into the bank", fmt(gen.charger_current_a, 0, "A")))
    else:
        rows.append(("charger power into the bank", fmt(gen.charger_power_w, 0, "W")))
    rows.append(("charger efficiency", pct(gen.charger_efficiency, 0)))
    if gen.rated_power_w is not None:
        rows.append(("rated power", fmt(gen.rated_power_w, 0, "W")))
    rate = f"{fmt(gen.fuel_l_per_h, 2, 'l/h')}" if gen.fuel_model == "constant" else FUEL_WORDS[gen.fuel_model]
    rows.append(("fuel use", rate))
    return rows


ENERGY_ROWS = (("energy_mpp_kwh", "available at the groups' maximum power points"),
               ("energy_generated_kwh", "generated by the modules"), ("wiring_loss_kwh", "lost in cables"),
               ("controller_loss_kwh", "lost in the controller"), ("curtailed_kwh", "curtailed by the controller"),
               ("energy_delivered_kwh", "delivered into the bank or load"), ("energy_stored_kwh", "stored in the bank"),
               ("coulombic_loss_kwh", "of it lost to coulombic efficiency"),
               ("load_kwh", "drawn by the load"), ("unmet_load_kwh", "load not met"))


BANK_KEYS = ("energy_stored_kwh", "coulombic_loss_kwh", "load_kwh", "unmet_load_kwh", "load_disconnected_hours")
CONTROLLER_KEYS = ("controller_loss_kwh", "curtailed_kwh")


def relevant(system, key: str) -> bool:
    """Whether an energy line applies to the system: bank lines need a bank, controller lines a controller,
    generator lines a generator."""
    if key.startswith("generator_"):
        return system.generator is not None
    if key in BANK_KEYS:
        return system.bank is not None
    if key in CONTROLLER_KEYS:
        return system.bank is not None and any(c.controller.kind is not None for c in system.controllers)
    return True


def energy_section(system, summary: dict) -> str:
    avail = summary.get("energy_mpp_kwh") or 0.0
    load = summary.get("load_kwh") or 0.0
    rows = []
    for key, label in ENERGY_ROWS:
        if key not in summary or not relevant(system, key):
            continue
        value = summary[key]
        if key == "unmet_load_kwh":
            share = f"{pct(value / load)} of the load" if load > 0 and value is not None else ""
        elif key == "load_kwh":
            share = ""
        else:
            share = f"{pct(value / avail)} of what was available" if avail > 0 and value is not None else "n/a"
        rows.append((_esc(label), fmt(value), share))
    out = table(("over the whole span", "energy [kWh]", "share"), rows, numeric=(1, 2))
    if "peak_charge_current_a" in summary:
        stats = [("highest charge current", fmt(summary["peak_charge_current_a"], 1, "A")),
                 ("95th percentile of the charge current while charging", fmt(summary["p95_charge_current_a"], 1, "A")),
                 ("lowest state of charge", pct(summary.get("min_soc"))),
                 ("highest state of charge", pct(summary.get("max_soc"))),
                 ("days on which the bank reached full", fmt(summary.get("days_reaching_full"), 0))]
        stages = summary.get("hours_by_stage", {})
        limits = summary.get("hours_by_limit", {})
        out += "<div class=pair><div><h3>Bank</h3>" + pairs(stats) + "</div>"
        if stages:
            out += "<div><h3>Hours by charge stage</h3>" + pairs([(k, fmt(v, 0, "h")) for k, v in stages.items()])
            out += "</div>"
        if limits:
            out += "<div><h3>Hours by what limited the charge</h3>" + pairs(
                [(k, fmt(v, 0, "h")) for k, v in limits.items()]) + "</div>"
        out += "</div>"
    if summary.get("generator_hours") is not None:
        out += "<h3>Backup generator</h3>" + _generator_energy(summary)
    controllers = summary.get("controllers") or []
    if len(controllers) > 1:
        rows = [(_esc(f"{c['name']} ({', '.join(c['groups'])})"), fmt(c["energy_generated_kwh"]),
                 fmt(c["energy_stored_kwh"]), fmt(c["curtailed_kwh"]), fmt(c["controller_loss_kwh"]),
                 fmt(c["peak_charge_current_a"], 1, "A"),
                 _esc(", ".join(f"{k} {v:,.0f} h" for k, v in c["hours_by_limit"].items())))
                for c in controllers]
        out += "<h3>Each controller</h3>" + table(
            ("controller (its groups)", "generated [kWh]", "stored [kWh]", "curtailed [kWh]", "lost in it [kWh]",
             "peak charge", "hours by what limited it"), rows, numeric=(1, 2, 3, 4, 5))
    return f'<section id="energy"><h2>Energy</h2>{out}</section>'


def _generator_energy(summary: dict) -> str:
    """The generator's output and where it went; the lines add up to its output."""
    made = summary["generator_energy_kwh"]
    share = lambda v: pct(v / made) if made > 0 else "n/a"  # noqa: E731
    rows = [(_esc(label), fmt(summary[key]), share(summary[key])) for key, label in (
        ("generator_load_kwh", "carried the load"), ("generator_stored_kwh", "stored in the bank"),
        ("generator_bank_loss_kwh", "lost in the bank's resistance"),
        ("generator_charger_loss_kwh", "lost in the charger"))]
    per_kwh = summary["generator_fuel_l"] / made if made > 0 else None
    stats = [("running", fmt(summary["generator_hours"], 1, "h")), ("starts", fmt(summary["generator_starts"], 0)),
             ("fuel", fmt(summary["generator_fuel_l"], 1, "l")), ("fuel per kWh of output", fmt(per_kwh, 3, "l"))]
    return ("<div class=pair><div>" + table(("generator output", "energy [kWh]", "share of its output"), rows,
                                            numeric=(1, 2), foot=("output", fmt(made), "")) + "</div><div>"
            + pairs(stats) + "</div></div>")


MONTH_COLUMNS = (("energy_mpp_kwh", "available at MPPs [kWh]", 1), ("energy_generated_kwh", "generated [kWh]", 1),
                 ("wiring_loss_kwh", "cable loss [kWh]", 2), ("controller_loss_kwh", "controller loss [kWh]", 1),
                 ("curtailed_kwh", "curtailed [kWh]", 1), ("energy_stored_kwh", "stored [kWh]", 1),
                 ("load_kwh", "load [kWh]", 1), ("unmet_load_kwh", "unmet load [kWh]", 1),
                 ("load_disconnected_hours", "loads cut off [h]", 0), ("generator_hours", "generator [h]", 1), ("generator_fuel_l", "generator fuel [l]", 1))


def monthly_section(system, summary: dict) -> str:
    months = summary["monthly"]
    if not months:
        return ""
    columns = [c for c in MONTH_COLUMNS if relevant(system, c[0])]
    soc = any(m.get("min_soc") is not None for m in months)
    head = ("month", *(label for _, label, _ in columns)) + (("lowest state of charge [%]",) if soc else ())
    rows, flagged = [], {}
    keys = [k for k, _, _ in columns]
    unmet_col = 1 + keys.index("unmet_load_kwh") if "unmet_load_kwh" in keys else None
    for r, m in enumerate(months):
        try:
            name = datetime.strptime(m["month"], "%Y-%m").strftime("%b %Y")
        except ValueError:
            name = m["month"]
        row = [f"<span class=nowrap>{name}</span>", *(fmt(m.get(key), digits) for key, _, digits in columns)]
        if soc:
            row.append(fmt(None if m.get("min_soc") is None else 100 * m["min_soc"], 0))
        if unmet_col and (m.get("unmet_load_kwh") or 0.0) > UNMET_SHARE_NOTED * max(m.get("load_kwh") or 0.0, 1e-9):
            flagged[(r, unmet_col)] = "warn"
        rows.append(row)
    totals = ["whole span", *(fmt(sum((m.get(key) or 0.0) for m in months), digits)
                              for key, _, digits in columns)]
    if soc:
        totals.append(fmt(None if summary.get("min_soc") is None else 100 * summary["min_soc"], 0))
    return ('<section id="monthly"><h2>Month by month</h2>'
            + table(head, rows, numeric=tuple(range(1, len(head))), cell_classes=flagged, foot=totals,
                    css_class="compact")
            + "<p class=lead>Each step counts in the month of the weather's own local calendar."
            + (" Unmet load is marked where a month could not supply all of it." if unmet_col else "")
            + "</p></section>")


def figures_section(figures) -> str:
    """``figures``: (file name, PNG bytes) pairs, embedded so the page stands alone."""
    if not figures:
        return ""
    body = "".join(
        f'<figure><img alt="{_esc(FIGURE_CAPTIONS.get(name, name))}" src="data:image/png;base64,'
        f'{base64.b64encode(data).decode()}"><figcaption>{_esc(FIGURE_CAPTIONS.get(name, ""))}</figcaption></figure>'
        for name, data in figures)
    return f'<section id="figures"><h2>Figures</h2>{body}</section>'


def checks_section(checks, t_min: float, t_max: float) -> str:
    if not checks:
        return ""
    rows, classes = [], []
    for c in checks:
        verdict = {True: '<span class="badge pass">pass</span>', False: '<span class="badge fail">FAIL</span>',
                   None: '<span class="badge none">no limit</span>'}[c.passed]
        if c.passed is False and c.advisory:
            verdict = '<span class="badge advice">advisory</span>'
        if c.unverified:
            verdict = '<span class="badge fail">unverified</span>'
        bound = "" if c.limit is None else ("at most " if c.sense == "max" else "at least ") + fmt(c.limit, 1, c.unit)
        rows.append((_esc(check_label(c.name)), _esc(fmt(c.value, 1, c.unit)), _esc(bound or "not given"),
                     pct(c.margin) if c.margin is not None else "", verdict, _esc(c.basis)))
        classes.append("fail" if c.failed else "")
    return ('<section id="checks"><h2>Design checks</h2>'
            f"<p class=lead>Against the weather's own extremes of air temperature, {t_min:.1f} to {t_max:.1f} °C.</p>"
            + table(("check", "value", "limit", "margin", "verdict", "basis"), rows, numeric=(1, 2, 3),
                    row_classes=classes) + "</section>")


def render_page(system, summary: dict, notes, checks, figures, t_min: float, t_max: float) -> str:
    """The whole report page.

    Parameters
    ----------
    system : System
    summary : dict
        The season summary (:func:`pvsource.season.summarise`).
    notes : sequence of str
        The study's notes; the section is left out when there are none.
    checks : list of Check
    figures : list of (str, bytes)
        Figure file names and their PNG bytes, in order.
    t_min, t_max : float
        The weather's lowest and highest air temperature [°C].
    """
    from pvsource import __version__

    name = system.name or system.source
    site = system.site
    where = f" at {site.name or 'the site'} ({site.latitude:g}°, {site.longitude:g}°)" if site else ""
    notes_html = ("<section id=notes><h2>Notes on this study</h2><ul>"
                  + "".join(f"<li>{_esc(n)}</li>" for n in notes) + "</ul></section>") if notes else ""
    caution_items = "".join(f"<li>{_esc(c)}</li>" for c in cautions.for_command("season", system))
    stamp = datetime.now(timezone.utc).strftime("%Y-%m-%d %H:%M UTC")
    return f"""<!doctype html><html lang="en"><head><meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>Season study: {_esc(name)}</title><style>{CSS}</style></head><body><main>
<header><h1>Season study: {_esc(name)}</h1>
<p>{_esc(span_words(summary))}{_esc(where)}.</p>
</header>
{headline(system, summary, checks)}
{findings(system, summary, checks)}
{system_section(system, summary)}
{energy_section(system, summary)}
{monthly_section(system, summary)}
{figures_section(figures)}
{checks_section(checks, t_min, t_max)}
{notes_html}
<section id="cautions"><h2>Cautions</h2><ul class="cautions">{caution_items}</ul></section>
<footer>Written by pvsource {_esc(__version__)} on {stamp}. pvsource computes; it does not certify.</footer>
</main></body></html>"""
