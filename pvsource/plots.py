"""Figures. Each function takes results and a path, draws with matplotlib's
non-interactive backend, and writes the file atomically (temporary name,
then rename), so a failed draw never leaves half a picture."""

from __future__ import annotations

import textwrap
from pathlib import Path

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
from matplotlib import ticker  # noqa: E402
import numpy as np  # noqa: E402

from pvsource.files import atomic_write  # noqa: E402

# A palette of our own: slate for exact results, amber for the linear model.
EXACT = "#2f4858"
LINEAR = "#d08c2a"
MARK = "#7a9e7e"


def save_atomically(fig, path) -> Path:
    """Write a figure to ``path`` through a temporary file in the same folder."""
    path = Path(path)
    try:
        # A tight box keeps labels and legends that sit outside the axes.
        return atomic_write(path, lambda tmp: fig.savefig(tmp, dpi=130, bbox_inches="tight", pad_inches=0.12),
                            suffix=path.suffix or ".png")
    finally:
        plt.close(fig)


def _plain(value, _pos=None) -> str:
    """A tick label as a plain number: 0.5, 1, 20, 1500 (never 1.1 x 10^0)."""
    return f"{value:g}" if abs(value) < 1e6 else f"{value:.3g}"


def _plain_axis(axis, log: bool, decades: float = 1.0) -> None:
    """Plain tick labels; on a log axis, majors at 1, 2 and 5 of each decade (at 1 alone beyond
    two decades, where 2 and 5 would crowd) and no minor labels."""
    if log:
        subs = (1.0, 2.0, 5.0) if decades <= 2.0 else (1.0,)
        axis.set_major_locator(ticker.LogLocator(base=10.0, subs=subs))
        axis.set_minor_formatter(ticker.NullFormatter())
    axis.set_major_formatter(ticker.FuncFormatter(_plain))


def _marked_line(ax, x, label: str, colour: str, style: str, right: bool) -> None:
    """A vertical line with its label along it, on the side ``right`` (or left) of the line."""
    ax.axvline(x, color=colour, lw=1.0, ls=style)
    # Low on the axes, where the curves (power from zero, efficiency near the top) leave room.
    ax.text(x, 0.03, f" {label} ", transform=ax.get_xaxis_transform(), rotation=90,
            ha="left" if right else "right", va="bottom", fontsize=7.5, color=colour,
            bbox={"facecolor": "white", "edgecolor": "none", "alpha": 0.8, "pad": 0.5})


# Keyed by the canonical variable names (pvsource.names), the ones a sweep's design record carries.
SWEEP_AXIS_WORDS = {"load_resistance_ohm": "load resistance [ohm]", "bank_emf_v": "bank resting voltage (EMF) [V]",
                    "bank_class_v": "nominal bank voltage [V]", "soc": "state of charge [-]",
                    "modules_per_string": "modules per string", "irradiance_w_m2": "irradiance [W/m²]",
                    "cell_temp_c": "cell temperature [°C]"}


