"""The model card printed by ``cyanorisk train``: plain text."""

from __future__ import annotations

from typing import Any


def _fmt(x: float) -> str:
    return "n/a" if x is None or x != x else f"{x:.3f}"


def model_card_text(card: dict[str, Any], path: str) -> str:
    """A readable model card: window, counts, coefficients with 95% intervals, skill."""
    lines = [
        f"{card['site_name']} ({card['site_id']}): risk model, scheme {card['scheme']}, "
        f"horizon {card['horizon_days']} days",
        f"  training window {card['training_window'][0]} to {card['training_window'][1]}: "
        f"{card['issue_days']:,} issue days, {card['labelled_issue_days']:,} with a sample in "
        "the window",
        "  reached within the horizon: " + ", ".join(f"{k} {v:,}" for k, v in card["exceedances"].items()),
        "  coefficients (log-odds per driver unit, 95% interval; per standard deviation):",
    ]
    for c in card["coefficients"]:
        lines.append(f"    {c['driver']:<26} {c['per_unit']:>9.4f}  [{c['per_unit_low']:>9.4f}, "
                     f"{c['per_unit_high']:>9.4f}]   {c['per_sd']:>7.3f} per sd")
    lines.append("  skill (ROC AUC / Brier score):")
    for label, block in (("in sample", card["skill_in_sample"]),
                         ("cross-validated by season", card.get("skill_cross_validated"))):
        if not block:
            lines.append(f"    {label}: not available (too few seasons with both outcomes)")
            continue
        for level in card["levels"]:
            m, c = block["model"][level], block["climatology"][level]
            extra = ""
            if "persistence" in block:
                p = block["persistence"][level]
                extra = f"; persistence {_fmt(p['roc_auc'])} / {_fmt(p['brier'])}"
            lines.append(f"    {label}, {level}: model {_fmt(m['roc_auc'])} / {_fmt(m['brier'])}; "
                         f"climatology {_fmt(c['roc_auc'])} / {_fmt(c['brier'])}{extra} "
                         f"({m['events']:,} events in {m['n']:,})")
    family = card.get("family")
    if family:
        lines.append(f"  model family: {family['chosen']} ({family['reason']})")
        lines.append("  calibration on out-of-season forecasts: " + ", ".join(
            f"{level} {method}" for level, method in family["calibration"].items()))
        days = family.get("horizons_days") or []
        if days:
            lines.append(f"  outlook horizons: {days[0]} to {days[-1]} days")
    reliability = card.get("reliability_out_of_season") or {}
    if reliability:
        lines.append(f"  reliability of season-blocked forecasts at {card['horizon_days']} days "
                     "(forecast share: days, share that reached the level):")
        for level, rows in reliability.items():
            cells = [f"{r['low']:.0%}-{r['high']:.0%}: {r['n']:,}, "
                     + ("n/a" if r["observed"] is None else f"{r['observed']:.0%}")
                     for r in rows]
            lines.append(f"    {level}: " + "; ".join(cells))
    for note in card.get("driver_notes", []):
        lines.append(f"  {note}")
    lines.append(f"  saved {path}")
    return "\n".join(lines)
