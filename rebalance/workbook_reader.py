"""Read a whole instance from one ``.xlsx`` workbook (:mod:`rebalance.workbook_writer` writes
an instance folder as one).

A workbook holds one sheet per table of the folder format, with the same columns as the CSV
files, plus a ``settings`` sheet of ``key | value`` rows and an optional ``periods`` sheet (see
``docs/instance-format.md``, section *Instance as one workbook*).  Cells are turned into text and
handed to :func:`rebalance.readers.build_instance`, so a workbook is validated by exactly the
rules a folder is; only the labels differ: every problem names ``book.xlsx[Sheet]`` (the sheet as
the book spells its name), the row as the spreadsheet shows it and the column.
"""

from __future__ import annotations

import datetime as dt
import math
import re
import zipfile
from collections.abc import Callable, Iterable, Mapping
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Any

from openpyxl.worksheet.cell_range import CellRange
from openpyxl.worksheet.formula import ArrayFormula, DataTableFormula

from rebalance.instance import Instance
from rebalance.problems import Problem, did_you_mean
from rebalance.read_limits import COLUMNS
from rebalance.readers import (
    OPTIONAL_TABLES,
    REQUIRED_TABLES,
    InstanceError,
    build_instance,
)
from rebalance.settings_reader import SETTINGS_KEYS, CellDate, typo_words
from rebalance.tables import RawTable, known_case
from rebalance.workbook_layout import Layout, sheet_layout, sheet_parts
from rebalance.workbook_writer import (
    NUMBER,
    PERIOD_COLUMNS,
    PERIODS_SHEET,
    SETTINGS_SHEET,
    plain_text,
)

__all__ = ["read_workbook"]
# Columns that hold period names, by sheet: text, never a date.  (The periods sheet's date
# cells reach the settings reader as dates, which says them: see _periods.)
_PERIOD_CELLS = {"demand": ("period",), "staff": ("last_period",)}
# Columns that hold budget years (names such as 2027 or FY27): never a date either.
_YEAR_CELLS = {"budget": ("year",)}
_PERIOD_KEY = re.compile(r"^horizon\.periods\[(\d+)\](?:\.(\w+))?$")
# Cells read as lists split at white space, where a line break parts two items as a space does.
_SPLIT_CELLS = {"staff": "skills", "skills": "ramp"}


@dataclass(frozen=True)
class _Sheet:
    """A sheet as text cells, header in row 1."""

    columns: tuple[str, ...]
    rows: tuple[dict[str, str], ...]
    raw_rows: tuple[tuple[Any, ...], ...]  # typed cell values, for the settings sheet
    overlong_rows: tuple[int, ...] = ()  # rows with filled cells past the header
    unnamed_cells: tuple[tuple[int, int], ...] = ()  # (row, column) filled under no name
    # (row, column) of formulas the file holds no value for: they would read as blank.
    unsaved_formulas: tuple[tuple[int, str], ...] = ()
    # (row, column, range) of cells a merge left empty, a value showing over them.
    merged_away: tuple[tuple[int, str, str], ...] = ()


