"""What is wrong with an input, located: the record every reader reports, and the small checks
the readers share (instance tables and settings, plans, workload history, scenarios).
"""

from __future__ import annotations

import difflib
import math
from collections.abc import Iterable
from dataclasses import dataclass
from typing import Any, TypeGuard

from rebalance.numbers import counted, plain_number

__all__ = ["Problem", "UnknownName", "close_names", "did_you_mean", "is_finite_number",
           "problems_counted", "range_words"]

# How alike a name must be to a known one to be suggested (difflib's ratio, 0 to 1): 0.6,
# difflib's own default, catches a dropped or swapped letter or two without offering an
# unrelated name; two suggestions at most, as a longer list is the "expected" list again.
CLOSE_MATCH_CUTOFF = 0.6
CLOSE_MATCHES_SHOWN = 2


@dataclass(frozen=True)
class UnknownName:
    """A name a cell gives that the table defining such names does not list, as data: a name
    unknown in many rows is said once (``tables.collapse_repeats``) by grouping on it."""

    kind: str  # office, skill, period, ...
    name: str
    defined_in: str  # where such names are listed: "skills.csv", "settings.toml (2027-Q1)"
    hint: str = ""  # a did_you_mean, or ""

    @property
    def message(self) -> str:
        """``unknown skill 'x'; expected one listed in skills.csv`` and the hint."""
        return (f"unknown {self.kind} '{self.name}'; expected one listed in {self.defined_in}"
                f"{self.hint}")


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
    # What the message says, as data, for the readers that merge problems: the name of an
    # unknown-name problem; the settings key (as written) of an unknown key's; the unknown keys
    # a missing setting's message names as perhaps meant as it (settings_reader.read_periods).
    unknown_name: UnknownName | None = None
    unknown_key: str | None = None
    meant_keys: tuple[str, ...] = ()

    def __str__(self) -> str:
        where = self.file if self.row is None else f"{self.file}:{self.row}"
        col = f" {self.column}:" if self.column else ""
        return f"{where}:{col} {self.message}"


def problems_counted(count: int) -> str:
    """``1 problem``, ``3 problems`` (it had read "1 problem(s)")."""
    return counted(count, "problem")


def close_names(value: str, names: Iterable[Any]) -> list[str]:
    """The one or two ``names`` closest to ``value``, closest first; none when none is close.

    Compared ignoring case, so ``alder`` finds ``Alder``."""
    folded: dict[str, str] = {}
    for name in names:
        folded.setdefault(str(name).lower(), str(name))
    close = difflib.get_close_matches(str(value).lower(), list(folded), n=CLOSE_MATCHES_SHOWN,
                                      cutoff=CLOSE_MATCH_CUTOFF)
    return [folded[c] for c in close]


def did_you_mean(value: str, names: Iterable[Any]) -> str:
    """`` (did you mean 'x'?)`` naming the :func:`close_names` of ``value``, to end a message
    saying ``value`` is unknown; "" when none is close."""
    close = close_names(value, names)
    if not close:
        return ""
    return " (did you mean " + " or ".join(f"'{c}'" for c in close) + "?)"


def range_words(minimum: float | None, maximum: float | None, *, open_minimum: bool = False,
                open_maximum: bool = False, integer: bool = False) -> str:
    """The values a bound allows, in plain words: ``a number above 0 and at most 1``, ``a
    whole number from 1 to 90``, ``a number >= 0``; ``open_`` excludes that bound.  Bounds
    are written by :func:`plain_number` (``to 1,000,000,000,000``, not ``to 1e+12``)."""
    kind = "a whole number" if integer else "a number"
    low, high = (None if b is None else plain_number(b) for b in (minimum, maximum))
    if minimum is not None and maximum is not None:
        if not open_minimum and not open_maximum:
            return f"{kind} from {low} to {high}"
        low = f"above {low}" if open_minimum else f"at least {low}"
        high = f"below {high}" if open_maximum else f"at most {high}"
        return f"{kind} {low} and {high}"
    if minimum is not None:
        return f"{kind} {'>' if open_minimum else '>='} {low}"
    if maximum is not None:
        return f"{kind} {'<' if open_maximum else '<='} {high}"
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
