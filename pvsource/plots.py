"""Figures. Each function takes results and a path, draws with matplotlib's
non-interactive backend, and writes the file atomically (temporary name,
then rename), so a failed draw never leaves half a picture."""

from __future__ import annotations

import os
import tempfile
from pathlib import Path

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402

# A palette of our own: slate for exact results, amber for the linear model.
EXACT = "#2f4858"
LINEAR = "#d08c2a"
MARK = "#7a9e7e"


def save_atomically(fig, path) -> Path:
    """Write a figure to ``path`` through a temporary file in the same folder."""
    path = Path(path)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.stem}.", suffix=path.suffix or ".png", dir=path.parent or ".")
    os.close(fd)
    try:
        fig.savefig(tmp, dpi=130)
        os.replace(tmp, path)
    finally:
        plt.close(fig)
        if os.path.exists(tmp):
            os.remove(tmp)
    return path


def sweep_figure(rows, design: dict, path, title: str = "") -> Path:
    """Delivered power and efficiency against the matching ratio, exact and linearised.

    Two stacked panels share a logarithmic matching-ratio axis. The exact
    sweep is drawn as points joined by a line; the linear (Thevenin) model
    of the design point as a dashed line. A vertical band marks m = 1, the
    maximum power transfer condition, and a ring marks the design point.
    """
    m = np.asarray(rows["matching_ratio"], float)
    order = np.argsort(m)
    ok = np.isfinite(m[order]) & (m[order] > 0)
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
    top.plot([design["matching_ratio"]], [design["delivered_w"]], "o", mfc="none", mec=LINEAR, ms=11, mew=1.6,
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
