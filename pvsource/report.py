"""Writing a season study to a folder: tables, summary, figures and one HTML report.

Every file is written under a temporary name and renamed into place, so an
interrupted run never leaves a half-written file under a real name. The folder
itself (lock, clash checks, run.json) is :mod:`pvsource.outfolder`'s job.
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np

from pvsource import plots
from pvsource.checks import design_checks
from pvsource.curves import array_curves, thevenin_at
from pvsource.files import atomic_write, write_text
from pvsource.report_page import render_page
from pvsource.season import SeasonResult, clock_ns, hourly_table
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
    source.
    """
    if not len(steps):
        return []
    p_mp = steps["groups_p_mp_w"].to_numpy(float)
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
    """The array's I-V curves at telling steps, with the operating point and its Thevenin tangent."""
    picked = telling_hours(steps, count)
    if not picked:
        return []
    rows = steps.iloc[[k for k, _ in picked]]
    names = [g.name for g in system.groups]
    g = rows[[f"group_{n}_irradiance_w_m2" for n in names]].to_numpy(float)
    t = rows[[f"group_{n}_cell_temp_c" for n in names]].to_numpy(float)
    found = array_curves(system, g, t)
    _, tangent = thevenin_at(system, g, t, rows["v"].to_numpy(float))
    return [{"label": f"{why}: {steps.index[k].strftime('%Y-%m-%d %H:%M')}, {g[n].mean():.0f} W/m², "
                      f"cells {t[n].mean():.0f} °C",
             "v": found.v[n], "i": found.i[n], "p": found.p[n], "v_op": float(rows["v"].iloc[n]),
             "i_op": float(rows["i"].iloc[n]), "e_th_v": float(tangent.e_v[n]), "r_th_ohm": float(tangent.r_ohm[n])}
            for n, (k, why) in enumerate(picked)]


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


def write_csv(path, frame) -> None:
    """A time-indexed frame as CSV, through pyarrow's compiled writer.

    pandas' own ``to_csv`` formats every number in Python, about ten times
    slower. The first column is the index as ISO 8601 text with its offset;
    numbers are written in their shortest round-trip form; NaN is an empty cell.
    """
    import pyarrow as pa
    from pyarrow import csv as pa_csv

    columns = {frame.index.name or "timestamp": pa.array(iso_stamps(frame.index))}
    for name in frame.columns:
        columns[str(name)] = pa.array(frame[name].to_numpy(), from_pandas=True)
    safe = all(c.isprintable() and not set(c) & set(',"') for c in columns)
    options = pa_csv.WriteOptions(quoting_header="none" if safe else "needed")
    pa_csv.write_csv(pa.table(columns), path, write_options=options)


def write_report(out: Path, system: System, result: SeasonResult, weather, steps_csv: bool = False) -> list[Path]:
    """Tables, summary, figures and the HTML report into ``out`` (already prepared).

    ``steps.parquet`` (every step) and ``hourly.csv`` (:func:`pvsource.season.hourly_table`)
    are always written; the per-step ``steps.csv``, large at short steps, only with ``steps_csv``.
    """
    out = Path(out)
    steps, summary = result.steps, result.summary
    written = []
    table = steps.rename_axis("timestamp")
    # Dictionary encoding and statistics pay for themselves only on few
    # distinct values: on a year of floats they cost most of the write and
    # leave the file larger.
    labels = [c for c in table.columns if table[c].dtype.kind not in "fb"]
    written.append(atomic_write(out / "steps.parquet", lambda tmp: table.to_parquet(
        tmp, use_dictionary=labels, write_statistics=["timestamp"])))
    hourly = hourly_table(steps, summary["step_h"])
    written.append(atomic_write(out / "hourly.csv", lambda tmp: write_csv(tmp, hourly)))
    if steps_csv:
        written.append(atomic_write(out / "steps.csv", lambda tmp: write_csv(tmp, table)))
    written.append(write_text(out / "summary.json", json.dumps(json_ready(summary), indent=2, allow_nan=False)))
    monthly = json_ready(summary["monthly"])
    header = list(monthly[0]) if monthly else []
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
        written.append(plots.soc_figure(steps, out / "state_of_charge.png"))
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
