"""From a register in canonical columns to engine inputs: cast, validate, fill defaults.

Everything here works on whole columns. Each problem names the row as the user
sees it, the column as the user wrote it, the value, and what was expected.
Errors reject the row; warnings keep it. Every blank filled by a default is
recorded per wall with its source (method.md §7).
"""

from __future__ import annotations

import re
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from screening import schema
from screening.assumed import Assumptions, Recorder
from screening.config import DIMENSION_SOURCES, Config
from screening.core.engine import ENGINE_INPUTS

PROBLEM_COLUMNS = ("row", "wall_id", "column", "value", "severity", "message")


@dataclass(frozen=True)
class Prepared:
    """A register made ready for the engine.

    Attributes
    ----------
    walls : pandas.DataFrame
        Accepted rows, typed, blanks filled; ``row`` is the row the user sees.
    inputs : dict of str to numpy.ndarray
        The engine's input columns for ``walls``.
    problems : pandas.DataFrame
        Errors and warnings, one per row and column.
    assumptions : Assumptions
        Every default used, per wall (:mod:`screening.assumed`).
    n_read : int
        Rows read from the register.
    earlier_surveys : pandas.DataFrame
        Accepted rows of walls surveyed more than once, other than the latest
        survey (kept for the lean history; the latest survey is screened).
    """

    walls: pd.DataFrame
    inputs: dict[str, np.ndarray]
    problems: pd.DataFrame
    assumptions: Assumptions
    n_read: int
    earlier_surveys: pd.DataFrame

    @property
    def rejected_rows(self) -> pd.DataFrame:
        """Error problems (the reasons rows were rejected)."""
        return self.problems[self.problems["severity"] == "error"]


class _Log:
    """Collects problems and assumptions as whole-column pieces."""

    def __init__(self, frame: pd.DataFrame, labels: Mapping[str, str], shown: pd.DataFrame | None):
        self.frame = frame
        self.labels = labels
        self.shown = shown if shown is not None else frame.copy()
        self.flagged: dict[str, pd.Series] = {}
        self.problems: list[pd.DataFrame] = []
        self.assumptions = Recorder(len(frame))

    def problem(
        self,
        mask: pd.Series,
        column: str,
        message: str | pd.Series,
        *,
        severity: str = "error",
        values: pd.Series | None = None,
    ) -> None:
        """Log the cells of ``column`` where ``mask`` holds; ``message`` may differ per row."""
        mask = mask.fillna(False).astype(bool)
        if severity == "warning" and column in self.flagged:
            mask &= ~self.flagged[column]  # a cell already in error needs no warning too
        if not mask.any():
            return
        hit = self.frame.loc[mask]
        self.flagged[column] = self.flagged.get(column, False) | mask
        source = self.shown.get(column) if column in self.shown else values
        if source is None:
            source = self.frame.get(column)
        shown = (
            source.loc[mask].astype(object).where(source.loc[mask].notna(), "")
            if source is not None
            else pd.Series("", index=hit.index)
        )
        self.problems.append(
            pd.DataFrame(
                {
                    "row": hit["row"].to_numpy(),
                    "wall_id": hit["wall_id"].astype(object).to_numpy(),
                    "column": self.labels.get(column, column),
                    "value": shown.map(_show).to_numpy(),
                    "severity": severity,
                    "message": message.reindex(hit.index).to_numpy()
                    if isinstance(message, pd.Series)
                    else message,
                }
            )
        )

    def assume(
        self, mask: pd.Series, column: str, value: pd.Series | float | str, source: pd.Series | str
    ) -> None:
        mask = mask.fillna(False).astype(bool)
        if mask.any():
            self.assumptions.add(column, mask.to_numpy(), value, source)


def _show(value: object) -> str:
    if isinstance(value, float) and value.is_integer():
        return str(int(value))
    return str(value)


def _blank(series: pd.Series) -> pd.Series:
    """True where a cell is empty (NaN, None or only white space)."""
    missing = series.isna()
    if pd.api.types.is_numeric_dtype(series) or pd.api.types.is_bool_dtype(series):
        return missing
    return missing | _per_distinct(series.where(~missing), _white).fillna(False).astype(bool)


