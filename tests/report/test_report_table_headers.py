"""Analysis tables in a plan folder read their column names ignoring case and surrounding
spaces, as the instance's and the plan tables' do (docs/instance-format.md: "column names are
read ignoring case"; "it, `report` and `replan --from` read their column names ignoring case
and surrounding spaces")."""

from __future__ import annotations

import shutil
from pathlib import Path

import pandas as pd
from report_cases import TINY, tiny_plan_folder

from rebalance import read_instance
from rebalance.analysis.frontier import FRONTIER_COLUMNS
from rebalance.analysis.planned_ahead import AHEAD_COLUMN
from rebalance.analysis.reasons import REASON_COLUMNS
from rebalance.analysis.replan import REPLAN_COLUMNS
from rebalance.analysis.scenario_actions import ACTION_COLUMNS, REASON_COLUMN
from rebalance.analysis.scenarios import SCENARIO_COST_COLUMNS
from rebalance.report.inputs import report_data_from_folder


def _folder(tmp_path: Path) -> Path:
    folder = tmp_path / "plan"
    shutil.copytree(tiny_plan_folder(), folder)
    return folder


def _shouted(columns: tuple[str, ...]) -> list[str]:
    """The writer's names as a spreadsheet user retyped them: capitalised, upper case, padded."""
    return [(c.capitalize(), f" {c.upper()} ", c)[i % 3] for i, c in enumerate(columns)]


def test_analysis_tables_read_their_column_names_ignoring_case_and_spaces(tmp_path):
    # A scenario_actions.csv headed "Scenario" had left the report without a scenario column
    # where it reads one; so had frontier.csv's and reasons.csv's columns written but for case.
    folder = _folder(tmp_path)
    actions = (*ACTION_COLUMNS, REASON_COLUMN)
    tables = {"frontier.csv": FRONTIER_COLUMNS, "reasons.csv": REASON_COLUMNS,
              "scenario_actions.csv": actions}
    for file, columns in tables.items():
        pd.DataFrame([[f"v{i}" for i in range(len(columns))]],
                     columns=_shouted(columns)).to_csv(folder / file, index=False)
    assert "Scenario" in (folder / "scenario_actions.csv").read_text(encoding="utf-8")
    data = report_data_from_folder(folder, read_instance(TINY))
    assert data.frontier is not None
    assert list(data.frontier.columns) == list(FRONTIER_COLUMNS)
    read = dict(data.tables)
    assert list(read["reasons"].columns) == list(REASON_COLUMNS)
    assert list(read["scenario_actions"].columns) == list(actions)
    # The cells are untouched: only the names are.
    assert read["scenario_actions"].iloc[0].tolist() == [f"v{i}" for i in range(len(actions))]


def test_a_column_beside_its_own_name_but_for_case_stays_as_written(tmp_path):
    # As known_case does for an instance's tables (tests/test_plan_files.py): "Scenario"
    # beside "scenario" is not renamed onto it.
    folder = _folder(tmp_path)
    columns = [*ACTION_COLUMNS, REASON_COLUMN, "Scenario"]
    pd.DataFrame([[f"v{i}" for i in range(len(columns))]], columns=columns).to_csv(
        folder / "scenario_actions.csv", index=False)
    data = report_data_from_folder(folder, read_instance(TINY))
    assert list(dict(data.tables)["scenario_actions"].columns) == columns


def test_replan_and_scenario_costs_read_their_writers_columns_ignoring_case(tmp_path):
    # replan.csv and scenario_costs.csv had been read as written, their writers building the
    # columns inline.  replan.csv has planned_ahead only from a re-plan with a plan made
    # ahead: read either way, as the other analysis tables are.
    folder = _folder(tmp_path)
    replan = (*REPLAN_COLUMNS, AHEAD_COLUMN)
    for file, columns in {"replan.csv": replan,
                          "scenario_costs.csv": SCENARIO_COST_COLUMNS}.items():
        pd.DataFrame([[f"v{i}" for i in range(len(columns))]],
                     columns=_shouted(columns)).to_csv(folder / file, index=False)
    assert " PLANNED_AHEAD " in (folder / "replan.csv").read_text(encoding="utf-8")
    read = dict(report_data_from_folder(folder, read_instance(TINY)).tables)
    assert list(read["replan"].columns) == list(replan)
    assert list(read["scenario_costs"].columns) == list(SCENARIO_COST_COLUMNS)
    assert read["replan"].iloc[0].tolist() == [f"v{i}" for i in range(len(replan))]
    pd.DataFrame([[f"v{i}" for i in range(len(REPLAN_COLUMNS))]],
                 columns=_shouted(REPLAN_COLUMNS)).to_csv(folder / "replan.csv", index=False)
    read = dict(report_data_from_folder(folder, read_instance(TINY)).tables)
    assert list(read["replan"].columns) == list(REPLAN_COLUMNS)
