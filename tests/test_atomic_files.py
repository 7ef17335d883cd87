"""Outputs are written whole or not at all (``rebalance.files.atomic_file``), and every plan
folder, the run's own and an analysis's scenario plans, is filled by one function."""

from __future__ import annotations

import json
import os
import shutil
import signal
import time
from pathlib import Path

import pandas as pd
import pytest
from conftest import DATA, solve_verified

import rebalance.files as files_module
from rebalance import read_instance
from rebalance.analysis.output import write_table
from rebalance.files import (
    MARKER,
    atomic_file,
    forget_written,
    input_problem,
    place_problem,
    staged_folder,
    unwritable,
    written,
)
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


def _old_plan_folder(tmp_path: Path) -> Path:
    out = tmp_path / "plan"
    out.mkdir()
    (out / MARKER).write_text("plan\n", encoding="utf-8")
    (out / "summary.json").write_text("old\n", encoding="utf-8")
    return out


@pytest.mark.parametrize("sig", [signal.SIGINT, signal.SIGTERM])
@pytest.mark.parametrize("at", ["between the renames", "while the old folder is removed"])
def test_a_stop_during_the_swap_is_held_until_the_new_folder_is_in_place(
        tmp_path: Path, monkeypatch: pytest.MonkeyPatch, sig: int, at: str):
    # A stop between the two renames had left no folder at OUT and both plans hidden beside
    # it.  The signal is sent from inside the swap (no timing): Python runs a handler between
    # bytecodes of the main thread (Python docs, signal: "Execution of Python signal
    # handlers"), so without the hold the KeyboardInterrupt lands mid-swap.
    out = _old_plan_folder(tmp_path)
    real_replace, real_rmtree = os.replace, shutil.rmtree
    sent = []

    def replace(src, dst):  # type: ignore[no-untyped-def]
        real_replace(src, dst)
        if at == "between the renames" and not sent:
            sent.append(os.kill(os.getpid(), sig))

    def rmtree(path, *args, **kwargs):  # type: ignore[no-untyped-def]
        if at != "between the renames" and not sent:
            sent.append(os.kill(os.getpid(), sig))
        real_rmtree(path, *args, **kwargs)

    monkeypatch.setattr(files_module.os, "replace", replace)
    monkeypatch.setattr(files_module.shutil, "rmtree", rmtree)
    before = signal.signal(signal.SIGTERM, signal.default_int_handler)  # as the command line
    forget_written()
    try:
        with pytest.raises(KeyboardInterrupt), staged_folder(out, kind="plan") as folder:
            (folder / "summary.json").write_text("new\n", encoding="utf-8")
    finally:
        signal.signal(signal.SIGTERM, before)
    assert sent  # the stop came inside the swap, and was raised only after it
    assert (out / "summary.json").read_text(encoding="utf-8") == "new\n"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["plan"]  # no hidden plan left
    assert written() == [out]  # so the command line says it was written


def test_a_stop_before_the_swap_writes_nothing_and_leaves_no_temporary(tmp_path: Path):
    out = _old_plan_folder(tmp_path)
    forget_written()
    with pytest.raises(KeyboardInterrupt), staged_folder(out, kind="plan") as folder:
        (folder / "summary.json").write_text("new\n", encoding="utf-8")
        os.kill(os.getpid(), signal.SIGINT)
        time.sleep(1)  # the handler runs at once; sleep is cut short by it (PEP 475)
    assert (out / "summary.json").read_text(encoding="utf-8") == "old\n"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["plan"]
    assert written() == []


def test_a_failed_second_rename_puts_the_old_folder_back(tmp_path: Path,
                                                        monkeypatch: pytest.MonkeyPatch):
    out = _old_plan_folder(tmp_path)
    real_replace = os.replace
    calls = []

    def replace(src, dst):  # type: ignore[no-untyped-def]
        calls.append(dst)
        if len(calls) == 2:
            raise OSError(28, "No space left on device", str(dst))
        real_replace(src, dst)

    monkeypatch.setattr(files_module.os, "replace", replace)
    with pytest.raises(OSError), staged_folder(out, kind="plan") as folder:
        (folder / "summary.json").write_text("new\n", encoding="utf-8")
    assert (out / "summary.json").read_text(encoding="utf-8") == "old\n"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["plan"]


