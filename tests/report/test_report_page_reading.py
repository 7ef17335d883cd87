"""Findings of a practitioner's reading of the report pages (plan, compare, re-plan and
frontier folders of the demo, read at 1280 px), each pinned down: what kind of page it is,
which skill a detail worked, what the frontier's axis measures and when a knee means
anything, and skill colours that say nothing else on the page.

The browser-side findings (row counts over scroll boxes, the frontier's y axis) are in
test_report_browser.py."""

from __future__ import annotations

import json
import re
import shutil
from pathlib import Path

import pandas as pd
from report_cases import TINY, demo_tables_folder, page_payload, page_text, tiny_plan_folder

from rebalance import read_instance
from rebalance.report.analysis_charts import KNEE_MIN_POINTS, _frontier
from rebalance.report.analysis_view import analysis_payload
from rebalance.report.html import render_html
from rebalance.report.inputs import report_data_from_folder

ASSETS = Path(__file__).resolve().parents[2] / "rebalance" / "report" / "assets"


def _heading(page: str) -> tuple[str, str, str]:
    title = re.search(r"<title>(.*?)</title>", page)
    kicker = re.search(r'<p class="kicker">(.*?)</p>', page)
    h1 = re.search(r"<h1>(.*?)</h1>", page)
    assert title and kicker and h1
    return page_text(title.group(1)).strip(), kicker.group(1), h1.group(1)


# 1. Compare and re-plan pages both said "STAFFING PLAN / demo", like a plain plan.

def test_a_comparison_page_names_its_scenarios():
    # Source: the practitioner's reading of the demo compare folder (/tmp/read60/cmp).
    page = (demo_tables_folder() / "report.html").read_text(encoding="utf-8")
    title, kicker, h1 = _heading(page)
    assert h1 == "Comparison: base and harbour-permit-rush, hollin-cross-storm"
    assert title.startswith("Comparison: base and harbour-permit-rush")
    assert "tiny" in kicker.lower() or "tiny" in title.lower()


def _replan_folder(tmp_path: Path) -> Path:
    folder = tmp_path / "replan"
    shutil.copytree(tiny_plan_folder(), folder)
    summary = json.loads((folder / "summary.json").read_text())
    summary["replan"] = {"from_period": "2027-Q3", "scenario": None}
    (folder / "summary.json").write_text(json.dumps(summary))
    pd.DataFrame({"action": ["hire"], "subject": ["1 x review"], "reason": ["demand"]}).to_csv(
        folder / "reasons.csv", index=False)
    pd.DataFrame({"measure": ["weighted_shortfall", "total_cost"], "old_plan": [1.0, 2.0],
                  "new_plan": [1.0, 2.0], "difference": [0.0, 0.0]}).to_csv(
        folder / "replan.csv", index=False)
    pd.DataFrame({"change": ["added"], "kind": ["detail"], "who": ["a1"], "period": ["2027-Q4"],
                  "disruption_cost": [2000.0]}).to_csv(folder / "changes.csv", index=False)
    return folder


def test_a_re_plan_page_says_so_and_puts_its_own_tables_before_the_reasons(tmp_path):
    # Source: the practitioner's reading of the demo re-plan folder (/tmp/read60/rp), whose
    # re-plan table came after 300 rows of reasons.
    page = render_html(report_data_from_folder(_replan_folder(tmp_path), read_instance(TINY)))
    title, _, h1 = _heading(page)
    assert h1 == "Re-plan from 2027-Q3" and title.startswith("Re-plan from 2027-Q3")
    sections = re.findall(r'<section id="([a-z_]+)">', page)
    assert sections.index("replan") < sections.index("changes") < sections.index("reasons")
    toc = re.findall(r'<a href="#([a-z_]+)">', page.split('<nav class="toc">')[1])
    assert toc.index("replan") < toc.index("reasons")


def test_a_plain_plan_page_is_still_a_staffing_plan():
    page = render_html(report_data_from_folder(tiny_plan_folder(), read_instance(TINY)))
    title, kicker, h1 = _heading(page)
    assert (kicker, h1) == ("Staffing plan", "tiny") and title == "Staffing plan: tiny"


# 2. The Details table lacked the skill worked, and "from"/"to" (periods) sat beside
#    "to office".

def test_details_name_the_skill_worked_and_their_first_and_last_period():
    # Source: tiny's plan tables (tests/data/tiny, solved by rebalance plan): details.csv
    # sends a1 to B in 2027-Q2 and Q3, and work.csv has a1 on review at B then.
    folder = tiny_plan_folder()
    page = render_html(report_data_from_folder(folder, read_instance(TINY)))
    start = page.index('data-table="details"')
    table = page[start:page.index("</table>", start)]
    heads = [page_text(h).strip() for h in re.findall(r"<th[^>]*>(.*?)</th>", table)]
    assert heads[:7] == ["person", "home office", "to office", "skill worked", "first period",
                         "last period", "periods"]
    work = pd.read_csv(folder / "work.csv")
    details = pd.read_csv(folder / "details.csv")
    rows = [re.findall(r"<td[^>]*>(.*?)</td>", r) for r in re.findall(r"<tr>(.*?)</tr>",
                                                                       table)[1:]]
    assert len(rows) >= 1
    for person, _, office, skill, first, *_ in rows:
        d = details[(details["person"] == person) & (details["period"] == first)]
        assert d["to_office"].iloc[0] == office
        worked = work[(work["person"] == person) & (work["period"] == first)
                      & (work["office"] == office)]["skill"]
        assert skill in set(worked), (person, first, skill)


