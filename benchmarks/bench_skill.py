"""Skill benchmark: how early and how reliably the forecasts warn, on the demo and on a record
the model has never seen.

Two scenarios are generated as a new user would have them (exports written to files, ingested
by the configuration that comes with them): the demo reservoir (:mod:`cyanorisk.demo`) and
Vessany Reservoir (:mod:`cyanorisk.scenario`: real hourly weather from a typical-year file,
blooms from a process model that is not the forecasting model). On each, the walk-forward
backtest replays the last half of the seasons exactly as ``cyanorisk backtest`` does, and a
plain logistic regression (scikit-learn) on the last count and a few smoothed temperatures is
replayed beside it on the same days, as a reference measured in the same run.

Printed per scenario, for Alert Level 1 at 7 days: ROC AUC, Brier skill against climatology and
against persistence (as a probability), and the median lead of the warning before the first
lab-confirmed sample of each season (and before its result was reported).

Targets on the second scenario: AUC >= 0.97, Brier skill >= 0.60 against climatology and
>= 0.30 against persistence, ahead of the reference on both, and a median lead of at least
7 days before the confirming sample. The last line is machine-readable.

Usage: python benchmarks/bench_skill.py [--seasons 12]
"""

from __future__ import annotations

import argparse
import re
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import pandas as pd

sys.path.insert(0, str(Path(__file__).resolve().parent))
from bench_backtest import site_record
from cyanorisk.backtest import walk_forward
from cyanorisk.config import embedded_demo_text
from cyanorisk.demo import write_demo
from cyanorisk.model import prepare
from cyanorisk.scenario import write_scenario
from cyanorisk.spec import Thresholds
from cyanorisk.training import outcomes, season_of
from cyanorisk.verify import brier_skill_score, roc_auc

LEVEL = "Alert Level 1"
REFERENCE_DRIVERS = ("last_count_log10", "last_count_censored", "last_count_age_days",
                     "air_temp_mean_c_3d", "air_temp_mean_c_7d", "air_temp_mean_c_30d",
                     "water_temp_est_mean_c_7d", "water_temp_mean_c_7d")
"""The reference's drivers: the last count and a few smoothed temperatures (those present)."""


def reference_forecasts(spec, table: pd.DataFrame, seasons: list[int]) -> pd.Series:
    """Walk-forward probabilities of the logistic reference for Alert Level 1 at the headline
    horizon, fitted on what was known before each season (as the backtest does)."""
    from sklearn.linear_model import LogisticRegression
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler

    X = prepare(table)
    ordinal, _ = outcomes(X, spec)
    k = spec.levels.index(LEVEL) + 1
    y = ordinal[spec.horizon_days]
    drivers = [d for d in REFERENCE_DRIVERS if d in X and X[d].notna().any()]
    day = pd.to_datetime(X["issue_date"])
    season = season_of(X["issue_date"], spec.season_start_month)
    out = pd.Series(np.nan, index=X.index)
    for s in seasons:
        start = pd.Timestamp(year=int(s), month=spec.season_start_month, day=1)
        known = ((day + pd.Timedelta(days=spec.outlook_days + spec.lab_delay_days)) < start) \
            .to_numpy() & ~np.isnan(y)
        Z = X[drivers].astype(float)
        Z = Z.fillna(Z[known].median())
        model = make_pipeline(StandardScaler(), LogisticRegression(max_iter=1000))
        model.fit(Z[known], (y[known] >= k).astype(int))
        now = season == s
        out[now] = model.predict_proba(Z[now])[:, 1]
    return out.set_axis(X["issue_date"].to_numpy())


def figures(p: np.ndarray, o: np.ndarray, clim: np.ndarray, pers: np.ndarray) -> dict[str, float]:
    keep = ~np.isnan(p) & ~np.isnan(o) & ~np.isnan(clim) & ~np.isnan(pers)
    p, o, clim, pers = p[keep], o[keep], clim[keep], pers[keep]
    return {"auc": roc_auc(p, o), "bss_clim": brier_skill_score(p, o, clim),
            "bss_pers": brier_skill_score(p, o, pers), "n": int(keep.sum())}


