"""Place relocatable people whose details are written per destination (``docs/model.md``).

A relocatable person's detail cost, away-share count and seat depend on the home in force,
which the model decides.  Past ``PAIR_DETAILS_MAX_OFFICES`` offices their detail columns name
only the destination (home key -1), and the columns here make that exact:

- at home x[u, a, t]: works at a as its home in force (home a and not on detail), with
  sum_a x + sum_b d = 1 and x[a] <= home(a): given integer homes and details, x is exact and
  need not be integer, and away-from-a is home(a) - x[a];
- cost adjustment e[u, L, t] >= (detail cost from location L) - (cost from the original
  home's location) when the home in force is at L.

Both stay O(offices) per person and period, where (home, destination) pairs would need
O(offices^2).
"""

from __future__ import annotations

import math
from collections import defaultdict
from typing import TYPE_CHECKING

import numpy as np

if TYPE_CHECKING:
    from rebalance.model import _Builder, _Columns, _Frame
    from rebalance.model_data import ColumnBlock, Terms

__all__ = ["Relocation"]


class Relocation:
    """The at-home and cost-adjustment columns of one model, and their rows.

    ``at_col`` maps (unit, office, period) to an at-home column; ``located_by_t`` lists, per
    period, the units those columns place.
    """

    def __init__(self, b: _Builder, f: _Frame, det: ColumnBlock, det_cost: list[float]) -> None:
        """Add the ``at_home`` and ``detail_cost_adjustment`` column blocks to ``b``."""
        self.det, self.det_cost = det, np.asarray(det_cost, float)
        D = det.keys
        # Per-destination detail columns (positions in the detail block) by (unit, period).
        self.by_destination: dict[tuple[int, int], list[int]] = defaultdict(list)
        for j in range(len(det)):
            if D["home"][j] < 0:
                self.by_destination[(int(D["unit"][j]), int(D["period"][j]))].append(j)
        instance, offices = f.instance, f.offices
        self.locations = sorted({o.location for o in instance.offices})
        self.loc_of = [self.locations.index(o.location) for o in instance.offices]
        # Costs depend on locations only: any office at a location stands for all of them.
        self.office_at = {loc: a for a, loc in reversed(list(enumerate(self.loc_of)))}
        self.offices_in: dict[int, list[int]] = defaultdict(list)  # location -> offices
        for a, loc in enumerate(self.loc_of):
            self.offices_in[loc].append(a)
        at_keys: dict[str, list[int]] = {"unit": [], "office": [], "period": []}
        adj_keys: dict[str, list[int]] = {"unit": [], "location": [], "period": []}
        adj_bound: list[float] = []
        # Per adjustment column: the cost change of each of the unit's details that period.
        self.adj_changes: list[np.ndarray] = []
        for (u, t), js in sorted(self.by_destination.items()):
            b.check_clock()
            home0 = f.o_ix[f.rep[u].home_office]
            for a in range(len(offices)):
                at_keys["unit"].append(u)
                at_keys["office"].append(a)
                at_keys["period"].append(t)
            for loc in range(len(self.locations)):
                if loc == self.loc_of[home0] or not any(
                        self.loc_of[a] == loc for a in range(len(offices)) if a != home0):
                    continue
                delta = self.cost_changes(f, loc, js)
                if delta.any():
                    adj_keys["unit"].append(u)
                    adj_keys["location"].append(loc)
                    adj_keys["period"].append(t)
                    adj_bound.append(float(np.abs(delta).max()))
                    self.adj_changes.append(delta)
        self.at_home = b.add_block("at_home", at_keys, np.zeros(len(at_keys["unit"])),
                                   np.ones(len(at_keys["unit"])), False)
        self.adjust = b.add_block("detail_cost_adjustment", adj_keys,
                                  -np.asarray(adj_bound, float), np.asarray(adj_bound, float),
                                  False, cost=np.ones(len(adj_bound)))
        self.adj_bound = adj_bound
        self.at_col: dict[tuple[int, int, int], int] = {}
        self.located_by_t: dict[int, list[int]] = defaultdict(list)
        X = self.at_home.keys
        for j in range(len(self.at_home)):
            u, o, t = int(X["unit"][j]), int(X["office"][j]), int(X["period"][j])
            self.at_col[(u, o, t)] = self.at_home.start + j
            if not self.located_by_t[t] or self.located_by_t[t][-1] != u:
                self.located_by_t[t].append(u)

    def cost_changes(self, f: _Frame, loc: int, js: list[int]) -> np.ndarray:
        """Change in the cost of each detail (positions ``js`` in the block) were it to leave
        from location ``loc`` instead of the original home."""
        here = self.office_at[loc]
        return (f.detail_cost[here, self.det.keys["office"][js]]
                - self.det_cost[js])

    def located_away(self, cols: _Columns, a: int, t: int) -> Terms:
        """Relocatable people placed by at-home columns who are away from home a in t."""
        const, hcols, hvals = 0.0, [], []
        for u in self.located_by_t.get(t, []):
            c, hc, hv = cols.home_terms(u, a, t)
            const += c
            hcols += [*hc, self.at_col[(u, a, t)]]
            hvals += [*hv, -1.0]
        return const, hcols, hvals

    def add_rows(self, b: _Builder, f: _Frame, cols: _Columns) -> None:
        """Rows home_in_force, one_place, detail_not_home, detail_cost_adjustment and
        detail_cost_floor."""
        offices = f.offices
        # home_in_force: at home only at the home in force, x[u,a,t] <= N(u,a,t)
        b.begin("home_in_force")
        for (u, a, t), col in sorted(self.at_col.items()):
            const, hcols, hvals = cols.home_terms(u, a, t)
            b.row([col, *hcols], [1.0] + [-v for v in hvals], -math.inf, const,
                  f"{f.unit_label(u)} at {offices[a]} in {f.period(t)}")
        # one_place: a relocatable person is at home or on one detail: sum_a x + sum_b d = 1
        b.begin("one_place")
        for t, located in sorted(self.located_by_t.items()):
            for u in located:
                row = [self.at_col[(u, a, t)] for a in range(len(offices))] + cols.det_by_ut[(u, t)]
                b.row(row, [1.0] * len(row), 1.0, 1.0, f"{f.unit_label(u)} in {f.period(t)}")
        # detail_not_home: no detail to the office that is the home in force
        b.begin("detail_not_home")
        for (u, o, t), to_o in sorted(cols.det_to.items()):
            dcols = [c for c in to_o if self.det.keys["home"][c - self.det.start] < 0]
            if not dcols:
                continue
            const, hcols, hvals = cols.home_terms(u, o, t)
            b.row(dcols + hcols, [1.0] * len(dcols) + hvals, -math.inf, 1.0 - const,
                  f"{f.unit_label(u)} to {offices[o]} in {f.period(t)}")
        # detail_cost_adjustment: e >= sum_b (c(L,b) - c(home0,b)) d[b] - M (1 - G_L),
        # e >= -M G_L, where G_L = sum of home columns at offices in location L
        b.begin("detail_cost_adjustment")
        A_ = self.adjust.keys
        for j in range(len(self.adjust)):
            u, loc, t = int(A_["unit"][j]), int(A_["location"][j]), int(A_["period"][j])
            col, big = self.adjust.start + j, float(self.adj_bound[j])
            g_cols = [cols.home_col[(u, a, t)] for a in self.offices_in[loc]
                      if (u, a, t) in cols.home_col]
            js = self.by_destination[(u, t)]
            terms = [(self.det.start + i, float(v))
                     for i, v in zip(js, self.adj_changes[j], strict=True) if v]
            label = f"{f.unit_label(u)} from {self.locations[loc]} in {f.period(t)}"
            b.row([c for c, _ in terms] + [col] + g_cols,
                  [v for _, v in terms] + [-1.0] + [big] * len(g_cols), -math.inf, big, label)
            b.row([col, *g_cols], [-1.0] + [-big] * len(g_cols), -math.inf, 0.0, label)
        # detail_cost_floor: e >= sum_b min(c(L,b) - c(home0,b), 0) d[b].  Valid in every
        # plan (at L, e pays the change itself; elsewhere e >= 0), and it keeps the LP from
        # paying itself M/2 with half a new home and no detail at all, which left the cost
        # stage's LP bound far below 0 (medium: -5.9e7) and row prices useless (bounds.py).
        b.begin("detail_cost_floor")
        for j in range(len(self.adjust)):
            u, loc, t = int(A_["unit"][j]), int(A_["location"][j]), int(A_["period"][j])
            terms = [(self.det.start + i, float(v))
                     for i, v in zip(self.by_destination[(u, t)], self.adj_changes[j],
                                     strict=True) if v < 0]
            b.row([self.adjust.start + j] + [c for c, _ in terms],
                  [-1.0] + [v for _, v in terms], -math.inf, 0.0,
                  f"{f.unit_label(u)} from {self.locations[loc]} in {f.period(t)}")