def _white(series: pd.Series) -> pd.Series:
    """True where the text is only white space (missing cells are not asked)."""
    text = np.where(series.isna().to_numpy(), "x", series.to_numpy(dtype=object)).astype(str)
    return pd.Series(np.char.str_len(np.char.strip(text)) == 0, index=series.index)


def _clean_text(series: pd.Series) -> pd.Series:
    """Values as stripped text (numbers written as read), blanks kept as missing."""
    series = _whole_numbers_as_shown(series)
    missing = series.isna()
    text = pd.Series(
        np.char.strip(np.where(missing.to_numpy(), "", series.to_numpy(dtype=object)).astype(str)),
        index=series.index,
        dtype=object,
    )
    return text.where(~missing)


def _per_distinct(series: pd.Series, fn: Any) -> pd.Series:
    """``fn`` (whole column to whole column, missing kept missing) worked out once per distinct
    value where every value is text (a register holds few distinct materials or classes);
    mixed columns (17 and 17.0 and True hash alike) go through ``fn`` cell by cell."""
    kind = pd.api.types.infer_dtype(series, skipna=True)
    if kind != "string" or len(series) < 64:
        return fn(series)
    values = series.to_numpy(dtype=object)
    if len(set(values[:1000].tolist())) > 500:  # mostly distinct (ids, names): no gain
        return fn(series)
    codes, uniques = pd.factorize(values)
    if len(uniques) > len(series) // 2:
        return fn(series)
    done = fn(pd.Series(uniques, dtype=object)).to_numpy(dtype=object)
    values = np.where(codes >= 0, done[np.maximum(codes, 0)], np.nan)
    return pd.Series(values, index=series.index, dtype=object)


def _whole_numbers_as_shown(series: pd.Series) -> pd.Series:
    """A spreadsheet's number 17 is read as 17.0: as text it is "17", as the user sees it."""
    if pd.api.types.infer_dtype(series, skipna=True) in ("string", "empty"):
        return series
    values = series.to_numpy(dtype=object)
    floats = np.fromiter((isinstance(v, float) for v in values), dtype=bool, count=len(values))
    if not floats.any():
        return series
    out = values.copy()
    for i in np.flatnonzero(floats):
        v = values[i]
        if np.isfinite(v) and v.is_integer() and abs(v) < 1e15:
            out[i] = str(int(v))
    return pd.Series(out, index=series.index, dtype=object)


def cast(frame: pd.DataFrame, config: Config, log: _Log) -> pd.DataFrame:
    """Cast every canonical column to its fixed type, logging cells that do not fit."""
    out = pd.DataFrame(index=frame.index)
    out["row"] = frame["row"]
    for col in schema.COLUMNS:
        raw = frame[col] if col in frame else pd.Series(np.nan, index=frame.index)
        blank = _blank(raw)
        if col in schema.NUMERIC:
            numeric = pd.to_numeric(raw.where(~blank), errors="coerce").astype(float)
            log.problem(~blank & numeric.isna(), col, "expected a number", values=raw)
            out[col] = _refuse_non_finite(numeric, col, log)
        elif col in schema.CODED:
            allowed = schema.CODED[col] or tuple(config.consequence_weight)
            text = raw.where(~blank).astype(object)
            code = _per_distinct(
                text, lambda t: _clean_text(t).str.lower().str.replace(" ", "_", regex=False)
            )
            bad = code.notna() & ~code.isin(allowed)
            log.problem(bad, col, f"expected one of {', '.join(allowed)}", values=raw)
            out[col] = code.where(~bad).astype(object)
        elif col in schema.DATES:
            dates = pd.to_datetime(raw.where(~blank), errors="coerce", format="mixed")
            log.problem(~blank & dates.isna(), col, "expected a date (YYYY-MM-DD)", values=raw)
            out[col] = dates
        else:
            out[col] = _per_distinct(raw.where(~blank).astype(object), _clean_text)
    return out


def _refuse_non_finite(numeric: pd.Series, col: str, log: _Log) -> pd.Series:
    """inf, Infinity, 1e309: a row error naming the cell (a wall of infinite height is no wall)."""
    infinite = pd.Series(np.isinf(numeric.to_numpy()), index=numeric.index)
    log.problem(infinite, col, "expected a finite number (infinity is not a measurement)")
    return numeric.mask(infinite)


