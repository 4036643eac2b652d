"""Design-space search: combinations, exclusions, ranking, the cost-energy front, resume."""

import json

import numpy as np
import pandas as pd
import pytest

from pvsource import explore as ex
from pvsource.demo import demo_system, synthetic_weather
from pvsource.errors import InputError

from conftest import demo_system_file, run_cli, write_weather_csv

PRICES = {"price_per_kg": 12.0, "energy_value": 0.3, "years": 20.0}


@pytest.fixture(scope="module")
def short_year():
    system = demo_system()
    return system, synthetic_weather(system).iloc[: 24 * 6]


def test_pareto_front_keeps_exactly_the_undominated():
    frame = pd.DataFrame({"lifetime_cost": [1.0, 2.0, 3.0, 2.5, 1.5],
                          "energy_delivered_kwh_per_year": [10.0, 20.0, 30.0, 15.0, 9.0]})
    assert list(ex.pareto_front(frame)) == [True, True, True, False, False]


def test_search_ranks_excludes_and_resumes(short_year, tmp_path, monkeypatch):
    system, weather = short_year
    vary = ex.parse_vary(["modules_per_string=1,3", "size:roof to controller=4 mm2,10 mm2"], system)
    ranked = ex.explore(system, weather, vary, tmp_path, PRICES)
    assert len(ranked) == 4
    bad = ranked[ranked["excluded"]]
    assert set(bad["modules_per_string"]) == {1} and bad["reason"].str.contains("min_string_vmp").all()
    ok = ranked[~ranked["excluded"]]
    assert list(ok["rank"]) == [1, 2] and ok["lifetime_cost"].is_monotonic_increasing
    # Kelvin: the bigger conductor costs more metal and loses less energy.
    small, big = ok.sort_values("conductor_mass_kg").to_dict("records")
    assert big["wiring_loss_kwh_per_year"] < small["wiring_loss_kwh_per_year"]
    # Reference: copper's density, 8.96 g/cm3 (CRC Handbook of Chemistry and
    # Physics, from memory), times the nominal copper in the demo's runs: two
    # conductors of 6 m x 4 mm2 leads for each of 2 strings, 22 m of the swept
    # feeder and 2 m x 25 mm2 to the bank. Stranding adds up to about 3 %
    # (common practice: the lay lengthens each wire).
    for row, feeder_mm2 in ((small, 4.0), (big, 10.0)):
        nominal_kg = 8960.0 * 2 * (2 * 6 * 4.0 + 22 * feeder_mm2 + 2 * 25.0) * 1e-6
        assert nominal_kg <= row["conductor_mass_kg"] <= 1.03 * nominal_kg
    # Resume: nothing is evaluated again, and the result is the same.
    calls = []
    monkeypatch.setattr(ex, "evaluate", lambda *a, **k: calls.append(a) or {})
    again = ex.explore(system, weather, vary, tmp_path, PRICES, resume=True)
    assert calls == [] and len(again) == 4 and not again["id"].duplicated().any()


@pytest.mark.parametrize("texts, match", [
    ([], "at least one"),
    (["wind=1,2"], "unknown key"),
    (["modules_per_string=two"], "number"),
    (["size:nowhere=6 mm2"], "no cable run"),
    (["bank_class_v=36"], "nominal class"),
    (["modules_per_string=1", "modules_per_string=2"], "twice"),
])
def test_bad_choices(short_year, texts, match):
    with pytest.raises(InputError, match=match):
        ex.parse_vary(texts, short_year[0])


def test_the_controller_kind_is_varied_only_where_there_is_one_controller():
    # East and west on a tracker each: "the controller's kind" names no one controller.
    from conftest import DATA

    from pvsource.config import load_system
    system = load_system(DATA / "example-east-west.toml")
    with pytest.raises(InputError, match=r"one \[controller\]; .* has 2 \[\[controller\]\] tables"):
        ex.parse_vary(["controller=pwm,mppt"], system)


