"""Plan folders read back by verify, replan and report: a broken table is invalid input (exit 3,
every problem as ``path:row: column: what; expected``), never an internal error."""

from __future__ import annotations

import json
import shutil
import subprocess
import sys
from pathlib import Path

import pandas as pd
import pytest
from conftest import DATA, solve_verified

from rebalance import read_instance
from rebalance.cli import (
    EXIT_INVALID_INPUT,
    EXIT_OK,
    EXIT_VERIFICATION_FAILED,
    VIOLATIONS_SHOWN,
    main,
)
from rebalance.plan import PLAN_TABLES, PlanError, read_plan
from rebalance.planning import write_outputs

TINY = str(DATA / "tiny")


@pytest.fixture(scope="module")
def written(tmp_path_factory) -> tuple[Path, object]:
    """A verified plan of tiny, written once; tests break copies of it."""
    result = solve_verified(read_instance(DATA / "tiny"))
    folder = tmp_path_factory.mktemp("plans") / "plan"
    write_outputs(result, folder)
    return folder, result.plan


@pytest.fixture
def plan_dir(written, tmp_path) -> Path:
    folder = tmp_path / "broken"
    shutil.copytree(written[0], folder)
    return folder


def edit(folder: Path, name: str, old: str, new: str) -> None:
    path = folder / f"{name}.csv"
    text = path.read_text()
    assert old in text
    path.write_text(text.replace(old, new, 1))


def problems(folder: Path) -> list[str]:
    with pytest.raises(PlanError) as caught:
        read_plan(folder, complete=True)
    return [str(p) for p in caught.value.problems]


def bad_input_everywhere(folder: Path, tmp_path: Path, capsys) -> str:
    """stderr of verify and replan, which must both say bad input and write nothing."""
    out = tmp_path / "replanned"
    assert main(["verify", TINY, str(folder)]) == EXIT_INVALID_INPUT
    verify_err = capsys.readouterr().err
    assert main(["replan", TINY, "--from", str(folder), "--at", "2027-Q3", "-o", str(out),
                 "--quiet"]) == EXIT_INVALID_INPUT
    replan_err = capsys.readouterr().err
    assert not out.exists()
    for err in (verify_err, replan_err):
        assert "internal error" not in err and "Traceback" not in err
        assert f"{folder}: not a plan folder rebalance can read" in err
    # The same words, but verify writes nothing at any time, and so does not say it.
    assert "nothing was written" not in verify_err
    assert verify_err == replan_err.replace("; nothing was written", "")
    return replan_err


def test_a_written_plan_reads_back_as_it_was(written):
    folder, plan = written
    again = read_plan(folder, complete=True)
    for name in PLAN_TABLES:
        pd.testing.assert_frame_equal(again.table(name), plan.table(name), check_dtype=False)
    assert again.hires["count"].dtype.kind == "i"


def test_summary_json_carries_the_plans_warnings_beside_the_instances(written):
    # Hand computation from tests/data/tiny: one new review position at 20,000 a period
    # (skills.csv) x 4 quarters = 80,000 a year after 2027-Q4, against 2027's hiring cap of
    # 40,000 (budget.csv): 200.0%.  The console, the page and the workbook warn of it;
    # summary.json's "warnings" (the instance's, none for tiny) had been [] and nothing else
    # said it.
    summary = json.loads((written[0] / "summary.json").read_text())
    assert summary["warnings"] == []
    assert summary["plan_warnings"] == [
        "the new positions' salaries (80,000 a year) are 200.0% of 2027's hiring cap "
        "(40,000): after the horizon, a hiring budget like 2027's would not cover even these "
        "salaries, let alone any new hire"]


def test_summary_json_says_the_gap_its_optimal_is_within(written):
    # A reviewer's reading: "status": "optimal" beside a gap of 0.0093 could not be told from
    # a proven exact plan by a reader of the file alone.  tests/data/tiny/settings.toml asks
    # for relative_gap = 0.
    summary = json.loads((written[0] / "summary.json").read_text())
    assert summary["relative_gap_asked"] == 0.0


def test_planning_reaches_no_report_or_analysis_module():
    # STYLE.md: data flows one way, and nothing downstream reaches back up the chain; the
    # warning above is worked out in planning, below the reports that show it.
    code = ("import sys, rebalance.planning; print(sorted(m for m in sys.modules "
            "if m.startswith(('rebalance.report', 'rebalance.analysis'))))")
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                          check=True)
    assert done.stdout.strip() == "[]"


def test_a_hire_count_that_is_no_number_is_bad_input(plan_dir, tmp_path, capsys):
    # Had been an internal error (ValueError in limits.hire_rows) in replan and verify.
    edit(plan_dir, "hires", ",1,new,", ",abc,new,")
    err = bad_input_everywhere(plan_dir, tmp_path, capsys)
    assert (f"{plan_dir / 'hires.csv'}:2: count: 'abc' is not a number; expected a whole "
            "number >= 1") in err


