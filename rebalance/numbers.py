"""Numbers as people write them: one rule for every figure shown as text.

The verifier's and the reasons' messages, the console, the page and the workbook all write a
figure by these functions, so one amount reads the same wherever it appears.  They take numbers
(and a column's name, which says whether it holds money or a gap) and return text; nothing here
knows a plan, a table or a page, and nothing from :mod:`rebalance` is imported, so every step
of the chain may use it.
"""

from __future__ import annotations

import math

__all__ = [
    "FTE_TOTAL_DIGITS",
    "MONEY_WORDS",
    "NEAR_ZERO",
    "column_header",
    "dust_free",
    "fte_total_text",
    "is_gap",
    "is_money",
    "money_amount",
    "money_header",
    "money_text",
    "number_text",
    "seconds_text",
    "share_text",
    "with_currency",
]

# Values this close to zero are rounding left over from the solver: shown as 0.
NEAR_ZERO = 1e-9
# Columns holding money (shown in whole units): names as in the CSV files.  Not "budget": a
# frontier's budget columns may hold factors of each year's cap (its budget_unit says which).
MONEY_WORDS = ("cost", "spend", "salary")
# Totals of FTE-periods in headlines (console summary, page cards, workbook summary): one
# decimal everywhere, so 168.592 / 168.6 / 168.59 of one figure read as one figure.
FTE_TOTAL_DIGITS = 1


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


def seconds_text(value: float) -> str:
    """Seconds with two decimals, rounded first to the three that summary.json stores: the
    console (which has the exact value) and the page (which reads the stored one) had shown
    0.03 and 0.04 for one build."""
    return f"{round(float(value), 3):,.2f}"


def share_text(part: float, whole: float) -> str:
    """``part`` as a percentage of ``whole``, one decimal where a whole percent would read
    as 100% or 0% without being it: 298,500 of 300,000 is 99.5%, not 100%."""
    if not whole:
        return "-"
    share = 100.0 * part / whole
    text = f"{share:.0f}%"
    if text == "100%" and share != 100.0:
        # Kept off 100, so 99.96% reads 99.9% and 100.04% reads 100.1%.
        return f"{min(share, 99.9) if share < 100.0 else max(share, 100.1):.1f}%"
    if text == "0%" and share > 0.0:
        return f"{share:.1f}%" if share >= 0.05 else "under 0.1%"
    return text


def number_text(value: float, column: str = "", *, digits: int = 3) -> str:
    """A number as a reader wants it: solver dust such as 4.4e-16 as 0, gaps as percentages,
    money and whole numbers without decimals (so also anything from 1,000 up, where decimals
    are noise), ``digits`` decimals otherwise.  ``column`` is the table column's name, which
    says whether it holds a gap or money."""
    v = dust_free(value)
    if is_gap(column):
        return f"{v:.2%}"
    if is_money(column) or v.is_integer() or abs(v) >= 1000:
        return money_text(v)
    text = f"{v + 0.0:,.{digits}f}"
    # No "-0.000": -0.00017 rounds to nothing, and a sign on nothing reads as a loss.
    return text[1:] if text.startswith("-") and not text.strip("-0.,") else text
