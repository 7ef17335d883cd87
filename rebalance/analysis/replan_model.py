"""Fixing and pricing the re-plan model: the old plan's past held, each change priced.

The ``adjust`` hook that ``replan`` hands to ``make_plan`` first gives back hire columns the
builder pruned for hires whose recruitment has begun, then fixes column bounds (everything
before ``at``, hires under way, detail runs under way unless early recall is allowed) and
appends *change* columns ``plus, minus >= 0`` with ``expr - plus + minus = old`` for each
decision from ``at`` on (a detail count, a hire count, the step of a home column, i.e. a
reassignment taking effect), costing the disruption rate.
"""

from __future__ import annotations

import math
from collections import defaultdict
from dataclasses import dataclass, replace

import numpy as np
import scipy.sparse as sp

from rebalance.analysis.limits import hire_rows
from rebalance.analysis.replan_checks import ReplanError, _why_not
from rebalance.analysis.start_plan import plan_hint
from rebalance.instance import Instance
from rebalance.model import ColumnBlock, DetailRoute, Model, RowFamily
from rebalance.numbers import figures
from rebalance.plan import Plan


@dataclass(frozen=True)
class DisruptionCosts:
    """Cost charged for each change against the old plan (money, like every other cost).

    ``detail_per_period``: a person-period of detail added, dropped or sent elsewhere counts
    once per period.  ``reassignment``: a reassignment added or dropped (moved in time or place:
    both).  ``hire``: one hire more or fewer in an office, skill, start period and funding.
    """

    detail_per_period: float = 2_000.0
    reassignment: float = 10_000.0
    hire: float = 5_000.0


def _under_way(run: dict[int, tuple[str, str]], at: int, t: int) -> bool:
    """``run`` (period -> route) is on detail on one route in every period from ``at - 1``
    through ``t``: a detail under way at ``at`` that goes on until ``t``."""
    return (at > 0 and t >= at and run.get(t) is not None
            and all(run.get(s) == run.get(t) for s in range(at - 1, t + 1)))


def _runs_kept(details: dict[str, dict[int, tuple[str, str]]],
               at: int) -> list[DetailRoute]:
    """The detail periods from ``at`` on of every run under way at ``at``: they go on."""
    return [(person, dst, t) for person, run in sorted(details.items())
            for t, (_, dst) in sorted(run.items()) if _under_way(run, at, t)]


