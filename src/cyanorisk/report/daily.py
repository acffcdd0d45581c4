"""The daily report of a site, rendered three ways: a self-contained HTML page (plots inline, no
network resources, readable when printed), the JSON document (``report.schema.json``) and a
plain-text summary for e-mail. Rendering only: the numbers come from
:func:`cyanorisk.forecast.assess`.
"""

from __future__ import annotations

import html
import json
from typing import Any

from cyanorisk.drivers import driver_label
from cyanorisk.forecast import HISTORY_DRIVERS, STATUS_ASSESSED, STATUS_NONE, Assessment
from cyanorisk.report.document import report_document
from cyanorisk.report.figures import data_uri, new_figure
from cyanorisk.report.plots import counts_plot, drivers_plot, probability_plot

CSS = """
body { font-family: system-ui, -apple-system, 'Segoe UI', sans-serif; margin: 1.5em auto;
       max-width: 60em; color: #1a1a1a; line-height: 1.4; }
h1 { font-size: 1.4em; margin-bottom: 0.1em; } h2 { font-size: 1.1em; margin-top: 1.4em;
     border-bottom: 1px solid #ccc; }
.sub { color: #555; margin-top: 0; }
.headline { padding: 0.8em 1em; border: 2px solid #333; border-radius: 6px; font-size: 1.15em; }
.headline.level-0 { border-color: #2e7d32; } .headline.level-1 { border-color: #b8860b; }
.headline.level-2, .headline.level-3 { border-color: #8b0000; }
.headline.insufficient { border-color: #555; background: #f2f2f2; }
table { border-collapse: collapse; margin: 0.4em 0; } td, th { padding: 0.2em 0.8em;
        border-bottom: 1px solid #ddd; text-align: left; } th { background: #f4f4f4; }
.deferral { font-weight: 600; padding: 0.6em 1em; border-left: 4px solid #333; background: #fafafa; }
img { max-width: 100%; } .small { font-size: 0.85em; color: #444; }
@media print { body { margin: 0; max-width: none; } .headline { break-inside: avoid; }
               img { break-inside: avoid; } }
"""


def _fmt_cells(v: float | None, censor: str | None = None) -> str:
    if v is None:
        return "none"
    prefix = censor if censor in ("<", ">") else ""
    return f"{prefix}{v:,.0f} cells/mL"


MEASURE_UNITS = {"cyano_cells_per_ml": "cyanobacteria cells/mL",
                 "toxic_cells_per_ml": "toxin-producer cells/mL",
                 "biovolume_mm3_per_l": "mm3/L biovolume", "chl_a_ug_per_l": "ug/L chlorophyll-a",
                 "microcystin_ug_per_l": "ug/L microcystins"}


def _strength(log_odds: float) -> str:
    """A word for the size of a driver's push (log-odds in brackets for the record)."""
    size = abs(log_odds)
    word = "strong" if size >= 2 else "moderate" if size >= 0.7 else "slight"
    return f"{word} ({log_odds:+.2f})"


def figures(a: Assessment, c: dict[str, Any]) -> dict[str, str]:
    """The report's plots as PNG data URIs."""
    names = c["scheme"]["levels"]
    lines = []
    for name, thresholds in zip(names, c["scheme"]["thresholds"], strict=True):
        cells = [t["value"] for t in thresholds if t["measure"] == "cyano_cells_per_ml"]
        if cells:
            lines.append((name, cells[0]))
    out = {}
    fig, ax = new_figure(8, 3)
    counts_plot(a.counts, lines, c["site"]["timezone"], ax=ax)
    out["counts"] = data_uri(fig)
    fig, ax = new_figure(8, 2.5)
    probability_plot(a.history, names, c["forecast"]["warn_at"], ax=ax)
    out["probability"] = data_uri(fig)
    fig, axes = new_figure(8, 6, len(HISTORY_DRIVERS), 1, sharex=True)
    drivers_plot(a.history, list(HISTORY_DRIVERS), axes)
    fig.suptitle("Weather drivers at each issue time", fontsize=9)
    out["drivers"] = data_uri(fig)
    return out


