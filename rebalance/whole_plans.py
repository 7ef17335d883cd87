"""Relocatable people's whole plans: each one's best plan at given prices, exactly.

In the per-destination formulation (``rebalance.relocation``) relocatable people own most
of a large model (medium: 100 people of 2,000, 68,529 of 104,287 columns, 84,109 of 98,261
rows), and the LP relaxation of their columns is both slow (medium's whole LP: 81-95 s by
interior point; 5.4 s without them) and weak (a fraction of a new home, part of a detail).
Here each of them chooses one whole plan over the horizon instead: a home in force each
period (the original home, then at most one new one, kept), each period at home or on one
detail (at most the consecutive-detail limit in a row), work on the skill the prices value
most, each cost adjustment at the least its rows allow.  At given prices (reduced costs of
the person's columns) the best plan is a shortest path over (home in force, length of the
current detail run), period by period.  What a choice sets, and what its rows then allow
the continuous columns, is read from the model's own rows, and every plan is checked
against them.  Bounds use these as exact pieces: :func:`rebalance.bounds.priced_bound` and
the column generation of :mod:`rebalance.decomposition`.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp

from rebalance.model import Model

__all__ = ["DecompositionError", "RelocatablePerson", "WholePlans", "best_plan",
           "decomposable", "staying_home"]

# Row families a person's own rows may come from: each is kept by the shortest path by
# construction, and every plan it returns is checked against them.  Any other row (a
# person's own row of another family included) is left to the caller, to price or keep.
OWN_FAMILIES = frozenset({
    "capacity", "one_detail", "detail_from_home", "one_reassignment", "home_stays",
    "home_in_force", "one_place", "detail_not_home", "detail_cost_adjustment",
    "detail_cost_floor", "consecutive_details",
})
BLOCKS = ("home", "at_home", "detail", "work", "detail_cost_adjustment")
INF = 1e30
# Each plan is checked against its person's own rows to this (absolute) tolerance.
FEASIBLE = 1e-6


class DecompositionError(RuntimeError):
    """The model's relocatable people do not have the shape the shortest path assumes."""


@dataclass(frozen=True)
class _Adjustment:
    """A continuous column placed by its own rows alone (a cost adjustment): its least and
    greatest value for each placement in its period, from rows of the shape ``coef * x +
    reassign[h] + at_home[h] + detail[b]`` within bounds.  Placements differ only at the
    few homes its rows name (``homes``); every other home reads the row ``other``."""

    col: int
    at_home_low: np.ndarray       # (O,) at home at h (O offices)
    at_home_high: np.ndarray
    homes: np.ndarray             # (H,) homes its rows name
    detail_low: np.ndarray        # (H, O) from one of those homes on detail to b
    detail_high: np.ndarray
    other_low: np.ndarray         # (O,) from any other home on detail to b
    other_high: np.ndarray

    def values(self, reduced_cost: float) -> tuple[np.ndarray, np.ndarray]:
        """Its value at home (per h) and on detail (per h, b) where it pays least."""
        pick_low = reduced_cost >= 0
        at_home = self.at_home_low if pick_low else self.at_home_high
        other = self.other_low if pick_low else self.other_high
        detail = np.repeat(other[None, :], at_home.size, axis=0)
        detail[self.homes] = self.detail_low if pick_low else self.detail_high
        return at_home, detail


@dataclass(frozen=True)
class _Placement:
    """One period's placement columns of a person, per office (-1: none), and each
    column's kind (0 home in force, 1 at home, 2 on detail) and office."""

    reassign: np.ndarray
    at_home: np.ndarray
    detail: np.ndarray
    home: int
    index: dict[int, tuple[int, int]]

    @staticmethod
    def of(reassign: np.ndarray, at_home: np.ndarray, detail: np.ndarray,
           home: int) -> _Placement:
        index: dict[int, tuple[int, int]] = {}
        for kind, grid in enumerate((reassign, at_home, detail)):
            for place in np.flatnonzero(grid >= 0).tolist():
                index[int(grid[place])] = (kind, place)
        return _Placement(reassign, at_home, detail, home, index)


