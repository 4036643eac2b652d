"""Per-run accounting at an operating point, size recommendations and the one-run mode."""

import pytest

from pvsource import conductors
from pvsource.errors import InputError
from pvsource.operating import operating_points
from pvsource.runs import path_drops, quick_record, recommend_size, run_flows, size_options, wire_record
from pvsource.system import Load
from pvsource.wiring import CableRun

from conftest import make_system


def sized(name, role, length_m, size, group=None, **kw):
    s = conductors.parse_size(size)
    r_km = 1000 * float(conductors.resistance_per_m_ohm(s.area_mm2, kw.get("material", "copper"),
                                                         kw.get("temp_c", 75.0)))
    return CableRun(name, role, length_m, r_km, group, size=s, **kw)


@pytest.fixture(scope="module")
def wired(demo_module):
    runs = (sized("lead e", "string", 4, "4 mm2", "g1"), sized("home e", "home-run", 9, "6 mm2", "g1"),
            sized("home w", "home-run", 15, "6 mm2", "g2"), sized("feeder", "feeder", 20, "10 mm2"),
            sized("to bank", "bank", 3, "25 mm2"), sized("link", "interconnect", 0.5, "35 mm2"))
    system = make_system(demo_module, groups=((3, 2), (3, 1)), cables=runs,
                         load=Load("battery", emf_v=80.0, resistance_ohm=0.05))
    row = operating_points(system, {"g1": 900.0, "g2": 500.0}, 40.0).iloc[0]
    return system, row


def test_run_losses_add_up_to_the_solved_cable_loss(wired):
    # Law: the energy balance of the solved network, run by run.
    system, row = wired
    flows = run_flows(system, row)
    assert [f.run.name for f in flows] == [c.name for c in system.cables]
    assert sum(f.loss_w for f in flows) == pytest.approx(row["cable_loss_w"], rel=1e-9)


def test_drops_along_each_path_reach_the_load_voltage(wired):
    # Law: Kirchhoff's voltage law from each group's string terminals to the load.
    system, row = wired
    drops = path_drops(system, run_flows(system, row))
    for g in system.groups:
        assert row[f"group_{g.name}_v"] - drops[g.name] == pytest.approx(row["load_v"], rel=1e-9)


def test_string_leads_report_one_string_and_sum_all(wired):
    system, row = wired
    lead = run_flows(system, row)[0]
    assert lead.copies == 2
    assert lead.current_a == pytest.approx(row["group_g1_i_a"] / 2)
    assert lead.loss_w == pytest.approx(2 * lead.current_a**2 * lead.resistance_ohm)
    assert lead.drop_fraction == pytest.approx(lead.loss_fraction)


def test_recommended_size_is_the_smallest_that_meets_the_budget(wired):
    system, row = wired
    for flow in run_flows(system, row):
        best = recommend_size(flow, 0.01)
        series = conductors.standard_sizes(flow.run.size.series)
        k = [s.label for s in series].index(best.label)

        def frac(s):
            r = conductors.loop_resistance_ohm(flow.run.length_m, s.area_mm2, "copper", 75.0)
            return flow.current_a * r / flow.circuit_v

        assert frac(best) <= 0.01
        if k > 0:
            assert frac(series[k - 1]) > 0.01


def test_size_options_step_up_and_cost_more_metal(wired):
    system, row = wired
    options = size_options(run_flows(system, row)[3])
    assert [o.size.label for o in options] == ["10 mm2", "16 mm2", "25 mm2", "35 mm2"]
    assert all(b.loss_w < a.loss_w and b.mass_kg > a.mass_kg for a, b in zip(options, options[1:]))


def test_wire_record_flags_runs_over_budget(wired):
    system, row = wired
    rec = wire_record(system, row, 0.005)
    over = {r["name"] for r in rec["runs"] if r["breaks_budget"]}
    assert set(rec["over_budget"]) == over
    assert all(r["drop_pct"] > r["budget_pct"] for r in rec["runs"] if r["name"] in over)
    assert rec["total"]["loss_w"] == pytest.approx(row["cable_loss_w"])
    # Budgets add along a path like drops in series (Kirchhoff): the shares of
    # each group's string lead, home run and the feeder stay within the circuit's 0.5 %.
    for g in system.groups:
        path = [r["budget_pct"] for r in rec["runs"] if r["circuit"] == "pv" and r["group"] in (None, g.name)]
        assert sum(path) <= 0.5 + 1e-9