def read_workbook(path: str | Path) -> Instance:
    """Read and validate an instance workbook; raise :class:`InstanceError` listing all problems.

    The instance is named after the file without its suffix.
    """
    book_path = Path(path)
    book = book_path.name
    if not book_path.is_file():
        raise InstanceError([Problem(book, None, None, "is a folder; expected a workbook file "
                                     "(a folder whose name ends in .xlsx is not read as an "
                                     "instance folder)" if book_path.is_dir()
                                     else "workbook not found")])
    try:
        sheets, titles, problems = _load_sheets(book_path)
    except Exception as exc:  # openpyxl raises many kinds for a file that is not a workbook
        raise InstanceError([Problem(book, None, None,
                                     f"cannot be read as an .xlsx workbook ({exc})")]) from None

    def title(sheet: str) -> str:
        # As the book spells it: "staff" in a message about a sheet named "Staff" had sent a
        # planner looking for a sheet that is not there.
        return titles.get(sheet, sheet)

    def label(sheet: str) -> str:
        return f"{book}[{title(sheet)}]"

    problems = [replace(p, file=f"{book}[{p.file}]") for p in problems]
    for name, read in sheets.items():
        for row, column in read.unsaved_formulas:
            # Blank would mean "no limit" in several columns: never read it as that.
            problems.append(Problem(label(name), row, column, "a formula whose value the file "
                                    "does not hold, or whose value is empty text; expected a "
                                    "value: type it, or, if a program that does not calculate "
                                    "wrote the workbook, open and save it in a spreadsheet "
                                    "program"))
    # Read as blank, a merged-away cell would mean "no limit" or a default: an error, said
    # once in place of what the blank would otherwise raise.  So is a date where a period
    # name is expected (below).
    merged: dict[tuple[str, int | None, str | None], str] = {}
    for name, read in sheets.items():
        for row, column, cells in read.merged_away:
            problem = Problem(label(name), row, column, f"empty because cells {cells} are "
                              "merged; unmerge them and fill each cell")
            problems.append(problem)
            merged[(problem.file, row, column)] = problem.message
    for problem in _dates_for_periods(sheets, label):
        problems.append(problem)
        merged[(problem.file, problem.row, problem.column)] = problem.message
    # A line break typed in a cell (Alt+Enter): the CSV route refuses it, and a name holding
    # one had passed check and made a plan folder that verify could not read.
    for name, read in sheets.items():
        used = _used_columns(name) - {_SPLIT_CELLS.get(name, "")}
        for number, texts in enumerate(read.rows, 2):
            for column, text in texts.items():
                if ("\n" in text or "\r" in text) and column.lower() in used:
                    problem = Problem(label(name), number, column, "runs over several lines (a "
                                      "line break inside the cell); expected one line per cell")
                    problems.append(problem)
                    merged[(problem.file, number, column)] = problem.message
    # Said with a missing sheet: one named otherwise ("Skill set") is then seen at a glance.
    found = ("; the workbook's sheets are " + ", ".join(titles.values()) if titles
             else "; the workbook has no sheet")
    tables: dict[str, RawTable] = {}
    for name in REQUIRED_TABLES + OPTIONAL_TABLES:
        sheet = sheets.get(name)
        if sheet is not None:
            tables[name] = known_case(RawTable(label(name), sheet.columns, sheet.rows,
                                               overlong_rows=sheet.overlong_rows,
                                               unnamed_cells=sheet.unnamed_cells),
                                      COLUMNS[name][0] + COLUMNS[name][1])
        elif name in REQUIRED_TABLES:
            problems.append(Problem(label(name), None, None, "sheet is missing" + found))
    known = set(REQUIRED_TABLES + OPTIONAL_TABLES + (SETTINGS_SHEET, PERIODS_SHEET))
    for name in sheets:
        if name not in known:
            problems.append(Problem(label(name), None, None, "unknown sheet, ignored (expected "
                                    "one of: " + ", ".join(sorted(known)) + ")"
                                    + did_you_mean(name, sorted(known)), is_warning=True))

    settings: dict[str, Any] = {}
    key_rows: dict[str, int] = {}
    unknown_rows: dict[str, int] = {}
    if SETTINGS_SHEET in sheets:
        settings, key_rows = _settings(sheets[SETTINGS_SHEET], label(SETTINGS_SHEET), problems,
                                       unknown_rows)
    else:
        problems.append(Problem(label(SETTINGS_SHEET), None, None, "sheet is missing; expected "
                                "a sheet named settings with columns key and value, one "
                                "setting per row, such as horizon.start, horizon.count and "
                                "horizon.hours_per_fte" + found))
    # With no settings to read, every setting reads as missing: the sheet's own problem says
    # it once (a missing sheet had drawn a second line, "horizon: give either periods ...").
    settings_read = SETTINGS_SHEET in sheets and {"key", "value"} <= {
        c.lower() for c in sheets[SETTINGS_SHEET].columns}
    period_rows: tuple[int, ...] | None = None  # None: the book has no periods sheet
    if PERIODS_SHEET in sheets:
        period_rows = _periods(sheets[PERIODS_SHEET], label(PERIODS_SHEET), settings, problems)

    name = book_path.stem
    try:
        instance = build_instance(name, settings, tables, problems)
    except InstanceError as exc:
        def kept(source: Problem, said: Problem) -> bool:
            if merged.get((said.file, said.row, said.column), said.message) != said.message:
                return False  # said once already, as a merged or a date cell
            # A setting of a sheet that could not be read is said by the sheet's problem.
            return settings_read or source.file != "settings.toml" or (
                said.file != label(SETTINGS_SHEET))

        said = [(p, _relabel(p, book, title, key_rows, period_rows, unknown_rows))
                for p in exc.problems]
        raise InstanceError(_in_row_order([p for source, p in said if kept(source, p)],
                                          label(SETTINGS_SHEET))) from None
    warnings = tuple(str(_relabel(p, book, title, key_rows, period_rows, unknown_rows))
                     for p in problems if p.is_warning)
    return instance.with_changes(warnings=warnings)


