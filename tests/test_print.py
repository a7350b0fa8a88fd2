"""What people print and read: the workbook's print layout and numeric utilisation columns
(read back with openpyxl), the calculation sheet printed to PDF in headless Chromium."""

from __future__ import annotations

import math
import re
import shutil
import subprocess
import textwrap
from pathlib import Path

import openpyxl
import pandas as pd
import pytest
from openpyxl.worksheet.worksheet import Worksheet
from typer.testing import CliRunner

from screening.cli import app
from screening.config import PAPER_SIZES, Config
from screening.errors import ConfigError
from screening.outputs import sheet_filename
from screening.outputs.sheets import css_string
from screening.outputs.workbook import (
    FILTER_BUTTON,
    HEADER_LINES,
    PAPER_CODES,
    PORTRAIT_CHARS,
    UTILISATION_CAP,
)
from tests.conftest import worked_wall

runner = CliRunner()
LONG_NAME = "Old quarry road, the long retaining wall above the allotments and the footpath"
# the sheets that hold a table, and the row of its header (1-based)
TABLES = {
    "Look first": 4,
    "Ranked walls": 1,
    "Results by case": 1,
    "Rejected rows": 3,
    "Assumed defaults": 1,
    "Assumed per wall": 1,
}


def _register(tmp: Path) -> Path:
    rows = [
        # B15 with blocked drains: the resultant leaves the base (an infinite utilisation)
        worked_wall("B15", 1.5, drainage="blocked", name=LONG_NAME, lat=53.70, lon=-1.90, lean_deg=1.5),
        worked_wall("B20", 2.0, drainage="working", lat=53.701, lon=-1.90),
        worked_wall("B25", 2.5, drainage="partial", lat=53.702, lon=-1.90, condition_rating=4),
        worked_wall("BAD", 2.0, top_width_m=3.0),  # rejected: a row on 'Rejected rows'
    ]
    reg = tmp / "reg.csv"
    pd.DataFrame(rows).to_csv(reg, index=False)
    return reg


@pytest.fixture(scope="module")
def book_dir(tmp_path_factory) -> Path:
    tmp = tmp_path_factory.mktemp("print")
    result = runner.invoke(app, ["run", str(_register(tmp)), "-o", str(tmp / "out"), "--no-history"])
    assert result.exit_code == 1, result.output  # one row rejected
    return tmp / "out"


def _widths(sheet: Worksheet) -> dict[int, float]:
    """Column widths by 1-based column (openpyxl groups equal neighbouring columns)."""
    out: dict[int, float] = {}
    for dim in sheet.column_dimensions.values():
        if dim.min and dim.width:
            out.update(dict.fromkeys(range(dim.min, dim.max + 1), dim.width))
    return out


def _headers(sheet: Worksheet, row: int) -> list[str]:
    return [str(c.value) for c in sheet[row] if c.value is not None]


def test_workbook_opens_on_look_first(book_dir: Path) -> None:
    book = openpyxl.load_workbook(book_dir / "report.xlsx")
    assert book.sheetnames[0] == "Look first"
    assert book.active.title == "Look first"


def test_every_sheet_prints_on_a4_by_default(book_dir: Path) -> None:
    book = openpyxl.load_workbook(book_dir / "report.xlsx")
    for sheet in book.worksheets:
        # paper code 9 is A4 in the OOXML paperSize list (ECMA-376 Part 1, §18.3.1.64)
        assert sheet.page_setup.paperSize == 9, sheet.title


def test_paper_is_a_setting(tmp_path: Path) -> None:
    assert set(PAPER_CODES) == set(PAPER_SIZES)
    config = tmp_path / "letter.toml"
    config.write_text('paper = "letter"\n', encoding="utf-8")
    out = tmp_path / "out"
    result = runner.invoke(app, ["run", str(_register(tmp_path)), "-c", str(config), "-o", str(out)])
    assert result.exit_code == 1, result.output
    book = openpyxl.load_workbook(out / "report.xlsx")
    # paper code 1 is US Letter (ECMA-376 Part 1, §18.3.1.64)
    assert {s.page_setup.paperSize for s in book.worksheets} == {1}
    with pytest.raises(ConfigError, match=r"setting paper = 'A5': expected one of A4, A3, letter, legal"):
        Config(paper="A5")


