"""What a report is made from: the instance, the plan tables, the run summary, and any analysis
tables found beside them.  Gathered either from a fresh :class:`PlanResult` or from a plan
folder on disk, so ``rebalance plan`` and ``rebalance report`` draw the same pages.

Nothing here computes a plan; analysis tables (frontier, scenarios, marginal values) are read
as their writers left them, with columns looked up defensively.
"""

from __future__ import annotations

import json
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Literal

import pandas as pd

from rebalance.analysis.frontier import FRONTIER_COLUMNS
from rebalance.analysis.marginal import MARGINAL_COLUMNS
from rebalance.analysis.planned_ahead import AHEAD_COLUMN
from rebalance.analysis.reasons import REASON_COLUMNS
from rebalance.analysis.replan import CHANGE_COLUMNS, REPLAN_COLUMNS
from rebalance.analysis.scenario_actions import ACTION_COLUMNS, REASON_COLUMN
from rebalance.analysis.scenarios import OFFICE_COLUMNS, SCENARIO_COST_COLUMNS
from rebalance.instance import Instance
from rebalance.plan import Plan, read_plan
from rebalance.planning import CAUTION, PlanResult, gap_warning, summary_dict
from rebalance.problems import problems_counted
from rebalance.report.console import problem_lines
from rebalance.tables import RawTable, known_case
from rebalance.verify import Violation, verify_folder
from rebalance.verify_causes import group_problems

__all__ = ["AHEAD_KEY", "ANALYSIS_FILES", "SCENARIO_KEY", "SHEET_ONLY", "TABLE_FILES",
           "VERIFY_POINTERS", "Note", "PlannedAheadSummary", "Pointer", "ProblemText",
           "ReplanSummary", "ReportData", "RunSummary", "ScenarioSummary", "StageSummary",
           "problem_texts", "quality_notes", "report_data", "report_data_from_folder",
           "stored_instance_path"]

# Where the notes of a failed verification send a reader, by the kind of pointer a note
# holds: words true of every surface that shows them (the workbook lists no problems); the
# page links its own list instead (htmlparts.NOTE_LINKS).
Pointer = Literal["verify_lists", "verify_listed"]
VERIFY_POINTERS: dict[Pointer, str] = {
    "verify_lists": "rebalance verify lists why",
    "verify_listed": "listed by rebalance verify",
}


@dataclass(frozen=True)
class Note:
    """A note a reader must see before the figures.  One that sends the reader to the list of
    problems holds that pointer apart, between ``text`` and ``after``, so each surface puts
    its own: the page a link to its list, others :data:`VERIFY_POINTERS`' words (the page
    had found those words in the finished text and rewritten them)."""

    text: str
    pointer: Pointer | None = None
    after: str = ""

    def words(self) -> str:
        """The note as plain text, its pointer in :data:`VERIFY_POINTERS`' words."""
        if self.pointer is None:
            return self.text + self.after
        return f"{self.text}{VERIFY_POINTERS[self.pointer]}{self.after}"

# Analysis tables a plan folder may hold (issue 5 writes them); each section shows only if
# its file is there.  Several names are accepted for the scenario comparison.
ANALYSIS_FILES: dict[str, tuple[str, ...]] = {
    "frontier": ("frontier.csv",),
    "scenarios": ("scenarios.csv", "comparison.csv", "compare.csv"),
    "marginal_values": ("marginal_values.csv",),
}
# Further analysis tables shown as they are (no chart): name -> file.  Each gets a sheet of
# plan.xlsx, and a section of report.html unless it is in SHEET_ONLY.
TABLE_FILES: dict[str, str] = {
    "reasons": "reasons.csv",
    "replan": "replan.csv",
    "changes": "changes.csv",
    "scenario_actions": "scenario_actions.csv",
    "scenario_costs": "scenario_costs.csv",
    "scenario_offices": "scenario_offices.csv",
}
# scenario_costs is the cost columns of scenarios.csv stacked long: a sheet to pivot, where
# the page already charts and lists those figures.  scenario_offices (demand and shortfall by
# scenario and office) is said in the scenarios section's lines, where shortfall moved.
SHEET_ONLY = frozenset({"scenario_costs", "scenario_offices"})
# The columns each analysis table's writer gives it, so a header written but for case
# ("Scenario", " SCENARIO ") reads as named (known_case), as the instance's and the plan
# tables' do (replan.csv's planned_ahead only where a re-plan wrote it).  scenarios.csv has
# no such list where it is written (columns by cap, kind of cost and year): its headers are
# read as written.
TABLE_COLUMNS: dict[str, tuple[str, ...]] = {
    "frontier": FRONTIER_COLUMNS,
    "marginal_values": MARGINAL_COLUMNS,
    "reasons": REASON_COLUMNS,
    "replan": (*REPLAN_COLUMNS, AHEAD_COLUMN),
    "changes": CHANGE_COLUMNS,
    "scenario_actions": (*ACTION_COLUMNS, REASON_COLUMN),
    "scenario_costs": SCENARIO_COST_COLUMNS,
    "scenario_offices": OFFICE_COLUMNS,
}


