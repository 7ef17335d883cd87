"""Quality control of time records, before anything is estimated from them.

Checks (each record can fail several, all listed in its ``checks_failed``; the first in this
order is its ``check``, the one ``qc_summary.csv`` counts it under):

``hours_out_of_bounds``
    a record's hours are negative or above ``max_record_hours``.
``unknown_activity``
    the activity code is not in ``activities.csv``.
``duplicate``
    the same person, period, office, skill and activity appear more than once.
``anomaly``
    the hours differ from the person's own recent history on that activity by a robust score
    above the threshold (see :func:`robust_scores`) and, when the person has a value a year
    earlier (12 monthly or 52 weekly periods), from that value too.  Records with
    out-of-bounds hours are not scored (their ``score`` is NaN), so never fail it.
``incomplete``
    the person's total for the period is outside ``expected x (1 +- tolerance)``, or no
    expected hours are given for that person and period.

A record failing any check takes its whole timesheet (person and period) out of estimation:
a timesheet with one bad line cannot be trusted to be right elsewhere, and excluding whole
timesheets lets :mod:`rebalance.demand.standards` gross the kept hours up by the share of
expected hours kept.  Excluded records are counted, never silently dropped.

An expected-hours value is *implausible* when it is above the hours in its period (24 x 31 for
a month, 24 x 7 for a week) or more than ``IMPLAUSIBLE_RATIO`` times the person's median
expected hours (a typo such as 1500 for 150).  Its timesheet is incomplete, hence excluded,
and the coverage factor counts it at the person's median expected hours instead, so one typo
cannot scale an office's hours up; the verdict is then at best "usable with care".
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from rebalance.demand.history import History, QualitySettings

__all__ = ["CHECKS", "QualityResult", "check_quality", "coverage", "robust_scores"]

CHECKS = ("hours_out_of_bounds", "unknown_activity", "duplicate", "anomaly", "incomplete")
MAD_TO_SD = 1.4826  # MAD of a normal sample x 1.4826 estimates its standard deviation
# Expected hours more than this many times the person's median are taken for a typo: a change
# of contract (part time to full time) is at most about 2x; 3x leaves room (common practice,
# not from a published source).
IMPLAUSIBLE_RATIO = 3.0
PERIOD_HOURS = {"month": 24.0 * 31, "week": 24.0 * 7}  # no period holds more hours


@dataclass(frozen=True)
class QualityResult:
    """Outcome of the checks.

    ``records``: the time records with ``check`` (first failed check, "" if none),
    ``checks_failed`` (all failed, space-separated), ``score`` (robust anomaly score, NaN if
    not scored) and ``excluded`` (its timesheet failed).
    ``timesheets``: person, period, office, reported_hours, expected_hours, complete,
    plausible (expected hours not implausible, see the module notes), coverage_hours (expected
    hours the coverage factor counts: the person's median where implausible), excluded.
    ``compliance``: period, people, complete, share_complete.
    ``summary``: check, records, hours (records failing each check, first check only), plus
    rows ``excluded_with_timesheet`` and ``kept``.
    ``coverage``: office, expected_hours_all, expected_hours_kept, coverage_factor.
    """

    records: pd.DataFrame
    timesheets: pd.DataFrame
    compliance: pd.DataFrame
    summary: pd.DataFrame
    coverage: pd.DataFrame
    verdict: str

    @property
    def kept(self) -> pd.DataFrame:
        return self.records[~self.records["excluded"]]


def robust_scores(values: np.ndarray, reference: np.ndarray, floor: np.ndarray
                  ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Robust z-scores of ``values`` against rows of ``reference`` (NaN = not observed).

    score = (x - median) / max(1.4826 x MAD, floor), the median/MAD rule (Hampel's outlier
    rule, common practice in robust statistics).  Returns (scores, medians, scales).
    """
    median = np.nanmedian(reference, axis=1)
    mad = np.nanmedian(np.abs(reference - median[:, None]), axis=1)
    scale = np.maximum(MAD_TO_SD * mad, floor)
    return (values - median) / scale, median, scale


def check_quality(history: History) -> QualityResult:
    """Run every check on the history's time records."""
    q = history.settings.quality
    rec = history.records.copy()
    fails: dict[str, np.ndarray] = {}
    fails["hours_out_of_bounds"] = ((rec["hours"] < 0) | (rec["hours"] > q.max_record_hours)
                                    ).to_numpy()
    fails["unknown_activity"] = (~rec["activity"].isin(list(history.activities))).to_numpy()
    key = ["person", "period", "office", "skill", "activity"]
    fails["duplicate"] = rec.duplicated(key, keep=False).to_numpy()
    scores = _anomaly_scores(rec, ~fails["hours_out_of_bounds"], q, history.periods_per_year)
    rec["score"] = scores
    fails["anomaly"] = np.nan_to_num(np.abs(scores)) > q.anomaly_threshold
    sheets = _timesheets(rec, history.expected, q, PERIOD_HOURS.get(history.period_kind,
                                                                     PERIOD_HOURS["month"]))
    incomplete = sheets.loc[~sheets["complete"], ["person", "period"]]
    marks = rec.merge(incomplete.assign(_inc=True), on=["person", "period"], how="left")["_inc"]
    fails["incomplete"] = marks.fillna(False).to_numpy(dtype=bool)

    failed = np.column_stack([fails[c] for c in CHECKS])
    names = np.array(CHECKS)
    rec["check"] = [names[row][0] if row.any() else "" for row in failed]
    rec["checks_failed"] = [" ".join(names[row]) for row in failed]
    bad_sheets = rec.loc[rec["check"] != "", ["person", "period"]].drop_duplicates()
    sheets = sheets.merge(bad_sheets.assign(excluded=True), on=["person", "period"], how="left")
    sheets["excluded"] = sheets["excluded"].fillna(False).astype(bool) | ~sheets["complete"]
    rec = rec.merge(sheets[["person", "period", "excluded"]], on=["person", "period"], how="left")
    rec["excluded"] = rec["excluded"].fillna(True).astype(bool)

    summary_rows = []
    for check in CHECKS:
        mask = rec["check"] == check
        summary_rows.append((check, int(mask.sum()), float(rec.loc[mask, "hours"].sum())))
    collateral = rec["excluded"] & (rec["check"] == "")
    summary_rows.append(("excluded_with_timesheet", int(collateral.sum()),
                         float(rec.loc[collateral, "hours"].sum())))
    summary_rows.append(("kept", int((~rec["excluded"]).sum()),
                         float(rec.loc[~rec["excluded"], "hours"].sum())))
    summary = pd.DataFrame(summary_rows, columns=["check", "records", "hours"])

    compliance = (sheets[sheets["expected_hours"].notna()].groupby("period")
                  .agg(people=("person", "nunique"), complete=("complete", "sum"))
                  .reset_index())
    compliance["share_complete"] = compliance["complete"] / compliance["people"]
    verdict = _verdict(rec, sheets, q)
    return QualityResult(rec, sheets, compliance, summary, coverage(sheets), verdict)


def _anomaly_scores(rec: pd.DataFrame, usable: np.ndarray, q: QualitySettings,
                    lag: int) -> np.ndarray:
    """Score each record against the person's previous periods and the period a year earlier."""
    data = rec[usable]
    periods = np.sort(data["period"].unique())
    if len(periods) == 0:
        return np.full(len(rec), np.nan)
    col = {m: i for i, m in enumerate(periods)}
    hours = data.groupby(["person", "activity", "period"])["hours"].sum().unstack("period")
    hours = hours.reindex(columns=periods)
    active = data.groupby(["person", "period"]).size().unstack("period").reindex(columns=periods)
    present = active.reindex(hours.index.get_level_values("person")).notna().to_numpy()
    # A period the person reported in but did not book this activity counts as 0 hours.
    grid = np.where(present, np.nan_to_num(hours.to_numpy()), np.nan)
    score_grid = np.full(grid.shape, np.nan)
    for j, period in enumerate(periods):
        lo = max(0, j - q.anomaly_window)
        ref = grid[:, lo:j]
        enough = ((np.sum(~np.isnan(ref), axis=1) >= q.anomaly_min_reference)
                  & ~np.isnan(grid[:, j]))
        if not enough.any():
            continue
        x = grid[enough, j]
        ref = ref[enough]
        # Hours on one activity swing with that period's cases, so the scale has a floor.
        floor = np.maximum(q.anomaly_floor_share * np.abs(np.nanmedian(ref, axis=1)), 1.0)
        score, median, scale = robust_scores(x, ref, floor)
        # Small absolute changes are not worth a flag, whatever the score.
        score = np.where(np.abs(x - median) >= q.anomaly_min_hours, score, 0.0)
        if period - lag in col:
            # Seasonal work: flag only what is also unusual against a year earlier, so the
            # score is the smaller of the two (same scale) wherever that value exists.
            earlier = grid[enough, col[period - lag]]
            year_score = (x - earlier) / scale
            smaller = np.minimum(np.abs(score), np.abs(year_score))
            score = np.where(np.isnan(earlier), score, np.sign(score) * smaller)
        score_grid[np.flatnonzero(enough), j] = score
    lookup = pd.DataFrame(score_grid, index=hours.index, columns=periods).stack()
    lookup = lookup.reset_index()
    lookup.columns = ["person", "activity", "period", "score"]
    keyed = rec[["person", "activity", "period"]].merge(
        lookup, on=["person", "activity", "period"], how="left")
    out = keyed["score"].to_numpy(dtype=float, copy=True)
    out[~usable] = np.nan
    return out


def _timesheets(rec: pd.DataFrame, expected: pd.DataFrame, q: QualitySettings,
                period_hours: float) -> pd.DataFrame:
    by_office = rec.groupby(["person", "period", "office"])["hours"].sum().reset_index()
    # The timesheet's office is where most of its hours were booked.
    main = (by_office.sort_values("hours", ascending=False)
            .drop_duplicates(["person", "period"])[["person", "period", "office"]])
    reported = rec.groupby(["person", "period"])["hours"].sum().rename("reported_hours")
    sheets = (expected.merge(reported.reset_index(), on=["person", "period"], how="outer")
              .merge(main, on=["person", "period"], how="left"))
    home = (rec.groupby("person")["office"].agg(lambda s: s.mode().iloc[0]))
    sheets["office"] = sheets["office"].fillna(sheets["person"].map(home))
    sheets["reported_hours"] = sheets["reported_hours"].fillna(0.0)
    exp = sheets["expected_hours"]
    sheets["complete"] = (exp.notna()
                          & (sheets["reported_hours"] >= exp * (1 - q.completeness_tolerance))
                          & (sheets["reported_hours"] <= exp * (1 + q.completeness_tolerance)))
    # An implausible expected value (a typo) must not drive the coverage factor: it is counted
    # at the person's median expected hours (a sweep: 1500 for 150 scaled an office by +36%).
    median = sheets.groupby("person")["expected_hours"].transform("median")
    sheets["plausible"] = ~(exp.notna() & ((exp > period_hours)
                                            | (exp > IMPLAUSIBLE_RATIO * median)))
    sheets["complete"] &= sheets["plausible"]
    sheets["coverage_hours"] = exp.where(sheets["plausible"], median.clip(upper=period_hours))
    return sheets.sort_values(["person", "period"]).reset_index(drop=True)


def coverage(sheets: pd.DataFrame, by: str | list[str] = "office") -> pd.DataFrame:
    """Per office (or per ``by``, columns of ``sheets``), the expected hours of all timesheets
    and of the kept ones, and their ratio ``coverage_factor`` (NaN where none was kept)."""
    known = sheets[sheets["coverage_hours"].notna() & sheets["office"].notna()]
    all_hours = known.groupby(by)["coverage_hours"].sum()
    kept_hours = known[~known["excluded"]].groupby(by)["coverage_hours"].sum()
    out = pd.DataFrame({"expected_hours_all": all_hours,
                        "expected_hours_kept": kept_hours.reindex(all_hours.index).fillna(0.0)})
    out["coverage_factor"] = out["expected_hours_all"] / out["expected_hours_kept"].where(
        out["expected_hours_kept"] > 0)
    return out.reset_index()


def _verdict(rec: pd.DataFrame, sheets: pd.DataFrame, q: QualitySettings) -> str:
    with_expected = sheets[sheets["expected_hours"].notna()]
    share = float(with_expected["complete"].mean()) if len(with_expected) else 0.0
    total_hours = float(rec["hours"].clip(lower=0).sum())
    excluded_hours = float(rec.loc[rec["excluded"], "hours"].clip(lower=0).sum())
    hours_share = excluded_hours / total_hours if total_hours else 1.0
    implausible = int((~sheets["plausible"]).sum())
    if share >= q.compliance_target and hours_share <= 0.05 and not implausible:
        word = "good"
    elif share >= q.compliance_target - 0.10 and hours_share <= 0.15:
        word = "usable with care"
    else:
        word = "poor: effort standards from these records are unreliable"
    return (f"{word}: {share:.1%} of timesheets complete (target {q.compliance_target:.0%}); "
            f"{int(rec['excluded'].sum()):,} of {len(rec):,} records excluded "
            f"({hours_share:.1%} of hours), {int((rec['check'] != '').sum()):,} of them failing "
            "a check"
            + (f"; {implausible:,} implausible expected-hours value(s) (e.g. a typo), counted at "
               "the person's median expected hours" if implausible else ""))