def test_cli_explore_json(capsys, tmp_path, short_year):
    system, weather = short_year
    csv = tmp_path / "w.csv"
    write_weather_csv(weather, csv)
    system_file = demo_system_file(tmp_path)
    out = tmp_path / "out"
    # The hyphen spelling is read, and the results carry the canonical name.
    code, text, err = run_cli(capsys, "explore", str(system_file), str(csv), "--vary", "tilt-deg=20,40",
                              "--out", str(out), "--price-per-kg", "12", "--energy-value", "0.3", "--json")
    assert code == 0, err
    rows = json.loads(text)["rows"]
    assert [r["rank"] for r in rows] == [1, 2] and all("lifetime_cost" in r for r in rows)
    assert [r["tilt_deg"] for r in rows if r["rank"]] and "tilt-deg" not in rows[0]
    assert (out / "results.parquet").exists() and (out / "pareto.png").exists()
    assert np.isfinite([r["energy_delivered_kwh_per_year"] for r in rows]).all()
    # The CSV holds exactly the Parquet's table (floats written to round-trip), and both are in the manifest.
    parquet = pd.read_parquet(out / "results.parquet")
    table = pd.read_csv(out / "results.csv", keep_default_na=False,
                        na_values={c: [""] for c in parquet.columns if parquet[c].dtype.kind == "f"})
    pd.testing.assert_frame_equal(table, parquet, check_dtype=False, check_exact=True)
    assert len(parquet) == 2 and {"results.csv", "results.parquet"} <= set(json.loads((out / "run.json").read_text())
                                                                           ["outputs"])
    # No bank price, no unmet value: each part the ranking leaves out is named on stderr (the demo has a
    # bank and leaves load unmet in its first days), one note line each.
    assert "--bank-price-per-kwh: not given" in err and "--unmet-value-per-kwh: not given" in err
    assert all(line.startswith("pvsource: note: ") for line in err.splitlines())


def test_a_process_pool_and_a_dask_cluster_give_exactly_the_local_result(short_year, tmp_path):
    # Same tasks, same numbers, whichever engine runs them.
    system, weather = short_year
    vary = ex.parse_vary(["tilt_deg=15,30,45"], system)
    base = ex.explore(system, weather, vary, tmp_path / "one", PRICES, workers=1)
    pool = ex.explore(system, weather, vary, tmp_path / "pool", PRICES, workers=2)
    dask = ex.explore(system, weather, vary, tmp_path / "dask", PRICES, engine="dask", workers=2)
    pd.testing.assert_frame_equal(base, pool)
    pd.testing.assert_frame_equal(base, dask)


def test_a_run_that_dies_midway_resumes_to_a_complete_result_without_duplicates(short_year, tmp_path, monkeypatch):
    system, weather = short_year
    vary = ex.parse_vary(["tilt_deg=10,20,30,40"], system)
    real = ex.evaluate
    calls = []

    def dies_on_the_third(*args, **kwargs):
        calls.append(1)
        if len(calls) == 3:
            raise KeyboardInterrupt  # the run is killed here
        return real(*args, **kwargs)

    monkeypatch.setattr(ex, "evaluate", dies_on_the_third)
    with pytest.raises(KeyboardInterrupt):
        ex.explore(system, weather, vary, tmp_path, PRICES, workers=1)
    assert len(list((tmp_path / "parts").glob("*.parquet"))) == 2  # what finished is kept
    assert not list((tmp_path / "parts").glob(".*"))  # and nothing half-written
    monkeypatch.setattr(ex, "evaluate", real)
    resumed = ex.explore(system, weather, vary, tmp_path, PRICES, resume=True, workers=1)
    fresh = ex.explore(system, weather, vary, tmp_path / "fresh", PRICES, workers=1)
    assert len(resumed) == 4 and not resumed["id"].duplicated().any()
    pd.testing.assert_frame_equal(resumed, fresh)


