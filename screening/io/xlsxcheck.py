"""Look inside an .xlsx (or .ods) before the reader does: refuse spreadsheet bombs, find error cells.

A tiny workbook can declare one cell at the last column and row (the reader would then allocate
the whole grid), or a sheet that inflates from megabytes to gigabytes. Both are refused here from
the zip directory and the sheet's declared dimension, before any cell is read. Error cells
(``#DIV/0!``) are read by the spreadsheet reader as blanks; they are found here so that they are
reported as row errors, not filled by a default.
"""

from __future__ import annotations

import re
import zipfile
from dataclasses import dataclass
from pathlib import Path
from xml.etree import ElementTree

from screening.errors import RegisterError

MAIN = "{http://schemas.openxmlformats.org/spreadsheetml/2006/main}"
REL = "{http://schemas.openxmlformats.org/officeDocument/2006/relationships}"
PKG_REL = "{http://schemas.openxmlformats.org/package/2006/relationships}"
_DIMENSION = re.compile(rb'<(?:\w+:)?dimension\s+ref="([A-Z]+)?(\d+)?(?::([A-Z]+)(\d+))?"')
_CELL_REF = re.compile(rb'<(?:\w+:)?c\s[^>]*?r="([A-Z]{1,3})(\d+)"')
_ERROR_CELL = re.compile(rb'<(?:\w+:)?c\s([^>]*?t="e"[^>]*)>(.*?)</(?:\w+:)?c>', re.S)
_REF = re.compile(rb'r="([A-Z]{1,3})(\d+)"')
_VALUE = re.compile(rb"<(?:\w+:)?v>([^<]*)</(?:\w+:)?v>")
SCAN_ALWAYS_BYTES = 8 << 20
"""Sheets up to this size are scanned cell by cell for their true extent (bombs are small files)."""


@dataclass(frozen=True)
class SheetLimits:
    """How large a sheet may be (settings ``max_cells`` and ``max_sheet_mb``)."""

    max_cells: int = 2_000_000
    max_sheet_mb: float = 200.0


def column_index(letters: bytes | str) -> int:
    """0-based index of a column named by letters (A = 0, Z = 25, AA = 26, XFD = 16383)."""
    n = 0
    for ch in letters if isinstance(letters, str) else letters.decode("ascii"):
        n = n * 26 + (ord(ch) - 64)
    return n - 1


def sheet_member(zf: zipfile.ZipFile, sheet: str) -> str | None:
    """The zip member holding the named worksheet of an .xlsx, or None if it cannot be told."""
    try:
        book = ElementTree.fromstring(zf.read("xl/workbook.xml"))
        rels = ElementTree.fromstring(zf.read("xl/_rels/workbook.xml.rels"))
    except (KeyError, ElementTree.ParseError):
        return None
    rid = next((s.get(f"{REL}id") for s in book.iter(f"{MAIN}sheet") if s.get("name") == sheet), None)
    target = next((r.get("Target") for r in rels.iter(f"{PKG_REL}Relationship") if r.get("Id") == rid), None)
    if not target:
        return None
    member = target.lstrip("/") if target.startswith("/") else f"xl/{target}"
    return member if member in zf.namelist() else None


def sheet_name(zf: zipfile.ZipFile, sheet: str | int | None) -> str | None:
    """The name of the sheet asked for (a name, a 0-based index or None for the first)."""
    if isinstance(sheet, str) and not sheet.isdigit():
        return sheet
    try:
        book = ElementTree.fromstring(zf.read("xl/workbook.xml"))
    except (KeyError, ElementTree.ParseError):
        return None
    names = [s.get("name") for s in book.iter(f"{MAIN}sheet")]
    index = 0 if sheet is None else int(sheet)
    return names[index] if 0 <= index < len(names) else None


def check_sheet_size(path: Path, sheet: str | int | None, limits: SheetLimits) -> None:
    """Refuse a sheet whose uncompressed size or declared extent is over the limits.

    Raises
    ------
    RegisterError
        Naming the file, the sheet, what it declares and the setting that limits it.
    """
    try:
        zf = zipfile.ZipFile(path)
    except (zipfile.BadZipFile, OSError):
        return  # not a zip: the reader says what it is
    with zf:
        members = {i.filename: i for i in zf.infolist()}
        budget = int(limits.max_sheet_mb * (1 << 20))
        if "content.xml" in members:  # OpenDocument: one content file for every sheet
            _size_within(path, "content.xml", members["content.xml"].file_size, budget)
            return
        if "xl/sharedStrings.xml" in members:
            _size_within(path, "the shared strings", members["xl/sharedStrings.xml"].file_size, budget)
        name = sheet_name(zf, sheet)
        member = sheet_member(zf, name) if name is not None else None
        if member is None:
            return
        info = members[member]
        _size_within(path, f"sheet {name!r}", info.file_size, budget)
        rows, cols = _extent(zf, info)
        if rows * cols > limits.max_cells:
            raise RegisterError(
                f"{path}: sheet {name!r} spans {rows:,} rows x {cols:,} columns "
                f"({rows * cols:,} cells), over the limit of {limits.max_cells:,} cells "
                "(setting max_cells): delete the stray cells far from the table, or raise the limit"
            )


def _size_within(path: Path, what: str, size: int, budget: int) -> None:
    if size > budget:
        raise RegisterError(
            f"{path}: {what} expands to {size / (1 << 20):,.0f} MB, over the limit of "
            f"{budget / (1 << 20):,.0f} MB (setting max_sheet_mb): not read"
        )


def _extent(zf: zipfile.ZipFile, info: zipfile.ZipInfo) -> tuple[int, int]:
    """(rows, columns) the sheet spans: the declared dimension, and for small sheets the true one."""
    with zf.open(info) as fh:
        head = fh.read(4096)
    rows = cols = 0
    m = _DIMENSION.search(head)
    if m and m.group(4):
        rows, cols = int(m.group(4)), column_index(m.group(3)) + 1
    elif m and m.group(2):
        rows, cols = int(m.group(2)), column_index(m.group(1) or b"A") + 1
    if info.file_size <= SCAN_ALWAYS_BYTES or not m:
        data = zf.read(info)
        for letters, number in set(_CELL_REF.findall(data)):
            rows, cols = max(rows, int(number)), max(cols, column_index(letters) + 1)
    return rows, cols


def error_cells(path: Path, sheet: str) -> list[tuple[int, int, str]]:
    """Cells of an .xlsx sheet holding an error value: (row, column, text), 0-based from A1."""
    try:
        with zipfile.ZipFile(path) as zf:
            member = sheet_member(zf, sheet)
            data = zf.read(member) if member else b""
    except (zipfile.BadZipFile, OSError, KeyError):
        return []
    if b't="e"' not in data:
        return []
    out = []
    for attrs, body in _ERROR_CELL.findall(data):
        ref, value = _REF.search(attrs), _VALUE.search(body)
        if ref:
            text = value.group(1).decode("utf-8", "replace") if value else "#ERROR"
            out.append((int(ref.group(2)) - 1, column_index(ref.group(1)), text))
    return out
