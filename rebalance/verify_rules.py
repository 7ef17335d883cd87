"""The verifier's terms, apart from its checks: each rule's code, the table it concerns and its
words; a :class:`Violation` of one; and the one tolerance every comparison of figures uses.

:mod:`rebalance.verify` makes violations and :mod:`rebalance.verify_causes` links and groups
them; both import these from here (the second had kept a copy of the tolerance, as importing
the verifier's would have made a cycle).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Literal

__all__ = ["ABS_TOL", "REL_TOL", "RULES", "NameKind", "Violation", "close", "over",
           "solver_report_problems"]

# Two figures agree within this, absolute and relative to the larger (the verifier's every
# comparison, and its causes' reading of a row's figures).
ABS_TOL = REL_TOL = 1e-6


def close(a: float, b: float, tol: float = ABS_TOL) -> bool:
    """Whether ``a`` and ``b`` agree within ``tol`` plus :data:`REL_TOL` of the larger."""
    return abs(a - b) <= tol + REL_TOL * max(abs(a), abs(b))


def over(value: float, cap: float) -> bool:
    """Whether ``value`` exceeds ``cap`` by more than the tolerance."""
    return value > cap + ABS_TOL + REL_TOL * abs(cap)


# The kinds of name a plan's columns hold, each checked against one of the instance's lists.
NameKind = Literal["person", "office", "skill", "period"]

# Each rule's plan table (of several, the one to open first) and what it asks in a planner's
# words, said for its code ("one_detail" read as an internal name); none where the message is.
RULES: dict[str, tuple[str, str]] = {
    "missing_table": ("", ""), "missing_column": ("", ""), "unknown_reference": ("", ""),
    "one_reassignment": ("reassignments", "at most one reassignment a person"),
    "reassignment_allowed": ("reassignments", "only people who may relocate are reassigned"),
    "reassignment_present": ("reassignments", "only people on the staff then are reassigned"),
    "reassignment_from": ("reassignments", "a reassignment starts from the home office"),
    "reassignment_to": ("reassignments", "a reassignment moves to another office"),
    "reassignment_cost": ("reassignments", "cost at the relocation price"),
    "one_detail": ("details", "one detail a period"),
    "detail_to": ("details", "a detail goes to another office"),
    "detail_allowed": ("details", "only people who may be detailed, where policy allows"),
    "detail_present": ("details", "only people on the staff then are detailed"),
    "detail_from": ("details", "a detail starts from the home office in force"),
    "detail_cost": ("details", "cost at the detail price"),
    "consecutive_details": ("details", "detail periods in a row within the policy's limit"),
    "away_share": ("details", "people away within the policy's share of an office"),
    "work_repeated": ("work", "one row per person, period, office and skill"),
    "work_negative": ("work", "fte not below zero"),
    "work_skill": ("work", "work only in skills the person has"),
    "work_location": ("work", "work where the person is that period"),
    "work_output": ("work", "output is proficiency x fte"),
    "work_capacity": ("work", "work within the person's available FTE"),
    "hire_count": ("hires", ""), "hire_funding": ("hires", ""), "time_to_hire": ("hires", ""),
    "hire_cost": ("hires", "costs at the prices of skills.csv"),
    "max_hires": ("hires", "hires a period within the office's limit"),
    "vacancies": ("hires", "vacancy hires within the funded vacancies"),
    "seats": ("hires", "people based there, detailed in and hired within the office's seats"),
    **{rule: ("coverage", "one coverage row per demand row")
       for rule in ("coverage_rows", "coverage_missing")},
    **{f"coverage_{column}": ("coverage", "figures as recomputed from demand, work and hires")
       for column in ("demand", "staff_output", "hire_output", "covered", "shortfall",
                      "priority", "weighted_shortfall")},
    "costs": ("costs", "costs a year and kind as recomputed from the plan"),
    "hiring_budget": ("costs", "hiring spend within the year's budget"),
    "moves_budget": ("costs", "moves spend within the year's budget"),
    "summary": ("", "figures as recomputed from the plan tables"),
    "solver_report": ("", "the solver's own report must agree with itself"),
}


@dataclass(frozen=True)
class Violation:
    """One broken rule: ``rule`` (a code, see :data:`RULES`), ``where`` (what it concerns, or a
    file and row) and a message.  ``table`` and ``line`` say which plan table (``"work"``) and
    which line of its file it is about, where it is about one table or one row; ``file`` is
    where it is as printed ("plans/a/work.csv:7", with the plan's folder where known), made
    from them for a plan table (summary.json is none): causes are linked on them, not on the
    text.  An ``unknown_reference`` also says which ``column`` names what the instance lacks
    and which ``name_kind`` of name it should hold, so a caller need not read the message
    back.  A coverage figure only out of date because of an earlier violation ``follows`` it
    (the first, where several apply: the rest are ``also_follows``); a seats excess says the
    office and period (index) it is ``at``, so a report can join a run.  Where it is about
    one ``person`` or one ``period`` (a work row, a person's capacity, a seats excess, a
    coverage row: its ``where`` says them) it names them, and a coverage figure names its
    ``figure_column`` ("staff_output_fte"; ``column`` stays an unknown name's alone), so a
    report need not read them back out of the text."""

    rule: str
    where: str
    message: str
    column: str | None = None
    name_kind: NameKind | None = None
    file: str = ""
    follows: Violation | None = None
    at: tuple[str, int] | None = None
    also_follows: tuple[Violation, ...] = ()
    table: str = ""
    line: int | None = None
    person: str | None = None
    period: str | None = None
    figure_column: str | None = None

    def __str__(self) -> str:
        """As a planner reads it: the file first (once), the rule in words last, no code."""
        words = RULES.get(self.rule, ("", ""))[1]
        text = ": ".join(part for part in dict.fromkeys((self.file, self.where)) if part)
        return f"{text}: {self.message}" + (f" ({words})" if words else "")


# The outcomes a folder with plan tables can record (solve.Status's with a plan).
PLAN_STATUSES = ("optimal", "feasible_with_gap")


def _number(value: object) -> float | None:
    return float(value) if isinstance(value, int | float) and not isinstance(value, bool) \
        and math.isfinite(value) else None


def _gap(objective: float, bound: float) -> float | None:
    """(objective - bound) / |objective|, 0 where they agree to 1e-9: the solve's formula
    (backends.common.relative_gap), written again here as the rest of the verifier is."""
    diff = objective - bound
    if diff <= 1e-9 * max(1.0, abs(objective)):
        return 0.0
    return None if abs(objective) < 1e-9 else diff / abs(objective)


def _pct(value: float) -> str:
    return f"{value:.2%}"


def solver_report_problems(summary: dict[str, object]) -> list[tuple[str, str]]:
    """Where summary.json's solver figures (status, gap, stages' objective, bound and gap)
    contradict each other or the gap asked, as (key, message): no re-solve can check them,
    but an edit that leaves them inconsistent shows.  Keys absent from an older file are
    not asked for."""
    out: list[tuple[str, str]] = []
    status = summary.get("status")
    if "status" in summary and status not in PLAN_STATUSES:
        out.append(("status", f"says {status!r}; a folder with a plan is "
                              + " or ".join(PLAN_STATUSES)))
    asked = _number(summary.get("relative_gap_asked"))
    gap = _number(summary.get("gap"))
    stages = summary.get("stages")
    stage_gaps: list[float] = []
    if isinstance(stages, list):
        for ix, stage in enumerate(stages):
            if not isinstance(stage, dict):
                continue
            name = f"stages[{ix}] ({stage.get('stage', '?')})"
            objective, bound = _number(stage.get("objective")), _number(stage.get("bound"))
            said = _number(stage.get("gap"))
            if said is not None:
                stage_gaps.append(said)
            if objective is not None and bound is not None:
                expected = _gap(objective, bound)
                if (said is None) != (expected is None) or (
                        said is not None and expected is not None and not close(said, expected)):
                    out.append((f"{name}.gap", f"says {stage.get('gap')}; its objective "
                                f"{objective:g} and bound {bound:g} give "
                                + ("none" if expected is None else _pct(expected))))
            if (stage.get("status") == "optimal" and asked is not None and said is not None
                    and over(said, asked)):
                out.append((f"{name}.status", f"says optimal at a gap of {_pct(said)}, above "
                            f"the {_pct(asked)} asked"))
        # The run's gap is its largest stage gap (solve.SolveResult.gap).
        largest = max(stage_gaps) if stage_gaps else None
        if ("gap" in summary and (gap is None) != (largest is None)) or (
                gap is not None and largest is not None and not close(gap, largest)):
            out.append(("gap", f"says {summary.get('gap')}; the largest stage gap is "
                        + ("none" if largest is None else _pct(largest))))
    if status == "optimal" and asked is not None and gap is not None and over(gap, asked):
        out.append(("status", f"says optimal, but the gap {_pct(gap)} is above the "
                    f"{_pct(asked)} asked"))
    elif status == "optimal" and isinstance(stages, list) and any(
            isinstance(s, dict) and s.get("status") != "optimal" for s in stages):
        out.append(("status", "says optimal, but not every stage says so"))
    if status == "feasible_with_gap" and "gap" in summary and gap is None and not stage_gaps:
        out.append(("gap", "none recorded beside a status of feasible_with_gap"))
    return out
