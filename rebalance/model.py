"""Build the mixed-integer model of an instance as coefficient arrays; no solving here.

The model is written as one sparse matrix with row bounds, so that HiGHS can take it in one
``passModel`` call and PuLP (for CBC) can be fed row slices without building expressions term
by term.  Columns come in named blocks (work, detail, reassignment, hire, shortfall); each block
keeps integer key arrays (unit, office, skill, period, ...) so plan extraction can decode a
solution vector without knowing solver objects.  ``build_model`` adds them step by step;
relocatable people's at-home and cost-adjustment columns are in ``rebalance.relocation``, the
organisation's limits in ``rebalance.limits``; the classes a built model is made of are in
``rebalance.model_data``.  The mathematics is written up in ``docs/model.md``; the comments
here refer to its constraint names.
"""

from __future__ import annotations

import contextlib
import gc
import math
import time
from collections import defaultdict
from collections.abc import Callable, Collection, Hashable, Iterator

import numpy as np
import psutil
import scipy.sparse as sp

from rebalance.instance import Instance, Person
from rebalance.limits import add_limit_rows
from rebalance.model_data import (
    ADAPTING_FAMILIES,
    INF,
    LIMIT_FAMILIES,
    BuildCutShort,
    ColumnBlock,
    DetailRoute,
    Model,
    RowFamily,
    Terms,
    without_rounded_rows,
)
from rebalance.relocation import Relocation

# The model's data classes live in ``rebalance.model_data``; this module stays the public
# face of the model, so they are listed here too.
__all__ = ["ADAPTING_FAMILIES", "LIMIT_FAMILIES", "BuildCutShort", "ColumnBlock", "DetailRoute",
           "Model", "RowFamily", "build_model", "group_units", "without_rounded_rows"]


# Nonzeros written between two looks at the clock and the memory while building: a look
# costs about as much as a few hundred nonzeros, and this many take a few tenths of a second.
NONZEROS_PER_CHECK = 200_000
# Building stops once the machine has less than this share of its memory available (a
# nonzero held as triplets takes about 100 bytes until the model is finished).
MIN_FREE_MEMORY_SHARE = 0.05


