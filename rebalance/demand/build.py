"""From workload history to the instance's FTE demand, with the trace behind every figure.

``hours[o, s, q] = sum_c volume[o, c, q] x hours_per_case[o, c, s] + sum_a noncase[o, s, a, q]``
and ``fte = hours / hours_per_fte`` of the period, where ``q`` is a quarter of the instance's
horizon and monthly forecasts are summed into it.  ``demand_trace.csv`` holds one row per term.
"""

from __future__ import annotations

import re
from collections.abc import Mapping
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from rebalance.demand.forecast import SEASON, backtest_series, forecast_series
from rebalance.demand.history import (
    History,
    HistoryError,
    month_name,
    period_name,
    read_history_partly,
)
from rebalance.demand.quality import QualityResult, check_quality
from rebalance.demand.standards import EffortStandards, estimate_standards, forecast_noncase
from rebalance.files import OutputInUse, atomic_file, staged_folder
from rebalance.instance import Period
from rebalance.problems import Problem
from rebalance.readers import read_tables
from rebalance.settings_reader import read_periods
from rebalance.tables import collapse_repeats, table_problems

__all__ = ["DemandResult", "build_demand", "output_folder_problem", "run_demand", "write_demand"]

QUARTER = re.compile(r"^(\d{4})-Q([1-4])$")
# A month of arrivals above this many times its series' median is worth a second look
# (common practice, not from a published source).
SPIKE_FACTOR = 5.0
TRACE_COLUMNS = ["office", "skill", "period", "kind", "activity", "method", "forecast_volume",
                 "adjustment_factor", "volume", "volume_lower", "volume_upper",
                 "hours_per_case", "hours", "hours_per_fte", "fte"]


@dataclass(frozen=True)
class DemandResult:
    """Everything ``rebalance demand`` writes.

    ``demand``: office, skill, period, hours, priority (the instance's ``demand.csv``).
    ``trace``: :data:`TRACE_COLUMNS`, one row per case type or non-case activity behind a
    demand row.  ``backtest``, ``forecasts``, ``standards`` and ``quality``: the report.
    """

    demand: pd.DataFrame
    trace: pd.DataFrame
    backtest: pd.DataFrame
    forecasts: pd.DataFrame
    standards: EffortStandards
    noncase: pd.DataFrame
    quality: QualityResult
    periods: tuple[Period, ...]
    period_kind: str = "month"  # of the time records' reporting periods
    # Input that reads, but leaves work out of the demand or stretches the forecast.
    warnings: tuple[Problem, ...] = ()


def output_folder_problem(folder: str | Path) -> str | None:
    """Why ``folder`` cannot take demand.csv (it is not an instance folder), or None.

    The command line says this as a refused output folder (exit 2) before reading anything:
    a mistyped ``-o`` had been listed as "1 problem in the input" of the history (exit 3).
    """
    folder = Path(folder)
    if not folder.is_dir():
        # demand.csv is written into a folder; the instance readers' "expected an instance
        # folder or an .xlsx workbook" had contradicted itself for x.xlsx.
        if folder.exists():
            what = ("is a workbook, not a folder" if folder.suffix.lower() == ".xlsx"
                    else "is a file, not a folder")
        else:
            what = "instance folder not found"
        return (f"{what}; expected the instance folder that demand.csv is written into "
                "(a workbook instance cannot take it)")
    if not any((folder / name).exists() for name in ("settings.toml", "offices.csv",
                                                       "skills.csv")):
        # Said once, naming the folder: three "file is missing" lines had not said where, and
        # a folder named dir.xlsx is no workbook either.
        return ("is a folder with no instance in it (no settings.toml, offices.csv or "
                "skills.csv); expected the instance folder that demand.csv is written into")
    return None


