"""Effort standards (hours per case) and non-case hours, from quality-checked time records.

Hours per case are measured against arriving cases: hours booked to case type ``c`` by skill
``s`` in an office over the window, divided by the cases of type ``c`` that arrived there in
the same months (work in progress is assumed steady across the window).  Kept hours are first
grossed up by the office's coverage factor (expected hours of all timesheets / of the kept
ones), so excluding a bad timesheet does not make work look cheaper.

Office values are shrunk toward the value pooled over offices by case counts::

    pooled[c, s]    = sum_o H[o, c, s] / sum_o N[o, c]
    standard[o,c,s] = (H[o, c, s] + k * pooled[c, s]) / (N[o, c] + k)

i.e. a weighted mean with weight ``w = N / (N + k)`` on the office's own ratio, ``k`` being
``standards.shrinkage_cases`` (a credibility weight: an office with ``k`` cases gets half its
own value).  Intervals are percentile bootstrap intervals over months resampled with
replacement (the same months for every office, keeping their common swings), seeded.

Non-case work (policy, guidance, training, ...) is trended per office, skill and activity:
monthly hours with a Theil-Sen line (robust to an odd month), extended over the horizon and
floored at zero.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd
from scipy.stats import theilslopes

from rebalance.demand.history import History
from rebalance.demand.quality import QualityResult

__all__ = ["EffortStandards", "estimate_standards", "forecast_noncase"]


@dataclass(frozen=True)
class EffortStandards:
    """``table``: case_type, skill, office, cases, hours, office_hours_per_case,
    pooled_hours_per_case, weight, hours_per_case, lower, upper (one row per office where the
    pooled standard is positive).  ``noncase``: office, skill, activity, month, hours
    (grossed-up monthly history).  ``window``: first and last month used.
    """

    table: pd.DataFrame
    noncase: pd.DataFrame
    window: tuple[int, int]

    def hours_per_case(self) -> dict[tuple[str, str, str], float]:
        """(office, case_type, skill) -> shrunk hours per case."""
        t = self.table
        return {(o, c, s): float(v) for o, c, s, v in
                zip(t["office"], t["case_type"], t["skill"], t["hours_per_case"], strict=True)}


def estimate_standards(history: History, quality: QualityResult) -> EffortStandards:
    """Hours per case by case type and skill, office values shrunk toward the pool."""
    cfg = history.settings.standards
    kept = quality.kept.copy()
    factor = quality.coverage.set_index("office")["coverage_factor"]
    kept["hours"] = kept["hours"] * kept["office"].map(factor).fillna(1.0)
    months = np.sort(kept["month"].unique())
    if len(months) == 0:
        raise ValueError("no time records passed quality control")
    window = (int(months[0]), int(months[-1]))
    case_types = list(history.case_types)
    offices = sorted(history.arrivals["office"].unique())
    skills = sorted(kept["skill"].unique())
    case_hours = kept[kept["activity"].isin(case_types)]

    # Arrays: H[o, c, s, t] hours and N[o, c, t] cases, t over the window's months.
    o_ix = {o: i for i, o in enumerate(offices)}
    c_ix = {c: i for i, c in enumerate(case_types)}
    s_ix = {s: i for i, s in enumerate(skills)}
    t_ix = {int(m): i for i, m in enumerate(months)}
    hours = np.zeros((len(offices), len(case_types), len(skills), len(months)))
    grouped = case_hours.groupby(["office", "activity", "skill", "month"])["hours"].sum()
    for key, v in grouped.items():
        o, c, s, m = (str(key[0]), str(key[1]), str(key[2]), int(key[3]))  # type: ignore[index]
        if o in o_ix:
            hours[o_ix[o], c_ix[c], s_ix[s], t_ix[m]] += float(v)
    cases = np.zeros((len(offices), len(case_types), len(months)))
    arr = history.arrivals[history.arrivals["month"].isin(months)
                           & history.arrivals["case_type"].isin(case_types)]
    for o, c, m, n in zip(arr["office"], arr["case_type"], arr["month"], arr["count"],
                          strict=True):
        cases[o_ix[o], c_ix[c], t_ix[int(m)]] = n

    k = cfg.shrinkage_cases

    def standards(h: np.ndarray, n: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        # h: (O, C, S, ...) summed hours, n: (O, C, ...) summed cases.  Hours booked where
        # there were no cases say nothing per case: such an office takes the pooled value (its
        # weight is 0), where (h + k x pooled) / k had made it h / k above the pool (a sweep:
        # 41.98 hours a case against a pooled 1.81).
        h = np.where(n[:, :, None] > 0, h, 0.0)
        pooled = h.sum(axis=0) / np.maximum(n.sum(axis=0), 1e-12)[:, None]
        shrunk = (h + k * pooled[None]) / (n[:, :, None] + k)
        return pooled, shrunk

    h_sum, n_sum = hours.sum(axis=-1), cases.sum(axis=-1)
    pooled, shrunk = standards(h_sum, n_sum)
    rng = np.random.default_rng(cfg.seed)
    draws = rng.integers(0, len(months), size=(cfg.bootstrap_samples, len(months)))
    boot = np.empty((cfg.bootstrap_samples, *shrunk.shape))
    for b, idx in enumerate(draws):
        boot[b] = standards(hours[..., idx].sum(axis=-1), cases[..., idx].sum(axis=-1))[1]
    tail = (1 - cfg.interval_level) / 2
    lower, upper = np.quantile(boot, [tail, 1 - tail], axis=0)

    rows = []
    for c, ci in c_ix.items():
        for s, si in s_ix.items():
            if pooled[ci, si] <= 0:
                continue
            for o, oi in o_ix.items():
                n = n_sum[oi, ci]
                rows.append((c, s, o, n, h_sum[oi, ci, si],
                             h_sum[oi, ci, si] / n if n > 0 else np.nan, pooled[ci, si],
                             n / (n + k), shrunk[oi, ci, si], lower[oi, ci, si],
                             upper[oi, ci, si]))
    table = pd.DataFrame(rows, columns=["case_type", "skill", "office", "cases", "hours",
                                        "office_hours_per_case", "pooled_hours_per_case",
                                        "weight", "hours_per_case", "lower", "upper"])
    nc = kept[~kept["activity"].isin(case_types)]
    noncase = (nc.groupby(["office", "skill", "activity", "month"])["hours"].sum()
               .reset_index())
    return EffortStandards(table, noncase, window)


def forecast_noncase(standards: EffortStandards, months: list[int]) -> pd.DataFrame:
    """Trended non-case hours: office, skill, activity, month, hours, slope_hours_per_month."""
    first, last = standards.window
    window = np.arange(first, last + 1)
    rows = []
    for (office, skill, activity), group in standards.noncase.groupby(
            ["office", "skill", "activity"], sort=True):
        series = group.set_index("month")["hours"].reindex(window, fill_value=0.0)
        y = series.to_numpy(dtype=float)
        if len(y) >= 2 and np.ptp(y) > 0:
            slope, intercept, _, _ = theilslopes(y, window)
        else:
            slope, intercept = 0.0, float(np.mean(y))
        for m in months:
            rows.append((office, skill, activity, m, max(0.0, intercept + slope * m), slope))
    return pd.DataFrame(rows, columns=["office", "skill", "activity", "month", "hours",
                                       "slope_hours_per_month"])