@dataclass(frozen=True)
class RelocatablePerson:
    """The columns of one decomposed person, per present period and office (P present
    periods, O offices)."""

    unit: int
    home: int
    periods: np.ndarray            # present periods, in order
    reassign: np.ndarray           # (P, O) home-in-force column per office; -1 none
    at_home: np.ndarray            # (P, O)
    detail: np.ndarray             # (P, O) detail to that office; -1 none
    work: np.ndarray               # (P, O, K) work columns; -1 padding
    capacity_home: np.ndarray      # (P, O, O) [i, o, h]: FTE of work at o, at home at h
    capacity_detail: np.ndarray    # (P, O, O) [i, o, b]: the same, on detail to b
    adjust: tuple[tuple[_Adjustment, ...], ...]   # per period, its cost adjustments
    max_run: int
    columns: np.ndarray            # every column of the person, sorted
    own_rows: sp.csr_matrix        # own rows over ``columns``
    own_lower: np.ndarray
    own_upper: np.ndarray


class WholePlans:
    """The decomposed people of a model: their columns and own rows, and their least
    reduced cost over whole plans at given prices (exact pieces of a Lagrangian bound,
    :func:`rebalance.bounds.priced_bound`).  Raises :class:`DecompositionError` where their
    columns or rows are not of the shape the shortest path assumes."""

    def __init__(self, model: Model) -> None:
        self.people, self.own_rows = _people(model)
        self.columns = np.zeros(model.num_cols, bool)
        for p in self.people:
            self.columns[p.columns] = True

    def least(self, reduced: np.ndarray) -> tuple[float, float] | None:
        """The least total reduced cost of every person's plan, and the size of its terms;
        None where a shortest-path plan fails its check."""
        total = size = 0.0
        try:
            for p in self.people:
                value, _ = best_plan(p, reduced)
                total += value
                size += abs(value)
        except DecompositionError:
            return None
        return total, size


def decomposable(model: Model) -> bool:
    """Whether ``model`` has relocatable people (home-in-force columns) whose details, if
    any, name only their destination (the per-destination formulation)."""
    if "home" not in model.blocks or not len(model.blocks["home"]):
        return False
    detail = model.blocks.get("detail")
    if detail is None:
        return True
    movers = np.isin(detail.keys["unit"], np.unique(model.blocks["home"].keys["unit"]))
    return not np.any(detail.keys["home"][movers] >= 0)


# --------------------------------------------------------------------------------------------
# the people and their rows


def _people(model: Model) -> tuple[list[RelocatablePerson], np.ndarray]:
    """The decomposed people of ``model`` and, per row, whether it is one person's own."""
    unit = model.key_of_columns("unit")
    units = np.unique(model.blocks["home"].keys["unit"])
    decomposed = np.zeros(model.num_cols, bool)
    for name in BLOCKS:
        if name in model.blocks:
            block = model.blocks[name]
            decomposed[block.start:block.stop] = np.isin(block.keys["unit"], units)
    owner = np.where(decomposed, unit, -1)
    coo = model.matrix.tocoo()
    low = np.full(model.num_rows, np.iinfo(np.int64).max)
    high = np.full(model.num_rows, -1)
    np.minimum.at(low, coo.row, owner[coo.col])
    np.maximum.at(high, coo.row, owner[coo.col])
    in_family = np.zeros(model.num_rows, bool)
    for family in model.rows:
        if family.name in OWN_FAMILIES:
            in_family[family.start:family.stop] = True
    own = in_family & (low == high) & (low >= 0)
    row_owner = np.where(own, low, -1)
    csr, csc = model.matrix.tocsr(), model.matrix.tocsc()
    num_offices = 1 + int(max(int(b.keys["office"].max(initial=-1))
                              for b in model.blocks.values() if "office" in b.keys))
    num_offices = max(num_offices, 1 + int(model.unit_home.max(initial=-1)))
    order = np.argsort(owner, kind="stable")
    starts = np.searchsorted(owner[order], units)
    stops = np.searchsorted(owner[order], units, side="right")
    row_order = np.argsort(row_owner, kind="stable")
    row_starts = np.searchsorted(row_owner[row_order], units)
    row_stops = np.searchsorted(row_owner[row_order], units, side="right")
    people = []
    for i, u in enumerate(units):
        columns = np.sort(order[starts[i]:stops[i]])
        rows = np.sort(row_order[row_starts[i]:row_stops[i]])
        people.append(_person(model, csr, csc, own, int(u), columns, rows, num_offices))
    return people, own


