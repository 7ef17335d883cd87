"""The HTML report in a real browser: headless Chromium (Debian's package, driven through
chromedriver by selenium) opens report.html from disk, with no network, and every chart draws.

`make test` installs chromium and chromium-driver first.  Outside CI a machine without them
skips these tests; in CI (CI=true) a missing browser is a failure, not a skip.
"""

from __future__ import annotations

import itertools
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


def _marginal_folder(tmp_path: Path) -> Path:
    """tiny's plan with a demo-shaped marginal_values.csv whose re-solved rows include two
    with long scopes (a long office name, a skill at an office)."""
    from report_cases import cli, demo_marginal_table

    folder = tmp_path / "plan"
    shutil.copytree(tiny_plan_folder(), folder)
    table = demo_marginal_table()
    table.loc[8, ["rank", "shortfall_reduction", "cost_change", "status", "verified", "gap"]] = [
        5, 0.4, 8000.0, "optimal", True, 0.0]
    table.loc[8, "where"] = ("environmental_review at port-ilse-central annex of the northern "
                             "district")
    table.loc[4, "where"] = "aldercombe-under-the-long-hill-regional-office-of-the-west"
    table.loc[4, ["rank", "shortfall_reduction", "status"]] = [6, 0.3, "optimal"]
    table.to_csv(folder / "marginal_values.csv", index=False)
    assert cli("report", str(folder)).returncode == 0
    return folder


def test_marginal_labels_fit_the_card_and_ticks_carry_their_values(browser, tmp_path):
    # The audit: labels ran past the card's left edge, and the estimate ticks had no values.
    folder = _marginal_folder(tmp_path)
    assert _open(browser, folder / "report.html") == []
    browser.set_window_size(1400, 900)
    try:
        state = browser.execute_script("""
            const box = document.querySelector('.chart[data-chart="marginal"]');
            const svg = box.querySelector('svg'), edge = svg.getBoundingClientRect();
            const card = box.closest('section').getBoundingClientRect();
            const labels = Array.from(svg.querySelectorAll('text.bar-label'));
            return {
              outside: Array.from(svg.querySelectorAll('text')).filter(t => {
                const r = t.getBoundingClientRect();
                return r.left < Math.max(edge.left, card.left) - 1 || r.right > card.right + 1;
              }).map(t => t.textContent),
              labels: labels.map(t => [t.textContent, t.querySelector('title').textContent,
                                       t.querySelectorAll('tspan').length]),
              values: Array.from(svg.querySelectorAll('text.bar-value')).map(t => t.textContent),
              ticks: svg.querySelectorAll('line.estimate').length,
              bars: svg.querySelectorAll('rect[data-tip]').length };""")
    finally:
        browser.set_window_size(1280, 900)
    assert state["outside"] == []
    assert state["bars"] == 6 and state["ticks"] == 6  # the re-solved rows only
    full = {title for _, title, _ in state["labels"]}
    assert ("funded vacancies of environmental_review at port-ilse-central annex of the "
            "northern district, +1 vacancy") in full
    # Long labels wrap onto two lines or are cut, the full text kept for hovering.
    shown = {title: (text, lines) for text, title, lines in state["labels"]}
    long_one = shown["seats at aldercombe-under-the-long-hill-regional-office-of-the-west in "
                     "every period, +10 seats"]
    assert long_one[1] == 2 or long_one[0].endswith("\u2026")
    assert any(lines == 2 or text != title for text, title, lines in state["labels"])
    # Each tick's value is written beside its bar, as the table below writes it (the number
    # rule's three decimals, in every bar alike: "0.40 (estimate 0)" had mixed two kinds).
    for value in ("20.117 (estimate 49.370)", "15.098 (estimate 42.034)",
                  "7.844 (estimate 31.103)", "1.953 (estimate 16.799)",
                  "0.400 (estimate 0.000)"):
        assert value in state["values"], (value, state["values"])