@dataclass(frozen=True)
class StageSummary:
    name: str
    status: str
    objective: float | None
    bound: float | None
    gap: float | None
    seconds: float | None
    solver_says: str


@dataclass(frozen=True)
class ReplanSummary:
    """Which re-plan a plan is (``summary.json``'s ``replan`` key, written by ``rebalance
    replan``): the first period re-planned and the scenario applied first, if any."""

    from_period: str
    scenario: str | None = None

    @classmethod
    def from_raw(cls, value: Any) -> ReplanSummary | None:
        if not isinstance(value, dict) or not value.get("from_period"):
            return None
        scenario = value.get("scenario")
        return cls(str(value["from_period"]), str(scenario) if scenario else None)


# summary.json's key for what a scenario assumed (rebalance.report.scenario_notes writes it).
SCENARIO_KEY = "scenario_changes"


@dataclass(frozen=True)
class ScenarioSummary:
    """What the scenario a plan was made under assumed (``summary.json``'s
    :data:`SCENARIO_KEY`, written by ``rebalance compare`` and ``rebalance replan
    --scenario``): its name, description, and demand and budget changes in words."""

    name: str
    description: str = ""
    demand: tuple[str, ...] = ()
    budget: tuple[str, ...] = ()

    @classmethod
    def from_raw(cls, value: Any) -> ScenarioSummary | None:
        if not isinstance(value, dict) or not value.get("name"):
            return None

        def texts(key: str) -> tuple[str, ...]:
            items = value.get(key)
            return tuple(str(v) for v in items) if isinstance(items, list) else ()

        return cls(str(value["name"]), str(value.get("description") or ""), texts("demand"),
                   texts("budget"))


# summary.json's key of a plan made ahead for a re-plan (``rebalance replan --planned-ahead``
# writes it in its planned_ahead/ folder).
AHEAD_KEY = "planned_ahead"


@dataclass(frozen=True)
class PlannedAheadSummary:
    """Which re-plan a plan was made ahead for (``summary.json``'s :data:`AHEAD_KEY`): the
    period the re-plan reacts at.  The plan itself runs from the instance's first period."""

    for_replan_at: str

    @classmethod
    def from_raw(cls, value: Any) -> PlannedAheadSummary | None:
        if not isinstance(value, dict) or not value.get("for_replan_at"):
            return None
        return cls(str(value["for_replan_at"]))