def _render_no_assessment(c: dict[str, Any]) -> str:
    e = html.escape
    cautions = "".join(f"<li>{e(x)}</li>" for x in c["cautions"])
    return f"""<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8">
<title>{e(c['site']['name'])}: no assessment {e(c['as_of'])}</title><style>{CSS}</style></head>
<body><h1>{e(c['site']['name'])}: cyanobacterial bloom risk</h1>
<p class="sub">For {e(c['as_of'])} at {e(c['issue_time_local'])}.</p>
<section id="headline"><div class="headline insufficient">{e(c['headline'])}</div></section>
<section id="cautions"><h2>Health cautions</h2><ul>{cautions}</ul></section>
<section id="deferral"><p class="deferral">{e(c['deferral'])}</p></section>
</body></html>
"""


def render_html(a: Assessment) -> str:
    """The self-contained HTML page."""
    c = report_document(a)
    if c["status"] == STATUS_NONE:
        return _render_no_assessment(c)
    e = html.escape
    f, o, fr = c["forecast"], c["observed"], c["freshness"]
    assessed = c["status"] == STATUS_ASSESSED
    klass = f"level-{f['level_rank']}" if assessed else "insufficient"
    figs = figures(a, c)
    rows = "".join(
        f"<tr><td>{e(n)}</td><td>{f['probabilities'][n]:.0%}</td><td>{f['warn_at'][n]:.0%}</td>"
        f"<td>{'yes' if f['probabilities'][n] >= f['warn_at'][n] else 'no'}</td>"
        f"<td>{f['climatology'][n]:.0%}</td><td>"
        + ("n/a" if f["persistence"][n] is None else f"{f['persistence'][n]:.0%}")
        + "</td></tr>" for n in c["scheme"]["levels"])
    drivers = "".join(
        f"<tr><td>{e(driver_label(d['driver']))}</td><td>{d['value']:.3g}"
        f"{' (missing: typical value used)' if d.get('imputed') else ''}</td><td>{e(d['direction'])} "
        f"the risk</td><td>{_strength(d['log_odds'])}</td></tr>" for d in f["drivers"])
    level_values = "".join(
        f"<li>{e(n)}: " + ", ".join(f"{'&ge;' if t['inclusive'] else '&gt;'} {t['value']:,g} "
                                      f"{e(MEASURE_UNITS.get(t['measure'], t['measure']))}"
                                      for t in ths) + "</li>"
        for n, ths in zip(c["scheme"]["levels"], c["scheme"]["thresholds"], strict=True))
    quality = "".join(f"<li>{e(str(q))}</li>" for q in c["quality"].get("notes", [])) or \
        "<li>No data-quality notes.</li>"
    cautions = "".join(f"<li>{e(x)}</li>" for x in c["cautions"])
    observed = (f"Last sample {e(o['last_sampled_at'])}: {_fmt_cells(o['cyano_cells_per_ml'], o['censor'])}"
                f" ({e(o['level'])}), known since {e(o['known_since'])}, {o['age_days']:.0f} days "
                "before this issue" if o["last_sampled_at"] else "No lab result known yet.")
    lo, hi = f["interval_80_cells_per_ml"]
    missing = (f"<p class='small'>Missing drivers (imputed): {e(', '.join(f['missing_drivers']))}</p>"
               if f["missing_drivers"] else "")
    m = c["model"]
    if assessed:
        forecast_sections = f"""<section id="probabilities"><h2>Probability of reaching each level
within {f['horizon_days']} days</h2>
<table><tr><th>Level</th><th>Forecast</th><th>Warn at</th><th>Warning raised</th>
<th>Climatology</th><th>Persistence</th></tr>{rows}</table>
<p class="small">Climatology: how often the level was reached at this time of year in the
record. Persistence: the last observed level stays. Warning thresholds: {e(f['thresholds_source'])}.
Levels: </p><ul class="small">{level_values}</ul></section>

<section id="expected-count"><h2>Expected count at {f['horizon_days']} days</h2>
<p>{f['expected_cells_per_ml']:,.0f} cells/mL (80% interval {lo:,.0f} to {hi:,.0f}).</p></section>

<section id="drivers"><h2>What drives this forecast</h2>
<p class="small">Each driver's push on today's forecast compared with an average day of the
training record: a driver below its usual value can lower the risk even when it favours blooms
in general. Drivers overlap (warm water and degree-days rise together), so read them together.</p>
<table><tr><th>Driver</th><th>Value today</th><th>Effect</th><th>Strength</th></tr>{drivers}</table>
{missing}</section>"""
    else:
        forecast_sections = """<section id="probabilities"><h2>Forecast</h2>
<p><strong>Not shown: the data are insufficient</strong> (see the headline). Probabilities,
expected counts and drivers computed from stale or missing data would mislead.</p></section>
<section id="expected-count"></section><section id="drivers"></section>"""
    return f"""<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8">
<title>{e(c['site']['name'])}: bloom risk {e(c['as_of'])}</title>
<style>{CSS}</style></head><body>
<h1>{e(c['site']['name'])}: cyanobacterial bloom risk</h1>
<p class="sub">Issued for {e(c['as_of'])} at {e(c['issue_time_local'])}; intended use:
{e(c['site']['use'])}; scheme: {e(c['scheme']['title'])} ({c['scheme']['year']}).</p>
<section id="headline"><div class="headline {klass}">{e(c['headline'])}<br>
<span class="small">Observed: {observed}</span></div></section>

<section id="freshness"><h2>Data freshness</h2><table>
<tr><th>Last weather reading</th><td>{e(str(fr['last_weather_local']))}
({'n/a' if fr['weather_age_days'] is None else f"{fr['weather_age_days'] * 24:.1f} h before issue"})</td></tr>
<tr><th>Last sample</th><td>{e(str(o['last_sampled_at']))}
({'n/a' if o['age_days'] is None else f"{o['age_days']:.0f} days old"})</td></tr>
<tr><th>Lab delay assumed</th><td>{fr['lab_delay_days']:g} days when no reported date</td></tr>
</table></section>

{forecast_sections}

<section id="plots"><h2>Plots</h2>
<img alt="Cell counts of the last 120 days on a log scale with the alert-level lines" src="{figs['counts']}">
<img alt="Probability of reaching each level, last 120 days" src="{figs['probability']}">
<img alt="Weather drivers: water temperature, degree-days, wind run, calm hours, rain"
 src="{figs['drivers']}">
</section>

<section id="quality"><h2>Data quality</h2><ul>{quality}</ul></section>

<section id="cautions"><h2>Health cautions</h2><ul>{cautions}</ul></section>

<section id="deferral"><p class="deferral">{e(c['deferral'])}</p></section>

<section id="model"><h2>Model</h2><p class="small">cyanorisk {e(m['cyanorisk_version'])};
trained on issue days {e(' to '.join(m['training_window'] or ['?', '?']))}; training data
fingerprint {e(str(m['fingerprint'])[:16])}. Scheme source: {e(c['scheme']['source'])}.</p></section>
</body></html>
"""


