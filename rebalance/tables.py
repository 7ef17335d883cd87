"""Read raw tables from files, and read their cells with every problem located.

A :class:`RawTable` holds a table as text cells, as a CSV file or a workbook sheet gave them,
plus what is wrong with it as a table (:func:`table_problems`); :class:`TableRows` reads its
cells as text, numbers, yes/no values and names, collecting a
:class:`~rebalance.problems.Problem` per bad cell.  Rows are numbered as a spreadsheet shows
them: the header is row 1, the first data row is row 2.  The instance (:mod:`rebalance.readers`),
plan folders and the workload history are read with these.
"""

from __future__ import annotations

import codecs
import csv
import difflib
import io
import math
import re
from collections import Counter
from collections.abc import Collection, Iterable, Iterator, Mapping
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from rebalance.problems import Problem, UnknownName, close_names, did_you_mean, range_words

__all__ = [
    "NotUtf8",
    "RawTable",
    "TableRows",
    "collapse_repeats",
    "known_case",
    "parse_number",
    "plain_csv_columns",
    "read_csv_table",
    "read_utf8",
    "table_problems",
]

# Words a yes/no cell may hold, in pairs (any case); messages list them from here.
YES_NO_PAIRS = (("true", "false"), ("yes", "no"), ("y", "n"), ("1", "0"))
TRUE_WORDS = {yes for yes, _ in YES_NO_PAIRS}
FALSE_WORDS = {no for _, no in YES_NO_PAIRS}
YES_NO_WORDS = ", ".join(f"{yes}/{no}" for yes, no in YES_NO_PAIRS[1:])
# The ceiling of every number a cell may hold where its column sets none: the bound the
# project keeps for money (objective.shortfall_cost, a scenario's budget step).  Past it a
# salary of 1e308 had passed check and made the plan's objective nan.
MAX_NUMBER = 1e12
# A number as a planner types one: ASCII digits, no '_' (Python's float() reads "1_0" as 10
# and "\u0666" as 6); inf and nan are read, to be said out of range.
_NUMBER = re.compile(r"[+-]?(?:[0-9]+\.?[0-9]*|\.[0-9]+)(?:[eE][+-]?[0-9]+)?"
                     r"|[+-]?(?:inf|infinity|nan)", re.IGNORECASE)


def parse_number(text: str) -> float | None:
    """``text`` as a number, or None where it is not one as a planner writes it."""
    text = text.strip()
    return float(text) if _NUMBER.fullmatch(text) else None


@dataclass(frozen=True)
class RawTable:
    """A table as text cells, with the label used in messages (a file or a sheet)."""

    label: str
    columns: tuple[str, ...]
    rows: tuple[dict[str, str], ...]
    first_row_number: int = 2
    # Row numbers with filled cells beyond the header's columns, which no column reads.
    overlong_rows: tuple[int, ...] = ()
    # (row, 1-based column) of filled cells under a column with no name, which no column reads.
    unnamed_cells: tuple[tuple[int, int], ...] = ()
    # (row, column) of cells holding a line break: a quote that never closed swallows the
    # rows after it into one cell.
    multiline_cells: tuple[tuple[int, str], ...] = ()
    # Why the file could not be read at all (not UTF-8), and the row that showed it; then it
    # has no columns.
    fault: tuple[int | None, str] | None = None
    # The row that holds the column names: blank lines above it are skipped.
    header_row: int = 1


# A name unknown in this many rows or more is one line; fewer keep a line per row.
UNKNOWN_NAME_ROWS = 3
# Row numbers that line shows per file, before "and N more".
ROWS_NAMED = 5


