"""The workbook an owner opens: ranked summary, walls to look at first, results per case,
rejected rows, assumed defaults, settings and the method with its cautions.

Written with xlsxwriter directly, row by row in constant-memory mode. Text that
came from the register is always written as a string cell, so a value such as
``=HYPERLINK(...)`` can never run as a formula.
"""

from __future__ import annotations

import json
import textwrap
from collections.abc import Sequence
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import xlsxwriter
from xlsxwriter.worksheet import Worksheet

from screening.assumed import Assumptions
from screening.io.writers import write_atomic
from screening.priority import BAND_LABELS, LEAN_CAUTION, near_toe, near_toe_words

CAUTION = (
    "Screening aid only. These results come from a simplified check of existing walls from "
    "register data; a flag means 'look at this wall first', not 'this wall has failed'. Results "
    "must be reviewed by a qualified engineer; local codes and the asset owner's standards govern."
)

BAND_COLOURS = {
    # Paul Tol's "muted" qualitative scheme, designed to stay distinct with the common colour-vision
    # deficiencies (P. Tol, "Colour schemes", SRON technical note, 2021), shared with the map: each
    # has a WCAG 2 contrast ratio of at least 3:1 against the map's land colour (BASE_MAP_LAND)
    "inspect_first": "#882255",  # wine
    "inspect_soon": "#CC6677",  # rose
    "routine": "#117733",  # green
    "low_concern": "#332288",  # indigo
    "check_data": "#4D4D4D",  # figures that cannot be right (method.md §13): outside the sequence
}
BASE_MAP_LAND = "#F2EFE9"
"""The land colour of the OpenStreetMap standard style's tiles (assumed: the style's documented
background, common practice, no measurement of our own); the band colours are checked against it."""

# (column, header with units, kind); kind: text (from the register: always a string),
# word (our own words), num2, num3, int, bool
SUMMARY_COLUMNS: Sequence[tuple[str, str, str]] = (
    ("rank", "Rank", "int"),
    ("wall_id", "Wall", "text"),
    ("name", "Name", "text"),
    ("priority_band", "Priority band", "word"),
    ("priority_score", "Priority score (0-100)", "num2"),
    ("reason", "Reason", "word"),
    ("worst_case", "Worst case", "word"),
    ("governing_check", "Governing check", "word"),
    ("utilisation", "Utilisation (worst) [-]", "num2"),
    ("utilisation_drained", "Utilisation drained [-]", "num2"),
    ("utilisation_blocked", "Utilisation blocked [-]", "num2"),
    ("utilisation_surveyed", "Utilisation surveyed [-]", "num2"),
    *(
        (f"p_failure_{case}", f"P(failure) {case}, given it stands [-]", "num3")
        for case in ("drained", "blocked", "surveyed")
    ),
    ("p_stands", "Share of draws standing [-]", "num3"),
    ("data_inconsistent", "Figures cannot be right", "bool"),
    ("measure_next", "Measure next", "word"),
    ("state", "Base state (worst case)", "word"),
    ("outside_middle_third", "Outside middle third in any case", "bool"),
    ("over_allowable_bearing", "Over allowable bearing in any case", "bool"),
    ("condition_rating", "Condition (1-5)", "int"),
    ("consequence", "Below the wall", "word"),
    ("height_m", "Height [m]", "num2"),
    ("lean_deg", "Lean [°]", "num2"),
    ("crack_height_m", "Crack height [m]", "num2"),
    ("located", "On the map", "bool"),
    ("suspect_data", "Resting on suspect data", "bool"),
    ("suspect_inputs", "Suspect inputs", "text"),
    ("drainage_not_recorded", "Drainage not recorded (screened as blocked)", "bool"),
    ("critical_water_height_m", "Critical water height [m]", "num2"),
    ("critical_water_fraction", "Critical water height / retained height [-]", "num2"),
    ("critical_lean_deg", "Critical lean (resultant at the toe) [°]", "num2"),
    ("years_to_critical_lean", "Years to critical lean (a projection, not a prediction)", "num2"),
    ("sheet", "Calculation sheet", "link"),
)

LOOK_FIRST_COLUMNS = (
    "rank",
    "wall_id",
    "name",
    "priority_band",
    "priority_score",
    "reason",
    "utilisation",
    "state",
    "sheet",
)
"""The columns of SUMMARY_COLUMNS shown on 'Look first'."""

# the columns of the other tables, in the same form as SUMMARY_COLUMNS
CHANGE_COLUMNS: Sequence[tuple[str, str, str]] = (
    ("wall_id", "Wall", "text"),
    ("status", "Status", "word"),
    ("inputs_changed", "Inputs changed (from → to)", "text"),
    ("utilisation_before", "Utilisation before [-]", "num2"),
    ("utilisation_after", "Utilisation after [-]", "num2"),
    ("governing_check_before", "Governing before", "word"),
    ("governing_check_after", "Governing after", "word"),
    ("priority_band_before", "Band before", "word"),
    ("priority_band_after", "Band after", "word"),
    ("rank_before", "Rank before", "int"),
    ("rank_after", "Rank after", "int"),
    ("not_rescreened_because", "Why not re-screened", "text"),
)