class _Builder:
    """Accumulates columns and rows as triplets; one ``finish`` turns them into arrays.

    Past ``deadline`` (``time.perf_counter`` seconds), or with memory nearly gone, it raises
    :class:`BuildCutShort`."""

    def __init__(self, deadline: float = math.inf) -> None:
        self.started = time.perf_counter()
        self.deadline = deadline
        self._next_check = NONZEROS_PER_CHECK
        self._min_free_bytes = MIN_FREE_MEMORY_SHARE * psutil.virtual_memory().total
        self.lower: list[np.ndarray] = []
        self.upper: list[np.ndarray] = []
        self.integer: list[np.ndarray] = []
        self.weight: list[np.ndarray] = []
        self.cost: list[np.ndarray] = []
        self.blocks: dict[str, ColumnBlock] = {}
        self.num_cols = 0
        self.r: list[int] = []
        self.c: list[int] = []
        self.v: list[float] = []
        self.row_lo: list[float] = []
        self.row_hi: list[float] = []
        self.families: list[RowFamily] = []
        self._family: tuple[str, int, list[str]] | None = None

    def add_block(self, name: str, keys: dict[str, list[int]], lower: np.ndarray,
                  upper: np.ndarray, integer: bool, cost: np.ndarray | None = None,
                  weight: np.ndarray | None = None) -> ColumnBlock:
        n = int(lower.size)
        block = ColumnBlock(name, self.num_cols, self.num_cols + n,
                            {k: np.asarray(v, dtype=np.int64) for k, v in keys.items()})
        self.blocks[name] = block
        self.lower.append(lower.astype(float))
        self.upper.append(upper.astype(float))
        self.integer.append(np.full(n, integer))
        self.cost.append(np.zeros(n) if cost is None else cost.astype(float))
        self.weight.append(np.zeros(n) if weight is None else weight.astype(float))
        self.num_cols += n
        return block

    def begin(self, family: str) -> None:
        self.end()
        self._family = (family, len(self.row_lo), [])

    def end(self) -> None:
        if self._family is not None:
            name, start, labels = self._family
            self.families.append(RowFamily(name, start, len(self.row_lo), tuple(labels)))
            self._family = None

    def column_integrality(self) -> np.ndarray:
        """Per column added so far, whether it is integer."""
        return np.concatenate(self.integer) if self.integer else np.zeros(0, bool)

    def column_lower(self) -> np.ndarray:
        """Per column added so far, its lower bound."""
        return np.concatenate(self.lower) if self.lower else np.zeros(0)

    def row(self, cols: list[int], vals: list[float], lo: float, hi: float, label: str) -> None:
        assert self._family is not None
        i = len(self.row_lo)
        self.r.extend([i] * len(cols))
        self.c.extend(cols)
        self.v.extend(vals)
        self.row_lo.append(lo)
        self.row_hi.append(hi)
        self._family[2].append(label)
        if len(self.v) >= self._next_check:
            self._next_check = len(self.v) + NONZEROS_PER_CHECK
            self.check_clock()
            if psutil.virtual_memory().available < self._min_free_bytes:
                self._cut_short("memory")

    def check_clock(self) -> None:
        """Raise :class:`BuildCutShort` once past the deadline."""
        if time.perf_counter() > self.deadline:
            self._cut_short("time")

    def _cut_short(self, out_of: str) -> None:
        raise BuildCutShort(out_of, time.perf_counter() - self.started, len(self.row_lo),
                            len(self.v))

    def finish(self) -> Model:
        self.end()
        matrix = sp.csr_matrix(
            (np.asarray(self.v, dtype=float), (np.asarray(self.r), np.asarray(self.c))),
            shape=(len(self.row_lo), self.num_cols),
        )
        matrix.sum_duplicates()
        return Model(
            matrix=matrix,
            row_lower=np.asarray(self.row_lo, dtype=float),
            row_upper=np.asarray(self.row_hi, dtype=float),
            col_lower=self.column_lower(),
            col_upper=np.concatenate(self.upper) if self.upper else np.zeros(0),
            is_integer=self.column_integrality(),
            shortfall_weight=np.concatenate(self.weight) if self.weight else np.zeros(0),
            cost=np.concatenate(self.cost) if self.cost else np.zeros(0),
            blocks=self.blocks,
            rows=tuple(self.families),
        )


def group_units(instance: Instance, pooled: bool = True,
                pool_key: Callable[[Person], Hashable] | None = None) -> tuple[
                    tuple[int, ...], ...]:
    """Group interchangeable people into units (pools); each unit is a tuple of staff indices.

    People are interchangeable when they share home office, skills with proficiencies (in
    order: the first skill sets attrition), FTE, eligibility and leaving period.  People who
    may be relocated stay on their own: a reassignment changes one person's home, and the
    home in force decides where their details leave from.

    ``pool_key`` adds a caller's key to the grouping (re-planning keeps people with different
    histories apart, so fixing the past by group fixes it person by person).

    Units, and the people in each, are in the order of their ids, not of staff.csv's rows:
    the same staff sorted otherwise had detailed other people, and at a gap of 5% had
    stopped at another plan (a reviewer's finding).
    """
    by_id = sorted(range(len(instance.staff)), key=lambda p: instance.staff[p].person)
    if not pooled:
        return tuple((p,) for p in by_id)
    groups: dict[tuple[object, ...], list[int]] = {}
    singles: list[tuple[int, ...]] = []
    for p in by_id:
        person = instance.staff[p]
        if person.can_relocate:
            singles.append((p,))
            continue
        key = (person.home_office, person.skills, person.fte, person.can_detail,
               person.last_period, None if pool_key is None else pool_key(person))
        groups.setdefault(key, []).append(p)
    units = [tuple(members) for members in groups.values()] + singles
    return tuple(sorted(units, key=lambda unit: instance.staff[unit[0]].person))


PAIR_DETAILS_MAX_OFFICES = 10


