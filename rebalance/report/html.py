"""One self-contained HTML report of a plan: figures, charts and sortable tables, offline.

The page is a single file: the style sheet and the drawing script (``assets/``, hand-written,
no third-party code) are inlined, and the chart data rides along as JSON.  Charts are drawn
as SVG by the script when the page opens; each chart marks itself drawn (``data-drawn``) so a
browser test can tell a blank page from a finished one.

Python's part is aggregation only: sums of plan tables by office, period and skill, worked
out in :mod:`rebalance.report.chart_data`; which limits the plan has at their cap come from
:mod:`rebalance.report.limits_view`, and the salaries after the horizon against the last
hiring cap from :mod:`rebalance.planning`.  The plan itself is never recomputed here.
"""

from __future__ import annotations

import datetime as dt
import json
from collections.abc import Callable
from importlib import resources
from pathlib import Path
from typing import Any

from rebalance.files import atomic_file
from rebalance.numbers import (
    counted,
    dust_free,
    fte_total_text,
    money_amount,
    money_text,
    share_text,
)
from rebalance.plan import budget_lines
from rebalance.planning import (
    BUILD_STAGE,
    new_position_salaries,
    new_position_salary_per_year,
    plan_run_rate,
    run_rate_consequence,
    run_rate_note,
    run_rate_warning,
)
from rebalance.report import analysis_charts, analysis_view
from rebalance.report.chart_data import (
    chart_payload,
    records,
    spare_capacity,
)
from rebalance.report.console import budget_note
from rebalance.report.htmlparts import (
    RUN_ANCHOR,
    RUN_TITLE,
    card,
    chart,
    e,
    note_html,
    run_details,
    scenario_box,
    section,
    stage_words,
    table_html,
)
from rebalance.report.inputs import ReportData, quality_notes
from rebalance.report.late_notice_words import planned_ahead_heading
from rebalance.report.limits_view import (
    DETAILS_AT_LIMIT,
    LIMITS_LEAD,
    LIMITS_TITLE,
    SHORT_YET_AWAY_LEAD,
    LimitLine,
    LimitsFound,
    limits_at_cap,
)
from rebalance.report.words import (
    ATTRITION_NOTE,
    expects_attrition,
    outcome_words,
    parts_decimals,
    people_text,
    total_text,
)

__all__ = ["render_html", "write_html"]

# Longer tables are cut in the page (the CSV files and plan.xlsx hold every row), so an
# agency-sized plan still opens quickly.
TABLE_ROWS = 500
# How the page colours an outcome (its words are rebalance.report.words').
STATUS_TONE = {"optimal": "good", "feasible_with_gap": "fair", "infeasible": "bad",
               "no_plan_in_time": "bad", "error": "bad"}


def _m(value: float) -> tuple[float, str]:
    """A money cell: raw value to sort by, whole units to show."""
    return float(value), money_text(float(value))


def _asset(name: str) -> str:
    return resources.files("rebalance.report").joinpath("assets", name).read_text("utf-8")


# --------------------------------------------------------------------------------------------
# HTML pieces


def _quality_list(data: ReportData) -> str:
    """Each solve stage's outcome, and what its gap leaves open in the stage's own units."""
    stages = [st for st in data.summary.stages if st.name != BUILD_STAGE]
    if not stages:
        return ""
    currency = data.instance.money.currency
    replan = data.summary.replan is not None
    return '<ul class="stages">' + "".join(
        f"<li><strong>{e(st.name)} stage:</strong> "
        f"{e(stage_words(st, currency, replan=replan))}</li>" for st in stages) + "</ul>"


