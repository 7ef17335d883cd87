"""The organisation's limits as rows of the model (``LIMIT_FAMILIES`` in ``rebalance.model``).

Consecutive details, the share of an office away, seats, funded vacancies, hires per period
and the yearly hiring and moves budgets; the infeasibility analysis may relax these rows to
say which limits conflict.  The comments name the constraints of ``docs/model.md``.
"""

from __future__ import annotations

import math
from typing import TYPE_CHECKING

import numpy as np

if TYPE_CHECKING:
    from rebalance.model import _Builder, _Columns, _Frame

__all__ = ["add_limit_rows", "rounded_down"]

# A right-hand side this near a whole number is taken as one: rounding it says nothing, and
# a tiny fraction would make the lifted coefficients huge.
MIN_FRACTION = 1e-6


def add_limit_rows(b: _Builder, f: _Frame, cols: _Columns) -> None:
    """Add every limit family, in the order of ``LIMIT_FAMILIES``."""
    _detail_limit_rows(b, f, cols)
    _seat_rows(b, f, cols)
    _hiring_limit_rows(b, f, cols)
    _moves_budget_rows(b, f, cols)


def _detail_limit_rows(b: _Builder, f: _Frame, cols: _Columns) -> None:
    """Rows consecutive_details, away_share and away_share_in_whole_people."""
    # consecutive_details: in every window of m+1 periods at most m are detail periods; for a
    # group, at most m x size detail-periods (plan extraction then names who goes when)
    m = f.m
    b.begin("consecutive_details")
    if m is not None and m > 0:
        for u in range(len(f.units)):
            for start in range(0, f.T - m):
                window = range(start, start + m + 1)
                if sum(1 for t in window if cols.det_by_ut.get((u, t))) <= m:
                    continue
                dcols = [c for t in window for c in cols.det_by_ut.get((u, t), [])]
                b.row(dcols, [1.0] * len(dcols), -math.inf, m * f.size[u],
                      f"{f.unit_label(u)} in {f.period(start)}..{f.period(start + m)}")

    # away_share: away from home office a <= share * present heads with home a
    share = f.instance.policy.max_away_share
    located_by_t = cols.relocation.located_by_t
    b.begin("away_share")
    rows: list[tuple[list[int], list[float], float, str]] = []
    if share < 1.0:
        keys = set(cols.det_from_office) | {(a, t) for t in located_by_t
                                            for a in range(len(f.offices))}
        for a, t in sorted(keys):
            dcols = cols.det_from_office.get((a, t), [])
            const, hcols, hvals = cols.heads_at_home(a, t)
            gone, gcols, gvals = cols.relocation.located_away(cols, a, t)
            label = f"{f.offices[a]} in {f.period(t)}"
            shares = [-share * v for v in hvals]
            b.row(dcols + gcols + hcols, [1.0] * len(dcols) + gvals + shares, -math.inf,
                  share * const - gone, label)
            # Relocatable people written per destination count as away from a through
            # their at-home columns, N - x; each x <= N (home_in_force), so leaving them
            # out leaves a weaker row, over whole numbers only, for the rounding below.
            rows.append((dcols + hcols, [1.0] * len(dcols) + shares, share * const, label))
    # away_share_in_whole_people: those rows rounded by mixed-integer rounding: 15% of 22
    # people is 3.3 away, which whole people make 3; the heads a reassignment brings in or
    # takes away are lifted the same way.  Measured on the shortfall LP: small 203.8 ->
    # 206.8 (its optimum is near 213), medium with homes held 1,561.8 -> 1,565.1; with the
    # coverage rows' cuts (rebalance.cuts) on top, small's reaches 211.4 where those cuts
    # alone reach 208.2.
    integer, lower = b.column_integrality(), b.column_lower()
    b.begin("away_share_in_whole_people")
    for row_cols, row_vals, upper, label in rows:
        whole = rounded_down(row_cols, row_vals, upper, integer, lower)
        if whole is not None:
            b.row(whole[0], whole[1], -math.inf, whole[2], label)


def _seat_rows(b: _Builder, f: _Frame, cols: _Columns) -> None:
    """Rows seats: home people present and not away + detailed in + hires started <= seats."""
    b.begin("seats")
    for o, office in enumerate(f.instance.offices):
        if office.seats is None:
            continue
        for t in range(f.T):
            const, row, vals = cols.heads_at_home(o, t)
            gone, gcols, gvals = cols.relocation.located_away(cols, o, t)
            const -= gone
            row += gcols
            vals += [-v for v in gvals]
            row += cols.det_from_office.get((o, t), [])
            vals += [-1.0] * len(cols.det_from_office.get((o, t), []))
            row += cols.det_to_office.get((o, t), [])
            vals += [1.0] * len(cols.det_to_office.get((o, t), []))
            for k in range(len(f.skills)):
                for col, s in cols.hire_by_ok.get((o, k), []):
                    if s <= t:
                        row.append(col)
                        vals.append(1.0)
            if row or const > office.seats:
                b.row(row, vals, -math.inf, office.seats - const, f"{office.name} in {f.period(t)}")


