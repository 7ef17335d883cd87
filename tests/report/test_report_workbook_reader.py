"""An instance read from one workbook equals the same instance read from its folder, and a
broken workbook is reported by sheet, row and column, every problem at once."""

from __future__ import annotations

import dataclasses
import subprocess
import sys
import tomllib
from pathlib import Path

import pandas as pd
import pytest
from openpyxl import load_workbook

from rebalance.readers import InstanceError, read_instance
from rebalance.settings_reader import SETTINGS_KEYS
from rebalance.workbook_reader import read_workbook
from rebalance.workbook_writer import folder_to_workbook

TESTS = Path(__file__).resolve().parent.parent
ROOT = TESTS.parent
TINY = TESTS / "data" / "tiny"
DEMO = ROOT / "instances" / "demo"


def _same(a, b) -> bool:
    # Names differ (folder name vs file stem); warnings name files vs sheets.
    return dataclasses.replace(a, name="", warnings=()) == dataclasses.replace(
        b, name="", warnings=())


@pytest.mark.parametrize("folder", [TINY, DEMO], ids=["tiny", "demo"])
def test_folder_and_workbook_give_the_same_instance(folder, tmp_path):
    book = folder_to_workbook(folder, tmp_path / f"{folder.name}.xlsx")
    from_book = read_instance(book)  # dispatches on the .xlsx suffix
    assert from_book.name == folder.name
    assert _same(read_instance(folder), from_book)


def test_a_currency_goes_through_a_workbook_and_a_bad_one_names_its_row(tmp_path):
    import shutil

    folder = tmp_path / "tiny"
    shutil.copytree(TINY, folder)
    settings = folder / "settings.toml"
    settings.write_text(settings.read_text() + '\n[money]\ncurrency = "EUR"\n')
    book = folder_to_workbook(folder, tmp_path / "tiny.xlsx")
    from_book = read_instance(book)
    assert from_book.money.currency == "EUR" and _same(read_instance(folder), from_book)
    wb = load_workbook(book)
    row = next(r for r in wb["settings"].iter_rows(min_row=2) if r[0].value == "money.currency")
    row[1].value = 978  # a number typed where a label belongs
    wb.save(book)
    with pytest.raises(InstanceError) as caught:
        read_instance(book)
    (problem,) = [str(p) for p in caught.value.problems if not p.is_warning]
    assert f":{row[0].row}: " in problem and "'978' is not valid" in problem, problem


def test_workbook_written_by_another_writer_reads_the_same(tmp_path):
    # Reference writer: pandas.DataFrame.to_excel, so the reader is not only checked against
    # workbooks our own writer makes.  Cells are typed the way pandas infers them.
    book = tmp_path / "tiny.xlsx"
    settings = tomllib.loads((TINY / "settings.toml").read_text())
    rows = [(k, settings[k.split(".")[0]][k.split(".")[1]]) for k in SETTINGS_KEYS
            if k.split(".")[1] in settings.get(k.split(".")[0], {})]
    with pd.ExcelWriter(book, engine="openpyxl") as writer:
        pd.DataFrame(rows, columns=["key", "value"]).to_excel(
            writer, sheet_name="settings", index=False)
        for csv in sorted(TINY.glob("*.csv")):
            pd.read_csv(csv).to_excel(writer, sheet_name=csv.stem, index=False)
    assert _same(read_instance(TINY), read_workbook(book))


def test_periods_sheet_lists_periods(tmp_path):
    book = folder_to_workbook(TINY, tmp_path / "tiny.xlsx")
    wb = load_workbook(book)
    settings = wb["settings"]
    for row in list(settings.iter_rows(min_row=2)):
        if row[0].value in ("horizon.start", "horizon.count"):
            row[0].value = None
            row[1].value = None
    periods = wb.create_sheet("periods")
    periods.append(["name", "year", "hours_per_fte"])
    for i in range(1, 5):
        periods.append([f"P{i}", 2027, 480 if i != 3 else 400])
    for sheet in ("demand", "staff"):
        for row in wb[sheet].iter_rows(min_row=2):
            for cell in row:
                if isinstance(cell.value, str) and cell.value.startswith("2027-Q"):
                    cell.value = "P" + cell.value[-1]
    wb.save(book)
    instance = read_workbook(book)
    assert instance.period_names == ("P1", "P2", "P3", "P4")
    # A period name that is not in the periods sheet points there.
    wb["demand"]["C2"] = "P9"
    wb.save(book)
    with pytest.raises(InstanceError) as caught:
        read_workbook(book)
    (problem,) = [p for p in caught.value.problems if not p.is_warning]
    assert (problem.file, problem.row, problem.column) == ("tiny.xlsx[demand]", 2, "period")
    assert problem.message.endswith("listed in sheet periods (P1 to P4)")
    assert [p.hours_per_fte for p in instance.periods] == [480, 480, 400, 480]
    assert instance.years == ("2027",)


# Each case: a change to the tiny workbook, and the (sheet, row, column) the problem must name.
BROKEN = {
    "fte-out-of-range": (("staff", "C3", 1.5), ("tiny.xlsx[staff]", 3, "fte")),
    "unknown-office": (("staff", "B4", "nowhere"), ("tiny.xlsx[staff]", 4, "home_office")),
    "text-in-number": (("skills", "B2", "lots"), ("tiny.xlsx[skills]", 2, "salary_per_period")),
    "unknown-period": (("demand", "C5", "2031-Q1"), ("tiny.xlsx[demand]", 5, "period")),
    "bad-setting": (("settings", "policy.max_away_share", 2),
                    ("tiny.xlsx[settings]", None, "value")),
    "bad-solver": (("settings", "solver.name", "simplex"),
                   ("tiny.xlsx[settings]", None, "value")),
}


def _settings_row(ws, key: str) -> int:
    for row in ws.iter_rows(min_row=2):
        if row[0].value == key:
            return row[0].row
    raise KeyError(key)