def _headline(data: ReportData) -> str:
    plan, run, money_unit = data.plan, data.summary, data.instance.money
    demand = float(plan.coverage["demand_fte"].sum()) if len(plan.coverage) else 0.0
    share = plan.shortfall_fte / demand if demand else 0.0
    money_note = (f"{budget_note(data.instance, budget_lines(data.instance, plan))}, "
                  f"{data.instance.periods[0].name} to {data.instance.periods[-1].name}")
    people = plan.details["person"].nunique() if len(plan.details) else 0
    hires_new = int(plan.hires.loc[plan.hires["funding"] == "new", "count"].sum()) if len(
        plan.hires) else 0
    vacancy_hires = plan.hires_count() - hires_new
    words, tone = outcome_words(run.status, run.gap), STATUS_TONE.get(str(run.status), "fair")
    # The plan's rules and figures; the outcome words beside it are the solver's report.
    verified = {True: "plan tables verified independently; outcome as the solver reports it",
                False: "FAILED verification",
                None: "verification unknown"}[run.verified]
    spare = spare_capacity(data)
    beyond = float(spare["spare_fte"].sum()) if len(spare) else 0.0
    no_work = float(spare["unassigned_fte"].sum()) if len(spare) else 0.0
    spare_total = beyond + no_work
    digits = parts_decimals([beyond, no_work])  # so that the parts shown add up to the total
    # "Idle capacity" is both parts, each named; "output beyond demand" is the first alone,
    # as in the table below and the workbook (the card had said "capacity beyond demand"
    # for 70.9 where the table's column of that name summed to 47.6).
    if spare_total >= 0.05:
        most = spare.assign(both=spare["spare_fte"] + spare["unassigned_fte"]).sort_values(
            "both", ascending=False).iloc[0]
        spare_note = (f"FTE-periods: {total_text(beyond, digits)} of output beyond demand + "
                      f"{total_text(no_work, digits)} of people's time with no work; most at "
                      f"{most['office']} ({fte_total_text(float(most['both']))})")
    else:
        spare_note = "FTE-periods: none to speak of"
    rate = plan_run_rate(data.instance, plan)
    share_note = run_rate_note(rate, money_unit.currency)
    # Above the cap the share moves into the warning under the note (said once, not twice).
    warning = (f"{share_note}: {run_rate_consequence(rate)}." if rate.above_cap else "")
    # What the plan buys, as the console's "staying put" line; nothing where not worked out.
    staying = run.staying_put_weighted_shortfall
    staying_note = "" if staying is None else (
        f"; {fte_total_text(staying)} with nobody moved or hired")
    cards = [
        # Headline totals as the console's summary and the workbook's write them.
        card("Weighted shortfall", fte_total_text(plan.weighted_shortfall),
              f"FTE-periods; unweighted {fte_total_text(plan.shortfall_fte)}, "
              f"{share_text(plan.shortfall_fte, demand)} of "
              f"{fte_total_text(demand)} demanded{staying_note}",
              "warn" if share > 0.02 else "ok"),
        card("Idle capacity", total_text(spare_total, digits), spare_note),
        # Money in full, as everywhere else: "2.46M" beside "2,463,500" read as two figures.
        card("New money", money_amount(plan.total_cost, money_unit.currency), money_note),
        card("Salaries after the horizon", money_amount(rate.per_year, money_unit.currency),
             f"a year, every year after {data.instance.periods[-1].name}, for the "
             f"{hires_new:,} new position{'' if hires_new == 1 else 's'}; not in new money"
             + (f"; {share_note}" if share_note and not warning else ""),
             "warn" if rate.per_year > 0 else "",
             more=f'<p class="card-note"><strong>Warning:</strong> {e(warning)}</p>'
             if warning else ""),
        card("Hires", f"{plan.hires_count():,}",
              f"{counted(hires_new, 'new position')}, {vacancy_hires:,} into "
              + ("a vacancy" if vacancy_hires == 1 else "vacancies")),
        card("Details", f"{len(plan.details):,}",
             f"person-period{'' if len(plan.details) == 1 else 's'} away, "
             f"{people_text(people)}"),
        card("Reassignments", f"{len(plan.reassignments):,}", "permanent moves"),
        card("Plan quality", words, verified, tone, more=_quality_list(data), wide=True),
    ]
    return '<div class="cards">' + "".join(cards) + "</div>"


