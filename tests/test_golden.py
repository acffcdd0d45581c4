"""A golden end-to-end run, in the manner of a regression test (as pastas' tests/test_regression.py):
the session's fixed demo (8 years, the demo configuration's seed; tests/conftest.py) goes
through ingest, the training table, the fit and the assessment of fixed report days, and the
probabilities must equal the stored ones. A change of code that changes these numbers shows
here; when the change is meant, write the file anew and say why in the commit:

    CYANORISK_WRITE_GOLDEN=1 .venv/bin/python -m pytest tests/test_golden.py
"""

from __future__ import annotations

import json
import os
from pathlib import Path

import pytest

from cyanorisk.spec import Thresholds

GOLDEN = Path(__file__).parent / "data" / "golden" / "demo_8_years.json"
DAYS = ["2024-12-04", "2024-12-05", "2025-01-14"]
"""A day below Alert Level 1, the day the level rises, and the demo's last day."""
ABS_TOLERANCE = 1e-6
"""Probabilities may move by this much [-] (solver tolerance and floating-point order)."""


def numbers(demo_site) -> dict:
    from cyanorisk.forecast import assess

    spec = demo_site.spec
    out = {}
    for day in DAYS:
        a = assess(spec, demo_site.models, demo_site.weather, demo_site.totals, day,
                   Thresholds.default(spec.levels), demo_site.clean.rows)
        out[day] = {"probabilities": a.forecast.probabilities,
                    "climatology": a.forecast.climatology,
                    "level_rank": a.forecast.level_rank,
                    "last_count_cells_per_ml": a.observed.cyano_cells_per_ml}
    return {"site": spec.site_id, "issue_days": len(demo_site.table),
            "labelled": demo_site.models.card["labelled_issue_days"], "days": out}


def test_fixed_report_days_give_the_stored_probabilities(demo_site):
    got = numbers(demo_site)
    if os.environ.get("CYANORISK_WRITE_GOLDEN"):
        GOLDEN.write_text(json.dumps(got, indent=1) + "\n", encoding="utf-8")
        pytest.skip(f"wrote {GOLDEN}")
    want = json.loads(GOLDEN.read_text(encoding="utf-8"))
    assert (got["site"], got["issue_days"], got["labelled"]) == (
        want["site"], want["issue_days"], want["labelled"])
    for day in DAYS:
        g, w = got["days"][day], want["days"][day]
        assert g["level_rank"] == w["level_rank"], day
        assert g["last_count_cells_per_ml"] == w["last_count_cells_per_ml"], day
        for key in ("probabilities", "climatology"):
            assert list(g[key]) == list(w[key])
            assert g[key] == pytest.approx(w[key], abs=ABS_TOLERANCE), (day, key)