def _instance_context(folder: Path, problems: list[Problem]) -> tuple[
        tuple[Period, ...], dict[str, None] | None, dict[str, None] | None]:
    """Periods, office names and skill names of the instance (None: that file is unusable)."""
    refused = output_folder_problem(folder)
    if refused is not None:
        problems.append(Problem(str(folder), None, None, refused))
        return (), None, None
    settings, tables, found = read_tables(folder)
    # demand.csv is what we are about to write; only these files matter here.
    problems.extend(p for p in found if p.file in ("settings.toml", "offices.csv", "skills.csv")
                    or p.file == str(folder))
    periods, _ = read_periods(settings, problems) if settings else ((), 4)
    for p in periods:
        if QUARTER.match(p.name) is None:
            problems.append(Problem("settings.toml", None, "horizon.periods",
                                    f"period '{p.name}' is not a calendar quarter; "
                                    "`rebalance demand` expects periods named YYYY-Qn"))

    def names(table: str, column: str) -> dict[str, None] | None:
        raw = tables.get(table)
        if raw is not None and raw.fault is not None:
            # Not UTF-8: said as such (it had read as "required column is missing").
            problems.extend(table_problems(raw))
            return None
        if raw is None or column not in raw.columns:
            if raw is not None:
                problems.append(Problem(raw.label, 1, column, "required column is missing"))
            return None  # reported above; checking names against nothing would flood
        # In file order: a set's order of names (which "did you mean" picks from) changes
        # with each run's hash seed.
        return dict.fromkeys(r.get(column, "") for r in raw.rows if r.get(column))

    return periods, names("offices", "office"), names("skills", "skill")


def _quarter_months(period: str) -> list[int]:
    match = QUARTER.match(period)
    if match is None:  # _instance_context reports these before anything is built
        raise ValueError(f"period '{period}' is not a calendar quarter YYYY-Qn")
    year, quarter = int(match.group(1)), int(match.group(2))
    first = year * 12 + (quarter - 1) * 3
    return [first, first + 1, first + 2]


def build_demand(history: History, periods: tuple[Period, ...]) -> DemandResult:
    """Run quality control, standards, forecasts and the hours-to-FTE step.

    Raises :class:`HistoryError` when no time record passes quality control.
    """
    fc_cfg = history.settings.forecast
    quality = check_quality(history)
    if not bool((~quality.records["excluded"]).any()):
        raise HistoryError([Problem("time_records.csv", None, None,
                                    "no time record passed quality control (see the checks "
                                    "in docs/instance-format.md); nothing to estimate from")])
    standards = estimate_standards(history, quality)
    last = history.last_month
    plan_months = [m for p in periods for m in _quarter_months(p.name)]
    horizon = max(plan_months) - last
    months_ahead = list(range(last + 1, max(plan_months) + 1))

    backtest_rows: list[dict[str, Any]] = []
    forecast_rows: list[tuple[Any, ...]] = []
    volume: dict[tuple[str, str, str], tuple[str, float, float, float, float]] = {}
    tail = (1 - fc_cfg.interval_level) / 2
    adjust = _adjustment_factors(history, months_ahead)
    for key, group in history.arrivals.groupby(["office", "case_type"], sort=True):
        office, case_type = str(key[0]), str(key[1])
        y = group.sort_values("month")["count"].to_numpy(dtype=float)
        bt = backtest_series(y, fc_cfg)
        row: dict[str, Any] = {"office": office, "case_type": case_type, "months": len(y),
                               "origins": " ".join(month_name(int(group["month"].min()) + o - 1)
                                                   for o in bt.origins)}
        for method, value in bt.selection_mase.items():
            row[f"selection_mase_{method}"] = value
        for method, value in bt.holdout_mase.items():
            row[f"holdout_mase_{method}"] = value
        row["chosen"] = bt.chosen
        row["holdout_mase_chosen"] = bt.holdout_mase[bt.chosen]
        # Below 1: the chosen method beat the old three-year average on the held-out year.
        base = bt.holdout_mase["baseline"]
        row["holdout_mase_ratio"] = (bt.holdout_mase[bt.chosen] / base
                                     if np.isfinite(base) and base > 0 else float("nan"))
        row["beats_baseline"] = bt.beats_baseline
        backtest_rows.append(row)
        fc = forecast_series(y, bt.chosen, horizon, fc_cfg.seed)
        factors = np.array([adjust.get((office, case_type, m), 1.0) for m in months_ahead])
        lo_m, hi_m = np.quantile(fc.paths, [tail, 1 - tail], axis=1)
        for i, m in enumerate(months_ahead):
            forecast_rows.append((office, case_type, month_name(m), bt.chosen, fc.mean[i],
                                  lo_m[i], hi_m[i], factors[i]))
        for p in periods:
            idx = [m - last - 1 for m in _quarter_months(p.name)]
            raw = float(fc.mean[idx].sum())
            adjusted = float((fc.mean[idx] * factors[idx]).sum())
            sums = (fc.paths[idx] * factors[idx, None]).sum(axis=0)
            lo, hi = np.quantile(sums, [tail, 1 - tail])
            volume[(office, case_type, p.name)] = (bt.chosen, raw, adjusted, float(lo),
                                                   float(hi))
    noncase = forecast_noncase(standards, months_ahead)
    trace = _trace(history, standards, noncase, volume, periods, last)
    demand = (trace.groupby(["office", "skill", "period"], sort=False)["hours"].sum()
              .reset_index())
    demand = demand[demand["hours"] > 0].copy()
    demand["hours"] = demand["hours"].round(2)
    # Every digit, no exponent: {:g} had written 0.123456789 as 0.123457 and 1e6 as 1e+06.
    demand["priority"] = demand["skill"].map(
        lambda s: np.format_float_positional(float(history.settings.priority.get(s, 1.0)),
                                             trim="-"))
    forecasts = pd.DataFrame(forecast_rows, columns=["office", "case_type", "month", "method",
                                                     "volume", "lower", "upper",
                                                     "adjustment_factor"])
    return DemandResult(demand.reset_index(drop=True), trace, pd.DataFrame(backtest_rows),
                        forecasts, standards, noncase, quality, periods, history.period_kind)