def _limits_html(found: LimitsFound) -> str:
    """The limits the plan has at their cap, one item per kind (the console's lines), then
    under words of their own any lines that explain a cap rather than name one."""
    if not found:
        return (f"<h3>{e(LIMITS_TITLE)}</h3>"
                '<p class="quiet">None of the plan\'s limits is at its cap.</p>')

    def lead(*texts: str) -> str:
        return ('<p class="lead">' + " ".join(e(t[:1].upper() + t[1:]) for t in texts).replace(
            "`rebalance marginal`", "<code>rebalance marginal</code>") + "</p>")

    def items(lines: tuple[LimitLine, ...]) -> str:
        return '<ul class="limits">' + "".join(
            f"<li><strong>{e(line.words)}:</strong> {e(line.text)}</li>" for line in lines
        ) + "</ul>"

    explained = found.away_while_short
    return (f'<h3 id="limits">{e(LIMITS_TITLE)}</h3>' + lead(LIMITS_LEAD[0], LIMITS_LEAD[1] + ".")
            + items(found.caps) + (lead(SHORT_YET_AWAY_LEAD + ":") + items(explained)
                                   if explained else ""))


# Limits that hold people where they are (what can keep idle capacity from moving), by the
# names the limits block and `rebalance marginal` give them.
_MOVING_LIMITS = {"seats": "seats full at {}", "away_share": "away share at its cap at {}",
                  "moves_budget": "the moves budget in {}",
                  "details_in_a_row": DETAILS_AT_LIMIT + " for {}"}


def _idle_limits(caps: tuple[LimitLine, ...]) -> str:
    """What may keep idle capacity where it is, named from the limits at their cap."""
    named = []
    for line in caps:
        words = _MOVING_LIMITS.get(line.kind)
        if words is None:
            continue
        places = list(dict.fromkeys(where for where, _ in line.at_cap))
        if line.kind == "details_in_a_row":
            count = len(places)
            named.append(words.format(f"{count:,} {'person' if count == 1 else 'people'}"))
        else:
            named.append(words.format(", ".join(places)))
    if not named:
        return ("No limit on moving people (seats, away share, how often one person may be "
                "away, moves budget) is at its cap in this plan: who may move, and skills the "
                "offices short of work do not need, keep it where it is.")
    return ("Of the limits on moving people, these are at their cap in this plan (listed "
            "under At a glance) and may be what keeps it where it is: " + "; ".join(named)
            + ". Beyond them, who may move and skills the offices short of work do not need "
            "keep it there.")


def _spare_table(data: ReportData, caps: tuple[LimitLine, ...]) -> str:
    spare = spare_capacity(data)
    if spare.empty:
        return ""
    rows = [[r["office"], _f(r["demand_fte"]), _f(r["output_fte"]), _f(r["shortfall_fte"]),
             _f(r["spare_fte"]), _share(r["spare_fte"], r["output_fte"]),
             _f(r["unassigned_fte"]), r["most_in"]]
            for r in records(spare)]
    total = ["all offices", *(_f(float(spare[c].sum())) for c in (
        "demand_fte", "output_fte", "shortfall_fte", "spare_fte")),
        _share(float(spare["spare_fte"].sum()), float(spare["output_fte"].sum())),
        _f(float(spare["unassigned_fte"].sum())), ""]
    return ("<h3>Idle capacity</h3>"
            '<p class="lead">Output that staff and hires produce beyond the demand of their '
            "office and skill (output beyond demand), and time of people there that the plan "
            "gives no work (their "
            "skills are not wanted there then, or the demand is met), summed over the horizon, "
            "in FTE-periods: neither covers anything in this plan. "
            + e(_idle_limits(caps)) + "</p>"
            + table_html(["office", "demand", "output", "shortfall", "output beyond demand",
                          "share of output", "time with no work", "skills with most spare"],
                         rows, name="spare",
                         numeric=[False, True, True, True, True, True, True, False],
                         foot=[total]))


