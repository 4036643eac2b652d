"""The whole `pvsource season` process on a one-minute year against pvlib's ModelChain, side by side.

Targets (issue 11, section 7): the `pvsource season` command, counted from
the command to the last file written (reading the CSV, the study,
steps.parquet, hourly.csv, the figures and the report), takes no longer than
pvlib ModelChain's whole process on the same CSV (read with pandas, the
single-diode DC model of the same module: CEC, which is De Soto's with the
temperature adjustment the module's fit carries; the same Perez
transposition, physical angle-of-incidence model and SAPM cell temperature);
the goal is half. Peak memory
stays within 2 GB.

Both sides run as separate processes started the same way, each timed by
the wall clock from its start to its exit, with its own peak resident memory
from the operating system (os.wait4). The weather is the demo's synthetic
year at one-minute steps (525,600 rows), written once as a CSV with offset
timestamps; the module's De Soto parameters are written beside it so the
ModelChain process needs only pandas and pvlib.

Run: python bench/bench_season.py [--freq 1min] [--repeat 3] [--keep DIR]
"""

from __future__ import annotations

import argparse
import json
import os
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

# The ModelChain process: everything pvlib needs to do the same job, and nothing of ours.
MODELCHAIN = r'''
import json, sys
import pandas as pd
import pvlib
from pvlib.modelchain import ModelChain
from pvlib.pvsystem import PVSystem
from pvlib.temperature import TEMPERATURE_MODEL_PARAMETERS

setup = json.load(open(sys.argv[2]))
weather = pd.read_csv(sys.argv[1], index_col="timestamp", parse_dates=["timestamp"])
pv = PVSystem(surface_tilt=setup["tilt"], surface_azimuth=setup["azimuth"], albedo=setup["albedo"],
              module_parameters=setup["module"],
              temperature_model_parameters=TEMPERATURE_MODEL_PARAMETERS["sapm"]["close_mount_glass_glass"],
              modules_per_string=setup["modules_per_string"], strings_per_inverter=setup["strings"],
              inverter_parameters={"pdc0": 2000.0})
location = pvlib.location.Location(setup["latitude"], setup["longitude"], altitude=setup["altitude"])
mc = ModelChain(pv, location, dc_model="cec", ac_model="pvwatts", aoi_model="physical",
                spectral_model="no_loss", transposition_model="perez")
mc.run_model(weather[["ghi", "dni", "dhi", "temp_air", "wind_speed"]])
print(json.dumps({"energy_mpp_kwh": float(mc.results.dc["p_mp"].sum()) / 60000.0}))
'''


def prepare(folder: Path, freq: str) -> tuple[Path, Path, Path, int]:
    """The demo's system file, its weather year as a CSV, and the ModelChain setup, in ``folder``."""
    from importlib import resources

    from pvsource.demo import demo_system, synthetic_weather

    system = demo_system()
    weather = synthetic_weather(system, freq=freq)
    system_file = folder / "sys.toml"
    system_file.write_text((resources.files("pvsource") / "data" / "demo" / "system.toml").read_text())
    csv = folder / "year.csv"
    table = weather.copy()
    table.index = table.index.map(lambda ts: ts.isoformat())
    table.index.name = "timestamp"
    table.to_csv(csv)
    p, group, site = system.module.parameters, system.groups[0], system.site
    setup = {"module": {"alpha_sc": p.alpha_sc_a_per_c, "a_ref": p.a_ref_v, "I_L_ref": p.i_l_ref_a,
                        "I_o_ref": p.i_o_ref_a, "R_sh_ref": p.r_sh_ref_ohm, "R_s": p.r_s_ohm,
                        "EgRef": p.eg_ref_ev, "dEgdT": p.degdt_per_c, "Adjust": p.adjust_pct},
             "tilt": group.tilt_deg, "azimuth": group.azimuth_deg, "albedo": site.albedo,
             "modules_per_string": group.modules_per_string, "strings": group.strings,
             "latitude": site.latitude, "longitude": site.longitude, "altitude": site.altitude_m}
    setup_file = folder / "modelchain.json"
    setup_file.write_text(json.dumps(setup))
    return system_file, csv, setup_file, len(weather)


