"""Weather files: readers, units, time and bad rows.

References used below: pvlib's own readers (reference library) and the TMY3
file shipped with pvlib (open dataset).
"""

from pathlib import Path

import numpy as np
import pandas as pd
import pvlib
import pytest

from pvsource.errors import InputError
from pvsource.weather import read_weather, read_weather_csv


TMY3 = Path(pvlib.__file__).parent / "data" / "723170TYA.CSV"


@pytest.fixture(scope="module")
def tmy3():
    return read_weather(TMY3)


def day_rows(n=24, start="2024-06-01T00:00+00:00", ghi_peak=900.0, temp=(15.0, 10.0)):
    """An invented clear-ish day: (iso timestamps, ghi, temp_air), hourly."""
    times = pd.date_range(start, periods=n, freq="h")
    hours = np.arange(n) % 24
    ghi = np.clip(ghi_peak * np.sin(np.pi * (hours - 6) / 12), 0, None).round(1)
    temp_air = (temp[0] + temp[1] * np.sin(np.pi * (hours - 9) / 12)).round(1)
    return [t.isoformat() for t in times], ghi, temp_air


def write_csv(tmp_path, header, rows, sep=",", name="w.csv", encoding="utf-8", decimal="."):
    lines = [sep.join(header)]
    for row in rows:
        lines.append(sep.join(str(x).replace(".", decimal) if isinstance(x, float) else str(x) for x in row))
    path = tmp_path / name
    path.write_text("\n".join(lines) + "\n", encoding=encoding)
    return path


def simple_csv(tmp_path, **kw):
    stamps, ghi, temp_air = day_rows(**kw)
    return write_csv(tmp_path, ["timestamp", "ghi", "temp_air"], zip(stamps, ghi, temp_air))


# --- EPW / TMY3 dispatch -------------------------------------------------------------

def test_tmy3_matches_pvlib_reader(tmy3):
    # reference library + open dataset: pvlib.iotools.read_tmy3 on the file pvlib ships
    ref, meta = pvlib.iotools.read_tmy3(TMY3, coerce_year=1990, map_variables=True)
    assert len(tmy3) == 8760 and tmy3.attrs["step_h"] == pytest.approx(1.0)
    for name in ("ghi", "dni", "dhi", "temp_air", "wind_speed"):
        np.testing.assert_allclose(tmy3[name].sum(), ref[name].sum())
    assert tmy3.attrs["site"]["latitude"] == meta["latitude"]
    assert tmy3.index.is_monotonic_increasing and tmy3.notna().all().all()


def test_epw_dispatch(tmp_path):
    # reference library: pvlib.iotools.read_epw reads the same numbers back
    header = ["LOCATION,Testville,XX,ZZZ,invented,000000,10.00,20.00,1.0,100.0"]
    header += [f"LINE{k},x" for k in range(2, 9)]
    rows = []
    for h in range(1, 25):
        fields = [2001, 6, 1, h, 60, "?9?9?9?9E0?9?9?9?9", 20.0 + h / 10, 10.0, 50, 101325,
                  0, 0, 300, max(0, 100 * (12 - abs(h - 12))), 500 if 7 < h < 18 else 0, 100, 0, 0, 0,
                  0, 180, 2.5] + [0] * 13
        rows.append(",".join(str(f) for f in fields))
    path = tmp_path / "site.epw"
    path.write_text("\n".join(header + rows) + "\n")
    w = read_weather(path)
    ref, _ = pvlib.iotools.read_epw(path, coerce_year=1990)
    np.testing.assert_allclose(w["ghi"].to_numpy(), ref["ghi"].to_numpy())
    np.testing.assert_allclose(w["temp_air"].to_numpy(), ref["temp_air"].to_numpy())
    assert w.attrs["site"]["altitude_m"] == 100.0
    # EnergyPlus weather format: hour 1 is the hour ending at 01:00, so the day's 24 rows start at 00:00
    assert w.index[0].strftime("%m-%d %H:%M") == "06-01 00:00" and (w.index.day == 1).all()


# --- CSV parsing ---------------------------------------------------------------------

def test_plain_csv_round_trip(tmp_path):
    w = read_weather(simple_csv(tmp_path))
    assert list(w.columns) == ["ghi", "temp_air"] and len(w) == 24
    assert str(w.index.tz) == "UTC" and w.attrs["step_h"] == 1.0 and w.attrs["time_label"] == "instant"
    notes = " ".join(w.attrs["notes"])
    assert "sample at its timestamp (the default for CSV)" in notes and "--time-label start, middle or end" in notes