def collapse_repeats(problems: list[Problem], keep: int = 10) -> list[Problem]:
    """Every problem, but one fault repeated on thousands of rows (an office name that a
    broken offices table left unknown to every staff row) listed ``keep`` times, and a name
    unknown in many rows said once, where it is first named (:func:`_unknown_names`)."""
    seen: dict[tuple[str, str | None, str], int] = {}
    after: dict[tuple[str, str | None, str], int] = {}  # where each one's last example ends
    out: list[Problem] = []
    for p in _unknown_names(problems):
        key = (p.file, p.column, p.message)
        seen[key] = seen.get(key, 0) + 1
        if seen[key] <= keep:
            out.append(p)
            after[key] = len(out)
    # Each count right after its examples, as a listing reads (it had come at the end of
    # everything); from the last place back, so earlier places stay where they are.
    for (file, column, message), at in sorted(after.items(), key=lambda kv: -kv[1]):
        count = seen[(file, column, message)]
        if count > keep:
            out.insert(at, Problem(file, None, column, f"{message} (and {count - keep} more "
                                                       "rows like this)", repeats=count - keep))
    return out


def _unknown_names(problems: list[Problem]) -> list[Problem]:
    """``problems`` with each name unknown in ``UNKNOWN_NAME_ROWS`` rows or more said once,
    in place of the first: a skill deleted from skills.csv had drawn 88 lines, ten per file
    and a count of the rest at the end, none saying the fix is one row in skills.csv.  Each
    row is still counted as a problem (``repeats``; a row naming it twice, once), and the
    line says so.  Grouped on each problem's :class:`~rebalance.problems.UnknownName`."""
    def key(p: Problem) -> tuple[str, str, str] | None:
        name = None if p.is_warning else p.unknown_name
        return None if name is None else (name.kind, name.name, name.defined_in)

    rows: dict[tuple[str, str, str], dict[str, set[int | None]]] = {}
    for p in problems:
        if (k := key(p)) is not None:
            rows.setdefault(k, {}).setdefault(p.file, set()).add(p.row)
    out: list[Problem] = []
    said: set[tuple[str, str, str]] = set()
    for p in problems:
        k = key(p)
        if k is None or sum(map(len, rows[k].values())) < UNKNOWN_NAME_ROWS:
            out.append(p)
        elif k not in said and p.unknown_name is not None:
            said.add(k)
            out.append(_unknown_name_line(p, p.unknown_name, rows[k]))
    return out


def _unknown_name_line(first: Problem, unknown: UnknownName,
                       files: Mapping[str, set[int | None]]) -> Problem:
    """One line for a name unknown in many rows of ``files``, located at its ``first``."""
    total = sum(map(len, files.values()))
    used = []
    for file, numbers in files.items():
        known = sorted(n for n in numbers if n is not None)
        shown = ", ".join(map(str, known[:ROWS_NAMED]))
        more = f" and {len(numbers) - ROWS_NAMED} more" if len(numbers) > ROWS_NAMED else ""
        count = f"{len(numbers)} row{'s' * (len(numbers) != 1)}"
        used.append(f"{file} ({count}: {shown}{more})" if shown else f"{file} ({count})")
    where = unknown.defined_in
    target = where.split(" (")[0]
    return Problem(first.file, first.row, first.column,
                   f"{unknown.kind} '{unknown.name}' is not in {where} but is named in {total} "
                   f"rows, each counted as a problem: {', '.join(used)}; add it to {target} or "
                   f"correct those rows{unknown.hint}", repeats=total)


