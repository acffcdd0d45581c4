"""The backtest page (HTML, plots inline) and the tuning trade-off plot. Rendering only."""

from __future__ import annotations

import html

import numpy as np
import pandas as pd

from cyanorisk.report.figures import data_uri, new_figure
from cyanorisk.report.style import CSS, level_colours
from cyanorisk.verify import reliability_table, roc_curve
from cyanorisk.words import date


def roc_plot(forecasts: pd.DataFrame, level: str, ax):
    """ROC curves of the model and the climatology for one level."""
    f = forecasts[forecasts["level"] == level]
    for column, label, style in (("probability", "model", "-"), ("climatology", "climatology", "--")):
        curve = roc_curve(f[column].to_numpy(dtype=float), f["outcome"].to_numpy(dtype=float))
        ax.plot(curve["false_alarm_rate"], curve["hit_rate"], style, label=label)
    ax.plot([0, 1], [0, 1], color="#999", lw=0.8, label="no skill")
    ax.set_xlabel("false alarm rate (share of quiet days warned)", fontsize=8)
    ax.set_ylabel("hit rate (share of exceedance days warned)", fontsize=8)
    ax.set_title(f"ROC, {level}", fontsize=9)
    ax.legend(fontsize=7, loc="lower right")
    return ax


def reliability_plot(forecasts: pd.DataFrame, level: str, ax):
    """Observed frequency against forecast probability (binned), with the bin counts."""
    f = forecasts[forecasts["level"] == level]
    table = reliability_table(f["probability"].to_numpy(dtype=float),
                              f["outcome"].to_numpy(dtype=float), bins=10)
    ax.plot([0, 1], [0, 1], color="#999", lw=0.8, label="perfectly reliable")
    ax.plot(table["mean_forecast"], table["observed_frequency"], "o-", label="model")
    for _, r in table.iterrows():
        if r["n"]:
            ax.annotate(f"{int(r['n'])}", (r["mean_forecast"], r["observed_frequency"]),
                        fontsize=6, xytext=(3, -8), textcoords="offset points")
    ax.set_xlim(0, 1)
    ax.set_ylim(0, 1)
    ax.set_xlabel("forecast probability", fontsize=8)
    ax.set_ylabel("share of those days that reached the level", fontsize=8)
    ax.set_title(f"Reliability, {level} (numbers: days per bin)", fontsize=9)
    ax.legend(fontsize=7, loc="upper left")
    return ax


def timeline_plot(forecasts: pd.DataFrame, counts: pd.DataFrame, season: int, names: list[str],
                  cells: list[tuple[str, float]], ax):
    """One season: counts (log scale, left) with level lines; forecast probability and warning
    days per level (right)."""
    f = forecasts[(forecasts["season"] == season)]
    c = counts[counts["season"] == season]
    colours = dict(zip(names, level_colours(len(names)), strict=True))
    if len(c):
        ax.semilogy(c["date"], c["cyano_cells_per_ml"].clip(lower=1), "o", ms=3, color="#1d3557",
                    label="lab count")
    for name, value in cells:
        ax.axhline(value, color=colours[name], ls="--", lw=0.8, label=f"{name}: {value:,.0f}")
    ax.set_ylabel("cells/mL", fontsize=7)
    right = ax.twinx()
    for name in names:
        g = f[f["level"] == name]
        right.plot(pd.to_datetime(g["issue_date"]), 100 * g["probability"], color=colours[name],
                   lw=1, label=f"{name}: chance")
        warned = g[g["warned"].fillna(False).astype(bool)]
        right.plot(pd.to_datetime(warned["issue_date"]), np.full(len(warned), 103.0), "|",
                   color=colours[name], ms=4)
    right.set_ylim(0, 108)
    right.set_ylabel("chance within the horizon (%)", fontsize=7)
    ax.set_title(f"season {season}-{season + 1}: counts, chances, warning days (ticks at the top)",
                 fontsize=8, loc="left")
    h1, l1 = ax.get_legend_handles_labels()
    h2, l2 = right.get_legend_handles_labels()
    ax.legend(h1 + h2, l1 + l2, fontsize=6, loc="upper left", ncol=3, framealpha=0.9)
    ax.tick_params(labelsize=6)
    right.tick_params(labelsize=6)
    return ax


def _int(v) -> str:
    return "n/a" if v is None or v != v else f"{int(v):,}"


def _score(v, lo=None, hi=None) -> str:
    if v is None or v != v:
        return "n/a"
    text = f"{v:.2f}"
    if lo is not None and lo == lo and hi == hi:
        text += f" ({lo:.2f} to {hi:.2f})"
    return text


