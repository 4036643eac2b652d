"""Design-space search: every combination of a few design choices over a weather year.

Each combination is checked (:func:`pvsource.checks.design_checks` against the
weather's own temperature extremes, each varied conductor size by its own
ampacity, and with a drop budget each circuit's drop at STC); combinations
that fail are kept out and say why, naming the rule in words. The rest run the
season study and are ranked by what the owner pays over ``years``:

    lifetime cost = conductor metal mass x price per kg              (bought once)
                    + bank nominal energy x price per kWh            (bought once)
                    + ( wiring loss per year x value of energy
                      + generator fuel per year x fuel price
                      + unmet load per year x value of unmet load ) x years,

where "per year" is the study's total over its span in years
(:func:`span_years`), so a short or a long weather file gives costs on the
same footing. The first line is Kelvin's economic conductor size applied to
the whole system; the others price the bank against the fuel and the unmet
load it saves. Each part is its own column (:data:`COST_COLUMNS`); a price
not given is 0, and that part then costs nothing.

Ranking minimises ``lifetime_cost`` (ties: more delivered energy first). The
Pareto front is taken over the same two figures: lifetime cost (minimised)
against energy delivered per year (maximised); a combination is on it when
no other is both no dearer and delivers no less, and better in one.

Results are written one file per combination as each finishes, so an
interrupted search loses nothing finished, and ``resume`` skips what is done.
"""

from __future__ import annotations

import ctypes
import functools
import hashlib
import io
import itertools
import json
import os
import signal
import sys
import threading
import time
from dataclasses import replace
from pathlib import Path

import numpy as np
import pandas as pd

from pvsource import bank as bank_model
from pvsource import conductors
from pvsource.checks import design_checks
from pvsource.controller import KINDS, with_kind
from pvsource.errors import InputError
from pvsource.files import atomic_write
from pvsource.names import VARIABLE_ALIASES, canonical
from pvsource.inputs import MAX_TOML_BYTES, read_bounded
from pvsource.runs import drop_budget_reasons, resize_run
from pvsource.season import run_season
from pvsource.system import System

VARY_KEYS = ("modules_per_string", "strings", "size:RUN", "bank_class_v", "bank_capacity_ah", "controller",
             "tilt_deg")
MAX_COMBINATIONS = 5000


def parse_vary(texts, system: System) -> dict:
    """``["modules_per_string=2,3", "size:feeder=6 mm2,10 mm2"]`` -> {key: [values]} checked against the system."""
    vary = {}
    for text in texts or []:
        key, sep, values = text.partition("=")
        items = [v.strip() for v in values.split(",") if v.strip()]
        if not sep or not items:
            raise InputError("--vary", None, f"expected KEY=V1,V2,..., got {text!r}")
        key = canonical(key, VARY_KEYS, VARIABLE_ALIASES, "--vary", "key")
        if key in vary:
            raise InputError("--vary", None, f"{key!r} is given twice")
        vary[key] = [_value(key, item, system) for item in items]
    if not vary:
        raise InputError("--vary", None, f"give at least one KEY=V1,V2,...; keys: {', '.join(VARY_KEYS)}")
    count = int(np.prod([len(v) for v in vary.values()]))
    if count > MAX_COMBINATIONS:
        raise InputError("--vary", None, f"{count} combinations; at most {MAX_COMBINATIONS}")
    return vary


