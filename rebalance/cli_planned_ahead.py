"""Command line of ``rebalance replan --planned-ahead``: the line on what late notice cost,
and the plan made ahead written as its own plan folder, ``planned_ahead/``, in the re-plan's.

Kept apart from :mod:`rebalance.cli_analysis`, which the style guide's length holds; the
figures come from :mod:`rebalance.analysis.planned_ahead`, the words from
:mod:`rebalance.report.late_notice_words`.
"""

from __future__ import annotations

import textwrap
from collections.abc import Callable
from pathlib import Path

import pandas as pd

from rebalance.cli_common import EXIT_VERIFICATION_FAILED, _say_violations, copy_scenario
from rebalance.instance import Instance
from rebalance.planning import PlanResult
from rebalance.report.inputs import AHEAD_KEY, SCENARIO_KEY
from rebalance.report.words import plain_status

__all__ = ["AHEAD_FOLDER", "planned_ahead_folder", "say_late_notice"]

AHEAD_FOLDER = "planned_ahead"


def say_late_notice(summary: pd.DataFrame, at: str, instance: Instance,
                    ahead: PlanResult) -> int | None:
    """Print what reacting at ``at`` cost against planning ahead (``summary``: replan.csv
    with its planned_ahead column) and, where no plan was made ahead, why.  An exit code where
    the plan made ahead failed verification (nothing is then written, as for a comparison's
    scenario plan), else None: with no plan made ahead, the re-plan is still written."""
    from rebalance.report.late_notice_words import late_notice_line

    line = late_notice_line(summary, at, instance.period_names[0], instance.money.currency)
    if line:
        print("\n" + textwrap.fill(line, width=90, break_on_hyphens=False))
    if ahead.plan is None:
        print(f"planned ahead: {plain_status(ahead.status)}; no {AHEAD_FOLDER}/ folder")
    elif not ahead.verified:
        _say_violations("planned ahead: the plan failed verification; nothing was written",
                        ahead.violations)
        return EXIT_VERIFICATION_FAILED
    return None


def planned_ahead_folder(ahead: PlanResult, scenario: str | None, assumed: dict | None,
                         at: str, scenario_file: str | None = None,
                         instance_path: str | None = None) -> Callable[[Path], None] | None:
    """What writes the plan made ahead into ``planned_ahead/`` of the re-plan's staged folder
    (one swap for both), as compare writes its scenarios' plans: the plan tables, its
    summary.json naming the scenario and the re-plan's period ``at`` (so its page and workbook
    say which re-plan it was made ahead for), reasons.csv and its own page and workbook.  None
    where there is no plan."""
    if ahead.plan is None:
        return None
    from rebalance.report.files import write_plan_folder

    def write(folder: Path) -> None:
        sub = folder / AHEAD_FOLDER
        sub.mkdir()
        # The scenario's data, not the instance's: the scenario file is kept beside the
        # plan, and 'verify' and 'report' apply it to the instance.
        write_plan_folder(ahead, sub, {"scenario": scenario, SCENARIO_KEY: assumed,
                                       AHEAD_KEY: {"for_replan_at": at}},
                          instance_path=instance_path)
        if scenario_file is not None:
            copy_scenario(scenario_file, sub)

    return write
