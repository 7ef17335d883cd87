"""Numbers as people write them: one rule for every figure shown as text.

The verifier's and the reasons' messages, the console, the page and the workbook all write a
figure by these functions, so one amount reads the same wherever it appears.  They take numbers
(and a column's name, which says whether it holds money or a gap) and return text; nothing here
knows a plan, a table or a page, and nothing from :mod:`rebalance` is imported, so every step
of the chain may use it.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Sequence
from decimal import Context, Decimal
from numbers import Real

__all__ = [
    "DIFFERENCE_COLUMN",
    "FTE_TOTAL_DIGITS",
    "GAP_DIGITS",
    "MONEY_WORDS",
    "NEAR_ZERO",
    "PLAIN_BELOW",
    "SECONDS_DIGITS",
    "SHARE_DIGITS",
    "TABLE_DIGITS",
    "WHOLE_FROM",
    "column_header",
    "column_texts",
    "compared_row_texts",
    "compared_texts",
    "counted",
    "distinct_texts",
    "dust_free",
    "figures",
    "fte_total_text",
    "gap_text",
    "has_decimals",
    "is_gap",
    "is_money",
    "model_size_text",
    "money_amount",
    "money_header",
    "money_text",
    "number_rule",
    "number_text",
    "plain_number",
    "progress_value",
    "seconds_text",
    "share_of",
    "share_text",
    "with_currency",
    "years_text",
]

# Values this close to zero are rounding left over from the solver: shown as 0.
NEAR_ZERO = 1e-9
# Columns holding money (shown in whole units): names as in the CSV files.  Not "budget": a
# frontier's budget columns may hold factors of each year's cap (its budget_unit says which).
MONEY_WORDS = ("cost", "spend", "salary")
# Totals of FTE-periods in headlines (console summary, page cards, workbook summary): one
# decimal everywhere, so 168.592 / 168.6 / 168.59 of one figure read as one figure.
FTE_TOTAL_DIGITS = 1
# Decimals of a table's figures that are neither money, gaps nor whole numbers (FTE in a
# table row, a budget factor): the console, the page's tables and the workbook's sheets alike
# (the console had written 2 where the page wrote 3).
TABLE_DIGITS = 3
# Relative gaps as percentages with two decimals everywhere (the console had written
# "0.0000%" where the page wrote "0.00%", the notebook "1.9%").
GAP_DIGITS = 2
# Shares (of a budget used, of demand not covered) as percentages with one decimal: the page's
# card had "12.3%" where its tables had "12%"; a workbook cell format cannot drop decimals
# by value, so one fixed count is the rule every surface can keep.
SHARE_DIGITS = 1
# Seconds, to two decimals.
SECONDS_DIGITS = 2
# From this size up a figure takes no decimals anywhere: they are noise beside its digits.
WHOLE_FROM = 1000

# A number someone typed (a setting, a bound of what one may type) is written with all its
# digits and separators below this size, as money is; from it up, and for a non-zero number
# under PLAIN_SMALLEST, as "1e18" (TOML's own spelling): 1e308 has 309 digits.
PLAIN_BELOW = 1e15
PLAIN_SMALLEST = 1e-4
# Significant digits kept of a number written with an exponent: a float's full precision.
PLAIN_EXPONENT_DIGITS = 17


def is_gap(column: str) -> bool:
    """A column holding a relative gap (``gap``, ``stage_gap``, ``gap_at_stop``)."""
    name = column.lower()
    return name == "gap" or name.endswith("_gap") or name.startswith("gap_")


def is_money(column: str) -> bool:
    """A column holding money: its name holds one of :data:`MONEY_WORDS`."""
    return any(word in column.lower() for word in MONEY_WORDS)


def dust_free(value: float) -> float:
    """``value``, or 0.0 where it is solver dust (under :data:`NEAR_ZERO` either side)."""
    v = float(value)
    return 0.0 if abs(v) < NEAR_ZERO else v


def money_text(value: float) -> str:
    """An amount of money in whole units with separators (cents are noise in a plan)."""
    v = float(value)
    if not math.isfinite(v):
        return f"{v:,.0f}"
    # round() gives an int, which has no "-0" (-0.00017 of solver dust had shown as "-0").
    return f"{round(v):,d}"


def typed_places(values: Iterable[object], most: int = 10) -> int:
    """The decimals the values of a column were given with, the most of them (0.5 and 1.25:
    2), at most ``most``; an exponent's digits (1e18) are none."""
    places = 0
    for v in values:
        if isinstance(v, int | float) and not isinstance(v, bool) and math.isfinite(v):
            text = plain_number(v)
            if "e" not in text:
                places = max(places, len(text.partition(".")[2]))
    return min(places, most)


