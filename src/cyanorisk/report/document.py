"""The report's JSON document, built from an :class:`~cyanorisk.forecast.Assessment` in this one
place; the HTML page, the text summary and the store read it. Its schema is
``src/cyanorisk/data/report.schema.json`` (``cyanorisk-report/1``): fields are only ever added.
"""

from __future__ import annotations

from typing import Any

import pandas as pd

from cyanorisk.forecast import Assessment
from cyanorisk.levels import Scheme
from cyanorisk.version import __version__

SCHEMA = "cyanorisk-report/1"


def local_text(ts: pd.Timestamp | None, tz: str) -> str | None:
    """An instant as local wall-clock text with the zone's abbreviation."""
    if ts is None or pd.isna(ts):
        return None
    return pd.Timestamp(ts).tz_convert(tz).strftime("%Y-%m-%d %H:%M %Z")


def scheme_content(scheme: Scheme) -> dict[str, Any]:
    """The alert-level scheme as the report's JSON document carries it."""
    return {"key": scheme.key, "title": scheme.title, "source": scheme.source,
            "year": scheme.year, "levels": scheme.names,
            "thresholds": [[{"measure": t.measure, "value": t.value, "inclusive": t.inclusive,
                             "status": t.status} for t in lvl.thresholds] for lvl in scheme.levels]}


def _utc(ts: pd.Timestamp | None) -> str | None:
    return None if ts is None or pd.isna(ts) else pd.Timestamp(ts).tz_convert("UTC").isoformat()


def report_document(a: Assessment) -> dict[str, Any]:
    """The JSON-ready document of an assessment (see the schema)."""
    spec, f, o, fr, m = a.spec, a.forecast, a.observed, a.freshness, a.model
    tz = spec.timezone
    names = spec.levels
    thresholds = f.thresholds
    model: dict[str, Any] = {"cyanorisk_version": __version__,
                             "trained_with": m.trained_with, "training_window": m.training_window,
                             "fingerprint": m.fingerprint, "left_out": list(m.left_out),
                             "driver_notes": list(m.driver_notes)}
    if m.drivers is not None:
        model["drivers"] = m.drivers
    lab = a.in_force
    s = a.sampling
    return {
        "schema": SCHEMA,
        "site": {"id": spec.site_id, "name": spec.name, "use": spec.use, "timezone": tz},
        "as_of": str(a.as_of.date()), "issue_time_utc": a.issue.isoformat(),
        "issue_time_local": local_text(a.issue, tz),
        "status": a.status, "status_reasons": list(a.reasons), "headline": a.headline,
        "level": a.level, "level_rank": a.level_rank, "level_basis": a.level_basis,
        "in_force": {"level": lab.level, "level_rank": lab.rank,
                     "set_by_sampled_at": local_text(lab.set_by_sampled_at, tz),
                     "samples_below_since": lab.below_since,
                     "step_down_samples": lab.step_down_samples,
                     "step_down_rule": lab.step_down_rule},
        "actions": list(a.actions),
        "changes": list(a.changes),
        "sampling": None if s is None else {
            "every_days": s.every_days, "source": s.source,
            "last_sampled_at": local_text(s.last_sampled_at, tz),
            "next_due": None if s.next_due is None else str(s.next_due.date()),
            "overdue": s.overdue},
        "toxins": [{"measure": t.measure, "value_ug_per_l": t.value_ug_per_l, "censor": t.censor,
                    "sampled_at": local_text(t.sampled_at, tz),
                    "guideline_values": [{"value_ug_per_l": g.value_ug_per_l, "what": g.what,
                                          "source": g.source, "short": g.short,
                                          "status": g.status,
                                          "exceeded": g in t.above} for g in t.values]}
                   for t in a.toxins],
        "scheme": scheme_content(spec.scheme),
        "forecast": {
            "level_rank": f.level_rank, "level": f.level, "horizon_days": f.horizon_days,
            "watch": f.watch,
            "probabilities": None if f.probabilities is None else dict(f.probabilities),
            "warn_at": {n: thresholds.at(n) for n in names} if thresholds else {},
            "thresholds_source": thresholds.source if thresholds else "not applied",
            "thresholds_tuned": bool(thresholds and thresholds.tuned),
            "climatology": None if f.climatology is None else dict(f.climatology),
            "persistence": None if f.persistence is None else dict(f.persistence),
            "peak_band": f.peak_band,
            "expected_cells_per_ml": f.expected_cells_per_ml,
            "interval_80_cells_per_ml": (list(f.interval_80_cells_per_ml)
                                         if f.interval_80_cells_per_ml else None),
            "count_note": f.count_note,
            "drivers": list(f.drivers), "missing_drivers": list(f.missing_drivers),
            "outlook": None if f.outlook is None else {
                "days": list(range(1, f.outlook_days + 1)),
                "by_level": {n: list(v) for n, v in f.outlook.items()}},
            "warn_horizon_days": f.warn_horizon_days,
            "warned_within": dict(f.warned_within),
            "family": f.family,
            "reliability": f.reliability,
        },
        "observed": {
            "last_sampled_at": local_text(o.last_sampled_at, tz),
            "last_sampled_at_utc": _utc(o.last_sampled_at),
            "known_since": local_text(o.known_since, tz),
            "cyano_cells_per_ml": o.cyano_cells_per_ml, "censor": o.censor, "level": o.level,
            "age_days": o.age_days,
        },
        "freshness": {"last_weather_utc": _utc(fr.last_weather),
                      "last_weather_local": local_text(fr.last_weather, tz),
                      "weather_age_days": fr.weather_age_days, "lab_delay_days": fr.lab_delay_days},
        "quality": a.quality,
        "cautions": list(a.cautions),
        "deferral": a.deferral,
        "model": model,
    }


def report_stem(a: Assessment) -> str:
    """File name of a report without its suffix: ``<site id>_<date>``."""
    return f"{a.spec.site_id}_{a.as_of.date()}"


def read_document(paths: list[str]) -> dict[str, Any] | None:
    """The JSON document among a report's files, read back; None when it is gone or is not
    a JSON object."""
    import json
    from pathlib import Path

    doc = next((p for p in paths if p.endswith(".json")), None)
    if doc is None:
        return None
    try:
        value = json.loads(Path(doc).read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None
    return value if isinstance(value, dict) else None


def report_summary(doc: dict[str, Any]) -> dict[str, Any]:
    """What the overview and history pages show of a report, from its JSON document; recorded
    with the report in the store (so that those pages need no report file)."""
    o, f, fr, lab = doc["observed"], doc["forecast"], doc["freshness"], doc["in_force"]
    return {"site_name": doc["site"]["name"], "headline": doc["headline"],
            "level_basis": doc["level_basis"], "in_force_level": lab["level"],
            "last_count_cells_per_ml": o["cyano_cells_per_ml"], "last_count_censor": o["censor"],
            "last_count_level": o["level"], "last_sampled_at": o["last_sampled_at"],
            "sample_age_days": o["age_days"], "last_weather_local": fr["last_weather_local"],
            "weather_age_days": fr["weather_age_days"], "changes": list(doc["changes"]),
            "horizon_days": f["horizon_days"], "warn_horizon_days": f["warn_horizon_days"],
            "warned_within": dict(f["warned_within"] or {}),
            "status_reasons": list(doc["status_reasons"])}
