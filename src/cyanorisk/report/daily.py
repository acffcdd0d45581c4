"""The daily report of a site, rendered three ways: a self-contained HTML page (plots inline, no
network resources, readable on a phone and on A4), the JSON document (``report.schema.json``)
and a plain-text summary for e-mail. Rendering only: the numbers and the words come from the
assessment (:mod:`cyanorisk.forecast`) through its document (:mod:`cyanorisk.report.document`).

The page opens with a summary strip that is the first printed page: the level stated as a badge
(name, shape and colour), its basis (the lab's level in force, or the outlook), the outlook,
toxins, the next sample, what changed since the last report, what to do and who decides.
"""

from __future__ import annotations

import html
import json
from typing import Any

import numpy as np
import pandas as pd

from cyanorisk.drivers import driver_label
from cyanorisk.forecast import STATUS_ASSESSED, STATUS_NONE, Assessment
from cyanorisk.levels import MEASURE_UNITS, MEASURE_WORDS
from cyanorisk.report.document import report_document
from cyanorisk.report.figures import data_uri, new_figure
from cyanorisk.report.plots import counts_plot, drivers_plot, probability_plot
from cyanorisk.report.style import CSS, INSUFFICIENT_COLOUR, badge, level_colour, level_colours
from cyanorisk.words import cells, date, duration, number, percent

e = html.escape


def _threshold_text(t: dict[str, Any]) -> str:
    unit = MEASURE_UNITS.get(t["measure"], "")
    words = MEASURE_WORDS.get(t["measure"], t["measure"])
    if t["value"] == 0 and not t["inclusive"]:
        return f"{words} detected"
    return f"{words} {'&ge;' if t['inclusive'] else '&gt;'} {t['value']:,g} {e(unit)}"


def figures(a: Assessment, c: dict[str, Any]) -> dict[str, str]:
    """The report's plots as PNG data URIs, over one date range."""
    spec = a.spec
    scheme = spec.scheme
    measure = scheme.primary_measure()
    colours = level_colours(len(scheme.levels), scheme.levels)
    lines = [(lvl.name, t.value, colour) for lvl, colour in zip(scheme.levels, colours, strict=True)
             for t in lvl.thresholds if t.measure == measure and not t.detection]
    first = a.as_of - pd.Timedelta(days=spec.history_days - 1)
    xlim = (first, a.as_of + pd.Timedelta(days=1))
    out = {}
    fig, ax = new_figure(8, 3)
    counts_plot(a.counts, measure, lines, spec.timezone, xlim, ax=ax)
    out["counts"] = data_uri(fig)
    if c["forecast"]["probabilities"] is not None:
        fig, ax = new_figure(8, 2.6)
        probability_plot(a.history, scheme.names, c["forecast"]["warn_at"], xlim, colours, ax=ax)
        out["probability"] = data_uri(fig)
    shown = [c for c in a.history.columns if c != "issue_date" and c not in scheme.names]
    if shown:
        fig, axes = new_figure(8, 1.2 * len(shown), len(shown), 1, sharex=True)
        drivers_plot(a.history, shown, xlim, np.atleast_1d(axes))
        out["drivers"] = data_uri(fig)
    return out


def _basis_text(c: dict[str, Any]) -> str:
    lab = c["in_force"]
    if c["level_basis"] == "outlook":
        return (f"raised by the outlook; the lab's level in force is {lab['level'] or 'not known'}")
    if lab["level"] is None:
        return "no lab result is known"
    return f"the level in force from the lab since the sample of {lab['set_by_sampled_at'][:10]}"


def _last_result(c: dict[str, Any]) -> str:
    o = c["observed"]
    if not o["last_sampled_at"]:
        return "no lab result is known"
    return (f"last result {cells(o['cyano_cells_per_ml'], o['censor'])} of cyanobacteria "
            f"({o['level']}), sample of {o['last_sampled_at']}, {duration(o['age_days'])} old")


def _outlook_line(c: dict[str, Any]) -> str:
    f = c["forecast"]
    if f["probabilities"] is None:
        return ("Not given today: the data are insufficient (see the headline). No figure of the "
                "model is shown.")
    parts = [f"{n} {percent(p)}" for n, p in f["probabilities"].items()]
    text = f"Chance within {f['horizon_days']} days: " + ", ".join(parts)
    raised = _raised_by_longer(f)
    return text + (f"; {raised}" if raised else "")