@pytest.mark.parametrize("case", sorted(BROKEN))
def test_broken_workbook_names_sheet_row_and_column(case, tmp_path):
    (sheet, cell, value), (label, row, column) = BROKEN[case]
    book = folder_to_workbook(TINY, tmp_path / "tiny.xlsx")
    wb = load_workbook(book)
    if sheet == "settings":
        at = _settings_row(wb["settings"], cell)
        wb["settings"].cell(row=at, column=2).value = value
        row = at
        key = cell
    else:
        wb[sheet][cell] = value
        key = None
    wb.save(book)
    with pytest.raises(InstanceError) as caught:
        read_instance(book)
    errors = [p for p in caught.value.problems if not p.is_warning]
    # The first problem is the cause (a bad skill row also makes later references unknown).
    assert (errors[0].file, errors[0].row, errors[0].column) == (label, row, column), errors
    if key:
        assert errors[0].message.startswith(key)
    assert ".csv" not in errors[0].message and "settings.toml" not in errors[0].message


def test_all_problems_at_once_and_missing_sheets(tmp_path):
    book = folder_to_workbook(TINY, tmp_path / "tiny.xlsx")
    wb = load_workbook(book)
    wb["staff"]["C3"] = 0
    wb["offices"]["C2"] = -1
    del wb["budget"]
    wb["settings"].append(["solver.nmae", "highs"])  # a typo: warned, not silently ignored
    wb.create_sheet("notes")
    wb.save(book)
    with pytest.raises(InstanceError) as caught:
        read_instance(book)
    found = {(p.file, p.row, p.column, p.is_warning) for p in caught.value.problems}
    assert ("tiny.xlsx[staff]", 3, "fte", False) in found
    assert ("tiny.xlsx[offices]", 2, "seats", False) in found
    assert ("tiny.xlsx[budget]", None, None, False) in found
    assert ("tiny.xlsx[notes]", None, None, True) in found
    typo = [p for p in caught.value.problems if p.column == "key"]
    assert typo and typo[0].is_warning and "solver.nmae" in typo[0].message


def test_what_a_blank_would_hide_is_an_error(tmp_path):
    # A sweep's workbooks: a formula saved without its value (openpyxl writes none) read as
    # blank, which means "no cap"; a second sheet named "Budget " replaced "budget"; a cell
    # past the header was dropped.
    book = folder_to_workbook(TINY, tmp_path / "tiny.xlsx")
    wb = load_workbook(book)
    wb["budget"]["B2"] = "=40000+1"
    wb["staff"]["H3"] = "oops"
    wb.copy_worksheet(wb["budget"]).title = "Budget "
    wb.save(book)
    with pytest.raises(InstanceError) as caught:
        read_workbook(book)
    text = [str(p) for p in caught.value.problems if not p.is_warning]
    assert any(t.startswith("tiny.xlsx[budget]:2: hiring: a formula whose value the file "
                            "does not hold") for t in text), text
    assert "tiny.xlsx[staff]:3: more cells than the header's 7 columns; expected one value " \
           "per column" in text
    assert any(t.startswith("tiny.xlsx[Budget ]: a second sheet of this name") for t in text)


def test_a_column_named_twice_or_not_at_all_is_an_error(tmp_path):
    # A docs audit: with two fte columns the last one was read (81 FTE-periods for 9.5), and
    # a value under a column with no name was dropped; TRUE typed as hours per FTE read as 1.
    book = folder_to_workbook(TINY, tmp_path / "tiny.xlsx")
    wb = load_workbook(book)
    demand = wb["demand"]
    demand.cell(1, demand.max_column + 1, "fte")
    demand.cell(2, demand.max_column, 9)
    offices = wb["offices"]
    offices.cell(2, 5, 5)  # under an empty header cell, left of a named one
    offices.cell(1, 6, "note")
    ws = wb["settings"]
    ws.cell(_settings_row(ws, "horizon.hours_per_fte"), 2, True)
    wb.save(book)
    with pytest.raises(InstanceError) as caught:
        read_workbook(book)
    text = [str(p) for p in caught.value.problems if not p.is_warning]
    assert "tiny.xlsx[demand]:1: fte: is a column name 2 times; expected each column once" \
        in text, text
    assert not any(t.startswith("tiny.xlsx[demand]:2") for t in text), text  # rows unread
    assert any(t.startswith("tiny.xlsx[offices]:2: column 5: a value under a column with no "
                            "name") for t in text), text
    assert any(t.startswith("tiny.xlsx[settings]:") and "horizon.hours_per_fte: 'true' is not "
               "valid; expected a number > 0" in t for t in text), text


def test_a_header_moved_down_is_said_first(tmp_path):
    book = folder_to_workbook(TINY, tmp_path / "tiny.xlsx")
    wb = load_workbook(book)
    wb["offices"].insert_rows(1, amount=2)
    wb.save(book)
    with pytest.raises(InstanceError) as caught:
        read_workbook(book)
    assert str(caught.value.problems[0]) == ("tiny.xlsx[offices]:1: row 1 is blank; expected "
                                             "the column names in row 1, the data below them")


def _problems_with_a_date(tmp_path, sheet: str, cell: str) -> list:
    """The problems of tiny's workbook with 2027-01-01 typed as a date in ``sheet``'s
    ``cell``."""
    import datetime

    book = folder_to_workbook(TINY, tmp_path / "tiny.xlsx")
    wb = load_workbook(book)
    wb[sheet][cell] = datetime.datetime(2027, 1, 1)
    wb.save(book)
    with pytest.raises(InstanceError) as caught:
        read_workbook(book)
    return list(caught.value.problems)


def test_a_year_typed_as_a_date_is_one_problem_not_also_a_missing_year(tmp_path):
    # And it says it is a date: "budget year '2027-01-01T00:00:00' belongs to no period" had
    # read as a misspelt year (a sweep).  (A spreadsheet program reads 2027-01-01 typed in a
    # cell as a date: the openpyxl and LibreOffice Calc documentation of cell types.)
    text = [str(p) for p in _problems_with_a_date(tmp_path, "budget", "A2")]
    assert text == [
        "tiny.xlsx[budget]:2: year: the cell holds a date (2027-01-01), not a budget year; "
        "type the year's name as text, e.g. 2027 (a spreadsheet reads 2027-01-01 typed in a "
        "cell as a date)"]


