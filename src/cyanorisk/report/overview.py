"""The pages over all sites, from the store: the overview ``reports_dir/index.html`` (one row per
site, the worse states first), and per site a stable ``latest.html`` (and ``latest.json``)
beside the dated reports and its history (``history.html`` and ``history.csv``: per day the
level stated, the probabilities, the last count, and every revision with its reason).

Rewritten by every daily run, atomically and with the user's umask; a file whose content is
unchanged is left alone. Self-contained pages: the style sheet inline, no external resource.

Order of the overview (worse first): the level stated (highest first), then the sites without a
current outlook (no report for the latest day, insufficient data, no assessment), then the
chance of the next level up, then the name.
"""

from __future__ import annotations

import csv
import html
import io
import re
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Any

from cyanorisk.atomic import write_group
from cyanorisk.forecast import STATUS_ASSESSED
from cyanorisk.levels import Role
from cyanorisk.report.style import CSS, INSUFFICIENT_COLOUR, badge, level_colour
from cyanorisk.words import cells, duration, percent

if TYPE_CHECKING:
    from cyanorisk.config import Config, Site
    from cyanorisk.service.store import IssuedReport, Store

e = html.escape

HISTORY_COLUMNS = ["as_of", "revision", "in_force", "issued_at", "status", "level", "level_basis",
                   "last_count_cells_per_ml", "last_count_censor", "last_sampled_at",
                   "sample_age_days", "weather_age_days", "reason"]
"""The columns of ``history.csv`` before the probabilities (``probability_<level>``, one per
level of the site's scheme: lower case, non-alphanumerics as '_'); one row per revision."""

OVERVIEW_CSS = """
body { max-width: 80em; }
table.sites col.site { width: 15%; } table.sites col.level { width: 11%; }
table.sites col.outlook { width: 32%; } table.sites col.changes { width: 19%; }
table.sites col.ages { width: 14%; } table.sites col.links { width: 9%; }
table.sites td, table.sites th { padding: 0.3em 0.45em; }
table.sites .badge { padding: 0.15em 0.5em 0.15em 0.3em; font-size: 0.85em; }
.probs { display: block; font-size: 0.82em; color: #444; }
.attention { color: #8a1c1c; font-weight: 600; }
.basis, .count { display: block; font-size: 0.82em; color: #444; }
.links a { white-space: nowrap; margin-right: 0.6em; }
.ages { white-space: nowrap; }
@media (max-width: 40em) {
  table.sites thead { display: none; }
  table.sites, table.sites tbody, table.sites tr, table.sites td { display: block; width: 100%; }
  table.sites tr { border: 1px solid #bbb; border-radius: 6px; margin: 0.5em 0; padding: 0.3em; }
  table.sites td { border: none; padding: 0.15em 0.3em; }
  table.sites td[data-label]::before { content: attr(data-label) ": "; font-weight: 600; }
}
@media print {
  @page { size: A4; margin: 10mm; }
  body { font-size: 7pt; line-height: 1.2; }
  table.sites { table-layout: fixed; }
  h1 { font-size: 11pt; } .sub { margin: 0 0 0.3em; }
  table.sites td, table.sites th { padding: 0.05em 0.25em; }
  table.sites .badge { font-size: 6.5pt; padding: 0 0.3em 0 0.1em; }
  table.sites .badge svg { width: 10px; height: 10px; }
  table.sites col.site { width: 14%; } table.sites col.level { width: 14%; }
  table.sites col.outlook { width: 37%; } table.sites col.changes { width: 17%; }
  table.sites col.ages { width: 18%; } table.sites col.links { width: 0; visibility: collapse; }
  .more, .said, .site-id, .basis { display: none; }
  .probs, .count { font-size: 1em; color: inherit; }
  .links { display: none; } .ages { white-space: normal; }
}
"""


def slug(name: str) -> str:
    """A level name as part of a column name: 'Alert Level 1' -> 'alert_level_1'."""
    return re.sub(r"[^0-9a-z]+", "_", name.lower()).strip("_")