def _hiring_limit_rows(b: _Builder, f: _Frame, cols: _Columns) -> None:
    """Rows vacancies, max_hires and hiring_budget."""
    hire, H = cols.hire, cols.hire.keys
    # vacancies: vacancy-funded hires per office and skill over the horizon
    b.begin("vacancies")
    for (o, k), starts in sorted(cols.hire_by_ok.items()):
        funded = [c for c, _ in starts if H["new"][c - hire.start] == 0]
        vac = f.instance.vacancies.get((f.offices[o], f.skills[k]), 0)
        if len(funded) > 1:
            b.row(funded, [1.0] * len(funded), -math.inf, float(vac),
                  f"{f.skills[k]} at {f.offices[o]}")

    # max_hires: starts per office and period, all skills together
    b.begin("max_hires")
    for o, office in enumerate(f.instance.offices):
        cap_hires = office.max_hires_per_period
        if cap_hires is None:
            continue
        for s in range(f.T):
            starting = [c for k in range(len(f.skills)) for c, st in cols.hire_by_ok.get((o, k), [])
                        if st == s]
            if len(starting) > 1:
                b.row(starting, [1.0] * len(starting), -math.inf, float(cap_hires),
                      f"{office.name} in {f.period(s)}")

    # hiring_budget per year: onboarding of all hires + new-position salaries falling in it
    b.begin("hiring_budget")
    caps = _budget_caps(f, "hiring")
    # One look-up per start, skill and funding (Instance.hire_cost_by_year), not per column.
    by_year: dict[tuple[int, int, int], dict[str, float]] = {}
    costs = []
    for j in range(len(hire) if caps else 0):
        key = (int(H["period"][j]), int(H["skill"][j]), int(H["new"][j]))
        if key not in by_year:
            by_year[key] = f.instance.hire_cost_by_year(
                f.skills[key[1]], key[0], new_position=bool(key[2]))
        costs.append(by_year[key])
    for year, cap in caps:
        row, vals = [], []
        for j, cost in enumerate(costs):
            amount = cost.get(year, 0.0)
            if amount:
                row.append(hire.start + j)
                vals.append(amount)
        if row:
            b.row(row, vals, -math.inf, cap, f"hiring budget {year}")


def _moves_budget_rows(b: _Builder, f: _Frame, cols: _Columns) -> None:
    """Rows moves_budget per year: detail and relocation spending."""
    det, adjust = cols.det, cols.relocation.adjust
    b.begin("moves_budget")
    for year, cap in _budget_caps(f, "moves"):
        row, vals = [], []
        for j in range(len(det)):
            if f.year_of[int(det.keys["period"][j])] == year and cols.det_cost[j]:
                row.append(det.start + j)
                vals.append(cols.det_cost[j])
        for j in range(len(adjust)):
            if f.year_of[int(adjust.keys["period"][j])] == year:
                row.append(adjust.start + j)
                vals.append(1.0)
        # Relocation is paid in the year the home changes: cost x (g[t] - g[t-1]).
        for (u, o, t), col in cols.home_col.items():
            if f.year_of[t] != year:
                continue
            amount = float(f.relocation_cost[f.o_ix[f.rep[u].home_office], o])
            if amount:
                row.append(col)
                vals.append(amount)
                before = cols.home_col.get((u, o, t - 1))
                if before is not None:
                    row.append(before)
                    vals.append(-amount)
        if row:
            b.row(row, vals, -math.inf, cap, f"moves budget {year}")


def _budget_caps(f: _Frame, kind: str) -> list[tuple[str, float]]:
    """(year, cap) for every budget year with a ``kind`` ("hiring" or "moves") cap."""
    caps = []
    for year in f.instance.years:
        cap = f.instance.budget_cap(year, kind)
        if cap is not None:
            caps.append((year, float(cap)))
    return caps


def rounded_down(cols: list[int], vals: list[float], upper: float, integer: np.ndarray,
                 lower: np.ndarray) -> tuple[list[int], list[float], float] | None:
    """The mixed-integer rounding of the row ``vals @ x[cols] <= upper`` over whole numbers
    ``x >= 0``: ``sum F(a_j) x_j <= floor(upper)``, where ``f`` is the fraction of ``upper``
    and ``F(a) = floor(a) + max(frac(a) - f, 0) / (1 - f)`` (Nemhauser and Wolsey, *Integer
    and Combinatorial Optimization*, II.1.7; Wolsey, *Integer Programming*, 8.7).  Every
    whole-number point of the row keeps it; the LP relaxation's fractions of a person may
    not.  None where it says nothing new (a whole right-hand side), or where a column is
    continuous or may go below 0 (``integer`` and ``lower`` are per column of the model).
    """
    terms: dict[int, float] = {}
    for c, v in zip(cols, vals, strict=True):
        terms[c] = terms.get(c, 0.0) + v
    columns = np.fromiter(terms, int, len(terms))
    a = np.fromiter(terms.values(), float, len(terms))
    fraction = upper - math.floor(upper)
    if (not MIN_FRACTION < fraction < 1.0 - MIN_FRACTION or not integer[columns].all()
            or np.any(lower[columns] != 0.0)):
        return None
    whole = np.floor(a)
    lifted = whole + np.maximum(a - whole - fraction, 0.0) / (1.0 - fraction)
    keep = lifted != 0.0
    return columns[keep].tolist(), lifted[keep].tolist(), float(math.floor(upper))