def test_not_a_workbook(tmp_path):
    fake = tmp_path / "fake.xlsx"
    fake.write_text("office,location\n")
    with pytest.raises(InstanceError) as caught:
        read_instance(fake)
    assert caught.value.problems[0].file == "fake.xlsx"
    with pytest.raises(InstanceError):
        read_instance(tmp_path / "missing.xlsx")


def test_cli_check_and_plan_accept_a_workbook(tmp_path):
    book = folder_to_workbook(TINY, tmp_path / "tiny.xlsx")
    run = [sys.executable, "-m", "rebalance.cli"]
    checked = subprocess.run([*run, "check", str(book)], capture_output=True, text=True)
    assert checked.returncode == 0, checked.stderr
    assert "Instance tiny: valid" in checked.stdout
    out = tmp_path / "plan"
    planned = subprocess.run([*run, "plan", str(book), "-o", str(out), "-q"],
                             capture_output=True, text=True)
    assert planned.returncode == 0, planned.stderr
    assert (out / "report.html").is_file() and (out / "plan.xlsx").is_file()
    # A broken workbook: exit 3, every problem named by sheet, no traceback, nothing written.
    wb = load_workbook(book)
    wb["staff"]["C3"] = 7
    wb.save(book)
    bad_out = tmp_path / "bad"
    failed = subprocess.run([*run, "plan", str(book), "-o", str(bad_out)], capture_output=True,
                            text=True)
    assert failed.returncode == 3
    assert "tiny.xlsx[staff]:3: fte:" in failed.stderr
    assert "Traceback" not in failed.stderr
    assert not bad_out.exists()


def _with_sheet_xml(book: Path, sheet: str, edit) -> Path:
    """``book`` rewritten with one sheet's XML changed by ``edit`` (as another program may
    write it)."""
    import re
    import zipfile

    wb = load_workbook(book)
    part = f"xl/worksheets/sheet{wb.sheetnames.index(sheet) + 1}.xml"
    out = book.with_name(f"edited-{book.name}")
    with zipfile.ZipFile(book) as zin, zipfile.ZipFile(out, "w", zipfile.ZIP_DEFLATED) as zout:
        for item in zin.infolist():
            data = zin.read(item.filename)
            if item.filename == part:
                data = edit(data.decode(), re).encode()
            zout.writestr(item, data)
    return out


def test_a_used_range_stated_too_small_loses_no_rows_or_columns(tmp_path):
    # A sweep: a file whose <dimension> tag says A1:E5 read as 4 demand rows of 9, and one
    # saying A1:D10 lost the priority column (2 read as 1); spreadsheet programs read every
    # cell, and openpyxl's documentation warns that read-only mode trusts the tag.
    book = folder_to_workbook(TINY, tmp_path / "tiny.xlsx")
    for ref in ("A1:E5", "A1:D10"):
        edited = _with_sheet_xml(book, "demand", lambda xml, re, ref=ref: re.sub(
            r'<dimension ref="[^"]*"', f'<dimension ref="{ref}"', xml))
        assert _same(read_instance(TINY), read_workbook(edited)), ref


def test_an_array_formula_without_its_value_is_an_error_not_a_blank(tmp_path):
    # A blank seats cell means "no seat limit": an array formula the file holds no value for
    # had read as that.
    from openpyxl.worksheet.formula import ArrayFormula

    book = folder_to_workbook(TINY, tmp_path / "tiny.xlsx")
    wb = load_workbook(book)
    ws = wb["offices"]
    seats = [c.value for c in ws[1]].index("seats") + 1
    ws.cell(2, seats).value = ArrayFormula(ws.cell(2, seats).coordinate, "=SUM({5,5})")
    wb.save(book)  # openpyxl writes formulas without values
    with pytest.raises(InstanceError, match=r"\[offices\]:2: seats: a formula whose value"):
        read_workbook(book)


def test_a_hidden_sheet_is_read_with_a_warning(tmp_path):
    book = folder_to_workbook(TINY, tmp_path / "tiny.xlsx")
    wb = load_workbook(book)
    wb["skills"].sheet_state = "hidden"
    wb.save(book)
    instance = read_workbook(book)
    assert _same(read_instance(TINY), instance)
    assert any("[skills]" in w and "hidden" in w for w in instance.warnings)


def test_a_title_above_the_column_names_is_said_first(tmp_path):
    # A sweep: a title in A1 over the staff table read as the only column, every row as too
    # long (9 problems), with no word of where the column names were.
    book = folder_to_workbook(TINY, tmp_path / "tiny.xlsx")
    wb = load_workbook(book)
    wb["staff"].insert_rows(1)
    wb["staff"]["A1"] = "Staff list (as of 2026-12)"
    wb.save(book)
    with pytest.raises(InstanceError) as caught:
        read_workbook(book)
    text = [str(p) for p in caught.value.problems]
    assert text[0] == ("tiny.xlsx[staff]:2: the column names are in row 2; expected them in "
                       "row 1, with nothing above them (delete the rows above)")
    assert not any("more cells than the header" in t for t in text)


def test_a_missing_budget_sheet_is_one_problem(tmp_path):
    # It had also warned, year by year, that each budget year had no row.
    book = folder_to_workbook(TINY, tmp_path / "tiny.xlsx")
    wb = load_workbook(book)
    del wb["budget"]
    wb.save(book)
    with pytest.raises(InstanceError) as caught:
        read_workbook(book)
    assert [str(p) for p in caught.value.problems] == [
        "tiny.xlsx[budget]: sheet is missing; the workbook's sheets are settings, offices, "
        "skills, staff, demand"]


