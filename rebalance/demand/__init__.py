"""Workload history -> FTE demand: quality control, effort standards, forecasts (issue 4)."""

from rebalance.demand.build import (
    DemandResult,
    build_demand,
    output_folder_problem,
    run_demand,
    write_demand,
)
from rebalance.demand.forecast import backtest_series, forecast_series, mase, three_year_average
from rebalance.demand.history import DemandSettings, History, HistoryError, read_history
from rebalance.demand.quality import QualityResult, check_quality
from rebalance.demand.standards import EffortStandards, estimate_standards, forecast_noncase
from rebalance.demand.summary import format_demand_summary

__all__ = [
    "DemandResult",
    "DemandSettings",
    "EffortStandards",
    "History",
    "HistoryError",
    "QualityResult",
    "backtest_series",
    "build_demand",
    "check_quality",
    "estimate_standards",
    "forecast_noncase",
    "forecast_series",
    "format_demand_summary",
    "mase",
    "output_folder_problem",
    "read_history",
    "run_demand",
    "three_year_average",
    "write_demand",
]