def test_tables_print_fitted_to_the_width_with_the_header_repeated(book_dir: Path) -> None:
    book = openpyxl.load_workbook(book_dir / "report.xlsx")
    for name, header_row in TABLES.items():
        sheet = book[name]
        assert sheet.sheet_properties.pageSetUpPr.fitToPage, name
        assert sheet.page_setup.fitToWidth in (None, 1), name  # None: the default, one page
        assert sheet.page_setup.fitToHeight == 0, name  # as many pages down as it takes
        assert sheet.print_title_rows == f"${header_row}:${header_row}", name
        width = sum(_widths(sheet).get(c, 8.43) for c in range(1, len(_headers(sheet, header_row)) + 1))
        expected = "landscape" if width > PORTRAIT_CHARS else "portrait"
        assert sheet.page_setup.orientation == expected, (name, width)
    assert book["Look first"].page_setup.orientation == "landscape"
    assert book["Assumed defaults"].oddFooter.right.text == "Page &P of &N"


def test_every_column_is_wide_enough_for_its_header(book_dir: Path) -> None:
    book = openpyxl.load_workbook(book_dir / "report.xlsx")
    for name, header_row in TABLES.items():
        sheet = book[name]
        widths = _widths(sheet)
        for cell in sheet[header_row]:
            if cell.value is None:
                continue
            # the header must show whole on its three lines (45 points of 11-point text),
            # next to the filter button, a character per unit of width (common practice, no source)
            room = int(widths.get(cell.column, 8.43)) - FILTER_BUTTON
            lines = textwrap.wrap(str(cell.value), room, break_long_words=False)
            assert len(lines) <= HEADER_LINES and max(map(len, lines)) <= room, (name, cell.value, room)


def test_reason_cells_wrap_and_their_rows_are_tall_enough(book_dir: Path) -> None:
    book = openpyxl.load_workbook(book_dir / "report.xlsx")
    for name, header_row in (("Look first", 4), ("Ranked walls", 1)):
        sheet = book[name]
        headers = _headers(sheet, header_row)
        widths = _widths(sheet)
        for col in (headers.index("Reason") + 1, headers.index("Name") + 1):
            for row in range(header_row + 1, sheet.max_row + 1):
                cell = sheet.cell(row, col)
                if not cell.value:
                    continue
                assert cell.alignment.wrap_text, (name, cell.coordinate)
                lines = len(textwrap.wrap(cell.value, int(widths[col])))
                height = sheet.row_dimensions[row].height or 15
                assert height >= 15 * lines, (name, cell.coordinate, height, lines)


def test_utilisation_columns_hold_only_numbers(book_dir: Path) -> None:
    book = openpyxl.load_workbook(book_dir / "report.xlsx")
    walls = pd.read_csv(book_dir / "walls.csv").set_index("wall_id")
    assert math.isinf(walls.loc["B15", "utilisation"])  # the case this test is about
    seen = 0
    for name, header_row in {**TABLES, "Ranked walls": 1}.items():
        sheet = book[name]
        headers = _headers(sheet, header_row)
        for col, header in enumerate(headers, start=1):
            if "tilisation" not in header:
                continue
            values = [sheet.cell(r, col) for r in range(header_row + 1, sheet.max_row + 1)]
            assert all(c.value is None or isinstance(c.value, (int, float)) for c in values), (name, header)
            capped = [c for c in values if c.value == UTILISATION_CAP]
            assert all("≥ 999" in c.number_format for c in capped)
            seen += len(capped)
    assert seen >= 3  # B15's worst and blocked utilisations, on 'Look first' and 'Ranked walls'
    # the words are in the state column, beside the number
    for name, header_row in (("Look first", 4), ("Ranked walls", 1)):
        sheet = book[name]
        headers = _headers(sheet, header_row)
        rows = {sheet.cell(r, 2).value: r for r in range(header_row + 1, sheet.max_row + 1)}
        state = sheet.cell(rows["B15"], headers.index("Base state (worst case)") + 1).value
        util = sheet.cell(rows["B15"], headers.index("Utilisation (worst) [-]") + 1).value
        assert state == "resultant outside base" and util == UTILISATION_CAP, name