def test_a_missing_sheet_is_said_with_the_sheets_the_workbook_has(tmp_path):
    # A reviewer's check: "[skills]: sheet is missing" left a planner to open the book to
    # see what it was called instead; the sheets are listed as the book spells them, in its
    # order (common practice: say what was found beside what was expected).
    problems = _edited_book(tmp_path, lambda wb: setattr(wb["skills"], "title", "Skill set"))
    assert [str(p) for p in problems if not p.is_warning] == [
        "tiny.xlsx[skills]: sheet is missing; the workbook's sheets are settings, offices, "
        "Skill set, staff, demand, budget"]


def test_column_names_are_read_whatever_their_case(tmp_path):
    # A reviewer's check: a header typed "Office" drew "required column is missing" and an
    # "unknown column" warning; the name is the same word (common practice: headers match
    # ignoring case, as the settings sheet's key and value already do).
    book = folder_to_workbook(TINY, tmp_path / "tiny.xlsx")
    wb = load_workbook(book)
    wb["offices"]["A1"] = "Office"
    wb["demand"]["B1"] = "SKILL"
    wb.save(book)
    instance = read_workbook(book)
    assert [o.name for o in instance.offices] == ["A", "B"]
    assert not instance.warnings


def test_a_date_in_the_horizon_start_cell_points_at_its_row(tmp_path):
    # A sweep: a date typed as the start quarter read as "give either periods or start",
    # with no row to look at.
    import datetime

    book = folder_to_workbook(TINY, tmp_path / "tiny.xlsx")
    wb = load_workbook(book)
    row = _settings_row(wb["settings"], "horizon.start")
    wb["settings"].cell(row, 2).value = datetime.datetime(2027, 1, 1)
    wb.save(book)
    with pytest.raises(InstanceError) as caught:
        read_workbook(book)
    text = [str(p) for p in caught.value.problems]
    # Said as a date in a period column is, with the quarter the date falls in.
    assert text == [f"tiny.xlsx[settings]:{row}: value: horizon.start: the cell holds a date "
                    "(2027-01-01), not a quarter; type the quarter as text, e.g. 2027-Q1 (a "
                    "spreadsheet reads 2027-01-01 typed in a cell as a date)"]


def test_merged_cells_are_named_as_merged_not_just_empty(tmp_path):
    # A merge keeps its value in the top-left cell only (ECMA-376 Part 1, 18.3.1.55
    # mergeCell); the others had read as "is empty", and in seats, a blank meaning "no seat
    # limit", as nothing at all.
    book = folder_to_workbook(TINY, tmp_path / "tiny.xlsx")
    wb = load_workbook(book)
    wb["offices"].merge_cells("B2:B3")  # location, required
    wb["offices"].merge_cells("C2:C3")  # seats, optional
    wb["staff"]["C3"] = 7  # an unrelated problem, said as well
    ws = wb["settings"]
    ws.cell(_settings_row(ws, "horizon.count"), 2).value = None
    at = _settings_row(ws, "horizon.start")
    ws.merge_cells(start_row=at, start_column=2, end_row=_settings_row(ws, "horizon.count"),
                   end_column=2)
    wb.save(book)
    with pytest.raises(InstanceError) as caught:
        read_workbook(book)
    text = [str(p) for p in caught.value.problems]
    count_row = _settings_row(load_workbook(book)["settings"], "horizon.count")
    where = f"B{at}:B{count_row}"
    for expected in ("tiny.xlsx[offices]:3: location: empty because cells B2:B3 are merged; "
                     "unmerge them and fill each cell",
                     "tiny.xlsx[offices]:3: seats: empty because cells C2:C3 are merged; "
                     "unmerge them and fill each cell",
                     f"tiny.xlsx[settings]:{count_row}: value: empty because cells {where} are "
                     "merged; unmerge them and fill each cell"):
        assert expected in text, text
    assert any(t.startswith("tiny.xlsx[staff]:3: fte:") for t in text), text
    # Said once per cell: not also as a plain blank.
    assert not any(t.startswith("tiny.xlsx[offices]:3: location: is empty") for t in text), text


def test_a_merged_blank_or_a_merge_in_an_unread_column_is_no_problem(tmp_path):
    book = folder_to_workbook(TINY, tmp_path / "tiny.xlsx")
    wb = load_workbook(book)
    wb["offices"]["F2"] = "a note spread over two rows"
    wb["offices"]["F1"] = "note"  # a column the reader does not take: warned, not read
    wb["offices"].merge_cells("F2:F3")
    wb["demand"].merge_cells("G2:H3")  # blank cells right of the table, merged for looks
    wb.save(book)
    assert _same(read_instance(TINY), read_workbook(book))


def _hidden_warnings(instance) -> list[str]:
    return [w for w in instance.warnings if "hidden" in w]


def test_rows_hidden_by_hand_are_read_with_a_warning(tmp_path):
    book = folder_to_workbook(TINY, tmp_path / "tiny.xlsx")
    wb = load_workbook(book)
    for row in (3, 4, 9):
        wb["demand"].row_dimensions[row].hidden = True
    wb["staff"].row_dimensions[40].hidden = True  # a blank row: nothing is read from it
    wb.save(book)
    instance = read_workbook(book)
    assert _same(read_instance(TINY), instance)
    assert _hidden_warnings(instance) == [
        "tiny.xlsx[demand]: rows 3-4, 9 are hidden (by a filter or by hand); read all the "
        "same, as every row is"]