def _person(model: Model, csr: sp.csr_matrix, csc: sp.csc_matrix, own: np.ndarray, u: int,
            columns: np.ndarray, rows: np.ndarray, num_offices: int) -> RelocatablePerson:
    """Unit ``u`` (its ``columns`` and own ``rows``) read into per-period grids."""
    blocks = model.blocks
    keys: dict[str, dict[str, np.ndarray]] = {}
    for name in BLOCKS:
        if name not in blocks:
            keys[name] = {"col": np.zeros(0, int)}
            continue
        block = blocks[name]
        mine = columns[(columns >= block.start) & (columns < block.stop)]
        keys[name] = {k: v[mine - block.start] for k, v in block.keys.items()}
        keys[name]["col"] = mine
    periods = np.unique(np.concatenate([keys[name]["period"] for name in
                                        ("home", "at_home", "detail", "work")
                                        if keys[name]["col"].size]))
    where = {int(t): i for i, t in enumerate(periods)}
    n_periods, n_offices = periods.size, num_offices

    def grid(name: str) -> np.ndarray:
        g = np.full((n_periods, n_offices), -1)
        k = keys[name]
        if k["col"].size:
            if name == "detail" and np.any(k["home"] >= 0):
                raise DecompositionError("a relocatable person's details name their home")
            g[[where[int(t)] for t in k["period"]], k["office"]] = k["col"]
        return g

    reassign, at, detail = grid("home"), grid("at_home"), grid("detail")
    home = int(model.unit_home[u])
    # At-home columns come with details: a period has one per office, or none (the person is
    # then at the home in force, placed by the home columns alone, and has no detail).
    placed_by_home = (at < 0).all(axis=1)
    if ((at < 0).any(axis=1) & ~placed_by_home).any() or (detail[placed_by_home] >= 0).any():
        raise DecompositionError(f"unit {u}: at-home columns of an unexpected shape")
    work_k = keys["work"]
    width = 1
    if work_k["col"].size:
        _, counts = np.unique(np.stack([work_k["period"], work_k["office"]]), axis=1,
                              return_counts=True)
        width = int(counts.max())
    work = np.full((n_periods, n_offices, width), -1)
    fill = np.zeros((n_periods, n_offices), int)
    for col, o, t in zip(work_k["col"], work_k["office"], work_k["period"], strict=True):
        i = where[int(t)]
        work[i, o, fill[i, o]] = col
        fill[i, o] += 1
    placements = [_Placement.of(reassign[i], at[i], detail[i], home)
                  for i in range(n_periods)]
    capacity_home = np.zeros((n_periods, n_offices, n_offices))
    capacity_detail = np.zeros((n_periods, n_offices, n_offices))
    for i in range(n_periods):
        for o in range(n_offices):
            cols = work[i, o][work[i, o] >= 0]
            if cols.size:
                capacity_home[i, o], capacity_detail[i, o] = _capacity(
                    model, csr, csc, own, cols, placements[i])
    adjust: list[list[_Adjustment]] = [[] for _ in range(n_periods)]
    e = keys["detail_cost_adjustment"]
    for col, t in zip(e["col"], e.get("period", np.zeros(0, int)), strict=True):
        i = where[int(t)]
        adjust[i].append(_adjustment(model, csr, csc, own, int(col), placements[i]))
    max_run = n_periods
    consecutive = next((f for f in model.rows if f.name == "consecutive_details"), None)
    if consecutive is not None:
        mine = rows[(rows >= consecutive.start) & (rows < consecutive.stop)]
        if mine.size:
            max_run = int(np.floor(model.row_upper[mine].min() + 1e-9))
    own = csr[rows][:, columns].tocsr()
    return RelocatablePerson(u, home, periods, reassign, at, detail, work, capacity_home,
                             capacity_detail, tuple(tuple(a) for a in adjust), max_run,
                             columns, own, model.row_lower[rows], model.row_upper[rows])


