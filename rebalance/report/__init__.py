"""Reports: console, workbook and HTML.  They take results in; they never compute a plan."""

from rebalance.report.console import format_check, format_summary, format_violations
from rebalance.report.files import rebuild_reports, write_plan_folder, write_reports
from rebalance.report.html import render_html, write_html
from rebalance.report.inputs import ReportData, report_data, report_data_from_folder
from rebalance.report.workbook import write_workbook

__all__ = [
    "ReportData",
    "format_check",
    "format_summary",
    "format_violations",
    "rebuild_reports",
    "render_html",
    "report_data",
    "report_data_from_folder",
    "write_html",
    "write_plan_folder",
    "write_reports",
    "write_workbook",
]
