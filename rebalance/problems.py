"""What is wrong with an input, located: the record every reader reports, and the small checks
the readers share (instance tables and settings, plans, workload history, scenarios).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, TypeGuard

__all__ = ["Problem", "describe_range", "is_finite_number"]


@dataclass(frozen=True)
class Problem:
    """One thing wrong with the input, located as precisely as the input allows."""

    file: str
    row: int | None
    column: str | None
    message: str
    is_warning: bool = False
    # Rows this one line stands for: one fault on many rows is listed a few times, then once
    # more for the rest (``collapse_repeats``), and a count of problems counts them all.
    repeats: int = 1

    def __str__(self) -> str:
        where = self.file if self.row is None else f"{self.file}:{self.row}"
        col = f" {self.column}:" if self.column else ""
        return f"{where}:{col} {self.message}"


def describe_range(minimum: float | None, maximum: float | None, open_minimum: bool,
                   integer: bool) -> str:
    """The values a bound allows, as a message says them: ``a whole number >= 1``."""
    kind = "a whole number" if integer else "a number"
    if minimum is not None and maximum is not None:
        left = "(" if open_minimum else "["
        return f"{kind} in {left}{minimum:g}, {maximum:g}]"
    if minimum is not None:
        return f"{kind} {'>' if open_minimum else '>='} {minimum:g}"
    return kind


def is_finite_number(value: Any) -> TypeGuard[int | float]:
    """A finite TOML number: ``true`` is an int to Python, not a number to a planner, and
    ``inf`` is no number of hours."""
    return isinstance(value, int | float) and not isinstance(value, bool) and _finite(value)


def _finite(value: int | float) -> bool:
    """Finite as a float: a TOML integer of 400 digits is not (it had raised OverflowError)."""
    try:
        return math.isfinite(value)
    except OverflowError:
        return False
