"""Lower bounds from row prices, for models whose LP relaxation takes too long.

Weak duality gives a bound from *any* prices on the rows, not only optimal ones: for prices
``y`` (each kept only with the sign its row's finite bound allows),

    objective @ x  >=  sum_i y_i b_i(y)  +  sum_j min over [lower_j, upper_j] of r_j x_j,
    r = objective - A' y,  b_i(y) = row_lower_i if y_i > 0, row_upper_i if y_i < 0,

for every x in the column box whose rows hold, whole numbers or not.  The right side is
plain arithmetic: no solver tolerance can make it claim too much.

Good prices come cheaply in two steps.  An LP with some decisions held (the rounding
heuristic's, :mod:`rebalance.rounding`) prices the rows that tie people, hires and offices
together (coverage, away share, seats, budgets).  Those prices are kept, and every other row
is priced again by the LP without the tying rows: it falls apart into one small LP per
person or group and one for the hires, and solves in seconds where the whole LP relaxation
takes minutes (medium: 1,492 in 2 s, against the whole LP's 1,547 in 81 s; agency: 6,080 in
19 s, where the whole LP had not finished after 520 s).
"""

from __future__ import annotations

import itertools
import time
from dataclasses import replace
from typing import Protocol

import numpy as np
import scipy.sparse as sp
from scipy.sparse.csgraph import connected_components

from rebalance.backends import Backend, SolveOptions, stacked_rows
from rebalance.model import Model, RowFamily
from rebalance.split import solve_relaxation

__all__ = ["LINKING_FAMILIES", "ExactPieces", "dual_bound", "priced_bound", "priced_terms",
           "signed_prices", "with_extra_rows"]

# Rows that tie different people, groups and hires together; all others belong to one of
# them (a unit's capacity, detail and home rows; the hires' vacancy and hiring-rate rows).
LINKING_FAMILIES = ("coverage", "away_share", "away_share_in_whole_people", "seats",
                    "hiring_budget", "moves_budget", "extra")
# Floating-point slack taken off the bound, relative to the size of its terms.
ROUNDING_SLACK = 1e-9


def dual_bound(model: Model, objective: np.ndarray, prices: np.ndarray) -> float:
    """The weak-duality bound of ``prices`` (one per row of ``model``) on ``objective``.

    Returns ``-inf`` when a column with a price-adjusted cost of the wrong sign has no
    finite bound on that side.
    """
    y = _signed(model, prices)
    reduced = objective - model.matrix.T @ y
    row_total, col_terms, size = priced_terms(model.row_lower, model.row_upper, y, reduced,
                                              model.col_lower, model.col_upper)
    return row_total + float(col_terms.sum()) - ROUNDING_SLACK * size


def priced_terms(row_lower: np.ndarray, row_upper: np.ndarray, prices: np.ndarray,
                 reduced: np.ndarray, col_lower: np.ndarray,
                 col_upper: np.ndarray) -> tuple[float, np.ndarray, float]:
    """The parts of a weak-duality bound: the rows' total at ``prices`` (signed as their
    bounds allow), each column's least ``reduced`` cost over its box, and the size of all
    terms (for the rounding slack).  ``-inf`` where a box is open on the paying side."""
    y = prices
    row_terms = np.zeros(y.size)
    up, down = y > 0, y < 0
    row_terms[up] = y[up] * row_lower[up]
    row_terms[down] = y[down] * row_upper[down]
    col_terms = np.zeros(reduced.size)
    rising, falling = reduced > 0, reduced < 0
    col_terms[rising] = reduced[rising] * col_lower[rising]
    col_terms[falling] = reduced[falling] * col_upper[falling]
    if not (np.all(np.isfinite(col_terms)) and np.all(np.isfinite(row_terms))):
        return -np.inf, col_terms, 0.0
    size = float(np.abs(row_terms).sum() + np.abs(col_terms).sum())
    return float(row_terms.sum()), col_terms, size


def _signed(model: Model, prices: np.ndarray) -> np.ndarray:
    return signed_prices(model.row_lower, model.row_upper, prices)


def signed_prices(row_lower: np.ndarray, row_upper: np.ndarray,
                  prices: np.ndarray) -> np.ndarray:
    """``prices`` with each set to 0 where its sign would price a row side with no bound."""
    y = np.asarray(prices, float).copy()
    y[(y > 0) & ~np.isfinite(row_lower)] = 0.0
    y[(y < 0) & ~np.isfinite(row_upper)] = 0.0
    return y


def linking_rows(model: Model) -> np.ndarray:
    """Per row: whether it belongs to a :data:`LINKING_FAMILIES` family."""
    linking = np.zeros(model.num_rows, bool)
    for family in model.rows:
        if family.name in LINKING_FAMILIES:
            linking[family.start:family.stop] = True
    return linking


def with_extra_rows(model: Model, extra_rows: list[tuple[np.ndarray, float]]) -> Model:
    """``model`` with ``extra_rows`` (row, upper bound) appended as the family ``extra``: a
    stage's held objective, which ties everything together."""
    if not extra_rows:
        return model
    matrix, row_lower, row_upper = stacked_rows(model, extra_rows)
    extra = RowFamily("extra", model.num_rows, matrix.shape[0],
                      ("held objective",) * len(extra_rows))
    return replace(model, matrix=matrix, row_lower=row_lower, row_upper=row_upper,
                   rows=(*model.rows, extra))


class ExactPieces(Protocol):
    """Pieces of a model whose least cost at any prices is known exactly (the whole plans
    of relocatable people, :class:`~rebalance.decomposition.WholePlans`)."""

    columns: np.ndarray   # per column of the model: whether a piece owns it
    own_rows: np.ndarray  # per row: whether the pieces keep it themselves

    def least(self, reduced: np.ndarray) -> tuple[float, float] | None:
        """The pieces' least total of ``reduced`` costs, and the size of its terms; None
        where they cannot say."""
        ...


