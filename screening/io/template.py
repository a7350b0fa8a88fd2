"""``wallscreen template``: a blank register an owner can fill in."""

from __future__ import annotations

from pathlib import Path

import xlsxwriter
from xlsxwriter.format import Format
from xlsxwriter.worksheet import Worksheet

from screening import schema
from screening.config import Config
from screening.io.writers import write_atomic

ROWS_WITH_LISTS = 5000
"""Rows below the header that get drop-down lists for coded columns."""


def write_template(target: str | Path, config: Config | None = None) -> Path:
    """A workbook with a 'Walls' sheet (canonical headers with notes, drop-down lists for coded
    columns) and a 'Guide' sheet describing every column. Reads back with no mapping file."""
    config = config or Config()
    coded = {k: list(v) if v else list(config.consequence_weight) for k, v in schema.CODED.items()}

    def build(tmp: Path) -> None:
        book = xlsxwriter.Workbook(str(tmp), {"strings_to_formulas": False})
        head = book.add_format({"bold": True, "bg_color": "#E8E8E8", "border": 1})
        required = book.add_format({"bold": True, "bg_color": "#F4CCCC", "border": 1})
        walls = book.add_worksheet("Walls")
        lists = book.add_worksheet("Lists")
        for c, name in enumerate(schema.COLUMNS):
            _header(walls, c, name, required if name in schema.REQUIRED else head)
            if name in coded:
                _list_validation(walls, lists, c, name, coded)
            elif name in schema.NUMERIC:
                _number_validation(walls, c, name)
        walls.freeze_panes(1, 1)
        lists.hide()
        _guide_sheet(book.add_worksheet("Guide"), head, coded)
        walls.activate()
        book.close()

    return write_atomic(target, build)


def _header(walls: Worksheet, c: int, name: str, style: Format) -> None:
    """The column's header, its width, and a note with its meaning and unit."""
    walls.write_string(0, c, name, style)
    walls.set_column(c, c, max(12, len(name) + 2))
    unit = schema.UNITS.get(name, "")
    note = f"{schema.DESCRIPTIONS[name]}" + (f" [{unit}]" if unit else "")
    if name in schema.REQUIRED:
        note += " (required)"
    walls.write_comment(0, c, note, {"x_scale": 2, "y_scale": 1.2})


def _list_validation(
    walls: Worksheet, lists: Worksheet, c: int, name: str, coded: dict[str, list[str]]
) -> None:
    """A drop-down of the column's codes, kept in a column of the hidden 'Lists' sheet."""
    values = coded[name]
    col = list(coded).index(name)
    for r, v in enumerate(values):
        lists.write_string(r, col, v)
    letter = xlsxwriter.utility.xl_col_to_name(col)
    walls.data_validation(
        1,
        c,
        ROWS_WITH_LISTS,
        c,
        {
            "validate": "list",
            "source": f"=Lists!${letter}$1:${letter}${len(values)}",
            "error_title": name,
            "error_message": "Choose one of: " + ", ".join(values),
        },
    )


def _number_validation(walls: Worksheet, c: int, name: str) -> None:
    """A number (within ±10⁹), so that Excel refuses text typed into a numeric column."""
    walls.data_validation(
        1,
        c,
        ROWS_WITH_LISTS,
        c,
        {
            "validate": "decimal",
            "criteria": "between",
            "minimum": -1e9,
            "maximum": 1e9,
            "error_title": name,
            "error_message": f"A number in {schema.UNITS.get(name, '') or 'the unit shown'}",
        },
    )


def _guide_sheet(guide: Worksheet, head: Format, coded: dict[str, list[str]]) -> None:
    """One row per column (unit or codes, required, meaning), then the blanks rule and the caution."""
    guide.set_column(0, 0, 34)
    guide.set_column(1, 1, 22)
    guide.set_column(2, 2, 10)
    guide.set_column(3, 3, 90)
    for c, text in enumerate(("column", "unit or values", "required", "meaning")):
        guide.write_string(0, c, text, head)
    for r, name in enumerate(schema.COLUMNS, start=1):
        shown = ", ".join(coded[name]) if name in coded else schema.UNITS.get(name, "")
        guide.write_string(r, 0, name)
        guide.write_string(r, 1, shown)
        guide.write_string(r, 2, "yes" if name in schema.REQUIRED else "")
        guide.write_string(r, 3, schema.DESCRIPTIONS[name])
    r = len(schema.COLUMNS) + 2
    guide.write_string(
        r,
        0,
        "Blanks are filled from documented defaults, each recorded per wall; "
        "give one location form (lat/lon, easting/northing or geometry).",
    )
    guide.write_string(
        r + 1,
        0,
        "Screening aid only: results must be reviewed by a qualified engineer; "
        "local codes and the asset owner's standards govern.",
    )
