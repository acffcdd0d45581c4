"""Plots for the daily report. Each takes ``ax=`` and returns it; nothing here computes.

Every plot of a report shares the same date range (the history shown), so that they line up
when read one above the other.
"""

from __future__ import annotations

import matplotlib.dates as mdates
import numpy as np
import pandas as pd
from matplotlib.ticker import FuncFormatter, NullLocator, PercentFormatter

from cyanorisk.drivers import driver_label
from cyanorisk.levels import CENSOR_COLUMNS, MEASURE_UNITS, MEASURE_WORDS
from cyanorisk.report.style import level_colours

COUNT_COLOUR = "#1d3557"


def month_ticks(xlim: tuple[pd.Timestamp, pd.Timestamp]) -> tuple[list[float], list[str]]:
    """Ticks on the first of each month within ``xlim`` (about 4 to 8 for the reports'
    windows; every other month beyond 9), labelled 'Oct' and, in January or at the first tick,
    'Jan 2025'. Computed once here: matplotlib's automatic date ticks cost a report's plots
    about a third of their drawing time."""
    first = pd.Timestamp(xlim[0]).to_period("M").to_timestamp()
    months = pd.date_range(first, pd.Timestamp(xlim[1]), freq="MS")
    months = months[months >= pd.Timestamp(xlim[0])]
    if len(months) > 9:
        months = months[::2]
    labels = [m.strftime("%b %Y") if i == 0 or m.month == 1 else m.strftime("%b")
              for i, m in enumerate(months)]
    return [float(mdates.date2num(m)) for m in months], labels


def _dates(ax, xlim: tuple[pd.Timestamp, pd.Timestamp]) -> None:
    ax.set_xlim(*xlim)
    ticks, labels = month_ticks(xlim)
    ax.set_xticks(ticks, labels)


def counts_plot(counts: pd.DataFrame, measure: str, lines: list[tuple[str, float, str]], tz: str,
                xlim: tuple[pd.Timestamp, pd.Timestamp], ax):
    """The scheme's count measure on a log axis, each level's threshold drawn and labelled;
    censored values marked as such. ``lines``: (level name, threshold, colour)."""
    censor_col = CENSOR_COLUMNS.get(measure)
    if len(counts) and measure in counts:
        t = counts["sampled_at"].dt.tz_convert(tz).dt.tz_localize(None)
        v = counts[measure].astype(float).clip(lower=1.0)
        censor = counts[censor_col] if censor_col in counts else pd.Series("=", index=counts.index)
        for mark, style, label in (("=", dict(marker="o", ls="-", color=COUNT_COLOUR, ms=4, lw=1),
                                    "count"),
                                   ("<", dict(marker="v", ls="none", color="#6c757d", ms=6),
                                    "below detection (the limit is drawn)"),
                                   (">", dict(marker="^", ls="none", color="#9d0208", ms=6),
                                    "above the counting limit (the limit is drawn)")):
            sel = (censor == mark).to_numpy()
            if sel.any():
                ax.plot(t[sel], v[sel], label=label, **style)
    for name, value, colour in lines:
        ax.axhline(value, color=colour, ls="--", lw=1.2, label=f"{name}: {value:,.0f}")
    ax.set_yscale("log")
    ax.yaxis.set_major_formatter(FuncFormatter(lambda y, _: f"{y:,.0f}"))
    ax.yaxis.set_minor_locator(NullLocator())  # unlabelled, and a third of the plot's drawing
    ax.set_ylabel(f"{MEASURE_WORDS.get(measure, measure)} [{MEASURE_UNITS.get(measure, '')}]",
                  fontsize=8)
    ax.set_title("Lab counts known at issue time, with the level thresholds", fontsize=9, loc="left")
    if not len(counts):
        ax.text(0.5, 0.5, "no lab result in this period", transform=ax.transAxes, ha="center",
                va="center", fontsize=9, color="#555")
    ax.legend(fontsize=7, loc="upper left", framealpha=0.9)
    _dates(ax, xlim)
    return ax


def probability_plot(history: pd.DataFrame, names: list[str], warn_at: dict[str, float],
                     xlim: tuple[pd.Timestamp, pd.Timestamp], colours: list[str], ax):
    """Probability of reaching each level within the horizon, per issue day [%], with each
    level's warning threshold dotted."""
    for name, colour in zip(names, colours, strict=True):
        ax.plot(history["issue_date"], 100 * history[name], color=colour, lw=1.6, label=name)
        ax.axhline(100 * warn_at.get(name, 0.5), color=colour, ls=":", lw=1,
                   label=f"{name}: warning threshold {100 * warn_at.get(name, 0.5):.0f}%")
    ax.set_ylim(0, 100)
    ax.yaxis.set_major_formatter(PercentFormatter())
    ax.set_ylabel("chance within the horizon", fontsize=8)
    ax.set_title("Outlook: chance of reaching each level (dotted: warning thresholds)", fontsize=9,
                 loc="left")
    ax.legend(fontsize=7, loc="upper left", ncol=2, framealpha=0.9)
    _dates(ax, xlim)
    return ax


def drivers_plot(history: pd.DataFrame, columns: list[str],
                 xlim: tuple[pd.Timestamp, pd.Timestamp], axes):
    """Weather drivers, one panel each, labelled from the driver glossary."""
    for ax, col in zip(np.ravel(axes), columns, strict=True):
        label = driver_label(col)
        values = history[col] if col in history else pd.Series(dtype=float)
        if values.notna().any():
            if col.startswith("rain"):
                ax.bar(history["issue_date"], values, color="#2e75b6", width=0.8, label=label)
            else:
                ax.plot(history["issue_date"], values, color="#343a40", lw=1, label=label)
        else:
            ax.text(0.5, 0.5, "no data in this period", transform=ax.transAxes, ha="center",
                    va="center", fontsize=7, color="#555")
        ax.set_title(label, fontsize=7, loc="left", pad=2)
        ax.tick_params(labelsize=7)
        _dates(ax, xlim)
    return axes


def line_colours(n: int) -> list[str]:
    """Colours of the levels' lines: the palette of the report style."""
    return level_colours(n)