def _f(value: float) -> tuple[float, str]:
    """A total of FTE-periods: raw value to sort by, shown as the workbook's summary shows
    the same table (:func:`fte_total_text`; solver dust as 0)."""
    v = dust_free(value)
    return v, fte_total_text(v)


def _share(part: float, whole: float) -> tuple[float, str]:
    return (part / whole, share_text(part, whole)) if whole else (0.0, "-")


def _shortfall_table(data: ReportData) -> str:
    cov = data.plan.coverage
    short = cov[cov["shortfall_fte"] > 1e-6]
    if short.empty:
        return '<p class="quiet">Every demand row is fully covered.</p>'
    grouped = short.groupby(["office", "skill"]).agg(
        shortfall=("shortfall_fte", "sum"), weighted=("weighted_shortfall", "sum"),
        periods=("period", "nunique"), worst=("shortfall_fte", "max"))
    demand = cov.groupby(["office", "skill"])["demand_fte"].sum()
    rows = []
    for key, g in grouped.sort_values("weighted", ascending=False).iterrows():
        office, skill = str(key[0]), str(key[1])  # type: ignore[index]  # a two-level index
        d = float(demand.get((office, skill), 0.0))
        rows.append([office, skill, float(g["shortfall"]), float(g["weighted"]),
                     _share(float(g["shortfall"]), d), int(g["periods"]), float(g["worst"])])
    return table_html(["office", "skill", "shortfall FTE-periods", "weighted",
                       "share of demand", "periods short", "worst period FTE"], rows,
                      name="shortfall", numeric=[False, False, True, True, True, True, True],
                      limit=TABLE_ROWS)


def _detail_skills(data: ReportData) -> dict[tuple[str, str], list[str]]:
    """The skills each person worked in each period at the office helped, from the plan's
    work table (``details.csv`` does not say which skill a detail was for)."""
    work = data.plan.work
    if work.empty or "skill" not in work.columns:
        return {}
    away = {(str(p), str(t), str(o)) for p, t, o in zip(
        data.plan.details["person"], data.plan.details["period"],
        data.plan.details["to_office"], strict=True)}
    out: dict[tuple[str, str], list[str]] = {}
    for person, period, office, skill, fte in zip(
            work["person"], work["period"], work["office"], work["skill"], work["fte"],
            strict=True):
        if (str(person), str(period), str(office)) in away and float(fte) > 1e-9:
            out.setdefault((str(person), str(period)), []).append(str(skill))
    return out


def _detail_runs(data: ReportData) -> list[list[Any]]:
    """Consecutive detail periods of one person to one office, as one row: person, home
    office, office helped, skills worked there, first and last period, periods, cost."""
    index = {p: i for i, p in enumerate(data.instance.period_names)}
    runs: list[list[Any]] = []
    details = data.plan.details.copy()
    if details.empty:
        return runs
    skills = _detail_skills(data)
    details["t"] = details["period"].map(lambda p: index.get(str(p), -1))
    details = details.sort_values(["person", "t"])
    current: list[Any] | None = None
    worked: list[str] = []

    def finish(run: list[Any]) -> list[Any]:
        return [*run[:3], ", ".join(dict.fromkeys(worked)) or "-", *run[3:-1]]

    for row in records(details):
        here = skills.get((str(row["person"]), str(row["period"])), [])
        if (current is not None and current[0] == row["person"] and current[2] == row["to_office"]
                and current[-1] == row["t"] - 1):
            current[4] = row["period"]
            current[5] += 1
            current[6] += float(row["cost"])
            current[-1] = row["t"]
            worked.extend(here)
            continue
        if current is not None:
            runs.append(finish(current))
        current = [row["person"], row["from_office"], row["to_office"], row["period"],
                   row["period"], 1, float(row["cost"]), row["t"]]
        worked = list(here)
    if current is not None:
        runs.append(finish(current))
    return runs


def _comparison_names(data: ReportData) -> list[str]:
    """The scenarios of a comparison page (a scenarios table beside the plan), else []."""
    return analysis_charts.scenario_names(data.scenarios) if data.scenarios is not None else []