def test_kilowatts_per_square_metre_are_refused_naming_the_unit(tmp_path):
    # Law: sunlight reaches hundreds of W/m2 on any day, so a file never above 2 is in kW/m2.
    stamps, ghi, temp_air = day_rows(n=48)
    path = write_csv(tmp_path, ["timestamp", "ghi", "temp_air"], zip(stamps, ghi / 1000, temp_air))
    with pytest.raises(InputError, match=r"column 'ghi': never exceeds 0\.9, impossible for sunlight in W/m2; "
                                         r"it looks like kW/m2: state the unit in the header \('ghi \[kW/m2\]'\) "
                                         r"or with --column 'ghi=ghi \(kW/m2\)'") as exc:
        read_weather_csv(path)
    assert "\n" not in str(exc.value)
    w = read_weather_csv(path, columns={"ghi": "ghi (kW/m2)"})
    np.testing.assert_allclose(w["ghi"], ghi, atol=1e-9)
    dim = write_csv(tmp_path, ["timestamp", "ghi", "temp_air"], zip(stamps, ghi / 20, temp_air), name="dim.csv")
    assert any("peaks at only 45 W/m2" in n for n in read_weather_csv(dim).attrs["notes"])


def test_fahrenheit_and_kelvin_are_refused_naming_the_unit(tmp_path):
    # Law: no climate has a median air temperature above about 40 degC (the
    # hottest stations' annual means are near 35 degC, common knowledge, from memory).
    stamps, ghi, temp_air = day_rows(temp=(30.0, 8.0))
    temp_f = (temp_air * 9 / 5 + 32).round(2)
    path = write_csv(tmp_path, ["timestamp", "ghi", "Tamb"], zip(stamps, ghi, temp_f))
    with pytest.raises(InputError, match=r"column 'Tamb': median .* above any air temperature in degC; it looks "
                                         r"like degF: state the unit in the header \('temp_air \[degF\]'\) or "
                                         r"with --column 'temp_air=Tamb \(degF\)'"):
        read_weather_csv(path, columns={"temp_air": "Tamb"})
    w = read_weather_csv(path, columns={"temp_air": "Tamb (degF)"})
    np.testing.assert_allclose(w["temp_air"], (temp_f - 32) * 5 / 9)
    assert any("converted from degF" in n for n in w.attrs["notes"])
    kelvin = write_csv(tmp_path, ["timestamp", "ghi", "temp_air"], zip(stamps, ghi, temp_air + 273.15), name="k.csv")
    with pytest.raises(InputError, match=r"it looks like K: state the unit"):
        read_weather_csv(kelvin)


def test_units_in_headers(tmp_path):
    stamps, ghi, temp_air = day_rows()
    rows = zip(stamps, ghi / 1000, temp_air * 9 / 5 + 32, [36.0] * 24, [2.0] * 24)
    path = write_csv(tmp_path, ["timestamp", "GHI [kW/m2]", "temp_air (degF)", "wind_speed [km/h]",
                                "load_w [kW]"], rows)
    w = read_weather_csv(path)
    np.testing.assert_allclose(w["ghi"], ghi, atol=1e-9)
    np.testing.assert_allclose(w["temp_air"], temp_air, atol=1e-9)
    assert (w["wind_speed"] == 10.0).all() and (w["load_w"] == 2000.0).all()
    # units in parentheses read like units in brackets
    path = write_csv(tmp_path, ["timestamp", "GHI (W/m2)", "temp_air (°C)", "wind_speed (m/s)"],
                     zip(stamps, ghi, temp_air, [3.0] * 24), name="paren.csv")
    w = read_weather_csv(path)
    np.testing.assert_allclose(w["ghi"], ghi)
    np.testing.assert_allclose(w["temp_air"], temp_air)
    path = write_csv(tmp_path, ["timestamp", "ghi [lux]", "temp_air"], zip(stamps, ghi, temp_air))
    with pytest.raises(InputError, match="'ghi \\[lux\\]'.*not understood"):
        read_weather_csv(path)


def test_bom_semicolons_and_decimal_commas(tmp_path):
    stamps, ghi, temp_air = day_rows()
    path = write_csv(tmp_path, ["timestamp", "ghi", "temp_air"], zip(stamps, ghi, temp_air),
                     sep=";", decimal=",", encoding="utf-8-sig")
    assert path.read_bytes().startswith(b"\xef\xbb\xbf") and b"," in path.read_bytes()
    w = read_weather_csv(path)
    np.testing.assert_allclose(w["ghi"], ghi)
    np.testing.assert_allclose(w["temp_air"], temp_air)


