"""Alerts: each hazard against an outside reference, at cold mornings and hot cells, and through a season."""

import json
from dataclasses import replace

import numpy as np
import pytest
from pvlib import pvsystem

import reference as ref
from conftest import DEMO_DATASHEET, ROOT, run_cli
from pvsource.alerts import ALERTS, alert_codes, alert_hours, names, point_alerts
from pvsource.array import StringGroup
from pvsource.bank import make_bank
from pvsource.conductors import parse_size
from pvsource.controller import make_controller
from pvsource.module import DiodeParameters, fit_datasheet, module_from_parameters
from pvsource.operating import operating_points
from pvsource.system import Load, System
from pvsource.wiring import CableRun

# A record of the CEC module library that pvlib ships (California Energy
# Commission, an open dataset): its fitted single-diode parameters are used
# as they are, so pvlib's own solution of them is an independent reference.
CEC_NAME = "Canadian_Solar_Inc__CS6K_275M"


@pytest.fixture(scope="module")
def cec():
    r = pvsystem.retrieve_sam("CECMod")[CEC_NAME]
    p = DiodeParameters(float(r.I_L_ref), float(r.I_o_ref), float(r.R_s), float(r.R_sh_ref), float(r.a_ref),
                        float(r.alpha_sc), int(r.N_s), adjust_pct=float(r.Adjust))
    return r, module_from_parameters(p)


def _pvlib_key_points(r, irradiance_w_m2, cell_temp_c):
    """pvlib's CEC model and Lambert-W single-diode solution on the library record's own parameters."""
    cp = pvsystem.calcparams_cec(irradiance_w_m2, cell_temp_c, r.alpha_sc, r.a_ref, r.I_L_ref, r.I_o_ref,
                                 r.R_sh_ref, r.R_s, r.Adjust)
    return pvsystem.singlediode(*cp, method="lambertw")


def _tracker_system(module, n_s, n_p, max_output_a=40.0, bank_temp_c=20.0, chemistry="lfp", cells=8,
                    capacity_ah=200.0, soc=0.5, **controller):
    c = make_controller("mppt", name="tracker", max_input_v=150.0, max_output_a=max_output_a, **controller)
    bank = make_bank(chemistry, cells, 1, capacity_ah, soc, bank_temp_c)
    return System(module=module, groups=(StringGroup("roof", n_s, n_p),), controller=c, bank=bank, name="t")


def _fired(system, frame, name):
    bit = next(a.bit for a in ALERTS if a.name == name)
    return (alert_codes(system, frame) >> bit & 1).astype(bool)


def _alert(system, frame, name, k=0):
    return next((a for a in point_alerts(system, frame, k) if a["name"] == name), None)


# ---------------------------------------------------------------- over-voltage at the controller input

def test_over_voltage_at_a_cold_morning_matches_pvlib_and_not_hot_cells(cec):
    r, module = cec
    system = _tracker_system(module, 4, 2)
    g = np.array([200.0, 1000.0, 1000.0])
    t = np.array([-20.0, 25.0, 65.0])
    frame = operating_points(system, g, t)
    # Reference: pvlib singlediode (Lambert W) on the CEC record at the same
    # conditions; four modules in series.
    voc = 4 * np.asarray(_pvlib_key_points(r, g, t)["v_oc"], float)
    assert voc[0] > 150.0 > voc[2]  # the cold morning over the 150 V rating, hot cells under it
    fired = _fired(system, frame, "pv_input_over_max_v")
    assert fired.tolist() == (voc > 150.0).tolist() == [True, True, False]
    a = _alert(system, frame, "pv_input_over_max_v")
    assert a["value"] == pytest.approx(voc[0], rel=1e-6)
    assert a["limit"] == 150.0 and a["unit"] == "V"