def test_wide_analysis_tables_fit_1400_pixels_and_still_sort(browser):
    # The audit: reasons, scenarios and scenario_actions hid text behind a sideways scroll
    # bar at 1400 px (the demo's 18 scenario columns; a shortfall's binding_limits, one run
    # of text without spaces).
    from report_cases import demo_reasons_table, demo_tables_folder

    assert _open(browser, demo_tables_folder() / "report.html") == []
    browser.set_window_size(1400, 900)
    try:
        # Folded tables (all of the reasons, below their summaries) are measured open.
        browser.execute_script("document.querySelectorAll('details').forEach(d => d.open = true)")
        wide = browser.execute_script("""
            return Array.from(document.querySelectorAll('.table-wrap')).map(
                w => [w.querySelector('table').dataset.table, w.scrollWidth, w.clientWidth]);""")
        table = browser.find_element("css selector", 'table[data-table="reasons"]')
        headers = table.find_elements("css selector", "thead th")
        column = [h.text for h in headers].index("amount")
        browser.execute_script("arguments[0].click()", headers[column])
        amounts = [float(r.find_elements("tag name", "td")[column].get_attribute("data-v"))
                   for r in table.find_elements("css selector", "tbody tr")]
        cells = browser.execute_script("""
            return Array.from(document.querySelectorAll('table[data-table="reasons"] tbody tr'))
                .map(r => r.cells[8].textContent);""")
    finally:
        browser.set_window_size(1280, 900)
    names = {name for name, _, _ in wide}
    assert {"marginal", "scenarios", "scenarios_costs", "reasons", "scenario_actions"} <= names
    assert [name for name, scroll, client in wide if scroll > client + 1] == []
    assert amounts == sorted(amounts)
    # Wrapped, not cut: every binding limit is on the page as written.
    expected = {str(v) for v in demo_reasons_table()["binding_limits"].dropna()}
    assert expected <= set(cells)


def test_the_budget_axis_names_the_page_currency(browser, tmp_path):
    from dataclasses import replace

    from conftest import solve_verified
    from report_cases import TINY

    from rebalance import read_instance
    from rebalance.instance import Money
    from rebalance.report.html import render_html
    from rebalance.report.inputs import report_data

    result = solve_verified(read_instance(TINY))
    axis = """return Array.from(document.querySelectorAll(
        '.chart[data-chart="budget"] .axis text')).map(t => t.textContent);"""
    for currency, words in (("EUR", "one scale, in EUR"), (None, "one scale")):
        instance = result.instance.with_changes(money=Money(currency))
        page = render_html(report_data(replace(result, instance=instance)))
        path = tmp_path / f"{currency}.html"
        path.write_text(page, encoding="utf-8")
        assert _open(browser, path) == []
        labels = browser.execute_script(axis)
        assert words in labels and not any("None" in t for t in labels)


def _page_of(tmp_path: Path, name: str, tables: dict) -> Path:
    """tiny's plan folder with ``tables`` (file name -> frame) beside it, its page written."""
    from report_cases import TINY

    from rebalance import read_instance
    from rebalance.report.html import write_html
    from rebalance.report.inputs import report_data_from_folder

    folder = tmp_path / name
    shutil.copytree(tiny_plan_folder(), folder)
    for file, frame in tables.items():
        frame.to_csv(folder / file, index=False)
    return write_html(report_data_from_folder(folder, read_instance(TINY)),
                      folder / "report.html")


def test_a_table_taller_than_its_box_says_how_many_rows_it_has(browser, tmp_path):
    # Source: the practitioner's reading of the demo page (/tmp/read60/demo), whose Details
    # box showed 13 of 67 rows and never said there were more.
    import pandas as pd

    reasons = pd.DataFrame({"action": ["hire"] * 60, "subject": [f"{i} x review" for i in
                                                                 range(60)],
                            "reason": ["demand above output"] * 60})
    assert _open(browser, _page_of(tmp_path, "tall", {"reasons.csv": reasons})) == []
    notes = browser.execute_script("""return Array.from(document.querySelectorAll(
        '.scroll-note')).map(n => [n.textContent,
        n.nextElementSibling.querySelector('table').dataset.table]);""")
    assert notes == [["60 rows; scroll for more", "reasons"]]  # tiny's own tables fit