def _fix_and_price(instance: Instance, model: Model, old: Plan,
                   details: dict[str, dict[int, tuple[str, str]]],
                   moves: dict[str, tuple[int, str]], at: int, costs: DisruptionCosts,
                   allow_recall: bool, notes: list[str]) -> Model:
    offices = [o.name for o in instance.offices]
    skills = [s.name for s in instance.skills]
    names = instance.period_names
    ix = {name: t for t, name in enumerate(names)}
    staff = instance.staff
    people = {p.person: p for p in staff}
    lower, upper = model.col_lower.copy(), model.col_upper.copy()
    problems: list[str] = []
    # Disruption of old decisions from `at` on that have no column any more (the data took
    # it away: demand gone, the person left or may no longer move): unavoidable, so a
    # constant, but counted so the cost stage's objective is total_cost + disruption_cost.
    forced = 0.0

    def fix(col: int, value: float, what: str) -> None:
        if value > model.col_upper[col] + 1e-9 * max(1.0, value):
            has, allowed = figures(value, model.col_upper[col])
            problems.append(f"{what}: the old plan has {has} but the data now allow {allowed}")
        lower[col] = upper[col] = value

    def pin_hire(col: int, value: float) -> None:
        # Above the builder's cap, a hire column's bound is only what the demand left can
        # use (the rules' own caps were checked in _started_hires_ruled_out): a hire under
        # way stays even where demand fell, as one whose demand is gone does.
        lower[col] = upper[col] = value

    # -- details: old count per column; fixed before `at` and for runs under way ---------
    # The old plan's decisions on the model's columns; every unit's members share their
    # old schedule (replan's pool_key), so a detail column holds the whole unit or none.
    hint = plan_hint(instance, model, old)
    det = model.blocks["detail"]
    old_detail = hint[det.start:det.stop]
    seen = {tuple(int(det.keys[k][j]) for k in ("unit", "home", "office", "period"))
            for j in np.flatnonzero(old_detail)}
    unit_of = {staff[p].person: u for u, members in enumerate(model.units) for p in members}

    def under_way(person: str, t: int) -> bool:
        return _under_way(details.get(person, {}), at, t)

    for person, by_period in details.items():
        for t, (src, dst) in by_period.items():
            key = (unit_of[person], offices.index(src), offices.index(dst), t)
            if key in seen or (key[0], -1, key[2], t) in seen:
                continue
            if t < at:
                problems.append(f"detail of {person} in {names[t]} ({src} -> {dst}), before "
                                f"{names[at]}, is ruled out by the data now: "
                                f"{_why_not(instance, people[person], t, 'detail')}")
                continue
            forced += costs.detail_per_period  # dropped, as changes.csv lists it
            if under_way(person, t) and not allow_recall:
                # Kept routes get their column (``keep_details``) unless the data now rule the
                # detail out (the person left, or may no longer go on detail): it ends, aloud.
                notes.append(f"detail of {person} in {names[t]} ({src} -> {dst}) was under way "
                             "but the data no longer allow it then; it ends")
    for j in range(len(det)):
        u, t = int(det.keys["unit"][j]), int(det.keys["period"][j])
        col = det.start + j
        if t < at:
            fix(col, old_detail[j], f"detail {j}")
            continue
        if allow_recall or old_detail[j] == 0:
            continue
        if under_way(staff[model.units[u][0]].person, t):
            lower[col] = old_detail[j]

    # -- home columns: 1 from an old reassignment's period on --------------------------------
    home = model.blocks["home"]
    old_home = hint[home.start:home.stop]
    for past in np.flatnonzero(home.keys["period"] < at):
        fix(home.start + int(past), old_home[past], f"home column {past}")
    homes = {(int(home.keys["unit"][j]), int(home.keys["office"][j]), int(home.keys["period"][j]))
             for j in range(len(home))}
    for person, (t, dst) in sorted(moves.items()):
        if t < at and (unit_of[person], offices.index(dst), t) not in homes:
            # Not a column: the move would silently vanish from the past.
            problems.append(f"reassignment of {person} to {dst} in {names[t]}, before "
                            f"{names[at]}, is ruled out by the data now: "
                            f"{_why_not(instance, people[person], t, 'reassignment')}")
        elif t >= at and not any((unit_of[person], offices.index(dst), s) in homes
                                 for s in range(t, len(names))):
            # A later column would carry the step and its price; none: dropped for certain.
            forced += costs.reassignment

    # -- hires: fixed while recruitment is under way or done -------------------------------
    hire = model.blocks["hire"]
    old_hires: dict[tuple[int, int, int, int], float] = defaultdict(float)
    for h in hire_rows(old):
        old_hires[(offices.index(h.office), skills.index(h.skill), ix[h.start_period],
                   int(h.funding == "new"))] += float(h.count)
    old_hire = hint[hire.start:hire.stop]
    hire_cols: set[tuple[int, int, int, int]] = set()
    for j in range(len(hire)):
        o, k, s, new = (int(hire.keys[name][j]) for name in ("office", "skill", "period", "new"))
        hire_cols.add((o, k, s, new))
        if s < at + instance.skills[k].time_to_hire:
            pin_hire(hire.start + j, old_hire[j])
    for (o, k, s, new), n in old_hires.items():
        if (o, k, s, new) not in hire_cols and s < at + instance.skills[k].time_to_hire:
            # Not expected: the data's reasons were refused before the model was built, and
            # _with_committed_hires gives the others a column.
            problems.append(f"{n:g} {'hire' if n == 1 else 'hires'} of {skills[k]} at "
                            f"{offices[o]} from {names[s]} "
                            f"{'has' if n == 1 else 'have'} started, but the model has no "
                            "place for them")
        elif (o, k, s, new) not in hire_cols:
            forced += costs.hire * n  # not started, and no demand left it could cover

    # -- work before `at`: the split as it happened ------------------------------------------
    work = model.blocks["work"]
    old_work: dict[tuple[int, int, int, int], float] = defaultdict(float)
    w = old.work
    for person, period, office, skill, fte in zip(
            w["person"].astype(str), w["period"].astype(str), w["office"].astype(str),
            w["skill"].astype(str), w["fte"].astype(float), strict=True):
        wt = ix.get(period)
        if wt is None or wt >= at or person not in unit_of:
            continue
        old_work[(unit_of[person], offices.index(office), skills.index(skill), wt)] += fte
    for j in range(len(work)):
        wkey = (int(work.keys["unit"][j]), int(work.keys["office"][j]),
                int(work.keys["skill"][j]), int(work.keys["period"][j]))
        if wkey[3] < at:
            # Exactly, not clipped to the column's cap nor given slack: _past_work_ruled_out
            # refused past work the data no longer allow (clipping had rewritten a1's 1.0 as
            # 0.5 after an FTE cut, and a 1e-7 slack made 1.0 into 0.9999999, more with each
            # re-plan of a re-plan).  Past work with no column (the data now have no demand
            # there) counts for nothing here and is put back in the table by
            # _with_past_work.
            fix(work.start + j, old_work.get(wkey, 0.0), f"work column {j}")
    if problems:
        raise ReplanError(problems)

    # -- change columns from `at` on ---------------------------------------------------------
    exprs: list[tuple[list[int], list[float], float, float, str, int]] = []
    for j in range(len(det)):
        t = int(det.keys["period"][j])
        col = det.start + j
        if t >= at and lower[col] < upper[col]:
            exprs.append(([col], [1.0], old_detail[j], costs.detail_per_period,
                          f"detail column {j}", 0))
    home_col = {tuple(int(home.keys[k][j]) for k in ("unit", "office", "period")): home.start + j
                for j in range(len(home))}
    for (u, o, t), col in home_col.items():
        if t < at:
            continue
        before = home_col.get((u, o, t - 1))
        cols, vals = [col], [1.0]
        old_step = old_home[col - home.start]
        if before is not None:
            cols.append(before)
            vals.append(-1.0)
            old_step -= old_home[before - home.start]
        exprs.append((cols, vals, old_step, costs.reassignment,
                      f"reassignment of unit {u} to {offices[o]} in {names[t]}", 1))
    for j in range(len(hire)):
        col = hire.start + j
        if lower[col] < upper[col]:
            exprs.append(([col], [1.0], old_hire[j], costs.hire, f"hire column {j}", 2))
    # The old plan's decisions as a first plan to try: at a short limit the search had
    # handed back a plan that changed 105 things and left twice the shortfall of keeping it.
    return _with_forced_disruption(
        _with_change_columns(replace(model, col_lower=lower, col_upper=upper, hint=hint), exprs),
        forced)