ERROR_CELL = (
    r"#(?:DIV/0!|N/A|NAME\?|NULL!|NUM!|REF!|VALUE!|SPILL!|CALC!|FIELD!|BLOCKED!|UNKNOWN!|GETTING_DATA)"
)
"""The error values a spreadsheet shows for a formula it could not calculate."""
CONTROL = r"[\x00-\x08\x0b\x0c\x0e-\x1f\x7f]"
"""Control characters other than tab and line breaks: a NUL byte, an escape sequence."""


def refuse_error_cells(frame: pd.DataFrame, log: _Log) -> pd.DataFrame:
    """Spreadsheet error cells (#DIV/0!, #N/A, ...) are row errors, never blanks a default fills."""
    return _refuse_text(
        frame,
        log,
        lambda text: text.str.strip().str.fullmatch(ERROR_CELL),
        "a spreadsheet error cell: the formula could not be calculated; fix it in the register",
        lambda joined: "#" in joined,
    )


def refuse_nul(frame: pd.DataFrame, log: _Log) -> pd.DataFrame:
    """A NUL byte (or another control character but tab) in a cell is a row error wherever it is."""
    return _refuse_text(
        frame,
        log,
        lambda text: text.str.contains(CONTROL, regex=True),
        "a control character (e.g. a NUL byte or an escape) in the cell: expected plain text",
        lambda joined: re.search(CONTROL, joined) is not None,
    )


def _refuse_text(frame: pd.DataFrame, log: _Log, test: Any, message: str, maybe: Any) -> pd.DataFrame:
    """Log the text cells of the canonical columns where ``test`` holds; blank them so that they
    are not reported twice (the row is rejected all the same). ``maybe`` of a column's text cells
    joined by line breaks is False where no cell can hold a hit (one search of the whole column)."""
    out = frame
    for col in schema.COLUMNS:
        if col not in frame or frame[col].dtype.kind in "fiubcmM":
            continue
        kind = pd.api.types.infer_dtype(frame[col], skipna=True)
        if kind in ("floating", "integer", "empty", "boolean", "decimal"):
            continue
        text = frame[col].astype(object)
        if kind not in ("string", "mixed", "mixed-integer"):
            text = text.where(pd.Series([isinstance(v, str) for v in text.to_numpy()], index=text.index))
            text = text.astype(object).where(text.notna(), "")
        if not maybe("\n".join(v for v in text.to_numpy() if isinstance(v, str))):
            continue
        hit = _per_distinct(text, test).fillna(False).astype(bool)
        if hit.any():
            log.problem(hit, col, message)
            out = out.copy() if out is frame else out
            out[col] = out[col].mask(hit)
    return out


def _range(
    log: _Log,
    w: pd.DataFrame,
    col: str,
    lo: float | None,
    hi: float | None,
    expected: str,
    *,
    lo_open: bool = False,
    severity: str = "error",
) -> None:
    v = w[col]
    bad = pd.Series(False, index=w.index)
    if lo is not None:
        bad |= (v <= lo) if lo_open else (v < lo)
    if hi is not None:
        bad |= v > hi
    log.problem(bad & v.notna(), col, expected, severity=severity)


def _m(values: pd.Series) -> pd.Series:
    """Lengths as the messages show them: metres to the centimetre, trailing zeros dropped;
    a length under 5 mm keeps three significant figures so that it never reads as 0 m."""
    v = values.to_numpy(dtype=float)
    filled = np.where(np.isnan(v), 0.0, v)
    text = np.char.rstrip(np.char.rstrip(np.char.mod("%.2f", filled), "0"), ".")
    small = (filled != 0) & (np.abs(filled) < 0.005)
    text = np.where(small, np.char.mod("%.3g", filled), text)
    return pd.Series(np.where(np.isnan(v), "blank", text), index=values.index, dtype=object)


def _words(*parts: str | pd.Series) -> pd.Series:
    """A message per row, joined from fixed words and per-row values."""
    series = [p for p in parts if isinstance(p, pd.Series)]
    out = pd.Series("", index=series[0].index, dtype=object)
    for part in parts:
        out = out + (part.astype(str) if isinstance(part, pd.Series) else part)
    return out