# ---------------------------------------------------------------- the calculation sheet on paper


@pytest.fixture(scope="module")
def sheet_dir(tmp_path_factory) -> Path:
    tmp = tmp_path_factory.mktemp("sheet")
    reg = _register(tmp)
    result = runner.invoke(app, ["explain", str(reg), "B15", "B25", "-o", str(tmp / "out")])
    assert result.exit_code == 0, result.output
    return tmp / "out" / "sheets"


def _pdf_pages(pdf: bytes) -> int:
    # page objects of the PDF (ISO 32000-1 §7.7.3.3: a page is a dictionary of /Type /Page)
    return len(re.findall(rb"/Type\s*/Page(?![a-zA-Z])", pdf))


@pytest.mark.browser
def test_calculation_sheet_prints_on_two_or_three_a4_pages(sheet_dir: Path) -> None:
    from tests.browser import browser_page

    pages = {}
    with browser_page() as page:
        for wall in ("B15", "B25"):
            page.goto((sheet_dir / sheet_filename(wall)).as_uri())
            page.emulate_media(media="print")
            # no table is split across two pages, in the print layout
            breaks = page.eval_on_selector_all("table", "ts => ts.map(t => getComputedStyle(t).breakInside)")
            assert breaks and set(breaks) == {"avoid"}, wall
            assert page.locator("table.checked").inner_text().lower().count("checked by") == 1
            pdf = page.pdf(prefer_css_page_size=True)
            pages[wall] = _pdf_pages(pdf)
            (sheet_dir / f"{wall}.pdf").write_bytes(pdf)
            # A4 is 595 x 842 points (ISO 216)
            box = re.search(rb"/MediaBox\s*\[\s*0 0 ([\d.]+) ([\d.]+)", pdf)
            assert box and abs(float(box[1]) - 595.3) < 1 and abs(float(box[2]) - 841.9) < 1, wall
    assert all(2 <= n <= 3 for n in pages.values()), pages
    pdftotext = shutil.which("pdftotext")
    if pdftotext is None:
        return
    text = subprocess.run(
        [pdftotext, "-layout", str(sheet_dir / "B15.pdf"), "-"], capture_output=True, text=True, check=True
    ).stdout
    per_page = text.split("\f")[: pages["B15"]]
    for k, body in enumerate(per_page, start=1):
        assert "Calculation sheet: wall B15" in body, k  # the wall id on every page
        assert f"page {k} of {pages['B15']}" in body, k


def test_running_head_cannot_break_out_of_the_style_sheet() -> None:
    head = css_string('W"1</style><script>alert(1)</script>')
    assert head.startswith('"') and head.endswith('"') and '"' not in head[1:-1]
    assert "<" not in head and ">" not in head
    # CSS Syntax Level 3 §4.3.7: a backslash and up to six hex digits name the code point
    assert "\\00003c" in head and "\\000022" in head


def test_sheet_is_laid_out_for_the_paper_setting(sheet_dir: Path) -> None:
    page = (sheet_dir / sheet_filename("B15")).read_text()
    assert re.search(r"@page \{ size: A4;", page)
    assert 'content: "Calculation sheet: wall " "B15"' in page
    assert 'counter(page) " of " counter(pages)' in page
