"""The pages in a real browser: headless Chromium driven by Selenium (Debian's ``chromium`` and
``chromium-driver``; ``.ci/run`` installs them). The threshold explorer of the backtest page is
moved with the keyboard, as a person would, and its numbers are compared with those
``cyanorisk tune`` computes for the same threshold; the overview's rows and links are
followed."""

from __future__ import annotations

import shutil

import numpy as np
import pandas as pd
import pytest

from conftest import SISTER
from cyanorisk.backtest import warning_view
from cyanorisk.config import load_config
from cyanorisk.pipeline import SitePipeline
from cyanorisk.service.jobs import run_daily
from cyanorisk.tuning import tune_level
from cyanorisk.verify import lead_time_days
from test_jobs import RISE_DAY, SITE, Clock

webdriver = pytest.importorskip("selenium.webdriver", reason="selenium is installed by "
                                                             "`pip install -e '.[test]'`")
from selenium.webdriver.common.by import By  # noqa: E402
from selenium.webdriver.common.keys import Keys  # noqa: E402

CHROMIUM = shutil.which("chromium") or shutil.which("chromium-browser")
DRIVER = shutil.which("chromedriver")
pytestmark = pytest.mark.skipif(
    CHROMIUM is None or DRIVER is None,
    reason="Chromium or its driver is not installed (Debian packages 'chromium' and "
           "'chromium-driver'; .ci/run installs them where apt-get and root are available)")

SEASONS = "2022-2023"


@pytest.fixture(scope="module")
def browser(tmp_path_factory):
    from selenium.webdriver.chrome.service import Service

    options = webdriver.ChromeOptions()
    for arg in ("--headless=new", "--no-sandbox", "--disable-gpu", "--window-size=1100,900",
                f"--user-data-dir={tmp_path_factory.mktemp('chromium-profile')}"):
        options.add_argument(arg)
    options.binary_location = CHROMIUM
    driver = webdriver.Chrome(service=Service(DRIVER), options=options)
    yield driver
    driver.quit()


@pytest.fixture(scope="module")
def backtest(tmp_path_factory, demo_site):
    """The demo's backtest over two seasons, its page written under a folder of its own."""
    tmp = tmp_path_factory.mktemp("explorer")
    path = demo_site.write_config(tmp / "demo.toml", reports_dir=tmp / "reports")
    pipeline = SitePipeline.of(load_config(path), demo_site.site)
    run = pipeline.backtest(SEASONS)
    page = next(p for p in pipeline.write_backtest(run) if p.name == "backtest.html")
    return run, page


def slide_to(browser, slider, value: int) -> None:
    """Move a range slider with the keyboard, as a person would: Home (to 1) or End (to 99),
    then the arrow keys (sent in one go)."""
    slider.click()
    if value <= 50:
        slider.send_keys(Keys.HOME + Keys.ARROW_RIGHT * (value - 1))
    else:
        slider.send_keys(Keys.END + Keys.ARROW_LEFT * (99 - value))
    assert slider.get_attribute("value") == str(value)


def expected(run, level: str, threshold: float) -> dict:
    """What tune computes at the threshold (its sweep), and each season's lead time (the same
    function tune averages)."""
    choice = tune_level(run.result.forecasts, run.result.exceedances, level, miss_cost=1.0)
    row = choice.table[np.isclose(choice.table["threshold"], threshold)].iloc[0]
    f = warning_view(run.result.forecasts)
    f = f[(f["level"] == level) & f["probability"].notna()]
    ex = run.result.exceedances
    first = dict(zip(ex.loc[ex["level"] == level, "season"],
                     ex.loc[ex["level"] == level, "first_exceedance"], strict=True))
    leads = {}
    for s, g in f.groupby("season"):
        t = first.get(s)
        dates = g["issue_date"].to_numpy(dtype="datetime64[D]")
        warned = g["probability"].to_numpy() >= threshold
        leads[int(s)] = (None if t is None or pd.isna(t) else
                         lead_time_days(dates, warned, [t], int(g["horizon_days"].iloc[0])))
    return {"hits": int(row["hits"]), "misses": int(row["misses"]),
            "false_alarms": int(row["false_alarms"]), "far": row["false_alarm_ratio"],
            "mean_lead": row["mean_lead_time_days"], "leads": leads}


