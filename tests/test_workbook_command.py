"""`rebalance workbook FOLDER -o BOOK.xlsx`, end to end: a valid folder becomes one workbook
that reads back to the same instance; an invalid folder, a name in the way or a bad name
writes nothing."""

from __future__ import annotations

import dataclasses
import shutil
import subprocess
import sys
import zipfile

import pytest
from conftest import DATA, ROOT
from openpyxl import load_workbook

from rebalance.cli import EXIT_INVALID_INPUT, EXIT_OK, EXIT_USAGE, main
from rebalance.readers import read_instance

DEMO = ROOT / "instances" / "demo"


def _same(a, b) -> bool:
    # The name comes from the folder or the file; warnings name files or sheets.
    return dataclasses.replace(a, name="", warnings=()) == dataclasses.replace(
        b, name="", warnings=())


def _leftovers(folder) -> list[str]:
    """Files in ``folder`` other than what a test put there: a temporary name left behind."""
    return sorted(p.name for p in folder.iterdir() if p.name.startswith("."))


@pytest.mark.parametrize("folder", [DATA / "tiny", DEMO], ids=["tiny", "demo"])
def test_the_book_reads_back_through_check_to_the_folders_instance(folder, tmp_path, capsys):
    book = tmp_path / f"{folder.name}.xlsx"
    assert main(["workbook", str(folder), "-o", str(book)]) == EXIT_OK
    said = capsys.readouterr().out.strip()
    # The one line counts what openpyxl (an outside reader) finds in the written file.
    wb = load_workbook(book, read_only=True)
    rows = {ws.title: sum(1 for r in ws.iter_rows(min_row=2, values_only=True)
                          if any(c is not None for c in r)) for ws in wb.worksheets}
    wb.close()
    assert said == (f"wrote {book}: {len(rows)} sheets ({', '.join(rows)}), "
                    f"{sum(rows.values()):,} rows below their column names")
    assert "settings" in rows and "staff" in rows
    # A package names its parts' content types in [Content_Types].xml (ECMA-376 Part 2, the
    # Open Packaging Conventions); xl/workbook.xml is where openpyxl and spreadsheet programs
    # put the workbook part (common practice).
    with zipfile.ZipFile(book) as archive:
        assert {"[Content_Types].xml", "xl/workbook.xml"} <= set(archive.namelist())
    assert main(["check", str(book)]) == EXIT_OK
    assert "valid" in capsys.readouterr().out
    assert _same(read_instance(folder), read_instance(book))
    assert _leftovers(tmp_path) == []


def test_an_invalid_folder_says_what_check_says_and_writes_nothing(tmp_path, capsys):
    folder = tmp_path / "broken"
    shutil.copytree(DATA / "tiny", folder)
    staff = folder / "staff.csv"
    staff.write_text(staff.read_text().replace("a3,A,0.5", "a3,A,1.5"))
    assert main(["check", str(folder)]) == EXIT_INVALID_INPUT
    checked = capsys.readouterr().err.splitlines()
    book = tmp_path / "broken.xlsx"
    assert main(["workbook", str(folder), "-o", str(book)]) == EXIT_INVALID_INPUT
    out, err = capsys.readouterr()
    said = err.splitlines()
    # The problems as check lists them; the count line adds what every writing command adds.
    assert said[1:] == checked[1:] and any("fte" in line for line in said[1:]), said
    assert said[0] == checked[0] + "; nothing was written"
    assert out == "" and not book.exists() and _leftovers(tmp_path) == []


def test_an_existing_book_is_replaced_only_with_force(tmp_path, capsys):
    book = tmp_path / "tiny.xlsx"
    book.write_bytes(b"a planner's own workbook")
    assert main(["workbook", str(DATA / "tiny"), "-o", str(book)]) == EXIT_USAGE
    assert capsys.readouterr().err.strip() == (f"{book}: already exists; give --force to "
                                               "replace it; nothing was written")
    assert book.read_bytes() == b"a planner's own workbook"
    assert main(["workbook", str(DATA / "tiny"), "-o", str(book), "--force"]) == EXIT_OK
    assert _same(read_instance(DATA / "tiny"), read_instance(book))
    assert _leftovers(tmp_path) == []


@pytest.mark.parametrize("name", ["tiny.csv", "tiny", "a_folder.xlsx"])
def test_an_output_that_is_not_a_workbook_file_is_refused(name, tmp_path, capsys):
    # check and plan read a path ending in .xlsx as a workbook (docs/instance-format.md),
    # anything else as a folder; a folder is never replaced by a file, even with --force.
    out = tmp_path / name
    if name.endswith(".xlsx"):
        out.mkdir()
    assert main(["workbook", str(DATA / "tiny"), "-o", str(out), "--force"]) == EXIT_USAGE
    assert capsys.readouterr().err.rstrip().endswith("; nothing was written")
    assert sorted(p.name for p in tmp_path.iterdir()) == (["a_folder.xlsx"] if out.is_dir()
                                                          else [])


