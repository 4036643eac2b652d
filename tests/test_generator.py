"""The backup generator: its file section, fuel model and charger, each against numbers worked out by hand."""

import numpy as np
import pytest

from pvsource.config import load_system
from pvsource.errors import InputError
from pvsource.generator import Generator, charge_current_a, fuel_at_fraction_l_per_h, fuel_rate_l_per_h, step_accounts

from test_config import BANK, write

GENERATOR = BANK + """
[generator]
charger_current_a = 40
start_soc = 0.3
stop_soc = 0.85
min_run_h = 2
rated_power_w = 3000
"""


def test_a_generator_section_loads(tmp_path):
    gen = load_system(write(tmp_path, GENERATOR)).generator
    assert gen == Generator(start_soc=0.3, stop_soc=0.85, charger_current_a=40.0, min_run_h=2.0, rated_power_w=3000.0)
    assert gen.fuel_model == "linear"
    curve = GENERATOR + "fuel_curve = [[0.25, 0.9], [0.5, 1.4], [1.0, 2.4]]\n"
    assert load_system(write(tmp_path, curve)).generator.fuel_model == "curve"
    power = GENERATOR.replace("charger_current_a = 40", "charger_power_w = 1200").replace(
        "rated_power_w = 3000", "fuel_l_per_h = 1.1")
    gen = load_system(write(tmp_path, power)).generator
    assert gen.charger_power_w == 1200.0 and gen.charger_current_a is None and gen.fuel_model == "constant"
    assert load_system(write(tmp_path, BANK)).generator is None


@pytest.mark.parametrize("edit, field, words", [
    (("charger_current_a = 40", "charger_current_a = 40\ncharger_power_w = 900"), "[generator].charger_power_w",
     "not both"),
    (("charger_current_a = 40\n", ""), "[generator].charger_current_a", "is missing"),
    (("stop_soc = 0.85", "stop_soc = 0.3"), "[generator].stop_soc", "above start_soc"),
    (("stop_soc = 0.85", "stop_soc = 1.0"), "[generator].stop_soc", "never end"),
    (("start_soc = 0.3", "start_soc = 30"), "[generator].start_soc", "30 % is 0.3"),
    (("min_run_h = 2", "min_run_h = -1"), "[generator].min_run_h", "at least 0"),
    (("rated_power_w = 3000", "rated_power_w = 0"), "[generator].rated_power_w", "greater than zero"),
    (("rated_power_w = 3000", 'rated_power_w = "3 kW"'), "[generator].rated_power_w", "expected a number"),
    (("rated_power_w = 3000\n", ""), "[generator].fuel_l_per_h", "linear fuel law"),
    (("rated_power_w = 3000", "fuel_curve = [[0.25, 0.9], [1.0, 2.4]]"), "[generator].rated_power_w",
     "rated power"),
    (("min_run_h = 2", "fuel_curve = [[0.5, 1.4], [0.25, 0.9]]"), "[generator].fuel_curve", "must rise"),
    (("min_run_h = 2", "fuel_curve = [[0.25, 1.4], [0.5, 0.9]]"), "[generator].fuel_curve", "must not fall"),
    (("min_run_h = 2", "fuel_curve = [[0.25, 0.9], [1.5, 2.4]]"), "[generator].fuel_curve", "from 0 to 1"),
    (("min_run_h = 2", "fuel_curve = [0.25, 0.9]"), "[generator].fuel_curve", "pairs"),
    (("min_run_h = 2", "fuel_l_per_h = 1.2\nfuel_curve = [[0.25, 0.9], [1.0, 2.4]]"), "[generator].fuel_curve",
     "not both"),
    (("min_run_h = 2", "charger_efficiency = 85"), "[generator].charger_efficiency", "at most 1"),
    (("min_run_h = 2", "min_run = 2"), "[generator].min_run", "unknown key"),
    # The LFP preset disconnects the loads at 20 % (common practice): a start at 15 % would never come.
    (("start_soc = 0.3", "start_soc = 0.15"), "[generator].start_soc", "min_soc (0.2)"),
])
def test_bad_generator_values_name_the_field(tmp_path, edit, field, words):
    assert edit[0] in GENERATOR
    with pytest.raises(InputError) as exc:
        load_system(write(tmp_path, GENERATOR.replace(*edit, 1)))
    assert exc.value.field == field and words in exc.value.expected, exc.value.one_line()