PROBLEM_COLUMNS: Sequence[tuple[str, str, str]] = (
    ("row", "Row in your file", "int"),
    ("wall_id", "Wall", "text"),
    ("column", "Column", "text"),
    ("value", "Value", "text"),
    ("severity", "Severity", "word"),
    ("message", "What was expected", "word"),
)

ASSUMPTION_COLUMNS: Sequence[tuple[str, str, str]] = (
    ("column", "Column assumed", "text"),
    ("value", "Value used", "text"),
    ("source", "Source", "text"),
    ("walls", "Walls", "int"),
)

PER_WALL_COLUMNS: Sequence[tuple[str, str, str]] = (
    ("wall_id", "Wall", "text"),
    ("row", "Row in your file", "int"),
    ("assumed", "Columns assumed (value)", "text"),
)

RESULT_HEADERS = {
    "water_height_m": "Water height [m]",
    "weight_kn_m": "Wall weight W [kN/m]",
    "vertical_kn_m": "V [kN/m]",
    "horizontal_kn_m": "ΣH [kN/m]",
    "uplift_kn_m": "Uplift U [kN/m]",
    "restoring_moment_knm_m": "M_R [kNm/m]",
    "overturning_moment_knm_m": "M_O [kNm/m]",
    "resultant_from_toe_m": "x_R from toe [m]",
    "eccentricity_m": "e [m]",
    "toe_pressure_kpa": "Toe pressure [kPa]",
    "heel_pressure_kpa": "Heel pressure [kPa]",
    "crack_eccentricity_m": "Crack e [m]",
    "joint_height_m": "Governing bed joint z [m]",
    "joint_middle_third_utilisation": "Bed joint middle third utilisation [-]",
    "joint_sliding_utilisation": "Bed joint sliding utilisation [-]",
    "joint_overturning_utilisation": "Bed joint overturning utilisation [-]",
    "bearing_method": "Bearing method",
    "bearing_resistance_kn_m": "Bearing resistance R (EN 1997-1 Annex D) [kN/m]",
    "resultant_utilisation": "Resultant utilisation (criteria per case) [-]",
    "passive_resistance_kn_m": "Passive resistance P_p [kN/m]",
}
WORDS = {"annex_d": "EN 1997-1 Annex D", "presumed": "presumed allowable"}
"""Our coded words as the workbook shows them (with the band labels)."""


METHOD_TEXT: list[tuple[str, str]] = [
    (
        "What is checked",
        "Each wall as a rigid gravity block on its base, per metre run, in three cases: "
        "drained (no water behind the wall), blocked (water to the top of the retained ground, "
        "EN 1997-1 §9.6) and surveyed (the recorded water level, else the drainage state).",
    ),
    (
        "Earth pressure",
        "Coulomb's active coefficient on the vertical plane through the heel (Rankine's "
        "when wall friction and backfill slope are zero), on effective vertical stress plus the uniform "
        "surcharge; water pressure hydrostatic and never multiplied by Ka.",
    ),
    (
        "Uplift",
        "Linear under the base from the water pressure at the heel to zero at the toe; its moment "
        "is counted as overturning (U·2B/3 added to M_O), which gives a lower factor of safety against "
        "overturning than subtracting it from the restoring moment.",
    ),
    (
        "Lean",
        "A measured lean rotates the wall and the soil it carries about the toe: each weight's "
        "lever arm becomes x·cos ω − z·sin ω (a first-order treatment).",
    ),
    (
        "Base pressure",
        "Trapezoidal within the middle third, q = V/B(1 ± 6e/B); beyond it triangular with "
        "no tension, q_max = 2V/(3x'); a resultant outside the base means the wall overturns (shown as ∞).",
    ),
    (
        "Checks and utilisation",
        "Middle third |e|/(B/6); bearing q_max/q_allow; sliding 1.5/FoS "
        "(V·tan δ_b/ΣH, no passive resistance, no adhesion); overturning 2.0/FoS (M_R/M_O). Utilisation is "
        "the largest; 1 or less passes; margin = 1 − utilisation.",
    ),
    (
        "Known crack",
        "The part above a recorded horizontal crack is checked as a wall of its own on the "
        "crack plane (no uplift in the crack, joint friction), for middle third, sliding and overturning.",
    ),
    (
        "Priority",
        "Score = 100 × likelihood × consequence (the idea of NCHRP Report 903): likelihood from "
        "the surveyed and blocked utilisations, condition, lean and cracks; consequence from what lies below "
        "and the wall height. Bands: Inspect first ≥ 40, Inspect soon ≥ 25, Routine ≥ 12, else Low concern.",
    ),
    (
        "Defaults",
        "Blanks are filled from documented defaults (EN 1991-1-1 Annex A unit weights, BS 8002 "
        "surcharge, presumed bearing values after BS 8004 Table 1 and NAVFAC DM 7.02); every one used is "
        "listed on the sheets 'Assumed defaults' and 'Assumed per wall'.",
    ),
    (
        "Every bed joint",
        "Masonry and drystone walls are also checked on the horizontal planes k·H/N above the base "
        "(N = joint_planes), each as the crack plane; 'Results by case' gives the governing plane's height "
        "and utilisations.",
    ),
    (
        "Critical water height and lean",
        "The lowest water height behind the wall at which a check first fails (0: fails with none; blank: "
        "holds with water to the top), and the outward lean at which the resultant reaches the toe. The "
        "years to that lean at the measured rate are " + LEAN_CAUTION + ".",
    ),
    (
        "Bearing after EN 1997-1 Annex D",
        "Where the foundation soil's friction angle is recorded, the drained bearing resistance of a strip "
        "on the effective width B' = B − 2|e| with load inclination factors replaces the presumed allowable "
        "pressure; utilisation V·F_b/R.",
    ),
    (
        "Utilisation columns",
        "Numbers throughout, so that filters and sorting work: a utilisation of 999 or more, an "
        "infinite one included (the resultant outside the base), is written as 999 and shown as "
        "'≥ 999'; the state column says why, and results.csv keeps the value itself.",
    ),
    (
        "Not included",
        "Global (deep-seated) stability, the structural capacity of the masonry, passive "
        "resistance in front of the toe, seismic loads, and the condition of the fill itself.",
    ),
]


