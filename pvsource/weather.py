"""Weather files: reading and row-by-row checks.

`read_weather` reads an EPW, TMY3 or plain CSV file into one DataFrame with
pvlib's column names (``ghi``, ``dni``, ``dhi``, ``poa_global``, ``temp_air``,
``wind_speed``) plus ``load_w``, in SI units, on a time-zone-aware index.
What a group of modules sees under that weather is :mod:`pvsource.sky`'s job.

Row numbers in messages are the file's line numbers: the header is row 1, so
the first data row is row 2 (TMY3: row 3, EPW: row 9).

References
----------
.. [1] S. Wilcox, W. Marion, "Users manual for TMY3 data sets", NREL/TP-581-43156
   (2008), doi:10.2172/928611
"""

from __future__ import annotations

import csv
import datetime
import codecs
import io
import re
from pathlib import Path

import numpy as np
import pandas as pd
from pvlib import iotools

from pvsource.errors import InputError
from pvsource.inputs import HEAD_BYTES, MAX_WEATHER_MB, MB, OnDisk, decodes, read_bounded, release_memory, scan_bounded

NAMES = ("timestamp", "ghi", "dni", "dhi", "poa_global", "temp_air", "wind_speed", "load_w")
IRRADIANCE = ("ghi", "dni", "dhi", "poa_global")
POLICIES = ("fail", "fill", "skip")
# What a timestamp labels: the start, middle or end of the interval its values
# average over, or the instant they were sampled at.
TIME_LABELS = ("start", "middle", "end", "instant")
# A plain timestamp says only when; read it as the instant it names. For
# one-minute data every convention agrees to 30 s; for hourly data the note
# asks the user to state it.
DEFAULT_TIME_LABEL = "instant"
# how far the label lies after the interval's start [steps]
_LABEL_AFTER_START = {"start": 0.0, "middle": 0.5, "end": 1.0}
# Longer runs of bad values are outages; interpolating them would hide that.
FILL_LIMIT = 3
# Non-leap, so a typical year's 8760 hours (from several source years) become
# one increasing series without a gap.
TYPICAL_YEAR = 1990
# Above the highest gust ever measured at a weather station (113 m/s, Barrow
# Island 1996; from memory): a logger fault, not wind.
WIND_MAX_M_S = 120.0
# 10 MW from a battery bank is far beyond any system pvsource models; above it
# a load column is a unit or logger fault (and 1e308 or inf would poison sums).
LOAD_MAX_W = 1.0e7
# Beyond these SI bounds a value is a fault, not weather.
BOUNDS = dict.fromkeys(IRRADIANCE, (-5.0, 1500.0)) | {
    "temp_air": (-60.0, 70.0), "wind_speed": (0.0, WIND_MAX_M_S), "load_w": (0.0, LOAD_MAX_W)}
SI_LABEL = dict.fromkeys(IRRADIANCE, "W/m2") | {"temp_air": "degC", "wind_speed": "m/s", "load_w": "W"}
_F, _K = (5 / 9, -160 / 9), (1.0, -273.15)
# unit text in a header cell -> (scale, offset): si = value * scale + offset
_UNITS = {
    "W/m2": {"w/m2": (1.0, 0.0), "wm-2": (1.0, 0.0), "kw/m2": (1e3, 0.0), "kwm-2": (1e3, 0.0)},
    "degC": {"c": (1.0, 0.0), "degc": (1.0, 0.0), "f": _F, "degf": _F, "k": _K, "kelvin": _K},
    "m/s": {"m/s": (1.0, 0.0), "ms-1": (1.0, 0.0), "km/h": (1 / 3.6, 0.0), "mph": (0.44704, 0.0),
            "kn": (0.514444, 0.0)},
    "W": {"w": (1.0, 0.0), "kw": (1e3, 0.0)},
}
_OFFSET = r"\d:\d\d(?::\d\d(?:\.\d+)?)?\s*(?:Z|[+-]\d\d(?::?\d\d)?)$"