def test_fleet_runs_every_member_and_tabulates_them(capsys, tmp_path, short_year):
    system, weather = short_year
    members = tmp_path / "fleet"
    members.mkdir()
    for name in ("north-barn", "south-barn"):
        demo_system_file(members).rename(members / f"{name}.toml")
        write_weather_csv(weather, members / f"{name}.csv")
    code, text, err = run_cli(capsys, "fleet", str(members), "--out", str(tmp_path / "out"), "--json")
    assert code == 0, err
    rows = json.loads(text)["rows"]
    assert [r["name"] for r in rows] == ["north-barn", "south-barn"]
    # Issue 13 section 5: a fleet result too ends with the deferral to local codes; its cautions are those
    # of its systems (the demo's bank), each once.
    from pvsource import cautions
    assert json.loads(text)["cautions"] == [cautions.DROP_IS_EFFICIENCY, cautions.BATTERY_FAULT, cautions.CLOSING]
    assert rows[0]["energy_stored_kwh"] == pytest.approx(rows[1]["energy_stored_kwh"])
    manifest = tmp_path / "manifest.csv"
    manifest.write_text("name,system,weather\na,fleet/north-barn.toml,fleet/north-barn.csv\n"
                        "b,fleet/south-barn.toml,fleet/missing.csv\n")
    code, _, err = run_cli(capsys, "fleet", str(manifest), "--out", str(tmp_path / "out2"))
    assert code == 2 and "row 3" in err and "missing.csv" in err
    code, text, err = run_cli(capsys, "fleet", str(members), "--out", str(tmp_path / "out3"))
    assert code == 0 and text.rstrip().endswith(cautions.CLOSING)


def test_fleet_and_explore_read_weather_with_the_season_options(capsys, tmp_path, short_year):
    # Day-first local times (no offset) with --time-format and --tz give the
    # same study as the ISO file: the options reach the reader.
    system, weather = short_year
    members = tmp_path / "fleet"
    members.mkdir()
    demo_system_file(members).rename(members / "dayfirst.toml")
    table = weather.copy()
    table.index = table.index.strftime("%d.%m.%Y %H:%M")
    table.index.name = "Zeit"
    table.to_csv(members / "dayfirst.csv")
    options = ["--column", "timestamp=Zeit", "--tz", "Etc/GMT-1", "--time-format", "%d.%m.%Y %H:%M",
               "--time-label", "instant", "--bad-rows", "skip", "--transposition", "isotropic"]
    code, text, err = run_cli(capsys, "fleet", str(members), "--out", str(tmp_path / "out2"), "--json", *options)
    assert code == 0, err
    iso = tmp_path / "iso.csv"
    write_weather_csv(weather, iso)
    code, text_iso, err = run_cli(capsys, "season", str(demo_system_file(tmp_path)), str(iso), "--out",
                                  str(tmp_path / "season"), "--json", "--transposition", "isotropic")
    assert code == 0, err
    fleet_row, season = json.loads(text)["rows"][0], json.loads(text_iso)
    assert fleet_row["energy_stored_kwh"] == pytest.approx(season["energy_stored_kwh"], rel=1e-9)
    code, _, err = run_cli(capsys, "explore", str(members / "dayfirst.toml"), str(members / "dayfirst.csv"),
                           "--vary", "tilt_deg=20,40", "--out", str(tmp_path / "ex"), "--price-per-kg", "12",
                           "--energy-value", "0.3", *options)
    assert code == 0, err


def test_killing_a_dask_worker_midway_loses_nothing(short_year, tmp_path):
    # A worker dies while the search runs; the cluster reruns its tasks, the
    # finished results stay written, and a resume adds nothing twice.
    import os
    import signal
    import threading
    import time

    from distributed import Client, LocalCluster

    system, weather = short_year
    vary = ex.parse_vary(["tilt_deg=5,10,15,20,25,30,35,40"], system)
    local = ex.explore(system, weather, vary, tmp_path / "local", PRICES, workers=1)
    cluster = LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None)
    client = Client(cluster)
    killed = []

    def kill_one_worker_after_the_first_result():
        deadline = time.monotonic() + 60
        while time.monotonic() < deadline and not list((tmp_path / "dask" / "parts").glob("*.parquet")):
            time.sleep(0.02)
        victim = sorted(client.scheduler_info()["workers"])[0]
        pid = client.run(os.getpid, workers=[victim])[victim]
        os.kill(pid, signal.SIGKILL)
        killed.append(pid)

    watcher = threading.Thread(target=kill_one_worker_after_the_first_result)
    watcher.start()
    try:
        ranked = ex.explore(system, weather, vary, tmp_path / "dask", PRICES, engine="dask",
                            scheduler=cluster.scheduler_address)
        watcher.join()
        resumed = ex.explore(system, weather, vary, tmp_path / "dask", PRICES, engine="dask",
                             scheduler=cluster.scheduler_address, resume=True)
    finally:
        client.close()
        cluster.close()
    assert killed
    assert len(ranked) == 8 and not ranked["id"].duplicated().any()
    pd.testing.assert_frame_equal(ranked, local)
    pd.testing.assert_frame_equal(resumed, local)