def sweep_axes(rows, design: dict, title: str = ""):
    """The sweep figure, drawn but not saved: two panels side by side.

    Left, delivered power and efficiency against the swept value; right, the
    same against the matching ratio m = (V/I) / R_th, with the linear
    (Thevenin) model of the design point, P = E^2 m / (R (1+m)^2) and
    efficiency m / (1+m), dashed. A line marks m = 1 (maximum power transfer)
    and another the design point, each labelled along itself.
    """
    values = list(rows["value"])
    categorical = any(isinstance(v, str) for v in values)
    x = np.arange(len(values), dtype=float) if categorical else np.asarray(values, float)
    m = np.asarray(rows["matching_ratio"], float)
    delivered = np.asarray(rows["delivered_w"], float)
    array_p = np.asarray(rows["p"], float)
    eff = 100.0 * np.asarray(rows["efficiency"], float)
    fig, (ax_v, ax_m) = plt.subplots(1, 2, figsize=(10.5, 4.4), gridspec_kw={"wspace": 0.42})
    twins = (ax_v.twinx(), ax_m.twinx())

    # Against the swept value.
    ax_v.plot(x, delivered, "o-", color=EXACT, ms=3.5, lw=1.5, label="delivered power, exact")
    ax_v.plot(x, array_p, "-", color=EXACT, lw=0.9, alpha=0.55, label="power at the array terminals, exact")
    twins[0].plot(x, eff, "s-", color=MARK, ms=3, lw=1.2, label="efficiency (delivered / generated), exact")
    variable = design.get("variable", "")
    ax_v.set_xlabel(SWEEP_AXIS_WORDS.get(variable, f"conductor size of {variable[5:]!r}" if variable.startswith(
        "size:") else variable))
    if categorical:
        crowded = len(values) > 5
        ax_v.set_xticks(x, [str(v).replace("mm2", "mm²") for v in values], rotation=30 if crowded else 0,
                        ha="right" if crowded else "center")
    else:
        log = design.get("variable") == "load_resistance_ohm"
        if log:
            ax_v.set_xscale("log")
        _plain_axis(ax_v.xaxis, log, np.log10(np.nanmax(x) / np.nanmin(x)) if log else 1.0)
    where = design.get("value")
    if where is not None:
        where_x = float(values.index(where)) if categorical and where in values else (
            None if categorical else float(where))
        if where_x is not None and np.nanmin(x) <= where_x <= np.nanmax(x):
            _marked_line(ax_v, where_x, "design point", LINEAR, ":", right=True)
    # Where the sweep passes m = 1, if it does: the swept value that matches the array.
    finite = np.isfinite(m) & (m > 0)
    crossing = np.flatnonzero(finite[:-1] & finite[1:] & (np.sign(np.log(np.where(finite, m, 1.0)))[:-1]
                                                              * np.sign(np.log(np.where(finite, m, 1.0)))[1:] < 0))
    if crossing.size and not categorical:
        k = int(crossing[0])
        lm = np.log(m[k:k + 2])
        at = x[k] + (x[k + 1] - x[k]) * (0.0 - lm[0]) / (lm[1] - lm[0])
        _marked_line(ax_v, at, "m = 1", "#4d6b50", "--", right=False)
    ax_v.set_title("against the swept value", fontsize=9.5, loc="left")

    # Against the matching ratio.
    ok = finite & (m < 1e6)
    order = np.argsort(m[ok])
    mm = m[ok][order]
    ax_m.plot(mm, delivered[ok][order], "o-", color=EXACT, ms=3.5, lw=1.5)
    ax_m.plot(mm, array_p[ok][order], "-", color=EXACT, lw=0.9, alpha=0.55)
    twins[1].plot(mm, eff[ok][order], "s-", color=MARK, ms=3, lw=1.2)
    lo, hi = (min(mm.min(), 1.0, design["matching_ratio"]), max(mm.max(), 1.0, design["matching_ratio"])) \
        if mm.size else (0.1, 10.0)
    lo, hi = lo / 1.3, hi * 1.3
    grid = np.geomspace(lo, hi, 300)
    e, r = design["e_v"], design["r_ohm"]
    ax_m.plot(grid, e * e * grid / (r * (1 + grid) ** 2), "--", color=LINEAR, lw=1.4,
              label="power at the array terminals, linear model of the design point")
    twins[1].plot(grid, 100 * grid / (1 + grid), "--", color="#4d6b50", lw=1.2,
                  label="efficiency of the linear model, m / (1 + m)")
    log_m = hi / lo > 4.0
    if log_m:
        ax_m.set_xscale("log")
    ax_m.set_xlim(lo, hi)
    _plain_axis(ax_m.xaxis, log_m, np.log10(hi / lo))
    design_right = design["matching_ratio"] >= 1.0
    _marked_line(ax_m, 1.0, "m = 1", "#4d6b50", "--", right=not design_right)
    _marked_line(ax_m, design["matching_ratio"], "design point", LINEAR, ":", right=design_right)
    ax_m.set_xlabel("matching ratio m = (V/I) / R_th")
    ax_m.set_title("against the matching ratio", fontsize=9.5, loc="left")

    for ax, twin in zip((ax_v, ax_m), twins):
        ax.set_ylabel("power [W]")
        twin.set_ylabel("efficiency [%]", color="#4d6b50")
        twin.set_ylim(0, 102)
        ax.set_ylim(bottom=0)
        _plain_axis(ax.yaxis, False)
        _plain_axis(twin.yaxis, False)
        ax.grid(True, color="#e3e3e3", lw=0.6)
        ax.spines[["top"]].set_visible(False)
        twin.spines[["top"]].set_visible(False)
    handles = [*ax_v.get_legend_handles_labels()[0], *twins[0].get_legend_handles_labels()[0],
               *ax_m.get_legend_handles_labels()[0], *twins[1].get_legend_handles_labels()[0]]
    fig.legend(handles, [h.get_label() for h in handles], loc="upper center", bbox_to_anchor=(0.5, 0.0), ncol=2,
               fontsize=7.5, frameon=False)
    top = 0.99
    if design.get("replaced"):
        # Under the title, above the panels: the reader must know the swept system is not the file's.
        note = textwrap.fill(f"Replaced for this sweep: {design['replaced']}.", 150)
        fig.text(0.06, top, note, fontsize=7.5, color="#b3261e", ha="left", va="bottom")
        top += 0.036 * (note.count("\n") + 1) + 0.01
    fig.suptitle(title or f"sweep over {design.get('variable', '')}", fontsize=10, x=0.06, ha="left", y=top,
                 va="bottom")
    return fig


