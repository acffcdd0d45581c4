"""The threshold explorer of the backtest page: a slider per level for the warning probability,
and what that threshold would have given over the seasons replayed (hits, misses and false
alarms in days, the false-alarm ratio, the lead time of each season's first exceedance).

Plain JavaScript inside the page, no library, no network. It computes from the backtest's own
warning forecasts, embedded in the page, with the rules of :func:`cyanorisk.tuning.sweep`
(counts as :func:`cyanorisk.verify.contingency`, lead times as
:func:`cyanorisk.verify.lead_time_days`), so that its numbers are those ``cyanorisk tune``
tabulates for the same threshold (a browser test checks that they are).
"""

from __future__ import annotations

import html
import json
from typing import Any

import numpy as np
import pandas as pd

from cyanorisk.backtest import warning_view

DAY = np.timedelta64(1, "D")


def _days(values: Any) -> list[int]:
    """Dates as whole days since 1970-01-01."""
    d = np.asarray(pd.to_datetime(pd.Series(values)).to_numpy(dtype="datetime64[D]"))
    return [int(x) for x in (d - np.datetime64("1970-01-01", "D")) // DAY]


def _number(x: float) -> float | None:
    return None if x != x else float(x)


def explorer_data(result, names: list[str]) -> dict[str, Any]:
    """The forecasts the explorer needs, per level and season: issue days, warning
    probabilities and outcomes (null where none), and the season's first exceedance."""
    f = warning_view(result.forecasts) if len(result.forecasts) else result.forecasts
    ex = result.exceedances
    levels = []
    for name in names:
        rows = f[(f["level"] == name) & f["probability"].notna()] if len(f) else f
        first = {int(s): t for s, t in zip(ex.loc[ex["level"] == name, "season"],
                                          ex.loc[ex["level"] == name, "first_exceedance"],
                                          strict=True)}
        seasons = []
        for s, g in rows.groupby("season", sort=True):
            t = first.get(int(s))
            seasons.append({"season": int(s), "days": _days(g["issue_date"]),
                            "p": [float(x) for x in g["probability"]],
                            "o": [_number(x) for x in g["outcome"].astype(float)],
                            "first": None if t is None or pd.isna(t) else _days([t])[0]})
        horizon = int(rows["horizon_days"].iloc[0]) if len(rows) else 7
        levels.append({"level": name, "horizon_days": horizon, "seasons": seasons})
    return {"levels": levels}


SCRIPT = r"""
(function () {
  var data = JSON.parse(document.getElementById("explorer-data").textContent);
  function leadTime(days, warned, first, horizon) {
    // cyanorisk.verify.lead_time_days, for one season
    if (first === null || !warned.some(Boolean)) return null;
    var k = -1;
    for (var i = 0; i < days.length; i++) if (warned[i] && days[i] <= first) k = i;
    if (k >= 0 && first - days[k] <= horizon) {
      while (k > 0 && warned[k - 1] && days[k] - days[k - 1] === 1) k--;
      return first - days[k];
    }
    for (var j = 0; j < days.length; j++) if (warned[j] && days[j] > first) return -(days[j] - first);
    return null;
  }
  function leadWords(lead, first) {
    if (first === null) return "no exceedance";
    if (lead === null) return "not warned";
    if (lead > 0) return lead + " day" + (lead === 1 ? "" : "s") + " ahead";
    if (lead === 0) return "on the day";
    return (-lead) + " day" + (lead === -1 ? "" : "s") + " late";
  }
  function update(panel, level) {
    var slider = panel.querySelector("input[type=range]");
    var threshold = Number((Number(slider.value) / 100).toFixed(2));
    var hits = 0, misses = 0, falseAlarms = 0, leads = [];
    level.seasons.forEach(function (s) {
      var warned = s.p.map(function (p) { return p >= threshold; });
      for (var i = 0; i < s.p.length; i++) {
        if (s.o[i] === null) continue;
        if (warned[i] && s.o[i] === 1) hits++;
        else if (warned[i]) falseAlarms++;
        else if (s.o[i] === 1) misses++;
      }
      var lead = leadTime(s.days, warned, s.first, level.horizon_days);
      if (lead !== null) leads.push(lead);
      panel.querySelector('.lead[data-season="' + s.season + '"]').textContent = leadWords(lead, s.first);
    });
    var far = hits + falseAlarms > 0 ? falseAlarms / (hits + falseAlarms) : null;
    var mean = leads.length ? leads.reduce(function (a, b) { return a + b; }, 0) / leads.length : null;
    panel.querySelector(".threshold").textContent = threshold.toFixed(2);
    panel.querySelector(".hits").textContent = hits;
    panel.querySelector(".misses").textContent = misses;
    panel.querySelector(".false-alarms").textContent = falseAlarms;
    panel.querySelector(".far").textContent = far === null ? "n/a" : far.toFixed(3);
    panel.querySelector(".mean-lead").textContent = mean === null ? "n/a" : mean.toFixed(1);
  }
  data.levels.forEach(function (level, k) {
    var panel = document.querySelectorAll(".explorer-level")[k];
    var slider = panel.querySelector("input[type=range]");
    slider.addEventListener("input", function () { update(panel, level); });
    update(panel, level);
  });
})();
"""


def explorer_section(data: dict[str, Any], warn_at: dict[str, float]) -> str:
    """The explorer's section: a panel per level, the data, and the script."""
    e = html.escape
    panels = []
    for level in data["levels"]:
        name = level["level"]
        start = int(round(100 * warn_at.get(name, 0.3)))
        seasons = "".join(f'<tr><td>{s["season"]}-{s["season"] + 1}</td>'
                          f'<td class="lead" data-season="{s["season"]}"></td></tr>'
                          for s in level["seasons"])
        panels.append(
            f'<div class="explorer-level" data-level="{e(name)}"><h3>{e(name)}</h3>'
            f'<label>Warn at a chance of <output class="threshold">{start / 100:.2f}</output>'
            f'<br><input type="range" min="1" max="99" step="1" value="{start}" '
            f'aria-label="warning threshold for {e(name)}"></label>'
            f'<table class="explorer-counts"><tr><th>Hits (days)</th><td class="num hits"></td>'
            f'<th>Misses (days)</th><td class="num misses"></td></tr>'
            f'<tr><th>False alarms (days)</th><td class="num false-alarms"></td>'
            f'<th>False-alarm ratio</th><td class="num far"></td></tr>'
            f'<tr><th>Mean lead time (days)</th><td class="num mean-lead"></td>'
            f'<th>Horizon</th><td class="num">{level["horizon_days"]} days</td></tr></table>'
            f'<table class="explorer-leads"><tr><th>Season</th><th>First exceedance warned'
            f'</th></tr>{seasons}</table></div>')
    payload = json.dumps(data, separators=(",", ":")).replace("</", "<\\/")
    return f"""<section id="explorer"><h2>Try another threshold</h2>
<p class="small">Move a slider to see what warning at that chance would have given over these
seasons: the same counting as <code>cyanorisk tune</code> (days with a forecast and a known
outcome; the lead time of each season's first exceedance, as in "How early"). Nothing changes
until a manager accepts a tuned threshold.</p>
{''.join(panels)}
<script type="application/json" id="explorer-data">{payload}</script>
<script>{SCRIPT}</script></section>"""