def _check_duplicates(w: pd.DataFrame, log: _Log) -> None:
    """A wall id twice in one survey: the message names the row where it first stands."""
    key = ["wall_id", "survey_date"]
    dup = w["wall_id"].notna() & w.duplicated(key, keep="first")
    if not dup.any():
        return
    first_row = w.groupby(key, dropna=False, sort=False)["row"].transform("first")
    message = "wall_id must be unique within one survey date: also on row " + first_row.astype(str)
    log.problem(dup, "wall_id", message)


def validate(w: pd.DataFrame, config: Config, log: _Log) -> None:
    """Required values, ranges and physical consistency, whole columns at a time."""
    for col in schema.REQUIRED:
        already = log.flagged.get(col, pd.Series(False, index=w.index))
        log.problem(w[col].isna() & ~already, col, "a value is required")
    _check_duplicates(w, log)

    height = w["height_m"]
    log.problem(
        height.notna() & (height <= 0),
        "height_m",
        "expected a height above 0 m",
    )
    log.problem(
        (height > 0) & (height < 0.3),
        "height_m",
        "expected a height of at least 0.3 m (metres entered where millimetres are expected?)",
    )
    _range(
        log,
        w,
        "height_m",
        None,
        25,
        "a wall over 25 m high: millimetres entered as metres?",
        severity="warning",
    )
    _range(log, w, "base_width_m", 0, None, "expected a base width above 0 m", lo_open=True)
    _range(log, w, "top_width_m", 0, None, "expected a top width above 0 m", lo_open=True)
    _range(log, w, "front_batter_m", 0, None, "expected a front batter of 0 m or more")
    _range(log, w, "retained_height_m", 0, None, "expected a retained height of 0 m or more")
    _range(log, w, "lean_deg", -30, 30, "expected a lean between -30° and 30°")
    _range(
        log,
        w,
        "lean_deg",
        -5,
        5,
        "a lean over 5° is implausible for a standing wall: check the survey",
        severity="warning",
    )
    for col in (
        "wall_unit_weight_kn_m3",
        "soil_unit_weight_kn_m3",
        "soil_saturated_unit_weight_kn_m3",
        "foundation_unit_weight_kn_m3",
    ):
        _range(log, w, col, 10, 30, "expected a unit weight between 10 and 30 kN/m³")
    _range(log, w, "soil_friction_deg", 0, 50, "expected an angle above 0° and up to 50°", lo_open=True)
    _range(log, w, "wall_friction_deg", 0, 45, "expected an angle between 0° and 45°")
    _range(log, w, "backfill_slope_deg", -45, 45, "expected a slope between -45° and 45°")
    _range(log, w, "surcharge_kpa", 0, 500, "expected a surcharge between 0 and 500 kPa")
    for col in ("base_friction_deg", "joint_friction_deg", "foundation_friction_deg"):
        _range(log, w, col, 0, 50, "expected an angle above 0° and up to 50°", lo_open=True)
    _range(
        log,
        w,
        "allowable_bearing_kpa",
        0,
        None,
        "expected an allowable bearing pressure above 0 kPa",
        lo_open=True,
    )
    _range(log, w, "foundation_cohesion_kpa", 0, 500, "expected an effective cohesion between 0 and 500 kPa")
    _range(log, w, "embedment_m", 0, None, "expected an embedment of 0 m or more")
    _range(log, w, "water_height_m", 0, None, "expected a water height of 0 m or more")
    _range(log, w, "condition_rating", 1, 5, "expected a condition rating from 1 to 5")
    log.problem(
        w["condition_rating"].notna() & (w["condition_rating"] % 1 != 0),
        "condition_rating",
        "expected a whole number from 1 to 5",
    )
    lat, lon = w["lat"], w["lon"]
    swapped = (lat.abs() > 90) & (lat.abs() <= 180) & (lon.abs() <= 90)
    log.problem(swapped, "lat", "latitude beyond ±90 but a valid longitude: lat and lon swapped?")
    log.problem(lat.abs().gt(90) & ~swapped, "lat", "expected a latitude between -90 and 90")
    _range(log, w, "lon", -180, 180, "expected a longitude between -180 and 180")