def build_model(instance: Instance, pooled: bool = True,
                pool_key: Callable[[Person], Hashable] | None = None,
                pair_details: bool | None = None,
                keep_details: Collection[DetailRoute] = (),
                deadline: float = math.inf) -> Model:
    """Build the model of ``instance`` (see ``docs/model.md``).

    With ``pooled`` (the default) interchangeable people share columns with integer counts;
    ``pooled=False`` gives every person their own columns (the person-level formulation,
    kept for tests that prove both reach the same optimum).

    ``pair_details`` chooses how a relocatable person's details are written: one column per
    (home, destination) pair, whose LP is tight but grows with offices squared, or one per
    destination with linear away and cost-adjustment columns.  Both are exact; the default
    takes pairs up to ``PAIR_DETAILS_MAX_OFFICES`` offices.

    ``keep_details`` lists routes (person, destination office, period index) that get a
    detail column even where the destination wants none of the person's skills then: a
    re-plan keeps a detail under way to its end, idle or not.

    Past ``deadline`` (``time.perf_counter`` seconds), or with memory nearly gone, it raises
    :class:`BuildCutShort`.
    """
    if pair_details is None:
        pair_details = len(instance.offices) <= PAIR_DETAILS_MAX_OFFICES
    started = time.perf_counter()
    with _no_cycle_collection():
        b = _Builder(deadline)
        f = _Frame(instance, group_units(instance, pooled, pool_key))
        work, det, rea, det_cost = _add_staff_columns(b, f, pair_details,
                                                      frozenset(keep_details))
        relocation = Relocation(b, f, det, det_cost)
        hire = _add_hire_columns(b, f)
        short = _add_shortfall_columns(b, f)
        cols = _Columns(f, work, det, det_cost, rea, hire, relocation)
        _add_staff_rows(b, f, cols)
        relocation.add_rows(b, f, cols)
        _add_home_rows(b, f, cols)
        direct = _add_coverage_rows(b, f, cols, short)
        add_limit_rows(b, f, cols)
        model = b.finish()
    model.units = f.units
    model.direct_units = direct
    model.unit_home = np.asarray([f.o_ix[person.home_office] for person in f.rep], int)
    model.build_seconds = time.perf_counter() - started
    return model


@contextlib.contextmanager
def _no_cycle_collection() -> Iterator[None]:
    """Pause Python's cycle collector while building.

    The builder makes millions of small lists and tuples and no reference cycles; the
    collector would walk them over and over (about a third of the build at agency scale,
    issue 3).  Reference counting still frees everything as usual.
    """
    enabled = gc.isenabled()
    gc.disable()
    try:
        yield
    finally:
        if enabled:
            gc.enable()


class _Frame:
    """The instance as every step of the build reads it: positions, units, availability, demand."""

    def __init__(self, instance: Instance, units: tuple[tuple[int, ...], ...]) -> None:
        self.instance = instance
        self.T = T = len(instance.periods)
        self.offices = [o.name for o in instance.offices]
        self.skills = [s.name for s in instance.skills]
        self.o_ix = {name: i for i, name in enumerate(self.offices)}
        self.k_ix = {name: i for i, name in enumerate(self.skills)}
        self.year_of = [p.year for p in instance.periods]
        self.units = units
        self.rep = [instance.staff[members[0]] for members in units]  # a representative per unit
        self.size = np.asarray([len(members) for members in units], dtype=float)
        self.avail = np.zeros((len(units), T))  # per person of the unit
        for u, person in enumerate(self.rep):
            for t in range(T):
                self.avail[u, t] = instance.available_fte(person, t)
        self.demand_fte: dict[tuple[int, int, int], float] = {}
        self.priority: dict[tuple[int, int, int], float] = {}
        for d in instance.demand:
            key = (self.o_ix[d.office], self.k_ix[d.skill], d.period)
            self.demand_fte[key] = d.fte
            self.priority[key] = d.priority
        self.wanted = {key for key, fte in self.demand_fte.items() if fte > 0}
        # Skills wanted at an office in a period: prunes work and detail columns that cannot help.
        self.skills_wanted: dict[tuple[int, int], set[int]] = defaultdict(set)
        for o, k, t in self.wanted:
            self.skills_wanted[(o, t)].add(k)
        self.m = instance.policy.max_consecutive_detail_periods  # None: no limit
        # Detail cost per period by (home in force, destination): looked up once per pair,
        # not once per column (millions of columns at agency scale, issue 3).
        self.detail_cost = np.asarray([[instance.detail_cost_per_period(a, b)
                                        for b in self.offices] for a in self.offices])
        # Relocation cost by (original home, new home), likewise.
        self.relocation_cost = np.asarray([[instance.relocation_cost(a, b)
                                            for b in self.offices] for a in self.offices])

    def unit_label(self, u: int) -> str:
        """Who a row of unit ``u`` is about, for its label."""
        n = len(self.units[u])
        first = self.instance.staff[self.units[u][0]].person
        return f"person {first}" if n == 1 else f"group of {n} ({first} and alike)"

    def period(self, t: int) -> str:
        """The name of period ``t``, for labels."""
        return self.instance.periods[t].name