EXCEL_MAX_ROWS = 1_048_576
"""Rows in one worksheet (Excel's limit)."""

PAPER_CODES = {"A4": 9, "A3": 8, "letter": 1, "legal": 5}
"""xlsxwriter's paper index of each paper size the ``paper`` setting accepts."""
PORTRAIT_CHARS = 95
"""Column widths (in characters) that print across portrait paper near full size; a sheet
whose columns add up to more prints landscape."""
HEADER_LINES = 3
"""Lines a header may wrap onto (the header row is 45 points high: three lines of 11 points)."""
FILTER_BUTTON = 3
"""Characters of a header cell that the filter drop-down button covers."""
WRAP_FROM = 30
"""Text columns at least this wide wrap their cells (reasons, messages, sources)."""
ROW_POINTS = 15
"""Height of one line of 11-point text in a row [points]."""
WORD_BREAK = 12
"""Characters a wrapped line may leave empty when the next word does not fit."""
UTILISATION_CAP = 999.0
"""Utilisation columns hold numbers only, so that filters and sorting work: a value of 999 or
more, an infinite one included (the resultant outside the base), is written as 999 and shown
as "≥ 999"; the state column says why, and results.csv keeps the value itself."""
UTILISATION_FORMAT = '[>=999]"≥ 999";0.00'


class _Formats:
    def __init__(self, book: xlsxwriter.Workbook):
        self.header = book.add_format(
            {"bold": True, "text_wrap": True, "valign": "top", "bg_color": "#E8E8E8", "border": 1}
        )
        # right-aligned so that "∞" (outside the utilisation columns) lines up with the numbers
        self.num2 = book.add_format({"num_format": "0.00", "align": "right", "valign": "top"})
        self.num3 = book.add_format({"num_format": "0.000", "align": "right", "valign": "top"})
        self.util = book.add_format({"num_format": UTILISATION_FORMAT, "align": "right", "valign": "top"})
        self.int = book.add_format({"num_format": "0", "align": "right", "valign": "top"})
        self.top = book.add_format({"valign": "top"})
        self.right = book.add_format({"align": "right"})
        self.wrap = book.add_format({"text_wrap": True, "valign": "top"})
        self.title = book.add_format({"bold": True, "font_size": 14})
        self.bold = book.add_format({"bold": True, "valign": "top"})
        self.caution = book.add_format(
            {"italic": True, "text_wrap": True, "font_color": "#7A1F1F", "valign": "top"}
        )
        self.link = book.add_format({"font_color": "#1F4E99", "underline": 1, "valign": "top"})
        self.over = book.add_format({"bg_color": "#F4CCCC", "font_color": "#7A1F1F"})
        self.near = book.add_format({"bg_color": "#FFF2CC"})
        self.band = {
            band: book.add_format(
                {
                    "bg_color": colour,
                    "font_color": "#FFFFFF",
                }
            )
            for band, colour in BAND_COLOURS.items()
        }


def _column_values(values: pd.Series, kind: str) -> list[Any]:
    """A column as the Python values ``write_row`` takes, converted column-wise:
    None for blanks, "∞" for infinity (utilisations: :data:`UTILISATION_CAP`), labels for our
    coded words."""
    if kind == "util":
        u = pd.to_numeric(values, errors="coerce").to_numpy(dtype=float)
        capped = np.clip(u, -UTILISATION_CAP, UTILISATION_CAP).astype(object)
        capped[np.isnan(u)] = None
        return capped.tolist()
    if kind in ("num2", "num3", "int"):
        v = pd.to_numeric(values, errors="coerce").to_numpy(dtype=float)
        out = v.astype(object)
        out[np.isnan(v)] = None
        out[np.isposinf(v)] = "∞"
        out[np.isneginf(v)] = "-∞"
        return out.tolist()
    if kind == "num3_or_words":  # numbers, with words where a number would mislead
        words = values.map(lambda x: isinstance(x, str)).to_numpy(dtype=bool)
        out = np.array(_column_values(values.where(~words), "num3"), dtype=object)
        out[words] = values.to_numpy(dtype=object)[words]
        return out.tolist()
    if kind == "bool":
        missing = values.isna().to_numpy()
        out = values.to_numpy(dtype=object).copy()
        out[missing] = None
        out[~missing] = out[~missing].astype(bool)
        return out.tolist()
    missing = values.isna().to_numpy()
    text = values.astype(object).where(~values.isna(), "").astype(str)
    if kind == "word":
        text = text.replace({**BAND_LABELS, **WORDS}).str.replace("_", " ", regex=False)
    out = text.to_numpy(dtype=object)
    out[missing] = None
    return out.tolist()