def lead_words(lead: float) -> str:
    """The explorer's words for a season's lead time (NaN: the exceedance was not warned)."""
    if lead != lead:
        return "not warned"
    lead = int(lead)
    if lead == 0:
        return "on the day"
    days = abs(lead)
    return f"{days} day{'' if days == 1 else 's'} {'ahead' if lead > 0 else 'late'}"


@pytest.mark.parametrize("value", [12, 83])
def test_the_explorer_gives_tunes_numbers_for_the_threshold_it_is_moved_to(browser, backtest,
                                                                          value):
    run, page = backtest
    browser.get(page.as_uri())
    panels = browser.find_elements(By.CSS_SELECTOR, ".explorer-level")
    assert [p.get_attribute("data-level") for p in panels] == run.result.forecasts["level"].unique().tolist()
    for panel in panels:
        level = panel.get_attribute("data-level")
        slide_to(browser, panel.find_element(By.CSS_SELECTOR, "input[type=range]"), value)
        threshold = value / 100
        want = expected(run, level, threshold)

        def text(css: str, panel=panel) -> str:
            return panel.find_element(By.CSS_SELECTOR, css).text

        assert text(".threshold") == f"{threshold:.2f}"
        assert (int(text(".hits")), int(text(".misses")), int(text(".false-alarms"))) == \
            (want["hits"], want["misses"], want["false_alarms"]), level
        # shown to 3 and 1 decimals (JavaScript rounds a half up, Python to even: compare values)
        for css, number, digits in ((".far", want["far"], 3), (".mean-lead", want["mean_lead"], 1)):
            if number != number:
                assert text(css) == "n/a"
            else:
                assert abs(float(text(css)) - number) <= 0.5 * 10 ** -digits + 1e-12, (css, level)
        for cell in panel.find_elements(By.CSS_SELECTOR, ".lead"):
            season = int(cell.get_attribute("data-season"))
            lead = want["leads"][season]
            assert cell.text == (lead_words(lead) if lead is not None else "no exceedance")


def test_the_explorer_starts_at_the_thresholds_in_force(browser, backtest, demo_site):
    run, page = backtest
    browser.get(page.as_uri())
    warn_at = SitePipeline.of(demo_site.config, demo_site.site).thresholds().warn_at
    for panel in browser.find_elements(By.CSS_SELECTOR, ".explorer-level"):
        level = panel.get_attribute("data-level")
        assert panel.find_element(By.CSS_SELECTOR, ".threshold").text == f"{warn_at[level]:.2f}"


@pytest.fixture(scope="module")
def overview(tmp_path_factory, two_sites):
    """Two sites after a daily run: their configuration."""
    config = load_config(two_sites.write_config(tmp_path_factory.mktemp("overview")))
    run_daily(RISE_DAY, config, clock=Clock())
    return config


def test_the_overview_rows_and_links_work_in_a_browser(browser, overview):
    config = overview
    browser.get((config.reports_dir / "index.html").as_uri())
    rows = browser.find_elements(By.CSS_SELECTOR, "tr[data-site]")
    assert sorted(r.get_attribute("data-site") for r in rows) == sorted([SITE, SISTER])
    for site_id in (SITE, SISTER):
        browser.get((config.reports_dir / "index.html").as_uri())
        row = browser.find_element(By.CSS_SELECTOR, f'tr[data-site="{site_id}"]')
        name = config.site(site_id).spec.name
        assert name in row.text
        row.find_element(By.CSS_SELECTOR, "a.latest").click()
        assert browser.title.startswith(f"{name}: bloom risk {RISE_DAY}")
        browser.back()
        browser.find_element(By.CSS_SELECTOR, f'tr[data-site="{site_id}"] a.history').click()
        assert browser.find_element(By.TAG_NAME, "h1").text == f"{name}: report history"
        assert browser.find_elements(By.CSS_SELECTOR, f'tr[data-day="{RISE_DAY}"]')


def test_the_overview_reads_on_a_phone(browser, overview):
    config = overview
    browser.set_window_size(390, 844)
    try:
        browser.get((config.reports_dir / "index.html").as_uri())
        width = browser.execute_script("return document.documentElement.scrollWidth")
        assert width <= 390  # no sideways scrolling: each site is a card
    finally:
        browser.set_window_size(1100, 900)