def fill_defaults(w: pd.DataFrame, config: Config, log: _Log) -> pd.DataFrame:
    """Fill blanks from method.md §7 and record each default used, one group at a time."""
    w = w.copy()
    _mark_recorded(w)
    for step in (_fill_wall, _fill_soil, _fill_foundation, _fill_foundation_soil, _fill_owner, _fill_water):
        step(w, config, log)
    return w


RECORDED_FLAGS = {
    "soil_friction_recorded": "soil_friction_deg",
    "soil_unit_weight_recorded": "soil_unit_weight_kn_m3",
    "wall_unit_weight_recorded": "wall_unit_weight_kn_m3",
    "base_friction_recorded": "base_friction_deg",
    "joint_friction_recorded": "joint_friction_deg",
    "bearing_recorded": "allowable_bearing_kpa",
}
"""Flags (1/0) that an input's own cell was recorded, set before the blanks are filled: the
uncertainty of method.md §13 takes the SD of a recorded or of a default value."""


def _mark_recorded(w: pd.DataFrame) -> None:
    """Which inputs were recorded, dimensions_source (blank reads recorded) and the water (§13)."""
    for flag, col in RECORDED_FLAGS.items():
        w[flag] = w[col].notna().astype(float)
    w["bearing_recorded"] = (
        w["allowable_bearing_kpa"].notna() | w["foundation_friction_deg"].notna()
    ).astype(float)
    w["water_measured"] = w["water_height_m"].notna().astype(float)
    source = w["dimensions_source"].fillna("recorded")
    w["dimensions_code"] = source.map({k: i for i, k in enumerate(DIMENSION_SOURCES)}).astype(float)


def _fill_simple(w: pd.DataFrame, config: Config, log: _Log, col: str, used: pd.Series | None = None) -> None:
    """A blank takes the config's default; recorded where the value is used (every wall by default)."""
    d = getattr(config, col)
    blank = w[col].isna()
    log.assume(blank if used is None else blank & used, col, d.value, d.source)
    w[col] = w[col].fillna(d.value)


def _fill_wall(w: pd.DataFrame, config: Config, log: _Log) -> None:
    """Material, unit weight, and whether the bed joints are checked (method.md §7, §8)."""
    material_blank = w["material"].isna() & w["wall_unit_weight_kn_m3"].isna()
    log.assume(material_blank, "material", config.material_default, "config material_default: not recorded")
    material = w["material"].fillna(config.material_default)
    weights = {k: d.value for k, d in config.wall_unit_weight_kn_m3.items()}
    sources = {k: d.source for k, d in config.wall_unit_weight_kn_m3.items()}
    blank = w["wall_unit_weight_kn_m3"].isna()
    log.assume(blank, "wall_unit_weight_kn_m3", material.map(weights), material.map(sources))
    w["wall_unit_weight_kn_m3"] = w["wall_unit_weight_kn_m3"].fillna(material.map(weights).astype(float))
    # the material in use decides the bed-joint check, also where only the unit weight is recorded
    checked = material.isin(config.joint_check_materials) & (config.joint_planes >= 2)
    log.assume(
        w["material"].isna() & ~material_blank & checked,
        "material",
        config.material_default,
        "config material_default: not recorded; decides whether the bed joints are checked",
    )
    w["joint_check"] = checked.astype(float)
    blank = w["retained_height_m"].isna()
    log.assume(
        blank,
        "retained_height_m",
        w["height_m"],
        "not recorded: retained to the full height of the wall",
    )
    w["retained_height_m"] = w["retained_height_m"].fillna(w["height_m"])
    for col in ("front_batter_m", "lean_deg", "joint_friction_deg"):
        _fill_simple(w, config, log, col)


def _fill_soil(w: pd.DataFrame, config: Config, log: _Log) -> None:
    """The retained soil and what stands on it (method.md §7)."""
    for col in (
        "soil_unit_weight_kn_m3",
        "soil_saturated_unit_weight_kn_m3",
        "soil_friction_deg",
        "wall_friction_deg",
        "backfill_slope_deg",
        "surcharge_kpa",
    ):
        _fill_simple(w, config, log, col)


