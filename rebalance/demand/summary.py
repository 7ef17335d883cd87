"""Console summary of a ``rebalance demand`` run (formats results; computes nothing new).

Counts are written with thousands separators, as hours are ("31,302 records").
"""

from __future__ import annotations

from pathlib import Path

from rebalance.demand.build import DemandResult
from rebalance.demand.history import month_name

__all__ = ["format_demand_summary"]


def format_demand_summary(result: DemandResult, report_dir: Path | None = None) -> str:
    q = result.quality
    lines = ["Time-record quality control", f"  verdict: {q.verdict}"]
    for row in q.summary.itertuples(index=False):
        lines.append(f"  {row.check:<24} {row.records:>7,} records {row.hours:>11,.1f} hours")
    first, last = result.standards.window
    table = result.standards.table
    thin = table[table["weight"] < 0.5]
    lines += ["", f"Effort standards from {month_name(first)}..{month_name(last)}: "
              f"{len(table):,} office x case type x skill values, {len(thin):,} shrunk more than "
              "halfway to the pooled value (thin data)"]
    bt = result.backtest
    wins = int(bt["beats_baseline"].sum())
    lines += ["", f"Volume forecasts: {len(bt):,} series; chosen method beats the three-year "
              f"average on the held-out year in {wins:,} of {len(bt):,}"]
    counts = bt["chosen"].value_counts()
    lines.append("  chosen: " + ", ".join(f"{m} {n:,}" for m, n in counts.items()))
    lines.append(f"  median holdout MASE: baseline {bt['holdout_mase_baseline'].median():.2f}, "
                 f"chosen {bt['holdout_mase_chosen'].median():.2f}")
    demand, trace = result.demand, result.trace
    total_fte = float(trace["fte"].sum())
    case_share = float(trace.loc[trace["kind"] == "case", "fte"].sum()) / total_fte \
        if total_fte else 0.0
    lines += ["", f"Demand: {len(demand):,} rows, {total_fte:,.1f} FTE-periods over "
              f"{len(result.periods):,} periods ({case_share:.0%} from cases)"]
    by_period = trace.groupby("period", sort=False)["fte"].sum()
    lines.append("  " + "  ".join(f"{p} {v:,.1f}" for p, v in by_period.items()))
    if report_dir is not None:
        lines.append(f"\nreport written to {report_dir}/")
    return "\n".join(lines)