@dataclass
class Row:
    """One site on the overview."""

    site: Site
    report: IssuedReport | None
    summary: dict[str, Any]
    current: bool
    """The report is for the latest day reported at any site."""

    @property
    def attention(self) -> str:
        """Why the site has no current outlook ('' when it has one)."""
        if self.report is None:
            return "no report recorded yet"
        if not self.current:
            return f"last report is for {self.report.as_of}"
        if self.report.status != STATUS_ASSESSED:
            reasons = self.summary.get("status_reasons") or []
            return self.report.status + (f": {reasons[0]}" if reasons else "")
        return ""

    def sort_key(self) -> tuple:
        rank = self.report.level_rank if self.report is not None else None
        probabilities = self.report.probabilities if self.report is not None else {}
        levels = self.site.spec.levels
        above = levels[rank] if rank is not None and rank < len(levels) else None
        chance = float(probabilities.get(above, 0.0) or 0.0) if above else 1.0
        return (-(rank or 0), 0 if self.attention else 1, -chance, self.site.spec.name.lower())


def _summary(report: IssuedReport | None) -> dict[str, Any]:
    """The report's summary; for a report recorded before summaries were, read from its JSON
    document when that is still there."""
    if report is None:
        return {}
    if report.summary:
        return report.summary
    from cyanorisk.report.document import read_document, report_summary

    doc = read_document(report.paths)
    try:
        return report_summary(doc) if doc is not None else {}
    except (KeyError, TypeError, AttributeError):  # a document of another shape
        return {}


def _level_cell(site: Site, report: IssuedReport | None, summary: dict[str, Any]) -> str:
    scheme = site.spec.scheme
    if report is None or report.level is None:
        return badge("not known", Role.NONE, INSUFFICIENT_COLOUR)
    level = scheme.level(report.level_rank)
    colour = level_colour(level) if report.level_rank is not None else INSUFFICIENT_COLOUR
    basis = summary.get("level_basis")
    said = {"lab": "from the lab's results", "outlook": "raised by the outlook"}.get(basis or "", "")
    count = summary.get("last_count_cells_per_ml")
    last = ("" if count is None else
            f'<span class="count"><span class="said">last count </span>'
            f'{e(cells(count, summary.get("last_count_censor")))}</span>')
    return (badge(report.level, scheme.role(report.level_rank), colour)
            + (f'<span class="basis">{e(said)}</span>' if said else "") + last)


def _outlook_cell(row: Row) -> str:
    """The report's headline, then its probabilities and any warning raised by a longer
    horizon (in print only the latter, to keep a row to two lines)."""
    r = row.report
    if r is None or not r.probabilities:
        return f'<span class="attention">{e(row.attention or "no outlook")}</span>'
    days = row.summary.get("horizon_days")
    probs = ", ".join(f"{name} {percent(p)}" for name, p in r.probabilities.items())
    probs += f" within {days} days" if days else ""
    longer = {name: d for name, d in (row.summary.get("warned_within") or {}).items()
              if d and days and d > days}
    if longer:
        name = list(longer)[-1]
        probs += f"; warning: {name} within {longer[name]} days"
    note = f'<br><span class="attention">{e(row.attention)}</span>' if row.attention else ""
    headline = row.summary.get("headline")
    said = f'<span class="said">{e(headline)}</span>' if headline else ""
    return f'{said}<span class="probs">{e(probs)}</span>{note}'


def _changes_cell(summary: dict[str, Any]) -> str:
    said = [x for x in summary.get("changes") or [] if not x.startswith("Compared with")]
    if not said:
        return "n/a"
    first = e(said[0])
    more = (f'<span class="more"><br>{"<br>".join(e(x) for x in said[1:])}</span>'
            if len(said) > 1 else "")
    return first + more


def _ages_cell(summary: dict[str, Any]) -> str:
    sample = summary.get("sample_age_days")
    weather = summary.get("weather_age_days")
    sample_text = "none" if sample is None else f"{duration(sample)} old"
    weather_text = "none" if weather is None else f"{duration(weather)} old"
    return (f'<span class="ages">sample {e(sample_text)}</span><br>'
            f'<span class="ages">weather {e(weather_text)}</span>')


