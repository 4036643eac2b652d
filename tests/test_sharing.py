"""Several controllers into one bank: each tracks its own groups, the bank takes their sum."""

from dataclasses import replace

import numpy as np
import pandas as pd
import pytest
from pvlib import pvsystem

from pvsource.array import StringGroup
from pvsource.bank import make_bank
from pvsource.controller import make_controller
from pvsource.module import DiodeParameters, module_from_parameters
from pvsource.operating import controller_column, operating_points, point_record
from pvsource.sharing import share_pro_rata
from pvsource.system import ControllerGroups, System
from pvsource.wiring import CableRun


def _tracker(name, max_output_a=100.0, **kw):
    return make_controller("mppt", name=name, max_input_v=150.0, max_output_a=max_output_a, **kw)


def _two_on_one_bank(module, groups, outputs, bank, cables=(), **kw):
    """Group k on tracker k (named e, w, ...), every tracker into ``bank``."""
    names = ("e", "w", "n")
    gs = tuple(StringGroup(f"g{k + 1}", n_s, n_p) for k, (n_s, n_p) in enumerate(groups))
    assigned = tuple(ControllerGroups(_tracker(names[k], out, **kw), (g.name,)) for k, (g, out)
                     in enumerate(zip(gs, outputs)))
    return System(module=module, groups=gs, cables=tuple(cables), bank=bank, controllers=assigned, name="shared")


def _one(module, group, output, bank, cables=(), **kw):
    return System(module=module, groups=(StringGroup("g1", *group),), cables=tuple(cables), bank=bank,
                  controller=_tracker("e", output, **kw), name="one")


@pytest.mark.parametrize("irradiance, cell_c, soc, output_a", [
    (350.0, 35.0, 0.5, 100.0),   # bulk: each tracker gives all its array makes
    (1000.0, 25.0, 0.5, 100.0),  # the bank's rate binds the sum
    (1000.0, 25.0, 0.5, 12.0),   # each tracker's own output binds
    (900.0, 40.0, 0.97, 100.0),  # the acceptance near full binds (constant-voltage stage)
    (600.0, 30.0, 0.999, 100.0),  # float
    (150.0, 10.0, 0.3, 100.0),   # low light
])
def test_two_trackers_on_two_bank_strings_are_twice_one_on_one(demo_module, irradiance, cell_c, soc, output_a):
    # A law worked out here: two identical groups, each on its own tracker
    # with its own bank run, into a bank of two parallel strings (capacity
    # 2C, resistance R/2, rate and constant-voltage current doubled) behind
    # an interconnect of r, see E + (R/2)(2I) + r(2I) + R_k I = E + (R + 2r) I + R_k I:
    # each behaves exactly as one tracker on one group into one string
    # (capacity C, resistance R) behind 2r. So every current and watt of the
    # pair is twice the single one's, and each tracker's is the single one's.
    own = [CableRun("e out", "bank", 2.0, 1.2, controller="e"), CableRun("w out", "bank", 2.0, 1.2, controller="w"),
           CableRun("links", "interconnect", 0.5, 0.8)]
    pair = _two_on_one_bank(demo_module, ((3, 2), (3, 2)), (output_a, output_a),
                            make_bank("lfp", 8, 2, 100.0, soc, 25.0), own)
    single = _one(demo_module, (3, 2), output_a, make_bank("lfp", 8, 1, 50.0, soc, 25.0),
                  [CableRun("e out", "bank", 2.0, 1.2), CableRun("links", "interconnect", 1.0, 0.8)])
    a = operating_points(pair, irradiance, cell_c).iloc[0]
    b = operating_points(single, irradiance, cell_c).iloc[0]
    for key in ("charge_current_a", "generated_w", "stored_w", "curtailed_w", "controller_loss_w", "cable_loss_w",
                "bank_internal_loss_w", "delivered_w"):
        assert a[key] == pytest.approx(2.0 * b[key], rel=1e-7, abs=1e-9), key
    for name in ("e", "w"):
        assert a[controller_column(name, "charge_current_a")] == pytest.approx(b["charge_current_a"], rel=1e-7,
                                                                                abs=1e-9)
        assert a[controller_column(name, "input_v")] == pytest.approx(b["controller_input_v"], rel=1e-7)
        assert a[controller_column(name, "stage")] == b["stage"]
        assert a[controller_column(name, "limit")] == b["limit"]
    assert (a["stage"], a["limit"]) == (b["stage"], b["limit"])
    assert a["load_v"] == pytest.approx(b["load_v"], rel=1e-9)