def read_weather(path, *, columns: dict | None = None, tz: str | None = None,
                 policy: str = "fail", time_label: str | None = None,
                 time_format: str | None = None, max_mb: float = MAX_WEATHER_MB) -> pd.DataFrame:
    """Read an EPW, TMY3 or plain CSV weather file.

    ``.epw`` goes to :func:`pvlib.iotools.read_epw`; a file whose first line is
    the TMY3 site header [1]_ (7 comma-separated fields, station number first)
    to :func:`pvlib.iotools.read_tmy3`; anything else to `read_weather_csv`.
    A typical year mixes source years, so EPW and TMY3 times move into
    `TYPICAL_YEAR`. EPW and TMY3 values are means over the hour ending at
    the label [1]_, so their ``time_label`` is ``"end"`` by definition. The
    same checks and `policy` apply to all three.

    Parameters
    ----------
    path : str or Path
    columns, tz, policy, time_label, time_format
        As for `read_weather_csv`; ``columns`` and ``time_format`` are for
        plain CSV only, ``time_label`` may only confirm ``"end"`` for EPW and
        TMY3, and ``tz`` converts an EPW/TMY3 index (which carries the file's
        offset).
    max_mb : float
        Largest file accepted [MB] (``--max-weather-mb``). The file is read
        once, so a pipe or FIFO works, and ``/dev/zero`` is refused.

    Returns
    -------
    pandas.DataFrame
        As from `read_weather_csv`; EPW and TMY3 add ``attrs["site"]`` with
        ``latitude`` [deg], ``longitude`` [deg] and ``altitude_m`` [m].
    """
    path, where = Path(path), str(path)
    _check_policy(policy)
    data = scan_bounded(path, int(max_mb * MB), "weather", "--max-weather-mb", encodings=_encodings)
    head = data.head if isinstance(data, OnDisk) else data
    kind = "EPW" if path.suffix.lower() == ".epw" else ("TMY3" if _is_tmy3(head) else None)
    if kind is None:
        # Handed over in a holder the parser empties, so the file's bytes are
        # freed once parsed, not held through the conversions.
        holder = [data]
        del data
        return read_weather_csv(path, columns=columns, tz=tz, policy=policy, time_label=time_label,
                                time_format=time_format, data=holder)
    for option, value in (("--column", columns), ("--time-format", time_format)):
        if value:
            raise InputError(option, None, f"applies to plain CSV files only; {where} is {kind}")
    if isinstance(data, OnDisk):  # a file of a year of hours: small enough to hold
        data = _whole(data)
    if time_label not in (None, "end"):
        raise InputError("--time-label", time_label, f"{where} is {kind}, whose values are means over the "
                         "hour ending at each label by definition; leave --time-label out")
    try:
        if kind == "EPW":
            data, meta = iotools.read_epw(io.StringIO(data.decode("latin-1")), coerce_year=TYPICAL_YEAR)
        else:
            data, meta = iotools.read_tmy3(io.StringIO(data.decode("latin-1")), coerce_year=TYPICAL_YEAR,
                                           map_variables=True)
    except Exception as exc:  # the readers raise many types on malformed files
        raise InputError(where, None, f"cannot be read as {kind} ({exc})") from None
    times = data.index.tz_convert(_zone(tz)) if tz else data.index
    names = [n for n in ("ghi", "dni", "dhi", "temp_air", "wind_speed") if n in data]
    df = _finish(where, pd.Series(times), {n: data[n].to_numpy(float) for n in names},
                 dict.fromkeys(names), {n: n for n in names + ["timestamp"]},
                 dict.fromkeys(names, (1.0, 0.0, "SI")),
                 (9 if kind == "EPW" else 3) + np.arange(len(data)), policy)
    df.attrs["notes"].insert(0, f"read as {kind} with pvlib; year set to {TYPICAL_YEAR}")
    df.attrs["site"] = {"latitude": float(meta["latitude"]), "longitude": float(meta["longitude"]),
                        "altitude_m": float(meta["altitude"])}
    if kind == "EPW":
        # pvlib's EPW reader already moves each hour-ending row to its start
        return place_in_time(df, "start", "EPW is hour-ending by definition; pvlib's reader labels each hour "
                             "by its start")
    return place_in_time(df, "end", "TMY3 is hour-ending by definition")


def place_in_time(frame: pd.DataFrame, label: str, why: str) -> pd.DataFrame:
    """Put each row at the start of its interval, on the site's standard time.

    Interval values (``label`` start, middle or end) belong to the interval
    they average over, so the row moves to the interval's start, by the
    median step: a day or month then holds exactly the intervals that lie in
    it (a TMY3 file's "24:00" on 31 December is the last hour of the year,
    not a 13th month). Instants stay where they are. A zone with daylight
    saving moves to its standard offset, so no hour is doubled or missing.

    Parameters
    ----------
    frame : pandas.DataFrame
        From the readers: a time-zone-aware index, ``attrs["step_h"]`` [h].
    label : {"start", "middle", "end", "instant"}
    why : str
        Where the convention comes from, for the note.

    Returns
    -------
    pandas.DataFrame
        The same frame, re-indexed; ``attrs["time_label"]`` holds ``label``
        and ``attrs["notes"]`` says what was done.
    """
    notes = frame.attrs.setdefault("notes", [])
    step = pd.Timedelta(hours=frame.attrs["step_h"])
    index = frame.index
    if label in _LABEL_AFTER_START:
        index = index - step * _LABEL_AFTER_START[label]
    frame.index = _standard_time(index, notes).rename("timestamp")
    frame.attrs["time_label"] = label
    notes.insert(0, time_note(label, frame.attrs["step_h"], why))
    return frame


