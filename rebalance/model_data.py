"""The model's data: the arrays of a built model and the names of its parts; no building here.

A :class:`Model` is one sparse matrix with row and column bounds, integrality and two objective
vectors; its columns come in named :class:`ColumnBlock` ranges with integer keys, its rows in
named :class:`RowFamily` ranges with labels.  Building one from an instance is
``rebalance.model``, which re-exports these names: import them from there.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace

import numpy as np
import scipy.sparse as sp

__all__ = ["ADAPTING_FAMILIES", "INF", "LIMIT_FAMILIES", "ROUNDED_FAMILIES",
           "STRUCTURE_FAMILIES", "BuildCutShort", "ColumnBlock", "DetailRoute", "Model",
           "RowFamily", "Terms", "without_rounded_rows"]

INF = math.inf
# A person's detail to an office in a period index: (person, destination office, period).
DetailRoute = tuple[str, str, int]

# Row families: structure rows hold the model together; limit rows are the organisation's
# limits, which the infeasibility analysis may relax to say which ones conflict.
STRUCTURE_FAMILIES = (
    "capacity", "coverage", "one_detail", "detail_from_home", "one_reassignment", "home_stays",
    "home_in_force", "one_place", "detail_not_home", "detail_cost_adjustment",
    "detail_cost_floor",
)
# Rows a work split and shortfall always satisfy once people and hires are placed (no work,
# everything short): a rounding heuristic need not check them.
ADAPTING_FAMILIES = ("capacity", "coverage")
LIMIT_FAMILIES = (
    "consecutive_details",
    "away_share",
    "away_share_in_whole_people",
    "seats",
    "vacancies",
    "max_hires",
    "hiring_budget",
    "moves_budget",
)

# Limit rows rounded to whole people (``rebalance.limits``): every whole-number plan keeps
# them, so they tighten every search, but an LP with homes held prices them as if no
# reassignment could loosen them, and a bound from those prices, where relocatable people
# may move, then overstates what a reassignment is worth (medium: 1,502 against 1,540).
ROUNDED_FAMILIES = ("away_share_in_whole_people",)


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
    # Original home office (index) of each unit.
    unit_home: np.ndarray = field(default_factory=lambda: np.zeros(0, int))
    build_seconds: float = 0.0
    # Values of the whole-number columns to try as a first plan, beside staying put (a
    # re-plan's old plan); other entries are ignored.  None: no such plan.
    hint: np.ndarray | None = None
    # What the hint is, for progress lines ("the old plan", "the base plan").
    hint_words: str = "the old plan"

    @property
    def num_cols(self) -> int:
        return int(self.col_lower.size)

    @property
    def num_rows(self) -> int:
        return int(self.row_lower.size)

    @property
    def num_integer(self) -> int:
        return int(self.is_integer.sum())

    def key_of_columns(self, key: str) -> np.ndarray:
        """Per column, its ``key`` (unit, office, ...) in its block; -1 where none."""
        values = np.full(self.num_cols, -1)
        for block in self.blocks.values():
            if key in block.keys:
                values[block.start:block.stop] = block.keys[key]
        return values

    def offices_of_columns(self) -> tuple[np.ndarray, np.ndarray]:
        """Per column, the two offices it is about (-1 where none): a hire's office (twice);
        a detail's home in force (the original home where the column names only the
        destination) and its destination; a reassignment's original and new home; for work,
        the unit's original home and where the work is done.  A search that frees a few
        offices at a time frees the columns about them."""
        second = self.key_of_columns("office")
        home, unit = self.key_of_columns("home"), self.key_of_columns("unit")
        original = np.append(self.unit_home, -1)[unit]  # unit -1 (none) reads the -1
        first = np.where(home >= 0, home, np.where(unit >= 0, original, second))
        return first, second

    def row_label(self, row: int) -> tuple[str, str]:
        for family in self.rows:
            if family.start <= row < family.stop:
                return family.name, family.labels[row - family.start]
        raise IndexError(row)


class BuildCutShort(Exception):
    """Building the model stopped: past its deadline (the run's time limit covers building
    too, issue 3), or with the machine's memory nearly gone.  An instance of hundreds of
    offices with many relocatable people can take minutes and tens of GB to write out, as
    their cost adjustments grow with offices squared (``relocation.py``)."""

    def __init__(self, out_of: str, seconds: float, num_rows: int, nonzeros: int) -> None:
        what = ("ran past the time limit" if out_of == "time"
                else "stopped with the machine's memory nearly used up")
        super().__init__(f"building the model {what} after {seconds:.1f}s ({num_rows:,} rows "
                         f"and {nonzeros:,} nonzeros written so far)")
        self.out_of = out_of
        """``"time"`` or ``"memory"``."""
        self.seconds = seconds


# Heads (or output) as a constant plus columns with their coefficients.
Terms = tuple[float, list[int], list[float]]


def without_rounded_rows(model: Model) -> Model:
    """``model`` with the rows of ``ROUNDED_FAMILIES`` left free: still there, so that the
    rows and their prices line up with the model's, each priced 0 by any LP."""
    upper = model.row_upper.copy()
    for family in model.rows:
        if family.name in ROUNDED_FAMILIES:
            upper[family.start:family.stop] = INF
    return replace(model, row_upper=upper)