def _value(key: str, text: str, system: System):
    def number(kind, lo, hi):
        try:
            value = kind(text)
        except ValueError:
            raise InputError("--vary", key, f"expected a number, got {text!r}") from None
        if not lo <= value <= hi:
            raise InputError("--vary", key, f"expected {lo:g} to {hi:g}, got {text}")
        return value

    if key in ("modules_per_string", "strings"):
        return number(int, 1, 200)
    if key == "tilt_deg":
        return number(float, 0.0, 90.0)
    if key == "bank_capacity_ah":
        if system.bank is None:
            raise InputError("--vary", key, "needs a system with a [bank]")
        return number(float, 1.0, 1e6)
    if key == "bank_class_v":
        value = number(float, 1.0, 1000.0)
        if system.bank is None or value not in bank_model.NOMINAL_CLASS_CELLS[system.bank.chemistry.key]:
            raise InputError("--vary", key, f"expected a nominal class of the bank: 12, 24 or 48 V, got {text}")
        return value
    if key == "controller":
        if text not in KINDS:
            raise InputError("--vary", key, f"expected direct, pwm or mppt, got {text!r}")
        c = system.controller
        if system.several_controllers:
            raise InputError("--vary", key, f"varies the kind of the one [controller]; {system.source or 'the system'} "
                                            f"has {len(system.controllers)} [[controller]] tables")
        if c is None or c.kind is None:
            raise InputError("--vary", key, "needs a system with a [bank] and a [controller]")
        if KINDS[text].tracks and c.max_output_a is None and c.rated_power_w is None:
            raise InputError("--vary", key, "a tracker needs max_output_a (or rated_power_w) in [controller]")
        return text
    if key.startswith("size:"):
        name = key[5:]
        if not any(r.name == name for r in system.cables):
            raise InputError("--vary", key, f"no cable run named {name!r}")
        return conductors.parse_size(text, where=f"--vary {key}")
    raise InputError("--vary", key, f"unknown key; expected one of {', '.join(VARY_KEYS)}")


def apply(system: System, combo: dict) -> System:
    """The system with one combination of choices applied."""
    for key, value in combo.items():
        if key == "modules_per_string":
            system = replace(system, groups=tuple(replace(g, modules_per_string=value) for g in system.groups))
        elif key == "strings":
            system = replace(system, groups=tuple(replace(g, strings=value) for g in system.groups))
        elif key == "tilt_deg":
            system = replace(system, groups=tuple(replace(g, tilt_deg=value) for g in system.groups))
        elif key == "bank_capacity_ah":
            system = replace(system, bank=replace(system.bank, capacity_ah=value))
        elif key == "bank_class_v":
            bank = bank_model.with_nominal_class(system.bank, value)
            gen = system.generator
            if gen is not None and gen.charger_current_a is not None:
                # The same charger power at the new voltage: a set's charger is chosen by its power,
                # and keeping its amps would hand a 48 V bank four times a 12 V bank's charge.
                ratio = system.bank.cells_in_series / bank.cells_in_series
                gen = replace(gen, charger_current_a=gen.charger_current_a * ratio)
            system = replace(system, bank=bank, generator=gen)
        elif key == "controller":
            system = replace(system, controller=with_kind(system.controller, value))
        elif key.startswith("size:"):
            system = resize_run(system, key[5:], value)
    return system


def combination_id(combo: dict) -> str:
    """A short stable name for a combination (file names, resume)."""
    text = json.dumps({k: getattr(v, "label", v) for k, v in sorted(combo.items())}, sort_keys=True)
    return hashlib.sha1(text.encode()).hexdigest()[:12]


def conductor_mass_kg(system: System) -> float:
    """Metal in every sized run, string leads counted once per string [kg]."""
    strings = {g.name: g.strings for g in system.groups}
    total = 0.0
    for run in system.cables:
        if run.size is None:
            continue
        copies = strings[run.group] if run.role == "string" else 1
        total += copies * float(conductors.conductor_mass_kg(run.length_m, run.size.area_mm2, run.material,
                                                             run.conductors_in_parallel))
    return total


#: The parts of ``lifetime_cost``, each its own result column.
COST_COLUMNS = ("conductor_cost", "wiring_loss_cost", "bank_cost", "fuel_cost", "unmet_load_cost")

def bank_figures(system: System, summary: dict) -> dict:
    """The bank's nominal and usable energy and the days of autonomy they give the study's load.

    ``E_nom = C x V_nom`` (capacity [Ah] x nominal voltage [V],
    :func:`pvsource.bank.nominal_energy_kwh`); ``E_usable = E_nom x (1 - SOC_off)``,
    with ``SOC_off`` the state of charge the season disconnects the loads at
    (``[bank] min_soc``, by default its chemistry's); days of autonomy = ``E_usable / (E_load / D)``, the
    usable energy over the mean daily load, ``E_load`` the study's load [kWh]
    over its ``D`` days. No load: NaN (autonomy without a load is unbounded).
    No bank: all three are 0.

    Returns
    -------
    dict
        ``bank_nominal_kwh``, ``bank_usable_kwh`` [kWh], ``autonomy_days`` [d].
    """
    if system.bank is None:
        nominal = usable = 0.0
    else:
        nominal = bank_model.nominal_energy_kwh(system.bank)
        usable = nominal * (1.0 - system.bank.chemistry.min_soc)
    daily_load_kwh = float(summary.get("load_kwh") or 0.0) / (span_years(summary) * 365.0)
    autonomy = usable / daily_load_kwh if daily_load_kwh > 0 else float("nan")
    return {"bank_nominal_kwh": nominal, "bank_usable_kwh": usable, "autonomy_days": autonomy}


