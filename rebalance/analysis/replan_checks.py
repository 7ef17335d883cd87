"""The old plan against the current data, before any model is built.

A re-plan carries the old plan's past into the model as it happened: details, reassignments
and work before the re-plan period, and hires whose recruitment has begun.  Whatever of it the
data now rule out, names someone or some period the data do not know, or contradicts the
old plan itself (a detail leaving from somewhere other than the home then, two details of one
person in one period, a hire row twice) is refused here, each refusal naming the file and the
data, rather than dropped, clipped, counted double or left to come back as an infeasible model.
"""

from __future__ import annotations

from collections import defaultdict
from collections.abc import Callable
from pathlib import Path
from typing import Any, Literal

import pandas as pd

from rebalance.analysis.limits import hire_rows
from rebalance.instance import Instance, Person, RuledOut
from rebalance.numbers import counted, figures
from rebalance.plan import Plan
from rebalance.verify import Violation

# Rows of a plan that contradict one another, whatever data the plan is read against (unlike
# its coverage and budget figures, which an old plan made under a scenario fails
# legitimately, docs/analysis.md): by table, the columns one row per value of which the plan
# writes, what the verifier says of a second row (its rules one_reassignment, one_detail and
# work_repeated, in its order) and what is expected instead.  Each refusal names the line of
# the repeat and of the first, as a hire row listed again does.
SELF_CONTRADICTIONS: dict[str, tuple[tuple[str, ...], Callable[[Any], str], str]] = {
    "reassignments": (("person",), lambda _: "more than one reassignment",
                      "expected at most one reassignment per person"),
    "details": (("person", "period"), lambda _: "two details in one period",
                "expected one detail per person and period (a person is in one place in a "
                "period): keep one of the rows"),
    "work": (("person", "period", "office", "skill"),
             lambda row: f"{row.skill} at {row.office} is listed twice",
             "expected one row per person, period, office and skill"),
}


# The verifier's rules on names and columns the instance lacks (verify.unknown_names): what
# must hold before the old plan can be read against the data at all.
REFERENCE_RULES = frozenset({"missing_column", "unknown_reference"})


class ReplanError(ValueError):
    """The old plan cannot be carried into the model (its past no longer fits the data)."""

    def __init__(self, problems: list[str]) -> None:
        super().__init__("; ".join(problems))
        self.problems = problems


# Names listed in an "expected ..." before the rest are left to the file.
NAMES_SHOWN = 8

# (line in work.csv, period index, office, skill, fte) of one person's work before `at`.
PastWork = tuple[int, int, str, str, float]


