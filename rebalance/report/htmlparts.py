"""Small HTML building blocks shared by the report's pages: escaping, number text, sortable
tables, chart placeholders and sections."""

from __future__ import annotations

import html
import math
from collections.abc import Sequence
from typing import Any

import pandas as pd

__all__ = ["card", "chart", "compact_money", "e", "frame_table_html", "money", "num",
           "section", "table_html"]


def e(value: object) -> str:
    return html.escape(str(value), quote=True)


def num(value: float, digits: int = 1) -> str:
    return f"{value:,.{digits}f}"


def money(value: float) -> str:
    return f"{value:,.0f}"


def compact_money(value: float) -> str:
    if abs(value) >= 1e6:
        return f"{value / 1e6:,.2f}M"
    if abs(value) >= 1e4:
        return f"{value / 1e3:,.0f}k"
    return f"{value:,.0f}"


def table_html(headers: Sequence[str], rows: Sequence[Sequence[Any]], *, name: str,
               numeric: Sequence[bool] | None = None, caption: str = "",
               limit: int | None = None) -> str:
    """A sortable table; numbers carry their raw value in ``data-v`` for sorting."""
    numeric = numeric or [False] * len(headers)
    head = "".join(f'<th scope="col" class="{"num" if n else ""}" tabindex="0">{e(h)}</th>'
                   for h, n in zip(headers, numeric, strict=True))
    body = []
    shown = rows if limit is None else rows[:limit]
    for r in shown:
        cells = []
        for value, is_num in zip(r, numeric, strict=True):
            if isinstance(value, tuple):  # (sort value, shown text)
                sort, text = value
                cells.append(f'<td class="num" data-v="{e(sort)}">{e(text)}</td>')
            elif is_num and isinstance(value, int | float) and not isinstance(value, bool):
                text = num(value, 2) if isinstance(value, float) else f"{value:,}"
                cells.append(f'<td class="num" data-v="{value}">{e(text)}</td>')
            else:
                text = "" if value is None else str(value)
                # Long prose (a reason, a method) wraps; short cells stay on one line.
                wrap = ' class="long"' if len(text) > 48 else ""
                cells.append(f"<td{wrap}>{e(text)}</td>")
        body.append("<tr>" + "".join(cells) + "</tr>")
    more = ""
    if limit is not None and len(rows) > limit:
        more = (f'<p class="more">Showing the first {limit:,} of {len(rows):,} rows; the full '
                "table is in the plan folder and in plan.xlsx.</p>")
    cap = f"<caption>{e(caption)}</caption>" if caption else ""
    return (f'<div class="table-wrap"><table class="sortable" data-table="{e(name)}">{cap}'
            f"<thead><tr>{head}</tr></thead><tbody>{''.join(body)}</tbody></table></div>{more}")


def frame_table_html(frame: pd.DataFrame, name: str, limit: int = 200) -> str:
    """Any analysis table as-is, numbers right-aligned and sortable."""
    headers = [str(c) for c in frame.columns]
    numeric = [pd.api.types.is_numeric_dtype(frame[c]) and not pd.api.types.is_bool_dtype(
        frame[c]) for c in frame.columns]
    # Whole-number columns show no decimals; others three, or none for large values.
    whole = [bool(n) and bool(((frame[c].dropna() % 1) == 0).all()) for c, n in zip(
        frame.columns, numeric, strict=True)]
    rows = []
    for values in frame.itertuples(index=False, name=None):
        row: list[Any] = []
        for v, is_num, is_whole in zip(values, numeric, whole, strict=True):
            if is_num and isinstance(v, int | float) and math.isfinite(float(v)):
                digits = 0 if is_whole or abs(float(v)) >= 1000 else 3
                row.append((v, num(float(v) + 0.0, digits)))  # + 0.0: no "-0" on show
            else:
                row.append("" if v is None or (isinstance(v, float) and math.isnan(v)) else v)
        rows.append(row)
    return table_html(headers, rows, name=name, numeric=numeric, limit=limit)


def card(label: str, value: str, note: str, tone: str = "") -> str:
    return (f'<div class="card {tone}"><div class="card-label">{e(label)}</div>'
            f'<div class="card-value">{e(value)}</div><div class="card-note">{e(note)}</div>'
            "</div>")


def chart(kind: str, title: str, note: str = "") -> str:
    return (f'<figure class="chart-box"><div class="chart" data-chart="{kind}" '
            f'data-drawn="no" role="img" aria-label="{e(title)}"></div>'
            + (f"<figcaption>{e(note)}</figcaption>" if note else "") + "</figure>")


def section(anchor: str, title: str, lead: str, body: str) -> str:
    return (f'<section id="{anchor}"><h2>{e(title)}</h2><p class="lead">{lead}</p>'
            f"{body}</section>")