def time_note(label: str, step_h: float, why: str) -> str:
    """One line saying which time convention a study used."""
    if label == "instant":
        return (f"time: each value is a sample at its timestamp ({why}); the sun is placed there and each "
                f"value stands for one step of {step_h:g} h")
    where = {"start": "starting", "middle": "centred", "end": "ending"}[label]
    return (f"time: each value is the mean over the {step_h:g} h interval {where} at its label ({why}); "
            "steps are listed at the interval's start, the sun is placed at its middle, and each interval "
            "counts in the day and month where it lies")


def _standard_time(index: pd.DatetimeIndex, notes: list) -> pd.DatetimeIndex:
    zone = index.tz
    years = range(index.min().year, index.max().year + 1)
    probes = pd.DatetimeIndex([f"{y}-{m:02d}-15" for y in years for m in (1, 4, 7, 10)]).tz_localize(zone)
    offsets = {t.utcoffset() for t in probes}
    if len(offsets) == 1:
        return index
    # Clocks move forward for daylight saving in both hemispheres, so the
    # smallest offset of the year is the zone's standard time.
    standard = datetime.timezone(min(offsets))
    local = index.tz_localize(None) - index.tz_convert("UTC").tz_localize(None)
    if (local != min(offsets)).any():
        notes.append(f"timestamps on daylight-saving time ({zone}) moved to the site's standard time "
                     f"{standard}; days and months are counted on standard time")
    return index.tz_convert(standard)


def read_weather_csv(path, *, columns: dict | None = None, tz: str | None = None,
                     policy: str = "fail", time_label: str | None = None,
                     time_format: str | None = None, data: bytes | None = None) -> pd.DataFrame:
    """Read a weather CSV into SI units on a time-zone-aware index.

    Required columns: ``timestamp``, ``temp_air`` and ``ghi`` or ``poa_global``;
    optional: ``dni``, ``dhi``, ``wind_speed``, ``load_w`` (power drawn from
    the bank). A header cell may carry its unit (``ghi [kW/m2]``,
    ``temp_air (degF)``). A UTF-8 BOM, ``;`` or tab separators and, with ``;``,
    decimal commas are recognised. A column without a unit is SI; one that
    cannot be is refused with the likely unit (irradiance that never exceeds
    2 is kW/m2; air temperature with a median above 45 and values above 70
    is degF, or K above 200). ``--column 'temp_air=Tamb (degF)'`` states a
    unit the header lacks.

    Parameters
    ----------
    path : str or Path
    columns : dict, optional
        Our name -> the CSV's column name (``--column NAME=CSVCOLUMN``), which
        may carry a unit the header lacks (``"Tamb (degF)"``).
    tz : str, optional
        Zone for timestamps without an offset (IANA name, ``UTC`` or e.g.
        ``+01:00``); the index is converted to it, else to UTC.
    policy : {"fail", "fill", "skip"}
        For bad rows (unreadable, empty or out-of-range values, unordered or
        repeated timestamps, gaps longer than 1.5 median steps). ``"fail"``
        raises on the first by row; ``"fill"`` interpolates bad values linearly
        in time across runs of up to `FILL_LIMIT` rows and drops the rest;
        ``"skip"`` drops them. Both sort by time and keep the first of
        repeated timestamps; gaps are only counted.
    time_label : {"start", "middle", "end", "instant"}, optional
        What a timestamp labels (``--time-label``): the start, middle or end
        of the interval its values average over, or the instant they were
        sampled at (the default, `DEFAULT_TIME_LABEL`). See `place_in_time`.
    time_format : str, optional
        A strftime pattern for the timestamps (``--time-format``), e.g.
        ``"%d.%m.%Y %H:%M"`` for day-first dates; default ISO 8601.
    data : bytes or list, optional
        The file's content, already read (`read_weather` reads once); or a
        one-item list holding it, which is emptied so the bytes can be freed
        as soon as they are parsed.

    Returns
    -------
    pandas.DataFrame
        Irradiance [W/m2], ``temp_air`` [degC], ``wind_speed`` [m/s], ``load_w``
        [W], without NaN, indexed by interval start (or instant) on the site's
        standard time. ``attrs["notes"]`` has one line per conversion, fill
        or drop, with counts; ``attrs["step_h"]`` is the median step [h];
        ``attrs["time_label"]`` the time convention.

    Raises
    ------
    InputError
        Naming the file and the column or row (row 1 is the header).
    """
    path, where = Path(path), str(path)
    _check_policy(policy)
    if time_label is not None and time_label not in TIME_LABELS:
        raise InputError("--time-label", time_label, f"unknown; expected one of {', '.join(TIME_LABELS)}")
    if data is None:
        data = read_bounded(path, MAX_WEATHER_MB * MB, "weather", "--max-weather-mb")
    holder = data if isinstance(data, list) else [data]
    del data
    table, rows, sep = _read_table(path, holder)
    found = _match_columns(where, list(table.columns), columns or {})
    cells = {name: cell for name, (cell, _) in found.items()}
    notes = []
    stamps = table[cells["timestamp"]]
    times = _parse_times(where, stamps, tz, cells["timestamp"], time_format, notes)
    values, raw = {}, {"timestamp": stamps}
    for name, cell in cells.items():
        if name != "timestamp":
            values[name], raw[name] = _as_numbers(table[cell], sep)
    del table  # the cells live on in ``values`` and ``raw``; the rest is freed before the frame is built
    units = {name: _unit(where, name, *found[name]) for name in values}
    frame = _finish(where, times, values, raw, cells, units, rows, policy, notes,
                    f"does not match --time-format {time_format!r}" if time_format else ISO_EXPECTED)
    if time_label is None and frame.attrs["step_h"] >= 0.25:
        frame.attrs["notes"].append(f"no --time-label given: {frame.attrs['step_h']:g} h values read as samples "
                                    "at their timestamps; if they are means over an interval, say which end "
                                    "the label marks (--time-label start, middle or end)")
    label = time_label or DEFAULT_TIME_LABEL
    frame = place_in_time(frame, label, "--time-label" if time_label else "the default for CSV")
    release_memory()  # the parse's temporaries, several times the frame, are gone
    return frame