def _with_committed_hires(instance: Instance, model: Model, old: Plan, at: int) -> Model:
    """Add hire columns the builder pruned (no demand left for them to cover) for hires whose
    recruitment has begun: they still take seats, hiring slots, vacancies and budget.

    The column goes at the end of the hire block (plan extraction decodes blocks by range),
    with its coefficients in the existing limit rows; a limit with no row yet (the builder
    writes none without a variable term) gets one.
    """
    offices = [o.name for o in instance.offices]
    skills = [s.name for s in instance.skills]
    names = instance.period_names
    hire = model.blocks["hire"]
    have = {tuple(int(hire.keys[k][j]) for k in ("office", "skill", "period", "new"))
            for j in range(len(hire))}
    missing: dict[tuple[int, int, int, int], int] = defaultdict(int)
    for h in hire_rows(old):
        key = (offices.index(h.office), skills.index(h.skill), names.index(h.start_period),
               int(h.funding == "new"))
        # Before the skill's time to hire the rules allow no hire at all: such a hire is
        # refused in _started_hires_ruled_out, not carried in.
        if (key not in have and instance.skills[key[1]].time_to_hire <= key[2]
                < at + instance.skills[key[1]].time_to_hire):
            missing[key] += h.count
    for (o, k, s, new), count in sorted(missing.items()):
        model = _insert_hire(instance, model, o, k, s, new, count)
    return model