# 3. The frontier's x axis had no unit, and a knee was ringed among three points.

def _frontier_frame(points: int, unit: str = "times each year's cap") -> pd.DataFrame:
    # Source: frontier.csv of the demo (/tmp/read60/fr_plan), rebalance frontier --factors.
    levels = [0.8, 1.0, 1.2, 1.4, 1.6][:points]
    shortfall = [175.457, 168.592, 165.805, 164.9, 164.5][:points]
    knee = [False] * points
    knee[1] = True
    return pd.DataFrame({"point": range(1, points + 1), "hiring_budget": levels,
                         "moves_budget": [None] * points, "budget_unit": [unit] * points,
                         "weighted_shortfall": shortfall,
                         "total_cost": [2039000.0 + 400000 * i for i in range(points)],
                         "knee": knee})


def test_the_frontier_axis_carries_the_budget_unit():
    view = _frontier(_frontier_frame(3))
    assert view is not None and view["x_label"] == "hiring_budget (times each year's cap)"
    money = _frontier(_frontier_frame(3, "money, each year"), "EUR")
    assert money is not None and "EUR" in money["x_label"]


def test_no_knee_is_ringed_among_fewer_than_four_points():
    few = _frontier(_frontier_frame(KNEE_MIN_POINTS - 1))
    assert few is not None and not any(p["knee"] for p in few["series"][0]["points"])
    many = _frontier(_frontier_frame(KNEE_MIN_POINTS))
    assert many is not None and [p["knee"] for p in many["series"][0]["points"]][1]


def test_the_frontier_lead_names_a_knee_only_when_one_is_ringed(tmp_path):
    folder = tmp_path / "frontier"
    shutil.copytree(tiny_plan_folder(), folder)
    _frontier_frame(3).to_csv(folder / "frontier.csv", index=False)
    data = report_data_from_folder(folder, read_instance(TINY))
    words = page_text("".join(analysis_payload(data).sections))
    assert "The ringed point is the knee" not in words
    assert "No knee is marked: with fewer than 4 budget levels" in words
    page = render_html(data)
    assert not any(p["knee"] for p in page_payload(page)["frontier"]["series"][0]["points"])


# 4. The skill palette reused the shortfall brick and the current-staff blue.

def _lab(colour: str) -> tuple[float, float, float]:
    """CIE L*a*b* (D65) of a #rrggbb colour, for the CIE76 distance."""
    def linear(c: float) -> float:
        return ((c + 0.055) / 1.055) ** 2.4 if c > 0.04045 else c / 12.92

    r, g, b = (linear(int(colour[i:i + 2], 16) / 255) for i in (1, 3, 5))
    x = (r * 0.4124 + g * 0.3576 + b * 0.1805) / 0.95047
    y = r * 0.2126 + g * 0.7152 + b * 0.0722
    z = (r * 0.0193 + g * 0.1192 + b * 0.9505) / 1.08883

    def f(t: float) -> float:
        return t ** (1 / 3) if t > 0.008856 else 7.787 * t + 16 / 116

    return 116 * f(y) - 16, 500 * (f(x) - f(y)), 200 * (f(y) - f(z))


def test_skill_colours_stay_clear_of_colours_that_mean_something():
    # Source: the page's own colour keys, report.js (C) and report.css (:root).
    script = (ASSETS / "report.js").read_text(encoding="utf-8")
    css = (ASSETS / "report.css").read_text(encoding="utf-8")
    skills = re.findall(r"#[0-9a-fA-F]{6}", re.search(r"var SKILL = \[(.*?)\];", script,
                                                      re.S).group(1))
    keys = re.search(r"var C = \{(.*?)\};", script, re.S).group(1)
    meaning = {name: re.search(rf"\b{name}: \"(#[0-9a-fA-F]{{6}})\"", keys).group(1)
               for name in ("staff", "hire", "short", "detail", "move", "amber")}
    for name in ("good", "fair", "bad"):
        meaning[name] = re.search(rf"--{name}: (#[0-9a-fA-F]{{6}})", css).group(1)
    assert len(skills) >= 8
    for colour in skills:
        for name, other in meaning.items():
            distance = sum((a - b) ** 2 for a, b in zip(_lab(colour), _lab(other),
                                                        strict=True)) ** 0.5
            assert distance >= 20, f"skill colour {colour} is too near {name} ({other})"