def per_year(summary: dict, key: str) -> float:
    """A summary total over the study's span in years; 0 when the summary has no such figure (no generator)."""
    return float(summary.get(key) or 0.0) / span_years(summary)


def lifetime_costs(figures: dict, prices: dict) -> dict:
    """The parts of the lifetime cost and their sum (see the module's docstring).

    Parameters
    ----------
    figures : dict
        ``conductor_mass_kg``, ``bank_nominal_kwh`` and the yearly
        ``wiring_loss_kwh_per_year``, ``generator_fuel_l_per_year``,
        ``unmet_load_kwh_per_year``.
    prices : dict
        ``price_per_kg``, ``energy_value`` (per kWh lost in the wiring),
        ``years``; optional ``bank_price_per_kwh``, ``fuel_price_per_l``,
        ``unmet_value_per_kwh`` (0 when absent).
    """
    years = prices["years"]
    parts = {"conductor_cost": figures["conductor_mass_kg"] * prices["price_per_kg"],
             "wiring_loss_cost": figures["wiring_loss_kwh_per_year"] * prices["energy_value"] * years,
             "bank_cost": figures["bank_nominal_kwh"] * prices.get("bank_price_per_kwh", 0.0),
             "fuel_cost": figures["generator_fuel_l_per_year"] * prices.get("fuel_price_per_l", 0.0) * years,
             "unmet_load_cost": figures["unmet_load_kwh_per_year"] * prices.get("unmet_value_per_kwh", 0.0) * years}
    return {**parts, "lifetime_cost": sum(parts[k] for k in COST_COLUMNS)}


def evaluate(system: System, weather: pd.DataFrame, combo: dict, prices: dict, transposition: str = "perez") -> dict:
    """One combination: excluded with reasons, or its energy, losses, bank, generator and lifetime cost."""
    row = {"id": combination_id(combo), **{k: getattr(v, "label", v) for k, v in combo.items()}}
    variant = apply(system, combo)
    t_min, t_max = float(weather["temp_air"].min()), float(weather["temp_air"].max())
    # Each varied size is judged by its own ampacity from the run's
    # installation (resize_run drops a rating typed for another size).
    failed = [c.reason() for c in design_checks(variant, t_min, t_max) if c.failed]
    if prices.get("budget_fraction") is not None:
        failed += drop_budget_reasons(variant, prices["budget_fraction"])
    if failed:
        return {**row, "excluded": True, "reason": "; ".join(failed)}
    try:
        summary = run_season(variant, weather, transposition=transposition, keep="summary").summary
    except InputError as exc:
        return {**row, "excluded": True, "reason": exc.expected}
    # The generator's figures are absent from a summary without one: read as 0.
    figures = {"energy_delivered_kwh_per_year": per_year(summary, "energy_delivered_kwh"),
               "energy_stored_kwh_per_year": per_year(summary, "energy_stored_kwh"),
               "wiring_loss_kwh_per_year": per_year(summary, "wiring_loss_kwh"),
               "curtailed_kwh_per_year": per_year(summary, "curtailed_kwh"),
               "load_kwh_per_year": per_year(summary, "load_kwh"),
               "unmet_load_kwh_per_year": per_year(summary, "unmet_load_kwh"),
               "generator_hours_per_year": per_year(summary, "generator_hours"),
               "generator_starts_per_year": per_year(summary, "generator_starts"),
               "generator_fuel_l_per_year": per_year(summary, "generator_fuel_l"),
               "conductor_mass_kg": conductor_mass_kg(variant),
               **bank_figures(variant, summary)}
    return {**row, "excluded": False, "reason": "", **figures, **lifetime_costs(figures, prices)}