def _adjustment_factors(history: History, months: list[int]) -> dict[tuple[str, str, int],
                                                                      float]:
    out: dict[tuple[str, str, int], float] = {}
    adj = history.adjustments
    for office, case_type, first, last, factor in zip(
            adj["office"], adj["case_type"], adj["first_month"], adj["last_month"],
            adj["factor"], strict=True):
        types = [str(case_type)] if isinstance(case_type, str) else list(history.case_types)
        for m in months:
            if int(first) <= m <= int(last):
                for c in types:
                    # Overlapping adjustments multiply.
                    key = (str(office), c, m)
                    out[key] = out.get(key, 1.0) * float(factor)
    return out


def _trace(history: History, standards: EffortStandards, noncase: pd.DataFrame,
           volume: Mapping[tuple[str, str, str], tuple[str, float, float, float, float]],
           periods: tuple[Period, ...], last: int) -> pd.DataFrame:
    rows: list[tuple[Any, ...]] = []
    table = standards.table
    order = {s: i for i, s in enumerate(sorted(set(table["skill"]) | set(noncase["skill"])))}
    for p in periods:
        hpf = p.hours_per_fte
        for office, case_type, skill, per_case in zip(
                table["office"], table["case_type"], table["skill"], table["hours_per_case"],
                strict=True):
            key = (str(office), str(case_type), p.name)
            if key not in volume:
                continue  # the office has no arrivals history for this case type
            method, raw, adjusted, lo, hi = volume[key]
            hours = adjusted * float(per_case)
            rows.append((office, skill, p.name, "case", case_type, method, raw,
                         adjusted / raw if raw > 0 else 1.0, adjusted, lo, hi,
                         float(per_case), hours, hpf, hours / hpf))
        months = _quarter_months(p.name)
        nc = noncase[noncase["month"].isin(months)]
        for (office, skill, activity), group in nc.groupby(["office", "skill", "activity"]):
            hours = float(group["hours"].sum())
            rows.append((office, skill, p.name, "non_case", activity, "theil_sen_trend",
                         np.nan, np.nan, np.nan, np.nan, np.nan, np.nan, hours, hpf,
                         hours / hpf))
    trace = pd.DataFrame(rows, columns=TRACE_COLUMNS)
    trace["_skill"] = trace["skill"].map(order)
    trace["_period"] = trace["period"].map({p.name: i for i, p in enumerate(periods)})
    trace = trace.sort_values(["office", "_skill", "_period", "kind", "activity"])
    return trace.drop(columns=["_skill", "_period"]).reset_index(drop=True)