def _checked_past(instance: Instance, old: Plan, at: int, folder: str | Path | None,
                  verified: list[Violation]
                  ) -> tuple[dict[str, dict[int, tuple[str, str]]], dict[str, tuple[int, str]],
                             dict[str, list[PastWork]]]:
    """The old plan's details (person -> period index -> route), reassignments (person ->
    (period index, office)) and work before ``at`` by person, once the current data are found
    to allow all of its past; otherwise a ReplanError listing every refusal.  ``verified`` is
    ``verify_plan(instance, old, folder=folder)``, made once by the caller, which reports
    the old plan's other violations from it too."""
    T = len(instance.periods)
    if not 0 <= at < T:
        raise ReplanError([f"period index {at} is outside the horizon (0..{T - 1})"])
    # Where names are unknown, the verifier stops at them: these are then all it found.
    unknown = [v for v in verified if v.rule in REFERENCE_RULES]
    if unknown:  # an old plan of another instance, or one edited by hand
        # As read_plan's problems read: file:row: what is wrong (input, not a broken rule).
        raise ReplanError([f"{v.where}: {v.message}{_expected(instance, v)}" for v in unknown])

    def file(table: str) -> str:
        return f"{table}.csv" if folder is None else str(Path(folder) / f"{table}.csv")

    # An old plan that contradicts itself (a row pasted twice, say) is said first and alone:
    # the checks below read one detail per person and period, and the re-plan had carried
    # such a plan forward, counting it double in replan.csv (sweep).
    contradictions = _self_contradictions(old, file)
    if contradictions:
        raise ReplanError(contradictions)

    names = instance.period_names
    ix = {name: t for t, name in enumerate(names)}
    people = {p.person: p for p in instance.staff}
    problems: list[str] = []
    details: dict[str, dict[int, tuple[str, str]]] = defaultdict(dict)
    detail_lines: dict[tuple[str, int], int] = {}
    for line, row in zip(_lines(old.details), old.details.itertuples(index=False),
                         strict=True):
        if str(row.person) not in people or str(row.period) not in ix:
            problems.append(f"{file('details')}: person {row.person} in {row.period} is not "
                            "in the instance")
            continue
        details[str(row.person)][ix[str(row.period)]] = (str(row.from_office),
                                                          str(row.to_office))
        detail_lines[(str(row.person), ix[str(row.period)])] = line
    moves: dict[str, tuple[int, str]] = {}
    for row in old.reassignments.itertuples(index=False):
        if str(row.person) not in people or str(row.period) not in ix:
            problems.append(f"{file('reassignments')}: person {row.person} in {row.period} is "
                            "not in the instance")
            continue
        moves[str(row.person)] = (ix[str(row.period)], str(row.to_office))
    # A past reassignment the data rule out is the first thing to say: where the person's
    # home was then is in doubt, so their details and work are not checked against it.
    doubtful = {name: (t, dst) for name, (t, dst) in moves.items()
                if t < at and (not people[name].can_relocate or not people[name].is_present(t))}
    problems += [f"reassignment of {name} to {dst} in {names[t]}, before {names[at]}, is ruled "
                 f"out by the data now: {_why_not(instance, people[name], t, 'reassignment')}"
                 for name, (t, dst) in sorted(doubtful.items())]
    sure = {name: run for name, run in details.items() if name not in doubtful}
    problems += _details_not_from_home(instance, sure, detail_lines, moves, file)
    past_work = _past_work(old, ix, at)
    problems += _past_work_ruled_out(
        instance, {k: v for k, v in past_work.items() if k not in doubtful}, details, moves,
        at, file)
    problems += _started_hires_ruled_out(instance, old, at)
    if problems:
        raise ReplanError(problems)
    return details, moves, past_work


def _expected(instance: Instance, violation: Violation) -> str:
    """``; expected ...`` for a verifier violation saying a name of the old plan is not in
    the instance ("period '2028-Q2' is not in the instance"), from the kind of name it says
    its column holds (not from its wording); "" for any other violation."""
    kind = violation.name_kind
    names = instance.period_names
    if kind == "period":
        return f"; expected a period of the instance's horizon ({names[0]} to {names[-1]})"
    if kind == "person":
        return "; expected a person of staff.csv"
    if kind == "office":
        what, table, listed = "an office", "offices.csv", [o.name for o in instance.offices]
    elif kind == "skill":
        what, table, listed = "a skill", "skills.csv", [k.name for k in instance.skills]
    else:
        return ""
    more = ", ..." if len(listed) > NAMES_SHOWN else ""
    return f"; expected {what} of {table} ({', '.join(listed[:NAMES_SHOWN])}{more})"


def _self_contradictions(old: Plan, file: Callable[[str], str]) -> list[str]:
    """Where the old plan contradicts itself, whatever the data: a row repeating another's
    person and period (:data:`SELF_CONTRADICTIONS`), or a hire row repeated (the plan writes
    one per office, skill, start period and funding; a second counts the hires twice)."""
    problems = []
    for table, (key_columns, says, expected) in SELF_CONTRADICTIONS.items():
        frame = old.table(table)
        keys = zip(*(frame[c].astype(str) for c in key_columns), strict=True)
        first_line: dict[tuple[str, ...], int] = {}
        for line, key, row in zip(_lines(frame), keys, frame.itertuples(index=False),
                                  strict=True):
            if key in first_line:
                problems.append(
                    f"{file(table)}:{line}: person {row.person} in {row.period}: {says(row)} "
                    f"(first at line {first_line[key]}); {expected}")
            first_line.setdefault(key, line)
    first: dict[tuple[str, str, str, str], int] = {}
    for line, h in zip(_lines(old.hires), hire_rows(old), strict=True):
        key = (h.office, h.skill, h.start_period, h.funding)
        if key in first:
            problems.append(
                f"{file('hires')}:{line}: {h.skill} at {h.office} from {h.start_period} "
                f"({h.funding}) is listed again (first at line {first[key]}); expected one row "
                "per office, skill, start period and funding, with the count of hires")
        first.setdefault(key, line)
    return problems


