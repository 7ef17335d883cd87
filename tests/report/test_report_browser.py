"""The HTML report in a real browser: headless Chromium (Debian's package, driven through
chromedriver by selenium) opens report.html from disk, with no network, and every chart draws.

`make test` installs chromium and chromium-driver first.  Outside CI a machine without them
skips these tests; in CI (CI=true) a missing browser is a failure, not a skip.
"""

from __future__ import annotations

import os
import shutil
import tempfile
from pathlib import Path

import pytest
from report_cases import demo_slice_folder, tiny_analysis_folder, tiny_plan_folder

ROOT = Path(__file__).resolve().parents[2]
ARTIFACTS = ROOT / "out" / "test-artifacts"
CHROMIUM = shutil.which("chromium") or "/usr/bin/chromium"
CHROMEDRIVER = shutil.which("chromedriver") or "/usr/bin/chromedriver"
FLAGS = ("--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
         "--disable-background-networking", "--disable-component-update", "--disable-sync",
         "--hide-scrollbars", "--window-size=1280,900")


@pytest.fixture(scope="module")
def browser():
    if not (Path(CHROMIUM).exists() and Path(CHROMEDRIVER).exists()):
        message = "chromium and chromium-driver are not installed (make test installs them)"
        if os.environ.get("CI"):
            pytest.fail(message)
        pytest.skip(message)
    from selenium import webdriver
    from selenium.webdriver.chrome.service import Service

    options = webdriver.ChromeOptions()
    options.binary_location = CHROMIUM
    for flag in FLAGS:
        options.add_argument(flag)
    profile = tempfile.mkdtemp(prefix="rebalance-chromium-")
    options.add_argument(f"--user-data-dir={profile}")
    options.set_capability("goog:loggingPrefs", {"browser": "ALL"})
    driver = webdriver.Chrome(service=Service(CHROMEDRIVER), options=options)
    driver.set_page_load_timeout(60)
    yield driver
    driver.quit()
    shutil.rmtree(profile, ignore_errors=True)


def _open(driver, report: Path) -> list[dict]:
    driver.get(report.resolve().as_uri())
    return [entry for entry in driver.get_log("browser") if entry["level"] in ("SEVERE",
                                                                               "WARNING")]


CHART_STATE = """
return Array.from(document.querySelectorAll('.chart')).map(c => ({
  kind: c.dataset.chart, drawn: c.dataset.drawn, marks: Number(c.dataset.marks || 0),
  shapes: c.querySelectorAll('svg rect, svg path, svg polygon, svg polyline, svg circle').length
}));
"""


def test_report_with_analysis_draws_every_chart_offline(browser):
    folder = tiny_analysis_folder()
    problems = _open(browser, folder / "report.html")
    assert problems == [], problems
    charts = browser.execute_script(CHART_STATE)
    kinds = sorted(c["kind"] for c in charts)
    assert kinds == sorted(["coverage", "heat", "flows", "hires", "budget", "frontier",
                            "scenarios", "marginal"])
    for chart in charts:
        assert chart["drawn"] == "yes", chart
        assert chart["marks"] > 0 and chart["shapes"] > 0, chart
    body = browser.find_element("tag name", "body")
    assert body.get_attribute("data-charts-drawn") == str(len(charts))
    assert body.get_attribute("data-charts-total") == str(len(charts))
    # Self-contained: the page fetched nothing (no scripts, styles, fonts or images).
    assert browser.execute_script(
        "return performance.getEntriesByType('resource').length") == 0
    # The caution is on the page people read.
    from rebalance.planning import CAUTION

    assert CAUTION in body.text
    ARTIFACTS.mkdir(parents=True, exist_ok=True)
    height = browser.execute_script("return document.documentElement.scrollHeight")
    browser.set_window_size(1280, min(int(height), 12000))
    assert browser.save_screenshot(str(ARTIFACTS / "report.png"))
    browser.set_window_size(1280, 900)


@pytest.mark.parametrize("make_folder", [tiny_plan_folder, demo_slice_folder],
                         ids=["tiny", "demo-slice"])
def test_plan_report_draws_its_charts(browser, make_folder):
    folder = make_folder()
    problems = _open(browser, folder / "report.html")
    assert problems == [], problems
    charts = browser.execute_script(CHART_STATE)
    assert sorted(c["kind"] for c in charts) == ["budget", "coverage", "flows", "heat", "hires"]
    assert all(c["drawn"] == "yes" for c in charts), charts
    if folder.name == "demo-slice":
        ARTIFACTS.mkdir(parents=True, exist_ok=True)
        height = browser.execute_script("return document.documentElement.scrollHeight")
        browser.set_window_size(1280, min(int(height), 12000))
        assert browser.save_screenshot(str(ARTIFACTS / "report-demo-slice.png"))
        browser.set_window_size(1280, 900)