def run_demand(history_dir: str | Path, instance_dir: str | Path) -> DemandResult:
    """Read and check everything, then build; raise :class:`HistoryError` with all problems."""
    problems: list[Problem] = []
    periods, offices, skills = _instance_context(Path(instance_dir), problems)
    # The horizon checks run on the rows that read even when others did not: one bad cell
    # had hidden "runs into the horizon" and "59 months" until the next run.
    history, found = read_history_partly(history_dir, offices, skills)
    problems.extend(found)
    quarters = bool(periods) and all(QUARTER.match(p.name) for p in periods)
    if history is not None and quarters and not history.arrivals.empty:
        _check_horizon(history, periods, problems)
    errors = [p for p in problems if not p.is_warning]
    if errors or history is None:
        raise HistoryError(collapse_repeats(errors) + [p for p in problems if p.is_warning])
    warnings = [p for p in problems if p.is_warning] + _unused_work(history, periods)
    result = build_demand(history, periods)
    # An office that borrows the pooled hours a case (no usable records of its own): said
    # with the other warnings, not as a Python warning.
    warnings += [Problem("time_records.csv", None, None, note, is_warning=True)
                 for note in result.standards.notes]
    warnings += _offices_without_demand(history, offices, result.demand)
    if result.demand.empty:
        # An empty demand.csv is no instance (its reader wants a row) and had replaced the
        # previous one without a word (standards.shrinkage_cases = inf).
        raise HistoryError([Problem("demand.csv", None, None,
                                    "the forecast gives no office and skill any hours, so "
                                    "there is no demand to write; expected history with "
                                    "cases and hours booked to them (demand.csv is left as "
                                    "it was)"), *warnings])
    return replace(result, warnings=tuple(warnings))


def _offices_without_demand(history: History, offices: Mapping[str, None] | None,
                            demand: pd.DataFrame) -> list[Problem]:
    """A warning naming the instance's offices that demand.csv gives no row: a history of two
    offices written into a six-office instance had left four with no demand, unsaid (a
    review).  Their demand is not 0 but unknown; the plan will cover none of it."""
    if not offices:
        return []
    covered = set(demand["office"].astype(str))
    seen = (set(history.arrivals["office"].astype(str))
            | set(history.records["office"].astype(str)))
    missing = [o for o in offices if o not in covered]
    out = []
    for unseen, why in ((True, "no case arrivals or time records of theirs in the history"),
                        (False, "their history forecasts no hours")):
        named = [o for o in missing if (o not in seen) == unseen]
        if named:
            out.append(Problem("offices.csv", None, "office",
                               f"{len(named):,} office(s) of the instance get no rows in "
                               f"demand.csv ({why}): " + ", ".join(f"'{o}'" for o in named)
                               + "; the plan will see no work there", is_warning=True))
    return out


# Months past the newest arrivals a forecast reaches before a warning: a seasonal method's
# fit says little three years out (common practice; no source).
FAR_MONTHS = 36