def _table(
    notes: list[str],
    sheet: Worksheet,
    frame: pd.DataFrame,
    columns: Sequence[tuple[str, str, str]],
    f: _Formats,
    *,
    widths: dict[str, int] | None = None,
    start_row: int = 0,
) -> int:
    """Header, rows in order, frozen header and filters; returns the last row written.

    Rows go out with ``write_row`` (the workbook is opened with strings_to_formulas and
    strings_to_urls off, so register text always lands as a string cell); number formats
    are column formats, which xlsxwriter applies to cells written without one.
    """
    cols = [c for c in columns if c[0] in frame.columns]
    room = EXCEL_MAX_ROWS - start_row - 1
    if len(frame) > room:
        notes.append(
            f"sheet '{sheet.name}' shows the first {room:,} of {len(frame):,} rows "
            "(the row limit of a worksheet); the CSV files have them all"
        )
        frame = frame.head(room)
    sheet.set_row(start_row, 45)
    cols = [(name, header, _print_kind(name, kind)) for name, header, kind in cols]
    for c, (name, header, kind) in enumerate(cols):
        sheet.write_string(start_row, c, header, f.header)
        width = _column_width(name, header, widths)
        sheet.set_column(c, c, width, _column_format(f, kind, width))
    heights = _row_heights(frame, cols, widths)
    for first in range(0, len(frame), ROWS_AT_ONCE):
        part = frame.iloc[first : first + ROWS_AT_ONCE]
        _rows(sheet, part, cols, heights[first : first + ROWS_AT_ONCE], start_row + 1 + first, f)
    last = start_row + len(frame)
    sheet.freeze_panes(start_row + 1, 2 if len(cols) > 2 else 0)
    sheet.autofilter(start_row, 0, max(last, start_row), len(cols) - 1)
    return last


ROWS_AT_ONCE = 10_000
"""Rows converted to cell values at a time (the Python objects of a whole large sheet at once
would take more memory than the sheet's data)."""


def _rows(
    sheet: Worksheet,
    frame: pd.DataFrame,
    cols: Sequence[tuple[str, str, str]],
    heights: Any,
    first_row: int,
    f: _Formats,
) -> None:
    """Rows of a table from ``first_row``: values converted column-wise, written row by row."""
    links = [c for c, (_, _, kind) in enumerate(cols) if kind == "link"]
    data = [
        [None] * len(frame) if kind == "link" else _column_values(frame[name], kind) for name, _, kind in cols
    ]
    link_values = {c: frame[cols[c][0]].to_numpy(dtype=object) for c in links}
    for i, row in enumerate(zip(*data, strict=True)):
        r = first_row + i
        if heights[i]:
            sheet.set_row(r, heights[i])
        sheet.write_row(r, 0, row)
        for c in links:
            target = link_values[c][i]
            if isinstance(target, str) and target:
                sheet.write_url(r, c, f"external:{target}", f.link, string="open sheet")


def _print_kind(name: str, kind: str) -> str:
    """The kind a column is written as: numeric utilisation columns become "util" (capped)."""
    return "util" if "utilisation" in name and kind in ("num2", "num3") else kind


def _header_width(header: str) -> int:
    """The narrowest column (in characters) that shows ``header`` whole on at most
    :data:`HEADER_LINES` lines, wrapped at spaces and never inside a word, beside the filter
    button (:data:`FILTER_BUTTON`)."""
    width = max(len(w) for w in header.split())
    while len(textwrap.wrap(header, width, break_long_words=False)) > HEADER_LINES:
        width += 1
    return width + FILTER_BUTTON


def _column_width(name: str, header: str, widths: dict[str, int] | None) -> int:
    """A column's width: as given, else from the header (10 to 22), never narrower than its header."""
    width = (widths or {}).get(name, max(10, min(len(header) + 2, 22)))
    return max(width, _header_width(header))


def _column_format(f: _Formats, kind: str, width: int) -> Any:
    """The column format of a kind: a number format, or wrapping for wide text columns."""
    if kind in ("word", "text") and width >= WRAP_FROM:
        return f.wrap
    return {"num2": f.num2, "num3": f.num3, "int": f.int, "util": f.util}.get(kind, f.top)


def _row_heights(
    frame: pd.DataFrame, cols: Sequence[tuple[str, str, str]], widths: dict[str, int] | None
) -> Any:
    """The height [points] each row needs for its wrapped cells, 0 for one line.

    Neither Excel nor LibreOffice sizes the rows of a written file to wrapped text, so the
    lines are estimated column-wise (:func:`_lines`).
    """
    lines = np.ones(len(frame), dtype=int)
    for name, header, kind in cols:
        width = _column_width(name, header, widths)
        if kind in ("word", "text") and width >= WRAP_FROM:
            chars = frame[name].astype(object).where(frame[name].notna(), "").astype(str).str.len()
            lines = np.maximum(lines, _lines(chars.to_numpy(dtype=float), width))
    return np.where(lines > 1, ROW_POINTS * lines, 0)