def test_rows_hidden_by_a_filter_are_read_with_a_warning(tmp_path):
    # Reference writer: XlsxWriter, whose documentation says a filter's rows must be hidden
    # by the writer itself (worksheet.autofilter, filter_column, set_row hidden), as a
    # spreadsheet program saves them.
    from xlsxwriter import Workbook

    source = load_workbook(folder_to_workbook(TINY, tmp_path / "source.xlsx"))
    book = tmp_path / "tiny.xlsx"
    out = Workbook(str(book))
    for ws in source.worksheets:
        sheet = out.add_worksheet(ws.title)
        rows = list(ws.iter_rows(values_only=True))
        for i, cells in enumerate(rows):
            for j, value in enumerate(cells):
                if value is not None:
                    sheet.write(i, j, value)
        if ws.title == "staff":
            office = rows[0].index("home_office")
            sheet.autofilter(0, 0, len(rows) - 1, len(rows[0]) - 1)
            sheet.filter_column(office, "x == A")
            for i, cells in enumerate(rows[1:], 1):
                if cells[office] != "A":
                    sheet.set_row(i, None, None, {"hidden": True})
            hidden = [i + 1 for i, cells in enumerate(rows[1:], 1) if cells[office] != "A"]
    out.close()
    instance = read_workbook(book)
    assert _same(read_instance(TINY), instance)
    rows = ", ".join(str(r) for r in hidden)
    assert hidden and _hidden_warnings(instance) == [
        f"tiny.xlsx[staff]: row{'s' if len(hidden) > 1 else ''} {rows} "
        f"{'are' if len(hidden) > 1 else 'is'} hidden (by a filter or by hand); read all the "
        "same, as every row is"]
    # The console shows it as every other input warning.
    run = subprocess.run([sys.executable, "-m", "rebalance.cli", "check", str(book)],
                         capture_output=True, text=True)
    assert run.returncode == 0, run.stderr
    assert "warning: tiny.xlsx[staff]: row" in run.stdout + run.stderr


# A column is hidden by the hidden attribute of the <col> element spanning it, min to max
# (ECMA-376 Part 1, 18.3.1.13 col); openpyxl writes one per column_dimensions entry, and one
# span for column_dimensions.group(..., hidden=True) (openpyxl docs, "Simple usage": Fold
# (outline)).
def test_a_hidden_column_is_read_with_a_warning(tmp_path):
    book = folder_to_workbook(TINY, tmp_path / "tiny.xlsx")
    wb = load_workbook(book)
    ws = wb["offices"]
    ws["F1"] = "note"  # a column of notes the reader does not take
    ws["F2"] = "seats counted in 2026"
    ws.column_dimensions["F"].hidden = True
    ws.column_dimensions.group("H", "XFD", hidden=True)  # the unused columns, hidden for looks
    wb.save(book)
    instance = read_workbook(book)
    assert _same(read_instance(TINY), instance)
    assert _hidden_warnings(instance) == [
        "tiny.xlsx[offices]: column F (note) is hidden; read all the same, as every column is"]


def test_several_hidden_columns_are_named_in_one_warning(tmp_path):
    book = folder_to_workbook(TINY, tmp_path / "tiny.xlsx")
    wb = load_workbook(book)
    ws = wb["demand"]
    ws["G1"] = "old_fte"  # an old column kept beside the one read, hidden
    ws["G2"] = 2.5
    ws.column_dimensions.group("D", "E", hidden=True)  # fte and priority: one span
    ws.column_dimensions["G"].hidden = True
    ws.column_dimensions["F"].hidden = True  # blank: nothing is read from it
    wb.save(book)
    instance = read_workbook(book)
    assert _same(read_instance(TINY), instance)
    assert _hidden_warnings(instance) == [
        "tiny.xlsx[demand]: columns D (fte), E (priority), G (old_fte) are hidden; read all "
        "the same, as every column is"]


def test_a_hidden_required_column_is_read_not_missing(tmp_path):
    # Hidden, fte is still the staff's contracted FTE: read (the same instance as the
    # folder's, no "required column is missing") and warned, as its values are not in view.
    book = folder_to_workbook(TINY, tmp_path / "tiny.xlsx")
    wb = load_workbook(book)
    wb["staff"].column_dimensions["C"].hidden = True
    wb.save(book)
    instance = read_workbook(book)
    assert _same(read_instance(TINY), instance)
    assert _hidden_warnings(instance) == [
        "tiny.xlsx[staff]: column C (fte) is hidden; read all the same, as every column is"]
    wb["staff"]["C3"] = 1.5  # a bad value in the hidden column names its cell as any other
    wb.save(book)
    with pytest.raises(InstanceError, match=r"\[staff\]:3: fte: '1.5' is out of range"):
        read_workbook(book)


def test_sheet_parts_are_found_through_the_workbook_relationships(tmp_path):
    # A package's parts may have any names: the workbook part's relationships name each
    # sheet's part, by a target relative to the workbook's folder or, with a leading "/", to
    # the package (ECMA-376 Part 2, 9.3); here the parts are renamed and listed backwards.
    import re
    import zipfile

    book = folder_to_workbook(TINY, tmp_path / "tiny.xlsx")
    wb = load_workbook(book)
    wb["demand"].row_dimensions[3].hidden = True
    wb["staff"].column_dimensions["C"].hidden = True
    wb["offices"].merge_cells("B2:B3")
    wb.save(book)
    count = len(wb.sheetnames)
    renamed = {f"xl/worksheets/sheet{i}.xml": f"xl/tables/part{count + 1 - i}.xml"
               for i in range(1, count + 1)}
    out = tmp_path / "renamed.xlsx"
    with zipfile.ZipFile(book) as zin, zipfile.ZipFile(out, "w", zipfile.ZIP_DEFLATED) as zout:
        for item in zin.infolist():
            data = zin.read(item.filename).decode("utf-8", "replace")
            if item.filename in ("[Content_Types].xml", "xl/_rels/workbook.xml.rels"):
                # openpyxl names the parts from the package root: "/xl/worksheets/..."
                data = re.sub(r"/xl/(worksheets/sheet\d+\.xml)",
                              lambda m: "/" + renamed["xl/" + m.group(1)], data)
            zout.writestr(renamed.get(item.filename, item.filename),
                          data if item.filename.endswith((".xml", ".rels")) else
                          zin.read(item.filename))
    with zipfile.ZipFile(out) as check:
        assert "xl/worksheets/sheet1.xml" not in check.namelist()
    with pytest.raises(InstanceError) as caught:
        read_workbook(out)
    text = [str(p) for p in caught.value.problems]
    assert ("tiny.xlsx[offices]:3: location: empty because cells B2:B3 are merged; unmerge "
            "them and fill each cell".replace("tiny.xlsx", "renamed.xlsx")) in text, text
    assert any(t.startswith("renamed.xlsx[demand]: row 3 is hidden") for t in text), text
    assert any(t.startswith("renamed.xlsx[staff]: column C (fte) is hidden") for t in text)