def grid_column_texts(values: Sequence[object]) -> list[str | None]:
    """A column of values a planner typed (a frontier's factors 0.5, 1, 1.5): each with the
    decimals the most precise of them has, the same in every row (0.5, 1.0, 1.5): "1.000"
    had been more digits than anyone typed, and "0.5" beside "1" a column read two ways.
    None for a missing value."""
    places = typed_places(values)
    return [None if not (isinstance(v, int | float) and not isinstance(v, bool)
                         and math.isfinite(v)) else f"{float(v):,.{places}f}"
            for v in values]


def plain_number(value: float) -> str:
    """A number given in an input, for a message echoing it: ``1e13`` as
    ``10,000,000,000,000`` (Python's ``1e+13`` had read as code to a planner, a sweep), every
    digit it has (not ``:g``'s six: 0.1234567 had shown as 0.123457), separators as in money;
    :data:`PLAIN_BELOW` and up (and tiny ones) as ``1e18``, ``2.5e-7``; inf and nan as TOML
    writes them."""
    if isinstance(value, int) and not isinstance(value, bool):
        if abs(value) < PLAIN_BELOW:
            return f"{value:,d}"
        # An integer past a float's range (a TOML integer of 400 digits) still has a size.
        exact = Decimal(value)
    else:
        v = float(value)
        if not math.isfinite(v):
            return str(v)
        if v.is_integer() and abs(v) < PLAIN_BELOW:
            return f"{int(v):,d}"
        if PLAIN_SMALLEST <= abs(v) < PLAIN_BELOW:
            return f"{v:,}"  # the shortest digits that read back as v, without an exponent
        exact = Decimal(repr(v))
    short = exact.normalize(Context(prec=PLAIN_EXPONENT_DIGITS))
    return f"{short:e}".replace("e+", "e")


def with_currency(text: str, currency: str | None) -> str:
    """An amount already written as text, with the ``currency`` after it (``43,000 EUR``)."""
    return f"{text} {currency}" if currency else text


def money_amount(value: float, currency: str | None = None) -> str:
    """:func:`money_text` with the ``currency`` after it, where there is one."""
    return with_currency(money_text(value), currency)


def money_header(words: str, currency: str | None) -> str:
    """A column or axis name for money, with the ``currency`` (``cost (EUR)``)."""
    return f"{words} ({currency})" if currency else words


def column_header(column: str, currency: str | None) -> str:
    """A table column's name, with the ``currency`` where the column holds money."""
    return money_header(column, currency) if is_money(column) else column


def fte_total_text(value: float) -> str:
    """A headline total of FTE-periods: :data:`FTE_TOTAL_DIGITS` decimals, no "-0"."""
    return f"{dust_free(value) + 0.0:,.{FTE_TOTAL_DIGITS}f}"


def progress_value(value: float | None) -> str:
    """A stage's objective or bound in a progress line: from 100,000 up (money) whole, with
    thousands separators (2,470,500, where ``:.6g`` had written 2.4705e+06, read as code by a
    planner); below it six significant figures (a shortfall of 168.591)."""
    if value is None:
        return "none"
    return f"{value:,.0f}" if abs(value) >= PROGRESS_WHOLE_FROM else f"{value:.6g}"


PROGRESS_WHOLE_FROM = 1e5


def seconds_text(value: float) -> str:
    """Seconds with :data:`SECONDS_DIGITS` decimals, rounded first to the three that
    summary.json stores: the console (which has the exact value) and the page (which reads
    the stored one) had shown 0.03 and 0.04 for one build."""
    return f"{round(float(value), 3):,.{SECONDS_DIGITS}f}"


def gap_text(value: float) -> str:
    """A relative gap (0.0123) as a percentage with :data:`GAP_DIGITS` decimals (1.23%)."""
    return f"{dust_free(value) + 0.0:.{GAP_DIGITS}%}"