def sweep_figure(rows, design: dict, path, title: str = "") -> Path:
    """The sweep figure (:func:`sweep_axes`) written to ``path``: PNG, SVG or PDF by its suffix."""
    return save_atomically(sweep_axes(rows, design, title), path)


# Season figures: one palette throughout, ordered from what reached the bank
# to what never left the curve.
SEASON_PARTS = (
    ("energy_stored_kwh", "stored", "#2f4858"),
    ("bank_internal_loss_kwh", "bank resistance", "#55707f"),
    ("controller_loss_kwh", "controller", "#86bbd8"),
    ("wiring_loss_kwh", "cables", "#d08c2a"),
    ("curtailed_kwh", "curtailed by the controller", "#f2c57c"),
    ("mismatch_kwh", "left on the curves", "#dcdcdc"),
)


def _month_label(month: str) -> str:
    """"2025-03" -> "Mar"; anything else unchanged."""
    names = ("Jan", "Feb", "Mar", "Apr", "May", "Jun", "Jul", "Aug", "Sep", "Oct", "Nov", "Dec")
    head, _, tail = month.partition("-")
    return names[int(tail) - 1] if tail.isdigit() and 1 <= int(tail) <= 12 else month


# The load's sources with a generator, in the order they are drawn on.
LOAD_PARTS = (
    ("bank", "load supplied by the array and bank", "#7a9e7e"),
    ("generator_load_kwh", "load carried by the generator", "#8c5a3c"),
    ("generator_charge", "generator charging the bank", "#d9b99b"),
    ("unmet_load_kwh", "load not met", "#b3261e"),
)