def test_the_shipped_example_has_a_generator():
    from conftest import DATA

    gen = load_system(DATA / "example-hut-generator.toml").generator
    assert (gen.start_soc, gen.stop_soc, gen.charger_current_a, gen.fuel_model) == (0.3, 0.85, 40.0, "curve")


def test_a_generator_needs_a_bank(tmp_path):
    from test_config import GOOD

    with pytest.raises(InputError) as exc:
        load_system(write(tmp_path, GOOD + "\n[generator]" + GENERATOR.split("[generator]")[1]))
    assert exc.value.field == "[generator]" and "[bank]" in exc.value.expected


def test_the_linear_fuel_law_by_hand():
    # Linear fuel law (Skarstein and Uhlen 1989, coefficients from memory):
    # 0.08145 l/h per kW rated + 0.246 l/kWh out. A 5 kW set, worked by hand:
    # idle 5 x 0.08145 = 0.40725 l/h; half load adds 2.5 x 0.246 = 0.615 l/h;
    # full load adds 1.23 l/h.
    gen = Generator(start_soc=0.3, stop_soc=0.9, charger_current_a=50.0, rated_power_w=5000.0)
    assert fuel_at_fraction_l_per_h(gen, [0.0, 0.5, 1.0]) == pytest.approx([0.40725, 1.02225, 1.63725], rel=1e-12)
    assert fuel_rate_l_per_h(gen, 2500.0) == pytest.approx(1.02225, rel=1e-12)
    # Common practice (from memory): a small diesel set at full load makes 2.5 to 3.5 kWh per litre.
    assert 2.5 <= 5.0 / fuel_at_fraction_l_per_h(gen, 1.0) <= 3.5


def test_a_fuel_curve_interpolates_and_holds_its_ends():
    gen = Generator(start_soc=0.3, stop_soc=0.9, charger_current_a=50.0, rated_power_w=4000.0,
                    fuel_curve=((0.25, 0.9), (0.5, 1.4), (1.0, 2.4)))
    # By hand: 0.375 is half-way from 0.25 to 0.5, so 0.9 + 0.5 x 0.5 = 1.15 l/h; 0.75 gives 1.4 + 0.5 x 1.0 = 1.9.
    # Below the first point the first rate holds (0.9), above the last the last (2.4).
    assert fuel_at_fraction_l_per_h(gen, [0.375, 0.75, 0.1, 1.3]) == pytest.approx([1.15, 1.9, 0.9, 2.4], rel=1e-12)
    assert fuel_rate_l_per_h(gen, 1500.0) == pytest.approx(1.15, rel=1e-12)  # 1500 W of 4000 W is 0.375


def test_a_constant_fuel_rate_needs_no_rating():
    gen = Generator(start_soc=0.3, stop_soc=0.9, charger_current_a=50.0, fuel_l_per_h=1.3)
    assert fuel_rate_l_per_h(gen, [0.0, 800.0, 5000.0]) == pytest.approx([1.3] * 3)


def test_charge_current_from_power_and_power_sharing():
    by_power = Generator(start_soc=0.3, stop_soc=0.9, charger_power_w=2000.0, fuel_l_per_h=1.0)
    # By hand: 2000 W into a 50 V bank is 40 A; at 25 V, 80 A.
    assert charge_current_a(by_power, [50.0, 25.0]) == pytest.approx([40.0, 80.0])
    # Power sharing (common practice): a 3 kW set carrying 1.5 kW leaves 1.5 kW for a charger of 85 %
    # efficiency, 1275 W DC, 25.5 A at 50 V; a 2.8 kW load leaves 0.2 x 0.85 = 170 W, 3.4 A; an
    # overload leaves nothing. The 40 A current limit binds when the load is light.
    shared = Generator(start_soc=0.3, stop_soc=0.9, charger_current_a=40.0, rated_power_w=3000.0,
                       charger_efficiency=0.85)
    assert charge_current_a(shared, 50.0, [1500.0, 2800.0, 3500.0, 0.0]) == pytest.approx([25.5, 3.4, 0.0, 40.0])