def share_text(part: float, whole: float) -> str:
    """``part`` as a percentage of ``whole`` with :data:`SHARE_DIGITS` decimals, kept off
    100% and 0% where it is not that: 298,500 of 300,000 is 99.5%, and 299,990 of it 99.9%,
    not 100.0%; one of it "under 0.1%", not 0.0%.  A ``part`` within float dust of
    ``whole`` (or of 0) is 100% (or 0%): 394.3088888888889 of itself, as 100 x part / whole
    100.00000000000001, had been kept off 100 as "100.1%"."""
    if not whole:
        return "-"
    part, whole = float(part), float(whole)
    # Dust: NEAR_ZERO, or that share of a large whole (its sums carry more); the one decimal
    # shown tells a thousandth of the whole, far above either.
    dust = NEAR_ZERO * max(1.0, abs(whole))
    if abs(part - whole) < dust:
        share = 100.0
    elif abs(part) < dust:
        share = 0.0
    else:
        share = 100.0 * part / whole
    d = SHARE_DIGITS
    text = f"{share:.{d}f}%"
    step = 10.0 ** -d
    if text == f"{100:.{d}f}%" and share != 100.0:
        # Kept off 100, so 99.96% reads 99.9% and 100.04% reads 100.1%.
        return f"{min(share, 100 - step) if share < 100.0 else max(share, 100 + step):.{d}f}%"
    if text == f"{0:.{d}f}%" and share > 0.0:
        return f"under {step:.{d}f}%"
    return text


def share_of(fraction: float) -> str:
    """A share given as a fraction (0.123) by :func:`share_text` (12.3%)."""
    return share_text(fraction, 1.0)


def has_decimals(values: Iterable[object]) -> bool:
    """Whether any finite number among ``values`` (solver dust aside) is not whole: a column
    where one is takes decimals in every row (a frontier had read "0.50" in one row and "1"
    in the next)."""
    for value in values:
        if isinstance(value, bool) or not isinstance(value, int | float):
            continue
        v = dust_free(float(value))
        if math.isfinite(v) and not v.is_integer() and abs(v) < WHOLE_FROM:
            return True
    return False


def number_text(value: float, column: str = "", *, digits: int = TABLE_DIGITS,
                decimals: bool | None = None) -> str:
    """A number as a reader wants it: solver dust such as 4.4e-16 as 0, gaps as percentages,
    money and whole numbers without decimals (so also anything from 1,000 up, where decimals
    are noise), ``digits`` decimals otherwise.  ``column`` is the table column's name, which
    says whether it holds a gap or money; ``decimals`` (from :func:`has_decimals` of the
    column) gives a whole number under 1,000 decimals too, so a column reads alike."""
    v = dust_free(value)
    if is_gap(column):
        return gap_text(v)
    if is_money(column) or abs(v) >= WHOLE_FROM or (v.is_integer() and not decimals):
        return money_text(v)
    text = f"{v + 0.0:,.{digits}f}"
    # No "-0.000": -0.00017 rounds to nothing, and a sign on nothing reads as a loss.
    return text[1:] if text.startswith("-") and not text.strip("-0.,") else text


def column_texts(values: Sequence[float], column: str = "", *,
                 digits: int = TABLE_DIGITS) -> list[str]:
    """A column's numbers by :func:`number_text`, with decimals in every row or in none."""
    decimals = has_decimals(values)
    return [number_text(v, column, digits=digits, decimals=decimals) for v in values]


def distinct_texts(values: Sequence[float], texts: list[str], decimals: int) -> list[str]:
    """``texts`` (the number rule's), or where two read the same, ``values`` with as many
    decimals from ``decimals`` on as tell them apart.  A message that sets two figures side
    by side (worked against available, stated against recomputed) must show *why* they
    differ, which the rule's rounding can hide: 1.0000004 FTE worked of 1 available must not
    read "1.000 of 1.000"."""
    for more in range(decimals, 16):
        if len(set(texts)) == len(texts):
            return texts
        texts = [_plain(v, more) for v in values]
    return texts if len(set(texts)) == len(texts) else [repr(float(v)) for v in values]


def figures(*values: float) -> list[str]:
    """Figures set side by side in a message, as a table column writes them
    (:func:`column_texts`), with more decimals where those would make two read the same
    (:func:`distinct_texts`)."""
    return distinct_texts(values, column_texts(values), TABLE_DIGITS + 1)