def test_a_workbook_given_as_the_folder_is_refused(tmp_path, capsys):
    first = tmp_path / "first.xlsx"
    assert main(["workbook", str(DATA / "tiny"), "-o", str(first)]) == EXIT_OK
    capsys.readouterr()
    assert main(["workbook", str(first), "-o", str(tmp_path / "second.xlsx")]) == EXIT_USAGE
    assert "is a workbook already; expected an instance folder" in capsys.readouterr().err
    assert not (tmp_path / "second.xlsx").exists()


def test_a_write_that_fails_leaves_the_old_book_whole(tmp_path, monkeypatch, capsys):
    # Written under a temporary name, then renamed (os.replace, atomic on POSIX: common
    # practice for files a reader may open at any time).
    from openpyxl import Workbook

    book = tmp_path / "tiny.xlsx"
    assert main(["workbook", str(DATA / "tiny"), "-o", str(book)]) == EXIT_OK
    before = book.read_bytes()

    def half_written(self, filename):
        with open(filename, "wb") as handle:
            handle.write(b"PK half a file")
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(Workbook, "save", half_written)
    assert main(["workbook", str(DATA / "tiny"), "-o", str(book), "--force"]) == EXIT_USAGE
    assert "cannot be written (No space left on device); nothing was written" in (
        capsys.readouterr().err)
    assert book.read_bytes() == before and _leftovers(tmp_path) == []


def test_as_a_user_runs_it(tmp_path):
    book = tmp_path / "tiny.xlsx"
    done = subprocess.run([sys.executable, "-m", "rebalance.cli", "workbook",
                           str(DATA / "tiny"), "-o", str(book)], capture_output=True, text=True,
                          cwd=ROOT, timeout=120)
    assert done.returncode == EXIT_OK, done.stderr
    assert done.stdout.startswith(f"wrote {book}: 6 sheets (settings, offices, skills, staff, "
                                  "demand, budget)")
    checked = subprocess.run([sys.executable, "-m", "rebalance.cli", "check", str(book)],
                             capture_output=True, text=True, cwd=ROOT, timeout=120)
    assert checked.returncode == EXIT_OK, checked.stderr


def _tiny_book(tmp_path, capsys):
    """tiny written as a workbook, open in openpyxl to spoil, and its path."""
    book = tmp_path / "tiny.xlsx"
    assert main(["workbook", str(DATA / "tiny"), "-o", str(book)]) == EXIT_OK
    capsys.readouterr()
    return load_workbook(book), book


def _problems(book) -> list[str]:
    from rebalance.readers import InstanceError

    with pytest.raises(InstanceError) as caught:
        read_instance(book)
    return [str(p) for p in caught.value.problems if not p.is_warning]


def test_a_sheets_misspelt_or_twice_given_column_is_said_as_a_files(tmp_path, capsys):
    # A reviewer's check: sheets are read by the CSV files' rules (docs/instance-format.md,
    # "Instance as one workbook"), so a misspelt optional column leaving every office's seats
    # unlimited is an error there too, and so is a column given twice ignoring case.
    wb, book = _tiny_book(tmp_path, capsys)
    wb["offices"]["C1"] = "seat"
    staff = wb["staff"]
    staff.cell(1, staff.max_column + 1, "FTE")
    wb.save(book)
    assert _problems(book) == [
        "tiny.xlsx[staff]:1: fte: is a column name 2 times (ignoring case); expected each "
        "column once",
        "tiny.xlsx[offices]:1: seat: unknown column 'seat' (did you mean seats?); without a "
        "seats column every office's seats are unlimited"]


def test_a_periods_sheets_year_and_hours_are_read_as_settings_toml_reads_them(tmp_path,
                                                                                capsys):
    # A reviewer's check: a year of 2027.5 typed in the periods sheet had been taken as the
    # name "2027.5", while settings.toml refuses year = 2027.5 (TOML 1.0, toml.io: 2027.5 is
    # a float, not text), in the same words; hours_per_fte takes the same bounds in both.
    wb, book = _tiny_book(tmp_path, capsys)
    for row in range(wb["settings"].max_row, 1, -1):
        if wb["settings"].cell(row, 1).value in ("horizon.start", "horizon.count"):
            wb["settings"].delete_rows(row)
    periods = wb.create_sheet("periods")
    periods.append(["name", "year", "hours_per_fte"])
    for quarter, year, hours in ((1, 2027.5, 480), (2, 2027, 0.5), (3, 2027, 480),
                                 (4, 2027, 480)):
        periods.append([f"2027-Q{quarter}", year, hours])
    wb.save(book)
    said = _problems(book)
    assert said[:2] == [
        "tiny.xlsx[periods]:2: year: '2,027.5' is not valid; expected the budget year its "
        'spending falls in, as text such as "FY27"',
        "tiny.xlsx[periods]:3: hours_per_fte: '0.5' is not valid; expected a number from 1 "
        "to 10,000"], said