def _lead_words(lead) -> str:
    if lead is None or lead != lead:
        return "no warning before it"
    lead = int(lead)
    if lead > 0:
        return f"warned {lead} day{'s' if lead != 1 else ''} ahead"
    if lead == 0:
        return "warned on the day"
    return f"warned {-lead} day{'s' if lead != -1 else ''} late"


def season_sentences(result, names: list[str]) -> list[tuple[str, list[str]]]:
    """Per season its name and one sentence per level: when the level was first reached, how
    early the warning came, and the misses and false alarms (in events and days)."""
    scores = result.scores[result.scores["source"] == "model"]
    ex = result.exceedances
    out = []
    for season in sorted(scores["season"].unique()):
        parts = []
        s = scores[scores["season"] == season]
        title = f"Season {season}-{season + 1}"
        why = result.not_replayed.get(int(season))
        if why is not None:
            out.append((title, [f"not replayed: {why}."]))
            continue
        if (s["note"].str.contains("no forecast issued", regex=False)).all():
            out.append((title, ["no forecast was issued."]))
            continue
        for name in names:
            r = s[s["level"] == name].iloc[0]
            first = ex[(ex["season"] == season) & (ex["level"] == name)]["first_exceedance"]
            first = first.iloc[0] if len(first) else pd.NaT
            fa = f"{_int(r['false_alarm_spells'])} false-alarm spell(s), {_int(r['false_alarms'])} day(s)"
            if pd.isna(first):
                parts.append(f"{name}: not reached; {fa}.")
            else:
                lead = _lead_words(r["lead_time_days"])
                parts.append(f"{name}: first reached on {date(first)}, {lead}; "
                             f"{_int(r['event_hits'])} of {_int(r['exceedance_events'])} "
                             f"exceedance event(s) warned; {fa}.")
        out.append((title, parts))
    return out


def _overall_table(result, names: list[str]) -> str:
    o = result.overall
    rows = []
    for name in names:
        m = o[(o["level"] == name) & (o["source"] == "model")].iloc[0]
        c = o[(o["level"] == name) & (o["source"] == "climatology")].iloc[0]
        auc = _score(m["roc_auc"], m["roc_auc_low"], m["roc_auc_high"])
        bss = _score(m["brier_skill"], m["brier_skill_low"], m["brier_skill_high"])
        rows.append(f"<tr><td>{html.escape(name)}</td><td class='num'>{auc}</td>"
                    f"<td class='num'>{_score(c['roc_auc'])}</td><td class='num'>{bss}</td>"
                    f"<td class='num'>{_score(m['brier_skill_persistence'])}</td></tr>")
    return ("<table><tr><th>Level</th><th class='num'>ROC AUC, model (90% range)</th>"
            "<th class='num'>ROC AUC, usual for the time of year</th>"
            "<th class='num'>Brier skill against the usual (90% range)</th>"
            "<th class='num'>Brier skill against persistence (how often results like the "
            "last led to the level)</th></tr>"
            + "".join(rows) + "</table>")


def _warnings_table(result, names: list[str]) -> str:
    s = result.scores[result.scores["source"] == "model"]
    ex = result.exceedances
    rows = []
    order = s.assign(_order=s["level"].map({n: i for i, n in enumerate(names)}))
    for _, r in order.sort_values(["season", "_order"]).iterrows():
        first = ex[(ex["season"] == r["season"]) & (ex["level"] == r["level"])]["first_exceedance"]
        first = first.iloc[0] if len(first) else pd.NaT
        rows.append(
            f"<tr><td>{r['season']}-{str(r['season'] + 1)[-2:]}</td>"
            f"<td>{html.escape(r['level'])}</td>"
            f"<td>{'' if pd.isna(first) else date(first)}</td>"
            f"<td class='num'>{_int(r['lead_time_days'])}</td>"
            f"<td class='num'>{_int(r.get('lead_to_report_days', np.nan))}</td>"
            f"<td class='num'>{_int(r['hits'])}</td><td class='num'>{_int(r['misses'])}</td>"
            f"<td class='num'>{_int(r['false_alarms'])}</td>"
            f"<td class='num'>{_int(r['event_hits'])} / {_int(r['exceedance_events'])}</td>"
            f"<td class='num'>{_int(r['false_alarm_spells'])}</td></tr>")
    return ("<table class='small'><tr><th>Season</th><th>Level</th><th>First reached</th>"
            "<th class='num'>Days warned before that sample</th>"
            "<th class='num'>Days warned before its result</th><th class='num'>Hits (days)</th>"
            "<th class='num'>Misses (days)</th><th class='num'>False alarms (days)</th>"
            "<th class='num'>Events warned</th><th class='num'>False-alarm spells</th></tr>"
            + "".join(rows) + "</table>")


def _warn_days(result) -> str:
    f = result.forecasts
    return str(int(f["warn_horizon_days"].iloc[0])) if len(f) and "warn_horizon_days" in f else "?"