# --------------------------------------------------------------------------------------------
# cells and sheets


def _load_sheets(path: Path) -> tuple[dict[str, _Sheet], dict[str, str], list[Problem]]:
    """The sheets by their names as the reader knows them (trimmed, lower case), their titles
    as the book spells them, and the problems of the book as a whole (``Problem.file`` holds
    the sheet's own title)."""
    from openpyxl import load_workbook  # imported here: only workbook users pay for it

    # read_only streams rows; data_only gives a formula's cached value, not its text, so the
    # text comes from a second pass, for cells that have no cached value.
    wb = load_workbook(path, read_only=True, data_only=True)
    formulas = load_workbook(path, read_only=True, data_only=False)
    archive = zipfile.ZipFile(path)
    problems: list[Problem] = []
    try:
        parts = sheet_parts(archive)
        out: dict[str, _Sheet] = {}
        titles: dict[str, str] = {}
        for ws, ws_text in zip(wb.worksheets, formulas.worksheets, strict=True):
            # The part of the first sheet of this title not yet taken (a file may repeat one).
            part = next((p for t, p in parts if t == ws.title), None)
            parts = [(t, p) for t, p in parts if p != part]
            key = ws.title.strip().lower()
            if key in out:
                problems.append(Problem(ws.title, None, None, "a second sheet of this name "
                                        "(names are read trimmed and in lower case); expected "
                                        "one sheet per table"))
                continue
            titles[key] = ws.title
            # Read-only mode trusts the used range a file states; a file whose stated range is
            # too small had lost rows and columns silently (openpyxl's documentation warns of
            # it, and spreadsheet programs read every cell).
            ws.reset_dimensions()
            ws_text.reset_dimensions()
            if ws.sheet_state != "visible":
                problems.append(Problem(ws.title, None, None, "the sheet is hidden; read all "
                                        "the same, as every sheet is", is_warning=True))
            # Text as written: openpyxl leaves the _xHHHH_ escapes of characters XML cannot
            # hold as they are stored (U+0001 read as "_x0001_").
            values = [tuple(plain_text(c) if isinstance(c, str) else c for c in r)
                      for r in ws.iter_rows(values_only=True)]
            used = _used_columns(key)
            layout = sheet_layout(archive, part) if used and part else Layout()
            shown = [r for r in layout.hidden_rows if r <= len(values)
                     and any(_text(c) for c in values[r - 1])]
            if shown:
                problems.append(Problem(ws.title, None, None, f"{_rows_words(shown)} hidden "
                                        "(by a filter or by hand); read all the same, as "
                                        "every row is", is_warning=True))
            columns = _filled_columns(layout.hidden_columns, values)
            if columns:
                # A hidden column is read as any other: a required one is not missing, and
                # its values, unseen, are the ones the plan takes.
                problems.append(Problem(ws.title, None, None, f"{_columns_words(columns)} "
                                        "hidden; read all the same, as every column is",
                                        is_warning=True))
            header = [_text(c) for c in values[0]] if values else []
            while header and header[-1] == "":
                header.pop()
            if not header and any(_text(c) for cells in values[1:] for c in cells):
                # Its rows would each fail for want of columns (674 problems on one sheet).
                problems.append(Problem(ws.title, 1, None, "row 1 is blank; expected the "
                                        "column names in row 1, the data below them"))
                out[key] = _Sheet((), (), tuple(values[1:]))
                continue
            below = _header_below(key, header, values)
            if below is not None:
                # A title above the table: its one cell had read as the only column, and every
                # row as too long (9 problems on a sheet of 5 people).
                problems.append(Problem(ws.title, below, None, f"the column names are in row "
                                        f"{below}; expected them in row 1, with nothing above "
                                        "them (delete the rows above)"))
                out[key] = _Sheet((), (), ())
                continue
            out[key] = _sheet(header, values, ws_text.iter_rows(values_only=True),
                              layout.merges, used)
        return out, titles, problems
    finally:
        wb.close()
        formulas.close()
        archive.close()


