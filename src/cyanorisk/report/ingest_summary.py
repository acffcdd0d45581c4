"""The ingest quality summary, as plain text and as JSON-ready data."""

from __future__ import annotations

from cyanorisk.ingest.sites import SiteSamples, SiteWeather


def summary_data(weather: SiteWeather, samples: SiteSamples | None, outputs: list[str]) -> dict:
    """The per-site summary printed by ``cyanorisk ingest --json``."""
    site = weather.site
    data = {"site_id": site.id, "site_name": site.name, "weather": weather.meta.summary(),
            "samples": None, "outputs": outputs}
    if samples is not None:
        data["samples"] = {**samples.meta.summary(), "n_samples": int(len(samples.totals)),
                           "outside_weather": int(samples.totals["outside_weather"].sum())}
    return data


def _ledger_lines(by_reason: dict[str, int], rejects, indent: str) -> list[str]:
    """The rejects ledger in two lines: counts by reason, and the first entry."""
    if not by_reason:
        return []
    first = rejects.iloc[0]
    return [indent + "rejects ledger by reason: "
            + ", ".join(f"{k} {v:,}" for k, v in sorted(by_reason.items())),
            f"{indent}first: {first['file']}, line {first['line']}"
            + (f", column '{first['column']}'" if first["column"] else "") + f": {first['message']}"]


def _pct(part: int, whole: int) -> str:
    return f"{100 * part / whole:.1f}%" if whole else "n/a"


def summary_text(weather: SiteWeather, samples: SiteSamples | None, outputs: list[str]) -> str:
    """A short, readable quality summary of one site's ingest."""
    site, meta = weather.site, weather.meta
    a = meta.account
    span = (f"{meta.start:%Y-%m-%d %H:%M} to {meta.end:%Y-%m-%d %H:%M} UTC"
            if meta.start is not None else "no data")
    lines = [
        f"{site.name} ({site.id}): weather from {len(meta.files)} file(s), {span}, "
        f"grid of {int(meta.interval.total_seconds() // 60)} min",
        f"  rows read {a.read:,}: kept {a.kept:,}, identical duplicates merged "
        f"{a.duplicates_identical:,}, conflicting duplicates {a.duplicates_conflicting:,}, "
        f"off-grid {a.off_grid:,}, rejected {a.rejected:,}",
    ]
    lines += _ledger_lines(meta.summary()["ledger_by_reason"], meta.rejects, "  ")
    if meta.ambiguous_resolved or meta.nonexistent_rejected:
        lines.append(f"  daylight saving: {meta.ambiguous_resolved} stamp(s) in a repeated hour "
                     f"resolved by file order, {meta.nonexistent_rejected} in a skipped hour "
                     "rejected")
    for var, counts in meta.flag_counts.items():
        total = sum(counts.values())
        parts = [f"{k} {_pct(v, total)}" for k, v in counts.items() if k != "ok"]
        lines.append(f"  {var}: ok {_pct(counts.get('ok', 0), total)}"
                     + (", " + ", ".join(parts) if parts else ""))
    assumptions = meta.summary()["assumptions"]
    if assumptions:
        lines.append("  assumed: " + "; ".join(assumptions))
    if samples is not None:
        lines += _samples_text(samples)
    for out in outputs:
        lines.append(f"  wrote {out}")
    return "\n".join(lines)


def _samples_text(samples: SiteSamples) -> list[str]:
    m, totals = samples.meta, samples.totals
    a = m.account
    span = (f"{totals['sampled_at'].min():%Y-%m-%d} to {totals['sampled_at'].max():%Y-%m-%d}"
            if len(totals) else "none")
    lines = [f"  lab results: {len(m.files)} file(s), {len(totals):,} samples, {span}",
             f"    rows read {a.read:,}: kept {a.kept:,}, identical duplicates merged "
             f"{a.duplicates_identical:,}, conflicting duplicates {a.duplicates_conflicting:,}, "
             f"rejected {a.rejected:,}"]
    lines += _ledger_lines(m.summary()["ledger_by_reason"], m.rejects, "    ")
    if m.flag_counts:
        lines.append("    repaired or assumed: "
                     + ", ".join(f"{k} {v:,}" for k, v in sorted(m.flag_counts.items())))
    outside = int(totals["outside_weather"].sum()) if len(totals) else 0
    if outside:
        lines.append(f"    {outside} sample(s) fall outside the weather record (kept, marked)")
    censored = int((totals["cyano_censor"] == "<").sum()) if len(totals) else 0
    lines.append(f"    cyanobacteria total censored below detection in {censored} sample(s)")
    return lines