def _insert_hire(instance: Instance, model: Model, o: int, k: int, s: int, new: int,
                 count: int) -> Model:
    names = instance.period_names
    T = len(names)
    office, skill = instance.offices[o], instance.skills[k]
    hire = model.blocks["hire"]
    p = hire.stop  # the new column's index
    row_of = {(f.name, label): f.start + i for f in model.rows for i, label in
              enumerate(f.labels)}
    same_start = [hire.start + j for j in range(len(hire))
                  if int(hire.keys["office"][j]) == o and int(hire.keys["period"][j]) == s]
    vacancy_cols = [hire.start + j for j in range(len(hire))
                    if int(hire.keys["office"][j]) == o and int(hire.keys["skill"][j]) == k
                    and int(hire.keys["new"][j]) == 0]
    coef: dict[int, float] = {}
    new_rows: list[tuple[str, str, list[int], float]] = []  # family, label, other cols, upper

    def limit(family: str, label: str, value: float, others: list[int], upper: float) -> None:
        row = row_of.get((family, label))
        if row is not None:
            coef[row] = coef.get(row, 0.0) + value
        else:
            new_rows.append((family, label, others, upper))
            coef[-len(new_rows)] = value

    if office.seats is not None:
        for t in range(s, T):
            heads = sum(1 for x in instance.staff if x.home_office == office.name
                        and x.is_present(t))
            limit("seats", f"{office.name} in {names[t]}", 1.0, [], office.seats - heads)
    if office.max_hires_per_period is not None:
        limit("max_hires", f"{office.name} in {names[s]}", 1.0, same_start,
              float(office.max_hires_per_period))
    if not new:
        limit("vacancies", f"{skill.name} at {office.name}", 1.0, vacancy_cols,
              float(instance.vacancies.get((office.name, skill.name), 0)))
    cost_by_year = instance.hire_cost_by_year(skill.name, s, new_position=bool(new))
    for year in instance.years:
        hiring = instance.budget_cap(year, "hiring")
        amount = cost_by_year.get(year, 0.0)
        if hiring is not None and amount:
            limit("hiring_budget", f"hiring budget {year}", amount, [], hiring)

    m, n = model.num_rows, model.num_cols
    csc = model.matrix.tocsc()
    rows_idx = [r if r >= 0 else m + (-r - 1) for r in coef]
    column = sp.csc_matrix((list(coef.values()), (rows_idx, [0] * len(coef))),
                           shape=(m + len(new_rows), 1))
    extra_r = [i for i, (_, _, others, _) in enumerate(new_rows) for _ in others]
    extra_c = [c for (_, _, others, _) in new_rows for c in others]
    extra = sp.csc_matrix(([1.0] * len(extra_c), (extra_r, extra_c)), shape=(len(new_rows), n))
    grown = sp.vstack([csc, extra], format="csc")
    matrix = sp.hstack([grown[:, :p], column, grown[:, p:]], format="csr")

    def insert(array: np.ndarray, value: float) -> np.ndarray:
        return np.insert(array, p, value)

    blocks = {}
    for name, block in model.blocks.items():
        if name == "hire":
            keys = {key: np.append(v, {"office": o, "skill": k, "period": s, "new": new}[key])
                    for key, v in block.keys.items()}
            blocks[name] = ColumnBlock(name, block.start, block.stop + 1, keys)
        elif block.start >= p:
            blocks[name] = ColumnBlock(name, block.start + 1, block.stop + 1, block.keys)
        else:
            blocks[name] = block
    families = list(model.rows)
    for i, (family, label, _, _) in enumerate(new_rows):
        families.append(RowFamily(family, m + i, m + i + 1, (label,)))
    return replace(
        model,
        matrix=matrix,
        row_lower=np.concatenate([model.row_lower, np.full(len(new_rows), -math.inf)]),
        row_upper=np.concatenate([model.row_upper, [r[3] for r in new_rows]]),
        col_lower=insert(model.col_lower, 0.0),
        col_upper=insert(model.col_upper, float(count)),
        is_integer=np.insert(model.is_integer, p, True),
        shortfall_weight=insert(model.shortfall_weight, 0.0),
        cost=insert(model.cost, skill.onboarding_cost + new * skill.salary_per_period * (T - s)),
        blocks=blocks,
        rows=tuple(families),
    )