def test_over_voltage_never_depends_on_the_output_limit(cec):
    # The case: four modules (Voc above 150 V at STC) on a 150 V
    # tracker. A small output limit must not hide the over-voltage: the
    # controller sees Voc at every start-up, whatever it delivers.
    r, module = cec
    voc_stc = 4 * float(r.V_oc_ref)  # the library's datasheet value, 4 x 38.3 V
    assert voc_stc > 150.0
    seen = []
    for max_output_a in (10.0, 80.0):
        system = _tracker_system(module, 4, 2, max_output_a=max_output_a)
        frame = operating_points(system, 1000.0, 25.0)
        a = _alert(system, frame, "pv_input_over_max_v")
        seen.append((a["value"], a["limit"], int(frame["alerts"].iloc[0])))
        assert a["value"] == pytest.approx(voc_stc, rel=2e-3)  # the CEC fit reproduces its datasheet Voc
    assert seen[0] == seen[1]


def test_point_cli_shows_alerts_first_and_in_json(capsys, tmp_path, cec):
    r, _ = cec
    path = tmp_path / "four.toml"
    path.write_text(
        'name = "four on a 150 V tracker"\n[module]\n'
        f"v_oc = {r.V_oc_ref}\ni_sc = {r.I_sc_ref}\nv_mp = {r.V_mp_ref}\ni_mp = {r.I_mp_ref}\n"
        f"isc_temp_coeff_pct = {100 * r.alpha_sc / r.I_sc_ref!r}\nvoc_temp_coeff_pct = {100 * r.beta_oc / r.V_oc_ref!r}\n"
        "cells_in_series = 60\n[array]\nmodules_per_string = 4\nstrings = 2\nirradiance_w_m2 = 1000\ncell_temp_c = 25\n"
        '[controller]\nkind = "mppt"\nmax_input_v = 150\nmax_output_a = 10\n'
        '[bank]\nchemistry = "lfp"\ncells_in_series = 8\nstrings = 1\ncapacity_ah = 200\nsoc = 0.5\ntemp_c = 20\n')
    code, out, _ = run_cli(capsys, "point", str(path), "--json")
    assert code == 0
    rec = json.loads(out)
    assert list(rec)[0] == "alerts"
    (a,) = rec["alerts"]
    assert set(a) == {"name", "value", "limit", "unit", "message"}
    # The datasheet's own Voc: 4 x 38.3 V, above 150 V.
    assert a["name"] == "pv_input_over_max_v" and a["value"] == pytest.approx(4 * 38.3, rel=2e-3)
    assert "150 V" in a["message"] and "start-up" in a["message"]
    code, out, _ = run_cli(capsys, "point", str(path))
    assert code == 0 and out.startswith("ALERT: PV input above the controller's maximum voltage")


# ---------------------------------------------------------------- charging in the cold

def test_cold_charge_alert_whenever_the_array_could_charge(cec):
    r, module = cec
    # LFP: no charging below 0 degC (common practice: lithium plating on the
    # graphite anode). The model blocks the charge, and the alert still fires:
    # it does not depend on what the modelled controller did.
    g = np.array([0.0, 0.001, 0.05, 50.0, 800.0])
    system = _tracker_system(module, 1, 2, bank_temp_c=-20.0)
    frame = operating_points(system, g, -20.0)
    assert (frame["charge_current_a"] == 0.0).all()
    # The array could charge where its Voc (pvlib) reaches the tracker's
    # window: the bank's EMF, 8 cells x 3.290 V at half charge (the LFP
    # preset's table, read by hand), plus the 2 V headroom.
    voc = np.asarray(_pvlib_key_points(r, g, -20.0)["v_oc"], float)
    could = np.nan_to_num(voc) > 8 * 3.290 + 2.0
    assert could.tolist() == [False, False, True, True, True]
    assert _fired(system, frame, "charge_below_min_temp").tolist() == could.tolist()
    a = _alert(system, frame, "charge_below_min_temp", 4)
    assert (a["value"], a["limit"], a["unit"]) == (-20.0, 0.0, "degC")
    # A warm bank: no alert.
    warm = _tracker_system(module, 1, 2, bank_temp_c=25.0)
    assert not _fired(warm, operating_points(warm, g, -20.0), "charge_below_min_temp").any()