def _add_staff_columns(b: _Builder, f: _Frame, pair_details: bool,
                       keep_details: frozenset[DetailRoute]) -> tuple[
        ColumnBlock, ColumnBlock, ColumnBlock, list[float]]:
    """Add the work, detail and home blocks; return them and the detail costs."""
    offices = f.offices
    details_allowed = f.m is None or f.m > 0
    # ---- columns: detail d[u, a, b, t] (a = home in force, b = destination) -------------
    det_keys: dict[str, list[int]] = {"unit": [], "home": [], "office": [], "period": []}
    det_cost: list[float] = []
    det_ub: list[float] = []
    # ---- columns: home g[u, o, t] = 1 when u's home in force at t is o, o not the original
    # home (single-person units only).  It never switches back, so a reassignment is the
    # step from 0 to 1; a home column per period keeps rows sparse (one term, not a sum).
    rea_keys: dict[str, list[int]] = {"unit": [], "office": [], "period": []}
    rea_cost: list[float] = []  # relocation cost, charged on the last present period's column
    # ---- columns: work w[u, o, k, t]: the unit's FTE on skill k at office o --------------
    work_keys: dict[str, list[int]] = {"unit": [], "office": [], "skill": [], "period": []}
    work_cap: list[float] = []

    for u, person in enumerate(f.rep):
        b.check_clock()
        home0 = f.o_ix[person.home_office]
        person_skills = {f.k_ix[s] for s, _ in person.skills}
        homes = range(len(offices)) if person.can_relocate else (home0,)
        for t in range(f.T):
            if f.avail[u, t] <= 0:
                continue
            if person.can_relocate:
                last = t == f.T - 1 or f.avail[u, t + 1] <= 0
                for o in range(len(offices)):
                    if o != home0:
                        rea_keys["unit"].append(u)
                        rea_keys["office"].append(o)
                        rea_keys["period"].append(t)
                        rea_cost.append(float(f.relocation_cost[home0, o]) if last else 0.0)
            reachable = set(homes)
            if person.can_detail and details_allowed:
                for dest in range(len(offices)):
                    if (not person_skills & f.skills_wanted.get((dest, t), set())
                            and (person.person, offices[dest], t) not in keep_details):
                        continue
                    # A relocatable person's detail leaves from the home in force (home -1);
                    # its cost from a new home is added by the adjustment columns (relocation).
                    for a in ((-1,) if person.can_relocate and not pair_details else homes):
                        if a == dest:
                            continue
                        det_keys["unit"].append(u)
                        det_keys["home"].append(a)
                        det_keys["office"].append(dest)
                        det_keys["period"].append(t)
                        det_cost.append(float(f.detail_cost[home0 if a < 0 else a, dest]))
                        det_ub.append(f.size[u])
                    reachable.add(dest)
            if len(person_skills) == 1:
                continue  # one skill: output follows where they are, no split to choose
            for o in sorted(reachable):
                for k in sorted(person_skills & f.skills_wanted.get((o, t), set())):
                    work_keys["unit"].append(u)
                    work_keys["office"].append(o)
                    work_keys["skill"].append(k)
                    work_keys["period"].append(t)
                    work_cap.append(f.avail[u, t] * f.size[u])

    work = b.add_block("work", work_keys, np.zeros(len(work_cap)), np.asarray(work_cap), False)
    det = b.add_block("detail", det_keys, np.zeros(len(det_cost)), np.asarray(det_ub), True,
                      cost=np.asarray(det_cost))
    rea = b.add_block("home", rea_keys, np.zeros(len(rea_cost)), np.ones(len(rea_cost)),
                      True, cost=np.asarray(rea_cost))
    return work, det, rea, det_cost