def _check_policy(policy):
    if policy not in POLICIES:
        raise InputError("--bad-rows", policy, f"unknown; expected one of {', '.join(POLICIES)}")


def _head(data: bytes, encoding: str, size: int = HEAD_BYTES) -> str:
    """The start of the text: enough for the header line and the sniffing."""
    return codecs.getincrementaldecoder(encoding)().decode(data[:size], final=False)


def _encodings(head: bytes) -> tuple:
    """The encodings a CSV may be in, in the order tried: UTF-16 by its mark, else UTF-8, else Windows' Latin."""
    return ("utf-16",) if head[:2] in (b"\xff\xfe", b"\xfe\xff") else ("utf-8-sig", "cp1252")


def _whole(source: OnDisk) -> bytes:
    """The bytes of a file scanned on disk, refused if it changed since."""
    data = source.path.read_bytes()
    if not source.unchanged():
        raise InputError(str(source.path), None, "changed while it was read; run again once it is complete")
    return data


def _read_table(path: Path, holder: list):
    """The CSV's cells, their file line numbers and the separator; empties ``holder``.

    ``holder`` has the file's bytes, or the :class:`~pvsource.inputs.OnDisk`
    scan of a regular file, which is then parsed from its path (never held
    whole in memory).
    """
    where = str(path)
    data = holder.pop()
    if isinstance(data, OnDisk):
        encoding = data.encoding
        text = _head(data.head, encoding) if encoding else None
        nonblank = data.nonblank
    else:
        text = encoding = None
        for encoding in _encodings(data):
            # A block at a time: decoding it whole would hold a second copy of the file.
            view = memoryview(data)
            if decodes((view[k:k + MB] for k in range(0, len(view), MB)), encoding):
                text = _head(data, encoding)
                break
        nonblank = re.search(rb"\S", data) is not None
    if text is None or re.search(r"[\x00-\x08\x0e-\x1f]", text):
        raise InputError(where, None, "is not a text file; expected a CSV (UTF-8 or a spreadsheet export)")
    if not re.search(r"\S", text) and (encoding == "utf-16" or not nonblank):
        raise InputError(where, None, "is empty; expected a header line and rows of data")
    sep = max((",", ";", "\t"), key=text.split("\n", 1)[0].count)
    try:
        # pandas' own parser types the columns: numbers come out as floats at
        # its speed, and only a column that is not all numbers is read as text.
        # (no skipinitialspace: the number parser skips blanks itself, and text columns are stripped)
        table = pd.read_csv(str(data.path) if isinstance(data, OnDisk) else io.BytesIO(data), encoding=encoding,
                            sep=sep, keep_default_na=False, na_values=[""], skip_blank_lines=False,
                            decimal="," if sep == ";" else ".", compression=None)
    except (pd.errors.ParserError, ValueError) as exc:
        line = re.search(r"line (\d+)", str(exc))
        raise InputError(where, f"row {line.group(1)}" if line else None,
                         "has more fields than the header") from None
    if isinstance(data, OnDisk) and not data.unchanged():
        raise InputError(where, None, "changed while it was read; run again once it is complete")
    del data
    table.columns = [str(c).strip() for c in table.columns]
    # blank lines are kept as empty rows here, so position + 2 is the file's line
    rows = np.arange(len(table)) + 2
    filled = table.notna().any(axis=1).to_numpy()
    if not filled.any():
        raise InputError(where, None, "has a header but no data rows")
    if not filled.all():
        table, rows = table[filled].reset_index(drop=True), rows[filled]
    return table, rows, sep