def _unused_work(history: History, periods: tuple[Period, ...]) -> list[Problem]:
    """Warnings for work the history shows but the demand leaves out, and for a forecast
    that reaches far past the history: each had passed without a word (a sweep)."""
    out: list[Problem] = []
    records = history.records[history.records["activity"].isin(history.case_types)]
    arrivals = history.arrivals
    cases: dict[tuple[str, str], float] = {
        (str(key[0]), str(key[1])): float(n)  # type: ignore[index]
        for key, n in arrivals.groupby(["office", "case_type"])["count"].sum().items()}
    booked = records.groupby(["office", "activity"])["hours"].sum()
    for key, hours in booked.items():
        office, case_type = str(key[0]), str(key[1])  # type: ignore[index]
        if (office, case_type) not in cases:
            out.append(Problem("time_records.csv", None, "office",
                               f"office '{office}' books {hours:,.0f} hours to case type "
                               f"'{case_type}' but case_arrivals.csv has no such series; "
                               "those hours are left out of the demand", is_warning=True))
        elif cases[(office, case_type)] == 0:
            out.append(Problem("case_arrivals.csv", None, "count",
                               f"office '{office}', case type '{case_type}' has no cases in "
                               f"its history but {hours:,.0f} hours booked to it; it is "
                               "forecast at zero cases and its hours are left out",
                               is_warning=True))
    with_hours = set(records["activity"].unique())
    for case_type in sorted(set(arrivals["case_type"].unique()) - with_hours):
        out.append(Problem("time_records.csv", None, "activity",
                           f"case type '{case_type}' has arrivals but no hours booked to it; "
                           "it adds no demand", is_warning=True))
    # A month far above its series' usual level is forecast from as given (a real surge is
    # possible), but said: one typed 10,000 for 100 had made a quarter twelve times the last.
    for key, series in arrivals.groupby(["office", "case_type"]):
        office, case_type = str(key[0]), str(key[1])
        typical = float(series["count"].median())
        spikes = series[series["count"] > SPIKE_FACTOR * max(typical, 1.0)]
        for month, count in zip(spikes["month"], spikes["count"], strict=True):
            out.append(Problem("case_arrivals.csv", None, "count",
                               f"office '{office}', case type '{case_type}', "
                               f"{month_name(int(month))}: {count:,.0f} cases, over "
                               f"{SPIKE_FACTOR:g} times its usual month ({typical:,.0f}); a "
                               "typo? it is forecast from as given", is_warning=True))
    if periods and all(QUARTER.match(p.name) for p in periods):
        last_plan = max(_quarter_months(p.name)[-1] for p in periods)
        first_plan = min(_quarter_months(p.name)[0] for p in periods)
        # An adjustment wholly outside the horizon changes nothing: said, naming the row (a
        # review: a surge typed a year early had passed silently).
        adj = history.adjustments
        rows = adj["row"] if "row" in adj.columns else [None] * len(adj)
        for row, first, last in zip(rows, adj["first_month"], adj["last_month"], strict=True):
            if int(last) < first_plan or int(first) > last_plan:
                out.append(Problem("adjustments.csv", None if row is None else int(row),
                                   "first_month, last_month",
                                   f"{month_name(int(first))} to {month_name(int(last))} is "
                                   f"outside the plan horizon ({month_name(first_plan)} to "
                                   f"{month_name(last_plan)}); the row changes nothing",
                                   is_warning=True))
        if last_plan - history.last_month > FAR_MONTHS:
            out.append(Problem("case_arrivals.csv", None, "month",
                               f"the plan's last month, {month_name(last_plan)}, is "
                               f"{last_plan - history.last_month} months past the newest "
                               f"arrivals ({month_name(history.last_month)}); a forecast "
                               "that far out is a guess", is_warning=True))
    return out


def _check_horizon(history: History, periods: tuple[Period, ...],
                   problems: list[Problem]) -> None:
    cfg = history.settings.forecast
    # A setting out of range is said by the settings reader (a length from its default would
    # only confuse), and a row of arrivals that did not read leaves its series a month short.
    lengths_known = not any(p.file in ("demand.toml", "case_arrivals.csv") and not p.is_warning
                            for p in problems)
    first_plan = min(_quarter_months(p.name)[0] for p in periods)
    last = history.last_month
    if last >= first_plan:
        problems.append(Problem("case_arrivals.csv", None, "month",
                                f"history runs to {month_name(last)}, into the plan horizon "
                                f"(starts {month_name(first_plan)}); expected history to end "
                                "before the first period"))
    if not history.records.empty and int(history.records["month"].max()) >= first_plan:
        newest = int(history.records["month"].max())
        problems.append(Problem("time_records.csv", None, "period",
                                f"records run to {month_name(newest)}, into the plan horizon "
                                f"(starts {month_name(first_plan)}); expected records to end "
                                "before the first period"))
    need = cfg.min_training_months + 2 * cfg.holdout_months if lengths_known else 0
    for key, group in history.arrivals.groupby(["office", "case_type"]):
        office, case_type = str(key[0]), str(key[1])
        if len(group) < need:
            problems.append(Problem("case_arrivals.csv", None, "month",
                                    f"office '{office}', case type '{case_type}' has "
                                    f"{len(group)} months; expected at least {need} "
                                    f"({cfg.min_training_months} to start the baseline, "
                                    f"{cfg.holdout_months} to choose a method and "
                                    f"{cfg.holdout_months} held out)"))
    if history.records.empty:
        return
    if int(history.records["month"].max()) < last - SEASON:
        problems.append(Problem("time_records.csv", None, "period",
                                "the newest time records are more than a year older than the "
                                "newest arrivals; expected recent records"))


