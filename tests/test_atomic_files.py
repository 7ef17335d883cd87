"""Outputs are written whole or not at all (``rebalance.files.atomic_file``), and every plan
folder, the run's own and an analysis's scenario plans, is filled by one function."""

from __future__ import annotations

import json
from pathlib import Path

import pandas as pd
import pytest
from conftest import DATA, solve_verified

from rebalance import read_instance
from rebalance.analysis.output import write_table
from rebalance.files import atomic_file
from rebalance.plan import PLAN_TABLES
from rebalance.planning import summary_dict, write_plan_files
from rebalance.report.files import REPORT_FILES, write_plan_folder


def test_a_file_written_whole_is_renamed_into_place_and_leaves_no_temporary(tmp_path: Path):
    target = tmp_path / "made" / "out.txt"  # its folder is made too
    with atomic_file(target) as tmp:
        tmp.write_text("new\n", encoding="utf-8")
        assert not target.exists()  # nothing under the real name until the block ends
    assert target.read_text(encoding="utf-8") == "new\n"
    assert [p.name for p in target.parent.iterdir()] == ["out.txt"]


def test_a_failed_write_keeps_the_old_file_and_removes_its_temporary(tmp_path: Path):
    target = tmp_path / "out.txt"
    target.write_text("old\n", encoding="utf-8")
    with pytest.raises(RuntimeError), atomic_file(target) as tmp:
        tmp.write_text("half", encoding="utf-8")
        raise RuntimeError("disk full")
    # os.replace is never reached, so the old file stands (Python docs, os.replace: the
    # rename is atomic on POSIX; here it simply does not happen).
    assert target.read_text(encoding="utf-8") == "old\n"
    assert [p.name for p in tmp_path.iterdir()] == ["out.txt"]


def test_a_table_that_fails_halfway_leaves_the_old_table(tmp_path: Path):
    target = write_table(pd.DataFrame({"a": [1, 2]}), tmp_path / "t.csv")
    before = target.read_text(encoding="utf-8")

    class Broken(pd.DataFrame):
        def to_csv(self, *args, **kwargs):  # type: ignore[no-untyped-def, override]
            args[0].write("a\n3\n")
            raise OSError(28, "No space left on device")

    with pytest.raises(OSError):
        write_table(Broken({"a": [3]}), target)
    assert target.read_text(encoding="utf-8") == before
    assert [p.name for p in tmp_path.iterdir()] == ["t.csv"]


@pytest.fixture(scope="module")
def tiny_result():  # type: ignore[no-untyped-def]
    return solve_verified(read_instance(DATA / "tiny"))


def test_plan_files_put_given_summary_keys_after_the_runs_own(tiny_result, tmp_path: Path):
    write_plan_files(tiny_result, tmp_path, {"scenario": "storm"})
    summary = json.loads((tmp_path / "summary.json").read_text(encoding="utf-8"))
    assert list(summary) == [*summary_dict(tiny_result), "scenario"]
    assert all((tmp_path / f"{name}.csv").is_file() for name in PLAN_TABLES)


def test_a_plan_folder_has_its_reasons_reports_and_instance_path(tiny_result, tmp_path: Path):
    seen: list[list[str]] = []
    write_plan_folder(tiny_result, tmp_path, {"scenario": None},
                      {"extra.csv": pd.DataFrame({"x": [1]})}, instance_path=DATA / "tiny",
                      more=lambda folder: seen.append(sorted(p.name for p in folder.iterdir())))
    summary = json.loads((tmp_path / "summary.json").read_text(encoding="utf-8"))
    # The instance path last, as 'rebalance report' reads it (report/files.py write_plan_folder).
    assert list(summary)[-2:] == ["scenario", "instance_path"]
    assert summary["instance_path"] == str((DATA / "tiny").resolve())
    # ``more`` runs once the tables and reasons are there, before the reports that show them.
    assert {"extra.csv", "reasons.csv"} <= set(seen[0])
    assert not set(REPORT_FILES) & set(seen[0])
    assert all((tmp_path / name).is_file() for name in REPORT_FILES)


def test_reasons_given_are_written_as_given(tiny_result, tmp_path: Path):
    given = pd.DataFrame({"reason": ["worked out by the caller"]})
    write_plan_folder(tiny_result, tmp_path, tables={"reasons.csv": given})
    assert pd.read_csv(tmp_path / "reasons.csv").equals(given)