def test_a_drop_budget_excludes_by_circuit_and_says_so(short_year):
    # Kirchhoff: the PV circuit's drop is the string terminals' voltage less the
    # controller's input voltage at the same STC point; it must match the reason's figure.
    import re

    from pvsource.operating import operating_points
    system, weather = short_year
    row = operating_points(system, 1000.0, 25.0).iloc[0]
    g = system.groups[0].name
    pv_pct = 100 * (row[f"group_{g}_v"] - row["controller_input_v"]) / row[f"group_{g}_v"]
    out = ex.evaluate(system, weather, {}, {**PRICES, "budget_fraction": pv_pct / 100 / 2})
    assert out["excluded"] and "drop budget: the pv circuit" in out["reason"]
    shown = float(re.search(r"pv circuit drops ([0-9.]+) %", out["reason"]).group(1))
    assert shown == pytest.approx(pv_pct, abs=0.006)


def test_explore_resumes_only_what_the_same_inputs_made(capsys, tmp_path):
    # Issue 14: a resume with --price-per-kg 1000 returned the ranking made with 12.
    system_file = demo_system_file(tmp_path)
    weather = write_weather_csv(synthetic_weather(demo_system()).iloc[: 24 * 4], tmp_path / "w.csv")
    out = tmp_path / "out"

    def explore(*extra, price="12"):
        return run_cli(capsys, "explore", str(system_file), str(weather), "--vary", "tilt_deg=20,40", "--out",
                       str(out), "--price-per-kg", price, "--energy-value", "0.3", "--workers", "1", "--json",
                       *extra)

    code, text, err = explore()
    assert code == 0, err
    cheap = json.loads(text)["rows"]
    code, _, err = explore("--resume", price="1000")
    assert code == 2 and "--price-per-kg changed (12.0 then, 1000.0 now)" in err and err.count("\n") == 1
    # A choice option is named by its word, as typed (the refusal once showed "<Transposition.isotropic: ...>").
    code, _, err = explore("--resume", "--transposition", "isotropic")
    assert code == 2 and "--transposition changed ('perez' then, 'isotropic' now)" in err
    weather.write_text(weather.read_text() + "\n")  # the same numbers, but not the same file
    code, _, err = explore("--resume")
    assert code == 2 and "the weather file's content changed" in err
    code, text, err = explore("--resume", "--force", price="1000")
    assert code == 0, err
    dear = json.loads(text)["rows"]
    # Recomputed: the metal cost 1000/kg now, so each cost rose by mass x (1000 - 12).
    by_id = {r["id"]: r for r in cheap}
    for r in dear:
        assert r["lifetime_cost"] > by_id[r["id"]]["lifetime_cost"] + 900 * r["conductor_mass_kg"]
    manifest = json.loads((out / "run.json").read_text())
    assert manifest["options"]["price_per_kg"] == 1000.0
    assert {"results.parquet", "resume.json"} <= set(manifest["outputs"])
    assert sum(name.startswith("parts/") for name in manifest["outputs"]) == 2


def test_a_killed_explore_leaves_no_worker_behind(tmp_path, short_year):
    # Issue 14: after SIGKILL or SIGTERM of explore the pool's workers lived on.
    # Each signal hits only the parent, while both workers are busy. A dask
    # LocalCluster's workers are children too: SIGKILL the parent once they run.
    import os
    import subprocess
    import sys

    from conftest import ROOT

    system, weather = short_year
    csv = write_weather_csv(weather, tmp_path / "w.csv")
    system_file = demo_system_file(tmp_path)
    signals = ("SIGKILL", "SIGTERM", "SIGINT")
    markers = [tmp_path / f"m-{sig}" for sig in signals]
    for m in markers:
        m.mkdir()
    argv = ["explore", str(system_file), str(csv), "--vary", "tilt_deg=10,20,30", "--out", str(tmp_path / "out"),
            "--price-per-kg", "12", "--energy-value", "0.3", "--workers", "2", "--force"]
    dask = argv[:argv.index("--out") + 1] + [str(tmp_path / "dask"), *argv[argv.index("--out") + 2:],
                                             "--engine", "dask"]
    spec = {"argv": argv, "workers": 2, "kill_workers": [[s, str(m)] for s, m in zip(signals, markers)],
            "kill_tree": dask}
    done = subprocess.run([sys.executable, str(ROOT / "tests" / "faults_driver.py"), json.dumps(spec)],
                          capture_output=True, text=True, timeout=600,
                          env={**os.environ, "PYTHONPATH": f"{ROOT}{os.pathsep}{ROOT / 'tests'}"})
    ended = [json.loads(line) for line in done.stdout.splitlines()]
    cluster = ended.pop(0)  # a LocalCluster's worker processes, and its resource tracker
    assert cluster["children"] >= 2 and cluster["left"] == 0, (cluster, done.stderr)
    assert [e["signal"] for e in ended] == list(signals), done.stderr
    for e in ended:
        assert e["workers"] == 2 and e["left"] == 0, e
    assert ended[2]["exit"] == 130  # Ctrl-C: the workers are stopped and the run says so