def _with_change_columns(model: Model, exprs: list[tuple[list[int], list[float], float, float,
                                                         str, int]]) -> Model:
    """Append plus/minus columns and one equality row per expression (see module doc)."""
    n, m, k = model.num_cols, model.num_rows, len(exprs)
    rows, cols, vals = [], [], []
    for i, (ecols, evals, _, _, _, _) in enumerate(exprs):
        rows += [i] * (len(ecols) + 2)
        cols += [*ecols, n + 2 * i, n + 2 * i + 1]
        vals += [*evals, -1.0, 1.0]
    bottom = sp.csr_matrix((vals, (rows, cols)), shape=(k, n + 2 * k))
    top = sp.hstack([model.matrix, sp.csr_matrix((m, 2 * k))], format="csr")
    rhs = np.asarray([e[2] for e in exprs], dtype=float)
    rate = np.repeat(np.asarray([e[3] for e in exprs], dtype=float), 2)
    blocks = dict(model.blocks)
    blocks["change"] = ColumnBlock(
        "change", n, n + 2 * k,
        {"kind": np.repeat(np.asarray([e[5] for e in exprs], dtype=np.int64), 2),
         "row": np.repeat(np.arange(k, dtype=np.int64), 2)})
    family = RowFamily("replan_changes", m, m + k, tuple(e[4] for e in exprs))
    return replace(
        model,
        matrix=sp.vstack([top, bottom], format="csr"),
        row_lower=np.concatenate([model.row_lower, rhs]),
        row_upper=np.concatenate([model.row_upper, rhs]),
        col_lower=np.concatenate([model.col_lower, np.zeros(2 * k)]),
        col_upper=np.concatenate([model.col_upper, np.full(2 * k, math.inf)]),
        is_integer=np.concatenate([model.is_integer, np.zeros(2 * k, bool)]),
        shortfall_weight=np.concatenate([model.shortfall_weight, np.zeros(2 * k)]),
        cost=np.concatenate([model.cost, rate]),
        blocks=blocks,
        rows=(*model.rows, family),
        hint=None if model.hint is None else np.concatenate([model.hint, np.zeros(2 * k)]),
    )


def _with_forced_disruption(model: Model, amount: float) -> Model:
    """Append one continuous column fixed at 1 costing ``amount``: the model has no constant
    term, and the solvers and gap figures all read ``cost @ x``."""
    if amount <= 0:
        return model
    n = model.num_cols
    blocks = dict(model.blocks)
    blocks["forced_change"] = ColumnBlock("forced_change", n, n + 1, {})
    return replace(
        model,
        matrix=sp.hstack([model.matrix, sp.csr_matrix((model.num_rows, 1))], format="csr"),
        col_lower=np.append(model.col_lower, 1.0),
        col_upper=np.append(model.col_upper, 1.0),
        is_integer=np.append(model.is_integer, False),
        shortfall_weight=np.append(model.shortfall_weight, 0.0),
        cost=np.append(model.cost, amount),
        blocks=blocks,
        hint=None if model.hint is None else np.append(model.hint, 1.0),
    )