def test_hire_counts_must_be_whole_and_at_least_one(plan_dir, tmp_path, capsys):
    # -1 and 1.5 had been read as they stood: replan wrote a plan from them.
    hires = plan_dir / "hires.csv"
    first = hires.read_text().splitlines()[1]
    hires.write_text(hires.read_text() + first.replace(",1,new,", ",-1,new,") + "\n"
                     + first.replace(",1,new,", ",0,new,") + "\n")
    edit(plan_dir, "hires", ",1,new,", ",1.5,new,")
    assert problems(plan_dir) == [
        f"{hires}:{row}: count: '{value}' is out of range; expected a whole number >= 1"
        for row, value in ((2, "1.5"), (3, "-1"), (4, "0"))]
    bad_input_everywhere(plan_dir, tmp_path, capsys)


def test_an_unclosed_quote_is_said_once_not_a_parser_traceback(plan_dir, tmp_path, capsys):
    # pandas' ParserError had ended verify and replan as internal errors.
    edit(plan_dir, "details", "a1,2027-Q2,", 'a1,"2027-Q2,')
    err = bad_input_everywhere(plan_dir, tmp_path, capsys)
    assert problems(plan_dir) == [
        f"{plan_dir / 'details.csv'}:2: period: runs over several lines (a quote that is not "
        "closed?); expected one line per row"]
    assert "1 problem;" in err


def test_a_missing_table_names_its_file_and_folder(plan_dir, tmp_path, capsys):
    # replan had said "missing work"; verify had called it a failed verification (exit 6).
    (plan_dir / "work.csv").unlink()
    err = bad_input_everywhere(plan_dir, tmp_path, capsys)
    assert f"{plan_dir / 'work.csv'}: file is missing; expected in every plan folder" in err
    # A report still draws what is left, saying what is missing.
    assert [t for t in PLAN_TABLES if read_plan(plan_dir).table(t).empty] == [
        "reassignments", "work"]


def test_a_missing_column_names_its_file_and_folder(plan_dir, tmp_path, capsys):
    # "details: column to_office is missing" had named neither.
    edit(plan_dir, "details", ",to_office,", ",to_offic,")
    err = bad_input_everywhere(plan_dir, tmp_path, capsys)
    assert f"{plan_dir / 'details.csv'}:1: to_office: required column is missing" in err


def test_a_missing_column_names_a_misspelling_of_it_in_the_header(plan_dir):
    # Sweep: a header's 'to_ofice' was said only as "to_office: required column is missing"
    # (the unknown column's own warning is not shown beside an error); the closeness is
    # difflib's, as every did-you-mean of the input messages.  A column close to none of the
    # missing ones leaves their message as it was.
    edit(plan_dir, "details", ",to_office,", ",to_ofice,")
    edit(plan_dir, "work", ",office,", ",branch,")
    assert problems(plan_dir) == [
        f"{plan_dir / 'details.csv'}:1: to_office: required column is missing; the header "
        "has 'to_ofice' (a misspelling?)",
        f"{plan_dir / 'work.csv'}:1: office: required column is missing"]


def test_every_problem_of_every_table_is_said_at_once(plan_dir, tmp_path, capsys):
    edit(plan_dir, "details", "5000.0", "five")
    edit(plan_dir, "coverage", "covered_fte", "demand_fte")
    (plan_dir / "work.csv").write_bytes((plan_dir / "work.csv").read_bytes() + b"a1,\xe9\n")
    (plan_dir / "costs.csv").unlink()
    assert problems(plan_dir) == [
        f"{plan_dir / 'details.csv'}:2: cost: 'five' is not a number; expected a number",
        f"{plan_dir / 'work.csv'}:13: is not UTF-8 text (byte 0xe9 on this line); expected the "
        "file saved as UTF-8 (in a spreadsheet program: save as CSV UTF-8)",
        f"{plan_dir / 'coverage.csv'}:1: demand_fte: is a column name 2 times; expected each "
        "column once",
        f"{plan_dir / 'coverage.csv'}:1: covered_fte: required column is missing",
        f"{plan_dir / 'costs.csv'}: file is missing; expected in every plan folder (rebalance "
        "plan writes it)"]
    err = bad_input_everywhere(plan_dir, tmp_path, capsys)
    assert "5 problems" in err
    # report draws around a missing table, but not around one it cannot read
    assert main(["report", str(plan_dir), "--instance", TINY]) == EXIT_INVALID_INPUT
    assert "internal error" not in capsys.readouterr().err
    assert not (plan_dir / "report.html").exists()