def test_one_run_matches_the_k_factor_rule():
    # Common practice: VD = 2 K I L / CM with K = 12.9 ohm-cmil/ft for copper
    # (21.2 for aluminium) near 75 degC. 10 AWG is 10,380 cmil (NEC Ch. 9 Table 8).
    feet = 50.0
    rec = quick_record(20.0, feet * 0.3048, "10 AWG", volts=48.0)
    assert rec["drop_v"] == pytest.approx(2 * 12.9 * 20 * feet / 10380, rel=0.02)
    al = quick_record(20.0, feet * 0.3048, "10 AWG", material="aluminium", volts=48.0)
    assert al["drop_v"] == pytest.approx(2 * 21.2 * 20 * feet / 10380, rel=0.02)
    assert rec["loss_w"] == pytest.approx(20.0 * rec["drop_v"])
    assert rec["resistance_ohm"] == pytest.approx(rec["drop_v"] / 20.0)


def test_one_run_with_a_budget_recommends_a_size_in_its_own_series():
    rec = quick_record(20.0, 15.0, "6 mm2", volts=48.0, budget_fraction=0.02)
    assert rec["recommended_size"].endswith("mm2")
    assert rec["breaks_budget"] is True
    rec = quick_record(20.0, 15.0, "#10", volts=48.0, budget_fraction=0.02)
    assert rec["recommended_size"].endswith("AWG")


@pytest.mark.parametrize("kwargs, where", [
    (dict(size_text="banana"), "--size"),
    (dict(size_text="-3 AWG"), "--size"),
    (dict(material="unobtainium"), "--material"),
    (dict(length_m=-4.0), "--length-m"),
    (dict(current_a=0.0, budget_fraction=0.02), "--current"),
    (dict(budget_fraction=0.02, volts=None), "--budget-pct"),
    (dict(temp_c=900.0), "--temp-c"),
])
def test_one_run_rejects_bad_values_naming_the_option(kwargs, where):
    args = dict(current_a=20.0, length_m=15.0, size_text="10 AWG", volts=48.0)
    args.update(kwargs)
    with pytest.raises(InputError) as exc:
        quick_record(**args)
    assert exc.value.where == where


@pytest.mark.parametrize("size, installation, option", [
    ("10 AWG", {"install": "B1"}, "--install"),          # B1 is an IEC 60364-5-52 method, not an NEC 310.16/310.17 one
    ("10 AWG", {"insulation_c": 70.0}, "--insulation-c"),  # NEC 310.16 has 60, 75 and 90 degC columns
    ("6 mm2", {"insulation_c": 75.0}, "--insulation-c"),   # IEC 60364-5-52 tabulates 70 (PVC) and 90 (XLPE) degC
])
def test_quick_wire_refuses_an_installation_the_sizes_standard_does_not_tabulate(size, installation, option, capsys):
    from conftest import run_cli
    from pvsource.ampacity import Installation

    with pytest.raises(InputError) as exc:
        quick_record(20.0, 15.0, size, installation=Installation(**installation))
    assert exc.value.field == option
    args = ["wire", "--current", "20", "--length-m", "15", "--size", size,
            option, str(next(iter(installation.values())))]
    code, out, err = run_cli(capsys, *args)
    assert code == 2 and out == "" and option in err and len(err.strip().splitlines()) == 1


def test_quick_wire_takes_each_standards_own_installations():
    # Each size takes its own standard's installations, and gets that standard's table value.
    from pvsource.ampacity import Installation

    awg = quick_record(20.0, 15.0, "10 AWG", installation=Installation(install="raceway", insulation_c=90.0))
    metric = quick_record(20.0, 15.0, "6 mm2", installation=Installation(install="B1", insulation_c=90.0))
    # NEC 310.16 (from memory): 10 AWG copper, 90 degC column 40 A; 110.14(C) holds it to the 75 degC column, 35 A.
    assert awg["ampacity_a"] == pytest.approx(40.0) and awg["ampacity_limit_a"] == pytest.approx(35.0)
    # IEC 60364-5-52 Table B.52.5 (from memory): 6 mm2 copper, XLPE, method B1, two loaded conductors, 54 A.
    assert metric["ampacity_a"] == pytest.approx(54.0)