def span_years(summary: dict) -> float:
    """The study's span [years of 8760 h]: steps x step length."""
    return summary["steps"] * summary["step_h"] / 8760.0


def pareto_front(frame: pd.DataFrame) -> np.ndarray:
    """True for the rows no other row beats on both cost (lower) and delivered energy (higher)."""
    cost = frame["lifetime_cost"].to_numpy()
    energy = frame["energy_delivered_kwh_per_year"].to_numpy()
    keep = np.ones(len(frame), bool)
    for k in range(len(frame)):
        better = (cost <= cost[k]) & (energy >= energy[k]) & ((cost < cost[k]) | (energy > energy[k]))
        keep[k] = not better.any()
    return keep


def _write_part(folder: Path, row: dict) -> None:
    """One finished combination as its own Parquet file, written under a temporary name then renamed."""
    part = folder / f"{row['id']}.parquet"
    atomic_write(part, lambda tmp: pd.DataFrame([row]).to_parquet(tmp))


ENGINES = ("local", "dask")
PARTS = "parts"
# What the finished parts were made from (input hashes and result-shaping options).
RESUME_RECORD = "resume.json"
RESULTS = ("results.parquet", "results.csv")
EXPLORE_OUTPUTS = (*RESULTS, "pareto.png", RESUME_RECORD, PARTS)


def _start_parts(out: Path, fingerprint: dict | None, resume: bool, force: bool) -> Path:
    """The parts folder, holding only parts made from these inputs.

    A fresh run starts from no parts. A resume keeps them only when the
    recorded inputs equal ``fingerprint``; otherwise it stops naming what
    changed, or with ``force`` starts afresh.
    """
    parts = Path(out) / PARTS
    parts.mkdir(parents=True, exist_ok=True)
    record = Path(out) / RESUME_RECORD
    existing = sorted(parts.glob("*.parquet"))
    if resume and existing and fingerprint is not None:
        try:
            old = json.loads(record.read_text(encoding="utf-8"))
        except (OSError, ValueError):
            old = None
        if old is None:
            changed = f"no readable {RESUME_RECORD} says which inputs made them"
        else:
            diff = [k for k in (*fingerprint, *old) if old.get(k) != fingerprint.get(k)]
            changed = None if not diff else f"{diff[0]} changed" + (
                f" ({old.get(diff[0])!r} then, {fingerprint.get(diff[0])!r} now)" if not diff[0].startswith("the ")
                else "")
        if changed and not force:
            raise InputError("--resume", None, f"the finished combinations in {str(out)!r} were made from other "
                                               f"inputs: {changed}; give --force to recompute them")
        resume = not changed
    if not resume:
        for p in existing:
            os.remove(p)
    if fingerprint is not None:
        from pvsource.files import write_text
        write_text(record, json.dumps(fingerprint, indent=2))
    return parts


def _run_local(task, system, weather, todo, prices, parts: Path, workers: int | None, report) -> None:
    """In this process, or a pool of processes when there is more than one task and one core."""
    workers = workers or os.cpu_count() or 1
    if workers <= 1 or len(todo) <= 1:
        for combo in todo:
            _write_part(parts, task(system, weather, combo, prices))
            report()
        return
    from concurrent.futures import ProcessPoolExecutor, as_completed

    pool = ProcessPoolExecutor(max_workers=min(workers, len(todo)), initializer=die_with_parent,
                               initargs=(os.getpid(),))
    try:
        futures = [pool.submit(task, system, weather, combo, prices) for combo in todo]
        for future in as_completed(futures):
            _write_part(parts, future.result())
            report()
    except BaseException:
        # Ctrl-C or a failed task: stop the workers now rather than let the
        # pool finish every queued combination first.
        workers_now = list((getattr(pool, "_processes", None) or {}).values())
        pool.shutdown(wait=False, cancel_futures=True)
        for process in workers_now:
            process.terminate()
        raise
    pool.shutdown()


PR_SET_PDEATHSIG = 1  # linux/prctl.h