def _capacity(model: Model, csr: sp.csr_matrix, csc: sp.csc_matrix, own: np.ndarray,
              cols: np.ndarray, placement: _Placement) -> tuple[np.ndarray, np.ndarray]:
    """FTE the capacity row of work columns ``cols`` (one office and period) allows, at home
    at each office and on detail to each office, from a row of the shape ``sum work +
    reassign[h] + at_home[h] + detail[b] <= capacity``."""
    rows = np.unique(np.concatenate([_own_rows_of(csc, own, int(c)) for c in cols]))
    if rows.size != 1 or any(_own_rows_of(csc, own, int(c)).size != 1 for c in cols):
        raise DecompositionError(f"work columns {cols.tolist()}: not in one capacity row")
    r = int(rows[0])
    reassigned, at_home, away, unit_coef = _placement_terms(csr, r, placement,
                                                           set(cols.tolist()))
    if np.any(unit_coef != 1.0) or np.isfinite(model.row_lower[r]):
        raise DecompositionError(f"work columns {cols.tolist()}: capacity row of another shape")
    if (placement.detail >= 0).any() and np.any(reassigned != 0):
        raise DecompositionError(f"work columns {cols.tolist()}: capacity from home columns "
                                 "in a period with details")
    upper = model.row_upper[r]
    capacity_home, capacity_detail = upper - reassigned - at_home, upper - away
    if max(capacity_home.max(), capacity_detail.max()) > model.col_upper[cols].min() + 1e-12:
        raise DecompositionError(f"work columns {cols.tolist()}: bounded below their capacity")
    return capacity_home, capacity_detail


def _placement_terms(csr: sp.csr_matrix, r: int, placement: _Placement,
                     own_cols: set[int]) -> tuple[np.ndarray, np.ndarray, np.ndarray,
                                                  np.ndarray]:
    """Row ``r`` read as coefficients per office on one period's home-in-force (0 at the
    original home, where no column is set), at-home and detail columns, and on
    ``own_cols``; raises where it has any other column."""
    index = placement.index
    parts = np.zeros((3, placement.reassign.size))
    coef: list[float] = []
    for c, v in zip(csr.indices[csr.indptr[r]:csr.indptr[r + 1]],
                    csr.data[csr.indptr[r]:csr.indptr[r + 1]], strict=True):
        if int(c) in own_cols:
            coef.append(float(v))
        elif int(c) in index:
            kind, place = index[int(c)]
            parts[kind, place] = v
        else:
            raise DecompositionError(f"row {r} reaches beyond one period's placement")
    parts[0, placement.home] = 0.0
    return parts[0], parts[1], parts[2], np.asarray(coef, float)


def _own_rows_of(csc: sp.csc_matrix, own: np.ndarray, col: int) -> np.ndarray:
    rows = csc.indices[csc.indptr[col]:csc.indptr[col + 1]]
    return rows[own[rows]]