def _lines(chars: Any, width: int) -> Any:
    """Lines that text of ``chars`` characters takes in a wrapped column of ``width``: a character
    per unit of width (proportional text is narrower than the digits the unit is measured in),
    less :data:`WORD_BREAK` per line for the word carried to the next line."""
    chars = np.asarray(chars, dtype=float)
    return np.where(chars <= width, 1, np.ceil(chars / max(width - WORD_BREAK, 1))).astype(int)


def _print_setup(sheet: Worksheet, paper: str, width: float, header_row: int | None) -> None:
    """Paper size, landscape when the columns are wider than portrait paper, fit to the page
    width (any number of pages down), the header row repeated on every printed page."""
    sheet.set_paper(PAPER_CODES[paper])
    if width > PORTRAIT_CHARS:
        sheet.set_landscape()
    else:
        sheet.set_portrait()
    sheet.fit_to_pages(1, 0)
    sheet.center_horizontally()
    sheet.set_margins(left=0.5, right=0.5, top=0.6, bottom=0.6)
    sheet.set_footer("&L&A&RPage &P of &N")
    if header_row is not None:
        sheet.repeat_rows(header_row)


def _colour_utilisation(
    sheet: Worksheet,
    frame: pd.DataFrame,
    cols: Sequence[tuple[str, str, str]],
    f: _Formats,
    start_row: int = 0,
) -> None:
    names = [c[0] for c in cols if c[0] in frame.columns]
    n = len(frame)
    if n == 0:
        return
    first, last = start_row + 1, start_row + n
    for c, name in enumerate(names):
        if "utilisation" in name:
            rng = (first, c, last, c)
            sheet.conditional_format(*rng, {"type": "cell", "criteria": ">", "value": 1, "format": f.over})
            sheet.conditional_format(
                *rng, {"type": "cell", "criteria": "between", "minimum": 0.8, "maximum": 1, "format": f.near}
            )
        if name == "priority_band":
            for band, fmt in f.band.items():
                sheet.conditional_format(
                    first,
                    c,
                    last,
                    c,
                    {"type": "text", "criteria": "begins with", "value": BAND_LABELS[band], "format": fmt},
                )


def _key_value(sheet: Worksheet, rows: list[tuple[str, Any]], f: _Formats, start: int = 0) -> int:
    r = start
    for key, value in rows:
        sheet.write_string(r, 0, key, f.bold)
        if isinstance(value, (int, float)) and not isinstance(value, bool):
            sheet.write_number(r, 1, value)
        else:
            sheet.write_string(r, 1, "" if value is None else str(value))
        r += 1
    return r


def write_workbook(
    target: str | Path,
    *,
    walls: pd.DataFrame,
    results: pd.DataFrame,
    problems: pd.DataFrame,
    assumptions: Assumptions | pd.DataFrame,
    settings: dict[str, Any],
    provenance: list[tuple[str, Any]],
    method_text: list[tuple[str, str]] = METHOD_TEXT,
    changes: pd.DataFrame | None = None,
    full_results_limit: int = 1_000,
    look_first: int = 100,
    near_toe_m: float = 0.0,
    paper: str = "A4",
) -> Path:
    """Write ``report.xlsx`` atomically. See the module docstring for the sheets.

    In constant-memory mode each sheet is written top to bottom and the sheets in the order
    they appear; the settings sheet comes after the tables so that it lists every table
    cut at the row limit. The workbook opens on 'Look first', its first sheet; every sheet
    prints on ``paper`` (a key of :data:`PAPER_CODES`), fitted to the page width.
    """

    def build(tmp: Path) -> None:
        out = _Book(tmp, paper)
        _look_first_sheet(out, walls, look_first, changes)
        _ranked_sheet(out, walls)
        if "measure_next" in walls:
            _measure_next_sheet(out, walls)
        if changes is not None:
            _changes_sheet(out, changes)
        _results_sheet(out, walls, _toe_in_words(results, near_toe_m), full_results_limit)
        _rejected_sheet(out, problems)
        _assumed_sheets(out, assumptions)
        _settings_sheet(out, provenance, settings)
        _method_sheet(out, method_text)
        out.book.close()

    return write_atomic(target, build)


class _Book:
    """The workbook being written, its formats, and the notes for the settings sheet."""

    def __init__(self, path: Path, paper: str = "A4"):
        if paper not in PAPER_CODES:
            raise ValueError(f"paper {paper!r}: expected one of {', '.join(PAPER_CODES)}")
        self.paper = paper
        self.book = xlsxwriter.Workbook(
            str(path),
            {
                "constant_memory": True,
                "strings_to_formulas": False,
                "strings_to_urls": False,
                "nan_inf_to_errors": False,
            },
        )
        self.f = _Formats(self.book)
        self.notes: list[str] = []  # sheets cut at the row limit

    def sheet(self, name: str) -> Worksheet:
        return self.book.add_worksheet(name)

    def table(
        self,
        sheet: Worksheet,
        frame: pd.DataFrame,
        columns: Sequence[tuple[str, str, str]],
        *,
        widths: dict[str, int] | None = None,
        start_row: int = 0,
        coloured: bool = False,
    ) -> int:
        """:func:`_table`, then the utilisation and band colours if ``coloured``."""
        last = _table(self.notes, sheet, frame, columns, self.f, widths=widths, start_row=start_row)
        shown = [(name, header) for name, header, _ in columns if name in frame.columns]
        width = sum(_column_width(name, header, widths) for name, header in shown)
        _print_setup(sheet, self.paper, width, start_row)
        if coloured:
            _colour_utilisation(sheet, frame, columns, self.f, start_row=start_row)
        return last