# Column names of the sheets that are not instance tables.
SHEET_COLUMNS = {SETTINGS_SHEET: ("key", "value"), PERIODS_SHEET: ("name", "year")}


def _header_below(key: str, header: list[str], values: list[tuple[Any, ...]]) -> int | None:
    """The row (1-based, within the first ten) that holds sheet ``key``'s column names when
    row 1 holds none of them, or None."""
    known = set(SHEET_COLUMNS.get(key, ())) | (set(COLUMNS[key][0]) | set(COLUMNS[key][1])
                                               if key in COLUMNS else set())
    if not known or known & {h.lower() for h in header}:
        return None
    for number, cells in enumerate(values[1:10], 2):
        if known & {_text(c).lower() for c in cells}:
            return number
    return None


def _used_columns(key: str) -> frozenset[str]:
    """The columns the reader takes from sheet ``key`` (none from a sheet it ignores)."""
    if key in COLUMNS:
        return frozenset(COLUMNS[key][0] + COLUMNS[key][1])
    if key == SETTINGS_SHEET:
        return frozenset(SHEET_COLUMNS[key])
    if key == PERIODS_SHEET:
        return frozenset(PERIOD_COLUMNS)
    return frozenset()


def _filled_columns(spans: Iterable[tuple[int, int]],
                    values: list[tuple[Any, ...]]) -> list[tuple[int, str]]:
    """(column, header) of each column in ``spans`` with a header or a value, left to right;
    a span may run to column XFD (unused columns hidden for looks), so only those the rows
    reach are looked at."""
    width = max((len(cells) for cells in values), default=0)
    wanted = sorted({c for first, last in spans for c in range(first, min(last, width) + 1)})
    return [(c, _text(values[0][c - 1]) if c <= len(values[0]) else "") for c in wanted
            if any(c <= len(cells) and _text(cells[c - 1]) for cells in values)]


def _columns_words(columns: list[tuple[int, str]]) -> str:
    """``columns C (fte), F (no name) are`` (the first eight, then how many in all)."""
    from openpyxl.utils import get_column_letter

    words = [f"{get_column_letter(c)} ({name or 'no name'})" for c, name in columns[:8]]
    more = [f"... ({len(columns)} columns in all)"] if len(columns) > 8 else []
    return (f"column {words[0]} is" if len(columns) == 1
            else "columns " + ", ".join(words + more) + " are")


def _rows_words(rows: list[int]) -> str:
    """``rows 3, 5-7`` (the first spans of many, then how many rows in all)."""
    spans: list[list[int]] = []
    for row in rows:
        if spans and row == spans[-1][1] + 1:
            spans[-1][1] = row
        else:
            spans.append([row, row])
    words = [str(a) if a == b else f"{a}-{b}" for a, b in spans[:8]]
    if len(spans) > 8:
        words.append(f"... ({len(rows)} rows in all)")
    if len(rows) == 1:
        return f"row {rows[0]} is"
    return "rows " + ", ".join(words) + " are"


def _merged_away(header: list[str], values: list[tuple[Any, ...]], merges: Iterable[CellRange],
                 used: frozenset[str]) -> list[tuple[int, str, str]]:
    """(row, column, range) of each cell a merge leaves empty while the range shows a value:
    in a column the reader takes, or a header cell over values."""
    def value(row: int, col: int) -> Any:
        cells = values[row - 1] if row <= len(values) else ()
        return cells[col - 1] if col <= len(cells) else None

    out = []
    for merge in merges:
        if _text(value(merge.min_row, merge.min_col)) == "":
            continue  # a blank shown as blank: nothing is lost
        for row, col in merge.cells:
            if (row, col) == (merge.min_row, merge.min_col):
                continue
            name = header[col - 1] if col <= len(header) else ""
            if row == 1 and not name and any(_text(value(r, col))
                                             for r in range(2, len(values) + 1)):
                out.append((1, col, f"column {col}", merge.coord))
            elif row > 1 and name.lower() in used:
                out.append((row, col, name, merge.coord))
    return [(row, name, coord) for row, _, name, coord in sorted(out)]  # as the sheet reads


