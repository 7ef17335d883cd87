"""Build the mixed-integer model of an instance as coefficient arrays; no solving here.

The model is written as one sparse matrix with row bounds, so that HiGHS can take it in one
``passModel`` call and PuLP (for CBC) can be fed row slices without building expressions term
by term.  Columns come in named blocks (work, detail, reassignment, hire, shortfall); each block
keeps integer key arrays (person, office, skill, period, ...) so plan extraction can decode a
solution vector without knowing solver objects.  The mathematics is written up in
``docs/model.md``; the comments here refer to its constraint names.
"""

from __future__ import annotations

import math
from collections import defaultdict
from dataclasses import dataclass, field

import numpy as np
import scipy.sparse as sp

from rebalance.instance import Instance

__all__ = ["ColumnBlock", "Model", "RowFamily", "build_model"]

INF = math.inf

# Row families: structure rows hold the model together; limit rows are the organisation's
# limits, which the infeasibility analysis may relax to say which ones conflict.
STRUCTURE_FAMILIES = ("capacity", "coverage", "one_detail", "detail_from_home", "one_reassignment")
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
    """A mixed-integer linear model: minimise ``objective @ x`` s.t. ``row_lower <= A x <= row_upper``.

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
    # Constant part of the weighted shortfall (demand nobody could ever cover is still counted).
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


def build_model(instance: Instance) -> Model:
    """Build the person-level model of ``instance`` (see ``docs/model.md``)."""
    import time

    started = time.perf_counter()
    b = _Builder()
    T = len(instance.periods)
    offices = [o.name for o in instance.offices]
    skills = [s.name for s in instance.skills]
    o_ix = {name: i for i, name in enumerate(offices)}
    k_ix = {name: i for i, name in enumerate(skills)}
    year_of = [p.year for p in instance.periods]

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

    # ---- columns: detail d[p, a, b, t] (a = home in force, b = destination) -------------
    det_keys: dict[str, list[int]] = {"person": [], "home": [], "office": [], "period": []}
    det_cost: list[float] = []
    # ---- columns: reassignment r[p, o, t] ------------------------------------------------
    rea_keys: dict[str, list[int]] = {"person": [], "office": [], "period": []}
    rea_cost: list[float] = []
    # ---- columns: work w[p, o, k, t] -------------------------------------------------------
    work_keys: dict[str, list[int]] = {"person": [], "office": [], "skill": [], "period": []}
    work_cap: list[float] = []

    avail = np.zeros((len(instance.staff), T))
    for p, person in enumerate(instance.staff):
        home0 = o_ix[person.home_office]
        person_skills = {k_ix[s] for s, _ in person.skills}
        homes = range(len(offices)) if person.can_relocate else (home0,)
        for t in range(T):
            avail[p, t] = instance.available_fte(person, t)
            if avail[p, t] <= 0:
                continue
            if person.can_relocate:
                for o in range(len(offices)):
                    if o != home0:
                        rea_keys["person"].append(p)
                        rea_keys["office"].append(o)
                        rea_keys["period"].append(t)
                        rea_cost.append(instance.relocation_cost(person.home_office, offices[o]))
            reachable = set(homes)
            if person.can_detail and details_allowed:
                for dest in range(len(offices)):
                    if not person_skills & skills_wanted.get((dest, t), set()):
                        continue
                    for a in homes:
                        if a == dest:
                            continue
                        det_keys["person"].append(p)
                        det_keys["home"].append(a)
                        det_keys["office"].append(dest)
                        det_keys["period"].append(t)
                        det_cost.append(instance.detail_cost_per_period(offices[a], offices[dest]))
                    reachable.add(dest)
            for o in sorted(reachable):
                for k in sorted(person_skills & skills_wanted.get((o, t), set())):
                    work_keys["person"].append(p)
                    work_keys["office"].append(o)
                    work_keys["skill"].append(k)
                    work_keys["period"].append(t)
                    work_cap.append(avail[p, t])

    work = b.add_block("work", work_keys, np.zeros(len(work_cap)), np.asarray(work_cap), False)
    det = b.add_block("detail", det_keys, np.zeros(len(det_cost)), np.ones(len(det_cost)), True,
                      cost=np.asarray(det_cost))
    rea = b.add_block("reassignment", rea_keys, np.zeros(len(rea_cost)), np.ones(len(rea_cost)),
                      True, cost=np.asarray(rea_cost))

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
    det_by_pt: dict[tuple[int, int], list[int]] = defaultdict(list)
    det_from: dict[tuple[int, int, int], list[int]] = defaultdict(list)   # (p, a, t)
    det_to: dict[tuple[int, int, int], list[int]] = defaultdict(list)     # (p, b, t)
    det_from_office: dict[tuple[int, int], list[int]] = defaultdict(list)  # (a, t)
    det_to_office: dict[tuple[int, int], list[int]] = defaultdict(list)    # (b, t)
    for j in range(len(det)):
        p, a, dest, t = int(D["person"][j]), int(D["home"][j]), int(D["office"][j]), int(
            D["period"][j])
        col = det.start + j
        det_by_pt[(p, t)].append(col)
        det_from[(p, a, t)].append(col)
        det_to[(p, dest, t)].append(col)
        det_from_office[(a, t)].append(col)
        det_to_office[(dest, t)].append(col)
    rea_by_p: dict[int, list[tuple[int, int, int]]] = defaultdict(list)  # p -> (col, o, t)
    R = rea.keys
    for j in range(len(rea)):
        rea_by_p[int(R["person"][j])].append((rea.start + j, int(R["office"][j]),
                                              int(R["period"][j])))

    def home_terms(p: int, o: int, t: int) -> tuple[float, list[int], list[float]]:
        """h[p, o, t] as constant + sum of reassignment columns (the home in force)."""
        home0 = o_ix[instance.staff[p].home_office]
        const = 1.0 if o == home0 else 0.0
        cols: list[int] = []
        vals: list[float] = []
        for col, dest, s in rea_by_p.get(p, ()):
            if s <= t:
                if o == home0:
                    cols.append(col)
                    vals.append(-1.0)
                elif dest == o:
                    cols.append(col)
                    vals.append(1.0)
        return const, cols, vals

    present_home = np.zeros((len(offices), T))
    for p, person in enumerate(instance.staff):
        present_home[o_ix[person.home_office]] += avail[p] > 0

    def heads_at_home(o: int, t: int) -> tuple[float, list[int], list[float]]:
        """Present people whose home in force at t is o: constant + reassignment columns."""
        cols: list[int] = []
        vals: list[float] = []
        for p in rea_by_p:
            if avail[p, t] > 0:
                _, pc, pv = home_terms(p, o, t)
                cols += pc
                vals += pv
        return float(present_home[o, t]), cols, vals

    # capacity: sum_k w[p,o,k,t] <= avail * (h[p,o,t] - sum_b d[p,o,b,t] + sum_a d[p,a,o,t])
    W = work.keys
    work_by_pot: dict[tuple[int, int, int], list[int]] = defaultdict(list)
    for j in range(len(work)):
        work_by_pot[(int(W["person"][j]), int(W["office"][j]), int(W["period"][j]))].append(
            work.start + j)
    b.begin("capacity")
    for (p, o, t), cols in work_by_pot.items():
        cap = avail[p, t]
        const, hcols, hvals = home_terms(p, o, t)
        row_cols = list(cols) + hcols + det_from.get((p, o, t), []) + det_to.get((p, o, t), [])
        row_vals = ([1.0] * len(cols) + [-cap * v for v in hvals]
                    + [cap] * len(det_from.get((p, o, t), []))
                    + [-cap] * len(det_to.get((p, o, t), [])))
        b.row(row_cols, row_vals, -INF, cap * const,
              f"person {instance.staff[p].person} at {offices[o]} in {instance.periods[t].name}")

    # one_detail: at most one detail per person and period
    b.begin("one_detail")
    for (p, t), cols in det_by_pt.items():
        if len(cols) > 1:
            b.row(cols, [1.0] * len(cols), -INF, 1.0,
                  f"person {instance.staff[p].person} in {instance.periods[t].name}")

    # detail_from_home: a detail leaves from the home in force (only matters if relocatable)
    b.begin("detail_from_home")
    for (p, a, t), cols in det_from.items():
        if not instance.staff[p].can_relocate:
            continue
        const, hcols, hvals = home_terms(p, a, t)
        b.row(cols + hcols, [1.0] * len(cols) + [-v for v in hvals], -INF, const,
              f"person {instance.staff[p].person} from {offices[a]} in "
              f"{instance.periods[t].name}")

    # one_reassignment
    b.begin("one_reassignment")
    for p, entries in rea_by_p.items():
        b.row([c for c, _, _ in entries], [1.0] * len(entries), -INF, 1.0,
              f"person {instance.staff[p].person}")

    # coverage: staff output + hire output + shortfall >= demand
    H = hire.keys
    hire_by_ok: dict[tuple[int, int], list[tuple[int, int]]] = defaultdict(list)
    for j in range(len(hire)):
        hire_by_ok[(int(H["office"][j]), int(H["skill"][j]))].append(
            (hire.start + j, int(H["period"][j])))
    work_by_okt: dict[tuple[int, int, int], list[tuple[int, float]]] = defaultdict(list)
    for j in range(len(work)):
        p, k = int(W["person"][j]), int(W["skill"][j])
        prof = instance.staff[p].proficiency(skills[k])
        work_by_okt[(int(W["office"][j]), k, int(W["period"][j]))].append((work.start + j, prof))
    b.begin("coverage")
    for j, (o, k, t) in enumerate(short_list):
        cols = [c for c, _ in work_by_okt.get((o, k, t), [])]
        vals = [v for _, v in work_by_okt.get((o, k, t), [])]
        for col, s in hire_by_ok.get((o, k), []):
            eff = instance.hire_fte(skills[k], offices[o], s, t)
            if s <= t and eff > 0:
                cols.append(col)
                vals.append(eff)
        cols.append(short.start + j)
        vals.append(1.0)
        b.row(cols, vals, demand_fte[(o, k, t)], INF,
              f"{skills[k]} at {offices[o]} in {instance.periods[t].name}")

    # consecutive_details: in every window of m+1 periods at most m are detail periods
    b.begin("consecutive_details")
    if m is not None and m > 0:
        for p in range(len(instance.staff)):
            for start in range(0, T - m):
                cols = [c for t in range(start, start + m + 1) for c in det_by_pt.get((p, t), [])]
                periods_with = {t for t in range(start, start + m + 1) if det_by_pt.get((p, t))}
                if len(periods_with) > m:
                    b.row(cols, [1.0] * len(cols), -INF, float(m),
                          f"person {instance.staff[p].person} in "
                          f"{instance.periods[start].name}..{instance.periods[start + m].name}")

    # away_share: away from home office a <= share * present heads with home a
    share = instance.policy.max_away_share
    b.begin("away_share")
    if share < 1.0:
        for (a, t), cols in sorted(det_from_office.items()):
            const, hcols, hvals = heads_at_home(a, t)
            b.row(cols + hcols, [1.0] * len(cols) + [-share * v for v in hvals], -INF,
                  share * const, f"{offices[a]} in {instance.periods[t].name}")

    # seats: home people present and not away + detailed in + hires started <= seats
    b.begin("seats")
    for o, office in enumerate(instance.offices):
        if office.seats is None:
            continue
        for t in range(T):
            const, cols, vals = heads_at_home(o, t)
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
    for (o, k), entries in sorted(hire_by_ok.items()):
        cols = [c for c, _ in entries if H["new"][c - hire.start] == 0]
        vac = instance.vacancies.get((offices[o], skills[k]), 0)
        if len(cols) > 1:
            b.row(cols, [1.0] * len(cols), -INF, float(vac), f"{skills[k]} at {offices[o]}")

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
        for j in range(len(rea)):
            if year_of[int(R["period"][j])] == year and rea_cost[j]:
                cols.append(rea.start + j)
                vals.append(rea_cost[j])
        if cols:
            b.row(cols, vals, -INF, budget.moves, f"moves budget {year}")

    model = b.finish()
    model.build_seconds = time.perf_counter() - started
    return model
