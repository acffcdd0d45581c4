"""Plots for the daily report. Each takes ``ax=`` and returns it; nothing here computes."""

from __future__ import annotations

import matplotlib.dates as mdates
import numpy as np
import pandas as pd

from cyanorisk.drivers import driver_label

LEVEL_COLOURS = ["#b8860b", "#8b0000", "#4b0082"]
"""Line colours for the first, second and third level (our own palette)."""


def counts_plot(counts: pd.DataFrame, levels: list[tuple[str, float]], tz: str, ax):
    """Cell counts on a log axis with the scheme's level lines; censored values marked."""
    if len(counts):
        t = counts["sampled_at"].dt.tz_convert(tz).dt.tz_localize(None)
        v = counts["cyano_cells_per_ml"].astype(float).clip(lower=1.0)
        exact = (counts["cyano_censor"] == "=").to_numpy()
        below = (counts["cyano_censor"] == "<").to_numpy()
        above = (counts["cyano_censor"] == ">").to_numpy()
        ax.plot(t[exact], v[exact], "o-", color="#1f4e79", ms=4, lw=1, label="count")
        ax.plot(t[below], v[below], "v", color="#7f7f7f", ms=6, ls="none",
                label="below detection (value is the limit)")
        ax.plot(t[above], v[above], "^", color="#c00000", ms=6, ls="none",
                label="above counting limit")
    for (name, value), colour in zip(levels, LEVEL_COLOURS, strict=False):
        ax.axhline(value, color=colour, ls="--", lw=1)
        ax.annotate(f"{name} ({value:,.0f})", xy=(0.01, value), xycoords=("axes fraction", "data"),
                    va="bottom", fontsize=7, color=colour)
    ax.set_yscale("log")
    ax.set_ylabel("cyanobacteria [cells/mL]")
    ax.set_title("Cell counts known at issue time, last 120 days", fontsize=9)
    if ax.get_legend_handles_labels()[0]:
        ax.legend(fontsize=7, loc="upper left", bbox_to_anchor=(0, 0.92))
    ax.xaxis.set_major_formatter(mdates.DateFormatter("%d %b"))
    return ax


def probability_plot(history: pd.DataFrame, names: list[str], warn_at: dict[str, float], ax):
    """Probability of reaching each level within the horizon, per issue day."""
    for name, colour in zip(names, LEVEL_COLOURS, strict=False):
        ax.plot(history["issue_date"], history[name], color=colour, lw=1.5, label=name)
        ax.axhline(warn_at.get(name, 0.5), color=colour, ls=":", lw=1)
    ax.set_ylim(0, 1)
    ax.set_ylabel("probability")
    ax.set_title("Probability of reaching each level (dotted: warning thresholds)", fontsize=9)
    ax.legend(fontsize=7, loc="upper left")
    ax.xaxis.set_major_formatter(mdates.DateFormatter("%d %b"))
    return ax


def drivers_plot(history: pd.DataFrame, columns: list[str], axes):
    """Weather drivers, one panel each, labelled from the driver glossary."""
    for ax, col in zip(np.ravel(axes), columns, strict=True):
        label = driver_label(col)
        if col in history:
            if col.startswith("rain"):
                ax.bar(history["issue_date"], history[col], color="#2e75b6", width=0.8)
            else:
                ax.plot(history["issue_date"], history[col], color="#404040", lw=1)
        ax.set_title(label, fontsize=7, loc="left", pad=2)
        ax.tick_params(labelsize=7)
    np.ravel(axes)[-1].xaxis.set_major_formatter(mdates.DateFormatter("%d %b"))
    return axes