@dataclass(frozen=True)
class RunSummary:
    """The parts of ``summary.json`` a report shows, typed; missing keys read as unknown."""

    instance: str
    status: str
    objective_mode: str
    gap: float | None
    solver: str
    solver_version: str
    model_columns: int | None
    model_rows: int | None
    model_integer_columns: int | None
    build_seconds: float | None
    solve_seconds: float | None
    verified: bool | None
    violations: tuple[str, ...]
    conflicts: tuple[str, ...]
    warnings: tuple[str, ...]
    stages: tuple[StageSummary, ...]
    caution: str = CAUTION
    replan: ReplanSummary | None = None  # None: not a re-plan
    # The scenario whose plan this is (a compare's scenarios/<name>/ folder); None: not one.
    scenario: str | None = None
    # What that scenario (or a re-plan's) assumed; None: no scenario, or a folder written
    # before the key.
    scenario_changes: ScenarioSummary | None = None
    # The weighted shortfall with nobody moved or hired (the work split at its best): what
    # the plan buys.  None where not worked out (weighted mode, a re-plan, a scenario's plan
    # from its base, a very large model) or a folder written before the key.
    staying_put_weighted_shortfall: float | None = None
    # The re-plan this plan was made ahead for; None: not a plan made ahead.
    planned_ahead: PlannedAheadSummary | None = None

    @classmethod
    def from_dict(cls, raw: Mapping[str, Any]) -> RunSummary:
        def num(value: Any) -> float | None:
            return float(value) if isinstance(value, int | float) and not isinstance(
                value, bool) else None

        def whole(value: Any) -> int | None:
            return int(value) if isinstance(value, int) and not isinstance(value, bool) else None

        def texts(value: Any) -> tuple[str, ...]:
            return tuple(str(v) for v in value) if isinstance(value, list) else ()

        def section(key: str) -> dict[str, Any]:
            value = raw.get(key)
            return value if isinstance(value, dict) else {}

        model, seconds, verification = section("model"), section("seconds"), section(
            "verification")
        stages = []
        for s in raw.get("stages") or []:
            if isinstance(s, dict):
                stages.append(StageSummary(str(s.get("stage", "")), str(s.get("status", "")),
                                           num(s.get("objective")), num(s.get("bound")),
                                           num(s.get("gap")), num(s.get("seconds")),
                                           str(s.get("solver_says", ""))))
        passed = verification.get("passed")
        return cls(
            instance=str(raw.get("instance", "")),
            status=str(raw.get("status", "unknown")),
            objective_mode=str(raw.get("objective_mode", "")),
            gap=num(raw.get("gap")),
            solver=str(raw.get("solver", "")),
            solver_version=str(raw.get("solver_version", "")),
            model_columns=whole(model.get("columns")),
            model_rows=whole(model.get("rows")),
            model_integer_columns=whole(model.get("integer_columns")),
            build_seconds=num(seconds.get("build")),
            solve_seconds=num(seconds.get("solve")),
            verified=passed if isinstance(passed, bool) else None,
            violations=texts(verification.get("violations")),
            conflicts=texts(raw.get("conflicts")),
            warnings=texts(raw.get("warnings")),
            stages=tuple(stages),
            caution=str(raw.get("caution") or CAUTION),
            replan=ReplanSummary.from_raw(raw.get("replan")),
            scenario=str(raw["scenario"]) if raw.get("scenario") else None,
            scenario_changes=ScenarioSummary.from_raw(raw.get(SCENARIO_KEY)),
            staying_put_weighted_shortfall=num(raw.get("staying_put_weighted_shortfall")),
            planned_ahead=PlannedAheadSummary.from_raw(raw.get(AHEAD_KEY)),
        )


@dataclass(frozen=True)
class ProblemText:
    """One problem of a failed verification as the reports list it: its own line and a line
    for each coverage.csv row only out of date because of it (in the console's words,
    :func:`rebalance.report.console.problem_lines`)."""

    text: str
    under: tuple[str, ...] = ()


def problem_texts(violations: Sequence[Violation]) -> tuple[ProblemText, ...]:
    """``violations`` grouped into problems (:func:`rebalance.verify_causes.group_problems`),
    as text: a moved work row had listed as nine lines on the page, one extra hire as seven."""
    return tuple(ProblemText(text, tuple(under)) for text, under in (
        problem_lines(problem) for problem in group_problems(violations)))


@dataclass(frozen=True)
class ReportData:
    """Everything the workbook and HTML writers read."""

    instance: Instance
    plan: Plan
    summary: RunSummary
    frontier: pd.DataFrame | None = None
    scenarios: pd.DataFrame | None = None
    marginal_values: pd.DataFrame | None = None
    # TABLE_FILES present in the folder, in that order: (name, table).
    tables: tuple[tuple[str, pd.DataFrame], ...] = ()
    notes: tuple[Note, ...] = field(default=())
    # The summary's violations grouped into problems (problem_texts), which summary.json's
    # flat list of lines cannot say; empty where the plan passed.
    problems: tuple[ProblemText, ...] = ()


def quality_notes(data: ReportData) -> list[Note]:
    """Warnings a reader must see before the figures: a wide gap (:func:`gap_warning`, as
    the console and summary.json say it), a failed verification."""
    run, notes = data.summary, []
    if wide := gap_warning(run.status, run.gap):
        notes.append(Note(wide))
    if run.verified is False:
        notes.append(Note("This plan FAILED independent verification; ", "verify_lists", "."))
    return notes


def report_data(result: PlanResult, plan_dir: str | Path | None = None) -> ReportData:
    """Report inputs from a fresh solve (analysis tables from ``plan_dir`` when given)."""
    if result.plan is None:
        raise ValueError("no plan to report")
    analysis, tables, notes = _analysis_tables(Path(plan_dir)) if plan_dir else ({}, (), [])
    summary = summary_dict(result)
    if plan_dir:
        saved = _saved_summary(Path(plan_dir))
        # Which re-plan this is: 'rebalance replan' adds it to the folder's summary.json.
        summary.setdefault("replan", saved.get("replan"))
        # Which scenario's plan this is: 'rebalance compare' adds it to each scenario's.
        summary.setdefault("scenario", saved.get("scenario"))
        # What that scenario assumed: both commands add it beside the name.
        summary.setdefault(SCENARIO_KEY, saved.get(SCENARIO_KEY))
        # Which re-plan a plan was made ahead for: 'rebalance replan --planned-ahead' adds it.
        summary.setdefault(AHEAD_KEY, saved.get(AHEAD_KEY))
    return ReportData(result.instance, result.plan, RunSummary.from_dict(summary),
                      tables=tables, notes=tuple(notes),
                      problems=problem_texts(result.violations), **analysis)