def priced_bound(backend: Backend, model: Model, objective: np.ndarray, prices: np.ndarray,
                 options: SolveOptions, time_limit: float,
                 extra_rows: list[tuple[np.ndarray, float]] | None = None,
                 pieces: ExactPieces | None = None) -> float | None:
    """A bound from ``prices`` on the linking rows and the best prices for all other rows
    given those: the LP without the linking rows, its costs adjusted by their prices.

    That LP falls apart into independent pieces (one per person or group, one for the
    hires); they are solved in batches of about :data:`BATCH_COLUMNS` columns, in a fraction
    of the time one LP of them all takes (agency: 19 s, against over 120 s as one LP).
    ``prices`` may come from any LP over the same rows (one with decisions held will do).  A
    batch that gives no prices in the time prices its rows at 0, which keeps the bound
    valid; returns None when no batch gives prices.  With ``extra_rows`` (a held objective)
    the bound is for the model with them, and ``prices`` cover them too.

    ``pieces`` solved exactly take their columns and own rows out of the LP: relocatable
    people's whole plans, where the LP gives each a fraction of a new home (agency: their
    columns are most of the model's, and at 120 s the LP pieces did not all finish).
    """
    deadline = time.perf_counter() + time_limit
    model = with_extra_rows(model, extra_rows or [])
    linking = linking_rows(model)
    held = _signed(model, np.where(linking, prices[:model.num_rows], 0.0))
    adjusted = objective - model.matrix.T @ held
    exact_rows = np.zeros(model.num_rows, bool)
    exact_columns = np.zeros(model.num_cols, bool)
    if pieces is not None:
        exact_rows[:pieces.own_rows.size] = pieces.own_rows
        exact_columns = pieces.columns
    rows = np.flatnonzero(~linking & ~exact_rows)
    apart = model.matrix[rows].tocsc()
    if pieces is not None:
        # The pieces' columns stay out of every LP (a row they share with others is priced
        # there without them: any price keeps the bound valid).
        apart = (apart @ sp.diags((~exact_columns).astype(float))).tocsc()
        apart.eliminate_zeros()
    col_order, row_order, batches = _batches(apart)
    # One permutation makes every batch a contiguous block: slicing the whole matrix per
    # batch cost more than the LPs at large scale.
    ordered = apart[:, col_order].tocsr()[row_order]
    combined, priced = held, False
    for col_start, col_stop, row_start, row_stop in batches:
        left = deadline - time.perf_counter()
        if left <= 0:
            break
        cols = col_order[col_start:col_stop]
        piece_rows = rows[row_order[row_start:row_stop]]
        zeros = np.zeros(cols.size)
        sub = Model(matrix=ordered[row_start:row_stop, col_start:col_stop],
                    row_lower=model.row_lower[piece_rows],
                    row_upper=model.row_upper[piece_rows],
                    col_lower=model.col_lower[cols], col_upper=model.col_upper[cols],
                    is_integer=np.zeros(cols.size, bool), shortfall_weight=zeros, cost=zeros,
                    blocks={}, rows=())
        out = solve_relaxation(backend, sub, adjusted[cols], [], options, left)
        if out.row_dual is not None:
            combined[piece_rows] = out.row_dual[:piece_rows.size]
            priced = True
    if pieces is None:
        return dual_bound(model, objective, combined) if priced else None
    y = _signed(model, combined)
    reduced = objective - model.matrix.T @ y
    exact = pieces.least(reduced)
    if exact is None:
        return None
    row_total, col_terms, size = priced_terms(model.row_lower, model.row_upper, y, reduced,
                                              model.col_lower, model.col_upper)
    total = row_total + float(col_terms[~exact_columns].sum()) + exact[0]
    return total - ROUNDING_SLACK * (size + exact[1])


# Columns per LP when pricing the rows apart (agency: 19 s at 2,000, 22 s at 5,000, 27 s at
# 20,000, 94 s at 80,000; 18 s at 1,000, where setting up starts to weigh).
BATCH_COLUMNS = 2_000


def _batches(matrix: sp.csc_matrix) -> tuple[np.ndarray, np.ndarray,
                                             list[tuple[int, int, int, int]]]:
    """Batches of whole independent pieces (connected components of rows and columns) of
    ``matrix``: an order of its columns (those in no row left out: they need no LP), an order
    of its rows, and per batch the column range and row range in those orders."""
    num_cols = matrix.shape[1]
    graph = sp.bmat([[None, matrix.T], [matrix, None]], format="csr")
    _, label = connected_components(graph, directed=False)
    col_label, row_label = label[:num_cols], label[num_cols:]
    in_rows = np.flatnonzero(np.diff(matrix.indptr) > 0)
    col_order = in_rows[np.argsort(col_label[in_rows], kind="stable")]
    row_order = np.argsort(row_label, kind="stable")
    col_labels, row_labels = col_label[col_order], row_label[row_order]
    _, piece_starts = np.unique(col_labels, return_index=True)
    cuts = [0]
    for start in piece_starts[1:]:
        if start - cuts[-1] >= BATCH_COLUMNS:
            cuts.append(int(start))
    cuts.append(col_order.size)
    batches = []
    for col_start, col_stop in itertools.pairwise(cuts):
        if col_stop <= col_start:
            continue
        row_start = int(np.searchsorted(row_labels, col_labels[col_start], side="left"))
        row_stop = int(np.searchsorted(row_labels, col_labels[col_stop - 1], side="right"))
        batches.append((col_start, col_stop, row_start, row_stop))
    return col_order, row_order, batches