def table_problems(table: RawTable, *, known: Collection[str] = ()) -> list[Problem]:
    """What is wrong with ``table`` as a table, before any cell is read: a file that could not
    be read, a column named twice (which copy would be read?; for the ``known`` columns of an
    instance's table, ``Seats`` and ``seats`` are one name), and cells no column reads, such
    as the second half of a number a comma split (``1,234``)."""
    if table.fault is not None:
        return [Problem(table.label, table.fault[0], None, table.fault[1])]
    problems = [Problem(table.label, table.header_row, column,
                        f"is a column name {count} times{_case_words(table, column)}; expected "
                        "each column once")
                for column, count in _repeated_columns(table, known).items()]
    hint = " (a comma inside a value?)" if table.label.endswith(".csv") else ""
    problems += [Problem(table.label, number, None,
                         f"more cells than the header's {len(table.columns)} columns; expected "
                         f"one value per column{hint}")
                 for number in table.overlong_rows]
    problems += [Problem(table.label, number, f"column {position}",
                         f"a value under a column with no name; expected a name in row 1 for "
                         f"every filled column{hint}")
                 for number, position in table.unnamed_cells]
    problems += [Problem(table.label, number, column,
                         "runs over several lines (a quote that is not closed?); expected one "
                         "line per row")
                 for number, column in table.multiline_cells]
    return problems


def _repeated_columns(table: RawTable, known: Collection[str] = ()) -> dict[str, int]:
    """Column names the header holds more than once, each as first written, with how often;
    a ``known`` column's copies alike but for case count as one name (``Seats,seats``: which
    would be read?), while other columns, read by nothing, are compared as written (a review
    had found ``Note,note`` refused)."""
    folded = {name.lower() for name in known}

    def fold(name: str) -> str:
        return name.lower() if name.lower() in folded else name

    counts = Counter(fold(c) for c in table.columns if c)
    first = {fold(c): c for c in reversed(table.columns) if c}
    return {first[name]: count for name, count in counts.items() if count > 1}


# How alike an unknown column must be to a known one to be taken as meant for it, an error
# (difflib's ratio): closer than a mere suggestion, as a column of notes is allowed ("notes"
# is 0.6 from "moves").  Sharing the first letters was enough once, and refused notes
# columns such as last_updated, hiring_manager and primary; a short "hire" for "hiring"
# (0.6) is left a warning with its suggestion.
MISSPELT_RATIO = 0.8


def _misspelt(column: str, known: str) -> bool:
    """Whether unknown ``column`` is taken as a misspelling of ``known``, one the table
    lacks (:class:`TableRows`)."""
    return difflib.SequenceMatcher(None, column.lower(), known.lower()).ratio() >= MISSPELT_RATIO


def _article(word: str) -> str:
    """``a`` or ``an`` before ``word`` (``an hours column``)."""
    return "an" if word[0] in "aeiou" or word.startswith("hour") else "a"


def _case_words(table: RawTable, column: str) -> str:
    """`` (ignoring case)`` where the copies of ``column`` differ in case."""
    same = {c for c in table.columns if c.lower() == column.lower()}
    return " (ignoring case)" if len(same) > 1 else ""


def repeated_column(table: RawTable, column: str, known: Collection[str] = ()) -> bool:
    """Whether ``column`` is one of a name the header holds twice (:func:`_repeated_columns`)."""
    folded = {name.lower() for name in known}
    return any(c.lower() == column.lower() if column.lower() in folded else c == column
               for c in _repeated_columns(table, known))


def read_csv_table(path: Path, known: Iterable[str] = ()) -> RawTable:
    """The file as a table, its columns named as ``known`` ones where only case differs
    (:func:`known_case`)."""
    try:
        text = read_utf8(path)
    except NotUtf8 as exc:
        return RawTable(path.name, (), (), fault=(exc.row, f"{exc} (in a spreadsheet program: "
                                                            "save as CSV UTF-8)"))
    return known_case(_csv_table(path.name, csv.reader(io.StringIO(text, newline=""))), known)


def known_case(table: RawTable, names: Iterable[str]) -> RawTable:
    """``table`` with each column named as one of ``names`` but for case (``Office``)
    renamed to it: "Office" had drawn "required column is missing" beside "unknown column".
    Not where two columns would then have one name (``Office`` beside ``office``): those
    stay as written, the unknown one suggested as the other."""
    wanted = {name.lower(): name for name in names}
    folded = Counter(c.lower() for c in table.columns)
    rename = {c: wanted[c.lower()] for c in table.columns
              if c not in wanted.values() and c.lower() in wanted and folded[c.lower()] == 1}
    if not rename:
        return table
    return replace(table, columns=tuple(rename.get(c, c) for c in table.columns),
                   rows=tuple({rename.get(k, k): v for k, v in row.items()} for row in table.rows),
                   multiline_cells=tuple((n, rename.get(c, c)) for n, c in table.multiline_cells))