# A record of the CEC module library that pvlib ships (California Energy
# Commission, an open dataset), used with its own fitted parameters.
CEC_NAME = "Canadian_Solar_Inc__CS6K_275M"


def test_an_east_west_pair_gives_each_faces_pvlib_mpp_times_the_efficiency():
    # Reference: pvlib's CEC model (calcparams_cec) and its Lambert-W
    # single-diode solution give each face's maximum power; a tracker with a
    # flat 96 % efficiency puts out 0.96 x that when nothing limits it. At the
    # shared bank, the sum P drives I with (E + R I) I = P (Ohm's law and the
    # definition of power), solved by hand below.
    r = pvsystem.retrieve_sam("CECMod")[CEC_NAME]
    module = module_from_parameters(DiodeParameters(float(r.I_L_ref), float(r.I_o_ref), float(r.R_s),
                                                    float(r.R_sh_ref), float(r.a_ref), float(r.alpha_sc), int(r.N_s),
                                                    adjust_pct=float(r.Adjust)))
    flat = ((0.0, 0.96), (1.0, 0.96))
    system = _two_on_one_bank(module, ((3, 1), (3, 1)), (100.0, 100.0), make_bank("lfp", 8, 1, 400.0, 0.5, 20.0),
                              efficiency_curve=flat)
    # A clear morning: the east face in sun, the west one in diffuse light.
    east, west = (820.0, 48.0), (260.0, 31.0)
    row = operating_points(system, {"g1": east[0], "g2": west[0]}, {"g1": east[1], "g2": west[1]}).iloc[0]
    expected = {}
    for name, (g, t) in (("e", east), ("w", west)):
        cp = pvsystem.calcparams_cec(g, t, r.alpha_sc, r.a_ref, r.I_L_ref, r.I_o_ref, r.R_sh_ref, r.R_s, r.Adjust)
        p_mp = 3 * float(pvsystem.singlediode(*cp, method="lambertw")["p_mp"])
        out = row[controller_column(name, "generated_w")] - row[controller_column(name, "loss_w")]
        assert row[controller_column(name, "generated_w")] == pytest.approx(p_mp, rel=1e-6)
        assert out == pytest.approx(0.96 * p_mp, rel=1e-6)
        expected[name] = 0.96 * p_mp
    p = sum(expected.values())
    e, res = row["bank_emf_v"], row["bank_r_ohm"]
    i = (-e + np.sqrt(e * e + 4.0 * res * p)) / (2.0 * res)
    assert row["charge_current_a"] == pytest.approx(i, rel=1e-6)
    assert row["limit"] == "source" and row["stage"] == "bulk"


@pytest.mark.parametrize("capacity_ah, soc, expected, limit, stage", [
    # LFP preset (its file): charge rate 0.5 C, acceptance tapering from a
    # state of charge of 0.95 to nothing at full. The trackers can give 30 A
    # and 10 A (their own max_output_a; the arrays make more).
    (40.0, 0.5, (15.0, 5.0), "bank charge rate", "bulk"),            # 0.5 x 40 = 20 A, shared 30:10
    (40.0, 0.97, (9.0, 3.0), "voltage regulation", "absorption"),    # 20 x (1 - 0.97) / 0.05 = 12 A
    (280.0, 0.5, (30.0, 10.0), "controller output current", "bulk"),  # 140 A: the bank takes all
])
def test_the_bank_shares_its_limit_pro_rata_to_what_each_could_give(demo_module, capacity_ah, soc, expected, limit,
                                                                     stage):
    # The rule (pvsource.sharing), worked out by hand: each gives a_k within
    # its own limit; where the bank takes less than the sum, each gets
    # I_bank x a_k / sum(a).
    system = _two_on_one_bank(demo_module, ((3, 2), (3, 1)), (30.0, 10.0),
                              make_bank("lfp", 8, 1, capacity_ah, soc, 25.0))
    row = operating_points(system, 1000.0, 25.0).iloc[0]
    rec = point_record(system, row)
    got = tuple(c["charge_current_a"] for c in rec["controllers"])
    assert got == pytest.approx(expected, rel=1e-9)
    assert rec["charge_current_a"] == pytest.approx(sum(expected), rel=1e-9)
    assert [c["limit"] for c in rec["controllers"]] == [limit, limit]
    assert rec["limit"] == limit and rec["stage"] == stage
    assert [c["name"] for c in rec["controllers"]] == ["e", "w"] and rec["controllers"][1]["groups"] == ["g2"]
    for c in rec["controllers"]:
        assert {"name", "charge_current_a", "stage", "limit", "input_v", "curtailed_w", "loss_w"} <= set(c)