def test_cold_charge_limit_of_lead_acid_is_its_own(cec):
    _, module = cec
    # Flooded lead-acid may charge down to -20 degC (common practice: it must
    # not be frozen); the alert fires below, not at, the limit.
    for temp_c, expected in ((-20.0, False), (-25.0, True)):
        system = _tracker_system(module, 2, 1, bank_temp_c=temp_c, chemistry="lead-acid-flooded", cells=12)
        frame = operating_points(system, 600.0, -20.0)
        assert _fired(system, frame, "charge_below_min_temp")[0] == expected


# ---------------------------------------------------------------- a direct connection: rate and voltage

def _direct_system(module, n_p, chemistry, cells, capacity_ah, soc, bank_temp_c):
    bank = make_bank(chemistry, cells, 1, capacity_ah, soc, bank_temp_c)
    return System(module=module, groups=(StringGroup("roof", 1, n_p),), controller=make_controller("direct"),
                  bank=bank, name="direct")


@pytest.mark.parametrize("cell_temp_c", [-20.0, 65.0])
def test_direct_connection_over_the_bank_rate_and_voltage(cec, cell_temp_c):
    r, module = cec
    # A 12 V flooded lead-acid bank of 10 Ah, full, at 45 degC, wired straight
    # to three modules in parallel. By hand from the preset (common-practice
    # values): EMF 6 x 2.115 V = 12.69 V at full charge; R = 6 x 0.15 ohm Ah /
    # 10 Ah = 0.09 ohm (no cold rise above 25 degC); absorption
    # 6 x (2.45 - 0.005 x (45 - 25)) = 14.1 V; rate 0.2 C x 10 Ah = 2 A.
    system = _direct_system(module, 3, "lead-acid-flooded", 6, 10.0, 1.0, 45.0)
    frame = operating_points(system, 1000.0, cell_temp_c)
    emf, r_bank, v_abs, rate = 12.69, 0.09, 14.1, 2.0
    # Reference: Kirchhoff's current law at the bus solved by scipy's brentq
    # with pvlib's i_from_v for the modules (tests/reference.py).
    d = ref.diode_at(module.parameters, 1000.0, cell_temp_c)
    groups = [ref.group(d, 1, 3)]
    v_bus = ref.bus_voltage(groups, emf, r_bank, 60.0)
    i_ref = (v_bus - emf) / r_bank
    a = _alert(system, frame, "charge_over_bank_rate")
    assert a["value"] == pytest.approx(i_ref, rel=1e-6) and a["limit"] == pytest.approx(rate, rel=1e-12)
    b = _alert(system, frame, "bank_over_absorption_v")
    assert b["value"] == pytest.approx(v_bus, rel=1e-6) and b["limit"] == pytest.approx(v_abs, rel=1e-12)
    assert v_bus > v_abs


def test_a_regulating_controller_keeps_rate_and_voltage_alerts_quiet(cec):
    _, module = cec
    # The same bank behind a tracker whose output limit is far above the
    # bank's rate: the tracker holds the bank's rate and voltage, whatever its
    # own limit.
    for max_output_a in (10.0, 80.0):
        system = _tracker_system(module, 2, 3, max_output_a=max_output_a, chemistry="lead-acid-flooded", cells=6,
                                 capacity_ah=10.0, soc=0.9, bank_temp_c=45.0)
        frame = operating_points(system, [200.0, 1000.0], [-20.0, 65.0])
        assert not _fired(system, frame, "charge_over_bank_rate").any()
        assert not _fired(system, frame, "bank_over_absorption_v").any()


# ---------------------------------------------------------------- controller input current