def as_another_instance(plan_dir: Path) -> None:
    """Rename every person, period and office: a plan tiny knows nothing of."""
    offices = {"A": "X", "B": "Y"}.get
    renames = {"person": lambda v: f"x{v}", "period": lambda v: v.replace("2027", "2031"),
               "start_period": lambda v: v.replace("2027", "2031"), "office": offices,
               "from_office": offices, "to_office": offices}
    for name in ("details", "hires", "work"):
        frame = pd.read_csv(plan_dir / f"{name}.csv", dtype=str)
        for column, rename in renames.items():
            if column in frame:
                frame[column] = frame[column].map(rename)
        frame.to_csv(plan_dir / f"{name}.csv", index=False)


def test_an_old_plan_of_another_instance_lists_a_bounded_number_of_problems(
        plan_dir, tmp_path, capsys):
    # Every name unknown to tiny: 66 lines had been listed for the demo's plan.
    as_another_instance(plan_dir)
    out = tmp_path / "replanned"
    assert main(["replan", TINY, "--from", str(plan_dir), "--at", "2027-Q3", "-o", str(out),
                 "--quiet"]) == EXIT_INVALID_INPUT
    lines = capsys.readouterr().err.splitlines()
    assert lines[0] == f"{plan_dir}: the old plan cannot be carried forward; nothing was written"
    assert len(lines) == 1 + VIOLATIONS_SHOWN + 1 and lines[-1].startswith("  ... and ")
    assert not out.exists()
    # Each line names its file in its folder, as a plan folder's other problems do (they had
    # read "details.csv:2: ..." with the folder only in the first line).
    assert lines[1] == (f"  {plan_dir / 'details.csv'}:2: person 'xa1' is not in the instance; "
                        "expected a person of staff.csv")
    assert all(line.startswith(f"  {plan_dir}{'/'}") for line in lines[1:-1])


def test_verify_lists_the_first_violations_and_all_on_request(plan_dir, capsys):
    # The same plan of another instance: verify had printed all 66 lines; now as replan does,
    # the first VIOLATIONS_SHOWN and a count of the rest, with --all for every one.
    as_another_instance(plan_dir)
    assert main(["verify", TINY, str(plan_dir)]) == EXIT_VERIFICATION_FAILED
    capped = capsys.readouterr().out.splitlines()
    assert main(["verify", TINY, str(plan_dir), "--all"]) == EXIT_VERIFICATION_FAILED
    every = capsys.readouterr().out.splitlines()
    assert len(every) > 1 + VIOLATIONS_SHOWN + 1
    assert capped[:1 + VIOLATIONS_SHOWN] == every[:1 + VIOLATIONS_SHOWN]
    assert capped[-1] == (f"  ... and {len(every) - 1 - VIOLATIONS_SHOWN} more; --all lists "
                          "every one")
    assert len(capped) == 1 + VIOLATIONS_SHOWN + 1
    assert every[1].startswith(f"  - {plan_dir / 'details.csv'}:2: ")


def test_report_lists_the_first_violations_as_verify_does(plan_dir, capsys):
    # report had printed every violation on stderr (66 lines here); it caps them as verify
    # does and, having no --all itself, names the verify command that lists every one.
    as_another_instance(plan_dir)
    assert main(["verify", TINY, str(plan_dir), "--all"]) == EXIT_VERIFICATION_FAILED
    every = capsys.readouterr().out.splitlines()
    assert main(["report", str(plan_dir), "--instance", TINY]) == EXIT_VERIFICATION_FAILED
    capped = capsys.readouterr().err.splitlines()
    assert capped[:1 + VIOLATIONS_SHOWN] == every[:1 + VIOLATIONS_SHOWN]
    assert capped[-1] == (f"  ... and {len(every) - 1 - VIOLATIONS_SHOWN} more; rebalance "
                          f"verify {TINY} {plan_dir} --all lists every one")
    assert len(capped) == 1 + VIOLATIONS_SHOWN + 1


def test_report_lists_a_few_violations_whole(plan_dir, capsys):
    edit(plan_dir, "details", "a1,2027-Q2,A,B", "a1,2027-Q2,A,A")
    assert main(["verify", TINY, str(plan_dir)]) == EXIT_VERIFICATION_FAILED
    every = capsys.readouterr().out.splitlines()
    assert main(["report", str(plan_dir), "--instance", TINY]) == EXIT_VERIFICATION_FAILED
    assert capsys.readouterr().err.splitlines() == every
    assert len(every) <= 1 + VIOLATIONS_SHOWN