def test_share_pro_rata_by_hand():
    # 20 A shared by 30 and 10: 15 and 5; nothing cut when the bank takes 50; nothing to share of 0.
    own = np.array([[30.0, 30.0, 0.0], [10.0, 10.0, 0.0]])
    got = share_pro_rata(own, np.array([20.0, 50.0, 5.0]))
    assert got.tolist() == [[15.0, 30.0, 0.0], [5.0, 10.0, 0.0]]


def test_a_season_of_two_trackers_is_twice_one(demo_module):
    # The same law through time: the pair into the two-string bank with
    # twice the load keeps the single system's state of charge step by
    # step, so every energy is doubled. Three summer days, hourly.
    from pvsource.demo import synthetic_weather
    from pvsource.season import run_season
    from pvsource.system import Site

    site = Site(46.2, 8.9, 640.0)
    weather = synthetic_weather().iloc[24 * 180:24 * 183]
    pair = replace(_two_on_one_bank(demo_module, ((3, 1), (3, 1)), (100.0, 100.0),
                                    make_bank("lfp", 8, 2, 100.0, 0.4, 25.0),
                                    [CableRun("e out", "bank", 2.0, 1.2, controller="e"),
                                     CableRun("w out", "bank", 2.0, 1.2, controller="w")]), site=site)
    single = replace(_one(demo_module, (3, 1), 100.0, make_bank("lfp", 8, 1, 50.0, 0.4, 25.0),
                          [CableRun("e out", "bank", 2.0, 1.2)]), site=site)
    doubled = weather.copy()
    doubled["load_w"] = 2.0 * weather["load_w"]
    a, b = run_season(pair, doubled).summary, run_season(single, weather).summary
    assert b["energy_stored_kwh"] > 1.0 and b["max_soc"] > b["min_soc"]
    for key in ("energy_generated_kwh", "energy_stored_kwh", "controller_loss_kwh", "curtailed_kwh",
                "unmet_load_kwh", "bank_internal_loss_kwh"):
        assert a[key] == pytest.approx(2.0 * b[key], rel=1e-6, abs=1e-9), key
    assert a["min_soc"] == pytest.approx(b["min_soc"], abs=1e-9)
    # Each controller's books: the pair's halves each equal the single one,
    # and the controllers add up to the span, month by month too.
    for c in a["controllers"]:
        assert c["energy_stored_kwh"] == pytest.approx(b["energy_stored_kwh"], rel=1e-6)
        assert c["hours_by_limit"] == b["controllers"][0]["hours_by_limit"]
    assert sum(c["energy_stored_kwh"] for c in a["controllers"]) == pytest.approx(a["energy_stored_kwh"], rel=1e-12)
    for m in a["monthly"]:
        assert sum(c["curtailed_kwh"] for c in m["controllers"]) == pytest.approx(m["curtailed_kwh"], rel=1e-9,
                                                                                  abs=1e-12)