def test_the_frontier_axis_starts_near_its_data_and_writes_each_value(browser, tmp_path):
    # Source: frontier.csv of the demo (/tmp/read60/fr_plan): 175.5, 168.6 and 165.8 on an
    # axis from 0 to 200 read as a flat line; its x axis had no unit, and a "knee" was ringed
    # among three points.
    from test_report_page_reading import _frontier_frame

    assert _open(browser, _page_of(tmp_path, "frontier",
                                   {"frontier.csv": _frontier_frame(3)})) == []
    found = browser.execute_script("""const c = document.querySelector(
        '.chart[data-chart="frontier"]');
      return {drawn: c.dataset.drawn,
        ticks: Array.from(c.querySelectorAll('.grid text')).map(t => t.textContent),
        note: Array.from(c.querySelectorAll('.axis-note')).map(t => t.textContent),
        values: Array.from(c.querySelectorAll('.point-value')).map(t => t.textContent),
        titles: Array.from(c.querySelectorAll('.title')).map(t => t.textContent),
        rings: c.querySelectorAll('circle[r="10"]').length};""")
    assert found["drawn"] == "yes"
    lowest = float(found["ticks"][0].replace(",", ""))
    assert 150 <= lowest < 165.805, found["ticks"]
    assert found["note"] == [f"axis starts at {found['ticks'][0]}, not 0"]
    assert found["values"] == ["175.457", "168.592", "165.805"]
    assert "hiring budget (times each year's cap)" in found["titles"]
    assert found["rings"] == 0 and "knee" not in found["titles"]


PERIOD_LABELS = """
return Array.from(document.querySelectorAll('.chart')).filter(
    c => ['coverage', 'heat', 'hires'].includes(c.dataset.chart)).map(c => {
  const svgs = Array.from(c.querySelectorAll('svg'));
  return {kind: c.dataset.chart, charts: svgs.map(s => {
    const box = s.viewBox.baseVal;
    const labels = Array.from(s.querySelectorAll('text.period')).map(t => {
      const b = t.getBBox();
      return {text: t.textContent, left: b.x, right: b.x + b.width};
    });
    return {step: Number(s.dataset.periodStep), labels: labels, width: box.width};
  })};
});
"""


def _period_labels(browser, page: Path) -> list[dict]:
    assert _open(browser, page) == []
    return browser.execute_script(PERIOD_LABELS)


def _check_period_labels(charts: list[dict], periods: list[str]) -> None:
    """Each chart names periods as the tables do, every step-th from the first, apart."""
    assert sorted(c["kind"] for c in charts) == ["coverage", "heat", "hires"]
    for chart in charts:
        for drawn in chart["charts"]:
            step, labels = drawn["step"], drawn["labels"]
            assert [label["text"] for label in labels] == periods[::step], chart["kind"]
            for before, after in itertools.pairwise(labels):
                assert after["left"] - before["right"] >= 4, (chart["kind"], before, after)
            assert all(label["left"] >= 0 and label["right"] <= drawn["width"] + 0.5
                       for label in labels), (chart["kind"], labels)


def test_charts_name_each_period_as_the_tables_do(browser):
    # The tables, cards and CSV files name a period "2027-Q1" (settings.toml, horizon.start;
    # rebalance/settings_reader.py); the charts had written "Q1 '27".  The demo slice's four
    # quarters leave room for every name on each chart.
    charts = _period_labels(browser, demo_slice_folder() / "report.html")
    _check_period_labels(charts, ["2027-Q1", "2027-Q2", "2027-Q3", "2027-Q4"])
    assert {d["step"] for c in charts for d in c["charts"]} == {1}


def test_a_long_horizon_labels_fewer_periods_rather_than_shorten_their_names(browser,
                                                                             tmp_path):
    # tiny's page with its chart data stretched to 24 quarters (each period's figures
    # repeated): a coverage panel is 340 px wide (report.js), too narrow for 24 names.
    import json

    from report_cases import page_payload

    page = (tiny_plan_folder() / "report.html").read_text(encoding="utf-8")
    payload = page_payload(page)
    periods = [f"{year}-Q{q}" for year in range(2027, 2033) for q in range(1, 5)]

    def stretched(values: list) -> list:
        return [values[i % len(values)] for i in range(len(periods))]

    coverage, heat, hires = payload["coverage"], payload["heat"], payload["hires"]
    for series in coverage["series"]:
        for key, values in series.items():
            if isinstance(values, list):
                series[key] = stretched(values)
    heat["cells"] = [stretched(row) for row in heat["cells"]]
    hires["counts"] = [stretched(row) for row in hires["counts"]]
    for part in (coverage, heat, hires):
        part["periods"] = periods
    start = page.index('id="report-data">') + len('id="report-data">')
    end = page.index("</script>", start)
    path = tmp_path / "report.html"
    path.write_text(page[:start] + json.dumps(payload).replace("</", "<\\/") + page[end:],
                    encoding="utf-8")
    charts = _period_labels(browser, path)
    _check_period_labels(charts, periods)
    steps = {c["kind"]: {d["step"] for d in c["charts"]} for c in charts}
    assert all(step > 1 for step in steps["coverage"]), steps