def test_a_misspelt_sheet_or_settings_key_is_said_with_the_name_it_is_close_to(tmp_path):
    book = folder_to_workbook(TINY, tmp_path / "tiny.xlsx")
    wb = load_workbook(book)
    wb.create_sheet("staf")
    row = _settings_row(wb["settings"], "policy.max_away_share")
    # The key it is close to given as well: nothing is left at its default, so a warning.
    wb["settings"].append(["policy.max_away_shares", 0.4])
    wb.save(book)
    warnings = read_workbook(book).warnings
    assert any(w.startswith("tiny.xlsx[staf]: unknown sheet, ignored") and
               w.endswith("(did you mean 'staff'?)") for w in warnings), warnings
    assert any(w.startswith(f"tiny.xlsx[settings]:{wb['settings'].max_row}: key: unknown key "
                            "'policy.max_away_shares', ignored") and
               w.endswith("(did you mean 'policy.max_away_share'?)") for w in warnings), warnings
    # Alone, it leaves the cap at its default: an error on its row, as in a folder (the
    # default's meaning from docs/instance-format.md's settings table).
    wb["settings"].delete_rows(row)
    wb.save(book)
    with pytest.raises(InstanceError) as caught:
        read_workbook(book)
    assert [str(p) for p in caught.value.problems if not p.is_warning] == [
        f"tiny.xlsx[settings]:{wb['settings'].max_row}: key: policy.max_away_shares: unknown "
        "key; did you mean policy.max_away_share? (as written, policy.max_away_share stays at "
        "its default, 1.0: no cap)"]


def test_a_date_where_a_period_name_is_expected_is_one_problem_with_the_hint(tmp_path):
    # Sweep: a date in the demand sheet's period column read "unknown period
    # '2027-01-01T00:00:00'", without the hint horizon.start gives; dates in the periods
    # sheet were taken as names, every output period then '2027-01-01T00:00:00'.  (A
    # spreadsheet program reads 2027-01-01 typed in a cell as a date: the openpyxl and
    # LibreOffice Calc documentation of cell types.)
    import datetime

    assert [str(p) for p in _problems_with_a_date(tmp_path, "demand", "C2")
            if not p.is_warning] == [
        "tiny.xlsx[demand]:2: period: the cell holds a date (2027-01-01), not a "
        "period name; type the period name as text, e.g. 2027-Q1 (a spreadsheet reads "
        "2027-01-01 typed in a cell as a date)"]

    book, wb = _periods_workbook(tmp_path / "named.xlsx", [
        (datetime.datetime(2027, month, 1), 2027, 480) for month in (1, 4, 7, 10)])
    for sheet in ("demand", "staff"):
        for row in wb[sheet].iter_rows(min_row=2):
            for cell in row:
                if isinstance(cell.value, str) and cell.value.startswith("2027-Q"):
                    month = 3 * int(cell.value[-1]) - 2
                    cell.value = f"2027-{month:02d}-01T00:00:00"
    wb.save(book)
    with pytest.raises(InstanceError) as caught:
        read_workbook(book)
    said = [(p.file, p.row, p.column, p.message.split(";")[0]) for p in caught.value.problems
            if not p.is_warning]
    assert said == [("named.xlsx[periods]", row, "name", f"the cell holds a date (2027-"
                     f"{3 * row - 5:02d}-01), not a period name") for row in (2, 3, 4, 5)]



def _edited_book(tmp_path, edit) -> list:
    """The problems of tiny's workbook after ``edit(workbook)`` (an openpyxl Workbook)."""
    book = folder_to_workbook(TINY, tmp_path / "tiny.xlsx")
    wb = load_workbook(book)
    edit(wb)
    wb.save(book)
    with pytest.raises(InstanceError) as caught:
        read_workbook(book)
    return list(caught.value.problems)


def test_a_missing_settings_sheet_is_one_problem(tmp_path):
    # It had drawn a second line, "key: horizon: give either periods = [...] or start ...",
    # for the horizon the missing sheet would have held.
    problems = _edited_book(tmp_path, lambda wb: wb.remove(wb["settings"]))
    assert [str(p) for p in problems] == [
        "tiny.xlsx[settings]: sheet is missing; expected a sheet named settings with columns "
        "key and value, one setting per row, such as horizon.start, horizon.count and "
        "horizon.hours_per_fte; the workbook's sheets are offices, skills, staff, demand, "
        "budget"]


def test_a_settings_sheet_without_its_columns_draws_no_missing_settings(tmp_path):
    def rename_columns(wb):
        wb["settings"]["A1"], wb["settings"]["B1"] = "setting", "amount"

    said = [(p.file, p.row, p.column) for p in _edited_book(tmp_path, rename_columns)
            if not p.is_warning]
    assert said == [("tiny.xlsx[settings]", 1, "key"), ("tiny.xlsx[settings]", 1, "value")]


def test_a_start_typed_as_text_gets_no_hint_about_dates(tmp_path):
    # '2027Q1' is text: the hint that a spreadsheet reads 2027-01-01 as a date does not fit
    # it (a cell holds a date only where the file says so, ECMA-376 Part 1, 18.3.1.4 c: a
    # number with a date format, or a cell of type d; openpyxl reads only those as datetime).
    def start(value):
        def edit(wb):
            ws = wb["settings"]
            ws.cell(_settings_row(ws, "horizon.start"), 2).value = value
        return edit

    (problem,) = _edited_book(tmp_path, start("2027Q1"))
    assert problem.message == ("horizon.start: '2027Q1' is not a quarter; expected text such "
                               'as "2027-Q1"')
    # A date typed in a number's cell is shown as the date the cell shows, not as ISO text
    # with a time ('1900-01-04T00:00:00' had read as if typed so).
    import datetime

    def count(wb):
        ws = wb["settings"]
        ws.cell(_settings_row(ws, "horizon.count"), 2).value = datetime.datetime(1900, 1, 4)

    (problem,) = _edited_book(tmp_path, count)
    assert problem.message == ("horizon.count: the cell holds a date (1900-01-04), which is "
                               "not valid; expected a whole number from 1 to 400")
    # A title is text: a date cell reads as the date it shows (ECMA-376 Part 1, 18.3.1.4, as
    # above), as a number cell reads as the number; it had read '2027-05-01T00:00:00'.
    book = folder_to_workbook(TINY, tmp_path / "titled.xlsx")
    wb = load_workbook(book)
    wb["settings"].append(["report.title", datetime.datetime(2027, 5, 1)])
    wb.save(book)
    assert read_workbook(book).title == "2027-05-01"