def _fill_foundation(w: pd.DataFrame, config: Config, log: _Log) -> None:
    """Presumed bearing pressure and base friction from the foundation class (method.md §7)."""
    needs_foundation = w["foundation"].isna() & (
        w["allowable_bearing_kpa"].isna() | w["base_friction_deg"].isna()
    )
    log.assume(
        needs_foundation, "foundation", config.foundation_default, "config foundation_default: not recorded"
    )
    foundation = w["foundation"].fillna(config.foundation_default)
    for col, table in (
        ("allowable_bearing_kpa", config.foundation_allowable_bearing_kpa),
        ("base_friction_deg", config.foundation_base_friction_deg),
    ):
        blank = w[col].isna()
        values = foundation.map(dict(table)).astype(float)
        log.assume(
            blank, col, values, _per_distinct(foundation, lambda f: config.foundation_source + ", " + f)
        )
        w[col] = w[col].fillna(values)


def _fill_foundation_soil(w: pd.DataFrame, config: Config, log: _Log) -> None:
    """c', γ_f and embedment of the soil under the base (method.md §10, §11).

    Every blank is filled, but recorded only for the walls that use the value: Annex D
    bearing (``foundation_friction_deg`` given) and, with ``passive_mobilisation`` on, passive
    resistance. ``foundation_friction_deg`` itself has no default: blank means presumed bearing.
    """
    annex_d = w["foundation_friction_deg"].notna()
    passive = pd.Series(config.passive_mobilisation > 0, index=w.index)
    _fill_simple(w, config, log, "foundation_cohesion_kpa", annex_d)
    _fill_simple(w, config, log, "foundation_unit_weight_kn_m3", annex_d | passive)
    _fill_simple(w, config, log, "embedment_m", annex_d | passive)


def _fill_owner(w: pd.DataFrame, config: Config, log: _Log) -> None:
    """What a failure would hit and the surveyed condition."""
    blank = w["consequence"].isna()
    log.assume(blank, "consequence", config.consequence_default, "config consequence_default: not recorded")
    w["consequence"] = w["consequence"].fillna(config.consequence_default)
    blank = w["condition_rating"].isna()
    log.assume(blank, "condition_rating", config.condition_default.value, config.condition_default.source)
    w["condition_rating"] = w["condition_rating"].fillna(config.condition_default.value)


def _fill_water(w: pd.DataFrame, config: Config, log: _Log) -> None:
    """The surveyed case: measured water if recorded, else the drainage state (method.md §4)."""
    no_water = w["water_height_m"].isna()
    drain_blank = w["drainage"].isna() & no_water
    log.assume(drain_blank, "drainage", "unknown", "not recorded: drainage unknown")
    drainage = w["drainage"].fillna("unknown")
    fraction = drainage.map(dict(config.drainage_water_fraction)).astype(float)
    surveyed = w["water_height_m"].fillna(fraction * w["retained_height_m"])
    source = {
        d: f"drainage '{d}': {f:g} × retained height (config drainage_water_fraction)"
        for d, f in config.drainage_water_fraction.items()
    }
    log.assume(no_water, "surveyed water_height_m", surveyed, drainage.map(source))
    w["surveyed_water_height_m"] = surveyed


def check_geometry(w: pd.DataFrame, log: _Log) -> None:
    """Physical consistency once blanks are filled (method.md §1, §2, §5). The messages are
    worded only for the rows they name."""
    back = w["base_width_m"] - w["front_batter_m"] - w["top_width_m"]
    bad = w[back < -1e-9]
    log.problem(
        back < -1e-9,
        "base_width_m",
        _words(
            "base ",
            _m(bad["base_width_m"]),
            " m narrower than top width ",
            _m(bad["top_width_m"]),
            " m plus front batter ",
            _m(bad["front_batter_m"]),
            " m: the back face would overhang the heel (b < 0)",
        ),
    )
    high = w["retained_height_m"] > w["height_m"] + 1e-9
    bad = w[high]
    log.problem(
        high,
        "retained_height_m",
        _words(
            "retained height ",
            _m(bad["retained_height_m"]),
            " m above the wall height ",
            _m(bad["height_m"]),
            " m",
        ),
    )
    wet = w["water_height_m"] > w["retained_height_m"] + 1e-9
    bad = w[wet]
    log.problem(
        wet,
        "water_height_m",
        _words(
            "water height ",
            _m(bad["water_height_m"]),
            " m above the retained height ",
            _m(bad["retained_height_m"]),
            " m",
        ),
    )
    crack = w["crack_height_m"]
    outside = crack.notna() & ((crack <= 0) | (crack >= w["height_m"]))
    log.problem(
        outside,
        "crack_height_m",
        _words(
            "expected a crack height above 0 and below the wall height ", _m(w.loc[outside, "height_m"]), " m"
        ),
    )
    log.problem(
        w["backfill_slope_deg"] >= w["soil_friction_deg"],
        "backfill_slope_deg",
        "backfill slope must be less than the soil friction angle (no active wedge otherwise)",
    )
    log.problem(
        w["soil_saturated_unit_weight_kn_m3"] <= 9.81,
        "soil_saturated_unit_weight_kn_m3",
        "saturated unit weight must exceed that of water (9.81 kN/m³)",
    )
    _check_plausible(w, log)