def monthly_energy_figure(summary: dict, path) -> Path:
    """Each month's energy at the groups' MPPs, split into where it went (stacked columns).

    With a generator, a second panel splits each month's load by where it
    came from (the bank, the generator, or nowhere) and adds what the
    generator put into the bank, each month's run hours written above it.
    """
    months = summary["monthly"]
    labels = [_month_label(m["month"]) for m in months]
    if months and "generator_hours" in months[0]:
        fig, (ax, ax_gen) = plt.subplots(2, 1, figsize=(8.0, 8.4), gridspec_kw={"hspace": 0.85})
        _generator_panel(ax_gen, months, labels)
    else:
        fig, ax = plt.subplots(figsize=(8.0, 4.2))
    parts = SEASON_PARTS
    if "min_soc" not in summary:
        # No bank: what reached the end of the feeder went to the load.
        parts = (("energy_delivered_kwh", "delivered to the load", SEASON_PARTS[0][2]), *SEASON_PARTS[1:])
    columns = []
    for key, label, colour in parts:
        if key == "mismatch_kwh":
            values = np.array([max(m["energy_mpp_kwh"] - m["energy_generated_kwh"] - (m["curtailed_kwh"] or 0.0), 0.0)
                               for m in months])
        else:
            values = np.array([m.get(key) or 0.0 for m in months])
        columns.append((values, label, colour, None))
    _stacked_columns(ax, labels, columns, "Where each month's available energy went", 3)
    return save_atomically(fig, path)


def _stacked_columns(ax, labels: list, parts: list, title: str, ncol: int) -> np.ndarray:
    """Stacked columns per month from (values, label, colour, hatch) parts; the columns' tops [kWh]."""
    bottom = np.zeros(len(labels))
    for values, label, colour, hatch in parts:
        # A part that never happened stays out of the legend.
        ax.bar(labels, values, bottom=bottom, color=colour, width=0.72, label=label if values.any() else None,
               edgecolor="white", lw=0.4, hatch=hatch)
        bottom += values
    ax.set_ylabel("energy [kWh]")
    ax.set_xlabel("month")
    ax.spines[["top", "right"]].set_visible(False)
    ax.grid(True, axis="y", color="#e3e3e3", lw=0.6)
    # Under the axes: the columns fill the plot, a legend inside would cover them.
    ax.legend(fontsize=7.5, frameon=False, ncol=ncol, loc="upper center", bbox_to_anchor=(0.5, -0.2))
    ax.set_title(title, fontsize=10, loc="left")
    return bottom


def _generator_panel(ax, months: list, labels: list) -> None:
    """Each month's load by source and the generator's charge into the bank, run hours above each column."""
    def part(m, key):
        if key == "bank":
            return max((m.get("load_kwh") or 0.0) - (m.get("unmet_load_kwh") or 0.0) - m["generator_load_kwh"], 0.0)
        if key == "generator_charge":
            return m["generator_stored_kwh"] + m["generator_bank_loss_kwh"]
        return m.get(key) or 0.0

    tops = _stacked_columns(ax, labels, [(np.array([part(m, key) for m in months]), label, colour,
                                          "//" if key == "generator_charge" else None)
                                         for key, label, colour in LOAD_PARTS],
                            "The load and the generator's share (its run hours above each month)", 2)
    for x, (top, m) in enumerate(zip(tops, months)):
        if m["generator_hours"] > 0:
            ax.text(x, top, f"{m['generator_hours']:.0f} h", ha="center", va="bottom", fontsize=7, color="#5b3a26")
    ax.set_ylim(0, max(float(tops.max()), 1e-9) * 1.12)


def wiring_loss_heatmap(steps, path) -> Path:
    """Cable loss as a share of generated power, by hour of day and month."""
    gen = steps["generated_w"].clip(lower=0)
    frame = steps.assign(hour=steps.index.hour, month=steps.index.month, gen=gen)
    grouped = frame.groupby(["month", "hour"])[["cable_loss_w", "gen"]].sum()
    # Dark hours carry rounding-level powers (1e-50 W); a share of nothing is left blank.
    lit = grouped["gen"] > 1e-6 * max(float(grouped["gen"].max()), 0.0)
    share = (grouped["cable_loss_w"] / grouped["gen"].where(lit)).unstack("hour")
    share = share.reindex(index=range(1, 13), columns=range(24))
    fig, ax = plt.subplots(figsize=(8.0, 3.8))
    im = ax.imshow(100 * share.to_numpy(), aspect="auto", origin="lower", cmap="YlOrBr",
                   extent=(-0.5, 23.5, 0.5, 12.5))
    fig.colorbar(im, ax=ax, label="cable loss [% of generated]")
    ax.set_xlabel("hour of day")
    ax.set_ylabel("month")
    ax.set_yticks(range(1, 13))
    ax.set_title("Cable loss by hour and month", fontsize=10, loc="left")
    return save_atomically(fig, path)


