"""A model with most of its columns held, cut down to the rest before any solver sees it.

The searches of a large model hold most of its columns (one kind of decision at a time, a
few offices at a time).  HiGHS's presolve removes the held ones itself, but that can be
most of a run: on agency (7.2M nonzeros) one group's run spent 4.8 s in presolve and 2.0 s
searching.  Taking the held columns out here (their values moved into the row bounds, and
rows left with nothing free dropped once checked) hands the solver only what it may change.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp

from rebalance.model import Model

__all__ = ["HeldApart", "hold_apart"]

TOLERANCE = 1e-6


@dataclass(frozen=True)
class HeldApart:
    """The free part of a model whose other columns are held (``model``, with the extra rows
    cut down alike), and how to go between its columns and the whole model's.

    Its last column stands for every held column: fixed at 1, it carries what they add to
    an objective, so the part's objective values (and a solver's progress lines and bounds)
    are the whole model's.
    """

    model: Model
    extra_rows: list[tuple[np.ndarray, float]]
    columns: np.ndarray  # positions of its free columns in the whole model
    held: np.ndarray  # the whole model's columns at their held values (free ones at 0)

    def objective(self, whole: np.ndarray) -> np.ndarray:
        """An objective of the whole model, for the part."""
        return np.append(whole[self.columns], whole @ self.held)

    def part(self, x: np.ndarray) -> np.ndarray:
        """A plan of the whole model (inside the bounds) for the part."""
        return np.append(x[self.columns], 1.0)

    def whole(self, x: np.ndarray) -> np.ndarray:
        """A plan of the whole model from a plan ``x`` of the part."""
        full = self.held.copy()
        full[self.columns] = x[:-1]
        return full


def hold_apart(model: Model, lower: np.ndarray, upper: np.ndarray,
               extra_rows: list[tuple[np.ndarray, float]]) -> HeldApart | None:
    """``model`` within column bounds ``lower`` and ``upper``, every column whose bounds meet
    taken out at that value.  None when a row with nothing free is broken by the held
    values (more than ``TOLERANCE``, relative): then no plan inside the bounds exists, or
    the held values are not a plan's, and the caller should let a solver say which."""
    free = lower < upper
    held = np.where(free, 0.0, lower)
    columns = np.flatnonzero(free)
    activity = model.matrix @ held
    part = model.matrix[:, columns].tocsr()
    touched = np.diff(part.indptr) > 0
    slack = TOLERANCE * (1.0 + np.abs(activity))
    broken = ~touched & ((activity < model.row_lower - slack)
                         | (activity > model.row_upper + slack))
    if broken.any():
        return None
    rows = np.flatnonzero(touched)
    reduced = Model(
        matrix=sp.hstack([part[rows], sp.csr_matrix((rows.size, 1))], format="csr"),
        row_lower=model.row_lower[rows] - activity[rows],
        row_upper=model.row_upper[rows] - activity[rows],
        col_lower=np.append(lower[columns], 1.0),
        col_upper=np.append(upper[columns], 1.0),
        is_integer=np.append(model.is_integer[columns], False),
        shortfall_weight=np.append(model.shortfall_weight[columns],
                                   model.shortfall_weight @ held),
        cost=np.append(model.cost[columns], model.cost @ held),
        blocks={},
        rows=(),
    )
    extra = []
    for row, upper_bound in extra_rows:
        used = float(row @ held)
        if not (row[columns] != 0).any() and used > upper_bound + TOLERANCE * (1.0 + abs(used)):
            return None
        extra.append((np.append(row[columns], 0.0), upper_bound - used))
    return HeldApart(reduced, extra, columns, held)
