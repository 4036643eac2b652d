"""pvsource's season study against pvlib on the two TMY3 files pvlib ships.

Run: ``python bench/bench_tmy3.py``. For each file, one invented 60-cell module
facing south at 35 degrees, open rack, at its maximum power point:

- monthly plane-of-array insolation against pvlib's solar position and Perez
  transposition with the sun at the middle of each hour-ending interval (and,
  for scale, with the sun at the label, as pvsource placed it before);
- annual energy at the MPP against pvlib's ModelChain set up the same way
  (the same single-diode parameters in pvlib's CEC form, Perez, Sandia open-rack temperature, physical
  incidence-angle model with Marion's diffuse integrals, no spectral loss);
- how much the model choices move that energy: the incidence-angle loss on
  diffuse light, and the transposition model.

The tests in tests/test_sky.py and tests/test_season.py enforce the first two.
"""

import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pvlib
from pvlib import atmosphere, iam, irradiance, temperature
from pvlib.modelchain import ModelChain

from pvsource.array import StringGroup
from pvsource.module import Datasheet, fit_datasheet
from pvsource.season import run_season
from pvsource.sky import poa_conditions
from pvsource.system import Load, System, Site
from pvsource.weather import read_weather

DATA = Path(pvlib.__file__).parent / "data"
FILES = ("703165TY.csv", "723170TYA.CSV")
TILT, AZIMUTH = 35.0, 180.0
# the tests' invented module (tests/conftest.py)
DATASHEET = Datasheet(v_oc=40.1, i_sc=9.8, v_mp=33.0, i_mp=9.2, isc_temp_coeff_pct=0.05,
                      voc_temp_coeff_pct=-0.29, cells_in_series=60, name="bench")


def pvlib_monthly_poa(raw, loc, shift):
    at = raw.index - shift
    sun = loc.get_solarposition(at)
    zen = sun["apparent_zenith"].to_numpy()
    poa = irradiance.get_total_irradiance(TILT, AZIMUTH, zen, sun["azimuth"].to_numpy(), raw["dni"].to_numpy(),
                                          raw["ghi"].to_numpy(), raw["dhi"].to_numpy(),
                                          dni_extra=irradiance.get_extra_radiation(at),
                                          airmass=atmosphere.get_relative_airmass(zen), albedo=0.2, model="perez")
    kwh = np.where(zen <= 90, np.nan_to_num(np.asarray(poa["poa_global"], float)).clip(0), 0.0) / 1000
    return pd.Series(kwh).groupby((raw.index - pd.Timedelta("1h")).month).sum().to_numpy()


def modelchain_kwh(raw, loc, module, transposition="perez", diffuse_iam=True):
    p = module.parameters
    pv = pvlib.pvsystem.PVSystem(
        surface_tilt=TILT, surface_azimuth=AZIMUTH, albedo=0.2, inverter_parameters={"pdc0": 1e6},
        module_parameters=dict(alpha_sc=p.alpha_sc_a_per_c, a_ref=p.a_ref_v, I_L_ref=p.i_l_ref_a, I_o_ref=p.i_o_ref_a,
                               R_sh_ref=p.r_sh_ref_ohm, R_s=p.r_s_ohm, EgRef=p.eg_ref_ev, dEgdT=p.degdt_per_c,
                               Adjust=p.adjust_pct),
        temperature_model_parameters=temperature.TEMPERATURE_MODEL_PARAMETERS["sapm"]["open_rack_glass_glass"])
    mc = ModelChain(pv, loc, dc_model="cec", ac_model="pvwatts", aoi_model="physical", spectral_model="no_loss",
                    temperature_model="sapm", transposition_model=transposition, losses_model="no_loss")
    w = raw[["ghi", "dni", "dhi", "temp_air", "wind_speed"]].copy()
    w.index = w.index - pd.Timedelta("30min")
    mc.run_model(w)
    if diffuse_iam:
        parts, d = mc.results.total_irrad.fillna(0.0), iam.marion_diffuse("physical", TILT)
        eff = (parts["poa_direct"].clip(lower=0) * mc.results.aoi_modifier + parts["poa_sky_diffuse"] * d["sky"]
               + parts["poa_ground_diffuse"] * d["ground"])
        mc.run_model_from_effective_irradiance(w.assign(effective_irradiance=eff, poa_global=parts["poa_global"]))
    return mc.results.dc["p_mp"].fillna(0.0).clip(lower=0.0).sum() / 1000.0


def main() -> None:
    module = fit_datasheet(DATASHEET)
    print(f"one module ({DATASHEET.v_mp * DATASHEET.i_mp:.0f} W at STC), tilt {TILT:g}, azimuth {AZIMUTH:g}, open rack\n")
    for name in FILES:
        raw, meta = pvlib.iotools.read_tmy3(DATA / name, coerce_year=1990, map_variables=True)
        loc = pvlib.location.Location(meta["latitude"], meta["longitude"], altitude=meta["altitude"])
        weather = read_weather(DATA / name)
        cond = poa_conditions(weather, meta["latitude"], meta["longitude"], meta["altitude"], TILT, AZIMUTH)
        ours_m = cond["poa_global_w_m2"].groupby(cond.index.month).sum().to_numpy() / 1000
        mid, label = pvlib_monthly_poa(raw, loc, pd.Timedelta("30min")), pvlib_monthly_poa(raw, loc, pd.Timedelta(0))
        site = Site(meta["latitude"], meta["longitude"], meta["altitude"])
        system = System(module=module, groups=(StringGroup("g1", 1, 1, tilt_deg=TILT, azimuth_deg=AZIMUTH),),
                        cables=(), load=Load("mpp"), name="bench", site=site)
        energy = {}
        for model in ("perez", "haydavies", "isotropic"):
            energy[model] = run_season(system, weather, transposition=model).summary["energy_mpp_kwh"]
        summary = run_season(system, weather).summary
        ref = modelchain_kwh(raw, loc, module)
        no_diffuse_iam = modelchain_kwh(raw, loc, module, diffuse_iam=False)
        station = meta["Name"].strip().strip('"')
        print(f"{name} ({station}, {meta['latitude']:g}, {meta['longitude']:g}): "
              f"{len(summary['monthly'])} months")
        print(f"  monthly POA insolation vs pvlib, sun at mid-interval: max {100 * np.max(np.abs(ours_m / mid - 1)):.3f} %"
              f" (the sun at the label would be off by up to {100 * np.max(np.abs(label / mid - 1)):.2f} %)")
        print(f"  annual energy at the MPP: pvsource {summary['energy_mpp_kwh']:.2f} kWh, "
              f"ModelChain {ref:.2f} kWh ({100 * (summary['energy_mpp_kwh'] / ref - 1):+.3f} %)")
        print(f"  no incidence-angle loss on diffuse light (ModelChain's default FD = 1): "
              f"{100 * (no_diffuse_iam / ref - 1):+.2f} %")
        print(f"  transposition: Hay-Davies {100 * (energy['haydavies'] / energy['perez'] - 1):+.2f} %, "
              f"isotropic {100 * (energy['isotropic'] / energy['perez'] - 1):+.2f} % against Perez")
        sys.stdout.flush()


if __name__ == "__main__":
    main()
