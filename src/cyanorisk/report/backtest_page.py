"""The backtest page (HTML, plots inline) and the tuning trade-off plot. Rendering only."""

from __future__ import annotations

import html

import numpy as np
import pandas as pd

from cyanorisk.report.daily import CSS
from cyanorisk.report.figures import data_uri, new_figure
from cyanorisk.report.plots import LEVEL_COLOURS
from cyanorisk.verify import reliability_table, roc_curve


def roc_plot(forecasts: pd.DataFrame, level: str, ax):
    """ROC curves of the model and the climatology for one level."""
    f = forecasts[forecasts["level"] == level]
    for column, label, style in (("probability", "model", "-"), ("climatology", "climatology", "--")):
        curve = roc_curve(f[column].to_numpy(dtype=float), f["outcome"].to_numpy(dtype=float))
        ax.plot(curve["false_alarm_rate"], curve["hit_rate"], style, label=label)
    ax.plot([0, 1], [0, 1], color="#999", lw=0.8)
    ax.set_xlabel("false alarm rate (POFD)")
    ax.set_ylabel("hit rate (POD)")
    ax.set_title(f"ROC, {level}", fontsize=9)
    ax.legend(fontsize=7)
    return ax


def reliability_plot(forecasts: pd.DataFrame, level: str, ax):
    """Observed frequency against forecast probability (binned), with the bin counts."""
    f = forecasts[forecasts["level"] == level]
    table = reliability_table(f["probability"].to_numpy(dtype=float),
                              f["outcome"].to_numpy(dtype=float), bins=10)
    ax.plot([0, 1], [0, 1], color="#999", lw=0.8)
    ax.plot(table["mean_forecast"], table["observed_frequency"], "o-")
    for _, r in table.iterrows():
        if r["n"]:
            ax.annotate(f"{int(r['n'])}", (r["mean_forecast"], r["observed_frequency"]),
                        fontsize=6, xytext=(3, -8), textcoords="offset points")
    ax.set_xlim(0, 1)
    ax.set_ylim(0, 1)
    ax.set_xlabel("forecast probability")
    ax.set_ylabel("observed frequency")
    ax.set_title(f"Reliability, {level} (labels: days per bin)", fontsize=9)
    return ax


def timeline_plot(forecasts: pd.DataFrame, counts: pd.DataFrame, season: int, names: list[str],
                  cells: list[float], ax):
    """One season: counts (log scale, left) with level lines; forecast probability and warning
    days of the first level (right)."""
    f = forecasts[(forecasts["season"] == season)]
    c = counts[counts["season"] == season]
    if len(c):
        ax.semilogy(c["date"], c["cyano_cells_per_ml"].clip(lower=1), "o", ms=3, color="#1f4e79")
    for value, colour in zip(cells, LEVEL_COLOURS, strict=False):
        ax.axhline(value, color=colour, ls="--", lw=0.8)
    ax.set_ylabel("cells/mL", fontsize=7)
    right = ax.twinx()
    for name, colour in zip(names, LEVEL_COLOURS, strict=False):
        g = f[f["level"] == name]
        right.plot(pd.to_datetime(g["issue_date"]), g["probability"], color=colour, lw=1)
        warned = g[g["warned"]]
        right.plot(pd.to_datetime(warned["issue_date"]), np.full(len(warned), 1.03), "|",
                   color=colour, ms=4)
    right.set_ylim(0, 1.08)
    right.set_ylabel("probability", fontsize=7)
    ax.set_title(f"season {season}-{season + 1}: counts, forecast probability, warnings (ticks)",
                 fontsize=8, loc="left")
    ax.tick_params(labelsize=6)
    right.tick_params(labelsize=6)
    return ax


def _table(frame: pd.DataFrame) -> str:
    table = frame.to_html(index=False, float_format=lambda v: f"{v:.3f}", na_rep="n/a",
                          border=0, escape=True)
    return f'<div style="overflow-x:auto;font-size:0.8em">{table}</div>'



def render_backtest(site_name: str, result, counts: pd.DataFrame, names: list[str],
                    cells: list[float], seasons_text: str) -> str:
    """The backtest page: scores with bootstrap intervals, ROC, reliability, season timelines."""
    e = html.escape
    figs = []
    for level in names:
        fig, axes = new_figure(9, 3.4, 1, 2)
        roc_plot(result.forecasts, level, ax=axes[0])
        reliability_plot(result.forecasts, level, ax=axes[1])
        figs.append(data_uri(fig))
    timelines = []
    for season in sorted(result.forecasts["season"].unique()):
        fig, ax = new_figure(9, 2)
        timeline_plot(result.forecasts, counts, season, names, cells, ax=ax)
        timelines.append(data_uri(fig))
    notes = "".join(f"<li>{e(n)}</li>" for n in result.notes) or "<li>none</li>"
    scores = result.scores.copy()
    scores = scores[scores["source"] != "climatology"]
    return f"""<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8"><title>{e(site_name)}: backtest {e(seasons_text)}</title>
<style>{CSS}</style></head><body>
<h1>{e(site_name)}: walk-forward backtest, seasons {e(seasons_text)}</h1>
<p class="sub">Each season was forecast by models fitted only on what was known before it
started, issued every day as the daily report would have been. Scores with NaN ('n/a') could not
be computed; the note says why.</p>
<section id="overall"><h2>Overall, with 90% bootstrap intervals over seasons</h2>
{_table(result.overall)}</section>
<section id="curves"><h2>ROC and reliability</h2>
{''.join(f'<img alt="ROC and reliability" src="{f}">' for f in figs)}</section>
<section id="seasons"><h2>Scores per season</h2>{_table(scores)}</section>
<section id="timeline"><h2>Season timelines</h2>
{''.join(f'<img alt="season timeline" src="{t}">' for t in timelines)}</section>
<section id="notes"><h2>Notes</h2><ul>{notes}</ul></section>
</body></html>
"""


def tradeoff_plot(choices, ax):
    """Hit rate and false alarm ratio against the threshold, per level, chosen thresholds marked."""
    for choice, colour in zip(choices, LEVEL_COLOURS, strict=False):
        t = choice.table
        ax.plot(t["threshold"], t["hit_rate"], color=colour, label=f"{choice.level}: hit rate")
        ax.plot(t["threshold"], t["false_alarm_ratio"], color=colour, ls="--",
                label=f"{choice.level}: false alarm ratio")
        ax.axvline(choice.threshold, color=colour, ls=":", lw=1)
    ax.set_xlabel("warning threshold (probability)")
    ax.set_ylim(0, 1)
    ax.legend(fontsize=7)
    ax.set_title("Trade-off between hits and false alarms (dotted: chosen thresholds)", fontsize=9)
    return ax