def test_step_accounts_add_the_chargers_current_to_the_arrays():
    # By hand, one step run fully: R = 20 mOhm, the array gives 10 A, the charger 30 A, EMF 50 V.
    # Bank loss the charger adds: R ((10 + 30)^2 - 10^2) = 0.02 x 1500 = 30 W; stored 50 x 30 = 1500 W;
    # the charger delivers 1530 W DC and, at 90 %, draws 1700 W (170 W lost); with a 600 W load the set
    # gives 2300 W. Half a step run at the same power: the step means halve.
    gen = Generator(start_soc=0.3, stop_soc=0.9, charger_current_a=30.0, rated_power_w=4600.0,
                    charger_efficiency=0.9)
    out = step_accounts(gen, np.array([1.0, 0.5, 0.0]), np.array([30.0, 15.0, 0.0]), np.full(3, 600.0),
                        np.full(3, 50.0), np.full(3, 0.02), np.full(3, 10.0))
    assert out["generator_bank_loss_w"] == pytest.approx([30.0, 15.0, 0.0])
    assert out["generator_stored_w"] == pytest.approx([1500.0, 750.0, 0.0])
    assert out["generator_charger_loss_w"] == pytest.approx([170.0, 85.0, 0.0])
    assert out["generator_w"] == pytest.approx([2300.0, 1150.0, 0.0])
    # Linear law at half load of 4.6 kW (2300 W): 4.6 x 0.08145 + 2.3 x 0.246 = 0.94047 l/h.
    assert out["generator_fuel_l_per_h"] == pytest.approx([0.94047, 0.470235, 0.0])


def _cycle_events(soc0, start, stop, min_run_h, discharge_per_h, charge_per_h, span_h):
    """Start and stop times of the generator, worked out from the rates alone (no time steps)."""
    runs, t, soc = [], 0.0, soc0
    while True:
        t += (soc - start) / discharge_per_h  # falls to start_soc
        if t >= span_h:
            return runs
        run = max((stop - start) / charge_per_h, min_run_h)
        runs.append((t, min(t + run, span_h)))
        soc = start + run * charge_per_h
        t += run


@pytest.mark.parametrize("min_run_h", [0.0, 3.5])
@pytest.mark.parametrize("step_h", [1.0, 1.0 / 60.0])
def test_start_stop_hysteresis_and_fuel_in_closed_form(step_h, min_run_h):
    # A bank of 100 Ah at a constant 50 V EMF, no sun, a steady 500 W load (10 A): the state of charge
    # falls 0.1 per hour. The charger's 20 A, at a coulombic efficiency of 0.9, raises it 0.18 per
    # hour while the generator carries the load. From 0.5 it falls to 0.3 in 2 h; a run to 0.8 takes
    # 0.5 / 0.18 = 2.78 h (or min_run_h), then 5 h (or 6.3 h) to fall back. The start and stop are
    # placed within the step, so hourly and one-minute steps give the same hours.
    from pvsource.season import integrate_soc

    span_h, load_w, cap_ah, eta = 99.0, 500.0, 100.0, 0.9
    n = int(round(span_h / step_h))
    gen = Generator(start_soc=0.3, stop_soc=0.8, charger_current_a=20.0, min_run_h=min_run_h, rated_power_w=2000.0,
                    charger_efficiency=0.85)
    limits = (np.inf, 50.0, 0.95, 0.01, 1000.0, 1000.0)  # nothing limits the 20 A charger
    loop = integrate_soc(np.zeros((2, n)), np.full((2, n), 50.0), np.full(n, load_w), step_h, cap_ah, eta, 0.5,
                         np.array([0.0, 1.0]), limits, True, None, gen)
    soc, unmet, run = loop.soc, loop.unmet_w, loop.generator
    runs = _cycle_events(0.5, 0.3, 0.8, min_run_h, 0.1, 0.18, span_h)
    hours = sum(b - a for a, b in runs)
    assert run["starts"].sum() == len(runs) == (13 if min_run_h == 0.0 else 10)
    assert run["running"].sum() * step_h == pytest.approx(hours, rel=1e-9)
    # The charge it put in: 20 A for every hour it ran.
    assert run["charge_a"].sum() * step_h == pytest.approx(20.0 * hours, rel=1e-9)
    assert not unmet.any() and soc.min() >= 0.3 - 1e-12
    # Fuel by the linear law (Skarstein and Uhlen 1989, from memory) at the output, worked by hand: the
    # charger delivers 50 V x 20 A + R I (I + 2 x 0) = 1000 + 0.01 x 400 = 1004 W DC, draws
    # 1004 / 0.85 = 1181.18 W, and with the 500 W load the set gives 1681.18 W of its 2000 W:
    # 2 x 0.08145 + 1.68118 x 0.246 = 0.576470 l/h.
    accounts = step_accounts(gen, run["running"], run["charge_a"], np.full(n, load_w), np.full(n, 50.0),
                             np.full(n, 0.01), np.zeros(n))
    assert accounts["generator_fuel_l_per_h"].sum() * step_h == pytest.approx(0.576470 * hours, rel=1e-5)