def prepared(folder: Path, freq: str) -> tuple[Path, Path, Path, int]:
    """:func:`prepare`, run in a child process.

    On Linux a child's peak resident memory starts from its parent's size at
    the fork, so the process that starts the measured runs must stay small.
    """
    done = subprocess.run([sys.executable, __file__, "--prepare", str(folder), freq],
                          capture_output=True, text=True, check=True)
    system_file, csv, setup_file, rows = json.loads(done.stdout)
    return Path(system_file), Path(csv), Path(setup_file), rows


def run_measured(command: list[str]) -> dict:
    """Wall-clock seconds from start to exit of one process, and its own peak resident memory [MB].

    wait4 gives the child's resource usage; ru_maxrss is in kB on Linux.
    """
    t0 = time.perf_counter()
    proc = subprocess.Popen(command, stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    # Read the pipes ourselves, then reap the child with wait4 for its resource usage.
    out = proc.stdout.read()
    err = proc.stderr.read()
    _, status, usage = os.wait4(proc.pid, 0)
    elapsed = time.perf_counter() - t0
    proc.returncode = os.waitstatus_to_exitcode(status)
    if proc.returncode:
        raise SystemExit(f"{' '.join(command)} failed ({proc.returncode}):\n{err.decode()}")
    return {"seconds": elapsed, "peak_mb": usage.ru_maxrss / 1024.0, "stdout": out.decode()}


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--freq", default="1min")
    parser.add_argument("--repeat", type=int, default=3, help="runs of each side, in turns; the best is reported")
    parser.add_argument("--keep", type=Path, help="keep the inputs and our outputs in this folder")
    args = parser.parse_args()
    folder = Path(args.keep or tempfile.mkdtemp(prefix="bench-season-"))
    folder.mkdir(parents=True, exist_ok=True)
    try:
        system_file, csv, setup_file, rows = prepared(folder, args.freq)
        ours_cmd = lambda out: [sys.executable, "-m", "pvsource", "season", str(system_file), str(csv),  # noqa: E731
                                "--out", str(out), "--json"]
        theirs_cmd = [sys.executable, "-c", MODELCHAIN, str(csv), str(setup_file)]
        runs = {"ours": [], "modelchain": []}
        for k in range(args.repeat):
            out = folder / f"out{k}"
            shutil.rmtree(out, ignore_errors=True)
            runs["ours"].append(run_measured(ours_cmd(out)))
            runs["modelchain"].append(run_measured(theirs_cmd))
        ours = min(runs["ours"], key=lambda r: r["seconds"])
        theirs = min(runs["modelchain"], key=lambda r: r["seconds"])
        energy_ours = json.loads(ours["stdout"])["energy_mpp_kwh"]
        energy_theirs = json.loads(theirs["stdout"].strip().splitlines()[-1])["energy_mpp_kwh"]
        sizes = {p.name: p.stat().st_size for p in (folder / "out0").iterdir()}
        print(f"rows: {rows:,} ({args.freq} steps); best of {args.repeat}, run in turns; CSV {csv.stat().st_size / 1e6:.0f} MB")
        for label, which, best in (("pvsource season (CLI, read to last file)", "ours", ours),
                                   ("pvlib ModelChain (read, CEC, Perez)     ", "modelchain", theirs)):
            all_runs = ", ".join(f"{r['seconds']:.2f}" for r in runs[which])
            peak = max(r["peak_mb"] for r in runs[which])
            print(f"{label}: {best['seconds']:7.2f} s   peak {peak:6.0f} MB   (runs: {all_runs} s)")
        ratio = ours["seconds"] / theirs["seconds"]
        peak_ours = max(r["peak_mb"] for r in runs["ours"])
        print(f"ratio ours / ModelChain: {ratio:.2f} (limit 1, goal 0.5); our peak memory "
              f"{'within' if peak_ours <= 2048 else 'ABOVE'} 2 GB")
        print(f"energy at the MPPs: ours {energy_ours:.1f} kWh, ModelChain {energy_theirs:.1f} kWh")
        print("our files: " + ", ".join(f"{n} {s / 1e6:.1f} MB" for n, s in sorted(sizes.items())))
    finally:
        if not args.keep:
            shutil.rmtree(folder, ignore_errors=True)


if __name__ == "__main__":
    if len(sys.argv) == 4 and sys.argv[1] == "--prepare":
        print(json.dumps([str(x) if isinstance(x, Path) else x for x in prepare(Path(sys.argv[2]), sys.argv[3])]))
    else:
        main()
