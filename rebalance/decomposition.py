"""A bound from relocatable people's whole plans (Dantzig-Wolfe decomposition).

Column generation over the whole plans of :mod:`rebalance.whole_plans`: a master LP keeps
every other column as it is, the rows that tie people, groups and hires together, and for
each relocatable person a convex combination of the plans found so far.  Its prices find
each person's best plan, which joins the master if it pays.  At every round the same prices
give a bound by weak duality, each person's piece solved exactly over whole plans (as
:mod:`rebalance.bounds` does over boxes); once no plan pays, the bound is the master's
value, at least the LP relaxation's, and rounds of cuts (:mod:`rebalance.cuts`) may lift
it further.  Measured on medium (stage 1): 1,557.8 in 20 s, 1,575.7 with cuts in 85 s,
against the whole LP's 1,546.5 in 81-95 s.
"""

from __future__ import annotations

import time
from collections.abc import Callable
from typing import Any

import numpy as np
import scipy.sparse as sp

from rebalance.backends import row_scale, silent_highs
from rebalance.bounds import ROUNDING_SLACK, priced_terms, signed_prices, with_extra_rows
from rebalance.cuts import Cut, coverage_cuts
from rebalance.model import Model
from rebalance.whole_plans import WholePlans, best_plan, staying_home

__all__ = ["plan_bound"]

# A plan joins the master when its reduced cost is below minus this, relative to the
# master's value (below it, prices rounded by the solver keep finding plans that pay
# nothing: 600 rounds on medium without a better bound).
PAYS = 1e-7
# The price per unit of a row giving way in the master (times the objective's largest
# coefficient), while its plans cannot keep it.
ELASTIC_PRICE = 1e4
# Master LPs above this many columns start by interior point (with crossover: later rounds
# start simplex from its basis), unless they hold an objective: on medium the shortfall
# stage's first master took 6.5 s that way and 22.7 s by dual simplex, the cost stage's
# (shortfall held) 6.3 s and 3.9 s.
IPM_COLUMNS = 30_000


def plan_bound(model: Model, objective: np.ndarray,
               extra_rows: list[tuple[np.ndarray, float]], deadline: float,
               on_bound: Callable[[float], None] | None = None,
               cut_rounds: int = 0) -> tuple[float | None, int]:
    """The best bound column generation reaches by ``deadline``, and its number of rounds.

    Once no plan pays, up to ``cut_rounds`` times, mixed-integer rounding cuts of the
    coverage rows (:mod:`rebalance.cuts`) that the master's point breaks join the master
    and column generation goes on.  ``on_bound`` hears each higher bound as it is found (a
    run stopped from outside keeps the last one).  Returns ``(None, 0)`` where the master
    LP has no optimum in the time.  Raises
    :class:`~rebalance.whole_plans.DecompositionError` where a person's columns or rows are
    not of the shape the shortest path assumes.
    """
    whole = with_extra_rows(model, extra_rows)
    master = _Master(whole, objective, WholePlans(whole), interior_first=not extra_rows)
    best: float | None = None
    rounds = 0
    while True:
        left = deadline - time.perf_counter()
        if left <= 0 or not master.solve(left):
            break
        rounds += 1
        bound, paying = master.price()
        if best is None or bound > best:
            best = bound
            if on_bound is not None:
                on_bound(bound)
        if paying:
            master.add_plans(paying)
        elif (cut_rounds <= 0 or deadline - time.perf_counter() < MIN_CUT_SECONDS
              or not master.add_cuts(coverage_cuts(whole, master.point(), MAX_CUTS))):
            break
        else:
            cut_rounds -= 1
    return best, rounds


# Cuts added to the master per round, the most violated first (medium: about 660 are
# violated at first; each one slows the master's next solve).
MAX_CUTS = 300
# No round of cuts with less time left than this (medium: 1.3 s to find them, and the
# master's next solve).
MIN_CUT_SECONDS = 3.0