def test_column_overrides(tmp_path):
    stamps, ghi, temp_air = day_rows()
    path = write_csv(tmp_path, ["Time", "Global (W/m2)", "Tamb"], zip(stamps, ghi, temp_air))
    w = read_weather_csv(path, columns={"timestamp": "Time", "ghi": "Global", "temp_air": "Tamb"})
    np.testing.assert_allclose(w["ghi"], ghi)
    with pytest.raises(InputError, match="^--column: irradiance: unknown name"):
        read_weather_csv(path, columns={"irradiance": "Global"})
    with pytest.raises(InputError, match="'Tair': not in the header"):
        read_weather_csv(path, columns={"timestamp": "Time", "ghi": "Global", "temp_air": "Tair"})


def test_daylight_saving_offsets_become_standard_time(tmp_path):
    # the autumn change in Central Europe: 02:00+02:00, 02:00+01:00 are an hour apart;
    # clocks go forward for daylight saving, so +01:00 is the standard time
    stamps = ["2024-10-27T01:00+02:00", "2024-10-27T02:00+02:00", "2024-10-27T02:00+01:00",
              "2024-10-27T03:00+01:00"]
    path = write_csv(tmp_path, ["timestamp", "ghi", "temp_air"], [(s, 0.0, 10.0) for s in stamps])
    w = read_weather_csv(path)
    assert list(w.index.hour) == [0, 1, 2, 3] and w.index[0].utcoffset() == pd.Timedelta("1h")
    assert any("+01:00, +02:00 (daylight saving)" in n for n in w.attrs["notes"])
    assert read_weather_csv(path, tz="Europe/Berlin").index.equals(w.index)
    naive = write_csv(tmp_path, ["timestamp", "ghi", "temp_air"],
                      [(s[:16], 0.0, 10.0) for s in stamps[::2]], name="naive.csv")
    w = read_weather_csv(naive, tz="+02:00")
    assert w.index[0] == pd.Timestamp("2024-10-26T23:00Z")


def test_a_year_on_local_daylight_saving_time_counts_every_day_on_standard_time(tmp_path):
    # Law: a year of hourly rows on a Central European wall clock (IANA zone
    # Europe/Berlin) holds 8760 hours; on standard time every day has 24 and
    # there are exactly 12 months, none empty.
    local = pd.date_range("2025-01-01", "2026-01-01", freq="h", tz="Europe/Berlin", inclusive="left")
    ghi = np.clip(800 * np.sin(np.pi * (local.hour - 6) / 12), 0, None).round(1)
    path = write_csv(tmp_path, ["timestamp", "ghi", "temp_air"],
                     zip(local.strftime("%Y-%m-%d %H:%M"), ghi, [10.0] * len(local)))
    w = read_weather_csv(path, tz="Europe/Berlin")
    assert len(w) == 8760 and str(w.index.tz) == "UTC+01:00"
    per_day = pd.Series(1, index=w.index).groupby(w.index.date).size()
    assert per_day.nunique() == 1 and per_day.iloc[0] == 24 and len(per_day) == 365
    monthly = w["ghi"].groupby(w.index.month).sum()
    assert len(monthly) == 12 and (monthly > 0).all()
    assert any("daylight-saving time (Europe/Berlin) moved to the site's standard time" in n
               for n in w.attrs["notes"])


@pytest.mark.parametrize("label, shift", [("start", "0min"), ("middle", "30min"), ("end", "60min"),
                                          ("instant", "0min")])
def test_time_label_puts_each_row_at_its_interval_start(tmp_path, label, shift):
    path = simple_csv(tmp_path)
    w = read_weather_csv(path, time_label=label)
    assert (w.index == pd.date_range("2024-06-01", periods=24, freq="h", tz="UTC") - pd.Timedelta(shift)).all()
    assert w.attrs["time_label"] == label and w.attrs["notes"][0].startswith("time: ")
    assert "--time-label" in w.attrs["notes"][0]
    assert not any("no --time-label given" in n for n in w.attrs["notes"])


def test_an_hour_ending_csv_year_gives_twelve_months(tmp_path):
    # Hour-ending labels run from 01:00 on 1 January to 24:00 (00:00 next year) on
    # 31 December: the last hour belongs to December, not to a 13th month.
    stamps = pd.date_range("2025-01-01T01:00", periods=8760, freq="h", tz="UTC")
    rows = zip((s.isoformat() for s in stamps), [100.0] * 8760, [10.0] * 8760)
    w = read_weather_csv(write_csv(tmp_path, ["timestamp", "ghi", "temp_air"], rows), time_label="end")
    assert w.index.month.nunique() == 12 and (w.index.year == 2025).all()
    with pytest.raises(InputError, match="^--time-label: noon: unknown; expected one of start, middle, end, instant"):
        read_weather_csv(simple_csv(tmp_path), time_label="noon")