def die_with_parent(parent_pid: int, poll_s: float = 1.0) -> None:
    """Pool initializer: end this worker when the process that started it ends.

    On Linux the kernel is asked to SIGKILL the worker when its parent dies
    (``prctl(PR_SET_PDEATHSIG)``); everywhere, a thread also watches the
    parent's process id and exits when the worker has been orphaned. So a
    killed ``explore`` (SIGKILL, SIGTERM) leaves no worker behind.
    """
    if sys.platform.startswith("linux"):
        try:
            ctypes.CDLL(None, use_errno=True).prctl(PR_SET_PDEATHSIG, signal.SIGKILL)
        except (OSError, AttributeError):
            pass

    def orphaned() -> bool:
        return os.getppid() != parent_pid

    if orphaned():  # the parent died before the request was made
        os._exit(1)

    def watch():
        while not orphaned():
            time.sleep(poll_s)
        os._exit(1)

    threading.Thread(target=watch, name="pvsource-parent-watch", daemon=True).start()


def _run_dask(task, system, weather, todo, prices, parts: Path, workers: int | None, scheduler: str | None,
              report) -> None:
    """On dask.distributed: an existing scheduler, or a LocalCluster started (and stopped) here."""
    try:
        from distributed import Client, LocalCluster, as_completed
    except ImportError:
        raise InputError("--engine", None, "dask needs the dask[distributed] package: pip install 'pvsource[dask]'") from None
    cluster = None
    if scheduler is None:
        cluster = LocalCluster(n_workers=workers or 2, threads_per_worker=1, processes=True, dashboard_address=None)
        client = Client(cluster)
    else:
        try:
            client = Client(scheduler, timeout="10s")
        except (OSError, TimeoutError) as exc:
            raise InputError("--scheduler", None, f"cannot reach {scheduler!r} ({exc})") from None
    try:
        shared_system, shared_weather = client.scatter([system, weather], broadcast=True)
        futures = [client.submit(task, shared_system, shared_weather, combo, prices, pure=False) for combo in todo]
        # Each result is written as it arrives: a lost worker loses only what it had not finished.
        for future in as_completed(futures):
            _write_part(parts, future.result())
            report()
    finally:
        client.close()
        if cluster is not None:
            cluster.close()


def explore(system: System, weather: pd.DataFrame, vary: dict, out: Path, prices: dict,
            resume: bool = False, progress=None, engine: str = "local", workers: int | None = None,
            scheduler: str | None = None, transposition: str = "perez", fingerprint: dict | None = None,
            force: bool = False) -> pd.DataFrame:
    """Run every combination (skipping finished ones when resuming) and rank them.

    Parameters
    ----------
    transposition : {"perez", "haydavies", "isotropic"}
        The sky-diffuse model of every season study.
    engine : {"local", "dask"}
        ``local``: in this process, or a process pool over ``workers`` cores
        (default: all). ``dask``: dask.distributed, on the ``scheduler``
        address given, or a LocalCluster of ``workers`` processes.
    fingerprint : dict, optional
        What the results depend on besides the combination (input hashes,
        prices), kept in ``resume.json``. A resume with another fingerprint
        raises an InputError naming the first difference, or with ``force``
        recomputes every combination.

    Returns
    -------
    DataFrame
        All combinations: the feasible ones ranked by lifetime cost, then
        delivered energy, with ``pareto`` marking the front; the excluded
        ones last with their reasons.
    """
    if engine not in ENGINES:
        raise InputError("--engine", None, f"expected one of {', '.join(ENGINES)}, got {engine!r}")
    parts = _start_parts(out, fingerprint, resume, force)
    keys = list(vary)
    combos = [dict(zip(keys, values)) for values in itertools.product(*(vary[k] for k in keys))]
    done = {p.stem for p in parts.glob("*.parquet")} if resume else set()
    todo = [c for c in combos if combination_id(c) not in done]
    finished = [len(combos) - len(todo)]

    def report():
        finished[0] += 1
        if progress:
            progress(finished[0], len(combos))

    # a partial of a module-level function pickles, so workers can run it
    task = functools.partial(evaluate, transposition=transposition)
    if engine == "dask":
        _run_dask(task, system, weather, todo, prices, parts, workers, scheduler, report)
    else:
        _run_local(task, system, weather, todo, prices, parts, workers, report)
    wanted = {combination_id(c) for c in combos}
    frame = pd.concat([pd.read_parquet(p) for p in sorted(parts.glob("*.parquet")) if p.stem in wanted],
                      ignore_index=True)
    ok = frame[~frame["excluded"]].copy()
    if len(ok):
        ok["pareto"] = pareto_front(ok)
        ok = ok.sort_values(["lifetime_cost", "energy_delivered_kwh_per_year", "id"], ascending=[True, False, True])
    bad = frame[frame["excluded"]].copy()
    bad["pareto"] = False
    ranked = pd.concat([ok, bad.sort_values("id")], ignore_index=True)
    ranked.insert(0, "rank", np.where(ranked["excluded"], 0, np.arange(1, len(ranked) + 1)))
    return ranked