def _check_plausible(w: pd.DataFrame, log: _Log) -> None:
    """Figures that can be screened but are unlikely to be right: warnings, the row is kept."""
    log.problem(
        w["wall_friction_deg"] > w["soil_friction_deg"],
        "wall_friction_deg",
        "wall friction above the soil's friction angle (δ > φ'): not physical; check both values",
        severity="warning",
    )
    log.problem(
        w["soil_saturated_unit_weight_kn_m3"] < w["soil_unit_weight_kn_m3"],
        "soil_saturated_unit_weight_kn_m3",
        "saturated unit weight below the unit weight above the water (γ_sat < γ): check both values",
        severity="warning",
    )
    log.problem(
        w["embedment_m"] > w["height_m"],
        "embedment_m",
        "embedment deeper than the wall is high: check the value (metres expected)",
        severity="warning",
    )


def prepare(
    register: pd.DataFrame,
    config: Config | None = None,
    *,
    labels: Mapping[str, str] | None = None,
    shown: pd.DataFrame | None = None,
) -> Prepared:
    """Cast, validate and fill a register in canonical columns.

    Parameters
    ----------
    register : pandas.DataFrame
        One row per wall; canonical column names. A ``row`` column, if present,
        gives the row number the user sees; otherwise the position + 2 (a header
        row, counting from 1) is used.
    config : Config, optional
    labels : mapping, optional
        Canonical name → the user's own header, for messages.
    shown : pandas.DataFrame, optional
        The cells as the user wrote them (before unit conversion), for messages.
    """
    config = config or Config()
    frame = register.reset_index(drop=True).copy()
    if "row" not in frame:
        frame["row"] = np.arange(len(frame)) + 2
    if "wall_id" not in frame:
        frame["wall_id"] = pd.Series(np.nan, index=frame.index, dtype=object)
    if shown is not None:
        shown = shown.reset_index(drop=True)
    log = _Log(frame, labels or {}, shown)
    frame = refuse_nul(refuse_error_cells(frame, log), log)
    typed = cast(frame, config, log)
    log.frame = typed
    validate(typed, config, log)
    filled = fill_defaults(typed, config, log)
    log.frame = filled
    check_geometry(filled, log)

    problems = _concat(log.problems, PROBLEM_COLUMNS)
    problems = problems.sort_values(["row", "severity"], kind="stable").reset_index(drop=True)
    bad_rows = set(problems.loc[problems["severity"] == "error", "row"])
    accepted = filled[~filled["row"].isin(bad_rows)]
    latest = accepted.sort_values("survey_date", kind="stable", na_position="first")
    latest = latest.drop_duplicates("wall_id", keep="last").sort_values("row")
    earlier = accepted[~accepted["row"].isin(latest["row"])].reset_index(drop=True)
    accepted = latest.reset_index(drop=True)
    assumptions = log.assumptions.build(filled["wall_id"], filled["row"]).rows(accepted["row"])
    inputs = {c: accepted[c].to_numpy(dtype=float) for c in ENGINE_INPUTS}
    return Prepared(accepted, inputs, problems, assumptions, len(frame), earlier)


def _concat(pieces: list[pd.DataFrame], columns: tuple[str, ...]) -> pd.DataFrame:
    if not pieces:
        return pd.DataFrame({c: pd.Series(dtype=object) for c in columns})
    return pd.concat(pieces, ignore_index=True)[list(columns)]