def plain_csv_columns(file: Path) -> dict[str, np.ndarray] | None:
    """The cells of a plain table, read by pandas' C reader (Python's csv reader had taken
    two thirds of the time), as ``read_csv_table`` reads them: stripped, a blank line a row
    of empty cells.  None for a file with anything that reader reports or reads another way
    (not UTF-8, a quote, a line break other than \\n or \\r\\n, a NUL, more cells than the
    header, a column with no name or named twice): read it with ``read_csv_table``.  Plan
    folders use it (verify, replan, report): 150k work rows had taken a second."""
    try:
        text = read_utf8(file)
    except NotUtf8:
        return None
    if not text or '"' in text or "\x00" in text or "\r" in text.replace("\r\n", ""):
        return None
    try:
        frame = pd.read_csv(io.StringIO(text), header=None, dtype=str, quoting=csv.QUOTE_NONE,
                            na_filter=False, skip_blank_lines=False, index_col=False,
                            engine="c")
    except (pd.errors.ParserError, ValueError):
        return None
    header = [str(name).strip() for name in frame.iloc[0]]
    if "" in header or len(set(header)) < len(header):
        return None
    return {name: frame[i].iloc[1:].str.strip().to_numpy(dtype=object)
            for i, name in zip(frame.columns, header, strict=True)}


class NotUtf8(ValueError):
    """A text file that is not UTF-8; ``row`` is the line of the first byte that is not."""

    def __init__(self, row: int, byte: int) -> None:
        super().__init__(f"is not UTF-8 text (byte 0x{byte:02x} on this line); expected the "
                         "file saved as UTF-8")
        self.row = row


def read_utf8(path: Path) -> str:
    """The file's text (a byte-order mark, which some programs write, dropped), or
    :class:`NotUtf8` naming the line where it stops being UTF-8."""
    data = path.read_bytes().removeprefix(codecs.BOM_UTF8)
    try:
        return data.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise NotUtf8(data.count(b"\n", 0, exc.start) + 1, data[exc.start]) from None


def _csv_table(label: str, reader: Iterator[list[str]]) -> RawTable:
    # Blank lines above the header are skipped, as blank lines below it are (they had made
    # an empty header, and every row "more cells than the header's 0 columns").
    header_row = 1
    for cells in reader:
        if any(c.strip() for c in cells):
            header = [h.strip() for h in cells]
            break
        header_row += 1
    else:
        return RawTable(label, (), ())
    if len(header) == 1 and label.endswith(".csv"):
        for mark, name in ((";", "';'"), ("\t", "tabs")):
            if mark in header[0]:
                # A spreadsheet set up for decimal commas saves ';' between columns: every
                # column had been reported missing beside one unknown column "year;hiring".
                return RawTable(label, (), (), fault=(header_row, (
                    f"columns are separated by {name}; expected commas (in a spreadsheet "
                    "program: save as CSV, comma delimited)")), header_row=header_row)
    rows, overlong, unnamed, multiline = [], [], [], []
    # Rows with empty cells past the header: harmless where every row has them (a trailing
    # comma on each line), a shifted row where only some do ("A,Alder,1,200," had been read
    # as seats 1 and 200 hires a period, with no word).
    empty_tails: list[tuple[int, int]] = []
    widths: Counter[int] = Counter()
    for number, cells in enumerate(reader, header_row + 1):
        if not any(c.strip() for c in cells):
            cells = []  # blank line: keep numbering, drop content
        else:
            widths[len(cells)] += 1
        if any(c.strip() for c in cells[len(header):]):
            overlong.append(number)
        elif len(cells) > len(header):
            empty_tails.append((number, len(cells)))
        unnamed += [(number, i + 1) for i, (h, c) in enumerate(zip(header, cells, strict=False))
                    if not h and c.strip()]
        padded = list(cells) + [""] * (len(header) - len(cells))
        multiline += [(number, h or f"column {i + 1}") for i, (h, c)
                      in enumerate(zip(header, padded, strict=False)) if "\n" in c or "\r" in c]
        rows.append({h: padded[i].strip() for i, h in enumerate(header) if h})
    if len(widths) > 1:
        overlong = sorted(overlong + [number for number, width in empty_tails
                                      if width > min(widths)])
    return RawTable(label, tuple(header), tuple(rows), header_row + 1,
                    overlong_rows=tuple(overlong), unnamed_cells=tuple(unnamed),
                    multiline_cells=tuple(multiline), header_row=header_row)