def _as_text(column: pd.Series) -> pd.Series:
    return column.astype(object).where(column.notna(), "").astype(str).str.strip()


def _as_numbers(column: pd.Series, sep: str):
    """Floats from one column, and its text when some cell is not a number (for messages)."""
    if pd.api.types.is_numeric_dtype(column):
        return column.to_numpy(float), None
    text = _as_text(column)
    return pd.to_numeric(text.str.replace(",", ".") if sep == ";" else text, errors="coerce").to_numpy(float), text


def _split_unit(cell: str):
    m = re.fullmatch(r"(.*?)\s*[\[(]([^\])]*)[\])]\s*", cell)
    return (m.group(1).strip(), m.group(2).strip()) if m else (cell.strip(), None)


def _match_columns(where: str, header: list, columns: dict) -> dict:
    unknown = [n for n in columns if n not in NAMES]
    if unknown:
        raise InputError("--column", unknown[0], f"unknown name; expected one of {', '.join(NAMES)}")
    found = {}
    for name in NAMES:
        target = str(columns.get(name, name)).strip()
        hits = [c for c in header if target.lower() in (c.lower(), _split_unit(c)[0].lower())]
        unit = None
        if not hits and name in columns:
            # --column temp_air='Tamb (degF)' where the header says only Tamb: the option states the unit
            base, unit = _split_unit(target)
            hits = [c for c in header if base.lower() in (c.lower(), _split_unit(c)[0].lower())]
        if len(hits) > 1:
            raise InputError(where, f"column {name}", f"matches {len(hits)} header cells "
                             f"({', '.join(hits)}); choose one with --column {name}=CSVCOLUMN")
        if hits:
            found[name] = (hits[0], unit or _split_unit(hits[0])[1])
        elif name in columns:
            raise InputError(where, f"column {columns[name]!r}", f"not in the header (from --column "
                             f"{name}={columns[name]}); the header has: {', '.join(header)}")
    missing = [n for n in ("timestamp", "ghi or poa_global", "temp_air")
               if not any(part in found for part in n.split(" or "))]
    if missing:
        raise InputError(where, f"column {missing[0]}", "missing; expected a header cell of that "
                         f"name or --column NAME=CSVCOLUMN; the header has: {', '.join(header)}")
    return found


def _unit(where: str, name: str, cell: str, unit_text: str | None):
    if unit_text is None:
        return None
    key = unit_text.lower().replace(" ", "").replace("°", "deg").replace("²", "2").replace("^", "")
    table = _UNITS[SI_LABEL[name]]
    if key not in table:
        raise InputError(where, f"column {cell!r}", f"unit {unit_text!r} is not understood; "
                         f"expected one of {', '.join(table)}")
    return table[key] + (unit_text,)


def _zone(tz: str):
    try:
        return pd.Timestamp("2000-01-01", tz=tz.strip()).tz
    except Exception:  # pandas raises several types for an unknown zone
        raise InputError("--tz", tz, "unknown time zone; expected an IANA name such as "
                         "Europe/Berlin, UTC, or an offset such as +01:00") from None


_OFFSET_CAPTURE = r"(Z|z|[+-]\d{2}:?\d{2})\s*$"


YEARS = (1900, 2200)  # outside these a timestamp is a typing mistake (and beyond pandas' nanosecond range)


def _parse_times(where: str, cells: pd.Series, tz: str | None, cell: str, time_format: str | None,
                 notes: list) -> pd.Series:
    times = _parse_times_raw(where, cells, tz, cell, time_format, notes)
    if times.min().year >= YEARS[0] and times.max().year <= YEARS[1]:
        return times
    years = times.dt.year
    return times.where((years >= YEARS[0]) & (years <= YEARS[1]))