def _add_hire_columns(b: _Builder, f: _Frame) -> ColumnBlock:
    """Add the hire block h[o, k, s, funding]: starts per office, skill and period."""
    T = f.T
    hire_keys: dict[str, list[int]] = {"office": [], "skill": [], "period": [], "new": []}
    hire_ub: list[float] = []
    hire_cost: list[float] = []
    for o, office in enumerate(f.instance.offices):
        for k, skill in enumerate(f.instance.skills):
            vac = f.instance.vacancies.get((office.name, skill.name), 0)
            for s in range(T):
                # 0 where the data rule a hire out (Instance.hire_ruled_out)
                need = f.instance.hire_need(office.name, skill.name, s)
                for new in (0, 1):
                    ub = need if new else min(need, vac)
                    if ub <= 0:
                        continue
                    hire_keys["office"].append(o)
                    hire_keys["skill"].append(k)
                    hire_keys["period"].append(s)
                    hire_keys["new"].append(new)
                    hire_ub.append(ub)
                    hire_cost.append(skill.onboarding_cost
                                     + new * skill.salary_per_period * (T - s))
    return b.add_block("hire", hire_keys, np.zeros(len(hire_ub)), np.asarray(hire_ub), True,
                       cost=np.asarray(hire_cost))


def _add_shortfall_columns(b: _Builder, f: _Frame) -> ColumnBlock:
    """Add the shortfall block s[o, k, t], one column per demand above zero, in key order."""
    short_list = sorted(f.wanted)
    return b.add_block(
        "shortfall",
        {"office": [x[0] for x in short_list], "skill": [x[1] for x in short_list],
         "period": [x[2] for x in short_list]},
        np.zeros(len(short_list)),
        np.asarray([f.demand_fte[x] for x in short_list]),
        False,
        weight=np.asarray([f.priority[x] for x in short_list]),
    )


