"""Build the mixed-integer model of an instance as coefficient arrays; no solving here.

The model is written as one sparse matrix with row bounds, so that HiGHS can take it in one
``passModel`` call and PuLP (for CBC) can be fed row slices without building expressions term
by term.  Columns come in named blocks (work, detail, reassignment, hire, shortfall); each block
keeps integer key arrays (unit, office, skill, period, ...) so plan extraction can decode a
solution vector without knowing solver objects.  The mathematics is written up in
``docs/model.md``; the comments here refer to its constraint names.
"""

from __future__ import annotations

import math
from collections import defaultdict
from collections.abc import Callable, Hashable
from dataclasses import dataclass, field

import numpy as np
import scipy.sparse as sp

from rebalance.instance import Instance, Person

__all__ = ["ColumnBlock", "Model", "RowFamily", "build_model", "group_units"]

INF = math.inf

# Row families: structure rows hold the model together; limit rows are the organisation's
# limits, which the infeasibility analysis may relax to say which ones conflict.
STRUCTURE_FAMILIES = (
    "capacity", "coverage", "one_detail", "detail_from_home", "one_reassignment", "home_stays",
    "home_in_force", "one_place", "detail_not_home", "detail_cost_adjustment",
)
LIMIT_FAMILIES = (
    "consecutive_details",
    "away_share",
    "seats",
    "vacancies",
    "max_hires",
    "hiring_budget",
    "moves_budget",
)


@dataclass(frozen=True)
class RowFamily:
    name: str
    start: int
    stop: int
    labels: tuple[str, ...]


@dataclass
class ColumnBlock:
    """A contiguous range of columns of one kind, with integer keys for each column."""

    name: str
    start: int
    stop: int
    keys: dict[str, np.ndarray] = field(default_factory=dict)

    def __len__(self) -> int:
        return self.stop - self.start


@dataclass
class Model:
    """A mixed-integer linear model: min ``objective @ x``, ``row_lower <= A x <= row_upper``.

    Two objective vectors are kept: ``shortfall_weight`` (stage one) and ``cost`` (stage two);
    ``objective_for`` combines them for each objective mode.
    """

    matrix: sp.csr_matrix
    row_lower: np.ndarray
    row_upper: np.ndarray
    col_lower: np.ndarray
    col_upper: np.ndarray
    is_integer: np.ndarray
    shortfall_weight: np.ndarray
    cost: np.ndarray
    blocks: dict[str, ColumnBlock]
    rows: tuple[RowFamily, ...]
    # Staff indices of each unit (a pool of interchangeable people, or one person).
    units: tuple[tuple[int, ...], ...] = ()
    # Units whose one skill takes all their output (no work columns; see the coverage rows).
    direct_units: frozenset[int] = frozenset()
    build_seconds: float = 0.0

    @property
    def num_cols(self) -> int:
        return int(self.col_lower.size)

    @property
    def num_rows(self) -> int:
        return int(self.row_lower.size)

    @property
    def num_integer(self) -> int:
        return int(self.is_integer.sum())

    def row_label(self, row: int) -> tuple[str, str]:
        for family in self.rows:
            if family.start <= row < family.stop:
                return family.name, family.labels[row - family.start]
        raise IndexError(row)