def overview_html(rows: list[Row], title: str, latest_day: str | None) -> str:
    """The overview page (rows already in order)."""
    body = []
    for row in rows:
        sid = e(row.site.id)
        report_date = row.report.as_of if row.report is not None else "none"
        body.append(
            f'<tr data-site="{sid}"><td data-label="Site"><strong>{e(row.site.spec.name)}</strong>'
            f'<br><span class="small site-id">{sid}; report of {e(report_date)}</span></td>'
            f'<td data-label="Level stated">{_level_cell(row.site, row.report, row.summary)}</td>'
            f'<td data-label="Outlook">{_outlook_cell(row)}</td>'
            f'<td data-label="Since the previous report">{_changes_cell(row.summary)}</td>'
            f'<td data-label="Age of the last data">{_ages_cell(row.summary)}</td>'
            f'<td class="links"><a class="latest" href="{sid}/latest.html">latest report</a>'
            f'<a class="history" href="{sid}/history.html">history</a></td></tr>')
    attention = sum(1 for r in rows if r.attention)
    flagged = (f"; {attention} without a current outlook" if attention else "")
    return f"""<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>{e(title)}: bloom risk by site</title>
<style>{CSS}{OVERVIEW_CSS}</style></head><body>
<header><h1>{e(title)}: bloom risk by site</h1>
<p class="sub">{len(rows)} site(s), latest reports for {e(latest_day or 'no day yet')}{e(flagged)}.
Worse states first: the level stated, then sites without a current outlook, then the chance of
the next level. Advisories are the local water authority's decision under local codes; this
page supports, never replaces, them.</p></header>
<table class="sites"><colgroup><col class="site"><col class="level"><col class="outlook">
<col class="changes"><col class="ages"><col class="links"></colgroup>
<thead><tr><th>Site</th><th>Level stated</th><th>Outlook</th>
<th>Since the previous report</th><th>Age of the last data</th><th class="links">Pages</th></tr></thead>
<tbody>
{chr(10).join(body)}
</tbody></table>
</body></html>
"""


def history_rows(site: Site, reports: list[IssuedReport]) -> list[dict[str, Any]]:
    """One row per revision, oldest first, with the columns of ``history.csv``."""
    last_of_day = {r.as_of: r.revision for r in reports}
    out = []
    for r in reports:
        s = r.summary or (_summary(r) if r.revision == last_of_day[r.as_of] else {})
        row = {"as_of": r.as_of, "revision": r.revision,
               "in_force": r.revision == last_of_day[r.as_of], "issued_at": r.issued_at,
               "status": r.status, "level": r.level, "level_basis": s.get("level_basis"),
               "last_count_cells_per_ml": s.get("last_count_cells_per_ml"),
               "last_count_censor": s.get("last_count_censor"),
               "last_sampled_at": s.get("last_sampled_at"),
               "sample_age_days": s.get("sample_age_days"),
               "weather_age_days": s.get("weather_age_days"), "reason": r.reason}
        for name in site.spec.levels:
            p = (r.probabilities or {}).get(name)
            row[f"probability_{slug(name)}"] = p
        out.append(row)
    return out


def history_csv(site: Site, rows: list[dict[str, Any]]) -> str:
    columns = HISTORY_COLUMNS + [f"probability_{slug(n)}" for n in site.spec.levels]
    buffer = io.StringIO()
    writer = csv.DictWriter(buffer, fieldnames=columns, lineterminator="\n")
    writer.writeheader()
    for row in rows:
        writer.writerow({k: ("" if v is None else v) for k, v in row.items()})
    return buffer.getvalue()