def render_json(a: Assessment) -> str:
    """The JSON document (see report.schema.json)."""
    return json.dumps(report_document(a), indent=2, default=str)


def render_text(a: Assessment) -> str:
    """A plain-text summary for e-mail."""
    c = report_document(a)
    f, o = c["forecast"], c["observed"]
    lines = [f"{c['site']['name']} - bloom risk for {c['as_of']} (issued {c['issue_time_local']})",
             "", c["headline"], ""]
    if c["status"] == STATUS_NONE:
        return "\n".join(lines + ["Cautions:"] + [f"- {x}" for x in c["cautions"]]
                          + ["", c["deferral"]]) + "\n"
    if c["status"] != STATUS_ASSESSED:
        lines.append("No probabilities are given: the data are insufficient.")
        lines += ["", "Cautions:"] + [f"- {x}" for x in c["cautions"]] + ["", c["deferral"]]
        return "\n".join(lines) + "\n"
    if o["last_sampled_at"]:
        lines.append(f"Last sample: {o['last_sampled_at']}, "
                     f"{_fmt_cells(o['cyano_cells_per_ml'], o['censor'])} ({o['level']}), "
                     f"{o['age_days']:.0f} days old.")
    lines.append("Probability of reaching each level within "
                 f"{f['horizon_days']} days: "
                 + ", ".join(f"{n} {p:.0%}" for n, p in f["probabilities"].items()))
    lo, hi = f["interval_80_cells_per_ml"]
    lines.append(f"Expected count: {f['expected_cells_per_ml']:,.0f} cells/mL "
                 f"(80% interval {lo:,.0f} to {hi:,.0f}).")
    lines.append("Main drivers: " + "; ".join(f"{driver_label(d['driver'])} {d['direction']} the risk"
                                              for d in f["drivers"][:3]))
    lines += ["", "Cautions:"] + [f"- {x}" for x in c["cautions"]]
    lines += ["", c["deferral"]]
    return "\n".join(lines) + "\n"