def _days(n: int) -> str:
    return f"{n} day" if n == 1 else f"{n} days"


def _raised_by_longer(f: dict[str, Any]) -> str:
    """Words for a warning raised by a horizon longer than the headline one, or ''."""
    level = f["level"]
    within = (f.get("warned_within") or {}).get(level) if level else None
    if not within or within <= f["horizon_days"]:
        return ""
    p = f["outlook"]["by_level"][level][within - 1]
    return f"{level} warned by the {within}-day outlook ({percent(p)} within {within} days)"


STRIP_DAYS = (1, 2, 3, 5, 7, 10, 14)
"""Horizons [d] the text summary lists (the page shows every one)."""


def _outlook_days_text(f: dict[str, Any]) -> str:
    """The outlook by days ahead in one line per level, for the text summary."""
    days = [d for d in STRIP_DAYS if d <= len(f["outlook"]["days"])]
    return "; ".join(f"{n}: " + ", ".join(f"{d}d {percent(v[d - 1])}" for d in days)
                     for n, v in f["outlook"]["by_level"].items())


def _reliability_text(f: dict[str, Any]) -> str:
    """One line: how past out-of-season forecasts like today's came out."""
    r = f.get("reliability")
    if not r:
        return ("No record yet of how past forecasts like today's came out (too few seasons "
                "with lab results).")
    return (f"Of past days given {r['low']:.0%}-{r['high']:.0%} for {r['level']} within "
            f"{r['horizon_days']} days (forecast without their own season), {percent(r['observed'])}"
            f" reached it ({r['n']:,} days).")


def _strip_cell(p: float, warned: bool, headline: bool) -> str:
    """One cell of the outlook strip: the chance as text on a shade as deep as the chance."""
    ink = "#fff" if p >= 0.55 else "#1b2a35"
    style = f"background:rgba(40,86,120,{0.08 + 0.92 * p:.2f});color:{ink}"
    cls = " class='warned'" if warned else (" class='head'" if headline else "")
    return f"<td{cls} style='{style}'>{e(percent(p).rstrip('%'))}</td>"


def _outlook_strip(f: dict[str, Any]) -> str:
    """The outlook as a small days-ahead by level table (percent chance of reaching the level
    within that many days), the headline horizon marked, the cells that raise a warning
    outlined."""
    days = f["outlook"]["days"]
    head = "".join(f"<th{' class=head' if d == f['horizon_days'] else ''}>{d}</th>"
                   for d in days)
    rows = []
    for name, values in f["outlook"]["by_level"].items():
        threshold = f["warn_at"][name]
        cells_html = "".join(_strip_cell(p, d <= f["warn_horizon_days"] and p >= threshold,
                                         d == f["horizon_days"])
                             for d, p in zip(days, values, strict=True))
        rows.append(f"<tr><th class='lvl'>{e(name)}</th>{cells_html}</tr>")
    return (f"<div class='wide'><table class='outlook-strip'><caption>Chance (%) of reaching each "
            f"level within 1 to {len(days)} days ahead; outlined: at or above the level's warning "
            f"threshold within {f['warn_horizon_days']} days</caption><tr><th>Days ahead</th>"
            f"{head}</tr>{''.join(rows)}</table></div>")


def _toxin_lines(c: dict[str, Any]) -> list[str]:
    out = []
    for t in c["toxins"]:
        exceeded = [g for g in t["guideline_values"] if g["exceeded"]]
        what = MEASURE_WORDS.get(t["measure"], t["measure"])
        value = f"{'<' if t['censor'] == '<' else ''}{number(t['value_ug_per_l'], 'ug/L')}"
        if exceeded:
            g = exceeded[-1]
            out.append(f"{what} {value} (sample of {t['sampled_at'][:10]}): ABOVE the {g['what']} "
                       f"of {number(g['value_ug_per_l'], 'ug/L')}")
        else:
            lowest = t["guideline_values"][0]
            out.append(f"{what} {value} (sample of {t['sampled_at'][:10]}): below the "
                       f"{lowest['what']} of {number(lowest['value_ug_per_l'], 'ug/L')}")
    return out


def _sampling_line(c: dict[str, Any], source: bool = False) -> str:
    s = c["sampling"]
    if s is None or s["next_due"] is None:
        return "no sample known: take one"
    due = date(pd.Timestamp(s["next_due"]))
    why = f": {s['source']}" if source else ""
    text = f"due {due} (every {s['every_days']:g} days at this level{why})"
    return ("OVERDUE: " + text) if s["overdue"] else text