def test_a_metric_size_its_fuse_cannot_protect_is_excluded_by_that_rule(short_year):
    # The demo's feeder carries 2 strings x 9.8 A x 1.25 = 24.5 A (NEC 690.8(A)); its device is at least
    # 1.25 x 24.5 = 30.6 A, so 32 A (IEC 60269-1 series). 2.5 mm2 XLPE in B1 has I_z 31 A (IEC 60364-5-52
    # B.52.4, from memory): it carries 24.5 A, but IEC 60364-4-43 433.1 (I_n <= I_z) excludes it. Only the
    # excluded combination is evaluated here (no season is run for it).
    from pvsource.conductors import parse_size
    system, weather = short_year
    out = ex.evaluate(system, weather, {"size:roof to controller": parse_size("2.5 mm2")}, PRICES)
    assert out["excluded"] and out["reason"].startswith("overload protection")
    assert "conductor_current[roof to controller]" in out["reason"] and "I_n <= I_z" in out["reason"]


def _with_a_generator(monkeypatch, fuel_l=12.5, hours=30.0, starts=4):
    """Stand-in figures of a generator in every season summary (whether or not the season models one)."""
    real = ex.run_season

    def season(*args, **kwargs):
        result = real(*args, **kwargs)
        result.summary.update(generator_fuel_l=fuel_l, generator_hours=hours, generator_starts=starts)
        return result

    monkeypatch.setattr(ex, "run_season", season)


def test_each_cost_part_is_the_summary_figure_times_its_price(short_year, monkeypatch):
    # Worked by hand from the season summary's own totals: a running cost is the span's total
    # scaled to a year (8760 h) times the years; the bank's nominal energy is its capacity times
    # its nominal voltage, 8 LFP cells x 3.2 V (common practice: 12.8 V per four cells).
    from pvsource.season import run_season

    system, weather = short_year
    _with_a_generator(monkeypatch)
    prices = {**PRICES, "years": 10.0, "bank_price_per_kwh": 400.0, "fuel_price_per_l": 1.8,
              "unmet_value_per_kwh": 2.0}
    row = ex.evaluate(system, weather, {}, prices)
    summary = run_season(system, weather).summary
    span_years = len(weather) * 1.0 / 8760.0  # hourly steps
    assert summary["steps"] == len(weather) == 144 and summary["step_h"] == 1.0
    nominal_kwh = 200.0 * 8 * 3.2 / 1000.0  # demo bank: 200 Ah, 8 cells
    expected = {
        "conductor_cost": row["conductor_mass_kg"] * 12.0,
        "wiring_loss_cost": summary["wiring_loss_kwh"] / span_years * 0.3 * 10.0,
        "bank_cost": nominal_kwh * 400.0,
        "fuel_cost": 12.5 / span_years * 1.8 * 10.0,
        "unmet_load_cost": summary["unmet_load_kwh"] / span_years * 2.0 * 10.0,
    }
    for key, value in expected.items():
        assert row[key] == pytest.approx(value, rel=1e-9), key
    assert row["lifetime_cost"] == pytest.approx(sum(expected.values()), rel=1e-12)
    assert summary["unmet_load_kwh"] > 0 and row["unmet_load_kwh_per_year"] == pytest.approx(
        summary["unmet_load_kwh"] * 8760 / 144)
    assert row["generator_hours_per_year"] == pytest.approx(30.0 * 8760 / 144)
    assert row["generator_starts_per_year"] == pytest.approx(4 * 8760 / 144)
    # Autonomy: usable energy down to the disconnect state of charge over the mean daily load (6 days).
    # The demo's LFP bank disconnects at its chemistry's 20 % (common practice: 80 % depth).
    assert row["bank_usable_kwh"] == pytest.approx(nominal_kwh * 0.8)
    assert row["autonomy_days"] == pytest.approx(nominal_kwh * 0.8 / (summary["load_kwh"] / 6.0))