def _lines(frame: pd.DataFrame) -> list[int]:
    """Each row's line in its CSV file: read_plan indexes rows by their line less 2 (a blank
    line it skips leaves a gap), as a plan made in memory is by position."""
    if pd.api.types.is_integer_dtype(frame.index):
        return [int(i) + 2 for i in frame.index]
    return list(range(2, len(frame) + 2))


def _past_work(old: Plan, ix: dict[str, int], at: int) -> dict[str, list[PastWork]]:
    """The old plan's work rows before ``at`` by person, with their line in ``work.csv``."""
    out: dict[str, list[PastWork]] = defaultdict(list)
    w = old.work
    for line, person, period, office, skill, fte in zip(
            _lines(w), w["person"].astype(str), w["period"].astype(str),
            w["office"].astype(str), w["skill"].astype(str), w["fte"].astype(float),
            strict=True):
        t = ix.get(period)
        if t is not None and t < at:
            out[person].append((line, t, office, skill, float(fte)))
    for rows in out.values():
        rows.sort(key=lambda r: r[1:4])
    return out


def _home_in_force(person: Person, moves: dict[str, tuple[int, str]], t: int) -> str:
    move = moves.get(person.person)
    return move[1] if move is not None and move[0] <= t else person.home_office


def _details_not_from_home(instance: Instance, details: dict[str, dict[int, tuple[str, str]]],
                           lines: dict[tuple[str, int], int],
                           moves: dict[str, tuple[int, str]],
                           file: Callable[[str], str]) -> list[str]:
    """Refusals for old details that leave from somewhere other than the person's home then:
    the old plan contradicts itself or the data's home office, and the model has no such
    route (it had been refused as "ruled out by the data ... no place for it")."""
    people = {p.person: p for p in instance.staff}
    names = instance.period_names
    problems = []
    for person, run in sorted(details.items()):
        for t, (src, _dst) in sorted(run.items()):
            home = _home_in_force(people[person], moves, t)
            if src != home:
                after = (f", after the reassignment in {file('reassignments')}"
                         if home != people[person].home_office else "")
                problems.append(
                    f"{file('details')}:{lines[(person, t)]}: detail of {person} in {names[t]} "
                    f"leaves from {src}, but {person}'s home then is {home} (staff.csv "
                    f"home_office{after}): from_office should be {home}")
    return problems


def _past_work_ruled_out(instance: Instance, past_work: dict[str, list[PastWork]],
                         details: dict[str, dict[int, tuple[str, str]]],
                         moves: dict[str, tuple[int, str]], at: int,
                         file: Callable[[str], str]) -> list[str]:
    """Refusals for work before ``at`` that cannot have happened under the current data (the
    person had left, lacks the skill, has less FTE than it, or was elsewhere in the old plan
    itself).  Such work is refused, never rewritten: it had been dropped or clipped in
    silence.  Work where the data now have no demand is not refused: it happened, and is kept
    (it covers nothing)."""
    people = {p.person: p for p in instance.staff}
    names = instance.period_names
    problems = []
    for name, rows in sorted(past_work.items()):
        person = people[name]
        total: dict[int, float] = defaultdict(float)
        first_line: dict[int, int] = {}
        for line, t, office, skill, fte in rows:
            where = (f"{file('work')}:{line}: {name} works {figures(fte)[0]} FTE on {skill} at "
                     f"{office} in ")
            where += f"{names[t]}, before {names[at]}, but"
            total[t] += fte
            first_line.setdefault(t, line)
            if not person.is_present(t):
                problems.append(f"{where} has left by then (staff.csv last_period)")
                continue
            if skill not in {k for k, _ in person.skills}:
                problems.append(f"{where} does not have {skill} (staff.csv skills)")
            run = details.get(name, {})
            at_office = run[t][1] if t in run else _home_in_force(person, moves, t)
            if office != at_office:
                problems.append(f"{where} the old plan has them at {at_office} then "
                                "(its details.csv and reassignments.csv)")
        for t, fte in sorted(total.items()):
            available = instance.available_fte(person, t)
            if person.is_present(t) and fte > available + 1e-9 * max(1.0, fte):
                works, has = figures(fte, available)
                problems.append(
                    f"{file('work')}:{first_line[t]}: {name} works {works} FTE in {names[t]}, "
                    f"before {names[at]}, but the data now give them {has} then "
                    "(staff.csv fte, less expected attrition.csv if any)")
    return problems