def _ranked_sheet(out: _Book, walls: pd.DataFrame) -> None:
    sheet = out.sheet("Ranked walls")
    out.table(sheet, walls, SUMMARY_COLUMNS, widths={"reason": 70, "name": 30}, coloured=True)


def _look_first_sheet(
    out: _Book, walls: pd.DataFrame, look_first: int, changes: pd.DataFrame | None = None
) -> None:
    """The band 'Inspect first' (at most ``look_first`` walls), and at least the top ten."""
    first = walls[walls["priority_band"] == "inspect_first"].head(look_first)
    if len(first) < 10:
        first = walls.head(min(look_first, max(10, len(first))))
    sheet = out.sheet("Look first")
    sheet.activate()  # the sheet the workbook opens on
    sheet.write_string(
        0,
        0,
        f"The {len(first)} walls to look at first, of {len(walls)} screened "
        "(the band 'Inspect first', and at least the top ten)",
        out.f.title,
    )
    sheet.set_row(1, 32)
    sheet.merge_range(1, 0, 1, 7, CAUTION, out.f.caution)
    short = [c for c in SUMMARY_COLUMNS if c[0] in LOOK_FIRST_COLUMNS]
    start = _carried_block(out, sheet, changes, row=3)
    out.table(sheet, first, short, widths={"reason": 90, "name": 30}, start_row=start, coloured=True)


def _carried_block(
    out: _Book, sheet: Worksheet, changes: pd.DataFrame | None, row: int, shown: int = 10
) -> int:
    """Walls of the last run whose row was rejected this time (on no other list of this run), with
    their band then and why; returns the row the next table starts on."""
    from screening.history import carried_walls

    carried = carried_walls(changes)
    if not len(carried):
        return row
    sheet.write_string(
        row,
        0,
        f"Not re-screened this run ({len(carried)}): rows rejected, carried from the last run",
        out.f.bold,
    )
    # one line each, not wrapped: the column's own format wraps (the names below), and a wrapped
    # line in a row of one line's height is drawn over the next row
    for k, r in enumerate(carried.head(shown).itertuples(index=False), start=row + 1):
        sheet.write_string(k, 1, str(r.wall_id), out.f.top)
        sheet.write_string(k, 2, str(r.carried), out.f.top)
    last = row + min(len(carried), shown)
    if len(carried) > shown:
        last += 1
        sheet.write_string(last, 2, f"… {len(carried) - shown} more on 'Changes since last run'", out.f.top)
    return last + 2


MEASURE_COLUMNS: Sequence[tuple[str, str, str]] = (
    ("measure_next", "Measure next", "word"),
    ("walls", "Walls", "int"),
    ("wall_id", "Wall", "text"),
    ("name", "Name", "text"),
    ("rank", "Rank", "int"),
    ("priority_band", "Priority band", "word"),
    ("p_failure_blocked", "P(failure) blocked, given it stands [-]", "num3"),
    ("p_failure_surveyed", "P(failure) surveyed, given it stands [-]", "num3"),
)


def wall_columns_shown() -> list[str]:
    """The columns of the walls table that the workbook shows (the others need not be sent to
    a process writing it)."""
    names = [c[0] for c in (*SUMMARY_COLUMNS, *MEASURE_COLUMNS) if c[0] not in ("walls", "sheet")]
    return list(dict.fromkeys(names))


def _measure_next_sheet(out: _Book, walls: pd.DataFrame) -> None:
    """The survey plan (method.md §13): walls grouped by the input whose measurement would most
    change their probability of failure; the groups with the most walls first, in rank order."""
    plan = walls[walls["measure_next"].fillna("") != ""].copy()
    plan["walls"] = plan.groupby("measure_next")["wall_id"].transform("size")
    plan = plan.sort_values(["walls", "measure_next", "rank"], ascending=[False, True, True], kind="stable")
    sheet = out.sheet("What to measure next")
    sheet.write_string(
        0,
        0,
        f"What to measure next: {len(plan)} walls grouped by the input that drives their probability "
        "of failure (a default, estimated dimensions, or a water level not measured)",
        out.f.title,
    )
    sheet.set_row(1, 32)
    sheet.merge_range(1, 0, 1, 7, CAUTION, out.f.caution)
    out.table(sheet, plan, MEASURE_COLUMNS, widths={"measure_next": 40, "name": 30}, start_row=3)


def _changes_sheet(out: _Book, changes: pd.DataFrame) -> None:
    sheet = out.sheet("Changes since last run")
    out.table(sheet, changes, CHANGE_COLUMNS, widths={"inputs_changed": 70})