def test_input_short_circuit_current_at_hot_cells_matches_pvlib(cec):
    r, module = cec
    # Isc rises with cell temperature: two strings exceed a 18.8 A input at
    # 65 degC but not at -20 degC.
    system = _tracker_system(module, 3, 2, max_input_isc_a=18.8)
    frame = operating_points(system, 1000.0, np.array([-20.0, 65.0]))
    isc = 2 * np.asarray(_pvlib_key_points(r, 1000.0, np.array([-20.0, 65.0]))["i_sc"], float)
    assert isc[0] < 18.8 < isc[1]
    assert _fired(system, frame, "pv_input_over_max_isc").tolist() == [False, True]
    a = _alert(system, frame, "pv_input_over_max_isc", 1)
    assert a["value"] == pytest.approx(isc[1], rel=1e-6) and a["limit"] == 18.8


# ---------------------------------------------------------------- cables and strings

def test_cable_over_its_ampacity(cec):
    _, module = cec
    # A 1.5 mm2 copper feeder in conduit, XLPE at 30 degC: 23 A (IEC
    # 60364-5-52 Table B.52.5, method B1, two loaded conductors; from memory),
    # carrying three strings into a stiff 90 V source (Load "voltage").
    # Its resistance: 12.1 ohm/km, the IEC 60228 class 2 maximum at 20 degC.
    feeder = CableRun("feeder", "feeder", 10.0, 12.1, size=parse_size("1.5 mm2"))
    system = System(module=module, groups=(StringGroup("roof", 3, 3),), cables=(feeder,),
                    load=Load("voltage", emf_v=90.0), name="feeder")
    frame = operating_points(system, np.array([1000.0, 500.0]), 25.0)
    # Reference: the bus voltage and current from brentq on Kirchhoff's law
    # with pvlib's i_from_v (tests/reference.py).
    r_f = feeder.loop_resistance_ohm
    currents = []
    for g in (1000.0, 500.0):
        groups = [ref.group(ref.diode_at(module.parameters, g, 25.0), 3, 3)]
        v = ref.bus_voltage(groups, 90.0, r_f, 200.0)
        currents.append(ref.array_current(groups, v))
    assert currents[0] > 23.0 > currents[1]
    assert _fired(system, frame, "cable_over_ampacity").tolist() == [True, False]
    a = _alert(system, frame, "cable_over_ampacity")
    assert a["run"] == "feeder" and a["limit"] == pytest.approx(23.0)
    assert a["value"] == pytest.approx(currents[0], rel=1e-6)


def test_reverse_current_into_a_short_string(demo_module):
    # A string of two modules paralleled with strings of three, held at 95 V:
    # the short string's modules are driven forward at 47.5 V each, far above
    # their Voc, and take current backwards. The datasheet's maximum series
    # fuse (15 A, invented demo value) is what the module withstands.
    module = fit_datasheet(replace(DEMO_DATASHEET, max_series_fuse_a=15.0))
    system = System(module=module, groups=(StringGroup("long", 3, 2), StringGroup("short", 2, 1)),
                    load=Load("voltage", emf_v=95.0), name="mixed")
    frame = operating_points(system, 1000.0, np.array([25.0, 65.0]))
    # Reference: pvlib's i_from_v for one module of the short string at 95/2 V.
    d = ref.diode_at(module.parameters, 1000.0, np.array([25.0, 65.0]))
    back = -np.asarray(pvsystem.i_from_v(95.0 / 2, d["il"], d["io"], d["rs"], d["rsh"], d["a"]), float)
    assert back[1] > 0.0
    fired = _fired(system, frame, "string_reverse_over_fuse")
    assert fired.tolist() == (back > 15.0).tolist()
    for k in range(2):
        a = next(m for m in point_alerts(system, frame, k) if m["name"] == "string_reverse_over_fuse") \
            if fired[k] else None
        if a is not None:
            assert a["value"] == pytest.approx(back[k], rel=1e-6) and a["limit"] == 15.0