def test_the_season_command_writes_each_controller_per_month(capsys, tmp_path):
    # The shipped east/west example over a week of the demo's synthetic weather
    # spanning two months: each month's controllers add up to the month
    # (stored energy is E x I_k, and the bank current is their sum).
    import json

    from conftest import DATA, run_cli, write_weather_csv
    from pvsource.config import load_system
    from pvsource.demo import synthetic_weather

    system = load_system(DATA / "example-east-west.toml")
    weather = synthetic_weather(system)
    week = weather[(weather.index >= pd.Timestamp("2025-05-28", tz=weather.index.tz))
                   & (weather.index < pd.Timestamp("2025-06-04", tz=weather.index.tz))]
    csv = write_weather_csv(week, tmp_path / "w.csv")
    code, out, err = run_cli(capsys, "season", str(DATA / "example-east-west.toml"), str(csv), "--out",
                             str(tmp_path / "out"), "--json")
    assert code == 0, err
    summary = json.loads(out)
    assert [c["name"] for c in summary["controllers"]] == ["east tracker", "west tracker"]
    monthly = pd.read_csv(tmp_path / "out" / "monthly.csv")
    assert len(monthly) == 2
    both = sum(monthly[f"controller[{n}].energy_stored_kwh"] for n in ("east tracker", "west tracker"))
    assert both.to_numpy() == pytest.approx(monthly["energy_stored_kwh"].to_numpy(), rel=1e-9)
    assert monthly["energy_stored_kwh"].sum() == pytest.approx(summary["energy_stored_kwh"], rel=1e-9)
    assert "Each controller" in (tmp_path / "out" / "report.html").read_text()
    # Each controller's hours by limit per month: every step of the month is
    # under some limit, so they add up to the month's hours; a limit that binds
    # in one month only is a column of zeros in the other.
    stamps = pd.read_parquet(tmp_path / "out" / "steps.parquet", columns=["soc"]).index
    local = stamps.tz_localize(None) if stamps.tz is not None else stamps
    hours = local.to_period("M").value_counts().sort_index().to_numpy() * summary["step_h"]
    for m, name in enumerate(("east tracker", "west tracker")):
        cols = [c for c in monthly if c.startswith(f"controller[{name}].hours_by_limit.")]
        assert "source" in {c.rsplit(".", 1)[1] for c in cols}
        assert monthly[cols].sum(axis=1).to_numpy() == pytest.approx(hours, rel=1e-9)
        for row, month in zip(monthly.to_dict("records"), summary["monthly"]):
            mine = month["controllers"][m]["hours_by_limit"]
            assert {c.rsplit(".", 1)[1]: row[c] for c in cols if row[c] > 0} == pytest.approx(mine)


def test_several_controllers_without_a_bank_are_refused_at_a_point(demo_module):
    from pvsource.errors import InputError

    system = _two_on_one_bank(demo_module, ((3, 1), (3, 1)), (30.0, 10.0), None)
    with pytest.raises(InputError) as exc:
        operating_points(system, 800.0, 40.0)
    assert exc.value.field == "[[controller]]" and "[bank]" in exc.value.expected


def test_two_pwm_switches_share_the_banks_acceptance_pro_rata(demo_module):
    # Two PWM switches, one on two strings of one module and one on a single
    # string, into a 40 Ah LFP bank at 97 %: the preset's acceptance (rate
    # 0.5 C, tapering from 0.95 to full) lets 20 x (1 - 0.97) / 0.05 = 12 A in
    # (by hand). Each switch closed passes its array's current at the bank's
    # voltage; the rule shares the 12 A pro rata to those currents, which
    # each switch's duty then delivers on average.
    gs = (StringGroup("g1", 1, 2), StringGroup("g2", 1, 1))
    assigned = tuple(ControllerGroups(make_controller("pwm", name=n, max_input_v=60.0), (g.name,))
                     for n, g in zip(("e", "w"), gs))
    system = System(module=demo_module, groups=gs, bank=make_bank("lfp", 8, 1, 40.0, 0.97, 25.0),
                    controllers=assigned, name="pwm pair")
    row = operating_points(system, 900.0, 40.0).iloc[0]
    i_e, i_w = row[controller_column("e", "charge_current_a")], row[controller_column("w", "charge_current_a")]
    on_e, on_w = row[controller_column("e", "i_a")], row[controller_column("w", "i_a")]
    assert i_e + i_w == pytest.approx(12.0, rel=1e-9) and row["charge_current_a"] == pytest.approx(12.0, rel=1e-9)
    assert i_e / i_w == pytest.approx(on_e / on_w, rel=1e-9)
    assert on_e + on_w > 12.0  # the bank, not the arrays, binds
    assert row[controller_column("e", "duty")] == pytest.approx(i_e / on_e, rel=1e-9)
    assert row["limit"] == "voltage regulation"