def test_usable_energy_ends_where_the_bank_disconnects_its_loads(tmp_path):
    # By hand: the demo's 200 Ah of 8 LFP cells at 3.2 V nominal (common practice) hold 5.12 kWh.
    # Two days drawing 8 kWh is 4 kWh a day. The loads go at the [bank] min_soc the file gives (0.5:
    # 2.56 kWh usable, 0.64 days), else at the chemistry's 20 % (4.096 kWh, 1.024 days).
    from dataclasses import replace

    from pvsource.config import load_system

    two_days = {"steps": 48, "step_h": 1.0, "load_kwh": 8.0}
    path = demo_system_file(tmp_path)
    assert ex.bank_figures(load_system(path), two_days) == pytest.approx(
        {"bank_nominal_kwh": 5.12, "bank_usable_kwh": 4.096, "autonomy_days": 1.024})
    path.write_text(path.read_text().replace("capacity_ah = 200\n", "capacity_ah = 200\nmin_soc = 0.5\n"
                                                                    "reconnect_soc = 0.6\n"))
    half = load_system(path)
    assert ex.bank_figures(half, two_days) == pytest.approx(
        {"bank_nominal_kwh": 5.12, "bank_usable_kwh": 2.56, "autonomy_days": 0.64})
    # No load: autonomy has no bound (NaN, "-" in the table); no bank: nothing stored.
    assert np.isnan(ex.bank_figures(half, {**two_days, "load_kwh": 0.0})["autonomy_days"])
    assert ex.bank_figures(replace(half, bank=None), two_days) == {"bank_nominal_kwh": 0.0, "bank_usable_kwh": 0.0,
                                                                    "autonomy_days": 0.0}


def test_a_summary_without_generator_figures_costs_no_fuel(short_year):
    # Before (or without) a generator the season summary has no generator_* keys: they count as 0.
    system, weather = short_year
    row = ex.evaluate(system, weather, {}, {**PRICES, "fuel_price_per_l": 1.8})
    assert row["fuel_cost"] == 0.0 and row["generator_hours_per_year"] == 0.0


def test_valuing_unmet_load_turns_the_ranking_toward_the_bigger_bank(short_year, tmp_path):
    # Six January days with the demo's evening load: a 100 Ah bank leaves more load unmet than a
    # 400 Ah one (it holds a quarter of the charge at the same starting state of charge). Priced at the
    # bank alone, the small bank is cheaper; once each unmet kWh costs 2, the big bank is.
    system, weather = short_year
    vary = ex.parse_vary(["bank_capacity_ah=100,400"], system)
    prices = {**PRICES, "years": 10.0, "bank_price_per_kwh": 400.0}
    free = ex.explore(system, weather, vary, tmp_path / "free", prices, workers=1)
    dear = ex.explore(system, weather, vary, tmp_path / "dear", {**prices, "unmet_value_per_kwh": 2.0}, workers=1)
    assert list(free["bank_capacity_ah"]) == [100.0, 400.0]
    assert list(dear["bank_capacity_ah"]) == [400.0, 100.0]
    small, big = free.set_index("bank_capacity_ah").loc[[100.0, 400.0]].to_dict("records")
    assert small["unmet_load_kwh_per_year"] > big["unmet_load_kwh_per_year"]
    # The bank's price by hand: 300 Ah more of 8 x 3.2 V, at 400 per kWh.
    assert big["bank_cost"] - small["bank_cost"] == pytest.approx(0.3 * 8 * 3.2 * 400.0)
    assert dear["lifetime_cost"].is_monotonic_increasing and dear["pareto"].iloc[0]