def test_the_run_state_carries_across_calls():
    # Two halves of a span, the state handed from one to the next, give the whole span's run.
    from pvsource.season import integrate_soc

    n, gen = 240, Generator(start_soc=0.3, stop_soc=0.8, charger_current_a=20.0, min_run_h=3.5, fuel_l_per_h=1.0)
    limits = (np.inf, 50.0, 0.95, 0.01, 1000.0, 1000.0)
    whole = integrate_soc(np.zeros((2, n)), np.full((2, n), 50.0), np.full(n, 500.0), 0.25, 100.0, 0.9, 0.5,
                          np.array([0.0, 1.0]), limits, True, None, gen)
    cut = 111
    first = integrate_soc(np.zeros((2, cut)), np.full((2, cut), 50.0), np.full(cut, 500.0), 0.25, 100.0, 0.9, 0.5,
                          np.array([0.0, 1.0]), limits, True, None, gen)
    rest = integrate_soc(np.zeros((2, n - cut)), np.full((2, n - cut), 50.0), np.full(n - cut, 500.0), 0.25, 100.0,
                         0.9, first.end, np.array([0.0, 1.0]), limits, True, None, gen)
    assert np.concatenate([first.soc, rest.soc]) == pytest.approx(whole.soc, abs=1e-12)
    for key in ("running", "starts", "charge_a"):
        assert np.concatenate([first.generator[key], rest.generator[key]]) == pytest.approx(whole.generator[key],
                                                                                            abs=1e-12)


@pytest.fixture(scope="module")
def winter_with_generator():
    # January and February of the demo, whose bank empties without help, with a generator whose
    # 150 A charger is more than the LFP bank's 0.5 C (100 A for 200 Ah) can take: the bank's limit binds.
    from dataclasses import replace

    from pvsource.demo import demo_system, synthetic_weather
    from pvsource.season import run_season

    system = demo_system()
    weather = synthetic_weather(system)
    weather = weather[weather.index.month <= 2]
    gen = Generator(start_soc=0.25, stop_soc=0.8, charger_current_a=150.0, min_run_h=1.0, rated_power_w=6000.0)
    system = replace(system, generator=gen)
    return system, weather, run_season(system, weather)


def test_the_generator_keeps_the_bank_up_and_the_load_met(winter_with_generator):
    system, _, result = winter_with_generator
    s, steps = result.summary, result.steps
    assert s["generator_starts"] > 5 and s["generator_hours"] > 5.0
    # It starts at the moment the state of charge reaches start_soc, within the step: no step begins below it.
    assert steps["soc"].min() >= 0.25 - 1e-9
    assert s["unmet_load_kwh"] == 0.0
    # While it runs, the array's and the charger's current stay within the bank's 100 A (0.5 C of 200 Ah,
    # the LFP preset's rate, common practice); the exact array current may differ from the time loop's
    # interpolated one by a fraction of an ampere.
    on = steps["generator_running"].to_numpy() > 0
    total = steps["charge_current_a"].to_numpy()[on] + steps["generator_charge_a"].to_numpy()[on] / steps[
        "generator_running"].to_numpy()[on]
    assert total.max() <= 100.0 * 1.01 and total.max() >= 95.0


def test_months_add_up_to_the_span_with_a_generator(winter_with_generator):
    from pvsource.season import GENERATOR_KEYS

    s = winter_with_generator[2].summary
    assert len(s["monthly"]) == 2
    for key in GENERATOR_KEYS:
        assert sum(m[key] for m in s["monthly"]) == pytest.approx(s[key], rel=1e-9, abs=1e-9), key


def test_the_balance_closes_with_the_generator_as_an_input(winter_with_generator):
    system, _, result = winter_with_generator
    s, steps, b = result.summary, result.steps, system.bank
    # Law: conservation of energy. What the array generated and what the generator gave went into
    # cables, controller, the bank's resistance, the bank, the load the generator carried and its charger.
    into = s["energy_generated_kwh"] + s["generator_energy_kwh"]
    out = (s["wiring_loss_kwh"] + s["controller_loss_kwh"] + s["bank_internal_loss_kwh"] + s["energy_stored_kwh"]
           + s["generator_load_kwh"] + s["generator_charger_loss_kwh"] + s["generator_bank_loss_kwh"]
           + s["generator_stored_kwh"])
    assert out == pytest.approx(into, rel=1e-4)
    # Law (charge conservation): the charge stored from both sources, less the load the bank served,
    # is the change in state of charge.
    e = steps["bank_emf_v"].to_numpy()
    served = steps["load_w"].to_numpy() - steps["unmet_load_w"].to_numpy() - steps["generator_load_w"].to_numpy()
    net = (steps["stored_w"].to_numpy() + steps["generator_stored_w"].to_numpy() - served) / e
    net = np.where(net > 0, net * b.chemistry.coulombic_efficiency, net)
    soc = steps["soc"].to_numpy()
    throughput = np.abs(net[:-1]).sum() / b.capacity_ah
    assert abs(net[:-1].sum() / b.capacity_ah - (soc[-1] - soc[0])) <= 1e-3 * throughput