def test_a_sheet_is_named_as_the_book_spells_it(tmp_path):
    # Names are matched without regard to case (docs/instance-format.md; sheet names are
    # unique ignoring case in a workbook, common practice of spreadsheet programs), but a
    # message named "staff" for a sheet called "Staff".
    def spell(wb):
        for name, spelt in (("staff", "Staff"), ("offices", "OFFICES"), ("settings", "Settings")):
            wb[name].title = "renaming"  # openpyxl refuses a title equal ignoring case
            wb["renaming"].title = spelt
        wb["Staff"]["B4"] = "nowhere"
        ws = wb["Settings"]
        ws.cell(_settings_row(ws, "policy.max_away_share"), 2).value = 2
        wb.create_sheet("Notes")

    problems = _edited_book(tmp_path, spell)
    text = [str(p) for p in problems]
    assert any(t.startswith("tiny.xlsx[Staff]:4: home_office: unknown office 'nowhere'; "
                            "expected one listed in sheet OFFICES") for t in text), text
    assert any(t.startswith("tiny.xlsx[Settings]:") and "policy.max_away_share" in t
               for t in text), text
    assert any(t.startswith("tiny.xlsx[Notes]: unknown sheet") for t in text), text
    assert not any("[staff]" in t or "[settings]" in t or "[notes]" in t for t in text), text


def test_a_misspelt_required_setting_is_one_problem_on_its_row(tmp_path):
    # A misspelt horizon.start had drawn "horizon.start: is missing" with no row, and the
    # suggestion only in the unknown key's warning apart; now one problem on the misspelt
    # row says both.  Which names are close is difflib's ratio (Python's difflib
    # documentation, get_close_matches); the rest is common practice.
    def said(renames: dict[str, str], periods: bool = False) -> tuple[list[str], dict]:
        book = folder_to_workbook(TINY, tmp_path / "tiny.xlsx")
        wb = load_workbook(book)
        rows = {}
        for old, new in renames.items():
            rows[new] = _settings_row(wb["settings"], old)
            wb["settings"].cell(rows[new], 1).value = new
        if periods:
            sheet = wb.create_sheet("periods")
            sheet.append(["name", "year"])
            for quarter in range(1, 5):
                sheet.append([f"2027-Q{quarter}", "2027"])
        wb.save(book)
        with pytest.raises(InstanceError) as caught:
            read_workbook(book)
        return [("warning: " if p.is_warning else "") + str(p)
                for p in caught.value.problems], rows

    got, rows = said({"horizon.start": "horizon.strat"})
    assert got == [f'tiny.xlsx[settings]:{rows["horizon.strat"]}: key: horizon.start: is '
                   'missing; expected text such as "2027-Q1" (horizon.strat may be meant as it)']
    got, rows = said({"horizon.start": "horizon.strat", "horizon.count": "horizon.cuont"})
    assert got == [f'tiny.xlsx[settings]:{rows["horizon.strat"]}: key: horizon: give either '
                   'periods = [...] or start = "YYYY-Qn" with count = N (horizon.strat may be '
                   "meant as start; horizon.cuont may be meant as count)"]
    # A key row of no known section, as its warning suggests.
    got, rows = said({"horizon.start": "horizn.start"})
    assert got == [f'tiny.xlsx[settings]:{rows["horizn.start"]}: key: horizon.start: is '
                   'missing; expected text such as "2027-Q1" (horizn.start may be meant as it)']
    # An optional key's typo is an error of its own on its row, saying the default it leaves.
    got, rows = said({"horizon.hours_per_fte": "horizon.hours_per_fet",
                      "policy.max_away_share": "policy.max_away_shares"})
    assert sorted(got) == [
        f'tiny.xlsx[settings]:{rows["horizon.hours_per_fet"]}: key: horizon.hours_per_fte: is '
        "missing; expected a number > 0 (required when periods are generated from start) "
        "(horizon.hours_per_fet may be meant as it)",
        f'tiny.xlsx[settings]:{rows["policy.max_away_shares"]}: key: policy.max_away_shares: '
        "unknown key; did you mean policy.max_away_share? (as written, policy.max_away_share "
        "stays at its default, 1.0: no cap)"]
    # Listed periods without hours, the default misspelt: each period row names it.
    got, rows = said({"horizon.hours_per_fte": "horizon.hours_per_fet"}, periods=True)
    errors = [g for g in got if not g.startswith("warning:")]
    assert errors == [f"tiny.xlsx[periods]:{row}: hours_per_fte: is missing and "
                      "horizon.hours_per_fte gives no default; expected a number > 0 here or in "
                      "horizon.hours_per_fte (horizon.hours_per_fet may be meant as "
                      "horizon.hours_per_fte)" for row in range(2, 6)]
    assert not any("unknown key" in g for g in got), got