class _Columns:
    """Lookups from keys to columns, and the heads of a unit at a place as linear terms."""

    def __init__(self, f: _Frame, work: ColumnBlock, det: ColumnBlock, det_cost: list[float],
                 rea: ColumnBlock, hire: ColumnBlock, relocation: Relocation) -> None:
        self.f = f
        self.work, self.det, self.det_cost, self.rea, self.hire = work, det, det_cost, rea, hire
        self.relocation = relocation
        D = det.keys
        self.det_by_ut: dict[tuple[int, int], list[int]] = defaultdict(list)
        self.det_from: dict[tuple[int, int, int], list[int]] = defaultdict(list)  # (u, a, t)
        self.det_to: dict[tuple[int, int, int], list[int]] = defaultdict(list)    # (u, b, t)
        self.det_from_office: dict[tuple[int, int], list[int]] = defaultdict(list)  # (a, t)
        self.det_to_office: dict[tuple[int, int], list[int]] = defaultdict(list)    # (b, t)
        for j in range(len(det)):
            u, a, dest, t = (int(D["unit"][j]), int(D["home"][j]), int(D["office"][j]),
                             int(D["period"][j]))
            col = det.start + j
            self.det_by_ut[(u, t)].append(col)
            self.det_to[(u, dest, t)].append(col)
            self.det_to_office[(dest, t)].append(col)
            if a >= 0:
                self.det_from[(u, a, t)].append(col)
                self.det_from_office[(a, t)].append(col)
        self.rea_by_u: dict[int, list[tuple[int, int, int]]] = defaultdict(list)  # (col, o, t)
        self.home_col: dict[tuple[int, int, int], int] = {}  # (u, o, t) -> column
        self.home_cols_by_ut: dict[tuple[int, int], list[int]] = defaultdict(list)
        R = rea.keys
        for j in range(len(rea)):
            u, o, t = int(R["unit"][j]), int(R["office"][j]), int(R["period"][j])
            self.rea_by_u[u].append((rea.start + j, o, t))
            self.home_col[(u, o, t)] = rea.start + j
            self.home_cols_by_ut[(u, t)].append(rea.start + j)
        self.present_home = np.zeros((len(f.offices), f.T))
        for u, person in enumerate(f.rep):
            self.present_home[f.o_ix[person.home_office]] += f.size[u] * (f.avail[u] > 0)
        H = hire.keys
        self.hire_by_ok: dict[tuple[int, int], list[tuple[int, int]]] = defaultdict(list)
        for j in range(len(hire)):
            self.hire_by_ok[(int(H["office"][j]), int(H["skill"][j]))].append(
                (hire.start + j, int(H["period"][j])))

    def home_terms(self, u: int, o: int, t: int) -> Terms:
        """Heads of unit u whose home in force at t is o: constant + reassignment columns."""
        home0 = self.f.o_ix[self.f.rep[u].home_office]
        if u not in self.rea_by_u:
            return (self.f.size[u] if o == home0 else 0.0), [], []
        if o != home0:
            col = self.home_col.get((u, o, t))
            return 0.0, ([] if col is None else [col]), ([] if col is None else [1.0])
        cols = self.home_cols_by_ut.get((u, t), [])
        return 1.0, cols, [-1.0] * len(cols)

    def heads_at_home(self, o: int, t: int) -> Terms:
        """Present people whose home in force at t is o: constant + reassignment columns."""
        cols: list[int] = []
        vals: list[float] = []
        for u in self.rea_by_u:
            if self.f.avail[u, t] > 0:
                _, pc, pv = self.home_terms(u, o, t)
                cols += pc
                vals += pv
        return float(self.present_home[o, t]), cols, vals

    def at_office(self, u: int, o: int, t: int) -> Terms:
        """Heads of unit u working at o in t: at home and not away, or detailed in."""
        into = self.det_to.get((u, o, t), [])
        col = self.relocation.at_col.get((u, o, t))
        if col is not None:
            return 0.0, [col, *into], [1.0] * (1 + len(into))
        const, cols, vals = self.home_terms(u, o, t)
        out = self.det_from.get((u, o, t), [])
        return const, cols + out + into, vals + [-1.0] * len(out) + [1.0] * len(into)


def _add_staff_rows(b: _Builder, f: _Frame, cols: _Columns) -> None:
    """Rows capacity, one_detail and detail_from_home."""
    # capacity: sum_k w[u,o,k,t] <= avail * (heads at o: home and not away, or detailed in)
    W = cols.work.keys
    work_by_uot: dict[tuple[int, int, int], list[int]] = defaultdict(list)
    for j in range(len(cols.work)):
        work_by_uot[(int(W["unit"][j]), int(W["office"][j]), int(W["period"][j]))].append(
            cols.work.start + j)
    b.begin("capacity")
    for (u, o, t), wcols in work_by_uot.items():
        cap = f.avail[u, t]
        const, at_cols, heads = cols.at_office(u, o, t)
        b.row(list(wcols) + at_cols, [1.0] * len(wcols) + [-cap * v for v in heads], -INF,
              cap * const, f"{f.unit_label(u)} at {f.offices[o]} in {f.period(t)}")

    # one_detail: each person on at most one detail per period
    b.begin("one_detail")
    for (u, t), dcols in cols.det_by_ut.items():
        if len(dcols) > 1:
            b.row(dcols, [1.0] * len(dcols), -INF, f.size[u], f"{f.unit_label(u)} in {f.period(t)}")

    # detail_from_home: a detail leaves from the home in force (relocatable people only)
    b.begin("detail_from_home")
    for (u, a, t), dcols in cols.det_from.items():
        if not f.rep[u].can_relocate:
            continue
        const, hcols, hvals = cols.home_terms(u, a, t)
        b.row(dcols + hcols, [1.0] * len(dcols) + [-v for v in hvals], -INF, const,
              f"{f.unit_label(u)} from {f.offices[a]} in {f.period(t)}")