def _summary(a: Assessment, c: dict[str, Any]) -> str:
    scheme = a.spec.scheme
    level = scheme.level(a.level_rank)
    colour = level_colour(level) if a.level_rank is not None else INSUFFICIENT_COLOUR
    name = c["level"] or "level not known"
    note = {STATUS_ASSESSED: "", STATUS_NONE: "no assessment today"}.get(c["status"],
                                                                        "no outlook: insufficient data")
    facts = [("Level stated", f"{e(name)}: {e(_basis_text(c))}"),
             ("Outlook", e(_outlook_line(c)))]
    for line in _toxin_lines(c):
        facts.append(("Toxins", e(line)))
    if c["sampling"] is not None:
        facts.append(("Next sample", e(_sampling_line(c))))
    facts.append(("Since the last report", "<br>".join(e(x) for x in c["changes"]) or "n/a"))
    facts.append(("What to do", "<br>".join(e(x) for x in c["actions"])))
    facts.append(("Who decides", e(c["deferral"])))
    rows = "".join(f"<dt>{k}</dt><dd>{v}</dd>" for k, v in facts)
    return (f'<section id="summary" class="strip" style="border-color:{colour}">'
            f'{badge(name, a.role, colour, note)}'
            f'<p class="headline">{e(c["headline"])}</p><dl class="facts">{rows}</dl></section>')


def _outlook_section(c: dict[str, Any]) -> str:
    f = c["forecast"]
    if f["probabilities"] is None:
        return (f'<section id="outlook"><h2>Outlook</h2><p class="note">{e(_outlook_line(c))}</p>'
                '</section>')
    within = f.get("warned_within") or {}
    rows = "".join(
        f"<tr><td>{e(n)}</td><td class='num'>{percent(p)}</td>"
        f"<td class='num'>{percent(f['warn_at'][n])}</td>"
        f"<td>{'no' if not within.get(n) else 'yes, within ' + _days(within[n])}</td>"
        f"<td class='num'>{percent(f['climatology'][n])}</td><td class='num'>"
        + ("n/a" if f["persistence"][n] is None else percent(f["persistence"][n]))
        + "</td></tr>" for n, p in f["probabilities"].items())
    band = f["peak_band"]
    high = "" if band["high"] is None else f" to {band['high']:,.0f}"
    band_text = (f"Most likely peak count within {f['horizon_days']} days: {band['low']:,.0f}{high}"
                 f"{'' if band['high'] is not None else ' and more'} "
                 f"{MEASURE_UNITS.get(band['measure'], '')} ({band['level']}), "
                 f"{percent(band['probability'])} by the probabilities above.")
    lo, hi = f["interval_80_cells_per_ml"]
    count = (f"The count model's median of the peak: {cells(f['expected_cells_per_ml'])} "
             f"(80% interval {lo:,.0f} to {hi:,.0f}).")
    note = f"<p class='note'>{e(f['count_note'])}</p>" if f["count_note"] else ""
    watch = ("<p class='note'>The level was raised by this site's tuned warning threshold, below "
             "50%: read it as a watch.</p>" if f["watch"] else "")
    family = {"ordinal": "the transparent ordinal model",
              "boosted": "gradient boosting with the drivers' directions imposed"}.get(
        f.get("family") or "", "the model")
    return f"""<section id="outlook"><h2>Outlook: chance of reaching each level within
{f['horizon_days']} days</h2><div class="wide"><table>
<tr><th>Level</th><th class="num">Chance</th><th class="num">Warn at</th>
<th>Warning (within {f['warn_horizon_days']} days)</th>
<th class="num">Usual for the time of year</th><th class="num">After results like the last</th></tr>
{rows}</table></div>{watch}
<h3>By days ahead</h3>{_outlook_strip(f)}
<p class="reliability">{e(_reliability_text(f))}</p>
<p>{e(band_text)}</p><p class="small">{e(count)}</p>{note}
<p class="small">Probabilities from {e(family)}, chosen for this site by its record of past
seasons (see the model card). Warning thresholds: {e(f['thresholds_source'])}.</p></section>"""


def _guideline(g: dict[str, Any]) -> str:
    memory = ", from memory" if g["status"] == "M" else ""
    return (("<strong>above</strong> " if g["exceeded"] else "below ") + e(g["what"]) + " "
            + number(g["value_ug_per_l"], "ug/L") + f" ({e(g['short'])}{memory})")


