"""Time a one-minute year of the season study against pvlib's ModelChain, and measure peak memory.

Targets (season issue): ours takes no more than ModelChain's time on the same
weather and module with the CEC single-diode DC model (De Soto's with the
temperature adjustment the module's fit carries), while doing more
(cables, controller, bank, state of charge); peak memory stays within 2 GB.

Each side runs in its own process, so each peak memory is its own. The
weather is the demo's synthetic year at one-minute steps (525,600 rows).

Run: python bench/bench_season.py [--freq 1min]
"""

from __future__ import annotations

import argparse
import json
import resource
import subprocess
import sys
import time


def run_ours(freq: str) -> dict:
    from pvsource.demo import demo_system, synthetic_weather
    from pvsource.season import run_season

    system = demo_system()
    weather = synthetic_weather(system, freq=freq)
    t0 = time.perf_counter()
    result = run_season(system, weather)
    elapsed = time.perf_counter() - t0
    return {"seconds": elapsed, "rows": len(weather), "energy_kwh": result.summary["energy_stored_kwh"]}


def run_modelchain(freq: str) -> dict:
    import pvlib
    from pvlib.modelchain import ModelChain
    from pvlib.pvsystem import PVSystem
    from pvlib.temperature import TEMPERATURE_MODEL_PARAMETERS

    from pvsource.demo import demo_system, synthetic_weather

    system = demo_system()
    weather = synthetic_weather(system, freq=freq)
    p = system.module.parameters
    group = system.groups[0]
    module_parameters = {"alpha_sc": p.alpha_sc_a_per_c, "a_ref": p.a_ref_v, "I_L_ref": p.i_l_ref_a,
                         "I_o_ref": p.i_o_ref_a, "R_sh_ref": p.r_sh_ref_ohm, "R_s": p.r_s_ohm,
                         "EgRef": p.eg_ref_ev, "dEgdT": p.degdt_per_c, "Adjust": p.adjust_pct}
    pv = PVSystem(surface_tilt=group.tilt_deg, surface_azimuth=group.azimuth_deg, module_parameters=module_parameters,
                  temperature_model_parameters=TEMPERATURE_MODEL_PARAMETERS["sapm"]["close_mount_glass_glass"],
                  modules_per_string=group.modules_per_string, strings_per_inverter=group.strings,
                  inverter_parameters={"pdc0": 2000.0})
    site = system.site
    location = pvlib.location.Location(site.latitude, site.longitude, weather.index.tz, site.altitude_m)
    mc = ModelChain(pv, location, dc_model="cec", ac_model="pvwatts", aoi_model="physical",
                    spectral_model="no_loss", transposition_model="perez")
    t0 = time.perf_counter()
    mc.run_model(weather[["ghi", "dni", "dhi", "temp_air", "wind_speed"]])
    elapsed = time.perf_counter() - t0
    return {"seconds": elapsed, "rows": len(weather), "energy_kwh": float(mc.results.dc["p_mp"].sum()) / 60000.0}


def child(which: str, freq: str) -> None:
    out = run_ours(freq) if which == "ours" else run_modelchain(freq)
    out["peak_mb"] = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0
    print(json.dumps(out))


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--freq", default="1min")
    parser.add_argument("--only", choices=("ours", "modelchain"))
    args = parser.parse_args()
    if args.only:
        child(args.only, args.freq)
        return
    results = {}
    for which in ("ours", "modelchain"):
        proc = subprocess.run([sys.executable, __file__, "--only", which, "--freq", args.freq],
                              capture_output=True, text=True, check=True)
        results[which] = json.loads(proc.stdout.strip().splitlines()[-1])
    ours, theirs = results["ours"], results["modelchain"]
    print(f"rows: {ours['rows']:,} ({args.freq} steps)")
    print(f"pvsource run_season (cables, MPPT, bank, SOC): {ours['seconds']:7.2f} s   peak {ours['peak_mb']:7.0f} MB")
    print(f"pvlib ModelChain (CEC DC, PVWatts AC)        : {theirs['seconds']:7.2f} s   peak {theirs['peak_mb']:7.0f} MB")
    print(f"ratio ours / ModelChain: {ours['seconds'] / theirs['seconds']:.2f} (target <= 1); "
          f"our peak memory {'within' if ours['peak_mb'] <= 2048 else 'ABOVE'} 2 GB")


if __name__ == "__main__":
    main()