def _add_home_rows(b: _Builder, f: _Frame, cols: _Columns) -> None:
    """Rows one_reassignment and home_stays."""
    # one_reassignment: one new home at most (the home columns never switch back, below)
    b.begin("one_reassignment")
    for u, entries in cols.rea_by_u.items():
        t_last = max(t for _, _, t in entries)
        last = [c for c, _, t in entries if t == t_last]
        b.row(last, [1.0] * len(last), -INF, 1.0, f.unit_label(u))
    b.begin("home_stays")
    for (u, o, t), col in cols.home_col.items():
        before = cols.home_col.get((u, o, t - 1))
        if before is not None:
            b.row([before, col], [1.0, -1.0], -INF, 0.0,
                  f"{f.unit_label(u)} at {f.offices[o]} in {f.period(t)}")


def _add_coverage_rows(b: _Builder, f: _Frame, cols: _Columns,
                       short: ColumnBlock) -> frozenset[int]:
    """Rows coverage: staff output + hire output + shortfall >= demand.

    Returns the units whose one skill takes all their output (they have no work columns).
    """
    instance, rep, offices, skills = f.instance, f.rep, f.offices, f.skills
    W = cols.work.keys
    work_by_okt: dict[tuple[int, int, int], list[tuple[int, float]]] = defaultdict(list)
    for j in range(len(cols.work)):
        u, k = int(W["unit"][j]), int(W["skill"][j])
        work_by_okt[(int(W["office"][j]), k, int(W["period"][j]))].append(
            (cols.work.start + j, rep[u].proficiency(skills[k])))
    # People with one skill give all their output to it, wherever they are that period:
    # proficiency x available FTE x (heads there), with no work columns (issue 3: size).
    direct = frozenset(u for u, person in enumerate(rep) if len(person.skills) == 1)
    direct_terms: dict[tuple[int, int, int], list[tuple[int, float]]] = defaultdict(list)
    direct_const: dict[tuple[int, int, int], float] = defaultdict(float)
    for u in sorted(direct):
        k = f.k_ix[rep[u].skills[0][0]]
        home0 = f.o_ix[rep[u].home_office]
        places = range(len(offices)) if rep[u].can_relocate else None
        for t in range(f.T):
            if f.avail[u, t] <= 0:
                continue
            factor = rep[u].skills[0][1] * f.avail[u, t]
            there = set(places) if places is not None else {home0}
            there |= {o for o in range(len(offices)) if (u, o, t) in cols.det_to}
            for o in there:
                if (o, k, t) not in f.wanted:
                    continue
                const, ocols, heads = cols.at_office(u, o, t)
                direct_const[(o, k, t)] += factor * const
                direct_terms[(o, k, t)] += [(c, factor * v)
                                            for c, v in zip(ocols, heads, strict=True)]
    b.begin("coverage")
    for j, (o, k, t) in enumerate(sorted(f.wanted)):  # the shortfall block's order
        terms = work_by_okt.get((o, k, t), []) + direct_terms.get((o, k, t), [])
        row = [c for c, _ in terms]
        vals = [v for _, v in terms]
        for col, s in cols.hire_by_ok.get((o, k), []):
            eff = instance.hire_fte(skills[k], offices[o], s, t)
            if s <= t and eff > 0:
                row.append(col)
                vals.append(eff)
        row.append(short.start + j)
        vals.append(1.0)
        b.row(row, vals, f.demand_fte[(o, k, t)] - direct_const.get((o, k, t), 0.0), INF,
              f"{skills[k]} at {offices[o]} in {f.period(t)}")
    return direct