def _sheet(header: list[str], values: list[tuple[Any, ...]],
           texts: Iterable[tuple[Any, ...]], merges: Iterable[CellRange] = (),
           used: frozenset[str] = frozenset()) -> _Sheet:
    """A sheet from its header, its cells' values and their texts (formulas as written), its
    merged ranges and the columns the reader takes from it."""
    rows, overlong, unnamed = [], [], []
    for number, cells in enumerate(values[1:], 2):
        padded = list(cells) + [None] * (len(header) - len(cells))
        rows.append({h: _text(padded[i]) for i, h in enumerate(header) if h})
        if any(_text(c) for c in cells[len(header):]):
            overlong.append(number)
        unnamed += [(number, i + 1) for i, h in enumerate(header) if not h and _text(padded[i])]
    unsaved = []
    for number, (cells, row_texts) in enumerate(zip(values, texts, strict=False), 1):
        for i, (value, text) in enumerate(zip(cells, row_texts, strict=False)):
            # An array formula's text comes as an object of its own, not as "=..." (one with
            # no saved value had read as a blank cell).
            if value is None and ((isinstance(text, str) and text.startswith("="))
                                  or isinstance(text, ArrayFormula | DataTableFormula)):
                column = header[i] if i < len(header) and header[i] else f"column {i + 1}"
                unsaved.append((number, column))
    return _Sheet(tuple(header), tuple(rows), tuple(values[1:]), tuple(overlong),
                  tuple(unnamed), tuple(unsaved),
                  tuple(_merged_away(header, values, merges, used)))


def _dates_for_periods(sheets: Mapping[str, _Sheet],
                       label: Callable[[str], str]) -> list[Problem]:
    """Errors for date cells where a period name or a budget year is expected (a sweep:
    they had read as "unknown period '2027-01-01T00:00:00'", in the periods sheet named every
    period so, and in the budget sheet as "budget year '2027-01-01' belongs to no period")."""
    def period(day: CellDate) -> str:
        return day.not_period_name

    def year(day: CellDate) -> str:
        return day.not_budget_year

    out = []
    for cells_of, what in ((_PERIOD_CELLS, period), (_YEAR_CELLS, year)):
        for name, columns in cells_of.items():
            sheet = sheets.get(name, _Sheet((), (), ()))
            at = [(i, c) for i, c in enumerate(sheet.columns) if c.strip().lower() in columns]
            for number, cells in enumerate(sheet.raw_rows, 2):
                for i, column in at:
                    value = cells[i] if i < len(cells) else None
                    if isinstance(value, dt.date):  # a datetime is a date too
                        out.append(Problem(label(name), number, column, what(CellDate(value))))
    return out


def _text(value: Any) -> str:
    """A cell as the text a CSV file would hold."""
    if value is None:
        return ""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, float):
        # Spreadsheets store every number as a float; 3.0 in a whole-number column is "3".
        if math.isfinite(value) and value == int(value) and abs(value) < 1e15:
            return str(int(value))
        return repr(value)
    if isinstance(value, dt.datetime | dt.date):
        return value.isoformat()
    return str(value).strip()


def _typed(value: Any) -> Any:
    """A settings cell as TOML would type it: whole numbers as int, numeric text as a number."""
    if isinstance(value, str):
        text = value.strip()
        if NUMBER.match(text):
            value = float(text)
        elif text.lower() in ("true", "false"):
            return text.lower() == "true"
        else:
            return text
    if isinstance(value, float) and math.isfinite(value) and value == int(value):
        return int(value)
    if isinstance(value, dt.date):  # kept a date, so its message can say the cell holds one
        return CellDate(value)
    return value