def test_tables_sort_when_a_header_is_clicked(browser):
    _open(browser, tiny_analysis_folder() / "report.html")
    table = browser.find_element("css selector", 'table[data-table="frontier"]')
    headers = table.find_elements("css selector", "thead th")
    names = [h.text for h in headers]
    column = names.index("weighted shortfall")  # the page's header for weighted_shortfall

    def values() -> list[float]:
        return [float(r.find_elements("tag name", "td")[column].get_attribute("data-v"))
                for r in table.find_elements("css selector", "tbody tr")]

    def click(element) -> None:
        # A DOM click on the header, as a mouse click delivers it (the table sits far down
        # the page, in its own scrolling box).
        browser.execute_script("arguments[0].click()", element)

    click(headers[column])
    ascending = values()
    assert ascending == sorted(ascending)
    click(headers[column])
    descending = values()
    assert descending == sorted(descending, reverse=True)
    assert headers[column].get_attribute("aria-sort") == "descending"


def test_hovering_a_heat_map_cell_explains_it(browser):
    _open(browser, tiny_analysis_folder() / "report.html")
    text = browser.execute_script("""
        const cell = document.querySelector('.chart[data-chart="heat"] rect[data-tip]');
        const box = cell.getBoundingClientRect();
        cell.dispatchEvent(new MouseEvent('mousemove', {bubbles: true,
            clientX: box.x + 2, clientY: box.y + 2}));
        const tip = document.querySelector('.tip');
        return [tip.textContent, tip.style.opacity];  // the shown state, not mid-fade
    """)
    assert text[0].startswith("A, 2027-Q1") and "demanded" in text[0]
    assert text[1] == "1"


def test_marginal_values_with_estimates_draw_a_tick_per_row(browser, tmp_path):
    # A drawing check: the table's shape follows the issue-5 marginal-values writer (exact
    # re-solve and a dual estimate per limit); its numbers are inputs here, not results.
    import pandas as pd
    from report_cases import cli

    folder = tmp_path / "plan"
    shutil.copytree(tiny_plan_folder(), folder)
    pd.DataFrame({"rank": [1, 2], "limit": ["hiring budget", "seats"], "where": ["2027", "B"],
                  "current": [40000, 6], "step": [100000, 10], "unit": ["money", "seats"],
                  "shortfall_reduction": [0.4, 0.0], "cost_change": [28000, 0],
                  "estimate_shortfall_reduction": [0.5, 0.1], "status": ["optimal"] * 2,
                  "verified": [True, True], "gap": [0.0, 0.0], "method": ["re-solve"] * 2}
                 ).to_csv(folder / "marginal_values.csv", index=False)
    assert cli("report", str(folder)).returncode == 0
    assert _open(browser, folder / "report.html") == []
    ticks = browser.execute_script("""
        return Array.from(document.querySelectorAll('.chart[data-chart="marginal"] line'))
            .map(l => l.getAttribute('data-tip'));""")
    assert len(ticks) == 2 and all("estimate" in t for t in ticks)


def test_money_bars_share_one_scale_with_an_axis(browser):
    # Each budget line had been drawn on its own scale, with no axis: a 299k bar as long as
    # a 1.39M one.  Tiny's hiring and moves caps differ, so separate scales would show.
    assert _open(browser, tiny_plan_folder() / "report.html") == []
    bars = browser.execute_script("""
        return Array.from(document.querySelectorAll('.chart[data-chart="budget"] rect[data-v]'))
            .map(r => [Number(r.getAttribute('width')), Number(r.getAttribute('data-v'))]);""")
    assert len(bars) >= 3  # onboarding and salary (hiring), details (moves)
    scales = [width / value for width, value in bars]
    assert max(scales) == pytest.approx(min(scales), rel=1e-6)
    ticks = browser.execute_script("""
        return Array.from(document.querySelectorAll('.chart[data-chart="budget"] .axis text'))
            .map(t => t.textContent);""")
    assert "0" in ticks and len(ticks) >= 3


def test_coverage_draws_output_beyond_demand(browser):
    assert _open(browser, tiny_plan_folder() / "report.html") == []
    spare = browser.execute_script("""
        return document.querySelectorAll('.chart[data-chart="coverage"] polygon.spare').length;""")
    assert spare == 3  # all offices, A and B each have some


def test_plan_tables_fit_a_narrow_window_without_sideways_scrolling(browser):
    # Wide tables scrolled sideways, their right-hand text hidden past the box's edge.
    assert _open(browser, demo_slice_folder() / "report.html") == []
    try:
        browser.set_window_size(800, 900)
        wide = browser.execute_script("""
            return Array.from(document.querySelectorAll('.table-wrap'))
                .filter(w => w.scrollWidth > w.clientWidth + 1)
                .map(w => w.querySelector('table').dataset.table);""")
    finally:
        browser.set_window_size(1280, 900)
    assert wide == []