def test_tmy3_and_epw_are_hour_ending():
    # NREL TMY3 users manual (NREL/TP-581-43156): values are means over the hour ending at the label.
    for name in ("703165TY.csv", "723170TYA.CSV"):
        w = read_weather(TMY3.parent / name)
        assert w.attrs["time_label"] == "end" and "hour-ending by definition" in w.attrs["notes"][0]
        assert w.index[0].strftime("%m-%d %H:%M") == "01-01 00:00"
        assert w.index[-1].strftime("%Y-%m-%d %H:%M") == "1990-12-31 23:00"
        assert w.index.tz_localize(None).to_period("M").nunique() == 12
    with pytest.raises(InputError, match="^--time-label: start: .*hour ending at each label"):
        read_weather(TMY3, time_label="start")


def test_day_first_dates_with_time_format(tmp_path):
    stamps, ghi, temp_air = day_rows()
    day_first = [pd.Timestamp(s).strftime("%d.%m.%Y %H:%M") for s in stamps]
    path = write_csv(tmp_path, ["timestamp", "ghi", "temp_air"], zip(day_first, ghi, temp_air))
    w = read_weather_csv(path, tz="UTC", time_format="%d.%m.%Y %H:%M")
    assert w.index[0] == pd.Timestamp("2024-06-01T00:00Z") and len(w) == 24
    with pytest.raises(InputError, match=r"row 2, column 'timestamp': '01.06.2024 00:00' is not an ISO 8601.*"
                                         r"--time-format '%d.%m.%Y %H:%M'"):
        read_weather_csv(path, tz="UTC")
    with pytest.raises(InputError, match="^--time-format: %d.%m.%Y %H:%M: has no %z.*give --tz"):
        read_weather_csv(path, time_format="%d.%m.%Y %H:%M")
    with pytest.raises(InputError, match=r"row 2, column 'timestamp': '01.06.2024 00:00' does not match "
                                         r"--time-format '%m/%d/%Y %H:%M'"):
        read_weather_csv(path, tz="UTC", time_format="%m/%d/%Y %H:%M")


# --- bad files: one line naming the file and the column or row ------------------------

def bad_cases():
    stamps, ghi, temp_air = day_rows()
    good = list(zip(stamps, ghi, temp_air))
    three_days = list(zip(*day_rows(n=72)))
    unsorted = good[:5] + [good[6], good[5]] + good[7:]
    text = good[:3] + [(stamps[3], "cloudy", temp_air[3])] + good[4:]
    gap = good[:10] + good[14:]
    return {
        "missing column": (["timestamp", "ghi"], good, r"column temp_air: missing"),
        "irradiance 50000": (["timestamp", "ghi", "temp_air"], [(s, g * 60, t) for s, g, t in good],
                             r"column 'ghi': median daily maximum 54000 is neither"),
        "one impossible value": (["timestamp", "ghi", "temp_air"], three_days[:4] + [(stamps[4], 1800.0, 9.0)]
                                 + three_days[5:], r"row 6, column 'ghi': 1800 W/m2 is outside -5\.\.1500"),
        "unsorted": (["timestamp", "ghi", "temp_air"], unsorted, r"row 8, column 'timestamp': .* is earlier than row 7"),
        "duplicate": (["timestamp", "ghi", "temp_air"], good[:6] + [good[5]] + good[6:],
                      r"row 8, column 'timestamp': .* repeats row 7"),
        "text in numbers": (["timestamp", "ghi", "temp_air"], text, r"row 5, column 'ghi': 'cloudy' is not a number"),
        "empty cell": (["timestamp", "ghi", "temp_air"], good[:2] + [(stamps[2], 0.0, "")] + good[3:],
                       r"row 4, column 'temp_air': is empty"),
        "gap": (["timestamp", "ghi", "temp_air"], gap, r"row 12, column 'timestamp': 5 h after row 11"),
        "naive without tz": (["timestamp", "ghi", "temp_air"], [(s[:16], g, t) for s, g, t in good],
                             r"column 'timestamp': timestamps carry no time zone; give --tz"),
        "all NaN": (["timestamp", "ghi", "temp_air", "wind_speed"], [(s, g, t, "") for s, g, t in good],
                    r"column 'wind_speed': has no numeric values"),
        "bad timestamp": (["timestamp", "ghi", "temp_air"], good[:3] + [("yesterday", 0.0, 5.0)] + good[4:],
                          r"row 5, column 'timestamp': 'yesterday' is not an ISO 8601"),
    }