def _settings(sheet: _Sheet, label: str, problems: list[Problem],
              unknown_rows: dict[str, int]) -> tuple[dict[str, Any], dict[str, int]]:
    """Nested settings from ``key | value`` rows (a date cell's value as a
    :class:`~rebalance.settings_reader.CellDate`) and the sheet row of each key; the row of
    each unknown key goes in ``unknown_rows``, its problem names it (``Problem.unknown_key``),
    so the settings reader can say a required key it lacks may be meant as it."""
    settings: dict[str, Any] = {}
    key_rows: dict[str, int] = {}
    columns = [c.lower() for c in sheet.columns]
    for needed in ("key", "value"):
        if needed not in columns:
            problems.append(Problem(label, 1, needed, "required column is missing (the "
                                    "settings sheet has columns key, value and optional note)"))
    if "key" not in columns or "value" not in columns:
        return settings, key_rows
    key_at, value_at = columns.index("key"), columns.index("value")
    # Keys ignoring case, as the column names are: "Horizon.Start" had been refused.
    known = {k.lower(): k for k in SETTINGS_KEYS}
    unknown: list[tuple[int, str]] = []  # (index in problems, key) of each unknown key's warning
    for i, cells in enumerate(sheet.raw_rows):
        row_number = i + 2
        padded = list(cells) + [None] * (max(key_at, value_at) + 1 - len(cells))
        written, value = _text(padded[key_at]), padded[value_at]
        key = known.get(written.lower(), written)
        if key == "":
            if value not in (None, ""):
                problems.append(Problem(label, row_number, "key", "is empty but a value is "
                                        "given; expected a key such as solver.time_limit_seconds"))
            continue
        if key in key_rows:
            problems.append(Problem(label, row_number, "key", f"'{written}' is listed twice "
                                    f"(first at row {key_rows[key]})"))
            continue
        if key not in SETTINGS_KEYS:
            unknown.append((len(problems), key))
            problems.append(Problem(label, row_number, "key", f"unknown key '{key}', ignored "
                                    "(expected one of: " + ", ".join(SETTINGS_KEYS) + ")"
                                    + did_you_mean(key, SETTINGS_KEYS), is_warning=True,
                                    unknown_key=key))
            unknown_rows.setdefault(key, row_number)
            continue
        key_rows[key] = row_number
        if value is None or _text(value) == "":
            continue  # blank value: the default applies, as when a key is left out of TOML
        section, _, name = key.partition(".")
        settings.setdefault(section, {})[name] = _typed(value)
    # A close match for an optional key the sheet gives no value: an error, as in a folder
    # (settings_reader.typo_words); known only once every row is read.
    given = {f"{section}.{name}" for section, table in settings.items() for name in table}
    for at, key in unknown:
        if words := typo_words(key, given, dotted=True):
            problems[at] = replace(problems[at], message=f"{key}: {words}", is_warning=False)
    return settings, key_rows


def _in_row_order(problems: list[Problem], sheet: str) -> list[Problem]:
    """``problems`` with those of ``sheet`` in row order, in the places they held (the
    sheet's own had come first: row 5's unknown key before row 2's missing setting)."""
    ordered = iter(sorted((p for p in problems if p.file == sheet), key=lambda p: p.row or 0))
    return [next(ordered) if p.file == sheet else p for p in problems]