# On a comparison page the plan's own sections show the base plan only; their headings say
# so (a practitioner's reading took "At a glance" beside the scenarios for the comparison's).
BASE_PLAN_TITLE = "Base plan: {}"
# The sections of the plan itself, by anchor: the analysis sections around them are the
# comparison's.  "reasons" is drawn by analysis_view, from the base plan's reasons.csv.
PLAN_SECTIONS = frozenset({"glance", "capacity", "gaps", "moves", "hiring", "money", "reasons",
                           "run"})


def _plan_titled(data: ReportData) -> Callable[[str, str], str]:
    """A section's heading by its anchor: the base plan's, named so, on a comparison page;
    as given on any other page."""
    if not _comparison_names(data):
        return lambda anchor, title: title
    return lambda anchor, title: (BASE_PLAN_TITLE.format(title[:1].lower() + title[1:])
                                  if anchor in PLAN_SECTIONS else title)


def _page_heading(data: ReportData) -> tuple[str, str]:
    """What the page is, as (kicker, heading): a plain plan, a re-plan (from summary.json's
    ``replan``), the plan made ahead for one (its ``planned_ahead``) or a scenario comparison
    (a scenarios table beside the plan).  The instance goes by its title where settings give
    one (report.title), else by its folder's name."""
    name = data.instance.heading
    replan = data.summary.replan
    if replan is not None:
        also = f", scenario {replan.scenario}" if replan.scenario else ""
        return f"Staffing plan · {name}", f"Re-plan from {replan.from_period}{also}"
    if (ahead := data.summary.planned_ahead) is not None:  # a re-plan's planned_ahead/ folder
        return f"Staffing plan · {name}", planned_ahead_heading(
            ahead.for_replan_at, data.summary.scenario, data.instance.period_names[0])
    if data.summary.scenario:
        # A compare's scenarios/<name>/ folder: the instance's name alone ("tiny+surge") had
        # not said that this is the plan under that scenario.
        return f"Staffing plan · {name}", f"Scenario {data.summary.scenario}"
    names = _comparison_names(data)
    if names:
        others = [n for n in names if n != "base"]
        shown = others[:4] + ([f"{len(others) - 4} more"] if len(others) > 4 else [])
        heading = ("Comparison: base and " if "base" in names else "Comparison: ") + ", ".join(
            shown)
        return f"Staffing plan · {name}", heading
    return "Staffing plan", name