def test_the_results_csv_is_guarded_like_every_output(capsys, tmp_path, short_year):
    # An input named like the new output, inside --out, is refused before anything is written.
    system, weather = short_year
    out = tmp_path / "out"
    out.mkdir()
    weather_file = write_weather_csv(weather, out / "results.csv")
    before = weather_file.read_bytes()
    code, _, err = run_cli(capsys, "explore", str(demo_system_file(tmp_path)), str(weather_file), "--vary",
                           "tilt_deg=20", "--out", str(out), "--force", "--price-per-kg", "12", "--energy-value", "0.3")
    assert code == 2 and "would overwrite the input" in err and err.count("\n") == 1
    assert weather_file.read_bytes() == before and sorted(p.name for p in out.iterdir()) == ["results.csv"]


def test_a_hybrid_hut_prices_its_generator_fuel_and_shows_its_hours(capsys, tmp_path):
    # The shipped hut with a petrol set, six January days. Its fuel cost is worked by hand from the
    # season's own fuel total: litres over the span, scaled to a year of 8760 h, x price x years.
    # A smaller bank starts the set more often and burns more: priced at 2 per litre, that fuel
    # outweighs the 200 Ah of LFP (8 x 3.2 V, common practice) saved at 400 per kWh.
    from dataclasses import replace

    from conftest import DATA
    from pvsource.config import load_system
    from pvsource.season import run_season

    hut = DATA / "example-hut-generator.toml"
    system = load_system(hut)
    weather = synthetic_weather(system).iloc[: 24 * 6]
    csv = write_weather_csv(weather, tmp_path / "w.csv")

    def explore(out, *prices):
        return run_cli(capsys, "explore", str(hut), str(csv), "--vary", "bank_capacity_ah=100,300", "--out",
                       str(tmp_path / out), "--price-per-kg", "12", "--energy-value", "0.3", "--workers", "1",
                       "--bank-price-per-kwh", "400", *prices)

    code, text, err = explore("fuel", "--fuel-price", "2", "--json")
    assert code == 0, err
    rows = {r["bank_capacity_ah"]: r for r in json.loads(text)["rows"]}
    for capacity, row in rows.items():
        summary = run_season(replace(system, bank=replace(system.bank, capacity_ah=capacity)), weather).summary
        assert summary["generator_fuel_l"] > 0
        assert row["fuel_cost"] == pytest.approx(summary["generator_fuel_l"] * 8760 / 144 * 2.0 * 10.0, rel=1e-9)
        assert row["generator_hours_per_year"] == pytest.approx(summary["generator_hours"] * 8760 / 144, rel=1e-9)
    assert rows[100.0]["generator_fuel_l_per_year"] > rows[300.0]["generator_fuel_l_per_year"]
    assert [r["bank_capacity_ah"] for r in json.loads(text)["rows"]] == [300.0, 100.0]
    code, text, err = explore("free")
    assert code == 0 and "--fuel-price-per-l: not given: generator fuel" in err
    lines = text.splitlines()
    assert "gen h/yr" in lines[2] and "autonomy d" in lines[2]
    # Fuel left unpriced, the smaller bank is the cheaper; its row shows its generator hours.
    first = lines[3].split()
    assert first[:2] == ["1", "100.0"]
    assert float(first[5].replace(",", "")) == pytest.approx(round(rows[100.0]["generator_hours_per_year"]))


def test_a_bank_voltage_class_keeps_the_generator_chargers_power():
    # P = V x I: a charger chosen by its power gives a 12 V bank twice the current it gives a 24 V one. Keeping
    # its amps would rank the 48 V bank first for a charger four times the 12 V one's power.
    from conftest import DATA
    from pvsource.bank import NOMINAL_CELL_V
    from pvsource.config import load_system
    from pvsource.explore import apply

    hut = load_system(DATA / "example-hut-generator.toml")  # LFP, 8 cells (24 V class), 40 A charger
    v_cell = NOMINAL_CELL_V["lfp"]
    power = hut.generator.charger_current_a * hut.bank.cells_in_series * v_cell
    for volts, amps in ((12.0, 80.0), (24.0, 40.0), (48.0, 20.0)):
        system = apply(hut, {"bank_class_v": volts})
        assert system.generator.charger_current_a == pytest.approx(amps)
        assert system.generator.charger_current_a * system.bank.cells_in_series * v_cell == pytest.approx(power)
        assert system.controller.max_output_a == hut.controller.max_output_a  # a controller's rating is in amps
