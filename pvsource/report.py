"""Writing a season study to a folder: tables, summary, figures and one HTML report.

Every file is written under a temporary name and renamed into place, so an
interrupted run never leaves a half-written file under a real name. The folder
itself (lock, clash checks, run.json) is :mod:`pvsource.outfolder`'s job.
"""

from __future__ import annotations

import json
import math
import os
from pathlib import Path

import numpy as np

from pvsource import plots
from pvsource.checks import design_checks
from pvsource.curves import array_curves, thevenin_at
from pvsource import files
from pvsource.files import atomic_write, write_text
from pvsource.report_page import render_page
from pvsource.season import SeasonResult, clock_ns, hourly_table, run_season, step_hours
from pvsource.system import System

FIGURES = ("monthly_energy.png", "wiring_loss_heatmap.png", "charge_duration.png", "state_of_charge.png",
           "iv_curves.png")


def json_ready(obj):
    """NaN and infinities to None, numpy scalars to Python, recursively."""
    if isinstance(obj, dict):
        return {str(k): json_ready(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [json_ready(v) for v in obj]
    if isinstance(obj, (np.floating, float)):
        return float(obj) if math.isfinite(obj) else None
    if isinstance(obj, np.integer):
        return int(obj)
    if isinstance(obj, np.bool_):
        return bool(obj)
    return obj


OUTPUT_NAMES = ("steps.parquet", "steps.csv", "hourly.csv", "summary.json", "monthly.csv", "report.html", *FIGURES)




def telling_hours(steps, count: int = 4) -> list[tuple[int, str]]:
    """Rows of a study worth drawing the array's curve at, each with why.

    The sunniest step; the hottest and the coldest of the bright steps (at
    least 60 % of the sunniest), where the curve's knee moves furthest; and a
    dim step (nearest a quarter of the sunniest), where a string is a current
    source. With a bank, only steps where the charge current is at least 5 %
    of the study's peak are picked where there are any: a full bank holds the
    array near open circuit, where its curve tells little of the operating point.
    """
    if not len(steps):
        return []
    p_mp = steps["groups_p_mp_w"].to_numpy(float)
    if "charge_current_a" in steps:
        current = steps["charge_current_a"].to_numpy(float)
        working = current > 0.05 * np.nanmax(current, initial=0.0)  # a real share of the study's charge
        if working.any():
            p_mp = np.where(working, p_mp, np.nan)
    if not np.isfinite(p_mp).any() or np.nanmax(p_mp) <= 0:
        return []
    top = float(np.nanmax(p_mp))
    temps = steps[[c for c in steps.columns if c.startswith("group_") and c.endswith("_cell_temp_c")]]
    mean_t = temps.to_numpy(float).mean(axis=1)
    bright = np.flatnonzero(p_mp >= 0.6 * top)
    picks = [(int(np.nanargmax(p_mp)), "sunniest"),
             (int(bright[np.argmax(mean_t[bright])]), "hottest bright"),
             (int(bright[np.argmin(mean_t[bright])]), "coldest bright"),
             (int(np.nanargmin(np.abs(np.where(p_mp > 0, p_mp, np.inf) - 0.25 * top))), "dim")]
    seen, out = set(), []
    for k, why in picks:
        if k not in seen:
            seen.add(k)
            out.append((k, why))
    return out[:count]


def iv_curves(system: System, steps, count: int = 4) -> list:
    """The array's I-V curves at telling steps, with the operating point and its Thevenin tangent.

    With several controllers each has its own array and bus: each
    controller's curve at the sunniest and the dim step (``ctrl_<name>_v``, ``_i_a``).
    """
    from pvsource.operating import controller_column

    several = system.several_controllers
    picked = telling_hours(steps, count)
    if several:
        picked = [p for p in picked if p[1] in ("sunniest", "dim")]
    if not picked:
        return []
    rows = steps.iloc[[k for k, _ in picked]]
    out = []
    for assigned, part in zip(system.controllers, system.parts()) if several else [(None, system)]:
        names = [g.name for g in part.groups]
        g = rows[[f"group_{n}_irradiance_w_m2" for n in names]].to_numpy(float)
        t = rows[[f"group_{n}_cell_temp_c" for n in names]].to_numpy(float)
        v_op, i_op = (rows[controller_column(assigned.name, "v")], rows[controller_column(assigned.name, "i_a")]) \
            if several else (rows["v"], rows["i"])
        found = array_curves(part, g, t)
        _, tangent = thevenin_at(part, g, t, v_op.to_numpy(float))
        who = f"{assigned.name}, " if several else ""
        out.extend({"label": f"{who}{why}: {steps.index[k].strftime('%Y-%m-%d %H:%M')}, {g[n].mean():.0f} W/m², "
                             f"cells {t[n].mean():.0f} °C",
                    "v": found.v[n], "i": found.i[n], "p": found.p[n], "v_op": float(v_op.iloc[n]),
                    "i_op": float(i_op.iloc[n]), "e_th_v": float(tangent.e_v[n]),
                    "r_th_ohm": float(tangent.r_ohm[n])} for n, (k, why) in enumerate(picked))
    return out


def iso_stamps(index) -> np.ndarray:
    """Time stamps as ISO 8601 text with their UTC offset (``2025-01-01T00:00:00+01:00``), vectorised."""
    wall_ns, offset_ns = clock_ns(index)
    whole = not (wall_ns % 1_000_000_000).any()
    text = np.datetime_as_string(wall_ns.astype("datetime64[ns]"), unit="s" if whole else "ns")
    if index.tz is None:
        return text
    minutes, pick = np.unique(offset_ns // 60_000_000_000, return_inverse=True)
    offsets = np.array([f"{'+' if m >= 0 else '-'}{abs(m) // 60:02d}:{abs(m) % 60:02d}" for m in minutes])
    return np.char.add(text, offsets[pick])


def _csv_table(frame):
    """A time-indexed frame as an Arrow table for CSV: the index first, as ISO 8601 text with its offset."""
    import pyarrow as pa

    columns = {frame.index.name or "timestamp": pa.array(iso_stamps(frame.index))}
    for name in frame.columns:
        columns[str(name)] = pa.array(frame[name].to_numpy(), from_pandas=True)
    return pa.table(columns)


def _csv_options(table):
    from pyarrow import csv as pa_csv

    safe = all(c.isprintable() and not set(c) & set(',"') for c in table.column_names)
    return pa_csv.WriteOptions(quoting_header="none" if safe else "needed")


def write_csv(path, frame) -> None:
    """A time-indexed frame as CSV, through pyarrow's compiled writer.

    pandas' own ``to_csv`` formats every number in Python, about ten times
    slower. The first column is the index as ISO 8601 text with its offset;
    numbers are written in their shortest round-trip form; NaN is an empty cell.
    """
    from pyarrow import csv as pa_csv

    table = _csv_table(frame)
    pa_csv.write_csv(table, path, write_options=_csv_options(table))


class StepsWriter:
    """Streams a season's steps to disk a chunk at a time, under temporary names until :meth:`finish`.

    ``steps.parquet`` gets one row group per chunk, ``steps.csv`` (only with
    ``steps_csv``) grows by each chunk's rows, and each chunk's clock hours
    (:func:`pvsource.season.hourly_table`) are kept for ``hourly.csv``, so no
    more than one chunk of steps is ever held. Call the writer with each chunk
    in time order; chunks cut at clock hours give the same hours as one table.
    """

    def __init__(self, out, step_h: float, steps_csv: bool = False):
        self.out = Path(out)
        self.step_h = step_h
        names = ("steps.parquet", "steps.csv") if steps_csv else ("steps.parquet",)
        self._tmp = {}
        try:
            for name in names:
                self._tmp[name] = files.create_temporary(self.out / name)
        except BaseException:
            self.discard()
            raise
        self._parquet = self._csv = self._schema = None
        self._hours = []

    def __call__(self, steps) -> None:
        import pyarrow as pa
        import pyarrow.parquet as pq
        from pyarrow import csv as pa_csv

        table = pa.Table.from_pandas(steps.rename_axis("timestamp"), preserve_index=True)
        if self._parquet is None:
            # Dictionary encoding and statistics pay for themselves only on few
            # distinct values: on a year of floats they cost most of the write
            # and leave the file larger.
            labels = [c for c in steps.columns if steps[c].dtype.kind not in "fb"]
            self._schema = table.schema
            self._parquet = pq.ParquetWriter(self._tmp["steps.parquet"], self._schema, use_dictionary=labels,
                                             write_statistics=["timestamp"])
        elif not table.schema.equals(self._schema, check_metadata=False):
            table = table.cast(self._schema)  # e.g. a label column with no value in this chunk
        self._parquet.write_table(table)
        if "steps.csv" in self._tmp:
            rows = _csv_table(steps.rename_axis("timestamp"))
            if self._csv is None:
                self._csv_schema = rows.schema
                self._csv = pa_csv.CSVWriter(self._tmp["steps.csv"], rows.schema, write_options=_csv_options(rows))
            elif not rows.schema.equals(self._csv_schema):
                rows = rows.cast(self._csv_schema)
            self._csv.write_table(rows)
        self._hours.append(hourly_table(steps, self.step_h))

    def hourly(self):
        """The clock hours of every chunk written so far, as one table."""
        import pandas as pd

        return self._hours[0] if len(self._hours) == 1 else pd.concat(self._hours)

    def _close(self) -> None:
        for writer in (self._parquet, self._csv):
            if writer is not None:
                writer.close()
        self._parquet = self._csv = None

    def finish(self) -> list[Path]:
        """Close the files and rename them into place; returns their final paths."""
        if self._schema is None:
            raise ValueError("no steps were written")
        self._close()
        done = []
        for name, tmp in list(self._tmp.items()):
            os.replace(tmp, self.out / name)
            del self._tmp[name]
            done.append(self.out / name)
        return done

    def discard(self) -> None:
        """Close and remove the temporary files (after a failure); the final names are untouched."""
        try:
            self._close()
        finally:
            for tmp in self._tmp.values():
                Path(tmp).unlink(missing_ok=True)
            self._tmp = {}


def write_report(out: Path, system: System, result: SeasonResult, weather, steps_csv: bool = False,
                 streamed: StepsWriter | None = None) -> list[Path]:
    """Tables, summary, figures and the HTML report into ``out`` (already prepared).

    ``steps.parquet`` (every step) and ``hourly.csv`` (:func:`pvsource.season.hourly_table`)
    are always written; the per-step ``steps.csv``, large at short steps, only with ``steps_csv``.
    The steps come from ``streamed``, the writer the study streamed them to
    (:func:`write_season`); without it, ``result.steps`` is written whole.
    """
    out = Path(out)
    summary = result.summary
    if streamed is None:
        streamed = StepsWriter(out, summary["step_h"], steps_csv)
        try:
            streamed(result.steps)
        except BaseException:
            streamed.discard()
            raise
    written = streamed.finish()
    steps = result.steps
    hourly = streamed.hourly()
    written.append(atomic_write(out / "hourly.csv", lambda tmp: write_csv(tmp, hourly)))
    del hourly
    written.append(write_text(out / "summary.json", json.dumps(json_ready(summary), indent=2, allow_nan=False)))
    monthly = [_month_columns(m) for m in json_ready(summary["monthly"])]
    header = _union_in_order(monthly)
    # A limit that did not bind in a month held for no hours in it.
    monthly = [{k: m.get(k, 0.0 if ".hours_by_limit." in k else None) for k in header} for m in monthly]
    csv_text = ",".join(header) + "\n" + "".join(
        ",".join("" if m[k] is None else str(m[k]) for k in header) + "\n" for m in monthly)
    written.append(write_text(out / "monthly.csv", csv_text))
    step_h = summary["step_h"]
    written.append(plots.monthly_energy_figure(summary, out / "monthly_energy.png"))
    written.append(plots.wiring_loss_heatmap(steps, out / "wiring_loss_heatmap.png"))
    figures = ["monthly_energy.png", "wiring_loss_heatmap.png"]
    if "charge_current_a" in steps:
        written.append(plots.charge_duration_figure(steps, step_h, out / "charge_duration.png"))
        figures.append("charge_duration.png")
    if "soc" in steps:
        cut = system.bank.chemistry.min_soc if system.bank is not None else None
        written.append(plots.soc_figure(steps, out / "state_of_charge.png", cut))
        figures.append("state_of_charge.png")
    curves = iv_curves(system, steps)
    if curves:
        written.append(plots.iv_figure(curves, out / "iv_curves.png"))
        figures.append("iv_curves.png")

    t_min, t_max = float(weather["temp_air"].min()), float(weather["temp_air"].max())
    checks = design_checks(system, t_min, t_max)
    page = render_page(system, summary, result.notes, checks,
                       [(name, (out / name).read_bytes()) for name in figures], t_min, t_max)
    written.append(write_text(out / "report.html", page))
    return written


def write_season(out: Path, system: System, weather, *, transposition: str = "perez", steps_csv: bool = False,
                 progress=None) -> tuple[SeasonResult, list[Path]]:
    """Run the season study into ``out``, streaming its steps to disk a chunk at a time.

    Memory follows the chunk (:data:`pvsource.season.CHUNK_ROWS`) and the
    columns kept for the summary and figures, not the whole table of steps.
    If the study fails, nothing is left under a final name.

    Returns
    -------
    (SeasonResult, list of Path)
        The result, whose ``steps`` hold only :func:`pvsource.season.summary_columns`, and the files written.
    """
    writer = StepsWriter(out, step_hours(weather), steps_csv)
    try:
        result = run_season(system, weather, transposition=transposition, progress=progress, each_chunk=writer,
                            keep="summary")
    except BaseException:
        writer.discard()
        raise
    return result, write_report(out, system, result, weather, streamed=writer)


def _month_columns(month: dict) -> dict:
    """One month as a table row with one column per figure.

    Nested figures (alert hours) become ``key.name`` columns; each
    controller's own figures ``controller[name].key``, its hours by limit
    ``controller[name].hours_by_limit.limit``.
    """
    out = {}
    for key, value in month.items():
        if isinstance(value, dict):
            out.update({f"{key}.{name}": x for name, x in value.items()})
        elif isinstance(value, list):
            for item in value:
                for name, x in item.items():
                    if isinstance(x, dict):
                        out.update({f"controller[{item['name']}].{name}.{k}": v for k, v in x.items()})
                    elif name != "name" and not isinstance(x, list):
                        out[f"controller[{item['name']}].{name}"] = x
        else:
            out[key] = value
    return out


def _union_in_order(rows: list[dict]) -> list[str]:
    """Every row's keys once, each new one placed after the key it follows in its row (months differ in limits)."""
    header: list[str] = []
    for row in rows:
        at = 0
        for key in row:
            if key in header:
                at = header.index(key) + 1
            else:
                header.insert(at, key)
                at += 1
    return header
