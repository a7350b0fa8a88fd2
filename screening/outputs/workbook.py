"""The workbook an owner opens: ranked summary, walls to look at first, results per case,
rejected rows, assumed defaults, settings and the method with its cautions.

Written with xlsxwriter directly, row by row in constant-memory mode. Text that
came from the register is always written as a string cell, so a value such as
``=HYPERLINK(...)`` can never run as a formula.
"""

from __future__ import annotations

import json
from collections.abc import Sequence
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import xlsxwriter
from xlsxwriter.worksheet import Worksheet

from screening.io.writers import write_atomic
from screening.priority import BAND_LABELS, near_toe, near_toe_words

CAUTION = (
    "Screening aid only. These results come from a simplified check of existing walls from "
    "register data; a flag means 'look at this wall first', not 'this wall has failed'. Results "
    "must be reviewed by a qualified engineer; local codes and the asset owner's standards govern."
)

BAND_COLOURS = {
    # a colour-blind-safe sequence of our own (dark to light), shared with the map
    "inspect_first": "#7B3294",
    "inspect_soon": "#C2A5CF",
    "routine": "#A6DBA0",
    "low_concern": "#008837",
    "check_data": "#4D4D4D",  # figures that cannot be right (method.md §13): outside the sequence
}
LIGHT_TEXT_BANDS = ("inspect_first", "low_concern", "check_data")

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
}


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
        "Not included",
        "Global (deep-seated) stability, the structural capacity of the masonry, passive "
        "resistance in front of the toe, seismic loads, and the condition of the fill itself.",
    ),
]


EXCEL_MAX_ROWS = 1_048_576
"""Rows in one worksheet (Excel's limit)."""


class _Formats:
    def __init__(self, book: xlsxwriter.Workbook):
        self.header = book.add_format(
            {"bold": True, "text_wrap": True, "valign": "top", "bg_color": "#E8E8E8", "border": 1}
        )
        # right-aligned so that "∞" lines up with the numbers
        self.num2 = book.add_format({"num_format": "0.00", "align": "right"})
        self.num3 = book.add_format({"num_format": "0.000", "align": "right"})
        self.int = book.add_format({"num_format": "0", "align": "right"})
        self.right = book.add_format({"align": "right"})
        self.wrap = book.add_format({"text_wrap": True, "valign": "top"})
        self.title = book.add_format({"bold": True, "font_size": 14})
        self.bold = book.add_format({"bold": True})
        self.caution = book.add_format(
            {"italic": True, "text_wrap": True, "font_color": "#7A1F1F", "valign": "top"}
        )
        self.link = book.add_format({"font_color": "#1F4E99", "underline": 1})
        self.over = book.add_format({"bg_color": "#F4CCCC", "font_color": "#7A1F1F"})
        self.near = book.add_format({"bg_color": "#FFF2CC"})
        self.band = {
            band: book.add_format(
                {
                    "bg_color": colour,
                    "font_color": "#FFFFFF" if band in LIGHT_TEXT_BANDS else "#000000",
                }
            )
            for band, colour in BAND_COLOURS.items()
        }