def _families_text(result) -> str:
    families = getattr(result, "families", {}) or {}
    return ", ".join(f"{s}-{str(s + 1)[-2:]} {f}" for s, f in sorted(families.items())) or "none"


def _leads_table(result, names: list[str]) -> str:
    """Median leads per level (model), over the replayed seasons with a lead."""
    o = result.overall
    if "median_lead_time_days" not in o:
        return ""
    rows = []
    for name in names:
        m = o[(o["level"] == name) & (o["source"] == "model")].iloc[0]
        rows.append(f"<tr><td>{html.escape(name)}</td>"
                    f"<td class='num'>{_int(m['median_lead_time_days'])}</td>"
                    f"<td class='num'>{_int(m['median_lead_to_report_days'])}</td>"
                    f"<td class='num'>{_int(m['seasons_with_lead'])}</td></tr>")
    return ("<table><tr><th>Level</th><th class='num'>Median days warned before the first "
            "confirming sample</th><th class='num'>... before its result was reported</th>"
            "<th class='num'>Seasons</th></tr>" + "".join(rows) + "</table>")


def _reliability_tables(result, names: list[str]) -> str:
    """Per level: forecasts and outcomes per probability bin (headline horizon)."""
    r = result.reliability
    if r is None or r.empty:
        return ""
    parts = []
    for name in names:
        t = r[(r["level"] == name) & (r["n"] > 0)]
        rows = "".join(
            f"<tr><td>{b['bin_low']:.0%}-{b['bin_high']:.0%}</td><td class='num'>{int(b['n']):,}</td>"
            f"<td class='num'>{b['mean_forecast']:.0%}</td>"
            f"<td class='num'>{b['observed_frequency']:.0%}</td></tr>" for _, b in t.iterrows())
        parts.append(f"<h3>{html.escape(name)}</h3><table class='small'><tr><th>Forecast</th>"
                     "<th class='num'>Days</th><th class='num'>Mean forecast</th>"
                     "<th class='num'>Share that reached the level</th></tr>" + rows + "</table>")
    return "".join(parts)


def _horizon_table(result, names: list[str]) -> str:
    """Brier skill of every horizon against climatology and persistence, per level."""
    h = result.horizon_scores
    if h is None or h.empty:
        return ""
    m = h[h["source"] == "model"]
    days = sorted(m["horizon_days"].unique())
    head = "".join(f"<th class='num'>{d}</th>" for d in days)
    rows = []
    for name in names:
        g = m[m["level"] == name].set_index("horizon_days")
        for label, col in (("AUC", "roc_auc"), ("skill vs usual", "brier_skill"),
                           ("skill vs last result", "brier_skill_persistence")):
            rows.append(f"<tr><td>{html.escape(name)}</td><td>{label}</td>"
                        + "".join(f"<td class='num'>{_score(g.loc[d, col])}</td>" for d in days)
                        + "</tr>")
    return ("<div class='wide'><table class='small'><tr><th>Level</th><th>Score</th>"
            f"{head}</tr>" + "".join(rows) + "</table></div>")


EXPLORER_CSS = """
.explorer-level { border: 1px solid #bbb; border-radius: 6px; padding: 0.4em 0.8em; margin: 0.5em 0;
  break-inside: avoid; }
.explorer-level input[type=range] { width: min(30em, 100%); }
.explorer-level output { font-weight: 700; }
table.explorer-counts, table.explorer-leads { width: auto; }
@media print { .explorer-level input[type=range] { display: none; } }
"""