def _lab_section(c: dict[str, Any]) -> str:
    o, lab = c["observed"], c["in_force"]
    if o["last_sampled_at"]:
        last = (f"Last result known: sample of {e(o['last_sampled_at'])}, "
                f"{e(cells(o['cyano_cells_per_ml'], o['censor']))} of cyanobacteria "
                f"({e(o['level'])}), known since {e(o['known_since'])}, "
                f"{e(duration(o['age_days']))} before this issue.")
    else:
        last = "No lab result is known."
    force = (f"Level in force: {e(lab['level'])} since the sample of "
             f"{e(lab['set_by_sampled_at'])}; it steps down after "
             f"{lab['step_down_samples']} consecutive samples below it "
             f"({lab['samples_below_since']} so far). Rule: {e(lab['step_down_rule'])}."
             if lab["level"] is not None else "")
    toxin_rows = "".join(
        f"<tr><td>{e(MEASURE_WORDS.get(t['measure'], t['measure']))}</td>"
        f"<td>{e(t['sampled_at'] or '')}</td><td class='num'>"
        f"{'&lt;' if t['censor'] == '<' else ''}{number(t['value_ug_per_l'])}</td>"
        f"<td>{'<br>'.join(_guideline(g) for g in t['guideline_values'])}</td></tr>"
        for t in c["toxins"])
    toxins = (f"<h3>Toxins</h3><div class='wide'><table><tr><th>Toxin</th><th>Sampled</th>"
              f"<th class='num'>ug/L</th><th>Guideline values</th></tr>{toxin_rows}</table></div>"
              if c["toxins"] else "")
    levels = "".join(
        f"<li>{e(n)}: " + ", ".join(_threshold_text(t) for t in ths) + "</li>"
        for n, ths in zip(c["scheme"]["levels"], c["scheme"]["thresholds"], strict=True))
    return f"""<section id="lab"><h2>Lab results</h2><p>{last}</p><p>{force}</p>
<p>Next sample: {e(_sampling_line(c, source=True))}.</p>{toxins}
<p class="small">Levels of the scheme ({e(c['scheme']['title'])}):</p><ul class="small">{levels}</ul>
</section>"""


def _drivers_section(c: dict[str, Any]) -> str:
    f = c["forecast"]
    if not f["drivers"]:
        return ('<section id="drivers"><h2>What drives the outlook</h2><p>Not given: no outlook '
                'today.</p></section>')
    rows = "".join(
        f"<tr><td>{e(d['label'])}</td><td class='num'>{e(number(d['value'], d['unit']))}</td>"
        f"<td class='num'>{e(number(d['normal'], d['unit']))}</td>"
        f"<td>{e((d['strength'] + ' ' if d['strength'] else '') + d['direction'])}</td></tr>"
        for d in f["drivers"])
    texts = "".join(f"<li>{e(d['text'])}</li>" for d in f["drivers"][:4])
    missing = (f"<p class='small'>No value today (a typical one was used): "
               f"{e(', '.join(f['missing_drivers']))}</p>" if f["missing_drivers"] else "")
    left_out = c["model"].get("left_out") or []
    dropped = ("<p class='small'>Left out of the model because their fitted effect ran against "
               "the direction the literature gives them: "
               + e("; ".join(driver_label(d["driver"]) for d in left_out)) + ".</p>"
               if left_out else "")
    notes = c["model"].get("driver_notes") or []
    station = ("<p class='small'>What this station does not record: "
               + e("; ".join(notes)) + ".</p>" if notes else "")
    return f"""<section id="drivers"><h2>What drives the outlook</h2>
<p class="small">Each driver today against its usual value for the time of year, and whether the
difference raises or lowers the risk. Warmth, light, calm spells and a high count raise it; wind
and heavy rain lower it (directions from the literature; each driver's source is in the driver
glossary).</p><ul>{texts}</ul><div class="wide"><table>
<tr><th>Driver</th><th class="num">Today</th><th class="num">Usual</th><th>Effect</th></tr>
{rows}</table></div>{missing}{dropped}{station}</section>"""