def test_replan_refuses_an_old_plan_that_verify_finds_contradicting_itself(plan_dir, tmp_path,
                                                                          capsys):
    # Sweep: a details.csv row pasted twice failed `verify` (exit 6, "two details in one
    # period") while `replan` exited 0, counting the old plan double in replan.csv.  Common
    # practice: one input, one verdict on it; the re-plan refuses it as invalid input.
    path = plan_dir / "details.csv"
    lines = path.read_text().splitlines()
    path.write_text("\n".join([*lines, lines[1]]) + "\n")
    assert main(["verify", TINY, str(plan_dir)]) == EXIT_VERIFICATION_FAILED
    capsys.readouterr()
    out = tmp_path / "replanned"
    assert main(["replan", TINY, "--from", str(plan_dir), "--at", "2027-Q3", "-o", str(out),
                 "--quiet"]) == EXIT_INVALID_INPUT
    assert capsys.readouterr().err.splitlines() == [
        f"{plan_dir}: the old plan cannot be carried forward; nothing was written",
        f"  {path}:{len(lines) + 1}: person a1 in 2027-Q2: two details in one period (first "
        "at line 2); expected one detail per person and period (a person is in one place in "
        "a period): keep one of the rows"]
    assert not out.exists()


def test_a_repeated_row_names_its_line_past_a_blank_line(plan_dir, tmp_path, capsys):
    # A blank line is no row (read_plan skips it), but it is a line of the file: the line a
    # refusal names is the one an editor shows (the repeat had been named a line early).
    path = plan_dir / "details.csv"
    lines = path.read_text().splitlines()
    path.write_text("\n".join([lines[0], lines[1], "", *lines[2:], lines[1]]) + "\n")
    out = tmp_path / "replanned"
    assert main(["replan", TINY, "--from", str(plan_dir), "--at", "2027-Q3", "-o", str(out),
                 "--quiet"]) == EXIT_INVALID_INPUT
    assert capsys.readouterr().err.splitlines()[1:] == [
        f"  {path}:{len(lines) + 2}: person a1 in 2027-Q2: two details in one period (first "
        "at line 2); expected one detail per person and period (a person is in one place in "
        "a period): keep one of the rows"]
    # In memory as a plan made there: rows by place, the skipped line a gap.
    assert read_plan(plan_dir).details.index.tolist() == [0, *range(2, len(lines) + 1)]


def test_verify_all_says_it_lists_every_problem():
    # verify's cap is of problems (a seats excess over a run of periods, a moved work row and
    # its coverage rows, are one each): its --all had promised "every violation".
    from rebalance.cli import build_parser

    verify = next(action.choices["verify"] for action in build_parser()._actions
                  if action.choices and "verify" in action.choices)
    words = next(action.help for action in verify._actions if "--all" in action.option_strings)
    assert words == f"list every problem, not only the first {VIOLATIONS_SHOWN}"


def test_a_header_typed_with_capitals_and_spaces_verifies_the_same(written, plan_dir, capsys):
    # A planner's "Office" or " period " had drawn "required column is missing", though the
    # instance's tables read such names (docs/instance-format.md: column names are read
    # ignoring case).  The reference is the same plan as written; no outside figure is
    # involved.  details.csv gets a quoted cell: a file with quotes is read the other way
    # (plain_csv_columns declines it), so both ways are checked.
    for name in PLAN_TABLES:
        path = plan_dir / f"{name}.csv"
        header, rest = path.read_text().split("\n", 1)
        typed = ",".join(f" {column.capitalize()} " if i % 2 else column.upper()
                         for i, column in enumerate(header.split(",")))
        path.write_text(typed + "\n" + rest)
    edit(plan_dir, "details", "a1,2027-Q2,", '"a1",2027-Q2,')
    assert (plan_dir / "work.csv").read_text().startswith("PERSON, Period ,OFFICE, Skill ,")
    again = read_plan(plan_dir, complete=True)
    for name in PLAN_TABLES:
        pd.testing.assert_frame_equal(again.table(name), written[1].table(name),
                                      check_dtype=False)
    assert main(["verify", TINY, str(written[0])]) == EXIT_OK
    as_written = capsys.readouterr()
    assert main(["verify", TINY, str(plan_dir)]) == EXIT_OK
    typed_out = capsys.readouterr()
    assert typed_out.err == as_written.err == ""
    assert typed_out.out.replace(str(plan_dir), "P") == as_written.out.replace(str(written[0]),
                                                                               "P")


def test_a_header_naming_a_column_twice_but_for_case_reads_as_before(written, plan_dir):
    # As the instance's tables (known_case): beside "office", an "Office" is an unknown
    # column, not read, and the plan reads as written.
    path = plan_dir / "work.csv"
    lines = path.read_text().splitlines()
    path.write_text("\n".join([lines[0] + ",Office", *(line + ",Z" for line in lines[1:])])
                    + "\n")
    pd.testing.assert_frame_equal(read_plan(plan_dir, complete=True).work, written[1].work,
                                  check_dtype=False)