def _parse_times_raw(where: str, cells: pd.Series, tz: str | None, cell: str, time_format: str | None,
                     notes: list) -> pd.Series:
    zone = _zone(tz) if tz else None
    if time_format is not None:
        return _parse_times_format(where, _as_text(cells), zone, cell, time_format)
    fast = _iso_fast(cells, with_offset=True)
    if fast is not None:
        times, offsets = fast
        return times.dt.tz_convert(zone if zone is not None else _file_zone(offsets, notes))
    if zone is not None:
        fast = _iso_fast(cells, with_offset=False)
        if fast is not None:
            return _localize(where, fast[0], zone, cell)
    # Some cell is not plain ISO 8601: parse cell by cell, so the checks can name the row.
    cells = _as_text(cells)
    has_offset = cells.str.contains(_OFFSET, regex=True).to_numpy()
    if has_offset.any():
        # Offsets may differ (daylight saving): in UTC they are one series, and
        # the order checks catch files where they are not.
        times = pd.to_datetime(cells, format="ISO8601", utc=True, errors="coerce")
        times[~has_offset] = pd.NaT
        if zone is None:
            zone = _file_zone(cells[has_offset].str.extract(_OFFSET_CAPTURE, expand=False).dropna().unique(), notes)
        return times.dt.tz_convert(zone)
    times = pd.to_datetime(cells, format="ISO8601", errors="coerce")
    if zone is None:
        first = cells[cells != ""].iloc[0] if (cells != "").any() else ""
        if pd.isna(pd.to_datetime(first, format="ISO8601", errors="coerce")):
            raise InputError(where, f"column {cell!r}", f"{first!r} is not an ISO 8601 timestamp; for other "
                             "forms give --time-format, e.g. --time-format '%d.%m.%Y %H:%M', and --tz")
        raise InputError(where, f"column {cell!r}", "timestamps carry no time zone; give --tz "
                         "(e.g. --tz Europe/Berlin or --tz +01:00) or write them with an offset")
    return _localize(where, times, zone, cell)


def _iso_fast(cells: pd.Series, with_offset: bool):
    """Every cell ISO 8601 (each with an offset, or none with one), parsed by Arrow; else None.

    Returns (times, distinct offsets): UTC times with offsets, naive without.
    """
    import pyarrow as pa
    import pyarrow.compute as pc

    try:
        arr = pa.array(cells)
        if not pa.types.is_string(arr.type) and not pa.types.is_large_string(arr.type):
            return None
        if arr.null_count == len(arr):
            return None
        parsed = pc.cast(arr, pa.timestamp("ns", tz="UTC" if with_offset else None))
    except (pa.ArrowInvalid, pa.ArrowNotImplementedError, pa.ArrowTypeError):
        return None
    times = pd.Series(parsed.to_pandas(), index=cells.index)
    if not with_offset:
        return times, ()
    return times, sorted({m.group(1) for m in map(re.compile(_OFFSET_CAPTURE).search, _tails(arr)) if m})


def _tails(arr) -> list:
    """The distinct last six characters of an Arrow string array: where an offset sits ("+01:00", "Z")."""
    import pyarrow as pa

    arr = arr.drop_null()
    if isinstance(arr, pa.ChunkedArray):
        arr = arr.combine_chunks()
    width = np.int64 if pa.types.is_large_string(arr.type) else np.int32
    ends = np.frombuffer(arr.buffers()[1], dtype=width)[arr.offset + 1:arr.offset + len(arr) + 1].astype(np.int64)
    data = np.frombuffer(arr.buffers()[2], dtype=np.uint8)
    # eight bytes per row (two before the tail) make one 64-bit key: a hash over
    # numbers, not half a million strings; built a byte at a time, so the
    # temporaries are one row-long array, not eight.
    keys = np.zeros(len(ends), dtype=np.uint64)
    for k in range(8, 0, -1):
        keys = (keys << np.uint64(8)) | data[np.maximum(ends - k, 0)].astype(np.uint64)
    return [int(key).to_bytes(8, "big")[2:].decode("utf-8", "replace") for key in pd.unique(keys)]


def _file_zone(offsets, notes: list):
    """The zone of a file whose timestamps carry ``offsets``: its own clock, on standard time."""
    if len(offsets) == 0:
        return "UTC"
    if len(offsets) == 1:
        # One offset throughout is the file's own local clock: keep it, so
        # months and days are the site's, not UTC's.
        return _zone(offsets[0] if offsets[0] not in ("Z", "z") else "UTC")
    # Several offsets are daylight saving: clocks move forward, so the
    # smallest is the site's standard time.
    minutes = [0 if o in ("Z", "z") else (1 if o[0] == "+" else -1) * (int(o[1:3]) * 60 + int(o[-2:]))
               for o in offsets]
    zone = datetime.timezone(pd.Timedelta(minutes=min(minutes)))
    notes.append(f"timestamps carry offsets {', '.join(sorted(offsets))} (daylight saving): moved to "
                 f"the site's standard time {zone}; days and months are counted on standard time")
    return zone


