"""Write an instance folder as one ``.xlsx`` workbook (for planners who start from a folder).

The layout is the one :mod:`rebalance.workbook_reader` reads (``docs/instance-format.md``,
section *Instance as one workbook*): a ``settings`` sheet of ``key | value`` rows, an optional
``periods`` sheet, and one sheet per table with the CSV file's columns.  The names of those
sheets live here, and the reader takes them from here.
"""

from __future__ import annotations

import csv
import re
import tomllib
from pathlib import Path
from typing import Any

from rebalance.files import atomic_file
from rebalance.readers import OPTIONAL_TABLES, REQUIRED_TABLES
from rebalance.settings_reader import SETTINGS_KEYS

__all__ = [
    "NUMBER",
    "PERIODS_SHEET",
    "PERIOD_COLUMNS",
    "SETTINGS_SHEET",
    "folder_to_workbook",
    "plain_text",
    "xml_text",
]

SETTINGS_SHEET = "settings"
PERIODS_SHEET = "periods"
PERIOD_COLUMNS = ("name", "year", "hours_per_fte")
# A number as a CSV cell or a settings cell may spell it.
NUMBER = re.compile(r"^[+-]?(\d+(\.\d*)?|\.\d+)([eE][+-]?\d+)?$")


def folder_to_workbook(folder: str | Path, path: str | Path,
                       rows: dict[str, int] | None = None) -> Path:
    """Copy an instance folder's files, cell for cell, into one workbook at ``path``.

    The files are copied as written, not as validated, so the workbook reads back to the same
    instance (and to the same problems, if the folder has any).  Numbers stay text-exact:
    a cell holding ``0.15`` is stored as the number 0.15.  ``rows``, if given, is filled once
    the book is saved with the filled rows below each sheet's header, by sheet name in the
    book's order (counted from the book as saved, so the file need not be read back).
    """
    from openpyxl import Workbook
    from openpyxl.styles import Font

    source, target = Path(folder), Path(path)
    settings_file = source / "settings.toml"
    settings = tomllib.loads(settings_file.read_text(encoding="utf-8")) if (
        settings_file.is_file()) else {}
    wb = Workbook()
    ws = wb.create_sheet(SETTINGS_SHEET)
    wb.remove(wb.worksheets[0])  # the blank sheet a new workbook starts with
    ws.append(["key", "value", "note"])
    horizon = settings.get("horizon", {})
    for key in SETTINGS_KEYS:
        section, _, name = key.partition(".")
        value = settings.get(section, {}).get(name)
        if value is not None:
            ws.append([key, xml_text(value) if isinstance(value, str) else value])
    periods = horizon.get("periods") if isinstance(horizon, dict) else None
    if periods:
        ps = wb.create_sheet(PERIODS_SHEET)
        ps.append(list(PERIOD_COLUMNS))
        for entry in periods:
            ps.append([xml_text(v) if isinstance(v := entry.get(c), str) else v
                       for c in PERIOD_COLUMNS])
    for name in REQUIRED_TABLES + OPTIONAL_TABLES:
        csv_path = source / f"{name}.csv"
        if not csv_path.is_file():
            continue
        sheet = wb.create_sheet(name)
        with csv_path.open(newline="", encoding="utf-8-sig") as handle:
            reader = csv.reader(handle)
            # Blank lines above the header are skipped, as the CSV reader skips them: copied,
            # the book's row 1 had been blank and the book had failed check.
            header = next((cells for cells in reader if any(c.strip() for c in cells)), [])
            header = [h.strip() for h in header]
            sheet.append([xml_text(h) for h in header])
            for cells in reader:
                sheet.append([_cell(c) if i < len(header) and header[i] in _NUMERIC_COLUMNS
                              else (xml_text(c.strip()) or None) for i, c in enumerate(cells)])
    for sheet in wb.worksheets:
        for cell in sheet[1]:
            cell.font = Font(bold=True)
        sheet.freeze_panes = "A2"
        for row in sheet.iter_rows():
            for cell in row:
                if cell.data_type == "f":
                    # Text, not a formula: openpyxl takes any string starting with "=" for
                    # one, stored with no value ("=TODO" in a notes cell had failed check).
                    # The quote prefix keeps it text when the cell is edited in a spreadsheet.
                    cell.data_type = "s"
                    cell.quotePrefix = True
    with atomic_file(target) as tmp:  # whole or not at all
        wb.save(tmp)
    if rows is not None:
        rows.update({ws.title: sum(1 for cells in ws.iter_rows(min_row=2, values_only=True)
                                   if any(c is not None for c in cells)) for ws in wb.worksheets})
    return target


# Columns stored as numbers; names, ids, years and periods stay text so "0042" keeps its zeros.
_NUMERIC_COLUMNS = frozenset({
    "seats", "max_hires_per_period", "salary_per_period", "onboarding_cost", "time_to_hire",
    "fte", "hours", "priority", "hiring", "moves", "detail_cost_per_period",
    "relocation_cost", "count", "annual_rate",
})


def _cell(text: str) -> Any:
    """A numeric column's CSV text as a number cell (text it if it is not a number)."""
    text = text.strip()
    if text == "":
        return None
    if NUMBER.match(text):
        number = float(text)
        return int(number) if number == int(number) and abs(number) < 1e15 else number
    return xml_text(text)  # left as text, so the reader reports it as the CSV reader would


# Control characters but tab and line feed (XML 1.0 cannot hold most, and reads a carriage
# return as a line feed; openpyxl's refusal had ended the command in "internal error:
# IllegalCharacterError"), and an underscore that would otherwise start an escape.
_ESCAPED = re.compile(r"[\x00-\x08\x0b-\x1f]|_(?=x[0-9A-Fa-f]{4}_)")
_ESCAPE = re.compile(r"_x([0-9A-Fa-f]{4})_")


def xml_text(text: str) -> str:
    """``text`` as a cell stores it: each character XML cannot hold as ``_xHHHH_``, and an
    underscore that starts such a form as ``_x005F_`` (ECMA-376 Part 1, 22.9.2.19
    ST_Xstring; plan.xlsx's writer, xlsxwriter, escapes so too).  :func:`plain_text` undoes
    it; openpyxl reads the escaped form as it is."""
    return _ESCAPED.sub(lambda m: f"_x{ord(m.group()):04X}_", text) if (
        "_" in text or not text.isprintable()) else text


def plain_text(text: str) -> str:
    """A cell's stored text as written: each ``_xHHHH_`` as its character, read left to
    right, so ``_x005F_x0041_`` is the text ``_x0041_`` (ECMA-376 Part 1, 22.9.2.19).  A
    surrogate code, no character of its own, stays as stored (printed, it could not be
    encoded)."""
    def one(match: re.Match[str]) -> str:
        code = int(match.group(1), 16)
        return match.group() if 0xD800 <= code <= 0xDFFF else chr(code)

    return _ESCAPE.sub(one, text) if "_x" in text else text