# ---------------------------------------------------------------- through a season

def test_alert_codes_and_names_round_trip():
    assert names(0) == []
    assert names((1 << 0) | (1 << 5)) == ["pv_input_over_max_v", "cable_over_ampacity"]
    assert alert_hours(np.array([1, 1, 0, 3], np.uint16), 0.5)["pv_input_over_max_v"] == 1.5
    assert alert_hours(np.array([1, 1, 0, 3], np.uint16), 0.5)["charge_below_min_temp"] == 0.5


@pytest.fixture(scope="module")
def cold_minutes():
    """Five late-winter days of the demo's synthetic weather at one-minute steps, and as hourly means."""
    import pandas as pd

    from pvsource.demo import demo_system, synthetic_weather

    base = demo_system()
    # The design: four 40.1 V modules per string on the demo's 150 V
    # tracker, over its rating on cold bright hours (the tracker then stays
    # off). And the demo's own three modules with the feeder rated 5 A
    # (invented), exceeded in sun. The span crosses a month's end.
    over_v = replace(base, groups=(replace(base.groups[0], modules_per_string=4),))
    cables = tuple(replace(c, ampacity_a=5.0) if c.role == "feeder" else c for c in base.cables)
    systems = {"pv_input_over_max_v": over_v, "cable_over_ampacity": replace(base, cables=cables)}
    hourly = synthetic_weather(base)
    hourly = hourly[(hourly.index >= "2025-02-26") & (hourly.index < "2025-03-03")]
    # Minutes interpolated between the hourly samples; the hourly means of
    # those minutes are the same weather seen hourly.
    minutes = pd.date_range(hourly.index[0], hourly.index[-1] + pd.Timedelta(minutes=59), freq="1min")
    fine = hourly.reindex(hourly.index.union(minutes)).interpolate("time").ffill().reindex(minutes)
    fine.attrs = dict(hourly.attrs, step_h=1 / 60, time_label="instant")
    means = fine.groupby(fine.index.floor("1h")).mean()
    means.attrs = dict(hourly.attrs, step_h=1.0, time_label="start")
    return systems, fine, means


def test_alert_hours_agree_hourly_and_one_minute(cold_minutes):
    from pvsource.season import run_season

    systems, fine, means = cold_minutes
    for name, system in systems.items():
        a, b = run_season(system, means).summary, run_season(system, fine).summary
        hourly_h, minute_h = a["alert_hours"][name], b["alert_hours"][name]
        assert minute_h > 10.0
        # Law: an alert's duration does not depend on the time step; hourly
        # steps count whole hours, so each of the five days' two edges may be
        # off by half an hour: within 10 % or 5 h.
        assert abs(hourly_h - minute_h) <= max(0.1 * minute_h, 5.0)
        # The span is the sum of its months.
        for s in (a, b):
            assert len(s["monthly"]) == 2  # February and March
            for key, hours in s["alert_hours"].items():
                assert hours == sum(m["alert_hours"][key] for m in s["monthly"])


def test_report_lists_alerts_first_and_hourly_table_keeps_every_alert():
    import html

    import pandas as pd

    from pvsource.checks import Check
    from pvsource.report_page import findings
    from pvsource.season import hourly_table

    months = [{"month": "2025-02", "alert_hours": {"pv_input_over_max_v": 3.0}, "load_kwh": 0.0},
              {"month": "2025-03", "alert_hours": {"pv_input_over_max_v": 0.0}, "load_kwh": 0.0}]
    summary = {"alert_hours": {"pv_input_over_max_v": 3.0, "cable_over_ampacity": 0.0}, "monthly": months,
               "load_kwh": 0.0}
    failed = Check("string_fuse", 20.0, 15.0, "A", False, "NEC 690.9")
    page = html.unescape(findings(System(module=None, groups=()), summary, [failed]))
    items = page.split("<li")[1:]
    assert 'class="alert"' in items[0] and "PV input above the controller's maximum voltage: 3.0 h in 2025-02" \
        in items[0]
    assert "Check failed." in items[1]
    assert "ampacity" not in page and "No problems found" not in page
    # An hour in which two different alerts fired at different minutes keeps both bits.
    index = pd.date_range("2025-02-26 10:00", periods=120, freq="1min", tz="Etc/GMT-1")
    codes = np.zeros(120, np.uint16)
    codes[5], codes[50], codes[70] = 1, 32, 2
    hourly = hourly_table(pd.DataFrame({"alerts": codes, "p_w": np.ones(120)}, index=index), 1 / 60)
    assert hourly["alerts"].tolist() == [33, 2]


