"""Edge cases of the workbook route a reviewer found: cell text the writer must store as text
(a leading ``=``, control characters), blank lines above a CSV header, a line break inside a
name, and a folder where a workbook file belongs.  The folder route's verdict on the same data
is the reference throughout (docs/instance-format.md: the book reads back to the folder's
instance)."""

from __future__ import annotations

import dataclasses
import shutil
import zipfile

import pytest
from conftest import DATA
from openpyxl import load_workbook
from openpyxl.utils.escape import unescape

from rebalance.cli import EXIT_INVALID_INPUT, EXIT_OK, main
from rebalance.readers import InstanceError, read_instance


def _same(a, b) -> bool:
    # The name comes from the folder or the file; warnings name files or sheets.
    return dataclasses.replace(a, name="", warnings=()) == dataclasses.replace(
        b, name="", warnings=())


def _tiny(tmp_path, edits: dict[str, tuple[str, str]] | None = None):
    """A copy of tests/data/tiny with ``{file: (old, new)}`` text replaced in each file."""
    folder = tmp_path / "folder"
    shutil.copytree(DATA / "tiny", folder)
    for name, (old, new) in (edits or {}).items():
        path = folder / name
        text = path.read_text(encoding="utf-8")
        assert old in text, (name, old)
        path.write_text(text.replace(old, new), encoding="utf-8", newline="")
    return folder


def _book_of(folder, tmp_path, capsys):
    """``folder`` written as a workbook by the command, which must succeed."""
    book = tmp_path / "book.xlsx"
    assert main(["workbook", str(folder), "-o", str(book)]) == EXIT_OK, capsys.readouterr().err
    capsys.readouterr()
    return book


def _errors(path) -> list[str]:
    with pytest.raises(InstanceError) as caught:
        read_instance(path)
    return [str(p) for p in caught.value.problems if not p.is_warning]


# --------------------------------------------------------------------------------------------
# finding 1: a line break inside a name


def test_a_line_break_inside_a_name_is_refused_at_every_cell_as_the_csv_route_refuses_it(
        tmp_path, capsys):
    # Alt+Enter in a spreadsheet cell: office B renamed "B\nx" wherever it is named.  The plan
    # folder's CSV files could not be read back (verify: "runs over several lines").
    folder = _tiny(tmp_path)
    book = _book_of(folder, tmp_path, capsys)
    wb = load_workbook(book)
    for sheet, column in (("offices", 1), ("staff", 2), ("demand", 1)):
        for row in wb[sheet].iter_rows(min_row=2):
            if row[column - 1].value == "B":
                row[column - 1].value = "B\nx"
    wb.save(book)
    # The reference: the CSV route refuses the same name, as docs/instance-format.md says.
    for name in ("offices.csv", "staff.csv", "demand.csv"):
        path = folder / name
        path.write_text(path.read_text().replace("\nB,", '\n"B\nx",').replace(
            ",B,", ',"B\nx",'), newline="")
    csv_said = _errors(folder)
    assert csv_said and all("runs over several lines" in line for line in csv_said), csv_said
    assert main(["check", str(book)]) == EXIT_INVALID_INPUT
    said = _errors(book)
    # Every cell at once, by sheet, row (as the spreadsheet shows it) and column; the
    # line break is the only thing said of each.
    words = "runs over several lines (a line break inside the cell); expected one line per cell"
    assert said == [f"book.xlsx[offices]:3: office: {words}",
                    f"book.xlsx[staff]:5: home_office: {words}"] + [
                    f"book.xlsx[demand]:{row}: office: {words}" for row in range(7, 11)], said


def test_a_line_break_in_a_periods_sheet_name_is_refused(tmp_path, capsys):
    folder = _tiny(tmp_path)
    book = _book_of(folder, tmp_path, capsys)
    wb = load_workbook(book)
    settings = wb["settings"]
    for row in range(settings.max_row, 1, -1):
        if settings.cell(row, 1).value in ("horizon.start", "horizon.count"):
            settings.delete_rows(row)
    periods = wb.create_sheet("periods")
    periods.append(["name", "year"])
    for quarter in range(1, 5):
        periods.append([f"2027-Q{quarter}" if quarter > 1 else "2027-\nQ1", "2027"])
    wb.save(book)
    said = _errors(book)
    assert said[0] == ("book.xlsx[periods]:2: name: runs over several lines (a line break "
                       "inside the cell); expected one line per cell"), said


def test_a_line_break_between_skills_reads_as_the_space_the_folder_has(tmp_path, capsys):
    # The skills cell is a list split at white space (docs/instance-format.md), so Alt+Enter
    # between two skills makes no name with a line break in it: the folder's instance.
    folder = _tiny(tmp_path)
    book = _book_of(folder, tmp_path, capsys)
    wb = load_workbook(book)
    cell = wb["staff"]["D3"]
    assert cell.value == "review:0.8 intake:1.0"
    cell.value = "review:0.8\nintake:1.0"
    wb.save(book)
    assert _same(read_instance(folder), read_instance(book))


# --------------------------------------------------------------------------------------------
# finding 2: blank lines above a CSV header


def test_blank_lines_above_a_csv_header_are_left_out_of_the_book(tmp_path, capsys):
    folder = _tiny(tmp_path, {"offices.csv": ("office,", "\n \n,,\noffice,")})
    # The reference: the folder route reads past them (docs/instance-format.md).
    assert main(["check", str(folder)]) == EXIT_OK
    book = _book_of(folder, tmp_path, capsys)
    # openpyxl, an outside reader, finds the column names in row 1.
    assert [c.value for c in load_workbook(book)["offices"][1]] == [
        "office", "location", "seats", "max_hires_per_period"]
    assert main(["check", str(book)]) == EXIT_OK
    assert _same(read_instance(folder), read_instance(book))