#: Points drawn of a duration curve; more than a figure's width in pixels.
DURATION_POINTS = 4000


def charge_duration_figure(steps, step_h: float, path) -> Path:
    """Charge current sorted from highest: how many hours the bank sees at least each current."""
    current = np.sort(steps["charge_current_a"].to_numpy())[::-1]
    hours = np.arange(1, len(current) + 1) * step_h
    if len(current) > DURATION_POINTS:
        # The curve falls monotonically: a few thousand of its points draw it
        # to the pixel, and a million would cost a path of a million vertices.
        keep = np.unique(np.linspace(0, len(current) - 1, DURATION_POINTS).round().astype(np.int64))
        current, hours = current[keep], hours[keep]
    fig, ax = plt.subplots(figsize=(7.0, 3.6))
    ax.plot(hours, current, color=EXACT, lw=1.4)
    ax.fill_between(hours, 0, current, color=EXACT, alpha=0.12)
    ax.set_xlabel("hours at or above this current")
    ax.set_ylabel("charge current [A]")
    ax.set_xlim(0, max(hours[current > 0].max() * 1.05 if (current > 0).any() else 1, 1))
    ax.spines[["top", "right"]].set_visible(False)
    ax.grid(True, color="#e3e3e3", lw=0.6)
    ax.set_title("Charge current duration", fontsize=10, loc="left")
    return save_atomically(fig, path)


def soc_figure(steps, path, min_soc: float | None = None) -> Path:
    """State of charge through the span: the daily range as a band and the daily mean.

    ``min_soc``: where the low-voltage disconnect cuts the loads off, drawn as a dashed line.
    """
    daily = steps["soc"].groupby(steps.index.normalize())
    lo, hi, mean = daily.min(), daily.max(), daily.mean()
    fig, ax = plt.subplots(figsize=(8.0, 3.4))
    ax.fill_between(lo.index, 100 * lo, 100 * hi, color=MARK, alpha=0.35, lw=0, label="daily range")
    ax.plot(mean.index, 100 * mean, color=EXACT, lw=1.0, label="daily mean")
    if min_soc:
        ax.axhline(100 * min_soc, color=LINEAR, lw=0.9, ls="--", label=f"loads cut off ({100 * min_soc:.0f} %)")
    ax.set_ylim(0, 102)
    ax.set_ylabel("state of charge [%]")
    ax.spines[["top", "right"]].set_visible(False)
    ax.legend(fontsize=7.5, frameon=False, ncol=3, loc="lower right", bbox_to_anchor=(1.0, 1.0))
    ax.set_title("State of charge", fontsize=10, loc="left")
    return save_atomically(fig, path)