def test_a_season_whose_bank_is_too_cold_to_charge_says_why():
    from pvsource.demo import demo_system, synthetic_weather
    from pvsource.errors import InputError
    from pvsource.season import run_season

    base = demo_system()
    # LFP charges from 0 degC (common practice): a bank kept at -5 degC never charges. The array still
    # carries the loads by day (Kirchhoff at the bank terminals: the controller gives what they draw), so the
    # study is a result, led by the cold-charge alert, and the bank only ever loses charge.
    system = replace(base, bank=replace(base.bank, temp_c=-5.0))
    weather = synthetic_weather(system)
    weather = weather[weather.index < weather.index[0] + np.timedelta64(3, "D")]
    result = run_season(system, weather)
    s = result.summary
    assert s["alert_hours"]["charge_below_min_temp"] > 5.0
    assert s["energy_delivered_kwh"] > 0.0 and s["max_soc"] == pytest.approx(base.bank.soc)
    own = (result.steps["charge_current_a"] - result.steps["bank_load_a"]).to_numpy()
    assert own.max() <= 1e-9  # the bank's own current never charges
    assert set(result.steps["limit"].astype(str)) >= {"bank below its minimum charging temperature: charging blocked"}
    # With no load at all nothing flows: no study, and the message names the bank's temperature.
    idle = weather.assign(load_w=0.0)
    with pytest.raises(InputError, match=r"never charged the bank.*temp_c -5 degC is below its minimum charging "
                                         r"temperature 0 degC for the [1-9][0-9,]* h it could have charged") as exc:
        run_season(system, idle)
    assert exc.value.field == "[bank] temp_c"


def test_season_text_leads_with_alert_hours():
    from pvsource.terminal import render_season

    summary = {"start": "2025-02-26", "end": "2025-03-02", "steps": 120, "step_h": 1.0, "monthly": [],
               "alert_hours": {"pv_input_over_max_v": 50.0, "cable_over_ampacity": 0.0}}
    text = render_season(System(module=None, groups=()), summary, "out")
    assert text.splitlines()[2].startswith("ALERT: PV input above the controller's maximum voltage: 50.0 h")
    assert "ampacity" not in text.split("Energy over the span")[0]


def test_several_controllers_each_see_their_own_groups():
    import pandas as pd

    from pvsource.config import load_system
    from pvsource.system import ControllerGroups

    # The east-west example, both trackers rated 130 V here: at -20 degC and
    # 800 W/m2 the east face's three modules exceed it; the west face, in
    # diffuse light at 40 degC, does not. Each controller is judged on its own
    # groups, not on the two faces together.
    base = load_system(ROOT / "data" / "example-east-west.toml")
    controllers = tuple(ControllerGroups(replace(a.controller, max_input_v=130.0), a.groups)
                        for a in base.controllers)
    system = replace(base, controllers=controllers)
    g, t = {"east": 800.0, "west": 200.0}, {"east": -20.0, "west": 40.0}
    frame = pd.DataFrame({**{f"group_{n}_irradiance_w_m2": [g[n]] for n in g},
                          **{f"group_{n}_cell_temp_c": [t[n]] for n in t},
                          **{f"group_{n}_i_a": [0.0] for n in g}})
    got = {a["controller"]: a for a in point_alerts(system, frame) if a["name"] == "pv_input_over_max_v"}
    # Reference: pvlib singlediode (Lambert W) on the module's parameters at
    # each face's conditions, three modules in series.
    voc = {n: 3 * float(ref.key_points(ref.diode_at(system.module.parameters, g[n], t[n]))["v_oc"]) for n in g}
    assert voc["east"] > 130.0 > voc["west"]
    assert list(got) == ["east tracker"]
    assert got["east tracker"]["value"] == pytest.approx(voc["east"], rel=1e-6)
    assert got["east tracker"]["message"].startswith("PV input above the controller's maximum voltage: east tracker:")