def _results_sheet(out: _Book, walls: pd.DataFrame, results: pd.DataFrame, limit: int) -> None:
    """Every case of every wall, or of the first ``limit`` walls of the ranking."""
    sheet = out.sheet("Results by case")
    shown = results
    start = 0
    if len(walls) > limit:
        # a sheet of 3 x 10^5 rows helps nobody and takes minutes to write: keep the
        # first walls of the ranking here; results.csv has every wall and case
        keep = set(walls["wall_id"].head(limit))
        shown = results[results["wall_id"].isin(keep)]
        sheet.write_string(
            0,
            0,
            f"The first {limit} walls of the ranking (of {len(walls)}); every wall "
            "and case is in results.csv.",
            out.f.bold,
        )
        start = 2
    cols = [(c, RESULT_HEADERS.get(c, c.replace("_", " ")), _kind(c, results[c])) for c in results.columns]
    cols = [(c, h, "num3_or_words" if c == "toe_pressure_kpa" else k) for c, h, k in cols]
    out.table(sheet, shown, cols, start_row=start, coloured=True)


def _toe_in_words(results: pd.DataFrame, near_toe_m: float) -> pd.DataFrame:
    """The toe pressure of a resultant within ``near_toe_m`` of the toe in words (the number,
    correct but absurd, stays in results.csv)."""
    if near_toe_m <= 0 or "toe_pressure_kpa" not in results or "resultant_from_toe_m" not in results:
        return results
    at_toe = near_toe(results["resultant_from_toe_m"], near_toe_m)
    if not at_toe.any():
        return results
    toe = results["toe_pressure_kpa"].astype(object)
    toe[at_toe] = near_toe_words(near_toe_m)
    return results.assign(toe_pressure_kpa=toe)


def _rejected_sheet(out: _Book, problems: pd.DataFrame) -> None:
    sheet = out.sheet("Rejected rows")
    sheet.write_string(0, 0, "Errors reject the row (it was not screened); warnings keep it.", out.f.bold)
    out.table(sheet, problems, PROBLEM_COLUMNS, widths={"message": 80}, start_row=2)


def _assumed_sheets(out: _Book, assumptions: Assumptions | pd.DataFrame) -> None:
    """The same default is usually used for many walls: one row per default on 'Assumed
    defaults', one row per wall on 'Assumed per wall' (every single one is in assumptions.csv)."""
    if isinstance(assumptions, Assumptions):  # the compact form of screening.assumed
        summary, per_wall = _compact_summary(assumptions), _compact_per_wall(assumptions)
    else:
        summary, per_wall = _assumption_summary(assumptions), _assumptions_per_wall(assumptions)
    sheet = out.sheet("Assumed defaults")
    out.table(sheet, summary, ASSUMPTION_COLUMNS, widths={"source": 90, "value": 14})
    sheet = out.sheet("Assumed per wall")
    out.table(sheet, per_wall, PER_WALL_COLUMNS, widths={"assumed": 140})


def _settings_sheet(out: _Book, provenance: list[tuple[str, Any]], settings: dict[str, Any]) -> None:
    """Where the run came from, the notes of the sheets cut short, then every setting."""
    sheet = out.sheet("Settings")
    sheet.set_column(0, 0, 34)
    sheet.set_column(1, 1, 100, out.f.wrap)
    _print_setup(sheet, out.paper, 134, None)
    rows = [*provenance, *_criteria_rows(settings), *(("note", t) for t in out.notes)]
    _text_rows_height(sheet, [value for _, value in rows], 100)
    r = _key_value(sheet, rows, out.f)
    flat = _flatten(settings)
    _text_rows_height(sheet, [value for _, value in flat], 100, start=r + 1)
    _key_value(sheet, flat, out.f, start=r + 1)


def _criteria_rows(settings: dict[str, Any]) -> list[tuple[str, Any]]:
    """Which criteria the checks used and where they come from (method.md §12)."""
    criteria = settings.get("criteria") or {}
    if not criteria:
        sliding, overturning = settings.get("fos_sliding_required"), settings.get("fos_overturning_required")
        factors = (
            f"sliding {sliding:g}, overturning {overturning:g}, "
            if isinstance(sliding, (int, float)) and isinstance(overturning, (int, float))
            else ""
        )
        return [
            (
                "criteria",
                f"the same in every case: {factors}resultant within the middle third "
                "(no criteria per case set)",
            )
        ]
    rows: list[tuple[str, Any]] = [("criteria source", str(settings.get("criteria_source") or "config file"))]
    for case, c in criteria.items():
        parts = [f"{k.replace('_', ' ')} {v:.4g}" for k, v in c.items() if v is not None]
        rows.append((f"criteria, {case}", "; ".join(parts) + " (missing keys take the top-level values)"))
    return rows


def _method_sheet(out: _Book, method_text: list[tuple[str, str]]) -> None:
    sheet = out.sheet("Method and cautions")
    sheet.set_column(0, 0, 28)
    sheet.set_column(1, 1, 100, out.f.wrap)
    _print_setup(sheet, out.paper, 128, None)
    sheet.write_string(0, 0, "Caution", out.f.title)
    sheet.set_row(1, 32)
    sheet.merge_range(1, 0, 1, 1, CAUTION, out.f.caution)
    _text_rows_height(sheet, [text for _, text in method_text], 100, start=3)
    for r, (head, text) in enumerate(method_text, start=3):
        sheet.write_string(r, 0, head, out.f.bold)
        sheet.write_string(r, 1, text, out.f.wrap)