def _parse_times_format(where, cells, zone, cell, time_format):
    if "%" not in time_format:
        raise InputError("--time-format", time_format, "expected a strftime pattern such as '%d.%m.%Y %H:%M'")
    with_offset = "%z" in time_format
    if not with_offset and zone is None:
        raise InputError("--time-format", time_format, "has no %z, so the timestamps carry no time zone; "
                         "give --tz as well (e.g. --tz Europe/Berlin or --tz +01:00)")
    try:
        times = pd.to_datetime(cells, format=time_format, errors="coerce", utc=with_offset)
    except ValueError as exc:
        raise InputError("--time-format", time_format, f"is not a usable pattern ({exc})") from None
    if with_offset:
        return times.dt.tz_convert(zone) if zone is not None else times
    return _localize(where, times, zone, cell)


def _localize(where, times, zone, cell):
    try:
        return times.dt.tz_localize(zone, ambiguous="infer", nonexistent="raise")
    except Exception as exc:  # the zone libraries raise different types
        raise InputError(where, f"column {cell!r}", f"local times do not fit time zone {zone} ({exc}); "
                         "if the logger ignores daylight saving give an offset, e.g. --tz +01:00") from None


ISO_EXPECTED = ("is not an ISO 8601 timestamp with an offset (or without one and --tz); "
                "for other forms give --time-format, e.g. --time-format '%d.%m.%Y %H:%M'")


def _finish(where, times, values, raw, cells, units, rows, policy, notes=None, time_expected=ISO_EXPECTED):
    """Convert to SI, find bad rows, apply the policy and build the frame."""
    notes, problems, bad, ts_cell = list(notes or []), [], {}, cells["timestamp"]
    bad_time, days = times.isna().to_numpy(), None
    if bad_time.any():
        i = int(np.argmax(bad_time))
        text = raw["timestamp"].iloc[i]
        problems.append((rows[i], ts_cell, f"{'' if pd.isna(text) else str(text).strip()!r} {time_expected}"))
    for name, v in values.items():
        if np.isnan(v).all():
            raise InputError(where, f"column {cells[name]!r}", "has no numeric values")
        if units[name] is None:
            if days is None:
                days = times.dt.tz_localize(None).to_numpy().astype("datetime64[D]")
            scale, offset = _guess_unit(where, name, cells[name], v, days, notes)
        else:
            scale, offset, text = units[name]
            if (scale, offset) != (1.0, 0.0):
                notes.append(f"{name}: converted from {text} (header) to {SI_LABEL[name]}")
        values[name] = v = v * scale + offset
        lo, hi = BOUNDS[name]
        bad[name] = ~((v >= lo) & (v <= hi))
        if bad[name].any():
            i = int(np.argmax(bad[name]))
            text = raw[name].iloc[i] if raw[name] is not None else ""
            problems.append((rows[i], cells[name], f"{text!r} is not a number" if np.isnan(v[i]) and text
                             else "is empty" if np.isnan(v[i])
                             else f"{v[i]:g} {SI_LABEL[name]} is outside {lo:g}..{hi:g}"))
    frame, flags = pd.DataFrame(values, index=pd.DatetimeIndex(times)), pd.DataFrame(bad)
    if bad_time.any():
        frame, flags, rows = frame[~bad_time], flags[~bad_time], rows[~bad_time]
    flags = flags.set_axis(frame.index)
    t = _ns(frame.index)
    run_max = np.maximum.accumulate(t)
    back = np.flatnonzero(t[1:] <= run_max[:-1]) + 1
    if back.size:
        j = back[0]
        k = int(np.argmax(t == run_max[j - 1]))
        problems.append((rows[j], ts_cell, f"timestamp {frame.index[j]} repeats row {rows[k]}"
                         if t[j] == t[k] else f"timestamp {frame.index[j]} is earlier than row "
                         f"{rows[k]}; expected increasing time"))
    dup = np.zeros(len(frame), bool)
    if back.size:  # in time order already, a file has no repeats either
        order = np.argsort(t, kind="stable")
        frame, flags, rows = frame.iloc[order], flags.iloc[order], rows[order]
        dup = frame.index.duplicated(keep="first")
        frame, flags, rows = frame[~dup], flags[~dup], rows[~dup]
    step_h = np.diff(_ns(frame.index)) / 3.6e12
    # 1.5 steps, not 1: loggers jitter by seconds, and a missing row doubles the step
    median_h = float(np.median(step_h)) if step_h.size else 0.0
    gaps = np.flatnonzero(step_h > 1.5 * median_h) if step_h.size else step_h
    if gaps.size:
        problems.append((rows[gaps[0] + 1], ts_cell, f"{step_h[gaps[0]]:g} h after row {rows[gaps[0]]} "
                         f"where the median step is {median_h:g} h (missing data); "
                         "use --bad-rows fill or skip to accept gaps"))
    if policy == "fail" and problems:
        row, cell, why = min(problems, key=lambda p: p[0])
        raise InputError(where, f"row {row}, column {cell!r}", why)
    row_bad = flags.any(axis=1).to_numpy()
    counts = [(bad_time.sum(), "rows with unreadable timestamps dropped"),
              ((t[back] < run_max[back - 1]).sum(), "rows out of time order sorted"),
              (dup.sum(), "rows with repeated timestamps dropped (kept the first)"),
              (gaps.size, f"gaps in the time step counted (largest {step_h.max(initial=0):g} h)")]
    if policy == "fill":
        for name in frame:
            mask = flags[name].to_numpy()
            filled = frame[name].mask(mask).interpolate(method="time", limit_area="inside")
            filled[_long_runs(mask, FILL_LIMIT)] = np.nan
            frame[name] = filled
            counts.append(((mask & filled.notna().to_numpy()).sum(),
                           f"{name} values filled by linear interpolation in time"))
        row_bad = frame.isna().any(axis=1).to_numpy()
        counts.append((row_bad.sum(), f"rows dropped that could not be filled (runs over {FILL_LIMIT} rows, or at an end)"))
    else:
        counts.append((row_bad.sum(), "rows with missing or impossible values skipped"))
    if row_bad.any():
        frame = frame[~row_bad]
    if len(frame) < 2:
        raise InputError(where, None, "has fewer than 2 usable rows")
    for name in IRRADIANCE:
        if name in frame:
            # a pyranometer's night offset, not light leaving the plane
            small = (frame[name] < 0).to_numpy()
            frame.loc[small, name] = 0.0
            counts.append((small.sum(), f"small negative {name} values set to 0"))
    frame.index.name = "timestamp"
    frame.attrs["notes"] = notes + [f"{int(n)} {text}" for n, text in counts if n]
    frame.attrs["step_h"] = float(np.median(np.diff(_ns(frame.index)))) / 3.6e12 if row_bad.any() else median_h
    return frame