def history_html(site: Site, rows: list[dict[str, Any]]) -> str:
    """The history page: per day (newest first) the level stated, its probabilities and the
    last count, with every revision of the day and why it was issued."""
    spec = site.spec
    by_day: dict[str, list[dict[str, Any]]] = {}
    for row in rows:
        by_day.setdefault(row["as_of"], []).append(row)
    heads = "".join(f"<th class='num'>{e(n)}</th>" for n in spec.levels)
    body = []
    for day in sorted(by_day, reverse=True):
        revisions = by_day[day]
        top = next(r for r in revisions if r["in_force"])
        probs = "".join(f"<td class='num'>{percent(top[f'probability_{slug(n)}'])}</td>"
                        for n in spec.levels)
        count = ("none" if top["last_count_cells_per_ml"] is None else
                 cells(top["last_count_cells_per_ml"], top["last_count_censor"]))
        sampled = f" ({e(str(top['last_sampled_at']))})" if top["last_sampled_at"] else ""
        why = "<br>".join(f"revision {r['revision']} ({e(str(r['issued_at'])[:16])}): "
                          f"{e(r['level'] or r['status'])}; {e(r['reason'])}" for r in revisions)
        status = ("" if top["status"] == STATUS_ASSESSED else
                  f"<br><span class='small'>{e(top['status'])}</span>")
        body.append(f'<tr data-day="{e(day)}"><td class="day">{e(day)}</td>'
                    f"<td>{e(top['level'] or 'not known')}{status}</td>"
                    f"<td>{e(top['level_basis'] or 'n/a')}</td>{probs}"
                    f"<td>{e(count)}{sampled}</td><td class='small'>{why}</td></tr>")
    days = len(by_day)
    return f"""<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>{e(spec.name)}: report history</title>
<style>{CSS} td.day {{ white-space: nowrap; }}</style></head><body>
<header><h1>{e(spec.name)}: report history</h1>
<p class="sub">{days} day(s) reported, newest first; the figures are those of the revision in
force for the day, and every revision is listed with why it was issued. Probabilities are of
reaching each level within {spec.horizon_days} days. <a href="latest.html">Latest report</a> ·
<a href="../index.html">all sites</a> · the same as a table: <a href="history.csv">history.csv</a>.
</p></header>
<div class="wide"><table><thead><tr><th>Day</th><th>Level stated</th><th>Basis</th>{heads}
<th>Last count</th><th>Revisions</th></tr></thead><tbody>
{chr(10).join(body)}
</tbody></table></div>
<p class="deferral">Advisories are the local water authority's decision under local codes; these
reports support, never replace, them.</p>
</body></html>
"""


def _unchanged(path: Path, data: bytes) -> bool:
    try:
        return path.stat().st_size == len(data) and path.read_bytes() == data
    except OSError:
        return False


def _stage(writers: dict[Path, Any], path: Path, data: bytes) -> None:
    if not _unchanged(path, data):
        writers[path] = lambda tmp, data=data: tmp.write_bytes(data)


def write_overview(config: Config, store: Store) -> list[Path]:
    """Rewrite the overview, each site's latest page and its history from the store; the
    files written (those whose content changed)."""
    from cyanorisk.pipeline.workspace import SiteWorkspace, overview_file

    by_site: dict[str, list[IssuedReport]] = {s.id: [] for s in config.sites}
    for r in store.reports():
        if r.site_id in by_site:
            by_site[r.site_id].append(r)
    days = [r.as_of for rs in by_site.values() for r in rs]
    latest_day = max(days) if days else None
    writers: dict[Path, Any] = {}
    rows = []
    for site in config.sites:
        reports = sorted(by_site[site.id], key=lambda r: (r.as_of, r.revision))
        latest = reports[-1] if reports else None
        ws = SiteWorkspace.of(config, site.id)
        rows.append(Row(site, latest, _summary(latest),
                        latest is not None and latest.as_of == latest_day))
        if latest is None:
            continue
        for suffix in ("html", "json"):
            source = next((Path(p) for p in latest.paths if p.endswith(f".{suffix}")), None)
            if source is not None and source.exists():
                _stage(writers, ws.latest_file(suffix), source.read_bytes())
        history = history_rows(site, reports)
        _stage(writers, ws.history_file("csv"), history_csv(site, history).encode("utf-8"))
        _stage(writers, ws.history_file("html"), history_html(site, history).encode("utf-8"))
    rows.sort(key=Row.sort_key)
    title = config.sites[0].spec.name if len(config.sites) == 1 else "All sites"
    _stage(writers, overview_file(config.reports_dir),
           overview_html(rows, title, latest_day).encode("utf-8"))
    return write_group(writers) if writers else []