def test_hourly_and_one_minute_steps_give_the_same_generator_hours(winter_with_generator):
    # Law: run time does not depend on the time step. The same January hours at one-minute steps,
    # each minute carrying its hour's values. Tolerance 2 % (or one start): the synthetic weather's
    # sun positions are instants, so the minutes' light differs slightly from the hour's.
    import pandas as pd

    from pvsource.season import run_season

    system, weather, _ = winter_with_generator
    h = weather[weather.index.month == 1]
    m = h.loc[h.index.repeat(60)]
    m.index = m.index + pd.to_timedelta(np.tile(np.arange(60), len(h)), unit="min")
    m.attrs = dict(h.attrs, step_h=1 / 60)
    minutes = run_season(system, m)
    a, b = run_season(system, h).summary, minutes.summary
    assert a["generator_hours"] > 10.0
    # The clock hours of the minutes count the starts and give each hour's share run.
    from pvsource.season import hourly_table

    hours = hourly_table(minutes.steps, 1 / 60)
    assert hours["generator_starts"].sum() == b["generator_starts"]
    assert hours["generator_running"].sum() == pytest.approx(b["generator_hours"], rel=1e-9)
    assert b["generator_hours"] == pytest.approx(a["generator_hours"], rel=0.02)
    assert abs(b["generator_starts"] - a["generator_starts"]) <= 1
    assert b["generator_fuel_l"] == pytest.approx(a["generator_fuel_l"], rel=0.02)


def test_chunks_of_months_carry_the_generators_state(winter_with_generator):
    # The same two months solved in chunks of about a week: the running flag and the run time cross
    # each chunk's edge, so every step comes out as in one piece.
    from pvsource.season import run_season

    system, weather, whole = winter_with_generator
    pieces = run_season(system, weather, chunk_rows=24 * 7)
    for column in ("soc", "generator_running", "generator_starts", "generator_charge_a", "generator_fuel_l_per_h"):
        assert pieces.steps[column].to_numpy() == pytest.approx(whole.steps[column].to_numpy(), abs=1e-9), column
    assert pieces.summary["generator_starts"] == whole.summary["generator_starts"]


def test_the_season_command_writes_the_generator_through(capsys, tmp_path):
    # The shipped example through the command line on three winter weeks of the demo's synthetic weather.
    import json

    import pandas as pd

    from conftest import DATA, run_cli, write_weather_csv
    from pvsource.demo import synthetic_weather

    system = load_system(DATA / "example-hut-generator.toml")
    weather = synthetic_weather(system)
    csv = write_weather_csv(weather[weather.index < weather.index[0] + pd.Timedelta(days=21)], tmp_path / "w.csv")
    code, out, err = run_cli(capsys, "season", str(DATA / "example-hut-generator.toml"), str(csv), "--out",
                             str(tmp_path / "out"), "--json")
    assert code == 0, err
    summary = json.loads(out)
    assert summary["generator_starts"] >= 1 and summary["generator_fuel_l"] > 0
    monthly = pd.read_csv(tmp_path / "out" / "monthly.csv")
    assert monthly["generator_hours"].sum() == pytest.approx(summary["generator_hours"], rel=1e-9)
    steps = pd.read_parquet(tmp_path / "out" / "steps.parquet")
    assert steps["generator_running"].sum() * summary["step_h"] == pytest.approx(summary["generator_hours"], rel=1e-9)
    # hourly.csv: the hour's starts are counted, its share run is a mean (hourly steps: one row per step).
    hourly = pd.read_csv(tmp_path / "out" / "hourly.csv")
    assert hourly["generator_starts"].sum() == summary["generator_starts"]
    assert hourly["generator_running"].sum() == pytest.approx(summary["generator_hours"], rel=1e-9)
    assert "Backup generator" in (tmp_path / "out" / "report.html").read_text()


