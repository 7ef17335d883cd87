"""Write a plan folder whole: :func:`write_plan_folder` fills a staged folder with the plan's
tables, reasons, any analysis tables and the people-facing files (``report.html`` and
``plan.xlsx``), all in one atomic swap, for ``rebalance plan`` and every analysis command.
:func:`rebuild_reports` redraws the two files later from the folder alone (plus the instance),
e.g. after analysis tables have been added beside it.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping, Sequence
from pathlib import Path
from typing import Any

import pandas as pd

from rebalance.analysis.output import write_tables
from rebalance.analysis.reasons import reasons
from rebalance.instance import Instance
from rebalance.planning import PlanResult, write_plan_files
from rebalance.report.html import write_html
from rebalance.report.inputs import ReportData, report_data, report_data_from_folder
from rebalance.report.workbook import write_workbook
from rebalance.verify import Violation

__all__ = ["REPORT_FILES", "rebuild_reports", "write_plan_folder", "write_reports"]

REPORT_FILES = ("report.html", "plan.xlsx")


def write_reports(data: ReportData, folder: str | Path) -> list[Path]:
    """Write report.html and plan.xlsx into ``folder``; return their paths."""
    out = Path(folder)
    return [write_html(data, out / REPORT_FILES[0]), write_workbook(data, out / REPORT_FILES[1])]


def write_plan_folder(result: PlanResult, folder: Path,
                      summary: Mapping[str, Any] | None = None,
                      tables: Mapping[str, pd.DataFrame] | None = None,
                      replanned_at: int | None = None,
                      instance_path: str | Path | None = None,
                      more: Callable[[Path], None] | None = None) -> pd.DataFrame:
    """Fill ``folder`` (made already, inside a staged swap) with a verified plan: its tables
    and summary.json (``summary``'s keys after its own), ``tables`` with its reasons (worked
    out here, re-planned from ``replanned_at``, unless ``tables`` holds reasons.csv),
    ``more``'s files, then report.html and plan.xlsx, which show all of those.  Returns the
    reasons table written.
    ``instance_path`` is recorded for 'rebalance report' (a scenario's plan: the base
    instance's, its scenario file kept beside the plan by the command that writes it)."""
    assert result.plan is not None  # callers write only a verified plan
    keys = dict(summary or {})
    if instance_path is not None:
        keys["instance_path"] = str(Path(instance_path).resolve())
    write_plan_files(result, folder, keys)
    found = dict(tables or {})
    if "reasons.csv" not in found:
        found["reasons.csv"] = reasons(result.instance, result.plan, replanned_at).table
    write_tables(found, folder)
    if more is not None:
        more(folder)
    write_reports(report_data(result, folder), folder)
    return found["reasons.csv"]


def rebuild_reports(plan_dir: str | Path, instance: Instance,
                    violations: Sequence[Violation] | None = None) -> list[Path]:
    """Redraw report.html and plan.xlsx of a plan folder, with any analysis tables in it,
    as verified now (``violations``, if just found, else verified here)."""
    return write_reports(report_data_from_folder(plan_dir, instance, violations), plan_dir)