def compared_texts(before: float, after: float, difference: float,
                   column: str = "") -> list[str]:
    """Two figures and their difference set side by side (an old plan's, a new plan's and
    new less old), as :func:`figures` sets two (:func:`distinct_texts`), with the difference
    as a third: as the number rule writes them where that tells what differs, else all three
    with the fewest decimals, from :data:`TABLE_DIGITS` on, at which figures that differ
    read apart, a difference that is not nothing does not read 0, and the difference shown
    is that of the figures shown.  168.59153 and 168.59136 had read "168.592", "168.591"
    and a difference of "0.000" (-0.00017); they read "168.59153", "168.59136",
    "-0.00017".  At the rule's own decimals the difference may be one in the last place off
    that of the figures shown, as in any rounded table (185.733, 185.425, -0.309 had been
    written to six decimals); with more decimals it is exact.  Money and gaps keep their
    rule (whole units, percentages): cents are noise in a plan."""
    values = [float(before), float(after), float(difference)]
    if is_money(column) or is_gap(column) or not all(math.isfinite(v) for v in values):
        return [number_text(v, column) for v in values]

    def tells(texts: list[str], off_by: int) -> bool:
        if (texts[0] == texts[1]) != (dust_free(values[1] - values[0]) == 0.0):
            return False
        if dust_free(values[2]) != 0.0 and not texts[2].strip("-0.,"):
            return False
        # The difference read off the texts shown (1,235 and 1,234 beside -0.160 is not),
        # give or take ``off_by`` in the last place.
        shown = [float(t.replace(",", "")) for t in texts]
        places = max(len(t.partition(".")[2]) for t in texts)
        miss = abs(round(shown[1] - shown[0], places) - round(shown[2], places))
        return miss <= off_by * 10.0 ** -places + 1e-12

    texts = column_texts(values, column)
    # The rule's texts stand where they tell it all (24, 24, 0).
    if tells(texts, 1):
        return texts
    for more in range(TABLE_DIGITS, 16):
        texts = [_plain(v, more) for v in values]
        if tells(texts, 1 if more == TABLE_DIGITS else 0):
            return texts
    return [repr(v) for v in values]


# A table of measures' column holding the difference of the two before it (replan.csv's
# ``old_plan, new_plan, difference``).
DIFFERENCE_COLUMN = "difference"


def compared_row_texts(columns: Sequence[str], values: Sequence[object],
                       measure: str = "") -> dict[int, str]:
    """A table of measures' row's figures set side by side: where a ``difference`` column
    follows two numbers, those three cells (by position) as :func:`compared_texts` writes
    them for the row's ``measure``; else none, and each cell keeps its own rule."""
    if DIFFERENCE_COLUMN not in columns:
        return {}
    j = list(columns).index(DIFFERENCE_COLUMN)
    if j < 2:
        return {}
    cells = [values[j - 2], values[j - 1], values[j]]
    # Real: numpy's numbers too, as a table's cells come.
    numbers = [float(v) for v in cells if isinstance(v, Real) and not isinstance(v, bool)]
    if len(numbers) != 3 or not all(math.isfinite(v) for v in numbers):
        return {}
    texts = compared_texts(numbers[0], numbers[1], numbers[2], measure)
    out = {j - 2: texts[0], j - 1: texts[1], j: texts[2]}
    # A figure after the difference (a re-plan's plan made ahead) with the same decimals as
    # the three, so a row reads alike across (165.522 beside 170.96049 had not).
    places = len(texts[0].partition(".")[2])
    for k in range(j + 1, len(values)):
        value = values[k]
        if isinstance(value, Real) and not isinstance(value, bool) and math.isfinite(value):
            out[k] = (number_text(float(value), measure)
                      if is_money(measure) or is_gap(measure) else _plain(float(value), places))
    return out


def _plain(value: float, decimals: int) -> str:
    """``value`` with ``decimals`` decimals and separators, no sign on a zero."""
    text = f"{float(value) + 0.0:,.{decimals}f}"
    return text[1:] if text.startswith("-") and not text.strip("-0.,") else text


def counted(number: int, noun: str) -> str:
    """``number`` with ``noun``, plural unless one (``1 period``, ``3 periods``)."""
    return f"{number:,} {noun}" + ("" if number == 1 else "s")


def model_size_text(cols: int, integer: int, rows: int) -> str:
    """A model's size as the console's summary and the workbook write it: ``1,204 columns
    (312 whole-number) x 980 rows``."""
    return f"{cols:,} columns ({integer:,} whole-number) x {rows:,} rows"


def years_text(value: object) -> str:
    """Budget years as text (``2027``, ``2027; 2028``), never a number: read back from a CSV
    file a single year is the number 2027 (or 2027.0 in a column with blanks), which a table
    had written "2,027".  A missing value is ""."""
    if value is None or isinstance(value, bool):
        return "" if value is None else str(value)
    if isinstance(value, Real):
        v = float(value)
        if math.isnan(v):
            return ""
        return str(int(v)) if v.is_integer() else str(value)
    return str(value).strip()


def number_rule() -> dict[str, float]:
    """The rule's decimals and dust, for the page's drawing script (which writes its charts'
    labels and tips by them, so a chart reads as the tables beside it)."""
    return {"table_digits": TABLE_DIGITS, "total_digits": FTE_TOTAL_DIGITS,
            "gap_digits": GAP_DIGITS, "share_digits": SHARE_DIGITS, "whole_from": WHOLE_FROM,
            "near_zero": NEAR_ZERO}
