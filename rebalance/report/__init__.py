"""Reports: console, workbook and HTML.  They take results in; they never compute a plan."""

from rebalance.report.console import format_check, format_summary, format_violations

__all__ = ["format_check", "format_summary", "format_violations"]