def render_html(data: ReportData) -> str:
    """The whole report as one HTML string."""
    inst, plan, run = data.instance, data.plan, data.summary
    cash = inst.money.header  # a money column's name, with the currency where one is set
    titled = _plan_titled(data)
    extra = analysis_view.analysis_payload(data, titled)
    payload = {**chart_payload(data), **extra.payload}
    # "</" inside a script element would end it early; JSON allows the escaped form.
    data_json = json.dumps(payload, separators=(",", ":"), allow_nan=False).replace("</", "<\\/")
    written = dt.datetime.now(dt.UTC).strftime("%Y-%m-%d %H:%M UTC")
    locations = len({o.location for o in inst.offices})
    subtitle = (f"{counted(len(inst.periods), 'period')}, {inst.periods[0].name} to "
                f"{inst.periods[-1].name} &middot; {counted(len(inst.offices), 'office')} in "
                f"{counted(locations, 'location')} &middot; {len(inst.staff):,} staff &middot; "
                f"{counted(len(inst.skills), 'skill')}")
    sections = []

    def plan_section(anchor: str, title: str, lead: str, body: str) -> str:
        return section(anchor, titled(anchor, title), lead, body)

    found = limits_at_cap(inst, plan)
    nav = [("glance", "At a glance"), ("capacity", "Work and capacity"),
           ("gaps", "Where the gaps are"), ("moves", "Who moves where"),
           ("hiring", "Hiring"), ("money", "Money"), *extra.nav, (RUN_ANCHOR, RUN_TITLE)]
    sections.append(plan_section(
        "glance", "At a glance",
        "The plan's headline figures. An <em>FTE-period</em> is one full-time person for one "
        "period; weighted shortfall multiplies each uncovered FTE-period by its priority.",
        _headline(data) + _limits_html(found)))
    sections.append(plan_section(
        "capacity", "Work and capacity",
        "Demand (dark line) against what current staff cover (blue) and what new hires add "
        "(green), summed over skills. Red is demand left uncovered; the pale band above the line, "
        "dashed on top, is output beyond demand, which covers nothing (part of the idle "
        "capacity below)." + (f" {ATTRITION_NOTE}" if expects_attrition(inst) else ""),
        chart("coverage", "Demand against covered work per office")
        + _spare_table(data, found.caps)))
    sections.append(plan_section(
        "gaps", "Where the gaps are",
        "Uncovered FTE by office and period; darker is a larger gap. Hover a cell for the "
        "skills short there.",
        chart("heat", "Shortfall by office and period") + _shortfall_table(data)))
    runs = [[*r[:7], _m(r[7])] for r in _detail_runs(data)]
    moves_body = chart("flows", "Staff movements between offices",
                        "Band width: person-periods of work moved. A reassignment counts every "
                        "period from its start to the end of the horizon.")
    moves_body += "<h3>Details</h3>" + (table_html(
        ["person", "home office", "to office", "skill worked", "first period", "last period",
         "periods", cash("cost")], runs,
        name="details", numeric=[False] * 6 + [True, True], limit=TABLE_ROWS) if runs else
        '<p class="quiet">No details in this plan.</p>')
    reas = [[r["person"], r["from_office"], r["to_office"], r["period"], _m(r["cost"])]
            for r in records(plan.reassignments)]
    moves_body += "<h3>Reassignments</h3>" + (table_html(
        ["person", "from office", "to office", "effective", cash("cost")], reas,
        name="reassignments", numeric=[False] * 4 + [True], limit=TABLE_ROWS) if reas else
        '<p class="quiet">No reassignments in this plan.</p>')
    sections.append(plan_section(
        "moves", "Who moves where",
        "Temporary details (blue) and permanent reassignments (purple), from home office on the "
        "left to the office helped on the right.", moves_body))
    hires = [[r["office"], r["skill"], r["start_period"], int(r["count"]), r["funding"],
              _m(r["onboarding_cost"]), _m(r["salary_cost"]),
              _m(new_position_salary_per_year(inst, str(r["skill"]), int(r["count"])))
              if r["funding"] == "new" else (0.0, "-")]
             for r in records(plan.hires)]
    sections.append(plan_section(
        "hiring", "Hiring",
        "Hires by the period they start and by skill. New hires ramp up before they are fully "
        "productive, so a start shows in capacity gradually.",
        chart("hires", "Hires by start period and skill") + (table_html(
            ["office", "skill", "start", "count", "funding", cash("onboarding cost"),
             cash("new salary to horizon end"), cash("salary a year after it")], hires,
            name="hires",
            numeric=[False, False, False, True, False, True, True, True], limit=TABLE_ROWS)
            if hires else "")))  # the chart already says there are none
    cost_rows = [[r["year"], r["kind"], _m(r["spend"]),
                  (r["cap"], money_text(r["cap"])) if r["cap"] is not None else (1e300, "no cap"),
                  _share(r["spend"], r["cap"]) if r["cap"] else (0, "-")]
                 for r in payload["budget"]]
    sections.append(plan_section(
        "money", "Money",
        "New money only: onboarding, salaries of new positions, details and relocations, by "
        "budget year, against each year's caps (the black tick). All bars share one scale"
        + (f", in {e(inst.money.currency)}." if inst.money.currency else "."),
        chart("budget", cash("Spending against budget by year"),
              f"Amounts in {inst.money.currency}." if inst.money.currency else "")
        + table_html(
            ["year", "budget line", cash("spent"), cash("cap"), "used"], cost_rows, name="costs",
            numeric=[False, False, True, True, True]) + _commitments(data)))
    sections.extend(extra.sections)
    sections.append(plan_section(RUN_ANCHOR, RUN_TITLE, "", run_details(data)))
    toc = "".join(f'<a href="#{a}">{e(t)}</a>' for a, t in nav)
    words, tone = outcome_words(run.status, run.gap), STATUS_TONE.get(str(run.status), "fair")
    notes = "".join(note_html(n) for n in (*quality_notes(data), *data.notes))
    kicker, heading = _page_heading(data)
    title = (f"{heading} · {inst.heading}" if heading != inst.heading
             else f"Staffing plan: {heading}")
    return f"""<!DOCTYPE html>
<html lang="en">
<head>
<meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>{e(title)}</title>
<style>{_asset("report.css")}</style>
</head>
<body data-charts-drawn="0">
<header class="top">
  <div class="top-inner">
    <div>
      <p class="kicker">{e(kicker)}</p>
      <h1>{e(heading)}</h1>
      <p class="sub">{subtitle}</p>
    </div>
    <div class="stamp"><span class="pill {tone}">{e(words)}</span>
      <span class="written">written {written}</span></div>
  </div>
  <nav class="toc">{toc}</nav>
</header>
<main>
<aside class="caution" role="note"><strong>Before you act on this.</strong> {e(run.caution)}</aside>
{notes}
{scenario_box(run.scenario_changes)}
{"".join(sections)}
</main>
<footer><p>{e(run.caution)}</p><p>Made by rebalance from the plan tables in this folder;
the CSV files and plan.xlsx hold every row.</p></footer>
<script type="application/json" id="report-data">{data_json}</script>
<script>{_asset("report.js")}</script>
</body>
</html>
"""