def test_a_generator_brings_its_caution(tmp_path):
    from pvsource import cautions
    from pvsource.terminal import render_season

    system = load_system(write(tmp_path, GENERATOR))
    assert cautions.GENERATOR in cautions.for_command("check", system)
    assert cautions.GENERATOR not in cautions.for_command("check", load_system(write(tmp_path, BANK)))
    summary = {"start": "a", "end": "b", "steps": 1, "step_h": 1.0, "monthly": []}
    assert "carbon monoxide" in render_season(system, summary, tmp_path)


def test_a_generator_beside_several_controllers(tmp_path):
    # Two trackers into one bank (the shipped east-west example) and a 200 A charger, more than the
    # 280 Ah LFP bank's 0.5 C (140 A, the preset's rate, common practice): the array's and the charger's
    # current together stay within it, and the bank never falls below the start.
    from pvsource.demo import synthetic_weather
    from pvsource.season import run_season

    from conftest import DATA

    text = (DATA / "example-east-west.toml").read_text().replace('file = "modules/', f'file = "{DATA}/modules/')
    text += "\n[generator]\ncharger_current_a = 200\nstart_soc = 0.4\nstop_soc = 0.9\nfuel_l_per_h = 1.5\n"
    system = load_system(write(tmp_path, text))
    assert system.several_controllers
    weather = synthetic_weather(system)
    weather = weather[(weather.index.month == 12) & (weather.index.day <= 14)]
    weather = weather.assign(load_w=2.0 * weather["load_w"])
    steps = run_season(system, weather).steps
    on = steps["generator_running"].to_numpy() > 0
    assert on.sum() > 5 and steps["soc"].min() >= 0.4 - 1e-9
    total = steps["charge_current_a"].to_numpy()[on] + steps["generator_charge_a"].to_numpy()[on] / steps[
        "generator_running"].to_numpy()[on]
    assert 130.0 <= total.max() <= 140.0 * 1.01


def test_a_generator_serves_the_loads_the_disconnect_cut_off(winter_with_generator):
    # A bank starting at 10 %, below the LFP preset's 20 % disconnect: the loads are cut off from the bank
    # at once, and the generator (its start is 25 %) starts at once and carries them, so none goes unmet.
    from pvsource.season import run_season

    system, weather, _ = winter_with_generator
    result = run_season(system, weather.iloc[:24 * 7], soc0=0.1)
    s, steps = result.summary, result.steps
    assert steps["generator_starts"].iloc[0] == 1 and steps["generator_running"].iloc[0] == 1.0
    assert s["unmet_load_kwh"] == 0.0 and s["load_disconnected_hours"] == 0.0
    # What the generator carried in the first step is that step's whole load.
    assert steps["generator_load_w"].iloc[0] == pytest.approx(steps["load_w"].iloc[0])


def test_a_generator_that_never_runs_changes_nothing():
    # Law: a generator that never starts cannot change the bank's path. May and June of the demo keep
    # its bank well above a start at 0.21, so stages, stored energy and state of charge must be those of
    # the same system without a generator, at every step (the time loop once solved every step of a system
    # with a generator at the step's starting state of charge, which put 'bank full' hours into the year
    # and moved stored energy with the time step).
    from dataclasses import replace

    from pvsource.demo import demo_system, synthetic_weather
    from pvsource.season import run_season

    system = demo_system()
    weather = synthetic_weather(system)
    weather = weather[(weather.index.month >= 5) & (weather.index.month <= 6)]
    plain = run_season(system, weather)
    assert plain.summary["min_soc"] > 0.3  # the generator would not start: the comparison has weight
    gen = Generator(start_soc=0.21, stop_soc=0.8, charger_current_a=40.0, fuel_l_per_h=1.0)
    with_gen = run_season(replace(system, generator=gen), weather)
    assert with_gen.summary["generator_hours"] == 0.0
    for key in ("energy_stored_kwh", "coulombic_loss_kwh", "curtailed_kwh", "unmet_load_kwh"):
        assert with_gen.summary[key] == pytest.approx(plain.summary[key], rel=1e-9, abs=1e-9), key
    assert with_gen.summary["hours_by_stage"] == plain.summary["hours_by_stage"]
    assert with_gen.summary["hours_by_limit"] == plain.summary["hours_by_limit"]
    np.testing.assert_allclose(with_gen.steps["soc"].to_numpy(), plain.steps["soc"].to_numpy(), atol=1e-12)