# --------------------------------------------------------------------------------------------
# finding 3: text starting with "="


def test_text_starting_with_an_equals_sign_is_written_as_text_not_a_formula(tmp_path, capsys):
    folder = _tiny(tmp_path, {
        "staff.csv": ("last_period\na1,", "last_period,notes\n=a1,"),
        "settings.toml": ('name = "highs"', 'name = "highs"\n\n[report]\ntitle = "=Plan"'),
    })
    staff = folder / "staff.csv"
    staff.write_text(staff.read_text().replace("false,\n", "false,,=TODO ask HR\n", 1))
    # The reference: the folder route takes both as plain text.
    assert main(["check", str(folder)]) == EXIT_OK
    book = _book_of(folder, tmp_path, capsys)
    # openpyxl's data_type: "s" for a string, "f" for a formula (openpyxl.cell.cell).
    wb = load_workbook(book)
    cells = {c.value: c for ws in wb.worksheets for row in ws.iter_rows() for c in row
             if isinstance(c.value, str) and c.value.startswith("=")}
    assert set(cells) == {"=a1", "=TODO ask HR", "=Plan"}
    assert {c.data_type for c in cells.values()} == {"s"}
    # and its quotePrefix: the quote a spreadsheet shows before such text ('=a1), so the
    # cell stays text when edited there (common practice).
    assert all(c.quotePrefix for c in cells.values())
    assert main(["check", str(book)]) == EXIT_OK
    capsys.readouterr()
    assert _same(read_instance(folder), read_instance(book))
    assert read_instance(book).staff[0].person == "=a1"


# --------------------------------------------------------------------------------------------
# finding 4: control characters


def test_control_characters_are_escaped_and_read_back(tmp_path, capsys):
    # Pasted from an export: U+0001 in a location and in a notes cell, U+001F in a person id;
    # and text that merely looks like an escape must come back as written.
    folder = _tiny(tmp_path, {
        "offices.csv": ("A,Alder,", "A,Al\x01der,"),
        "staff.csv": ("last_period\na1,", "last_period,notes\na\x1f1,"),
    })
    staff = folder / "staff.csv"
    staff.write_text(staff.read_text().replace("false,\n", "false,,ask\x01HR\n", 1)
                     .replace("b1,", "b_x0041_1,"))
    # The reference: the folder route takes them as they are.
    assert main(["check", str(folder)]) == EXIT_OK
    capsys.readouterr()
    book = _book_of(folder, tmp_path, capsys)
    # ECMA-376 Part 1, 22.9.2.19 ST_Xstring: a character XML cannot hold is written _xHHHH_,
    # and an underscore that would start such a form as _x005F_ (the rule from memory);
    # openpyxl's own unescape, an outside reader of that form, gives the text back.
    with zipfile.ZipFile(book) as archive:
        xml = "".join(archive.read(n).decode() for n in archive.namelist()
                      if n.startswith("xl/") and n.endswith(".xml"))
    assert "Al_x0001_der" in xml and "a_x001F_1" in xml and "b_x005F_x0041_1" in xml
    values = {c.value for ws in load_workbook(book).worksheets for row in ws.iter_rows()
              for c in row if isinstance(c.value, str)}
    assert {"Al\x01der", "ask\x01HR", "a\x1f1", "b_x0041_1"} <= {unescape(v) for v in values}
    assert _same(read_instance(folder), read_instance(book))
    assert [p.person for p in read_instance(book).staff][::3] == ["a\x1f1", "b_x0041_1"]


# --------------------------------------------------------------------------------------------
# finding 10: a folder named like a workbook


def test_a_folder_named_like_a_workbook_is_said_to_be_a_folder(tmp_path, capsys):
    folder = tmp_path / "dir.xlsx"
    folder.mkdir()
    assert main(["check", str(folder)]) == EXIT_INVALID_INPUT
    err = capsys.readouterr().err
    assert "workbook not found" not in err
    # The folder route's words for a folder where a file belongs (readers.py).
    assert "dir.xlsx: is a folder; expected a workbook file" in err, err


@pytest.mark.parametrize("text", ["plain", "a\x01b", "\x00\x08\x0b\x0c\x0d\x0e\x1f", "tab\tand\nlf",
                                  "_x0041_", "a_x005F_b", "_x12_", "__x0001__", "_X0041_",
                                  "=sum", "é\u2028ü"])
def test_cell_text_is_escaped_as_xlsxwriter_escapes_it_and_read_back(text):
    # xlsxwriter, which writes plan.xlsx, is the outside reference for the _xHHHH_ form
    # (ECMA-376 Part 1, 22.9.2.19 ST_Xstring); reading undoes it exactly.
    from xlsxwriter.xmlwriter import XMLwriter

    from rebalance.workbook_writer import plain_text, xml_text

    assert xml_text(text) == XMLwriter._escape_control_characters(text)
    assert plain_text(xml_text(text)) == text


def test_a_surrogate_code_is_left_as_stored():
    # A lone surrogate is no character: UTF-8 cannot encode it (Python's str.encode refuses
    # it), so a message printing it would fail.
    from rebalance.workbook_writer import plain_text

    assert plain_text("b_xD800_1") == "b_xD800_1"
    assert plain_text("_x00E9_") == "\u00e9"