def render_backtest(site_name: str, result, counts: pd.DataFrame, names: list[str],
                    cells: list[tuple[str, float]], seasons_text: str,
                    warn_at: dict[str, float] | None = None) -> str:
    """The backtest page: the seasons in plain words, skill with bootstrap intervals, warnings
    per season, the threshold explorer (sliders start at ``warn_at``, the thresholds in
    force), ROC and reliability, season timelines."""
    from cyanorisk.report.explorer import explorer_data, explorer_section

    e = html.escape
    explorer = explorer_section(explorer_data(result, names), warn_at or {})
    figs = []
    for level in names:
        fig, axes = new_figure(9, 3.4, 1, 2)
        roc_plot(result.forecasts, level, ax=axes[0])
        reliability_plot(result.forecasts, level, ax=axes[1])
        figs.append(data_uri(fig))
    timelines = []
    for season in result.replayed:
        fig, ax = new_figure(9, 2.4)
        timeline_plot(result.forecasts, counts, season, names, cells, ax=ax)
        timelines.append(data_uri(fig))
    notes = "".join(f"<li>{e(n)}</li>" for n in result.notes) or "<li>none</li>"
    skipped = ("<p><strong>Not replayed:</strong> " + e("; ".join(
        f"season {s}-{s + 1}: {why}" for s, why in sorted(result.not_replayed.items())))
        + ". Their days count in no score below.</p>" if result.not_replayed else "")
    summary = "".join(f"<li>{e(title)}<ul>" + "".join(f"<li>{e(s)}</li>" for s in parts)
                      + "</ul></li>" for title, parts in season_sentences(result, names))
    return f"""<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>{e(site_name)}: backtest {e(seasons_text)}</title>
<style>{CSS}{EXPLORER_CSS}</style></head><body>
<h1>{e(site_name)}: how early and how reliably it would have warned, seasons {e(seasons_text)}</h1>
<p class="sub">Each season was forecast by models fitted only on what was known before it
started, issued every day as the daily report would have been, with the warning thresholds in
force. A warning counts for a level on a day whose chance reached that level's threshold.</p>
<section id="summary"><h2>Season by season</h2>{skipped}<ul>{summary}</ul>
<p class="small">Days warned ahead: from the start of the warning spell that was running when
the level was first reached to that day. An exceedance event is a run of days with a sample at
the level in the horizon; a false-alarm spell is a run of warning days with none.</p></section>
<section id="overall"><h2>Skill over all seasons</h2>{_overall_table(result, names)}
<p class="small">ROC AUC: 1 ranks every exceedance day above every quiet day, 0.5 is chance.
Brier skill: 1 is perfect, 0 no better than the reference, below 0 worse. Ranges resample whole
seasons.</p></section>
<section id="leads"><h2>How early</h2>{_leads_table(result, names)}
<p class="small">Counted from the start of the warning spell that covered the first sample of
the season to meet the level (a warning raised by any horizon up to
{_warn_days(result)} days), to that sample's date and to the date its result was known.</p>
</section>
<section id="warnings"><h2>Warnings per season</h2>{_warnings_table(result, names)}
<p class="small">Model family chosen at each season start, as <code>train</code> would have
chosen it: {e(_families_text(result))}.</p></section>
{explorer}
<section id="horizons"><h2>Skill by days ahead</h2>{_horizon_table(result, names)}
<p class="small">Columns: the horizon in days. Skill: Brier skill score against the usual for the
time of year and against persistence as a probability (how often the last result's level held
over the horizon in the seasons before).</p></section>
<section id="curves"><h2>ROC and reliability</h2>
{''.join(f'<img alt="ROC and reliability" src="{f}">' for f in figs)}
{_reliability_tables(result, names)}</section>
<section id="timeline"><h2>Season timelines</h2>
{''.join(f'<img alt="season timeline" src="{t}">' for t in timelines)}</section>
<section id="notes"><h2>Notes</h2><ul>{notes}</ul></section>
</body></html>
"""


def tradeoff_plot(choices, axes):
    """One panel per tuned level: hit rate and false alarm ratio against the warning threshold,
    the expected cost (cost rule) or the target hit rate (target rule), the chosen threshold
    with its value, and the band of thresholds chosen on bootstrap resamples of the seasons."""
    for choice, ax in zip(choices, axes, strict=True):
        t = choice.table
        x = 100 * t["threshold"]
        ax.plot(x, 100 * t["hit_rate"], color="#1d5c8a", label="hit rate (days)")
        ax.plot(x, 100 * t["false_alarm_ratio"], color="#b34700", ls="--",
                label="false alarm ratio (days)")
        lo, hi = choice.spread()
        if lo == lo:
            ax.axvspan(100 * lo, 100 * hi, color="#999999", alpha=0.25,
                       label=f"bootstrap 90% range {lo:.2f} to {hi:.2f}")
        ax.axvline(100 * choice.threshold, color="#000000", lw=1.2,
                   label=f"proposed threshold {choice.threshold:.2f}")
        if choice.target_hit_rate is not None:
            ax.axhline(100 * choice.target_hit_rate, color="#1d5c8a", ls=":", lw=1,
                       label=f"target hit rate {100 * choice.target_hit_rate:.0f}%")
        ax.set_ylim(0, 100)
        ax.set_xlim(0, 100)
        ax.set_xlabel("warning threshold (probability, %)")
        ax.set_ylabel("rate (%)")
        handles, labels = ax.get_legend_handles_labels()
        cost = choice.cost()
        if cost is not None:
            right = ax.twinx()
            right.plot(x, cost, color="#5e2a6e", lw=1.4,
                       label=f"expected cost (a miss = {choice.miss_cost:g} false alarms)")
            right.set_ylabel("expected cost [false alarms]")
            h2, l2 = right.get_legend_handles_labels()
            handles, labels = handles + h2, labels + l2
        ax.legend(handles, labels, fontsize=7, loc="upper center", framealpha=0.9, ncol=2)
        ax.set_title(f"{choice.level}: {choice.rule}; {choice.verdict()}", fontsize=8, loc="left")
    return axes