def score(config_path: Path) -> dict[str, float]:
    spec, totals, table, available = site_record(config_path)
    seasons = available[len(available) // 2:]
    started = time.perf_counter()
    result = walk_forward(spec, table, totals, seasons, Thresholds.default(spec.levels))
    seconds = time.perf_counter() - started
    f = result.forecasts[result.forecasts["level"] == LEVEL].reset_index(drop=True)
    o, clim, pers = (f[c].to_numpy(dtype=float) for c in ("outcome", "climatology", "persistence"))
    model = figures(f["probability"].to_numpy(dtype=float), o, clim, pers)
    ref = reference_forecasts(spec, table, seasons)
    ref_p = ref.reindex(f["issue_date"].to_numpy()).to_numpy(dtype=float)
    reference = figures(ref_p, o, clim, pers)
    lead = result.overall[(result.overall["level"] == LEVEL)
                          & (result.overall["source"] == "model")].iloc[0]
    return {"name": spec.name, "seasons": f"{seasons[0]}-{seasons[-1]}", "n": model["n"],
            "auc": model["auc"], "bss_clim": model["bss_clim"], "bss_pers": model["bss_pers"],
            "lead_vs_lab_days": lead["median_lead_time_days"],
            "lead_vs_report_days": lead["median_lead_to_report_days"],
            "ref_auc": reference["auc"], "ref_bss_clim": reference["bss_clim"],
            "ref_bss_pers": reference["bss_pers"],
            "families": ",".join(sorted(set(result.families.values()))), "seconds": seconds}


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--seasons", type=int, default=12)
    args = parser.parse_args()
    started = time.perf_counter()
    rows = []
    with tempfile.TemporaryDirectory() as tmp:
        root = Path(tmp)
        demo_config = root / "demo.toml"
        demo_config.write_text(re.sub(r'(?m)^root = "\.\."', 'root = "."', embedded_demo_text()),
                               encoding="utf-8")
        write_demo(root / "demo_data", args.seasons, 20261202)
        rows.append(score(demo_config))
        rows.append(score(write_scenario(root / "vessany", args.seasons).config))
    total = time.perf_counter() - started
    print(f"Alert Level 1 at 7 days, last half of {args.seasons} seasons (walk-forward)")
    head = (f"{'scenario':<22}{'seasons':>11}{'days':>6}{'AUC':>7}{'BSS clim':>10}"
            f"{'BSS pers':>10}{'lead lab':>10}{'lead rep':>10}{'ref AUC':>9}{'ref clim':>10}"
            f"{'ref pers':>10}  family")
    print(head)
    for r in rows:
        print(f"{r['name']:<22}{r['seasons']:>11}{r['n']:>6}{r['auc']:>7.3f}{r['bss_clim']:>10.3f}"
              f"{r['bss_pers']:>10.3f}{r['lead_vs_lab_days']:>10.1f}{r['lead_vs_report_days']:>10.1f}"
              f"{r['ref_auc']:>9.3f}{r['ref_bss_clim']:>10.3f}{r['ref_bss_pers']:>10.3f}"
              f"  {r['families']}")
    v = rows[-1]
    met = (v["auc"] >= 0.97 and v["bss_clim"] >= 0.60 and v["bss_pers"] >= 0.30
           and v["bss_clim"] > v["ref_bss_clim"] and v["bss_pers"] > v["ref_bss_pers"]
           and v["lead_vs_lab_days"] >= 7)
    print("targets (second scenario): auc >= 0.97, bss_clim >= 0.60, bss_pers >= 0.30, ahead of "
          f"the reference on both, lead_vs_lab_days >= 7: {'met' if met else 'NOT met'}")
    print(f"bench_skill: auc={v['auc']:.3f} bss_clim={v['bss_clim']:.2f} "
          f"bss_pers={v['bss_pers']:.2f} lead_vs_lab_days={v['lead_vs_lab_days']:.0f} "
          f"ref_auc={v['ref_auc']:.2f} seconds={total:.0f}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