class _Master:
    """The master LP of the column generation: every column outside the decomposed people
    as it is, a convex combination of plans per person, the rows that tie them, and cuts.

    Rows are the model's rows other than the people's own (scaled as the backends scale
    them), one convexity row per person, then the cuts.
    """

    def __init__(self, model: Model, objective: np.ndarray, plans: WholePlans,
                 interior_first: bool) -> None:
        import highspy

        self.model, self.objective, self.people = model, objective, plans.people
        self.explicit = np.flatnonzero(~plans.columns)
        self.rows = np.flatnonzero(~plans.own_rows)
        self.matrix = model.matrix[self.rows].tocsc()
        self.lower, self.upper = model.row_lower[self.rows], model.row_upper[self.rows]
        self.factor = row_scale(self.matrix.tocsr())
        scaled = sp.diags(self.factor) @ self.matrix
        self.per_person = [scaled[:, p.columns] for p in self.people]
        self.cuts = sp.csr_matrix((0, model.num_cols))
        self.cut_upper = np.zeros(0)
        self.cut_factor = np.zeros(0)
        self.plans: list[tuple[int, int, np.ndarray]] = []  # (column, person, plan)
        self.seen: list[set[bytes]] = [set() for _ in self.people]
        self.scale = 1.0 + float(np.abs(objective).max(initial=0.0))
        self.elastic = False
        n = len(self.people)
        h = silent_highs()
        lp = highspy.HighsLp()
        first = sp.vstack([scaled[:, self.explicit],
                           sp.csc_matrix((n, self.explicit.size))]).tocsc()
        lp.num_col_, lp.num_row_ = self.explicit.size, self.rows.size + n
        lp.col_cost_ = objective[self.explicit].astype(float)
        lp.col_lower_ = model.col_lower[self.explicit]
        lp.col_upper_ = model.col_upper[self.explicit]
        lp.row_lower_ = np.concatenate([self.lower * self.factor, np.ones(n)])
        lp.row_upper_ = np.concatenate([self.upper * self.factor, np.ones(n)])
        lp.a_matrix_.format_ = highspy.MatrixFormat.kColwise
        lp.a_matrix_.start_ = first.indptr.astype(np.int32)
        lp.a_matrix_.index_ = first.indices.astype(np.int32)
        lp.a_matrix_.value_ = first.data
        h.passModel(lp)
        if interior_first and self.explicit.size + n > IPM_COLUMNS:
            h.setOptionValue("solver", "ipm")
        self.h = h
        self.add_plans([(i, staying_home(p)) for i, p in enumerate(self.people)])

    def solve(self, time_limit: float) -> bool:
        """Solve the master within ``time_limit``; whether it has an optimum."""
        import highspy

        status = highspy.HighsModelStatus
        # HiGHS measures its time limit on a clock that runs on across runs.
        self.h.setOptionValue("time_limit", self.h.getRunTime() + time_limit)
        self.h.run()
        self.h.setOptionValue("solver", "simplex")  # later runs start from this basis
        if self.h.getModelStatus() == status.kInfeasible and not self.elastic:
            # The plans so far cannot keep some row (seats the first plans overfill): let
            # every row give at a high price until plans that keep it come in.  The prices
            # still bound the model itself (weak duality reads only its own columns).
            self.elastic = True
            _add_elastic(self.h, self.lower * self.factor, self.upper * self.factor,
                         ELASTIC_PRICE * self.scale)
            self.h.setOptionValue("time_limit", self.h.getRunTime() + time_limit)
            self.h.run()
        return bool(self.h.getModelStatus() == status.kOptimal)

    def price(self) -> tuple[float, list[tuple[int, np.ndarray]]]:
        """The bound of the master's prices, and each person's best plan where it pays."""
        dual = np.asarray(self.h.getSolution().row_dual)
        n_rows, n = self.rows.size, len(self.people)
        prices = signed_prices(self.lower, self.upper, dual[:n_rows] * self.factor)
        convexity = dual[n_rows:n_rows + n]
        cut_prices = signed_prices(np.full(self.cut_upper.size, -np.inf), self.cut_upper,
                             dual[n_rows + n:] * self.cut_factor)
        reduced = self.objective - self.matrix.T @ prices - self.cuts.T @ cut_prices
        row_total, col_terms, size = priced_terms(
            np.concatenate([self.lower, np.full(cut_prices.size, -np.inf)]),
            np.concatenate([self.upper, self.cut_upper]), np.concatenate([prices, cut_prices]),
            reduced[self.explicit], self.model.col_lower[self.explicit],
            self.model.col_upper[self.explicit])
        total = row_total + float(col_terms.sum())
        enough = PAYS * (1.0 + abs(self.h.getInfo().objective_function_value))
        paying = []
        for i, p in enumerate(self.people):
            value, x = best_plan(p, reduced)
            total += value
            size += abs(value)
            if value - convexity[i] < -enough and x.tobytes() not in self.seen[i]:
                paying.append((i, x))
        return total - ROUNDING_SLACK * size, paying

    def add_plans(self, plans: list[tuple[int, np.ndarray]]) -> None:
        """Columns for ``plans`` (person, plan over the person's columns)."""
        import highspy

        n_rows, n = self.rows.size, len(self.people)
        costs, starts, index, values = [], [0], [], []
        first = self.h.getNumCol()
        for k, (i, x) in enumerate(plans):
            column = self.per_person[i] @ x
            nonzero = np.flatnonzero(np.abs(column) > 1e-12)
            cut_column = (self.cuts[:, self.people[i].columns] @ x) * self.cut_factor
            cut_rows = np.flatnonzero(np.abs(cut_column) > 1e-12)
            index += [*nonzero.tolist(), n_rows + i, *(n_rows + n + cut_rows).tolist()]
            values += [*column[nonzero].tolist(), 1.0, *cut_column[cut_rows].tolist()]
            starts.append(len(index))
            costs.append(float(self.objective[self.people[i].columns] @ x))
            self.plans.append((first + k, i, x))
            self.seen[i].add(x.tobytes())
        count = len(plans)
        self.h.addCols(count, np.asarray(costs), np.zeros(count),
                       np.full(count, highspy.kHighsInf), len(index),
                       np.asarray(starts[:-1], np.int32), np.asarray(index, np.int32),
                       np.asarray(values, float))

    def point(self) -> np.ndarray:
        """The master's solution in the model's own columns."""
        solution = np.asarray(self.h.getSolution().col_value)
        x = np.zeros(self.model.num_cols)
        x[self.explicit] = solution[:self.explicit.size]
        for column, i, plan in self.plans:
            x[self.people[i].columns] += solution[column] * plan
        return x

    def add_cuts(self, cuts: list[Cut]) -> bool:
        """Rows for ``cuts`` over every column so far; whether there were any."""
        if not cuts:
            return False
        import highspy

        rows = sp.csr_matrix(
            (np.concatenate([c.coefficients for c in cuts]),
             (np.repeat(np.arange(len(cuts)), [c.columns.size for c in cuts]),
              np.concatenate([c.columns for c in cuts]))), shape=(len(cuts), self.model.num_cols))
        upper = np.asarray([c.upper for c in cuts])
        factor = row_scale(rows)
        # The cuts over the master's columns: the explicit ones first, each plan at its
        # own column (elastic columns, if any, are in no cut).
        explicit = rows[:, self.explicit].tocoo()
        r, c, v = [explicit.row], [explicit.col], [explicit.data]
        for column, i, plan in self.plans:
            values = rows[:, self.people[i].columns] @ plan
            nonzero = np.flatnonzero(values)
            r.append(nonzero)
            c.append(np.full(nonzero.size, column))
            v.append(values[nonzero])
        block = sp.csr_matrix((np.concatenate(v), (np.concatenate(r), np.concatenate(c))),
                              shape=(len(cuts), self.h.getNumCol()))
        block = (sp.diags(factor) @ block).tocsr()
        self.h.addRows(len(cuts), np.full(len(cuts), -highspy.kHighsInf), upper * factor,
                       block.nnz, block.indptr[:-1].astype(np.int32),
                       block.indices.astype(np.int32), block.data)
        self.cuts = sp.vstack([self.cuts, rows], format="csr")
        self.cut_upper = np.concatenate([self.cut_upper, upper])
        self.cut_factor = np.concatenate([self.cut_factor, factor])
        return True


def _add_elastic(h: Any, lower: np.ndarray, upper: np.ndarray, price: float) -> None:
    """A column per finite row side of the master's first rows, at ``price`` a unit, that
    lets the row give."""
    sides = [(i, 1.0) for i in np.flatnonzero(np.isfinite(lower))]
    sides += [(i, -1.0) for i in np.flatnonzero(np.isfinite(upper))]
    n = len(sides)
    h.addCols(n, np.full(n, price), np.zeros(n), np.full(n, np.inf), n,
              np.arange(n, dtype=np.int32), np.asarray([i for i, _ in sides], np.int32),
              np.asarray([v for _, v in sides], float))