def _saved_summary(folder: Path) -> dict[str, Any]:
    """``folder/summary.json``, read once; empty where there is none or it is unreadable."""
    try:
        raw = json.loads((folder / "summary.json").read_text(encoding="utf-8"))
    except (OSError, json.JSONDecodeError):
        return {}
    return raw if isinstance(raw, dict) else {}


def report_data_from_folder(plan_dir: str | Path, instance: Instance,
                            violations: Sequence[Violation] | None = None) -> ReportData:
    """Report inputs from a plan folder written by ``rebalance plan`` (and analysis commands).

    ``violations``: the folder's verification against ``instance``, if the caller has just
    run it (else it is run here)."""
    folder = Path(plan_dir)
    summary_path = folder / "summary.json"
    notes: list[Note] = []
    raw: dict[str, Any] = {}
    if summary_path.is_file():
        try:
            loaded = json.loads(summary_path.read_text(encoding="utf-8"))
            raw = loaded if isinstance(loaded, dict) else {}
        except json.JSONDecodeError as exc:
            notes.append(Note(f"summary.json could not be read ({exc}); run details are "
                              "unknown"))
    else:
        notes.append(Note("summary.json is missing; run details are unknown"))
    raw.setdefault("instance", instance.name)
    # The report says what the folder's files are now, not what summary.json said when the
    # plan was written: they may have been edited, lost a table, or belong to another instance.
    if violations is None:
        violations = verify_folder(instance, folder)
    raw["verification"] = {"passed": not violations,
                           "violations": [str(v) for v in violations]}
    problems = problem_texts(violations)
    if problems:
        # Counted as listed (a moved work row is one problem, not its nine lines).
        notes.append(Note(f"verified again for this report against instance {instance.name}: "
                          f"{problems_counted(len(problems))}, ", "verify_listed",
                          "; the figures below are the files' as they stand"))
    analysis, tables, more = _analysis_tables(folder)
    return ReportData(instance, read_plan(folder), RunSummary.from_dict(raw), tables=tables,
                      notes=tuple(notes + more), problems=problems, **analysis)


def _read_table(path: Path, notes: list[Note],
                columns: Sequence[str] = ()) -> pd.DataFrame | None:
    """``path`` as a table, or None (a note says why) where it is empty or unreadable; each
    column named as one of ``columns`` but for case or surrounding spaces renamed to it."""
    try:
        # Only an empty cell is missing: a scenario, office or person named null, NA or None
        # is a name (a scenario named null had lost its name on the page and in the workbook).
        # Budget years as text (scenarios.csv's *_budget_years): a single year read as the
        # number 2027 had been written 2,027 in the workbook.
        header = pd.read_csv(path, nrows=0).columns
        frame = pd.read_csv(path, keep_default_na=False, na_values=[""], dtype={
            c: str for c in header if str(c).strip().endswith("_budget_years")})
    except (ValueError, OSError) as exc:  # pandas' parser errors are ValueErrors
        notes.append(Note(f"{path.name} could not be read ({exc}); its section is left out"))
        return None
    stripped = RawTable(path.name, tuple(str(c).strip() for c in frame.columns), ())
    frame.columns = list(known_case(stripped, columns).columns)
    return frame if len(frame) else None


def _analysis_tables(folder: Path) -> tuple[dict[str, pd.DataFrame | None],
                                             tuple[tuple[str, pd.DataFrame], ...], list[Note]]:
    charted: dict[str, pd.DataFrame | None] = {}
    notes: list[Note] = []
    for name, files in ANALYSIS_FILES.items():
        present = [folder / f for f in files if (folder / f).is_file()]
        charted[name] = (_read_table(present[0], notes, TABLE_COLUMNS.get(name, ()))
                         if present else None)
    tables = []
    for name, file in TABLE_FILES.items():
        frame = (_read_table(folder / file, notes, TABLE_COLUMNS.get(name, ()))
                 if (folder / file).is_file() else None)
        if frame is not None:
            tables.append((name, frame))
    return charted, tuple(tables), notes


def stored_instance_path(plan_dir: str | Path) -> str | None:
    """The instance path ``rebalance plan`` stored in summary.json, if any."""
    path = Path(plan_dir) / "summary.json"
    try:
        raw = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, json.JSONDecodeError):
        return None
    value = raw.get("instance_path") if isinstance(raw, dict) else None
    return str(value) if value else None