def _periods(sheet: _Sheet, label: str, settings: dict[str, Any],
             problems: list[Problem]) -> tuple[int, ...]:
    """Explicit periods from the periods sheet into ``settings['horizon']['periods']``, and
    the sheet row of each (blank rows are skipped).  A cell of name, year or hours_per_fte
    that holds a date goes as a :class:`~rebalance.settings_reader.CellDate`, so the settings
    reader says so at the cell (as ISO text with a time it had been taken as a name,
    '2027-01-01T00:00:00', which later problems then named)."""
    named = known_case(RawTable(label, sheet.columns, sheet.rows), PERIOD_COLUMNS)
    sheet = replace(sheet, columns=named.columns, rows=named.rows)
    for needed in ("name", "year"):
        if needed not in sheet.columns:
            problems.append(Problem(label, 1, needed, "required column is missing"))
    if "name" not in sheet.columns or "year" not in sheet.columns:
        return ()
    listed, rows = [], []
    for number, (row, cells) in enumerate(zip(sheet.rows, sheet.raw_rows, strict=True), 2):
        if not any(row.values()):
            continue
        # Date cells by column (the last of a name given twice, as ``row`` takes it).
        dates: dict[str, Any] = {c: CellDate(cells[i]) for i, c in enumerate(sheet.columns)
                                 if c and i < len(cells) and isinstance(cells[i], dt.date)}
        # A number that is not whole goes as the number, which settings.toml refuses too (as
        # text, a year of 2027.5 had been taken as the name "2027.5").
        dates |= {c: cells[i] for i, c in enumerate(sheet.columns) if c in ("name", "year")
                  and i < len(cells) and isinstance(cells[i], float)
                  and not cells[i].is_integer()}
        entry: dict[str, Any] = {"name": dates.get("name", row.get("name", "")),
                                 "year": dates.get("year", row.get("year", ""))}
        if row.get("hours_per_fte"):
            entry["hours_per_fte"] = dates.get("hours_per_fte", _typed(row["hours_per_fte"]))
        listed.append(entry)
        rows.append(number)
    horizon = settings.setdefault("horizon", {})
    if isinstance(horizon, dict):
        horizon["periods"] = listed
    return tuple(rows)


def _relabel(problem: Problem, book: str, title: Callable[[str], str],
             key_rows: Mapping[str, int], period_rows: tuple[int, ...] | None,
             unknown_rows: Mapping[str, int]) -> Problem:
    """Rename a problem that :func:`build_instance` located in a folder's files; ``title``
    gives a sheet's name as the book spells it, ``period_rows`` the periods sheet's row of
    each listed period (None: no such sheet).  A missing setting is put on the row of the
    first unknown key it names as perhaps meant as it (``Problem.meant_keys``)."""
    message = _sheet_words(problem.message, title, period_rows is not None)
    meant = [k for k in problem.meant_keys if k in unknown_rows]
    file = problem.file
    if file == "settings.toml":
        key = problem.column or ""
        period = _PERIOD_KEY.match(key)
        if period is not None:
            # horizon.periods[i] is the i-th period row (1-based) read: blank rows skipped,
            # its row had been taken as i + 1, below a blank row one row too high.
            index = int(period.group(1))
            row = period_rows[index - 1] if period_rows and index <= len(period_rows) else (
                index + 1)
            return Problem(f"{book}[{title(PERIODS_SHEET)}]", row, period.group(2) or "name",
                           message, problem.is_warning)
        if key == "horizon.periods":
            return Problem(f"{book}[{title(PERIODS_SHEET)}]", None, None, message,
                           problem.is_warning)
        if key in key_rows:
            return Problem(f"{book}[{title(SETTINGS_SHEET)}]", key_rows[key], "value",
                           f"{key}: {message}", problem.is_warning)
        if meant:
            return Problem(f"{book}[{title(SETTINGS_SHEET)}]", unknown_rows[meant[0]],
                           "key", f"{key}: {message}", problem.is_warning)
        return Problem(f"{book}[{title(SETTINGS_SHEET)}]", None, "key",
                       f"{key}: {message}" if key else message, problem.is_warning)
    if file.endswith(".csv") and file.removesuffix(".csv") in COLUMNS:
        file = f"{book}[{title(file.removesuffix('.csv'))}]"
    return replace(problem, file=file, message=message)


def _sheet_words(message: str, title: Callable[[str], str], periods_sheet: bool) -> str:
    """'listed in offices.csv' reads 'listed in sheet offices' for a workbook."""
    message = re.sub(r"\b(" + "|".join(COLUMNS) + r")\.csv\b",
                     lambda m: f"sheet {title(m.group(1))}", message)
    if periods_sheet:  # periods are named in their own sheet, not among the settings
        message = message.replace("periods in settings.toml",
                                  f"periods in sheet {title(PERIODS_SHEET)}")
        # and a period unknown in many rows ("is not in settings.toml (2027-Q1 to ...) but
        # is named in 4 rows ...; add it to settings.toml") had named the settings sheet.
        for words in ("listed in", "is not in", "add it to"):
            message = message.replace(f"{words} settings.toml",
                                      f"{words} sheet {title(PERIODS_SHEET)}")
    return message.replace("settings.toml", f"sheet {title(SETTINGS_SHEET)}")
