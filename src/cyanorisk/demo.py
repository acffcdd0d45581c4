"""The demo scenario: Tallowbark Reservoir, a fictitious water-supply reservoir above the
fictitious town of Merrin Falls, in a temperate southern-hemisphere climate (warm in January).

The lab results follow a simple simulation driven by the same weather (:func:`simulate_cyanobacteria`)
so that the bloom drivers carry real signal; they are typed the way people type them.

Everything here is invented for the demo and deterministic by seed. The weather is simulated on
a half-hourly UTC grid, then exported the way a real automatic weather station's logger would
write it, with the usual quirks (see ``../shared/DESIGN.md``): local wall-clock time with daylight
saving, a date column and a separate time column with day-first dates, each reading stamped at
the end of its interval (the day's last one 24:00), the rows of each day newest first, repeated
rows, extra readings off the regular grid, sensor drop-outs, '-' or blank for missing values,
16-point compass directions and CALM, wind in km/h, and a handful of rows mangled by hand.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from cyanorisk.compass import POINTS_16

SITE_ID = "tallowbark"
TIMEZONE = "Australia/Melbourne"
"""A real zone with daylight saving, so the exports carry the repeated and skipped hours."""
SIM_START = "2003-07-01"
SIM_YEARS = 22
"""The weather and the blooms are simulated over these 22 years (local time) and the demo keeps
its last years, so that the random streams, and so the story, do not depend on how many years
are asked for."""
END = "2025-01-14 06:00"
"""The end of the demo record (local): the morning of a report in the middle of a bloom season."""


@dataclass(frozen=True)
class DemoFiles:
    """What :func:`write_demo` wrote."""

    weather: list[Path]
    """One export per year, in time order."""
    samples: list[Path]
    """Lab result sheets: an older lab reporting cells/L, then the current one in cells/mL."""


def demo_window(years: float) -> tuple[pd.Timestamp, pd.Timestamp]:
    """The UTC span [start, end) of a demo record of ``years`` years ending at :data:`END`."""
    end = pd.Timestamp(END, tz=TIMEZONE)
    start = end - pd.DateOffset(years=int(years), days=int(round((years % 1) * 365.25)))
    if start < pd.Timestamp(SIM_START, tz=TIMEZONE):
        raise ValueError(f"the demo has at most {SIM_YEARS - 0.5:g} years of data")
    return start.tz_convert("UTC"), end.tz_convert("UTC")


def simulate_weather(years: int, seed: int) -> pd.DataFrame:
    """The demo's half-hourly weather record (UTC grid, canonical units) of ``years`` years.

    The full :data:`SIM_YEARS` are simulated and the last ``years`` before :data:`END` kept.
    """
    start, end = demo_window(years)
    full = _simulate_weather(seed)
    return full[(full.index >= start) & (full.index < end)]


def _simulate_weather(seed: int) -> pd.DataFrame:
    """A half-hourly weather record on a UTC grid, in canonical units.

    Seasonal and daily cycles of temperature, day-to-day (synoptic) anomalies as an AR(1)
    process, wind from a gamma distribution modulated by the same weather systems, rain from a
    two-state wet/dry chain, sunshine that follows the sun and the cloud, and a water temperature
    that lags the air by about two weeks. Plausible, not a climate model.
    """
    rng = np.random.default_rng(seed)
    start = pd.Timestamp(SIM_START, tz=TIMEZONE).tz_convert("UTC")
    idx = pd.date_range(start, periods=int(SIM_YEARS * 365.25 * 48), freq="30min")
    n = len(idx)
    local = idx.tz_convert(TIMEZONE)
    doy = local.day_of_year.to_numpy()
    hour = local.hour.to_numpy() + local.minute.to_numpy() / 60
    season = np.cos(2 * np.pi * (doy - 20) / 365.25)  # +1 in late January
    days = n // 48 + 1
    synoptic = np.zeros(days)
    shocks = rng.normal(0, 1.0, days)
    for d in range(1, days):
        synoptic[d] = 0.75 * synoptic[d - 1] + shocks[d]
    # a few hot, still spells each summer make the blooms of the lab simulation
    heat = np.repeat(synoptic, 48)[:n]
    air = 14.5 + 7.0 * season + 5.5 * np.sin(2 * np.pi * (hour - 9) / 24) + 2.2 * heat
    air += rng.normal(0, 0.6, n)
    windiness = np.exp(-0.25 * heat + 0.15 * rng.normal(0, 1, days).repeat(48)[:n])
    wind = rng.gamma(2.2, 1.6, n) * windiness * (0.8 + 0.4 * np.sin(2 * np.pi * (hour - 10) / 24))
    calm = rng.random(n) < 0.02
    wind[calm] = 0.0
    gust = wind * rng.uniform(1.3, 1.9, n)
    direction = (200 + 60 * np.sin(np.arange(n) / 300) + rng.normal(0, 40, n)) % 360
    wet_day = np.zeros(days, dtype=bool)
    u = rng.random(days)
    for d in range(1, days):
        p_wet = 0.55 if wet_day[d - 1] else 0.18 - 0.06 * np.cos(2 * np.pi * (d % 365) / 365)
        wet_day[d] = u[d] < p_wet
    wet = np.repeat(wet_day, 48)[:n] & (rng.random(n) < 0.25)
    rain = np.where(wet, rng.exponential(0.8, n), 0.0)
    sun_height = np.clip(np.sin(2 * np.pi * (hour - 6.5) / 26), 0, None)
    cloud = np.clip(0.35 + 0.25 * np.repeat(wet_day, 48)[:n] - 0.1 * heat, 0.05, 0.95)
    solar = 1050 * sun_height * (0.75 + 0.25 * season) * (1 - 0.7 * cloud)
    water = pd.Series(air).ewm(halflife=14 * 48).mean().to_numpy() + 1.5
    rh = np.clip(72 - 2.0 * (air - 14) + 15 * wet + rng.normal(0, 6, n), 8, 100)
    pressure = 1013 - 4 * heat + rng.normal(0, 1.5, n)
    return pd.DataFrame({
        "air_temp_c": air.round(1), "water_temp_c": water.round(1),
        "wind_speed_ms": wind.round(2), "wind_gust_ms": gust.round(2),
        "wind_dir_deg": direction.round(0), "rain_mm": rain.round(1),
        "rel_humidity_pct": rh.round(0), "solar_wm2": solar.round(0),
        "pressure_hpa": pressure.round(1),
    }, index=idx)


EXPORT_COLUMNS = ["Date", "Time", "AirT", "WaterT", "WindSpd", "WindGust", "WindDir", "Rain",
                  "RH", "Solar", "Baro", "Batt"]
"""Column names the (fictitious) logger writes; see the demo dialect in the configuration."""


def logger_export(weather: pd.DataFrame, seed: int) -> pd.DataFrame:
    """The weather as the station's logger exports it: strings, quirks and all."""
    rng = np.random.default_rng(seed + 1)
    w = weather.copy()
    n = len(w)
    # sensor drop-outs: runs of missing rows
    drop = np.zeros(n, dtype=bool)
    for s in rng.choice(n - 50, size=max(1, n // 3000), replace=False):
        drop[s:s + rng.integers(1, 14)] = True
    w = w[~drop]
    step = w.index[1] - w.index[0] if len(w) > 1 else pd.Timedelta(minutes=30)
    local = (w.index + step).tz_convert(TIMEZONE)  # stamped at the end of the interval
    wall = local.tz_localize(None)
    end_of_day = (wall.hour == 0) & (wall.minute == 0)
    day = wall.where(~end_of_day, wall - pd.Timedelta(days=1))
    out = pd.DataFrame({
        "Date": day.strftime("%d/%m/%Y"),
        "Time": np.where(end_of_day, "24:00", wall.strftime("%H:%M")),
        "AirT": w["air_temp_c"].map("{:.1f}".format).to_numpy(),
        "WaterT": w["water_temp_c"].map("{:.1f}".format).to_numpy(),
        "WindSpd": (w["wind_speed_ms"] * 3.6).round(0).map("{:.0f}".format).to_numpy(),
        "WindGust": (w["wind_gust_ms"] * 3.6).round(0).map("{:.0f}".format).to_numpy(),
        "WindDir": np.array(POINTS_16)[np.floor((w["wind_dir_deg"].to_numpy() + 11.25) / 22.5)
                                       .astype(int) % 16],
        "Rain": w["rain_mm"].map("{:.1f}".format).to_numpy(),
        "RH": w["rel_humidity_pct"].map("{:.0f}".format).to_numpy(),
        "Solar": w["solar_wm2"].map("{:.0f}".format).to_numpy(),
        "Baro": w["pressure_hpa"].map("{:.1f}".format).to_numpy(),
        "Batt": rng.uniform(12.4, 13.1, len(w)).round(2).astype(str),
    })
    out.loc[w["wind_speed_ms"].to_numpy() == 0, "WindDir"] = "CALM"
    out["_utc"] = w.index
    out["_day"] = day.normalize()
    # missing values: '-' mostly, blank sometimes
    for col in ["AirT", "WindSpd", "WindDir", "Solar"]:
        m = rng.random(len(out)) < 0.003
        out.loc[m, col] = np.where(rng.random(int(m.sum())) < 0.7, "-", "")
    # off-grid extra readings (a manual poll of the logger)
    extra = out.sample(frac=0.002, random_state=seed).copy()
    minutes = rng.integers(3, 27, len(extra))
    shifted = extra["_utc"] + step + pd.to_timedelta(minutes, unit="min")
    sw = shifted.dt.tz_convert(TIMEZONE).dt.tz_localize(None)
    extra["Date"], extra["Time"] = sw.dt.strftime("%d/%m/%Y"), sw.dt.strftime("%H:%M")
    extra["_utc"], extra["_day"] = shifted, sw.dt.normalize()
    # repeated rows (the logger re-sends a block after a comms failure)
    dup = out.sample(frac=0.003, random_state=seed + 2)
    out = pd.concat([out, extra, dup], ignore_index=True)
    # rows of each day newest first; days in order
    out = out.sort_values(["_day", "_utc"], ascending=[True, False], kind="stable")
    # a few rows mangled by hand
    bad = rng.choice(len(out), size=max(3, len(out) // 40000), replace=False)
    kinds = ["Time", "AirT", "Date"]
    for k, i in enumerate(bad):
        col = kinds[k % 3]
        out.iloc[i, out.columns.get_loc(col)] = {"Time": "25:00", "AirT": "21..4",
                                                 "Date": "31/02/2019"}[col]
    return out


# ---------------------------------------------------------------------------------------------
# Lab results
# ---------------------------------------------------------------------------------------------

TAXA_SHARES = {
    "Microcystis aeruginosa": 0.55,
    "Dolichospermum circinale": 0.30,
    "Aphanizomenon ovalisporum": 0.15,
}
"""How the simulated cyanobacterial total splits among taxa (on average)."""
OTHER_TAXA = {"Aulacoseira granulata": 1500.0, "Cryptomonas ovata": 400.0}
"""Non-cyanobacterial taxa and their typical counts [cells mL-1]."""


def simulate_cyanobacteria(weather: pd.DataFrame, seed: int) -> pd.Series:
    """The daily cyanobacterial total [cells mL-1] of the days the ``weather`` record covers,
    simulated over the full demo span (see :func:`_bloom_dynamics`) so it does not depend on
    the record's length."""
    full = _bloom_dynamics(_simulate_weather(seed), seed)
    local = weather.index.tz_convert(TIMEZONE)
    first, last = local[0].normalize(), local[-1].normalize()
    return full[(full.index >= first) & (full.index <= last)]


def _bloom_dynamics(weather: pd.DataFrame, seed: int) -> pd.Series:
    """Daily cyanobacterial total [cells mL-1] driven by the demo weather.

    Net growth on the log scale: growth rises with water temperature from nothing at 12 degC
    towards 27.5 degC (the Microcystis optimum, J. Plankton Res. 2018, REFERENCES.md), slowed as
    the population nears a cap (Gompertz form), so that net in-situ growth stays within about
    0.1-0.4 per day (field literature, from memory); warm calm days (daily wind below 2.3 m/s,
    water above 19 degC) add surface accumulation (below about 2-3 m/s, Webster & Hutchinson
    1994, from memory); losses rise with wind mixing above 2 m/s and flushing by rain. A demo
    model of plausible dynamics, not a validated one.
    """
    rng = np.random.default_rng(seed + 7)
    local = weather.tz_convert(TIMEZONE)
    daily = local.resample("D").agg({"water_temp_c": "mean", "wind_speed_ms": "mean",
                                     "rain_mm": "sum"})
    temp = daily["water_temp_c"].to_numpy()
    wind = daily["wind_speed_ms"].to_numpy()
    rain = daily["rain_mm"].to_numpy()
    growth = 0.8 * np.clip((temp - 12.0) / (27.5 - 12.0), 0.0, 1.0) ** 1.5
    calm_warm = 0.25 * ((wind < 2.3) & (temp > 19.0))
    loss = 0.02 + 0.10 * np.clip(wind - 2.0, 0.0, None) + 0.01 * rain
    log_n = np.empty(len(daily))
    log_n[0] = np.log(50.0)
    cap = np.log(3_000_000.0)
    for d in range(1, len(daily)):
        step = (growth[d - 1] * (1 - log_n[d - 1] / cap) + calm_warm[d - 1] - loss[d - 1]
                + rng.normal(0, 0.08))
        log_n[d] = np.clip(log_n[d - 1] + step, np.log(20.0), cap)
    return pd.Series(np.exp(log_n), index=daily.index, name="cyano_cells_per_ml")


def _typed(value: float, rng: np.random.Generator, limit: float = 100.0) -> str:
    """A count as a person might type it (``limit``: the detection limit in the same unit)."""
    if value < limit:
        return rng.choice([f"<{limit:.0f}", f"< {limit:.0f}", "ND", "n.d.", f"<{limit:.0f}"])
    v = float(f"{value:.2g}")
    style = rng.random()
    if style < 0.55:
        return f"{v:.0f}"
    if style < 0.80:
        return f"{v:,.0f}"
    if style < 0.92:
        return f"{v:.1E}".replace("E+0", "E")
    if style < 0.96:
        return f"{v:,.0f}".replace(",", " ")
    return f"{v:.0f}".replace("0", "O", 1) if "0" in f"{v:.0f}"[1:] else f"{v:.0f}"


def lab_sheets(weather: pd.DataFrame, seed: int, site_id: str = SITE_ID) -> dict[str, pd.DataFrame]:
    """Lab result sheets (wide: one row per sample), as typed; keyed by file stem.

    Weekly samples (Tuesdays) from November to April, monthly (first Tuesday) otherwise, and an
    extra sample two days after a count above 5,000 cells/mL; results reported two to six days
    after sampling (sometimes without a reported date). Until mid-2017 an older lab reports in
    cells per litre.
    """
    rng = np.random.default_rng(seed + 11)
    truth = simulate_cyanobacteria(weather, seed)
    days = truth.index
    warm = days.month.isin([11, 12, 1, 2, 3, 4])
    tuesday = days.day_of_week == 1
    routine = tuesday & (warm | (days.day <= 7))
    dates = list(days[routine])
    for d, v in truth.items():
        if v > 5_000 and not routine[days.get_loc(d)] and rng.random() < 0.12:
            dates.append(d)
    dates = sorted(set(dates))
    rows = []
    for k, d in enumerate(dates):
        total = truth[d] * rng.lognormal(0, 0.3)
        shares = rng.dirichlet([8 * s for s in TAXA_SHARES.values()])
        cells = dict(zip(TAXA_SHARES, total * shares, strict=True))
        others = {t: m * rng.lognormal(0, 0.5) for t, m in OTHER_TAXA.items()}
        toxic = cells["Microcystis aeruginosa"] + cells["Dolichospermum circinale"]
        chl = 2.0 + total * 1.5e-4 * rng.lognormal(0, 0.2)
        mc = toxic * 1.2e-5 * rng.lognormal(0, 0.4)
        sampled = pd.Timestamp(d.date()) + pd.Timedelta(hours=int(rng.integers(8, 12)),
                                                        minutes=int(rng.choice([0, 15, 30, 45])))
        delay = int(rng.integers(2, 7))
        rows.append({"Sample": f"TB{d:%y%m%d}{chr(65 + k % 3)}", "Site": site_id,
                     "Date Sampled": f"{sampled:%d/%m/%Y}",
                     "Time": f"{sampled:%H:%M}" if rng.random() > 0.1 else "",
                     "Date Reported": (f"{sampled + pd.Timedelta(days=delay):%d/%m/%Y}"
                                       if rng.random() > 0.08 else ""),
                     "Depth (m)": "0.5", "_cells": {**cells, **others},
                     "Chl-a (ug/L)": f"{chl:.1f}",
                     "Microcystin (ug/L)": "<0.1" if mc < 0.1 else f"{mc:.2f}",
                     "Comments": ("surface scum near the offtake" if total > 100_000
                                  and rng.random() < 0.3 else ""),
                     "_when": sampled})
    sheets: dict[str, pd.DataFrame] = {}
    switch = pd.Timestamp("2017-07-01")
    for stem, unit, factor, part in (
            (f"{site_id}_lab_old", "cells/L", 1000.0, [r for r in rows if r["_when"] < switch]),
            (f"{site_id}_lab", "cells/mL", 1.0, [r for r in rows if r["_when"] >= switch])):
        if not part:
            continue
        table = []
        for r in part:
            row = {k: v for k, v in r.items() if not k.startswith("_")}
            for taxon, v in r["_cells"].items():
                row[f"{taxon} ({unit})"] = _typed(v * factor, rng, 100.0 * factor)
            table.append(row)
        frame = pd.DataFrame(table)
        # hand-typed slips and a sample entered twice
        slips = rng.choice(len(frame), size=min(3, len(frame)), replace=False)
        taxon_cols = [c for c in frame.columns if "(cells/" in c]
        frame.iloc[slips[0], frame.columns.get_loc(taxon_cols[0])] = "see comment"
        if len(slips) > 1:
            frame.iloc[slips[1], frame.columns.get_loc("Date Sampled")] = "31/02/" + \
                frame.iloc[slips[1]]["Date Sampled"][-4:]
        if len(slips) > 2:
            frame = pd.concat([frame, frame.iloc[[slips[2]]]], ignore_index=True)
        sheets[stem] = frame
    return sheets


def write_demo(out_dir: Path, years: int, seed: int, site_id: str = SITE_ID) -> DemoFiles:
    """Simulate the demo reservoir and write its station exports, one file per calendar year.
    Another ``site_id`` (with another ``seed``) gives a sister site of the same kind, for tests
    and benchmarks of many sites: its folder, file names and the lab's site column say it.

    Files are written whole and moved into place, so an interrupted run leaves no half file.
    """
    weather_dir = Path(out_dir) / site_id / "weather"
    weather_dir.mkdir(parents=True, exist_ok=True)
    weather = simulate_weather(years, seed)
    export = logger_export(weather, seed)
    files = []
    year = export["_day"].dt.year
    for y in sorted(year.unique()):
        part = export[year == y]
        path = weather_dir / f"{site_id}_aws_{y}.txt"
        tmp = path.with_suffix(".tmp")
        header = "Tallowbark Reservoir AWS - Merrin Falls Water - logger export\n"
        with tmp.open("w", encoding="utf-8", newline="\n") as fh:
            fh.write(header)
            part[EXPORT_COLUMNS].to_csv(fh, sep="\t", index=False, lineterminator="\n")
        tmp.replace(path)
        files.append(path)
    lab_dir = Path(out_dir) / site_id / "lab"
    lab_dir.mkdir(parents=True, exist_ok=True)
    lab_files = []
    for stem, frame in lab_sheets(weather, seed, site_id).items():
        path = lab_dir / f"{stem}.csv"
        tmp = path.with_suffix(".tmp")
        with tmp.open("w", encoding="utf-8", newline="\n") as fh:
            fh.write("Merrin Falls Water laboratory - phytoplankton enumeration\n")
            frame.to_csv(fh, index=False, lineterminator="\n")
        tmp.replace(path)
        lab_files.append(path)
    return DemoFiles(files, lab_files)


def sister_site_toml(config_text: str, site_id: str, name: str) -> str:
    """The ``[[sites]]`` block of the demo configuration made over for a sister site (its
    files under ``demo_data/<site_id>/``, as :func:`write_demo` writes them for that id), to be
    appended to a configuration; for tests and benchmarks of many sites."""
    block = config_text[config_text.index("[[sites]]"):]
    block = block.replace(f'id = "{SITE_ID}"', f'id = "{site_id}"', 1)
    block = block.replace('name = "Tallowbark Reservoir"', f'name = "{name}"', 1)
    block = block.replace(f"demo_data/{SITE_ID}/weather/{SITE_ID}_",
                          f"demo_data/{site_id}/weather/{site_id}_")
    return "\n" + block.replace(f"demo_data/{SITE_ID}/", f"demo_data/{site_id}/")