def test_fleet_table_has_a_column_per_alert_that_fired_anywhere():
    from pvsource.explore import fleet_table

    quiet = {"energy_mpp_kwh": 1.0, "alert_hours": {"pv_input_over_max_v": 0.0, "cable_over_ampacity": 0.0}}
    loud = {"energy_mpp_kwh": 2.0, "alert_hours": {"pv_input_over_max_v": 12.5, "cable_over_ampacity": 0.0}}
    table = fleet_table([("quiet", quiet), ("loud", loud)])
    assert [c for c in table.columns if c.startswith("alert_")] == ["alert_hours.pv_input_over_max_v"]
    assert table["alert_hours.pv_input_over_max_v"].tolist() == [0.0, 12.5]


def test_several_controllers_bank_runs_carry_their_own_output():
    from pvsource.config import load_system

    # The east-west example with every bank-side run rated 1 A (invented), so
    # each alert reports the current its run carries: each tracker's run its
    # own output, the interconnects their sum (Kirchhoff's current law at the bank).
    base = load_system(ROOT / "data" / "example-east-west.toml")
    cables = tuple(replace(c, ampacity_a=1.0) if c.role in ("bank", "interconnect") else c for c in base.cables)
    system = replace(base, cables=cables)
    frame = operating_points(system)
    got = {a["run"]: a["value"] for a in point_alerts(system, frame) if a["name"] == "cable_over_ampacity"}
    east, west = got["east tracker to bank"], got["west tracker to bank"]
    assert east > 1.0 and west > 1.0 and east != pytest.approx(west)
    assert got["bank interconnects"] == pytest.approx(east + west, rel=1e-9)


def test_a_season_judges_the_banks_own_current_not_the_loads():
    # Kirchhoff at the bank terminals: the controller's output is the bank's current plus the loads'. A
    # controller that carries the loads on top of the bank's full rate does not overcharge the bank, so the
    # rate alert must not fire, in the steps' codes or in the summary.
    from pvsource.demo import demo_system, synthetic_weather
    from pvsource.season import run_season

    base = demo_system()
    bank = make_bank("lead-acid-flooded", 12, 1, 200.0, 0.3, 25.0)
    rate = bank.chemistry.max_charge_c_rate * bank.capacity_ah
    system = replace(base, bank=bank, controller=replace(base.controller, max_output_a=rate + 20.0))
    weather = synthetic_weather(system)
    june = weather[(weather.index.month == 6) & (weather.index.day <= 7)]
    weather = june.assign(load_w=np.maximum(june["load_w"].to_numpy(), 150.0))
    result = run_season(system, weather)
    steps = result.steps
    own = (steps["charge_current_a"] - steps["bank_load_a"]).to_numpy()
    assert steps["charge_current_a"].max() > rate + 1.0  # the controller does give more than the bank's rate
    assert own.max() <= rate * (1 + 1e-9)  # the bank itself never takes more
    assert result.summary["alert_hours"]["charge_over_bank_rate"] == 0.0
    assert (steps["alerts"].to_numpy() == alert_codes(system, steps)).all()
