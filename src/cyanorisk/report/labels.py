"""Plain names for drivers, shown in reports in place of column names."""

from __future__ import annotations

import re

DRIVER_LABELS = {
    "water_temp_mean_c_7d": "water temperature, 7-day mean [degC]",
    "water_temp_mean_c_1d": "water temperature, 1-day mean [degC]",
    "last_count_log10": "last known count [log10 cells/mL]",
    "last_count_censored": "last known count below detection (1 = yes)",
    "last_count_age_days": "age of the last known count [days]",
    "season_sin": "time of year (sine)",
    "season_cos": "time of year (cosine)",
    "rain_mm_7d": "rain, last 7 days [mm]",
    "solar_mj_m2_7d": "sunshine energy, last 7 days [MJ/m2]",
    "longest_calm_h_7d": "longest calm spell, last 7 days [h]",
}


def driver_label(name: str) -> str:
    """A reader's name for a driver column (falls back to a tidied column name)."""
    if name in DRIVER_LABELS:
        return DRIVER_LABELS[name]
    m = re.fullmatch(r"degree_days_(\d+(?:\.\d+)?)c_(\d+)d", name)
    if m:
        return f"degree-days above {m.group(1)} degC, last {m.group(2)} days"
    m = re.fullmatch(r"(wind_run_km|calm_hours|air_temp_mean_c)_(\d+)d", name)
    if m:
        what = {"wind_run_km": "wind run [km]", "calm_hours": "calm hours",
                "air_temp_mean_c": "air temperature mean [degC]"}[m.group(1)]
        return f"{what}, last {m.group(2)} days"
    if name.endswith("__missing"):
        return f"{driver_label(name[:-9])} missing"
    return name.replace("_", " ")