def _guess_unit(where, name, cell, v, days, notes):
    """A column without a unit is SI; refuse one that cannot be, naming the likely unit."""
    def state(unit):
        return (f"it looks like {unit}: state the unit in the header ('{name} [{unit}]') or with "
                f"--column '{name}={_split_unit(cell)[0]} ({unit})'")

    if name in IRRADIANCE:
        peak = np.nanmax(v)
        # Sunlight reaches hundreds of W/m2 on any day; a whole file under 2 is kW/m2.
        if 0 < peak <= 2:
            raise InputError(where, f"column {cell!r}", f"never exceeds {peak:g}, impossible for sunlight in "
                             f"W/m2; {state('kW/m2')}")
        daily = pd.Series(v).groupby(days).max()
        median = daily[daily > 0].median()
        if median > BOUNDS[name][1]:
            raise InputError(where, f"column {cell!r}", f"median daily maximum {median:g} is neither "
                             f"W/m2 nor kW/m2; give the unit in the header, e.g. '{name} [W/m2]'")
        if 2 < peak < 100 and name != "dni":
            notes.append(f"{name}: peaks at only {peak:g} W/m2 over the whole file; check the unit")
    if name == "temp_air":
        median, top = np.nanmedian(v), np.nanmax(v)
        # No climate has a median air temperature above about 40 degC.
        if median > 45 and top > BOUNDS["temp_air"][1]:
            unit = "K" if np.nanmin(v) > 200 else "degF"
            raise InputError(where, f"column {cell!r}", f"median {median:g}, maximum {top:g}: above any air "
                             f"temperature in degC; {state(unit)}")
    return 1.0, 0.0


def _ns(times) -> np.ndarray:
    # pandas may store microseconds or nanoseconds; the gap arithmetic wants one
    return pd.DatetimeIndex(times).as_unit("ns").asi8


def _long_runs(mask: np.ndarray, limit: int) -> np.ndarray:
    s = pd.Series(mask)
    length = s.groupby((s != s.shift()).cumsum()).transform("size").to_numpy()
    return mask & (length > limit)


def _is_tmy3(data: bytes) -> bool:
    try:
        first = data[:4096].split(b"\n", 1)[0].decode("latin-1")
        fields = next(csv.reader([first]))
        [float(x) for x in fields[3:7]]
    except (StopIteration, ValueError):
        return False
    return len(fields) == 7 and fields[0].strip().isdigit()