class _Builder:
    """Accumulates columns and rows as triplets; one ``finish`` turns them into arrays."""

    def __init__(self) -> None:
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

    def row(self, cols: list[int], vals: list[float], lo: float, hi: float, label: str) -> None:
        assert self._family is not None
        i = len(self.row_lo)
        self.r.extend([i] * len(cols))
        self.c.extend(cols)
        self.v.extend(vals)
        self.row_lo.append(lo)
        self.row_hi.append(hi)
        self._family[2].append(label)

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
            col_lower=np.concatenate(self.lower) if self.lower else np.zeros(0),
            col_upper=np.concatenate(self.upper) if self.upper else np.zeros(0),
            is_integer=np.concatenate(self.integer) if self.integer else np.zeros(0, bool),
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
    """
    if not pooled:
        return tuple((p,) for p in range(len(instance.staff)))
    groups: dict[tuple[object, ...], list[int]] = {}
    singles: list[tuple[int, ...]] = []
    for p, person in enumerate(instance.staff):
        if person.can_relocate:
            singles.append((p,))
            continue
        key = (person.home_office, person.skills, person.fte, person.can_detail,
               person.last_period, None if pool_key is None else pool_key(person))
        groups.setdefault(key, []).append(p)
    units = [tuple(members) for members in groups.values()] + singles
    return tuple(sorted(units))


PAIR_DETAILS_MAX_OFFICES = 10


def build_model(instance: Instance, pooled: bool = True,
                pool_key: Callable[[Person], Hashable] | None = None,
                pair_details: bool | None = None) -> Model:
    """Build the model of ``instance`` (see ``docs/model.md``).

    With ``pooled`` (the default) interchangeable people share columns with integer counts;
    ``pooled=False`` gives every person their own columns (the person-level formulation,
    kept for tests that prove both reach the same optimum).

    ``pair_details`` chooses how a relocatable person's details are written: one column per
    (home, destination) pair, whose LP is tight but grows with offices squared, or one per
    destination with linear away and cost-adjustment columns.  Both are exact; the default
    takes pairs up to ``PAIR_DETAILS_MAX_OFFICES`` offices.
    """
    if pair_details is None:
        pair_details = len(instance.offices) <= PAIR_DETAILS_MAX_OFFICES
    import time

    started = time.perf_counter()
    b = _Builder()
    T = len(instance.periods)
    offices = [o.name for o in instance.offices]
    skills = [s.name for s in instance.skills]
    o_ix = {name: i for i, name in enumerate(offices)}
    k_ix = {name: i for i, name in enumerate(skills)}
    year_of = [p.year for p in instance.periods]
    units = group_units(instance, pooled, pool_key)
    rep = [instance.staff[members[0]] for members in units]  # a representative per unit
    size = np.asarray([len(members) for members in units], dtype=float)

    demand_fte: dict[tuple[int, int, int], float] = {}
    priority: dict[tuple[int, int, int], float] = {}
    for d in instance.demand:
        key = (o_ix[d.office], k_ix[d.skill], d.period)
        demand_fte[key] = d.fte
        priority[key] = d.priority
    wanted = {key for key, fte in demand_fte.items() if fte > 0}
    # Skills wanted at an office in a period: prunes work and detail columns that cannot help.
    skills_wanted: dict[tuple[int, int], set[int]] = defaultdict(set)
    for o, k, t in wanted:
        skills_wanted[(o, t)].add(k)

    m = instance.policy.max_consecutive_detail_periods
    details_allowed = m is None or m > 0

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

    avail = np.zeros((len(units), T))  # per person of the unit
    for u, person in enumerate(rep):
        home0 = o_ix[person.home_office]
        person_skills = {k_ix[s] for s, _ in person.skills}
        homes = range(len(offices)) if person.can_relocate else (home0,)
        for t in range(T):
            avail[u, t] = instance.available_fte(person, t)
            if avail[u, t] <= 0:
                continue
            if person.can_relocate:
                last = t == T - 1 or instance.available_fte(person, t + 1) <= 0
                for o in range(len(offices)):
                    if o != home0:
                        rea_keys["unit"].append(u)
                        rea_keys["office"].append(o)
                        rea_keys["period"].append(t)
                        rea_cost.append(instance.relocation_cost(person.home_office, offices[o])
                                        if last else 0.0)
            reachable = set(homes)
            if person.can_detail and details_allowed:
                for dest in range(len(offices)):
                    if not person_skills & skills_wanted.get((dest, t), set()):
                        continue
                    # A relocatable person's detail leaves from the home in force (home -1);
                    # its cost from a new home is added by the adjustment columns below.
                    for a in ((-1,) if person.can_relocate and not pair_details else homes):
                        if a == dest:
                            continue
                        det_keys["unit"].append(u)
                        det_keys["home"].append(a)
                        det_keys["office"].append(dest)
                        det_keys["period"].append(t)
                        det_cost.append(instance.detail_cost_per_period(
                            person.home_office if a < 0 else offices[a], offices[dest]))
                        det_ub.append(size[u])
                    reachable.add(dest)
            if len(person_skills) == 1:
                continue  # one skill: output follows where they are, no split to choose
            for o in sorted(reachable):
                for k in sorted(person_skills & skills_wanted.get((o, t), set())):
                    work_keys["unit"].append(u)
                    work_keys["office"].append(o)
                    work_keys["skill"].append(k)
                    work_keys["period"].append(t)
                    work_cap.append(avail[u, t] * size[u])

    work = b.add_block("work", work_keys, np.zeros(len(work_cap)), np.asarray(work_cap), False)
    det = b.add_block("detail", det_keys, np.zeros(len(det_cost)), np.asarray(det_ub), True,
                      cost=np.asarray(det_cost))
    rea = b.add_block("home", rea_keys, np.zeros(len(rea_cost)), np.ones(len(rea_cost)),
                      True, cost=np.asarray(rea_cost))

    # ---- columns for relocatable people who may go on detail (each a unit of one) ----------
    # at home x[u, a, t] = works at a as its home in force (home a and not on detail), with
    # sum_a x + sum_b d = 1 and x[a] <= home(a): given integer homes and details, x is
    # exact and need not be integer, and away-from-a is home(a) - x[a].  The cost adjustment
    # e[u, L, t] >= (detail cost from location L) - (cost from the original home's location)
    # when the home in force is at L.  Both stay O(offices) per person and period, where
    # (home, destination) pairs would need O(offices^2).
    det_pt: dict[tuple[int, int], list[int]] = defaultdict(list)
    for j in range(len(det_cost)):
        if det_keys["home"][j] < 0:
            det_pt[(det_keys["unit"][j], det_keys["period"][j])].append(j)
    locations = sorted({o.location for o in instance.offices})
    loc_of = [locations.index(o.location) for o in instance.offices]
    # Costs depend on locations only: any office at a location stands for all of them.
    office_at = {loc: a for a, loc in reversed(list(enumerate(loc_of)))}
    at_keys: dict[str, list[int]] = {"unit": [], "office": [], "period": []}
    adj_keys: dict[str, list[int]] = {"unit": [], "location": [], "period": []}
    adj_bound: list[float] = []
    for (u, t), js in sorted(det_pt.items()):
        home0 = o_ix[rep[u].home_office]
        for a in range(len(offices)):
            at_keys["unit"].append(u)
            at_keys["office"].append(a)
            at_keys["period"].append(t)
        for loc in range(len(locations)):
            if loc == loc_of[home0] or not any(loc_of[a] == loc for a in range(len(offices))
                                               if a != home0):
                continue
            here = office_at[loc]
            delta = [instance.detail_cost_per_period(offices[here], offices[det_keys["office"][j]])
                     - det_cost[j] for j in js]
            if any(delta):
                adj_keys["unit"].append(u)
                adj_keys["location"].append(loc)
                adj_keys["period"].append(t)
                adj_bound.append(max(abs(d) for d in delta))
    at_home = b.add_block("at_home", at_keys, np.zeros(len(at_keys["unit"])),
                          np.ones(len(at_keys["unit"])), False)
    adjust = b.add_block("detail_cost_adjustment", adj_keys, -np.asarray(adj_bound, float),
                         np.asarray(adj_bound, float), False, cost=np.ones(len(adj_bound)))

    # ---- columns: hires h[o, k, s, funding] ------------------------------------------------
    hire_keys: dict[str, list[int]] = {"office": [], "skill": [], "period": [], "new": []}
    hire_ub: list[float] = []
    hire_cost: list[float] = []
    for o, office in enumerate(instance.offices):
        if office.max_hires_per_period == 0:
            continue
        for k, skill in enumerate(instance.skills):
            later_demand = [(t, demand_fte.get((o, k, t), 0.0)) for t in range(T)]
            vac = instance.vacancies.get((office.name, skill.name), 0)
            for s in range(skill.time_to_hire, T):
                # No hire where nothing it could ever cover: more than the peak needs is waste.
                need = 0
                for t, fte in later_demand[s:]:
                    eff = instance.hire_fte(skill.name, office.name, s, t)
                    if fte > 0 and eff > 0:
                        need = max(need, math.ceil(fte / eff - 1e-9))
                if office.max_hires_per_period is not None:
                    need = min(need, office.max_hires_per_period)
                if need <= 0:
                    continue
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
    hire = b.add_block("hire", hire_keys, np.zeros(len(hire_ub)), np.asarray(hire_ub), True,
                       cost=np.asarray(hire_cost))

    # ---- columns: shortfall s[o, k, t] -----------------------------------------------------
    short_list = sorted(wanted)
    short = b.add_block(
        "shortfall",
        {"office": [x[0] for x in short_list], "skill": [x[1] for x in short_list],
         "period": [x[2] for x in short_list]},
        np.zeros(len(short_list)),
        np.asarray([demand_fte[x] for x in short_list]),
        False,
        weight=np.asarray([priority[x] for x in short_list]),
    )

    # Index maps from keys to columns.
    D = det.keys
    det_by_ut: dict[tuple[int, int], list[int]] = defaultdict(list)
    det_from: dict[tuple[int, int, int], list[int]] = defaultdict(list)   # (u, a, t)
    det_to: dict[tuple[int, int, int], list[int]] = defaultdict(list)     # (u, b, t)
    det_from_office: dict[tuple[int, int], list[int]] = defaultdict(list)  # (a, t)
    det_to_office: dict[tuple[int, int], list[int]] = defaultdict(list)    # (b, t)
    for j in range(len(det)):
        u, a, dest, t = (int(D["unit"][j]), int(D["home"][j]), int(D["office"][j]),
                         int(D["period"][j]))
        col = det.start + j
        det_by_ut[(u, t)].append(col)
        det_to[(u, dest, t)].append(col)
        det_to_office[(dest, t)].append(col)
        if a >= 0:
            det_from[(u, a, t)].append(col)
            det_from_office[(a, t)].append(col)
    # Relocatable people who may go on detail are placed by their at-home columns.
    at_col: dict[tuple[int, int, int], int] = {}
    located_by_t: dict[int, list[int]] = defaultdict(list)
    X = at_home.keys
    for j in range(len(at_home)):
        u, o, t = int(X["unit"][j]), int(X["office"][j]), int(X["period"][j])
        at_col[(u, o, t)] = at_home.start + j
        if not located_by_t[t] or located_by_t[t][-1] != u:
            located_by_t[t].append(u)
    rea_by_u: dict[int, list[tuple[int, int, int]]] = defaultdict(list)  # u -> (col, o, t)
    home_col: dict[tuple[int, int, int], int] = {}  # (u, o, t) -> column
    R = rea.keys
    for j in range(len(rea)):
        u, o, t = int(R["unit"][j]), int(R["office"][j]), int(R["period"][j])
        rea_by_u[u].append((rea.start + j, o, t))
        home_col[(u, o, t)] = rea.start + j

    def home_terms(u: int, o: int, t: int) -> tuple[float, list[int], list[float]]:
        """Heads of unit u whose home in force at t is o: constant + reassignment columns."""
        home0 = o_ix[rep[u].home_office]
        if u not in rea_by_u:
            return (size[u] if o == home0 else 0.0), [], []
        if o != home0:
            col = home_col.get((u, o, t))
            return 0.0, ([] if col is None else [col]), ([] if col is None else [1.0])
        cols = [c for (uu, _, tt), c in _home_cols_at(u, t)]
        return 1.0, cols, [-1.0] * len(cols)

    home_cols_by_ut: dict[tuple[int, int], list[tuple[tuple[int, int, int], int]]] = (
        defaultdict(list))
    for key, col in home_col.items():
        home_cols_by_ut[(key[0], key[2])].append((key, col))

    def _home_cols_at(u: int, t: int) -> list[tuple[tuple[int, int, int], int]]:
        return home_cols_by_ut.get((u, t), [])

    present_home = np.zeros((len(offices), T))
    for u, person in enumerate(rep):
        present_home[o_ix[person.home_office]] += size[u] * (avail[u] > 0)

    def heads_at_home(o: int, t: int) -> tuple[float, list[int], list[float]]:
        """Present people whose home in force at t is o: constant + reassignment columns."""
        cols: list[int] = []
        vals: list[float] = []
        for u in rea_by_u:
            if avail[u, t] > 0:
                _, pc, pv = home_terms(u, o, t)
                cols += pc
                vals += pv
        return float(present_home[o, t]), cols, vals

    def at_office(u: int, o: int, t: int) -> tuple[float, list[int], list[float]]:
        """Heads of unit u working at o in t: at home and not away, or detailed in."""
        into = det_to.get((u, o, t), [])
        col = at_col.get((u, o, t))
        if col is not None:
            return 0.0, [col, *into], [1.0] * (1 + len(into))
        const, cols, vals = home_terms(u, o, t)
        out = det_from.get((u, o, t), [])
        return const, cols + out + into, vals + [-1.0] * len(out) + [1.0] * len(into)

    def located_away(a: int, t: int) -> tuple[float, list[int], list[float]]:
        """Relocatable people placed by at-home columns who are away from home a in t."""
        const, cols, vals = 0.0, [], []
        for u in located_by_t.get(t, []):
            c, hc, hv = home_terms(u, a, t)
            const += c
            cols += [*hc, at_col[(u, a, t)]]
            vals += [*hv, -1.0]
        return const, cols, vals

    def unit_label(u: int) -> str:
        n = len(units[u])
        first = instance.staff[units[u][0]].person
        return f"person {first}" if n == 1 else f"group of {n} ({first} and alike)"

    # capacity: sum_k w[u,o,k,t] <= avail * (heads at o: home and not away, or detailed in)
    W = work.keys
    work_by_uot: dict[tuple[int, int, int], list[int]] = defaultdict(list)
    for j in range(len(work)):
        work_by_uot[(int(W["unit"][j]), int(W["office"][j]), int(W["period"][j]))].append(
            work.start + j)
    b.begin("capacity")
    for (u, o, t), cols in work_by_uot.items():
        cap = avail[u, t]
        const, at_cols, heads = at_office(u, o, t)
        b.row(list(cols) + at_cols, [1.0] * len(cols) + [-cap * v for v in heads], -INF,
              cap * const, f"{unit_label(u)} at {offices[o]} in {instance.periods[t].name}")

    # one_detail: each person on at most one detail per period
    b.begin("one_detail")
    for (u, t), cols in det_by_ut.items():
        if len(cols) > 1:
            b.row(cols, [1.0] * len(cols), -INF, size[u],
                  f"{unit_label(u)} in {instance.periods[t].name}")

    # detail_from_home: a detail leaves from the home in force (relocatable people only)
    b.begin("detail_from_home")
    for (u, a, t), cols in det_from.items():
        if not rep[u].can_relocate:
            continue
        const, hcols, hvals = home_terms(u, a, t)
        b.row(cols + hcols, [1.0] * len(cols) + [-v for v in hvals], -INF, const,
              f"{unit_label(u)} from {offices[a]} in {instance.periods[t].name}")

    # home_in_force: at home only at the home in force, x[u,a,t] <= N(u,a,t)
    b.begin("home_in_force")
    for (u, a, t), col in sorted(at_col.items()):
        const, hcols, hvals = home_terms(u, a, t)
        b.row([col, *hcols], [1.0] + [-v for v in hvals], -INF, const,
              f"{unit_label(u)} at {offices[a]} in {instance.periods[t].name}")
    # one_place: a relocatable person is at home or on one detail: sum_a x + sum_b d = 1
    b.begin("one_place")
    for t, located in sorted(located_by_t.items()):
        for u in located:
            cols = [at_col[(u, a, t)] for a in range(len(offices))] + det_by_ut[(u, t)]
            b.row(cols, [1.0] * len(cols), 1.0, 1.0,
                  f"{unit_label(u)} in {instance.periods[t].name}")
    # detail_not_home: no detail to the office that is the home in force
    b.begin("detail_not_home")
    for (u, o, t), to_o in sorted(det_to.items()):
        cols = [c for c in to_o if D["home"][c - det.start] < 0]  # by-destination columns
        if not cols:
            continue
        const, hcols, hvals = home_terms(u, o, t)
        b.row(cols + hcols, [1.0] * len(cols) + hvals, -INF, 1.0 - const,
              f"{unit_label(u)} to {offices[o]} in {instance.periods[t].name}")
    # detail_cost_adjustment: e >= sum_b (c(L,b) - c(home0,b)) d[b] - M (1 - G_L),
    # e >= -M G_L, where G_L = sum of home columns at offices in location L
    b.begin("detail_cost_adjustment")
    A_ = adjust.keys
    for j in range(len(adjust)):
        u, loc, t = int(A_["unit"][j]), int(A_["location"][j]), int(A_["period"][j])
        col, big = adjust.start + j, float(adj_bound[j])
        here = office_at[loc]
        g_cols = [home_col[(u, a, t)] for a in range(len(offices))
                  if loc_of[a] == loc and (u, a, t) in home_col]
        terms = [(det.start + i, instance.detail_cost_per_period(
            offices[here], offices[det_keys["office"][i]]) - det_cost[i]) for i in det_pt[(u, t)]]
        terms = [(c, v) for c, v in terms if v]
        label = f"{unit_label(u)} from {locations[loc]} in {instance.periods[t].name}"
        b.row([c for c, _ in terms] + [col] + g_cols,
              [v for _, v in terms] + [-1.0] + [big] * len(g_cols), -INF, big, label)
        b.row([col, *g_cols], [-1.0] + [-big] * len(g_cols), -INF, 0.0, label)

    # one_reassignment: one new home at most (the home columns never switch back, below)
    b.begin("one_reassignment")
    for u, entries in rea_by_u.items():
        t_last = max(t for _, _, t in entries)
        cols = [c for c, _, t in entries if t == t_last]
        b.row(cols, [1.0] * len(cols), -INF, 1.0, unit_label(u))
    b.begin("home_stays")
    for (u, o, t), col in home_col.items():
        before = home_col.get((u, o, t - 1))
        if before is not None:
            b.row([before, col], [1.0, -1.0], -INF, 0.0,
                  f"{unit_label(u)} at {offices[o]} in {instance.periods[t].name}")

    # coverage: staff output + hire output + shortfall >= demand
    H = hire.keys
    hire_by_ok: dict[tuple[int, int], list[tuple[int, int]]] = defaultdict(list)
    for j in range(len(hire)):
        hire_by_ok[(int(H["office"][j]), int(H["skill"][j]))].append(
            (hire.start + j, int(H["period"][j])))
    work_by_okt: dict[tuple[int, int, int], list[tuple[int, float]]] = defaultdict(list)
    for j in range(len(work)):
        u, k = int(W["unit"][j]), int(W["skill"][j])
        work_by_okt[(int(W["office"][j]), k, int(W["period"][j]))].append(
            (work.start + j, rep[u].proficiency(skills[k])))
    # People with one skill give all their output to it, wherever they are that period:
    # proficiency x available FTE x (heads there), with no work columns (issue 3: size).
    direct = frozenset(u for u, person in enumerate(rep) if len(person.skills) == 1)
    direct_terms: dict[tuple[int, int, int], list[tuple[int, float]]] = defaultdict(list)
    direct_const: dict[tuple[int, int, int], float] = defaultdict(float)
    for u in sorted(direct):
        k = k_ix[rep[u].skills[0][0]]
        home0 = o_ix[rep[u].home_office]
        places = range(len(offices)) if rep[u].can_relocate else None
        for t in range(T):
            if avail[u, t] <= 0:
                continue
            factor = rep[u].skills[0][1] * avail[u, t]
            there = set(places) if places is not None else {home0}
            there |= {o for o in range(len(offices)) if (u, o, t) in det_to}
            for o in there:
                if (o, k, t) not in wanted:
                    continue
                const, cols, heads = at_office(u, o, t)
                direct_const[(o, k, t)] += factor * const
                direct_terms[(o, k, t)] += [(c, factor * v)
                                            for c, v in zip(cols, heads, strict=True)]
    b.begin("coverage")
    for j, (o, k, t) in enumerate(short_list):
        cols = [c for c, _ in work_by_okt.get((o, k, t), [])]
        vals = [v for _, v in work_by_okt.get((o, k, t), [])]
        cols += [c for c, _ in direct_terms.get((o, k, t), [])]
        vals += [v for _, v in direct_terms.get((o, k, t), [])]
        for col, s in hire_by_ok.get((o, k), []):
            eff = instance.hire_fte(skills[k], offices[o], s, t)
            if s <= t and eff > 0:
                cols.append(col)
                vals.append(eff)
        cols.append(short.start + j)
        vals.append(1.0)
        b.row(cols, vals, demand_fte[(o, k, t)] - direct_const.get((o, k, t), 0.0), INF,
              f"{skills[k]} at {offices[o]} in {instance.periods[t].name}")

    # consecutive_details: in every window of m+1 periods at most m are detail periods; for a
    # group, at most m x size detail-periods (plan extraction then names who goes when)
    b.begin("consecutive_details")
    if m is not None and m > 0:
        for u in range(len(units)):
            for start in range(0, T - m):
                window = range(start, start + m + 1)
                if sum(1 for t in window if det_by_ut.get((u, t))) <= m:
                    continue
                cols = [c for t in window for c in det_by_ut.get((u, t), [])]
                b.row(cols, [1.0] * len(cols), -INF, m * size[u],
                      f"{unit_label(u)} in {instance.periods[start].name}.."
                      f"{instance.periods[start + m].name}")

    # away_share: away from home office a <= share * present heads with home a
    share = instance.policy.max_away_share
    b.begin("away_share")
    if share < 1.0:
        keys = set(det_from_office) | {(a, t) for t in located_by_t for a in range(len(offices))}
        for a, t in sorted(keys):
            cols = det_from_office.get((a, t), [])
            const, hcols, hvals = heads_at_home(a, t)
            gone, gcols, gvals = located_away(a, t)
            b.row(cols + gcols + hcols,
                  [1.0] * len(cols) + gvals + [-share * v for v in hvals], -INF,
                  share * const - gone, f"{offices[a]} in {instance.periods[t].name}")

    # seats: home people present and not away + detailed in + hires started <= seats
    b.begin("seats")
    for o, office in enumerate(instance.offices):
        if office.seats is None:
            continue
        for t in range(T):
            const, cols, vals = heads_at_home(o, t)
            gone, gcols, gvals = located_away(o, t)
            const -= gone
            cols += gcols
            vals += [-v for v in gvals]
            cols += det_from_office.get((o, t), [])
            vals += [-1.0] * len(det_from_office.get((o, t), []))
            cols += det_to_office.get((o, t), [])
            vals += [1.0] * len(det_to_office.get((o, t), []))
            for k in range(len(skills)):
                for col, s in hire_by_ok.get((o, k), []):
                    if s <= t:
                        cols.append(col)
                        vals.append(1.0)
            if cols or const > office.seats:
                b.row(cols, vals, -INF, office.seats - const,
                      f"{office.name} in {instance.periods[t].name}")

    # vacancies: vacancy-funded hires per office and skill over the horizon
    b.begin("vacancies")
    for (o, k), starts in sorted(hire_by_ok.items()):
        funded = [c for c, _ in starts if H["new"][c - hire.start] == 0]
        vac = instance.vacancies.get((offices[o], skills[k]), 0)
        if len(funded) > 1:
            b.row(funded, [1.0] * len(funded), -INF, float(vac), f"{skills[k]} at {offices[o]}")

    # max_hires: starts per office and period, all skills together
    b.begin("max_hires")
    for o, office in enumerate(instance.offices):
        cap_hires = office.max_hires_per_period
        if cap_hires is None:
            continue
        for s in range(T):
            cols = [c for k in range(len(skills)) for c, st in hire_by_ok.get((o, k), [])
                    if st == s]
            if len(cols) > 1:
                b.row(cols, [1.0] * len(cols), -INF, float(cap_hires),
                      f"{office.name} in {instance.periods[s].name}")

    # hiring_budget per year: onboarding of all hires + new-position salaries falling in it
    b.begin("hiring_budget")
    for year in instance.years:
        budget = instance.budget(year)
        if budget is None or budget.hiring is None:
            continue
        cols, vals = [], []
        for j in range(len(hire)):
            s, k, new = int(H["period"][j]), int(H["skill"][j]), int(H["new"][j])
            skill = instance.skills[k]
            amount = skill.onboarding_cost if year_of[s] == year else 0.0
            if new:
                amount += skill.salary_per_period * sum(
                    1 for t in range(s, T) if year_of[t] == year)
            if amount:
                cols.append(hire.start + j)
                vals.append(amount)
        if cols:
            b.row(cols, vals, -INF, budget.hiring, f"hiring budget {year}")

    # moves_budget per year: detail and relocation spending
    b.begin("moves_budget")
    for year in instance.years:
        budget = instance.budget(year)
        if budget is None or budget.moves is None:
            continue
        cols, vals = [], []
        for j in range(len(det)):
            if year_of[int(D["period"][j])] == year and det_cost[j]:
                cols.append(det.start + j)
                vals.append(det_cost[j])
        for j in range(len(adjust)):
            if year_of[int(adjust.keys["period"][j])] == year:
                cols.append(adjust.start + j)
                vals.append(1.0)
        # Relocation is paid in the year the home changes: cost x (g[t] - g[t-1]).
        for (u, o, t), col in home_col.items():
            if year_of[t] != year:
                continue
            amount = instance.relocation_cost(rep[u].home_office, offices[o])
            if amount:
                cols.append(col)
                vals.append(amount)
                before = home_col.get((u, o, t - 1))
                if before is not None:
                    cols.append(before)
                    vals.append(-amount)
        if cols:
            b.row(cols, vals, -INF, budget.moves, f"moves budget {year}")

    model = b.finish()
    model.units = units
    model.direct_units = direct
    model.build_seconds = time.perf_counter() - started
    return model