def iv_figure(curves: list, path) -> Path:
    """The array's I-V and P-V curves at chosen steps, each operating point with its Thevenin tangent.

    ``curves`` holds dicts with ``label``, ``v``, ``i`` and ``p`` (arrays), the
    point ``v_op``, ``i_op`` and the tangent's ``e_th_v`` and ``r_th_ohm``. The
    tangent I = (E_th - V) / R_th is the linear model the tool reasons with:
    it touches the curve at the point and shows how far from it the model holds.
    """
    fig, (ax_i, ax_p) = plt.subplots(1, 2, figsize=(9.0, 4.4), gridspec_kw={"width_ratios": [3, 2], "wspace": 0.28})
    shades = plt.get_cmap("cividis")(np.linspace(0.05, 0.8, max(len(curves), 1)))
    i_top = max((float(np.nanmax(c["i"])) for c in curves), default=1.0) * 1.08 or 1.0
    v_top = max((float(np.nanmax(c["v"])) for c in curves), default=1.0) * 1.04 or 1.0
    for c, colour in zip(curves, shades):
        ax_i.plot(c["v"], c["i"], color=colour, lw=1.5, label=c["label"])
        if np.isfinite(c["e_th_v"]) and np.isfinite(c["r_th_ohm"]) and c["r_th_ohm"] > 0:
            # The tangent over the span where it stays on the axes.
            v_line = np.linspace(max(c["e_th_v"] - c["r_th_ohm"] * i_top, 0.0), min(c["e_th_v"], v_top), 50)
            ax_i.plot(v_line, (c["e_th_v"] - v_line) / c["r_th_ohm"], "--", color=colour, lw=0.9)
        ax_i.plot([c["v_op"]], [c["i_op"]], "o", color=colour, mec="black", mew=0.6, ms=6, zorder=5)
        ax_p.plot(c["v"], c["p"], color=colour, lw=1.5)
        ax_p.plot([c["v_op"]], [c["v_op"] * c["i_op"]], "o", color=colour, mec="black", mew=0.6, ms=6, zorder=5)
    ax_i.plot([], [], "--", color="#555555", lw=0.9, label="Thevenin tangent at the operating point")
    ax_i.plot([], [], "o", color="white", mec="black", mew=0.6, ms=6, label="operating point")
    ax_i.set_ylim(0, i_top)
    ax_i.set_xlim(0, v_top)
    ax_p.set_ylim(bottom=0)
    ax_p.set_xlim(0, v_top)
    ax_i.set_xlabel("array voltage [V]")
    ax_i.set_ylabel("array current [A]")
    ax_p.set_xlabel("array voltage [V]")
    ax_p.set_ylabel("array power [W]")
    for ax in (ax_i, ax_p):
        ax.spines[["top", "right"]].set_visible(False)
        ax.grid(True, color="#e3e3e3", lw=0.6)
    ax_i.set_title("I-V at the array terminals", fontsize=10, loc="left")
    ax_p.set_title("P-V", fontsize=10, loc="left")
    # The legend goes under the axes, never over a curve.
    fig.legend(*ax_i.get_legend_handles_labels(), loc="lower center", ncol=2, fontsize=7.5, frameon=False)
    fig.subplots_adjust(bottom=0.3, top=0.9, left=0.08, right=0.98)
    return save_atomically(fig, path)


def pareto_figure(ranked, path) -> Path:
    """Lifetime cost against delivered energy for every feasible combination, the front joined."""
    ok = ranked[~ranked["excluded"]]
    fig, ax = plt.subplots(figsize=(7.0, 4.2))
    ax.scatter(ok["energy_delivered_kwh_per_year"], ok["lifetime_cost"], s=22, color="#9aa9b2", label="combination")
    front = ok[ok["pareto"]].sort_values("energy_delivered_kwh_per_year")
    ax.plot(front["energy_delivered_kwh_per_year"], front["lifetime_cost"], "o-", color=LINEAR, ms=6, lw=1.4,
            label="no other is both cheaper and delivers more")
    ax.set_xlabel("energy delivered per year [kWh]")
    ax.set_ylabel("lifetime cost (metal, bank, lost energy, fuel, unmet load)")
    ax.spines[["top", "right"]].set_visible(False)
    ax.grid(True, color="#e3e3e3", lw=0.6)
    ax.legend(fontsize=7.5, frameon=False, ncol=2, loc="upper center", bbox_to_anchor=(0.5, -0.14))
    ax.set_title("Design combinations: cost against energy", fontsize=10, loc="left")
    return save_atomically(fig, path)
