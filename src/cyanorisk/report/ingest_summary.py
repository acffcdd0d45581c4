"""The ingest quality summary as plain text, from the summary document the site pipeline keeps
beside the clean tables (``ingest_summary.json``; ``cyanorisk ingest --json`` prints it)."""

from __future__ import annotations

from typing import Any


def _ledger_lines(by_reason: dict[str, int], first: dict[str, Any] | None, indent: str) -> list[str]:
    """The rejects ledger in two lines: counts by reason, and the first entry."""
    if not by_reason:
        return []
    lines = [indent + "rejects ledger by reason: "
             + ", ".join(f"{k} {v:,}" for k, v in sorted(by_reason.items()))]
    if first:
        lines.append(f"{indent}first: {first['file']}, line {first['line']}"
                     + (f", column '{first['column']}'" if first["column"] else "")
                     + f": {first['message']}")
    return lines


def _pct(part: int, whole: int) -> str:
    return f"{100 * part / whole:.1f}%" if whole else "n/a"


def _account(a: dict[str, int], off_grid: bool = True) -> str:
    return (f"rows read {a['read']:,}: kept {a['kept']:,}, identical duplicates merged "
            f"{a['duplicates_identical']:,}, conflicting duplicates {a['duplicates_conflicting']:,}, "
            + (f"off-grid {a['off_grid']:,}, " if off_grid else "") + f"rejected {a['rejected']:,}")


def summary_text(summary: dict[str, Any]) -> str:
    """A short, readable quality summary of one site's ingest."""
    w = summary["weather"]
    span = (f"{w['start_utc'][:16].replace('T', ' ')} to {w['end_utc'][:16].replace('T', ' ')} UTC"
            if w["start_utc"] else "no data")
    lines = [f"{summary['site_name']} ({summary['site_id']}): weather from {len(w['files'])} "
             f"file(s), {span}, grid of {w['interval_minutes']:g} min",
             "  " + _account(w["rows"])]
    lines += _ledger_lines(w["ledger_by_reason"], w.get("first_reject"), "  ")
    if w["ambiguous_resolved"] or w["nonexistent_rejected"]:
        lines.append(f"  daylight saving: {w['ambiguous_resolved']} stamp(s) in a repeated hour "
                     f"resolved by file order, {w['nonexistent_rejected']} in a skipped hour "
                     "rejected")
    for var, counts in w["flags"].items():
        total = sum(counts.values())
        parts = [f"{k} {_pct(v, total)}" for k, v in counts.items() if k != "ok"]
        lines.append(f"  {var}: ok {_pct(counts.get('ok', 0), total)}"
                     + (", " + ", ".join(parts) if parts else ""))
    if w["assumptions"]:
        lines.append("  assumed: " + "; ".join(w["assumptions"]))
    lines += [f"  warning: {text}" for text in w.get("warnings", [])]
    if summary.get("samples") is not None:
        lines += _samples_text(summary["samples"], w.get("timezone"))
    if summary.get("reused"):
        lines.append("  the raw files are unchanged since the last ingest: clean tables reused")
    for out in summary.get("outputs", []):
        lines.append(f"  wrote {out}")
    return "\n".join(lines)


def _local_day(stamp: str, timezone: str | None) -> str:
    """The local calendar day of a UTC stamp ('2024-02-29 23:00:00+00:00' is 1 March in
    Melbourne): samples are dated as the lab dated them."""
    from datetime import datetime
    from zoneinfo import ZoneInfo

    when = datetime.fromisoformat(stamp)
    return str(when.astimezone(ZoneInfo(timezone)).date() if timezone else when.date())


def _samples_text(s: dict[str, Any], timezone: str | None = None) -> list[str]:
    span = (f"{_local_day(s['first_sampled'], timezone)} to "
            f"{_local_day(s['last_sampled'], timezone)} (local)") if s["n_samples"] else "none"
    lines = [f"  lab results: {len(s['files'])} file(s), {s['n_samples']:,} samples, {span}",
             "    " + _account(s["rows"], off_grid=False)]
    lines += _ledger_lines(s["ledger_by_reason"], s.get("first_reject"), "    ")
    if s["flags"]:
        lines.append("    repaired or assumed: "
                     + ", ".join(f"{k} {v:,}" for k, v in sorted(s["flags"].items())))
    if s["outside_weather"]:
        lines.append(f"    {s['outside_weather']} sample(s) fall outside the weather record "
                     "(kept, marked)")
    lines.append(f"    cyanobacteria total censored below detection in {s['censored_below']} "
                 "sample(s)")
    if s.get("unknown_taxa"):
        lines.append("    taxa not listed under [taxa], so not counted as cyanobacteria: "
                     + ", ".join(s["unknown_taxa"]))
    return lines
