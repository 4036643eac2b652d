"""The sky over one string group: the sun, the plane of array, the cell.

`poa_conditions` turns weather from :mod:`pvsource.weather` into the
irradiance and cell temperature that one group of modules sees;
`sun_position` places the sun.

References
----------
.. [1] I. Reda, A. Andreas, "Solar position algorithm for solar radiation
   applications", Solar Energy 76 (2004) 577-589, doi:10.1016/j.solener.2003.12.003
.. [2] D. G. Erbs, S. A. Klein, J. A. Duffie, "Estimation of the diffuse radiation
   fraction for hourly, daily and monthly-average global radiation", Solar Energy
   28 (1982) 293-302, doi:10.1016/0038-092X(82)90302-4
.. [3] R. Perez, P. Ineichen, R. Seals, J. Michalsky, R. Stewart, "Modeling daylight
   availability and irradiance components from direct and global irradiance",
   Solar Energy 44 (1990) 271-289, doi:10.1016/0038-092X(90)90055-H
.. [4] J. E. Hay, J. A. Davies, "Calculations of the solar radiation incident on an
   inclined surface", Proc. First Canadian Solar Radiation Data Workshop (1980) 59-72
.. [5] F. Kasten, A. T. Young, "Revised optical air mass tables and approximation
   formula", Applied Optics 28 (1989) 4735-4738, doi:10.1364/AO.28.004735
.. [6] W. De Soto, S. A. Klein, W. A. Beckman, "Improvement and validation of a model
   for photovoltaic array performance", Solar Energy 80 (2006) 78-88,
   doi:10.1016/j.solener.2005.06.010 (the physical incidence-angle model)
.. [7] B. Marion, "Numerical method for angle-of-incidence correction factors for
   diffuse radiation incident photovoltaic modules", Solar Energy 147 (2017)
   344-348, doi:10.1016/j.solener.2017.03.027
.. [8] D. L. King, W. E. Boyson, J. A. Kratochvil, "Photovoltaic array performance
   model", Sandia report SAND2004-3535 (2004), doi:10.2172/919131
.. [9] D. Faiman, "Assessing the outdoor operating temperature of photovoltaic
   modules", Prog. Photovolt. 16 (2008) 307-315, doi:10.1002/pip.813
"""

from __future__ import annotations

from types import MappingProxyType

import numpy as np
import pandas as pd
from pvlib import atmosphere, iam, irradiance, solarposition, temperature

from pvsource.errors import InputError

TRANSPOSITION_MODELS = ("perez", "haydavies", "isotropic")

_SAPM = temperature.TEMPERATURE_MODEL_PARAMETERS["sapm"]
# name -> (pvlib.temperature model, its published parameters)
MOUNTING_PRESETS = MappingProxyType({
    "open_rack": ("sapm", _SAPM["open_rack_glass_glass"]),
    "open_rack_polymer": ("sapm", _SAPM["open_rack_glass_polymer"]),
    "close_roof": ("sapm", _SAPM["close_mount_glass_glass"]),
    "insulated_back": ("sapm", _SAPM["insulated_back_glass_polymer"]),
    "faiman_open": ("faiman", {"u0": 25.0, "u1": 6.84}),
})

# Below this step the sun is placed every SUN_STEP and interpolated: its
# position is smooth over minutes, and the full algorithm is the costliest
# part of a fine year (checked to 0.01 degrees in the tests).
SUN_STEP = pd.Timedelta("5min")
REFRACTION_DEG = 0.5667  # SPA's atmospheric refraction at sunrise and sunset (pvlib's default)


def _ns(times) -> np.ndarray:
    return pd.DatetimeIndex(times).as_unit("ns").asi8