def test_settings_keys_are_read_whatever_their_case_and_problems_in_row_order(tmp_path):
    # A reviewer's check: "Horizon.Start" was refused (key unknown, horizon.start missing)
    # where column names are read ignoring case; common practice, as for the headers
    # (test_column_names_are_read_whatever_their_case): the same word whatever its case.
    book = folder_to_workbook(TINY, tmp_path / "tiny.xlsx")
    wb = load_workbook(book)
    start = _settings_row(wb["settings"], "horizon.start")
    wb["settings"].cell(start, 1).value = "Horizon.Start"
    wb.save(book)
    instance = read_workbook(book)
    assert instance.period_names == read_instance(TINY).period_names
    assert not instance.warnings
    # The same key twice, whatever its case, is one key listed twice.
    wb["settings"].append(["HORIZON.START", "2027-Q1"])
    wb.save(book)
    with pytest.raises(InstanceError) as caught:
        read_workbook(book)
    assert [str(p) for p in caught.value.problems] == [
        f"tiny.xlsx[settings]:{wb['settings'].max_row}: key: 'HORIZON.START' is listed twice "
        f"(first at row {start})"]

    # Row order: a misspelt key (an error: the key it is close to is not given) below a value
    # the instance's reader refuses had been listed first, row 5 before row 2 in the demo.
    def edit(wb):
        wb["settings"].cell(_settings_row(wb["settings"], "horizon.start"), 2).value = "soon"
        wb["settings"].cell(_settings_row(wb["settings"], "policy.max_away_share"), 1).value = (
            "policy.max_away_shar")

    rows = [p.row for p in _edited_book(tmp_path, edit) if p.file == "tiny.xlsx[settings]"]
    assert len(rows) == 2 and rows == sorted(rows), rows


def _periods_workbook(path, rows):
    """Tiny's workbook at ``path`` and the open book, with a periods sheet of ``rows`` (name,
    year, hours_per_fte) in place of horizon.start and count; the caller saves it."""
    book = folder_to_workbook(TINY, path)
    wb = load_workbook(book)
    for row in list(wb["settings"].iter_rows(min_row=2)):
        if row[0].value in ("horizon.start", "horizon.count"):
            row[0].value = row[1].value = None
    periods = wb.create_sheet("periods")
    periods.append(["name", "year", "hours_per_fte"])
    for row in rows:
        periods.append(list(row))
    return book, wb


def _book_with_periods(tmp_path, rows) -> list:
    """The problems of tiny's workbook with a periods sheet of ``rows`` (name, year,
    hours_per_fte) in place of horizon.start and count; demand and staff keep 2027-Qn."""
    book, wb = _periods_workbook(tmp_path / "tiny.xlsx", rows)
    wb.save(book)
    with pytest.raises(InstanceError) as caught:
        read_workbook(book)
    return list(caught.value.problems)


@pytest.mark.parametrize(("column", "said"), [
    ("name", "the cell holds a date (2027-01-01), not a period name; type the period name as "
             "text, e.g. 2027-Q1 (a spreadsheet reads 2027-01-01 typed in a cell as a date)"),
    ("year", "the cell holds a date (2027-01-01), not a budget year; type the year's name as "
             "text, e.g. 2027 (a spreadsheet reads 2027-01-01 typed in a cell as a date)"),
    ("hours_per_fte", "the cell holds a date (2027-01-01), which is not valid; expected a "
                      "number > 0"),
], ids=["name", "year", "hours_per_fte"])
def test_a_date_in_the_periods_sheet_is_said_once_at_its_cell(tmp_path, column, said):
    # Review: the periods sheet's cells had reached the reader as ISO text with a time, so a
    # date in hours_per_fte read "'2027-01-01T00:00:00' is not valid", one in a name left
    # demand's rows saying "(2027-01-01T00:00:00 to 2027-Q4)" and one in a year "budget year
    # '2027-01-01T00:00:00' has no row".  Said as the settings sheet says a date cell.  (A
    # spreadsheet program reads 2027-01-01 typed in a cell as a date: the openpyxl and
    # LibreOffice Calc documentation of cell types.)
    import datetime

    rows = [[f"2027-Q{q}", 2027, 480] for q in range(1, 5)]
    rows[0][("name", "year", "hours_per_fte").index(column)] = datetime.datetime(2027, 1, 1)
    problems = _book_with_periods(tmp_path, rows)
    assert [str(p) for p in problems if not p.is_warning] == [
        f"tiny.xlsx[periods]:2: {column}: {said}"]
    assert not [str(p) for p in problems if "T00:00:00" in str(p)]  # no warning names it


def test_a_periods_sheet_problem_below_a_blank_row_names_its_own_row(tmp_path):
    # Blank rows are skipped, and the i-th period read had been put on sheet row i + 1: a
    # date in row 4 below a blank row 3 was said on row 3.  (Rows as the spreadsheet numbers
    # them, header in row 1: docs/instance-format.md, Instance as one workbook.)
    import datetime

    rows = [["2027-Q1", 2027, 480], [None, None, None], ["2027-Q2", 2027, 480],
            ["2027-Q3", 2027, datetime.datetime(2027, 7, 1)], ["2027-Q4", 2027, -5]]
    said = [(p.file, p.row, p.column) for p in _book_with_periods(tmp_path, rows)
            if not p.is_warning]
    assert said == [("tiny.xlsx[periods]", 5, "hours_per_fte"),
                    ("tiny.xlsx[periods]", 6, "hours_per_fte")]


def test_a_period_unknown_in_many_rows_points_at_the_periods_sheet(tmp_path):
    # With a periods sheet, the one line for a period unknown in many rows had said "is not in
    # sheet settings ...; add it to sheet settings", a sheet that lists no period (one row's
    # problem already said "listed in sheet periods": test_periods_sheet_lists_periods).
    def edit(wb):
        for row in list(wb["settings"].iter_rows(min_row=2)):
            if row[0].value in ("horizon.start", "horizon.count"):
                row[0].value = row[1].value = None
        periods = wb.create_sheet("periods")
        periods.append(["name", "year", "hours_per_fte"])
        for q in range(1, 5):
            periods.append([f"2027-Q{q}", 2027, 480])
        for row in range(2, 6):
            wb["demand"].cell(row, 3).value = "2028-Q1"

    (problem,) = [p for p in _edited_book(tmp_path, edit) if not p.is_warning]
    assert "settings" not in problem.message, problem.message
    assert problem.message.startswith("period '2028-Q1' is not in sheet periods (2027-Q1 to "
                                      "2027-Q4) but is named in 4 rows"), problem.message
    assert "add it to sheet periods or correct those rows" in problem.message