@pytest.mark.parametrize(("given", "why"), [
    ("afile/sub", "afile is a file, not a folder"),
    ("afile/sub/deeper", "afile is a file, not a folder"),
    ("/proc/rebalance-out", ": /proc); nothing"),  # Linux: no folder can be made there
    ("", "an empty name is no folder"),
])
def test_an_output_that_cannot_be_made_is_found_before_anything_is_written(
        tmp_path: Path, monkeypatch: pytest.MonkeyPatch, given: str, why: str):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "afile").write_text("x", encoding="utf-8")
    problem = unwritable(given)
    assert problem is not None and why in problem
    assert unwritable(tmp_path / "new" / "deeper") is None  # made on the way
    assert sorted(p.name for p in tmp_path.iterdir()) == ["afile"]  # the probe is gone


def test_a_read_only_folder_is_unwritable_unless_root(tmp_path: Path):
    locked = tmp_path / "locked"
    locked.mkdir()
    locked.chmod(0o555)
    try:
        # POSIX: root passes permission checks (capabilities(7), CAP_DAC_OVERRIDE).
        assert (unwritable(locked / "out") is None) == (os.geteuid() == 0)
        assert (unwritable(locked, into=True) is None) == (os.geteuid() == 0)
    finally:
        locked.chmod(0o755)


def test_an_output_folder_may_not_take_the_current_folder_or_an_input(
        tmp_path: Path, monkeypatch: pytest.MonkeyPatch):
    here = tmp_path / "work" / "here"
    here.mkdir(parents=True)
    monkeypatch.chdir(here)
    for out in (".", "", "..", str(tmp_path), str(here)):
        assert place_problem(out) is not None, out
    assert place_problem(here / "plan") is None
    inst = [("the instance", str(tmp_path / "data" / "inst"))]
    assert "holds the instance" in (input_problem(tmp_path / "data", inst) or "")
    assert "is the instance" in (input_problem(tmp_path / "data" / "inst", inst) or "")
    assert input_problem(here / "plan", inst) is None
    old = [("the --from folder", str(tmp_path / "plan"))]
    assert input_problem(tmp_path / "plan2", old) is None  # a prefix of the name only


def test_an_empty_folder_is_filled_in_place_so_a_shell_inside_it_keeps_it(
        tmp_path: Path, monkeypatch: pytest.MonkeyPatch):
    # Swapped, the current folder had become a deleted one, the new files beside it under
    # the same name (POSIX: a process's working folder is the folder, not its name).
    here = tmp_path / "here"
    here.mkdir()
    monkeypatch.chdir(here)
    forget_written()
    with staged_folder(".") as folder:
        (folder / "settings.toml").write_text("x\n", encoding="utf-8")
        (folder / "sub").mkdir()
    assert sorted(p.name for p in Path.cwd().iterdir()) == ["settings.toml", "sub"]
    assert sorted(p.name for p in tmp_path.iterdir()) == ["here"]
    assert written() == [here]


def test_files_renamed_inside_a_staged_folder_count_as_written_only_with_it(tmp_path: Path):
    forget_written()
    with pytest.raises(KeyboardInterrupt), staged_folder(tmp_path / "out") as folder:
        with atomic_file(folder / "a.csv") as tmp:
            tmp.write_text("a\n", encoding="utf-8")
        raise KeyboardInterrupt  # a stop before the swap: nothing is in place
    assert written() == []
    with staged_folder(tmp_path / "out") as folder, atomic_file(folder / "a.csv") as tmp:
        tmp.write_text("a\n", encoding="utf-8")
    assert written() == [tmp_path / "out"]


def test_an_output_given_as_a_link_leaves_no_hidden_link_behind(tmp_path: Path):
    # A review: -o naming a symbolic link to an old plan folder put the new folder in the
    # link's place and left the link hidden beside it (rmtree refuses a link).  The new
    # folder takes the link's place; the folder it pointed to is left as it was.
    target = _old_plan_folder(tmp_path)
    link = tmp_path / "latest"
    link.symlink_to(target, target_is_directory=True)
    with staged_folder(link, kind="plan") as folder:
        (folder / "summary.json").write_text("new\n", encoding="utf-8")
    assert not link.is_symlink()
    assert (link / "summary.json").read_text(encoding="utf-8") == "new\n"
    assert (target / "summary.json").read_text(encoding="utf-8") == "old\n"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["latest", "plan"]