def sun_position(times: pd.DatetimeIndex, latitude: float, longitude: float, altitude_m: float,
                 temp_air) -> pd.DataFrame:
    """Apparent zenith and azimuth of the sun at each time [deg].

    pvlib's SPA (:func:`pvlib.solarposition.get_solarposition`) at the times
    themselves, or, for steps shorter than :data:`SUN_STEP`, on a
    :data:`SUN_STEP` grid interpolated linearly (azimuth unwrapped), the
    refraction correction of SPA [1]_ then applied at each time.

    References
    ----------
    .. [1] I. Reda, A. Andreas, "Solar position algorithm for solar radiation
       applications", Solar Energy 76 (2004) 577-589, doi:10.1016/j.solener.2003.12.003
    """
    pressure = atmosphere.alt2pres(altitude_m)
    temp = pd.Series(np.asarray(temp_air, float), index=times)
    if len(times) < 3 or pd.Series(times).diff().median() >= SUN_STEP:
        return solarposition.get_solarposition(times, latitude, longitude, altitude=altitude_m,
                                               pressure=pressure, temperature=temp)
    coarse = pd.date_range(times[0].floor(SUN_STEP), times[-1].ceil(SUN_STEP), freq=SUN_STEP, tz=times.tz)
    ns, coarse_ns = _ns(times).astype(float), _ns(coarse).astype(float)
    coarse_temp = np.interp(coarse_ns, ns, temp.to_numpy())
    sun = solarposition.get_solarposition(coarse, latitude, longitude, altitude=altitude_m, pressure=pressure,
                                          temperature=coarse_temp)
    azimuth = np.degrees(np.unwrap(np.radians(sun["azimuth"].to_numpy())))
    zenith = np.interp(ns, coarse_ns, sun["zenith"].to_numpy())
    # Refraction bends sharply near the horizon: apply SPA's own correction
    # at every time to the smooth geometric elevation, not interpolate it.
    elevation = 90.0 - zenith
    switch = elevation >= -(0.26667 + REFRACTION_DEG)
    bend = (pressure / 100.0 / 1010.0) * (283.0 / (273.0 + temp.to_numpy())) * 1.02 \
        / (60.0 * np.tan(np.radians(elevation + 10.3 / (elevation + 5.11)))) * switch
    return pd.DataFrame({"apparent_zenith": zenith - bend, "zenith": zenith,
                         "azimuth": np.mod(np.interp(ns, coarse_ns, azimuth), 360.0)}, index=times)


def sun_times(weather: pd.DataFrame) -> pd.DatetimeIndex:
    """Where the sun is placed for each row of the weather.

    Interval values (``attrs["time_label"]`` start, middle or end; the
    readers index them by the interval's start) see the sun at the middle of
    the interval; samples (``"instant"``, or no label) at their own time.
    """
    times = weather.index
    if weather.attrs.get("time_label", "instant") == "instant":
        return times
    step_h = weather.attrs.get("step_h") or pd.Series(times).diff().median() / pd.Timedelta(hours=1)
    return times + pd.Timedelta(hours=float(step_h)) / 2