def render_html(a: Assessment) -> str:
    """The self-contained HTML page."""
    c = report_document(a)
    fr, m = c["freshness"], c["model"]
    figs = figures(a, c) if c["status"] != STATUS_NONE else {}
    quality = "".join(f"<li>{e(str(q))}</li>" for q in c["quality"].get("notes", [])) or \
        "<li>No data-quality notes.</li>"
    caution_items = "".join(f"<li>{e(x)}</li>" for x in c["cautions"])
    plots = ""
    if figs:
        prob = (f'<img alt="Chance of reaching each level, day by day" src="{figs["probability"]}">'
                if "probability" in figs else
                '<p class="note">No outlook plot: the data are insufficient for an outlook.</p>')
        shown = ", ".join(driver_label(c) for c in a.history.columns
                          if c != "issue_date" and c not in a.spec.levels)
        drivers = (f'<img alt="Weather drivers: {e(shown)}" src="{figs["drivers"]}">'
                   if "drivers" in figs else "")
        plots = f"""<section id="plots"><h2>Plots of the last {a.spec.history_days} days</h2>
<img alt="Lab counts on a log scale with the level thresholds" src="{figs['counts']}">
{prob}
{drivers}</section>"""
    weather_age = ("n/a" if fr["weather_age_days"] is None
                   else f"{duration(fr['weather_age_days'])} before the issue")
    o = c["observed"]
    sample_age = "n/a" if o["age_days"] is None else f"{duration(o['age_days'])} old"
    trained = " to ".join(m["training_window"] or ["?", "?"])
    return f"""<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>{e(c['site']['name'])}: bloom risk {e(c['as_of'])}</title>
<style>{CSS}</style></head><body>
<header><h1>{e(c['site']['name'])}: cyanobacterial bloom risk</h1>
<p class="sub">For {e(date(pd.Timestamp(c['as_of'])))}, issued {e(c['issue_time_local'])};
intended use: {e(c['site']['use'])}; scheme: {e(c['scheme']['title'])} ({c['scheme']['year']}).</p>
</header>
{_summary(a, c)}
{_outlook_section(c)}
{_lab_section(c)}
<section id="cautions"><h2>Health cautions</h2><ul>{caution_items}</ul></section>
<div class="details">
{_drivers_section(c)}
<section id="freshness"><h2>Data freshness</h2><table>
<tr><th>Last weather reading</th><td>{e(str(fr['last_weather_local'] or 'none'))} ({e(weather_age)})</td></tr>
<tr><th>Last sample</th><td>{e(str(o['last_sampled_at'] or 'none'))} ({e(sample_age)})</td></tr>
<tr><th>Lab delay assumed</th><td>{number(fr['lab_delay_days'])} days when no reported date</td></tr>
</table></section>
{plots}
<section id="quality"><h2>Data quality</h2><ul>{quality}</ul></section>
<section id="model"><h2>Model</h2><p class="small">cyanorisk {e(m['cyanorisk_version'])};
trained on issue days {e(trained)}; training data fingerprint {e(str(m['fingerprint'])[:16])}.
Scheme source: {e(c['scheme']['source'])}.</p></section>
</div>
<section id="deferral"><p class="deferral">{e(c['deferral'])}</p></section>
</body></html>
"""


def render_json(a: Assessment) -> str:
    """The JSON document (see report.schema.json)."""
    return json.dumps(report_document(a), indent=2, default=str)


def render_text(a: Assessment) -> str:
    """A plain-text summary for e-mail: the same statements as the page's summary strip."""
    c = report_document(a)
    lines = [f"{c['site']['name']} - bloom risk for {c['as_of']} (issued {c['issue_time_local']})",
             "", c["headline"], "",
             f"Level stated: {c['level'] or 'not known'} ({_basis_text(c)}).",
             f"Lab: {_last_result(c)}",
             f"Outlook: {_outlook_line(c)}"]
    if c["forecast"].get("outlook"):
        lines += [f"By days ahead: {_outlook_days_text(c['forecast'])}",
                  f"Track record: {_reliability_text(c['forecast'])}"]
    lines += [f"Toxins: {t}" for t in _toxin_lines(c)]
    if c["sampling"] is not None:
        lines.append(f"Next sample: {_sampling_line(c)}")
    lines += ["", "Since the last report:"] + [f"- {x}" for x in c["changes"]]
    lines += ["", "What to do:"] + [f"- {x}" for x in c["actions"]]
    lines += ["", "Cautions:"] + [f"- {x}" for x in c["cautions"]]
    lines += ["", c["deferral"]]
    return "\n".join(lines) + "\n"