def _commitments(data: ReportData) -> str:
    """What new positions cost every year once the horizon (and its budget years) ends."""
    table = new_position_salaries(data.instance, data.plan)
    if table.empty:
        return ('<p class="quiet">No new positions: nothing is committed beyond the '
                "horizon.</p>")
    inst = data.instance
    total = float(table["per_year"].sum())
    per_year = money_amount(total, inst.money.currency)
    positions = int(table["positions"].sum())
    rows = [[r["skill"], int(r["positions"]), _m(r["salary_per_period"]), _m(r["per_year"])]
            for r in records(table)]
    rate = plan_run_rate(inst, data.plan, table)
    share_note, warning = (run_rate_note(rate, inst.money.currency),
                           run_rate_warning(rate, inst.money.currency))
    # "The last hiring cap set" only where it is (a later year the horizon cuts is said).
    beside = (f" That is {e(share_note)}" + ("" if rate.part_year else ", the last hiring cap "
              "set") + "." if share_note else "")
    beside += (f'</p><p class="note"><strong>Warning:</strong> {e(warning)}.'
               if warning else "")
    return (f"<h3>Committed beyond the horizon</h3><p class=\"lead\">The {positions:,} new "
            f"position{'' if positions == 1 else 's'} this plan creates "
            f"{'keeps' if positions == 1 else 'keep'} being paid after "
            f"{e(inst.periods[-1].name)}: <strong>{e(per_year)} a year"
            "</strong> in salaries "
            "(positions &times; salary per period &times; "
            f"{counted(inst.periods_per_year, 'period')} a "
            "year), on top of the new money above, which stops at the horizon's end."
            f"{beside}</p>"
            + table_html(["skill", "new positions", inst.money.header("salary per period"),
                          inst.money.header("salary a year")],
                         rows, name="commitments", numeric=[False, True, True, True],
                         foot=[["all skills", positions, "", _m(total)]]))


def write_html(data: ReportData, path: str | Path) -> Path:
    """Write ``report.html`` (a temporary file renamed into place, so never half-written)."""
    page = render_html(data)  # before the file is begun: a failure leaves no temporary
    with atomic_file(path) as tmp:
        tmp.write_text(page, encoding="utf-8")
    return Path(path)