@pytest.mark.parametrize("case", list(bad_cases()))
def test_bad_csv_gives_one_line(tmp_path, case):
    header, rows, pattern = bad_cases()[case]
    path = write_csv(tmp_path, header, rows)
    with pytest.raises(InputError, match=pattern) as exc:
        read_weather_csv(path)
    assert "\n" not in str(exc.value) and str(exc.value).startswith(str(path) + ": ")


@pytest.mark.parametrize("content, pattern", [
    (b"", "is empty"),
    (b"\n\n  \n", "is empty"),
    (b"\x89PNG\r\n\x1a\n\x00\x00\x00\rIHDR", "is not a text file"),
    (b"timestamp,ghi,temp_air\n", "no data rows"),
    (b"timestamp,ghi,temp_air\n2024-01-01T00:00Z,0,1\n2024-01-01T01:00Z,0,1,7\n", "row 3: has more fields"),
])
def test_empty_binary_and_ragged_files(tmp_path, content, pattern):
    path = tmp_path / "bad.csv"
    path.write_bytes(content)
    with pytest.raises(InputError, match=pattern) as exc:
        read_weather(path)
    assert "\n" not in str(exc.value) and str(exc.value).startswith(str(path))


# --- policies ------------------------------------------------------------------------

def messy_rows():
    stamps, ghi, temp_air = day_rows(n=48)
    rows = [list(r) for r in zip(stamps, ghi, temp_air)]
    rows[10][1] = "n/a"                      # one bad value: fillable
    rows[20][2] = 99.0                       # impossible temperature: fillable
    for k in range(30, 35):                  # five in a row: too long to fill
        rows[k][1] = ""
    rows.insert(40, list(rows[39]))          # a repeated timestamp
    rows[44], rows[45] = rows[45], rows[44]  # two rows swapped
    return rows


def test_fill_policy_counts_and_leaves_no_nan(tmp_path):
    path = write_csv(tmp_path, ["timestamp", "ghi", "temp_air"], messy_rows())
    w = read_weather_csv(path, policy="fill")
    notes = "\n".join(w.attrs["notes"])
    assert "1 ghi values filled" in notes and "1 temp_air values filled" in notes
    assert "5 rows dropped that could not be filled" in notes
    assert "1 rows with repeated timestamps dropped" in notes and "1 rows out of time order" in notes
    assert len(w) == 43 and w.notna().all().all() and w.index.is_monotonic_increasing
    stamps, ghi, _ = day_rows(n=48)
    # linear in time between its neighbours (the definition of the fill)
    assert w.loc[pd.Timestamp(stamps[10]), "ghi"] == pytest.approx((ghi[9] + ghi[11]) / 2)


def test_skip_policy_counts_and_leaves_no_nan(tmp_path):
    path = write_csv(tmp_path, ["timestamp", "ghi", "temp_air"], messy_rows())
    w = read_weather_csv(path, policy="skip")
    notes = "\n".join(w.attrs["notes"])
    assert "7 rows with missing or impossible values skipped" in notes
    assert "1 rows with repeated timestamps dropped" in notes
    assert len(w) == 41 and w.notna().all().all() and w.index.is_monotonic_increasing


def test_gaps_are_counted_under_skip(tmp_path):
    stamps, ghi, temp_air = day_rows()
    rows = list(zip(stamps, ghi, temp_air))
    w = read_weather_csv(write_csv(tmp_path, ["timestamp", "ghi", "temp_air"], rows[:5] + rows[8:]),
                         policy="skip")
    assert "1 gaps in the time step counted (largest 4 h)" in w.attrs["notes"] and w.attrs["step_h"] == 1.0


@pytest.mark.parametrize("encoding", ["cp1252", "utf-16"])
def test_a_spreadsheet_export_in_another_encoding_reads_as_its_utf8_twin(tmp_path, encoding):
    # Law: the encoding of a file changes none of its values. A degree sign in
    # a header is where a Windows export differs from UTF-8 (cp1252 0xB0 is not
    # valid UTF-8, so the reader falls back to it; UTF-16 announces itself).
    stamps, ghi, temp_air = day_rows()
    header = ["timestamp", "ghi", "temp_air (°C)"]
    rows = list(zip(stamps, ghi, temp_air))
    twin = read_weather(write_csv(tmp_path, header, rows, name="utf8.csv"))
    other = read_weather(write_csv(tmp_path, header, rows, name=f"{encoding}.csv", encoding=encoding))
    pd.testing.assert_frame_equal(other, twin)
