"""The limits that conflict when no plan keeps them all, in a planner's words.

Limits that fail before any decision (more people at home than seats, with nothing that can
move) are read off the model's rows; otherwise each limit row gets an elastic column and the
least total relaxation names the limits that had to give, and by how much.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import replace

import numpy as np
import scipy.sparse as sp

from rebalance.backends import Backend, SolveOptions
from rebalance.instance import Instance
from rebalance.model import LIMIT_FAMILIES, Model
from rebalance.numbers import money_text, number_text

__all__ = ["constant_conflicts", "find_conflicts", "seat_words"]


def constant_conflicts(model: Model, instance: Instance | None = None) -> list[str]:
    """Rows with no columns whose bounds already fail (e.g. more people at home than seats).
    ``instance``, the one ``model`` was built from, lets seats say whom they are short of."""
    counts = np.diff(model.matrix.indptr)
    bad = np.flatnonzero((counts == 0) & ((model.row_upper < -1e-9) | (model.row_lower > 1e-9)))
    seats = seat_words(instance) if len(bad) and instance is not None else {}
    return [_describe_row(model, int(i), None, seats) for i in bad]


def _describe_row(model: Model, row: int, excess: float | None,
                  seats: Mapping[str, str] | None = None) -> str:
    """The limit of ``row`` in words, with how far it had to give; a seats row also with
    its ``seats`` words (by label), where the instance was given."""
    family, label = model.row_label(row)
    words = family.replace("_", " ")
    # A budget's label names it already ("moves budget 2027"): said once, not twice.
    text = label if label.startswith(words) else f"{words}: {label}"
    if excess is not None:
        text += f" (over by {_amount(family, excess)})"
    if family == "seats" and seats and label in seats:
        text += f": {seats[label]}"
    return text


def seat_words(instance: Instance) -> dict[str, str]:
    """For each seats row's label (``"A in 2027-Q1"``, ``rebalance.limits``), its seats and
    the people based there, in plain words: a conflict of seats had named the row only, not
    how far the people outnumber the seats.  Where they do, how many must be away or moved
    and how many at most may be (``Instance.seat_counts``: the numbers of the warning of
    ``rebalance check``)."""
    names = instance.period_names
    limits = ", ".join(instance.away_limits())
    out = {}
    for c in instance.seat_counts():
        said = f"{_people(c.seats, 'seat')} for {_people(c.based, 'person')} based there"
        if c.must_go:
            may = f"at most {c.may_go} may be" if c.may_go else "none may be"
            said += (f"; {c.must_go} must be away or moved, and {may} away or moved"
                     + (f" ({limits})" if c.too_few_may_go else ""))
        else:
            # The relaxation may let a full office take the excess in people detailed in,
            # as well as the office they come from: the same total (docs/model.md).
            said += "; what is over is people detailed in or hires"
        out[f"{c.office} in {names[c.period]}"] = said
    return out


def _people(n: int, one: str) -> str:
    """'1 person', '5 people', '1 seat', '40 seats'."""
    if n == 1:
        return f"1 {one}"
    return f"{n} {'people' if one == 'person' else one + 's'}"


def _amount(family: str, value: float) -> str:
    """How far a limit had to give, by the number rule: money in full for a budget (it had
    read "over by 8.16e+04"), else as a table writes a figure."""
    return money_text(value) if "budget" in family else number_text(value)


def find_conflicts(model: Model, backend: Backend, options: SolveOptions,
                   time_limit: float, instance: Instance | None = None) -> list[str]:
    """Name the limits that cannot hold together: relax each limit row by an elastic column
    and minimise the total relaxation; rows that still need relaxing are the conflict.
    Empty where none needs to: the model was feasible all along.  With ``instance`` (the
    model's), seats say whom they are short of (:func:`seat_words`)."""
    limit_rows = [i for f in model.rows if f.name in LIMIT_FAMILIES
                  for i in range(f.start, f.stop) if math.isfinite(model.row_upper[i])]
    if not limit_rows:
        return ["the solver reports the model infeasible, but no limit row can be relaxed"]
    k = len(limit_rows)
    elastic = sp.csr_matrix((np.full(k, -1.0), (np.asarray(limit_rows), np.arange(k))),
                            shape=(model.num_rows, k))
    with_elastic = replace(
        model,
        matrix=sp.hstack([model.matrix, elastic], format="csr"),
        col_lower=np.concatenate([model.col_lower, np.zeros(k)]),
        col_upper=np.concatenate([model.col_upper, np.full(k, math.inf)]),
        is_integer=np.concatenate([model.is_integer, np.zeros(k, bool)]),
        shortfall_weight=np.concatenate([model.shortfall_weight, np.zeros(k)]),
        cost=np.concatenate([model.cost, np.zeros(k)]),
    )
    objective = np.concatenate([np.zeros(model.num_cols), np.ones(k)])
    out = backend.run(with_elastic, objective, [], options, time_limit, None)
    if out.x is None:
        return [f"the limits conflict, but the analysis found no relaxation ({out.words})"]
    excess = out.x[model.num_cols:]
    over = np.flatnonzero(excess > 1e-6)
    if not len(over):
        return []  # nothing had to give: the caller says the verdict was the solver's
    seats = seat_words(instance) if instance is not None else {}
    listed = [_describe_row(model, limit_rows[i], float(excess[i]), seats) for i in over]
    # The least total relaxation is the answer's firm part; how it splits between offices
    # and periods can differ between equally small relaxations (and so between solvers).
    totals: dict[str, tuple[int, float]] = {}
    for i in over:
        family, _ = model.row_label(limit_rows[i])
        count, amount = totals.get(family, (0, 0.0))
        totals[family] = (count + 1, amount + float(excess[i]))
    summary = [f"{family.replace('_', ' ')}: over by {_amount(family, amount)} in all, across "
               f"{count} limits "
               "(the least total; how it is split between them can differ)"
               for family, (count, amount) in totals.items() if count > 1]
    return summary + listed