def write_demand(result: DemandResult, instance_dir: str | Path,
                 report_dir: str | Path | None = None) -> Path:
    """Write demand.csv and demand_trace.csv into the instance and the report folder.

    Each file is written whole to a temporary name first; the report folder is swapped in at
    once.  Returns the report folder.  A folder that cannot be written (no permission, a full
    disk) raises :class:`~rebalance.files.OutputInUse`, the command line's refused output,
    with nothing written: it had ended as an internal error.
    """
    folder = Path(instance_dir)
    report = Path(report_dir) if report_dir is not None else folder / "demand_report"
    demand = result.demand.copy()
    demand["hours"] = demand["hours"].map("{:.2f}".format)
    writing = folder  # what a failed write is said of: the folder written into, not a temporary
    written = "nothing was written"  # until the report folder is swapped in
    try:
        # Both files are renamed into place only once the report folder is swapped in, and
        # demand.csv first; a rename that fails after that says what was written.
        with atomic_file(folder / "demand_trace.csv") as trace_tmp:
            with atomic_file(folder / "demand.csv") as demand_tmp:
                # Ten significant digits keep volume x hours_per_case = hours exact to well
                # under 0.01 h.
                demand.to_csv(demand_tmp, index=False, float_format="%.10g")
                result.trace.to_csv(trace_tmp, index=False, float_format="%.10g")
                writing = report
                _write_report(result, report)
                writing = folder
                written = f"only the report in {report} was written"
            written = (f"the report in {report} and demand.csv were written, but not "
                       "demand_trace.csv")
    except OSError as exc:
        reason = exc.strerror or type(exc).__name__
        raise OutputInUse(f"{writing}: cannot be written ({reason}); {written}") from None
    return report


def _write_report(result: DemandResult, report: Path) -> None:
    """The demand report's tables and QC verdict, swapped in as one folder."""
    with staged_folder(report) as tmp:
        q = result.quality
        result.backtest.to_csv(tmp / "backtest.csv", index=False, float_format="%.4f")
        result.forecasts.to_csv(tmp / "forecasts.csv", index=False, float_format="%.3f")
        result.standards.table.to_csv(tmp / "effort_standards.csv", index=False,
                                      float_format="%.4f")
        result.noncase.assign(month=result.noncase["month"].map(month_name)).to_csv(
            tmp / "noncase_forecast.csv", index=False, float_format="%.3f")
        q.summary.to_csv(tmp / "qc_summary.csv", index=False, float_format="%.2f")
        kind = result.period_kind

        def named(frame: pd.DataFrame) -> pd.DataFrame:
            return frame.assign(period=[period_name(kind, int(p)) for p in frame["period"]])

        named(q.compliance).to_csv(tmp / "qc_compliance.csv", index=False,
                                   float_format="%.4f")
        flagged = q.records[q.records["check"] != ""]
        named(flagged).drop(columns=["month"]).to_csv(
            tmp / "qc_flagged_records.csv", index=False, float_format="%.3f")
        q.coverage.to_csv(tmp / "qc_coverage.csv", index=False, float_format="%.4f")
        (tmp / "qc_verdict.txt").write_text(q.verdict + "\n", encoding="utf-8")
