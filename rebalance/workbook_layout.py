"""What openpyxl's read-only mode does not show of a workbook: which part holds each sheet,
and each sheet's hidden rows and columns and merged ranges, read from the .xlsx package's XML.

Read-only mode keeps a large workbook cheap to read; these passes over the package keep no
cells, so they stay cheap too (ECMA-376, the Office Open XML standard, names the parts).
"""

from __future__ import annotations

import posixpath
import zipfile
from dataclasses import dataclass

from openpyxl.worksheet.cell_range import CellRange

__all__ = ["Layout", "sheet_layout", "sheet_parts"]


@dataclass(frozen=True)
class Layout:
    """What read-only mode does not show of a sheet: hidden rows and columns, merges."""

    hidden_rows: tuple[int, ...] = ()
    hidden_columns: tuple[tuple[int, int], ...] = ()  # (first, last) spans, 1-based
    merges: tuple[CellRange, ...] = ()


def sheet_parts(archive: zipfile.ZipFile) -> list[tuple[str, str]]:
    """(title, zip member) of each sheet, in the workbook's order: the workbook part is the
    one ``[Content_Types].xml`` declares, as openpyxl finds it; its relationships name each
    sheet's part, relative to its folder or, with a leading ``/``, to the package (ECMA-376
    Part 2, 9.3)."""
    from openpyxl.xml.constants import XLSM, XLSX, XLTM, XLTX
    from openpyxl.xml.functions import fromstring

    book = "xl/workbook.xml"
    for item in fromstring(archive.read("[Content_Types].xml")):
        if item.get("ContentType") in (XLSX, XLSM, XLTX, XLTM) and item.get("PartName"):
            book = item.get("PartName", "").lstrip("/")
            break
    folder, name = posixpath.split(book)
    targets = {}
    rels = posixpath.join(folder, "_rels", f"{name}.rels")
    if rels in archive.namelist():
        for rel in fromstring(archive.read(rels)):
            target = rel.get("Target", "")
            if rel.get("TargetMode") != "External" and rel.get("Id"):
                targets[rel.get("Id")] = target[1:] if target.startswith("/") else (
                    posixpath.normpath(posixpath.join(folder, target)))
    relation = "{http://schemas.openxmlformats.org/officeDocument/2006/relationships}id"
    return [(sheet.get("name", ""), targets[sheet.get(relation, "")])
            for sheet in fromstring(archive.read(book)).iter()
            if sheet.tag.rpartition("}")[2] == "sheet" and sheet.get(relation) in targets]


def sheet_layout(archive: zipfile.ZipFile, part: str) -> Layout:
    """The hidden rows and columns and the merged ranges of the sheet stored at ``part``.

    Read-only mode shows none of them, and a full load of the book would cost far more than
    the two passes that read it; one more pass over the sheet's XML, keeping no cells, is cheap.
    """
    from openpyxl.xml.functions import iterparse

    hidden: list[int] = []
    columns: list[tuple[int, int]] = []
    merges: list[CellRange] = []
    row = 0
    with archive.open(part) as source:
        for _, element in iterparse(source):
            tag = element.tag.rpartition("}")[2]
            if tag == "row":
                # r may be left out: the row after the one before (ECMA-376, CT_Row).
                row = int(element.get("r") or row + 1)
                if element.get("hidden") in ("1", "true"):
                    hidden.append(row)
                element.clear()
            elif tag == "col" and element.get("hidden") in ("1", "true"):
                # One element spans columns min to max (ECMA-376 Part 1, 18.3.1.13 col).
                first, last = element.get("min", ""), element.get("max", "")
                if first.isdigit() and last.isdigit():
                    columns.append((int(first), int(last)))
            elif tag == "mergeCell" and element.get("ref"):
                merges.append(CellRange(element.get("ref")))
    return Layout(tuple(hidden), tuple(columns), tuple(merges))