def _started_hires_ruled_out(instance: Instance, old: Plan, at: int) -> list[str]:
    """Refusals for the old plan's hires whose recruitment has begun (start before ``at`` +
    time to hire) that the data now rule out, each naming the data, as for a past detail or
    reassignment.  Checked here, before any model: cutting vacancies below such hires had
    been refused from one hire column ("the data now allow 1", naming no file) and reported
    infeasible (exit 4) from another, where the pruned column was added back."""
    skills = {s.name: s for s in instance.skills}
    offices = {o.name: o for o in instance.offices}
    names = instance.period_names
    ix = {name: t for t, name in enumerate(names)}
    started: dict[tuple[str, str, int, str], int] = defaultdict(int)
    for h in hire_rows(old):
        s = ix[h.start_period]
        if s < at + skills[h.skill].time_to_hire:
            started[(h.office, h.skill, s, h.funding)] += h.count
    problems = []
    # Refused hires by what rules them out, vacancy-funded and new positions together (a
    # sweep: the same line twice, one for each funding).
    refused: dict[tuple[str, str, int, str], int] = defaultdict(int)

    def refuse(count: int, office: str, skill: str, s: int, why: str) -> None:
        refused[(office, skill, s, why)] += count

    by_start: dict[tuple[str, int], int] = defaultdict(int)
    by_vacancy: dict[tuple[str, str], list[tuple[int, int]]] = defaultdict(list)
    for (office, skill, s, funding), count in sorted(started.items(), key=lambda i: i[0][2]):
        tth = skills[skill].time_to_hire
        # Demand and vacancies are no refusal here: the hire has begun, and its vacancies
        # are counted below.
        ruled_out = instance.hire_ruled_out(office, skill, s, new_position=funding == "new")
        if "before_time_to_hire" in ruled_out:
            refuse(count, office, skill, s, f"it starts before {skill}'s time to hire ({tth} "
                   "periods from the horizon's start, skills.csv time_to_hire)")
        elif "may_not_hire" in ruled_out:
            refuse(count, office, skill, s,
                   f"{office} may not hire (offices.csv max_hires_per_period = 0)")
        else:
            by_start[(office, s)] += count
            if funding == "vacancy":
                by_vacancy[(office, skill)].append((s, count))
    problems += [f"{_hires(count)} of {skill} at {office} from {names[s]} {_have(count)} started "
                 f"(their recruitment has begun), but the data now rule "
                 f"{'it' if count == 1 else 'them'} out: {why}"
                 for (office, skill, s, why), count in refused.items()]
    for (office, s), count in by_start.items():
        cap = offices[office].max_hires_per_period
        if cap is not None and count > cap:
            problems.append(f"{_hires(count)} at {office} from {names[s]} {_have(count)} "
                            "started (their recruitment has begun), but the data now allow "
                            f"{cap} (offices.csv max_hires_per_period)")
    for (office, skill), starts in by_vacancy.items():
        funded = instance.vacancies.get((office, skill), 0)
        filled = sum(count for _, count in starts)
        if filled > funded:
            when = ", ".join(f"{count} from {names[s]}" for s, count in starts)
            problems.append(f"{_hires(filled)} of {skill} at {office} into funded vacancies "
                            f"{_have(filled)} started ({when}; their recruitment has begun), "
                            f"but the data now fund {funded} (vacancies.csv)")
    return problems


def _hires(count: int) -> str:
    """``1 hire``, ``2 hires``: counted, as the reports count ("1 hire(s)" had read as a form)."""
    return counted(count, "hire")


def _have(count: int) -> str:
    return "has" if count == 1 else "have"


def _why_not(instance: Instance, person: Person, t: int,
             what: Literal["detail", "reassignment"]) -> str:
    """Which data rule out ``person``'s detail or reassignment in period ``t``
    (:meth:`Instance.move_ruled_out`; for a refusal: the past cannot change, and each
    person's flags hold for the whole horizon)."""
    words: dict[RuledOut, str] = {
        "left": f"{person.person} has left by then (staff.csv last_period)",
        "may_not_detail": f"staff.csv says {person.person} may not go on detail (can_detail)",
        "no_details": "settings.toml allows no details (max_consecutive_detail_periods = 0)",
        "may_not_relocate": f"staff.csv says {person.person} may not be reassigned "
                            "(can_relocate)",
    }
    ruled_out = instance.move_ruled_out(person, t, what)
    return words[ruled_out[0]] if ruled_out else "the model has no place for it"
