"""The built-in demo: an invented cabin and a synthetic, reproducible weather year.

The weather is pvlib's clear sky (Ineichen, with a fixed Linke turbidity so no
data file is needed) dimmed by a seeded cloud process: a daily clearness index
that follows a first-order autoregressive walk with a seasonal mean, plus
hour-to-hour variation; the diffuse and direct parts come from the Erbs
decomposition. Air temperature follows a seasonal and a daily cycle with
noise. The household load is an invented evening-heavy profile. The same seed
gives the same year on every machine.

References
----------
.. [1] P. Ineichen, R. Perez, "A new airmass independent formulation for the
   Linke turbidity coefficient", Solar Energy 73 (2002) 151-157,
   doi:10.1016/S0038-092X(02)00045-2
.. [2] D. G. Erbs, S. A. Klein, J. A. Duffie, "Estimation of the diffuse
   radiation fraction for hourly, daily and monthly-average global
   radiation", Solar Energy 28 (1982) 293-302, doi:10.1016/0038-092X(82)90302-4
"""

from __future__ import annotations

from importlib import resources

import numpy as np
import pandas as pd
import pvlib

from pvsource.config import load_system
from pvsource.system import System

DEMO_SEED = 20261201
DEMO_YEAR = 2025
DEMO_TZ = "Etc/GMT-1"  # a fixed offset: no daylight-saving jumps in the demo year
LINKE_TURBIDITY = 3.0


def demo_system() -> System:
    """The shipped invented system."""
    with resources.as_file(resources.files("pvsource") / "data" / "demo" / "system.toml") as path:
        return load_system(path)


def household_load_w(times: pd.DatetimeIndex) -> np.ndarray:
    """An invented evening-heavy household draw [W]: a fridge, lights, a pump and a workshop hour."""
    hour = times.hour.to_numpy() + times.minute.to_numpy() / 60.0
    load = np.full(len(times), 55.0)                                    # standby and fridge average
    load += np.where((hour >= 6.5) & (hour < 8.5), 180.0, 0.0)           # morning
    load += np.where((hour >= 18.0) & (hour < 22.5), 260.0, 0.0)         # evening lights and cooking
    load += np.where((hour >= 14.0) & (hour < 15.0) & (times.day_of_week.to_numpy() >= 5), 600.0, 0.0)  # workshop
    return load


def synthetic_weather(system: System | None = None, *, year: int = DEMO_YEAR, freq: str = "1h",
                      seed: int = DEMO_SEED) -> pd.DataFrame:
    """A reproducible weather year for the demo site, in pvsource's column names.

    Returns
    -------
    DataFrame
        Indexed by a tz-aware time index; ``ghi``, ``dni``, ``dhi`` [W/m2],
        ``temp_air`` [degC], ``wind_speed`` [m/s], ``load_w`` [W]; attrs
        ``step_h`` and ``notes``.
    """
    system = system or demo_system()
    site = system.site
    times = pd.date_range(f"{year}-01-01", f"{year + 1}-01-01", freq=freq, tz=DEMO_TZ, inclusive="left")
    loc = pvlib.location.Location(site.latitude, site.longitude, DEMO_TZ, site.altitude_m)
    solpos = loc.get_solarposition(times)
    clear = loc.get_clearsky(times, model="ineichen", solar_position=solpos, linke_turbidity=LINKE_TURBIDITY)
    rng = np.random.default_rng(seed)
    days = times.normalize().unique()
    doy = days.day_of_year.to_numpy()
    # Daily clearness: cloudier in winter, an AR(1) walk so weather comes in spells.
    mean = 0.62 + 0.12 * np.cos(2 * np.pi * (doy - 190) / 365.0)
    walk = np.zeros(len(days))
    for k in range(1, len(days)):
        walk[k] = 0.6 * walk[k - 1] + rng.normal(0.0, 0.18)
    daily = np.clip(mean + walk, 0.08, 1.0)
    day_of = pd.Index(days).get_indexer(times.normalize())
    hourly = np.clip(daily[day_of] * (1.0 + rng.normal(0.0, 0.08, len(times))), 0.03, 1.05)
    ghi = clear["ghi"].to_numpy() * hourly
    parts = pvlib.irradiance.erbs(ghi, solpos["zenith"].to_numpy(), times.day_of_year.to_numpy())
    hour = times.hour.to_numpy() + times.minute.to_numpy() / 60.0
    season = 9.0 - 11.0 * np.cos(2 * np.pi * (times.day_of_year.to_numpy() - 20) / 365.0)
    temp = season + 5.0 * np.sin(2 * np.pi * (hour - 9.0) / 24.0) * (0.5 + 0.5 * daily[day_of]) \
        + rng.normal(0.0, 1.0, len(times))
    weather = pd.DataFrame({
        "ghi": ghi, "dni": np.nan_to_num(np.asarray(parts["dni"], float)),
        "dhi": np.nan_to_num(np.asarray(parts["dhi"], float)),
        "temp_air": temp, "wind_speed": np.abs(2.0 + rng.normal(0.0, 1.2, len(times))),
        "load_w": household_load_w(times),
    }, index=times)
    weather.attrs["step_h"] = pd.Timedelta(freq).total_seconds() / 3600.0
    from pvsource.weather import time_note

    weather.attrs["time_label"] = "instant"
    weather.attrs["notes"] = [time_note("instant", weather.attrs["step_h"], "synthetic samples"),
                              f"synthetic weather: clear sky (Ineichen, Linke turbidity {LINKE_TURBIDITY:g}) "
                              f"dimmed by a seeded cloud process (seed {seed}); invented load profile"]
    return weather
