"""Effort standards (hours per case) and non-case hours, from quality-checked time records.

Hours per case are measured against arriving cases: hours booked to case type ``c`` by skill
``s`` in an office, divided by the cases of type ``c`` that arrived there in the same months
(work in progress is assumed steady across the window).  The months are the office and skill's
own: those its timesheets cover, kept or excluded, that have an arrivals row for ``c``.  An
office with cases but no usable records of a skill takes the pooled value (``basis`` says so,
and ``notes`` says so, for the command's warnings).  Kept hours are first
grossed up by the office's coverage factor (expected hours of all timesheets / of the kept
ones), so excluding a bad timesheet does not make work look cheaper.

Office values are shrunk toward the value pooled over offices by case counts::

    pooled[c, s]    = sum_o H[o, c, s] / sum_o N[o, c, s]
    standard[o,c,s] = (H[o, c, s] + k * pooled[c, s]) / (N[o, c, s] + k)

i.e. a weighted mean with weight ``w = N / (N + k)`` on the office's own ratio, ``k`` being
``standards.shrinkage_cases`` (a credibility weight: an office with ``k`` cases gets half its
own value).  Intervals are percentile bootstrap intervals over months resampled with
replacement (the same months for every office, keeping their common swings), seeded.

Non-case work (policy, guidance, training, ...) is trended per office, skill and activity:
monthly hours, each month grossed up by its own coverage factor (timesheets counted in the
month of their reporting period, records or none), with a Theil-Sen line (robust to an odd
month) over the months with a kept timesheet, extended over the horizon and floored at zero.
An office with no kept record has no non-case history: ``notes`` says so.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from datetime import date

import numpy as np
import pandas as pd
from scipy.stats import theilslopes

from rebalance.demand.history import History
from rebalance.demand.quality import QualityResult, coverage

__all__ = ["EffortStandards", "estimate_standards", "forecast_noncase"]


@dataclass(frozen=True)
class EffortStandards:
    """``table``: case_type, skill, office, cases (a whole number), hours, office_hours_per_case,
    pooled_hours_per_case, weight, hours_per_case, lower, upper, basis ("office" or "pooled: no
    usable time records") (one row per office where the pooled standard is positive).
    ``noncase``: office, skill, activity, month, hours (grossed-up monthly history).
    ``window``: first and last month of kept records.  ``notes``: warnings (an office that
    takes the pooled value for want of usable records, or has no non-case work estimated),
    said by ``rebalance demand`` with its other warnings.
    """

    table: pd.DataFrame
    noncase: pd.DataFrame
    window: tuple[int, int]
    notes: tuple[str, ...] = ()
    kept_months: Mapping[str, tuple[int, ...]] = field(default_factory=dict)
    """Per office, the months it has a kept timesheet in: the months a non-case trend is
    fitted over (elsewhere its hours are unknown, not 0)."""

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
    kept_months = np.sort(kept["month"].unique())
    if len(kept_months) == 0:
        raise ValueError("no time records passed quality control")
    window = (int(kept_months[0]), int(kept_months[-1]))
    case_types = list(history.case_types)
    offices = sorted(history.arrivals["office"].unique())
    skills = sorted(kept["skill"].unique())
    case_hours = kept[kept["activity"].isin(case_types)]

    # The months an office and skill are measured over are those its timesheets cover, kept
    # or excluded: the coverage factor grosses the kept hours up to all of them, so their
    # cases all count (dropping a fully excluded month's cases as well corrected it twice).
    # A month with no time records of the office and skill, or no arrivals row for the case
    # type, is left out of both hours and cases (a sweep: an office with records for 2026
    # only had its cases counted over 2025 too; records past the last arrivals month counted
    # with zero cases).
    present = _office_skill_months(history, quality)
    arrival_months = set(int(m) for m in history.arrivals["month"].unique())
    months = np.array(sorted({m for _, _, m in present} & arrival_months), dtype=int)
    if len(months) == 0:
        raise ValueError("no month has both time records and case arrivals")
    o_ix = {o: i for i, o in enumerate(offices)}
    c_ix = {c: i for i, c in enumerate(case_types)}
    s_ix = {s: i for i, s in enumerate(skills)}
    t_ix = {int(m): i for i, m in enumerate(months)}
    has_records = np.zeros((len(offices), len(skills), len(months)), dtype=bool)
    for o, s, m in present:
        if o in o_ix and s in s_ix and m in t_ix:
            has_records[o_ix[o], s_ix[s], t_ix[m]] = True
    # An office and skill with no kept hours at all (or an office whose coverage factor is
    # undefined) has no usable records: it takes the pooled value, with a note.
    usable = np.zeros((len(offices), len(skills)), dtype=bool)
    for o, s in kept.loc[kept["office"].map(factor).notna(), ["office", "skill"]].drop_duplicates(
            ).itertuples(index=False):
        if o in o_ix:
            usable[o_ix[o], s_ix[s]] = True
    has_records &= usable[:, :, None]
    has_arrivals = np.zeros((len(offices), len(case_types), len(months)), dtype=bool)
    cases = np.zeros((len(offices), len(case_types), len(months)))
    arr = history.arrivals[history.arrivals["month"].isin(months)
                           & history.arrivals["case_type"].isin(case_types)]
    for o, c, m, n in zip(arr["office"], arr["case_type"], arr["month"], arr["count"],
                          strict=True):
        cases[o_ix[o], c_ix[c], t_ix[int(m)]] = n
        has_arrivals[o_ix[o], c_ix[c], t_ix[int(m)]] = True
    # mask[o, c, s, t]: month t counts for office o, case type c and skill s.
    mask = has_records[:, None, :, :] & has_arrivals[:, :, None, :]

    # Arrays: H[o, c, s, t] hours and N[o, c, s, t] cases, zero outside the mask.
    hours = np.zeros((len(offices), len(case_types), len(skills), len(months)))
    grouped = case_hours.groupby(["office", "activity", "skill", "month"])["hours"].sum()
    for key, v in grouped.items():
        o, c, s, m = (str(key[0]), str(key[1]), str(key[2]), int(key[3]))  # type: ignore[index]
        if o in o_ix and m in t_ix:
            hours[o_ix[o], c_ix[c], s_ix[s], t_ix[m]] += float(v)
    hours = np.where(mask, hours, 0.0)
    cases = np.where(mask, cases[:, :, None, :], 0.0)

    k = cfg.shrinkage_cases

    def standards(h: np.ndarray, n: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        # h: (O, C, S) summed hours, n: (O, C, S) summed cases.  Hours booked where there
        # were no cases say nothing per case: such an office takes the pooled value (its
        # weight is 0), where (h + k x pooled) / k had made it h / k above the pool (a sweep:
        # 41.98 hours a case against a pooled 1.81).
        h = np.where(n > 0, h, 0.0)
        pooled = h.sum(axis=0) / np.maximum(n.sum(axis=0), 1e-12)
        with np.errstate(invalid="ignore", divide="ignore"):
            shrunk = np.where(n + k > 0, (h + k * pooled[None]) / (n + k), pooled[None])
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
    notes = []
    offered = cases_offered(history, case_types, offices)
    for c, ci in c_ix.items():
        for s, si in s_ix.items():
            if pooled[ci, si] <= 0:
                continue
            for o, oi in o_ix.items():
                n = n_sum[oi, ci, si]
                basis = "office"
                if n == 0 and offered[oi, ci] > 0:
                    basis = "pooled: no usable time records"
                    notes.append(f"office '{o}' has {offered[oi, ci]:,.0f} cases of type '{c}' "
                                 f"but no usable time records of skill '{s}' in months with "
                                 f"arrivals; it takes the pooled value of the other offices, "
                                 f"{pooled[ci, si]:.3f} hours a case")
                # A sum of whole arrivals counts (exact in a float): written as the count it
                # is, not 6354.0000.
                rows.append((c, s, o, int(n), h_sum[oi, ci, si],
                             h_sum[oi, ci, si] / n if n > 0 else np.nan, pooled[ci, si],
                             n / (n + k), shrunk[oi, ci, si], lower[oi, ci, si],
                             upper[oi, ci, si], basis))
    notes += _case_types_without_hours(history, case_types, pooled, offered)
    table = pd.DataFrame(rows, columns=["case_type", "skill", "office", "cases", "hours",
                                        "office_hours_per_case", "pooled_hours_per_case",
                                        "weight", "hours_per_case", "lower", "upper", "basis"])
    # Non-case hours are fitted month by month, so each month is grossed up by its own
    # coverage, and a month with nothing kept is left out of the fit: the office-wide factor
    # spread one excluded month's hours over the others while the month itself read as 0,
    # which a median-based trend ignores (+4.3% with one month of 24 excluded, by hand).
    month_factor, office_months = _month_coverage(history, quality)
    nc = quality.kept[~quality.kept["activity"].isin(case_types)].copy()
    nc["hours"] = nc["hours"] * [month_factor.get((o, int(m)), 1.0)
                                 for o, m in zip(nc["office"], nc["month"], strict=True)]
    noncase = (nc.groupby(["office", "skill", "activity", "month"])["hours"].sum()
               .reset_index())
    # An office with no kept time record has no non-case history to trend: said, as its case
    # work's pooled standard is (a review: all its non-case hours had vanished silently).
    for o in sorted(set(offices) | set(quality.records["office"].astype(str))):
        if o not in office_months:
            notes.append(f"office '{o}' has no usable time records (none, or none that passed "
                         "quality control), so no non-case work could be estimated for it; "
                         "its demand holds case work only")
    return EffortStandards(table, noncase, window, tuple(notes), office_months)


def _case_types_without_hours(history: History, case_types: list[str], pooled: np.ndarray,
                              offered: np.ndarray) -> list[str]:
    """Notes for case types with arrivals and time records but no hours counted: they have
    no standard, so no row, and add no demand.  (With no records at all, the demand's own
    warning says so; with records of 0 hours each the case type had vanished silently, a
    sweep.)"""
    records = history.records
    notes = []
    for ci, c in enumerate(case_types):
        booked = records.loc[records["activity"] == c, "hours"]
        if offered[:, ci].sum() <= 0 or not len(booked) or (pooled[ci] > 0).any():
            continue
        if float(booked.sum()) == 0:
            said = (f"no hours booked to it (its {len(booked):,} time record(s) all book 0 "
                    "hours)")
        else:
            said = (f"none of the {float(booked.sum()):,.0f} hours booked to it counts (none "
                    "is in a kept time record of a month with arrivals)")
        notes.append(f"case type '{c}' has arrivals but {said}; it adds no demand")
    return notes


def _month_coverage(history: History, quality: QualityResult
                    ) -> tuple[dict[tuple[str, int], float], dict[str, tuple[int, ...]]]:
    """Per office and month, expected hours of all timesheets / of the kept ones (the
    coverage factor of that month alone), and per office the months with a kept timesheet.

    A timesheet's month is its reporting period's (an ISO week's Thursday's), not its
    records': one with expected hours but no records counts in its month as it counts in the
    office-wide factor (a review: taking the month from the records had dropped such
    timesheets, and half of an office's people without records in a year had cut its
    non-case hours by 80% where the documented method gives +9%)."""
    records = quality.records
    ts = quality.timesheets.assign(month=[_period_month(history.period_kind, int(p))
                                          for p in quality.timesheets["period"]])
    by_month = coverage(ts, ["office", "month"]).dropna(subset=["coverage_factor"])
    factor = {(str(o), int(m)): float(f) for o, m, f in zip(
        by_month["office"], by_month["month"], by_month["coverage_factor"], strict=True)}
    months: dict[str, set[int]] = {}
    for o, m in records.loc[~records["excluded"], ["office", "month"]].itertuples(index=False):
        months.setdefault(str(o), set()).add(int(m))
    return factor, {o: tuple(sorted(ms)) for o, ms in months.items()}


def cases_offered(history: History, case_types: list[str], offices: list[str]) -> np.ndarray:
    """Cases of each office and case type over the whole arrivals history: (O, C)."""
    out = np.zeros((len(offices), len(case_types)))
    o_ix = {o: i for i, o in enumerate(offices)}
    c_ix = {c: i for i, c in enumerate(case_types)}
    sums = history.arrivals.groupby(["office", "case_type"])["count"].sum()
    for key, n in sums.items():
        o, c = str(key[0]), str(key[1])  # type: ignore[index]
        if o in o_ix and c in c_ix:
            out[o_ix[o], c_ix[c]] = float(n)
    return out


def _period_month(kind: str, period: int) -> int:
    """The month a reporting period belongs to (see ``history.reporting_period``)."""
    if kind != "week":
        return int(period)
    thursday = date.fromordinal(int(period) * 7 + 1 + 3)
    return thursday.year * 12 + thursday.month - 1


def _office_skill_months(history: History, quality: QualityResult) -> set[tuple[str, str, int]]:
    """(office, skill, month) covered by a timesheet, kept or excluded: every time record,
    and every timesheet with expected hours (its office's months for each skill the person
    books), so a timesheet with expected hours but no records counts as the coverage factor
    counts it."""
    rec = quality.records
    out = {(str(o), str(s), int(m)) for o, s, m in
           rec[["office", "skill", "month"]].drop_duplicates().itertuples(index=False)}
    sheets = quality.timesheets
    sheets = sheets[sheets["expected_hours"].notna() & sheets["office"].notna()]
    skills = rec.groupby("person")["skill"].unique()
    for person, period, office in zip(sheets["person"], sheets["period"], sheets["office"],
                                      strict=True):
        month = _period_month(history.period_kind, int(period))
        for skill in skills.get(person, ()):
            out.add((str(office), str(skill), month))
    return out


def forecast_noncase(standards: EffortStandards, months: list[int]) -> pd.DataFrame:
    """Trended non-case hours: office, skill, activity, month, hours, slope_hours_per_month."""
    first, last = standards.window
    rows = []
    for (office, skill, activity), group in standards.noncase.groupby(
            ["office", "skill", "activity"], sort=True):
        window = np.asarray(standards.kept_months.get(str(office), ()), dtype=int)
        window = window[(window >= first) & (window <= last)]
        if not len(window):
            window = np.arange(first, last + 1)
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