def _text_rows_height(sheet: Worksheet, texts: list[Any], width: int, start: int = 0) -> None:
    """Heights of the rows from ``start`` whose text wraps in a column of ``width`` (set before
    the rows are written, as constant-memory mode needs)."""
    chars = [len(t) if isinstance(t, str) else 0 for t in texts]
    for r, n in enumerate(_lines(chars, width), start=start):
        if n > 1:
            sheet.set_row(r, ROW_POINTS * int(n))


def _assumption_summary(assumptions: pd.DataFrame) -> pd.DataFrame:
    if assumptions.empty:
        return pd.DataFrame(columns=["column", "value", "source", "walls"])
    a = assumptions.assign(value=assumptions["value"].map(_short))
    return (
        a.groupby(["column", "value", "source"], sort=False, dropna=False)
        .size()
        .rename("walls")
        .reset_index()
    )


def _assumptions_per_wall(assumptions: pd.DataFrame) -> pd.DataFrame:
    if assumptions.empty:
        return pd.DataFrame(columns=["wall_id", "row", "assumed"])
    text = assumptions["column"].astype(str) + " = " + assumptions["value"].map(_short)
    grouped = text.groupby([assumptions["wall_id"], assumptions["row"]], sort=False).agg("; ".join)
    return grouped.rename("assumed").reset_index()


def _shorts(values: np.ndarray) -> np.ndarray:
    """:func:`_short` of each value, formatted once per distinct value."""
    series = pd.Series(values, dtype=object)
    distinct = series.drop_duplicates()
    return series.map(dict(zip(distinct, map(_short, distinct), strict=True))).to_numpy(dtype=object)


def _compact_summary(a: Assumptions) -> pd.DataFrame:
    """:func:`_assumption_summary` of ``a.long()``, from the compact form column by column
    (the same rows in the same order: by first use, register row then input)."""
    pieces = []
    width = max(len(a.columns), 1)
    for k, col in enumerate(a.columns):
        code = a.codes[col].to_numpy()
        hit = np.flatnonzero(code > 0)
        if not hit.size:
            continue
        texts = a.sources[a.sources["column"] == col].set_index("source_id")["source"]
        piece = pd.DataFrame(
            {
                "column": col,
                "value": _shorts(a.table[col].to_numpy(dtype=object)[hit]),
                "source": texts.reindex(code[hit]).to_numpy(dtype=object),
                "_at": hit * width + k,
            }
        )
        pieces.append(
            piece.groupby(["column", "value", "source"], sort=False, dropna=False)
            .agg(walls=("_at", "size"), _at=("_at", "min"))
            .reset_index()
        )
    if not pieces:
        return pd.DataFrame(columns=["column", "value", "source", "walls"])
    out = pd.concat(pieces, ignore_index=True).sort_values("_at", kind="stable")
    return out.drop(columns="_at").reset_index(drop=True)


def _compact_per_wall(a: Assumptions) -> pd.DataFrame:
    """:func:`_assumptions_per_wall` of ``a.long()``, from the compact form: each input's
    "column = value" joined across the inputs in their order, for the walls with a default."""
    n = len(a.table)
    text = np.full(n, "", dtype=object)
    for col in a.columns:
        hit = np.flatnonzero(a.codes[col].to_numpy() > 0)
        if not hit.size:
            continue
        part = col + " = " + _shorts(a.table[col].to_numpy(dtype=object)[hit])
        text[hit] = np.where(text[hit] == "", part, text[hit] + "; " + part)
    keep = text != ""
    if not keep.any():
        return pd.DataFrame(columns=["wall_id", "row", "assumed"])
    return pd.DataFrame(
        {
            "wall_id": a.table["wall_id"].to_numpy(dtype=object)[keep],
            "row": a.table["row"].to_numpy()[keep],
            "assumed": text[keep],
        }
    )


def _short(value: Any) -> str:
    if isinstance(value, (float, np.floating)):
        return f"{float(value):.4g}"
    return str(value)


def _kind(name: str, column: pd.Series) -> str:
    if name == "wall_id":
        return "text"
    if pd.api.types.is_bool_dtype(column):
        return "bool"
    if pd.api.types.is_numeric_dtype(column):
        return "num3"
    return "word"


def _flatten(settings: dict[str, Any], prefix: str = "") -> list[tuple[str, Any]]:
    rows: list[tuple[str, Any]] = []
    for key, value in settings.items():
        name = f"{prefix}{key}"
        if isinstance(value, dict) and set(value) == {"value", "source"}:
            rows.append((name, f"{value['value']:g}  ({value['source']})"))
        elif isinstance(value, dict):
            rows.extend(_flatten(value, name + "."))
        elif isinstance(value, (np.floating, float, int)) and not isinstance(value, bool):
            rows.append((name, float(value)))
        else:
            rows.append((name, json.dumps(value) if not isinstance(value, str) else value))
    return rows