def _adjustment(model: Model, csr: sp.csr_matrix, csc: sp.csc_matrix, own: np.ndarray,
                col: int, placement: _Placement) -> _Adjustment:
    """Continuous column ``col`` with its own rows read in terms of one period's placement
    columns (home in force, at home, on detail)."""
    rows = _own_rows_of(csc, own, col)
    n_offices = placement.reassign.size
    reassigned, at_home, away = (np.zeros((rows.size, n_offices)) for _ in range(3))
    coef = np.zeros(rows.size)
    for i, r in enumerate(rows):
        reassigned[i], at_home[i], away[i], own_coef = _placement_terms(
            csr, int(r), placement, {col})
        coef[i] = own_coef[0]
    low_row, high_row = model.row_lower[rows], model.row_upper[rows]
    bounds = float(model.col_lower[col]), float(model.col_upper[col])

    def interval(others: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Least and greatest value given the rows' other terms (rows x options)."""
        c = coef[:, None]
        room_low, room_high = low_row[:, None] - others, high_row[:, None] - others
        with np.errstate(invalid="ignore", divide="ignore"):
            least = np.where(c > 0, room_low / c, room_high / c)
            most = np.where(c > 0, room_high / c, room_low / c)
        least = np.where(np.isnan(least), -np.inf, least).max(axis=0, initial=-np.inf)
        most = np.where(np.isnan(most), np.inf, most).min(axis=0, initial=np.inf)
        return np.maximum(least, bounds[0]), np.minimum(most, bounds[1])

    homes = np.flatnonzero(np.any(reassigned != 0, axis=0) | np.any(at_home != 0, axis=0))
    named = (reassigned[:, homes, None] + away[:, None, :]).reshape(rows.size, -1)
    # One call for the three kinds of option: on agency this is called 50k times, and small
    # numpy calls cost more than their arithmetic.
    low, high = interval(np.hstack([reassigned + at_home, named, away]))
    cut = np.cumsum([n_offices, named.shape[1]])
    at_low, det_low, other_low = np.split(low, cut)
    at_high, det_high, other_high = np.split(high, cut)
    return _Adjustment(col, at_low, at_high, homes, det_low.reshape(homes.size, n_offices),
                       det_high.reshape(homes.size, n_offices), other_low, other_high)


# --------------------------------------------------------------------------------------------
# one person's best plan


def staying_home(p: RelocatablePerson) -> np.ndarray:
    """The plan that moves nobody and does no work (every adjustment at 0, as its rows
    allow at the original home): it keeps the person's own rows."""
    x = np.zeros(p.columns.size)
    at_home = p.at_home[:, p.home]
    x[np.searchsorted(p.columns, at_home[at_home >= 0])] = 1.0
    _check(p, x)
    return x


def _check(p: RelocatablePerson, plan: np.ndarray) -> None:
    """Raise unless ``plan`` (over ``p.columns``) keeps every own row of ``p``."""
    activity = p.own_rows @ plan
    if np.any(activity < p.own_lower - FEASIBLE) or np.any(activity > p.own_upper + FEASIBLE):
        raise DecompositionError(f"unit {p.unit}: a whole plan breaks its own rows")


def best_plan(p: RelocatablePerson, reduced: np.ndarray) -> tuple[float, np.ndarray]:
    """The least reduced cost over ``p``'s whole plans, and that plan over ``p.columns``."""
    n_periods, n_offices = p.at_home.shape
    home = p.home
    S = p.max_run + 1
    offices = np.arange(n_offices)
    cost_home = np.empty((n_periods, n_offices))
    cost_detail = np.empty((n_periods, n_offices, n_offices))
    work_choice = np.full((n_periods, n_offices), -1)
    adjust_values: list[list[tuple[np.ndarray, np.ndarray]]] = []
    for i in range(n_periods):
        moved = np.where(p.reassign[i] >= 0, reduced[p.reassign[i]], INF)
        moved[home] = 0.0
        at = np.where(p.at_home[i] >= 0, reduced[p.at_home[i]],
                      0.0 if (p.at_home[i] < 0).all() else INF)
        away = np.where(p.detail[i] >= 0, reduced[p.detail[i]], INF)
        work = np.where(p.work[i] >= 0, reduced[p.work[i]], INF)
        best_k = work.argmin(axis=1)
        best_work = work[offices, best_k]
        paid = best_work < 0
        best_work = np.where(paid, best_work, 0.0)
        work_choice[i] = np.where(paid, p.work[i][offices, best_k], -1)
        cost_home[i] = moved + at + best_work @ p.capacity_home[i]
        cost_detail[i] = moved[:, None] + (away + best_work @ p.capacity_detail[i])[None, :]
        values = []
        for adjustment in p.adjust[i]:
            r = float(reduced[adjustment.col])
            v_h, v_d = adjustment.values(r)
            cost_home[i] += r * v_h
            cost_detail[i] += r * v_d
            values.append((v_h, v_d))
        adjust_values.append(values)
        cost_detail[i][offices, offices] = INF  # never on detail to the home in force
    cost_home = np.minimum(cost_home, INF)
    cost_detail = np.minimum(cost_detail, INF)
    # Shortest path over (home in force, current detail run) period by period.
    value = np.full((n_offices, S), INF)
    value[home, 0] = 0.0
    # Per period and state: the home in force and detail run the period before, and where
    # the person is (the home in force, or the detail's destination).
    back_source = np.zeros((n_periods, n_offices, S), int)
    back_run = np.zeros((n_periods, n_offices, S), int)
    back_place = np.zeros((n_periods, n_offices, S), int)
    not_home = offices != home
    for i in range(n_periods):
        # A home in force comes from itself, or from the original home (reassigned now).
        from_home = np.where(not_home[:, None], value[home][None, :], INF)
        came = np.minimum(value, from_home)
        source = np.where(value <= from_home, offices[:, None], home)
        best_run = came.argmin(axis=1)
        new = np.full((n_offices, S), INF)
        new[:, 0] = came[offices, best_run] + cost_home[i]
        back_source[i, :, 0] = source[offices, best_run]
        back_run[i, :, 0] = best_run
        back_place[i, :, 0] = offices
        destination = cost_detail[i].argmin(axis=1)
        detail_cost = cost_detail[i][offices, destination]
        if S > 1:
            new[:, 1:] = came[:, :-1] + detail_cost[:, None]
            back_source[i, :, 1:] = source[:, :-1]
            back_run[i, :, 1:] = np.arange(S - 1)[None, :]
            back_place[i, :, 1:] = destination[:, None]
        value = np.minimum(new, INF)
    end = np.unravel_index(int(value.argmin()), value.shape)
    h, run = int(end[0]), int(end[1])
    total = float(value[h, run])
    if total >= INF / 2:
        raise DecompositionError(f"unit {p.unit} has no plan")
    x: dict[int, float] = {}
    for i in range(n_periods - 1, -1, -1):
        place = int(back_place[i, h, run])
        if h != home:
            x[int(p.reassign[i, h])] = 1.0
        if place != h:
            x[int(p.detail[i, place])] = 1.0
        elif p.at_home[i, h] >= 0:
            x[int(p.at_home[i, h])] = 1.0
        capacity = p.capacity_home[i, :, h] if place == h else p.capacity_detail[i, :, place]
        for o in np.flatnonzero((work_choice[i] >= 0) & (capacity > 0)):
            x[int(work_choice[i, o])] = float(capacity[o])
        for adjustment, (v_h, v_d) in zip(p.adjust[i], adjust_values[i], strict=True):
            x[adjustment.col] = float(v_h[h] if place == h else v_d[h, place])
        h, run = int(back_source[i, h, run]), int(back_run[i, h, run])
    plan = np.zeros(p.columns.size)
    plan[np.searchsorted(p.columns, list(x))] = list(x.values())
    _check(p, plan)
    exact = float(reduced[p.columns] @ plan)
    if abs(exact - total) > 1e-6 * (1.0 + abs(total)):
        raise DecompositionError(f"unit {p.unit}: path value {total} against plan {exact}")
    return exact, plan