def write_results(folder: Path, ranked: pd.DataFrame) -> list[Path]:
    """The ranked table as ``results.parquet`` and ``results.csv`` (the same rows and columns), each written atomically."""
    folder = Path(folder)
    parquet, csv = (folder / name for name in RESULTS)
    atomic_write(parquet, lambda tmp: ranked.to_parquet(tmp))
    atomic_write(csv, lambda tmp: ranked.to_csv(tmp, index=False))
    return [parquet, csv]


def read_fleet(source) -> list[tuple[str, Path, Path]]:
    """The systems of a fleet: a folder of ``NAME.toml`` with ``NAME.csv`` (or ``.epw``) beside each,
    or a manifest CSV with columns ``name,system,weather`` (paths relative to the manifest).

    Returns
    -------
    list of (name, system file, weather file)
    """
    source = Path(source)
    if source.is_dir():
        pairs = []
        for system_file in sorted(source.glob("*.toml")):
            weather = next((system_file.with_suffix(ext) for ext in (".csv", ".epw", ".CSV", ".EPW")
                            if system_file.with_suffix(ext).exists()), None)
            if weather is None:
                raise InputError(str(system_file), None, "has no weather file beside it (same name, .csv or .epw)")
            pairs.append((system_file.stem, system_file, weather))
        if not pairs:
            raise InputError(str(source), None, "holds no system files (*.toml)")
        return pairs
    data = read_bounded(source, MAX_TOML_BYTES, "fleet manifest")
    try:
        manifest = pd.read_csv(io.BytesIO(data), dtype=str, keep_default_na=False)
    except (OSError, ValueError, UnicodeDecodeError) as exc:
        raise InputError(str(source), None, f"cannot be read as a manifest CSV ({exc})") from None
    missing = [c for c in ("name", "system", "weather") if c not in manifest.columns]
    if missing:
        raise InputError(str(source), f"column {missing[0]!r}", "is missing (expected name,system,weather)")
    if manifest["name"].duplicated().any():
        raise InputError(str(source), "column 'name'", f"repeats {manifest['name'][manifest['name'].duplicated()].iloc[0]!r}")
    rows = []
    for k, r in manifest.iterrows():
        system_file, weather = source.parent / r["system"], source.parent / r["weather"]
        for path in (system_file, weather):
            if not path.exists():
                raise InputError(str(source), f"row {k + 2}", f"{str(path)!r} does not exist")
        rows.append((r["name"], system_file, weather))
    return rows


def fleet_table(results: list[tuple[str, dict]]) -> pd.DataFrame:
    """One row per system: the annual summary's energies, the bank's extremes, and the hours of each alert.

    An alert gets its ``alert_hours.NAME`` column when it fired in at least one system (0 in the others).
    """
    keys = ("poa_insolation_kwh_m2", "energy_mpp_kwh", "energy_generated_kwh", "energy_delivered_kwh",
            "energy_stored_kwh", "wiring_loss_kwh", "controller_loss_kwh", "curtailed_kwh", "unmet_load_kwh",
            "min_soc", "days_reaching_full")
    from pvsource.alerts import ALERTS

    fired = [a.name for a in ALERTS if any(s.get("alert_hours", {}).get(a.name, 0.0) > 0 for _, s in results)]
    return pd.DataFrame([{"name": name, **{k: summary.get(k) for k in keys},
                          **{f"alert_hours.{a}": summary.get("alert_hours", {}).get(a, 0.0) for a in fired}}
                         for name, summary in results])