# --------------------------------------------------------------------------------------------
# cell parsing


class TableRows:
    """Iterates a table's rows and collects problems with their locations.

    ``columns`` is (required, optional); ``assumed`` says, for optional columns, what every
    row is read as where the column is not given (``every office's seats are unlimited``).
    An unknown column that is a close match for one of those the table lacks is an error
    saying so: a misspelt ``seat`` had been a warning, the plan run with no seat limit.
    Other unknown columns are warnings (a column of notes is fine).  ``ignore_case`` as
    :func:`table_problems` takes it, for the same table.  Other readers (the workload
    history) subclass it with their own cell types.
    """

    def __init__(self, table: RawTable, problems: list[Problem],
                 columns: tuple[tuple[str, ...], tuple[str, ...]],
                 assumed: Mapping[str, str] | None = None, *, ignore_case: bool = False) -> None:
        self.table = table
        self.problems = problems
        self.row_number = 0
        self.columns_ok = True
        # Suggestions by (column, unknown name): a renamed office leaves thousands of rows
        # naming the old name, each else compared anew with every known one.
        self._suggestions: dict[tuple[str | None, str], str] = {}
        required, optional = columns
        if table.fault is not None:  # said once by table_problems; no column is missing too
            self.columns_ok = False
            return
        missing = [c for c in required if c not in table.columns]
        # A column named twice is said by table_problems; which copy to read is unknowable,
        # so no row is read (each would report the copy that happened to be kept).
        # An instance's table (``ignore_case``): its columns alike but for case are one name.
        known = required + optional if ignore_case else ()
        twice = _repeated_columns(table, known)
        for column in missing:
            self.problems.append(Problem(table.label, table.header_row, column,
                                         "required column is missing"))
        unknown = [c for c in table.columns if c and c not in required + optional
                   and not repeated_column(table, c, known)]  # a name given twice is said so
        lacking = [c for c in (assumed or {}) if c not in table.columns]
        for column in unknown:
            meant = [c for c in close_names(column, lacking)[:1] if _misspelt(column, c)]
            if meant and assumed is not None:
                self.problems.append(Problem(
                    table.label, table.header_row, column,
                    f"unknown column '{column}' (did you mean {meant[0]}?); without "
                    f"{_article(meant[0])} {meant[0]} column {assumed[meant[0]]}"))
                continue
            self.problems.append(Problem(
                table.label, table.header_row, column,
                "unknown column (expected one of: " + ", ".join(required + optional) + ")"
                + did_you_mean(column, required + optional), is_warning=True))
        self.columns_ok = not missing and not twice

    def __iter__(self) -> Iterator[dict[str, str]]:
        if not self.columns_ok:
            return
        # A row a quote left open is said once, by table_problems: its cells hold the rows it
        # swallowed, newlines and all, and reading them would say the fault again, unquotably.
        swallowed = {number for number, _ in self.table.multiline_cells}
        for i, row in enumerate(self.table.rows):
            self.row_number = self.table.first_row_number + i
            if any(row.values()) and self.row_number not in swallowed:
                yield row

    def error(self, column: str | None, message: str) -> None:
        self.problems.append(Problem(self.table.label, self.row_number, column, message))

    def warn(self, column: str | None, message: str) -> None:
        self.problems.append(
            Problem(self.table.label, self.row_number, column, message, is_warning=True)
        )

    def text(self, row: Mapping[str, str], column: str) -> str | None:
        value = row.get(column, "")
        if value == "":
            self.error(column, "is empty; a value is required")
            return None
        return value

    def number(
        self,
        row: Mapping[str, str],
        column: str,
        *,
        required: bool = True,
        minimum: float | None = 0.0,
        maximum: float | None = None,
        open_minimum: bool = False,
        integer: bool = False,
        expected: str | None = None,
        ceiling: float = MAX_NUMBER,
    ) -> float | None:
        """The cell as a number, or None (said) where it is not one in range.  Where the
        column sets no ``maximum``, a value beyond ``ceiling`` either way is out of range
        too, and only its message names that bound."""
        raw = row.get(column, "")
        what = expected or range_words(minimum, maximum, open_minimum=open_minimum,
                                       integer=integer)
        if raw == "":
            if required:
                self.error(column, f"is empty; expected {what}")
            return None
        value = parse_number(raw)
        if value is None:
            self.error(column, f"'{raw}' is not a number; expected {what}")
            return None
        bad = not math.isfinite(value)
        bad = bad or (integer and value != int(value))
        below = minimum is not None and (value <= minimum if open_minimum else value < minimum)
        bad = bad or below
        bad = bad or (maximum is not None and value > maximum)
        if bad:
            self.error(column, f"'{raw}' is out of range; expected {what}")
            return None
        if maximum is None and abs(value) > ceiling:
            low = -ceiling if minimum is None else minimum
            self.error(column, f"'{raw}' is out of range; expected " + range_words(
                low, ceiling, open_minimum=open_minimum, integer=integer))
            return None
        return value

    def boolean(self, row: Mapping[str, str], column: str, default: bool) -> bool:
        raw = row.get(column, "").lower()
        if raw == "":
            return default
        if raw in TRUE_WORDS:
            return True
        if raw in FALSE_WORDS:
            return False
        self.error(column, f"'{row.get(column)}' is not a yes/no value; expected true or false "
                   f"(or {YES_NO_WORDS}, in any case)")
        return default

    def reference(self, row: Mapping[str, str], column: str,
                  known: Mapping[str, Any] | set[str] | None, kind: str,
                  defined_in: str) -> str | None:
        """The cell's name if ``known`` lists it; ``known`` None: the table that defines the
        names could not be read, so every name would read as unknown and none is checked."""
        value = self.text(row, column)
        if value is not None and known is not None and value not in known:
            self.unknown(column, value, known, kind, defined_in)
            return None
        return value

    def unknown(self, column: str, value: str, known: Iterable[Any], kind: str,
                defined_in: str) -> None:
        """Say the cell names ``value``, which ``defined_in`` does not list, with what it may
        have meant; the problem carries the name as an :class:`~rebalance.problems.UnknownName`
        (:func:`collapse_repeats` groups on it)."""
        name = UnknownName(kind, value, defined_in, self.suggest(column, value, known))
        self.problems.append(Problem(self.table.label, self.row_number, column, name.message,
                                     unknown_name=name))

    def suggest(self, column: str | None, value: str, known: Iterable[Any]) -> str:
        """:func:`~rebalance.problems.did_you_mean` for an unknown ``value`` in ``column``,
        worked out once per name; ``known`` must be the same for every row of a column."""
        key = (column, value)
        if key not in self._suggestions:
            self._suggestions[key] = did_you_mean(value, known)
        return self._suggestions[key]
