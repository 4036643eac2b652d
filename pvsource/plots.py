"""Figures. Each function takes results and a path, draws with matplotlib's
non-interactive backend, and writes the file atomically (temporary name,
then rename), so a failed draw never leaves half a picture."""

from __future__ import annotations

from pathlib import Path

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
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


def sweep_figure(rows, design: dict, path, title: str = "") -> Path:
    """Delivered power and efficiency against the matching ratio, exact and linearised.

    Two stacked panels share a logarithmic matching-ratio axis. The exact
    sweep is drawn as points joined by a line; the linear (Thevenin) model
    of the design point as a dashed line. A vertical band marks m = 1, the
    maximum power transfer condition, and a ring marks the design point.
    """
    m = np.asarray(rows["matching_ratio"], float)
    order = np.argsort(m)
    # Open circuit (no current) sends m toward infinity: leave it off the axis.
    ok = np.isfinite(m[order]) & (m[order] > 0) & (m[order] < 1e6)
    idx = order[ok]
    fig, (top, bottom) = plt.subplots(2, 1, figsize=(7.5, 6.2), sharex=True,
                                      gridspec_kw={"height_ratios": [3, 2], "hspace": 0.08})
    mm = m[idx]
    top.plot(mm, np.asarray(rows["delivered_w"], float)[idx], "o-", color=EXACT, ms=3.5, lw=1.4,
             label="delivered, exact")
    top.plot(mm, np.asarray(rows["p"], float)[idx], "-", color=EXACT, lw=0.8, alpha=0.5,
             label="at the array terminals, exact")
    grid = np.geomspace(max(mm.min(), 1e-3), max(mm.max(), 1.5), 300) if mm.size else np.geomspace(0.1, 10, 300)
    e, r = design["e_v"], design["r_ohm"]
    top.plot(grid, e * e * grid / (r * (1 + grid) ** 2), "--", color=LINEAR, lw=1.4,
             label="at the array terminals, linear model of the design point")
    bottom.plot(mm, np.asarray(rows["efficiency"], float)[idx], "o-", color=EXACT, ms=3.5, lw=1.4,
                label="delivered / generated, exact")
    bottom.plot(grid, grid / (1 + grid), "--", color=LINEAR, lw=1.4, label="m / (1 + m), linear model")
    for ax in (top, bottom):
        ax.axvspan(0.97, 1.03, color=MARK, alpha=0.25, lw=0)
        ax.axvline(design["matching_ratio"], color=EXACT, lw=0.6, ls=":")
        ax.grid(True, which="major", color="#d9d9d9", lw=0.6)
        ax.spines[["top", "right"]].set_visible(False)
    # The ring sits on the array-terminal power, which the linear model passes through.
    top.plot([design["matching_ratio"]], [design["p"]], "o", mfc="none", mec=LINEAR, ms=11, mew=1.6,
             label="design point")
    bottom.plot([design["matching_ratio"]], [design["efficiency"]], "o", mfc="none", mec=LINEAR, ms=11, mew=1.6)
    top.text(1.06, 0.97, "m = 1\nmaximum power\ntransfer", transform=top.get_xaxis_transform(), ha="left",
             va="top", fontsize=7.5, color="#4d6b50")
    top.set_xscale("log")
    top.set_ylabel("power [W]")
    bottom.set_ylabel("efficiency [-]")
    bottom.set_ylim(0, 1.02)
    bottom.set_xlabel("matching ratio m = (V/I) / R_th at the array terminals")
    top.legend(fontsize=7.5, frameon=False, loc="best")
    bottom.legend(fontsize=7.5, frameon=False, loc="lower right")
    fig.suptitle(title or f"sweep over {design.get('variable', '')}", fontsize=10, x=0.12, ha="left")
    return save_atomically(fig, path)


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


def monthly_energy_figure(summary: dict, path) -> Path:
    """Each month's energy at the groups' MPPs, split into where it went (stacked columns)."""
    months = summary["monthly"]
    labels = [_month_label(m["month"]) for m in months]
    fig, ax = plt.subplots(figsize=(8.0, 4.2))
    bottom = np.zeros(len(months))
    for key, label, colour in SEASON_PARTS:
        if key == "mismatch_kwh":
            values = np.array([max(m["energy_mpp_kwh"] - m["energy_generated_kwh"] - (m["curtailed_kwh"] or 0.0), 0.0)
                               for m in months])
        else:
            values = np.array([m.get(key) or 0.0 for m in months])
        ax.bar(labels, values, bottom=bottom, color=colour, width=0.72, label=label, edgecolor="white", lw=0.4)
        bottom += values
    ax.set_ylabel("energy [kWh]")
    ax.set_xlabel("month")
    ax.spines[["top", "right"]].set_visible(False)
    ax.grid(True, axis="y", color="#e3e3e3", lw=0.6)
    # Under the axes: the columns fill the plot, a legend inside would cover them.
    ax.legend(fontsize=7.5, frameon=False, ncol=3, loc="upper center", bbox_to_anchor=(0.5, -0.2))
    ax.set_title("Where each month's available energy went", fontsize=10, loc="left")
    return save_atomically(fig, path)


def wiring_loss_heatmap(steps, path) -> Path:
    """Cable loss as a share of generated power, by hour of day and month."""
    gen = steps["generated_w"].clip(lower=0)
    frame = steps.assign(hour=steps.index.hour, month=steps.index.month, gen=gen)
    grouped = frame.groupby(["month", "hour"])[["cable_loss_w", "gen"]].sum()
    share = (grouped["cable_loss_w"] / grouped["gen"].where(grouped["gen"] > 0)).unstack("hour")
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


def charge_duration_figure(steps, step_h: float, path) -> Path:
    """Charge current sorted from highest: how many hours the bank sees at least each current."""
    current = np.sort(steps["charge_current_a"].to_numpy())[::-1]
    hours = np.arange(1, len(current) + 1) * step_h
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


def soc_figure(steps, path) -> Path:
    """State of charge through the span: the daily range as a band and the daily mean."""
    daily = steps["soc"].groupby(steps.index.normalize())
    lo, hi, mean = daily.min(), daily.max(), daily.mean()
    fig, ax = plt.subplots(figsize=(8.0, 3.4))
    ax.fill_between(lo.index, 100 * lo, 100 * hi, color=MARK, alpha=0.35, lw=0, label="daily range")
    ax.plot(mean.index, 100 * mean, color=EXACT, lw=1.0, label="daily mean")
    ax.set_ylim(0, 102)
    ax.set_ylabel("state of charge [%]")
    ax.spines[["top", "right"]].set_visible(False)
    ax.legend(fontsize=7.5, frameon=False, ncol=2, loc="lower right", bbox_to_anchor=(1.0, 1.0))
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
    ax.set_ylabel("lifetime cost (conductors + lost energy)")
    ax.spines[["top", "right"]].set_visible(False)
    ax.grid(True, color="#e3e3e3", lw=0.6)
    ax.legend(fontsize=7.5, frameon=False)
    ax.set_title("Design combinations: cost against energy", fontsize=10, loc="left")
    return save_atomically(fig, path)