def poa_conditions(weather: pd.DataFrame, latitude: float, longitude: float, altitude_m: float,
                   tilt_deg: float, azimuth_deg: float, *, model: str = "perez",
                   albedo: float = 0.2, mounting: str = "open_rack") -> pd.DataFrame:
    """Irradiance and cell temperature on one group's plane.

    The sun's apparent (refraction-corrected) position comes from
    :func:`pvlib.solarposition.get_solarposition` [1]_ at `sun_times`: the
    middle of each interval for interval data, the instant itself for
    samples; it is used throughout. With ``ghi``, the plane's irradiance comes
    from :func:`pvlib.irradiance.get_total_irradiance` (Perez [3]_, with
    Kasten-Young air mass [5]_; Hay-Davies [4]_; or isotropic), after
    splitting ``ghi`` with Erbs [2]_ unless ``dni`` and ``dhi`` are both given.
    A measured ``poa_global`` is used only without ``ghi`` (it belongs to one
    plane, and groups may face other ways); it is then also the effective
    irradiance, and the direct and diffuse columns are NaN. Otherwise the
    effective irradiance applies the physical incidence-angle model [6]_ to
    the beam and Marion's diffuse integrals of it [7]_ to sky and ground
    light. With the sun below the horizon every irradiance is 0.

    Parameters
    ----------
    weather : pandas.DataFrame
        From `read_weather`: time-zone-aware index (interval starts, or
        instants), ``attrs["time_label"]`` and ``attrs["step_h"]`` [h] (a
        frame without them is read as instants), ``temp_air`` [degC],
        ``ghi`` or ``poa_global`` [W/m2], optional ``dni``, ``dhi`` [W/m2] and
        ``wind_speed`` [m/s] (1 m/s when absent).
    latitude, longitude : float
        Site [deg], north and east positive.
    altitude_m : float
        Site altitude [m].
    tilt_deg, azimuth_deg : float
        Plane tilt from horizontal [deg]; azimuth clockwise from north [deg].
    model : {"perez", "haydavies", "isotropic"}
        Sky-diffuse transposition model.
    albedo : float
        Ground reflectance [fraction].
    mounting : str
        A key of `MOUNTING_PRESETS`: the Sandia model [8]_ with its published
        coefficients (``open_rack``, ``open_rack_polymer``, ``close_roof``,
        ``insulated_back``) or Faiman's [9]_ fit (``faiman_open``).

    Returns
    -------
    pandas.DataFrame
        ``poa_global_w_m2``, ``poa_direct_w_m2``, ``poa_diffuse_w_m2``,
        ``effective_irradiance_w_m2`` [W/m2], ``cell_temp_c`` [degC],
        ``aoi_deg``, ``solar_zenith_deg`` (apparent) [deg] on the weather's
        index; ``attrs["notes"]`` says what was assumed.
    """
    where = "poa_conditions"
    for field, value, choices in (("model", model, TRANSPOSITION_MODELS), ("mounting", mounting, MOUNTING_PRESETS)):
        if value not in choices:
            raise InputError(where, field, f"{value!r} is unknown; expected one of {', '.join(choices)}")
    for field, value, lo, hi in (("latitude", latitude, -90, 90), ("longitude", longitude, -180, 180),
                                 ("altitude_m", altitude_m, -500, 9000), ("tilt_deg", tilt_deg, 0, 180),
                                 ("azimuth_deg", azimuth_deg, 0, 360), ("albedo", albedo, 0, 1)):
        if not lo <= float(value) <= hi:
            raise InputError(where, field, f"{value} is outside {lo}..{hi}")
    times = weather.index
    if not isinstance(times, pd.DatetimeIndex) or times.tz is None:
        raise InputError(where, "weather", "needs a time-zone-aware DatetimeIndex (from read_weather)")
    if "temp_air" not in weather or not {"ghi", "poa_global"} & set(weather):
        raise InputError(where, "weather", "needs columns temp_air and ghi or poa_global")
    light = "ghi" if "ghi" in weather else "poa_global"
    for name in (light, "temp_air", "dni", "dhi", "wind_speed"):
        if name in weather and weather[name].isna().any():
            raise InputError(where, f"weather column {name}", "has missing values; read it with --bad-rows fill or skip")
    notes = []
    temp_air = weather["temp_air"]
    at = sun_times(weather)
    sun = sun_position(at, latitude, longitude, altitude_m, temp_air)
    sun.index = times
    zenith, sun_azimuth = sun["apparent_zenith"], sun["azimuth"]
    night = (zenith > 90).to_numpy()
    aoi = irradiance.aoi(tilt_deg, azimuth_deg, zenith, sun_azimuth)

    def daylight(x):
        # Perez is 0/0 when dhi = 0, and no light means no diffuse light
        return np.where(night, 0.0, np.clip(np.nan_to_num(np.asarray(x, float)), 0.0, None))

    if light == "ghi":
        ghi = weather["ghi"]
        if "dni" in weather and "dhi" in weather:
            dni, dhi = weather["dni"], weather["dhi"]
        else:
            parts = irradiance.erbs(ghi, zenith, at.dayofyear)
            dni, dhi = parts["dni"], parts["dhi"]
            notes.append("dni and dhi split from ghi with the Erbs model")
        poa = irradiance.get_total_irradiance(
            tilt_deg, azimuth_deg, zenith, sun_azimuth, dni, ghi, dhi,
            dni_extra=irradiance.get_extra_radiation(at.dayofyear),
            airmass=atmosphere.get_relative_airmass(zenith), albedo=albedo, model=model)
        direct, sky, ground = (daylight(poa[c]) for c in ("poa_direct", "poa_sky_diffuse", "poa_ground_diffuse"))
        diffuse_iam = iam.marion_diffuse("physical", tilt_deg)
        effective = (direct * daylight(iam.physical(aoi)) + sky * diffuse_iam["sky"]
                     + ground * np.nan_to_num(diffuse_iam["ground"]))
        poa_global, diffuse = direct + sky + ground, sky + ground
    else:
        poa_global = effective = daylight(weather["poa_global"])
        direct = diffuse = np.full(len(times), np.nan)
        notes.append("poa_global used as measured and as the effective irradiance; no direct/diffuse split")
    if "wind_speed" in weather:
        wind = weather["wind_speed"].to_numpy(float)
    else:
        wind = np.ones(len(times))
        notes.append("wind_speed absent: 1 m/s assumed for the cell temperature")
    kind, parameters = MOUNTING_PRESETS[mounting]
    cell = (temperature.sapm_cell if kind == "sapm" else temperature.faiman)(
        poa_global, temp_air.to_numpy(float), wind, **parameters)
    out = pd.DataFrame({"poa_global_w_m2": poa_global, "poa_direct_w_m2": direct,
                        "poa_diffuse_w_m2": diffuse, "effective_irradiance_w_m2": effective,
                        "cell_temp_c": np.asarray(cell, float), "aoi_deg": np.asarray(aoi, float),
                        "solar_zenith_deg": zenith.to_numpy(float)}, index=times)
    out.attrs["notes"] = notes
    return out