def _column_values(values: pd.Series, kind: str) -> list[Any]:
    """A column as the Python values ``write_row`` takes, converted column-wise:
    None for blanks, "∞" for infinity, labels for our coded words."""
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
        text = text.replace(BAND_LABELS).str.replace("_", " ", regex=False)
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
    formats = {"num2": f.num2, "num3": f.num3, "int": f.int, "num3_or_words": f.num3}
    for c, (name, header, kind) in enumerate(cols):
        sheet.write_string(start_row, c, header, f.header)
        width = (widths or {}).get(name, max(10, min(len(header) + 2, 22)))
        sheet.set_column(c, c, width, formats.get(kind))
    links = [c for c, (_, _, kind) in enumerate(cols) if kind == "link"]
    data = [
        [None] * len(frame) if kind == "link" else _column_values(frame[name], kind) for name, _, kind in cols
    ]
    link_values = {c: frame[cols[c][0]].to_numpy(dtype=object) for c in links}
    for i, row in enumerate(zip(*data, strict=True)):
        r = start_row + 1 + i
        sheet.write_row(r, 0, row)
        for c in links:
            target = link_values[c][i]
            if isinstance(target, str) and target:
                sheet.write_url(r, c, f"external:{target}", f.link, string="open sheet")
    last = start_row + len(frame)
    sheet.set_landscape()
    sheet.fit_to_pages(1, 0)
    sheet.repeat_rows(start_row)
    sheet.freeze_panes(start_row + 1, 2 if len(cols) > 2 else 0)
    sheet.autofilter(start_row, 0, max(last, start_row), len(cols) - 1)
    return last


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
            # an infinite utilisation is written as the text "∞"
            sheet.conditional_format(
                *rng, {"type": "text", "criteria": "containing", "value": "∞", "format": f.over}
            )
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
    assumptions: pd.DataFrame,
    settings: dict[str, Any],
    provenance: list[tuple[str, Any]],
    method_text: list[tuple[str, str]] = METHOD_TEXT,
    changes: pd.DataFrame | None = None,
    full_results_limit: int = 1_000,
    look_first: int = 100,
    near_toe_m: float = 0.0,
) -> Path:
    """Write ``report.xlsx`` atomically. See the module docstring for the sheets.

    In constant-memory mode each sheet is written top to bottom and the sheets in the order
    they appear; the settings sheet comes after the tables so that it lists every table
    cut at the row limit.
    """

    def build(tmp: Path) -> None:
        out = _Book(tmp)
        _ranked_sheet(out, walls)
        _look_first_sheet(out, walls, look_first, changes)
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

    def __init__(self, path: Path):
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
    for k, r in enumerate(carried.head(shown).itertuples(index=False), start=row + 1):
        sheet.write_string(k, 1, str(r.wall_id))
        sheet.write_string(k, 2, str(r.carried))
    last = row + min(len(carried), shown)
    if len(carried) > shown:
        last += 1
        sheet.write_string(last, 2, f"… {len(carried) - shown} more on 'Changes since last run'")
    return last + 2


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


def _assumed_sheets(out: _Book, assumptions: pd.DataFrame) -> None:
    """The same default is usually used for many walls: one row per default on 'Assumed
    defaults', one row per wall on 'Assumed per wall' (every single one is in assumptions.csv)."""
    sheet = out.sheet("Assumed defaults")
    out.table(sheet, _assumption_summary(assumptions), ASSUMPTION_COLUMNS, widths={"source": 90, "value": 14})
    sheet = out.sheet("Assumed per wall")
    out.table(sheet, _assumptions_per_wall(assumptions), PER_WALL_COLUMNS, widths={"assumed": 140})


def _settings_sheet(out: _Book, provenance: list[tuple[str, Any]], settings: dict[str, Any]) -> None:
    """Where the run came from, the notes of the sheets cut short, then every setting."""
    sheet = out.sheet("Settings")
    sheet.set_column(0, 0, 34)
    sheet.set_column(1, 1, 100)
    r = _key_value(sheet, [*provenance, *(("note", t) for t in out.notes)], out.f)
    _key_value(sheet, _flatten(settings), out.f, start=r + 1)


def _method_sheet(out: _Book, method_text: list[tuple[str, str]]) -> None:
    sheet = out.sheet("Method and cautions")
    sheet.set_column(0, 0, 28)
    sheet.set_column(1, 1, 110)
    sheet.write_string(0, 0, "Caution", out.f.title)
    sheet.write_string(1, 0, CAUTION, out.f.caution)
    for r, (head, text) in enumerate(method_text, start=3):
        sheet.write_string(r, 0, head, out.f.bold)
        sheet.write_string(r, 1, text, out.f.wrap)


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
