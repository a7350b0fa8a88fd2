"""Map an owner's headers, units and codes onto the canonical columns.

The mapping file is TOML in a layout of our own (example:
``sample_inventory/mapping.toml``)::

    [register]
    sheet = "Walls"            # sheet name or 0-based index (spreadsheets)
    crs = "EPSG:27700"         # CRS of easting/northing columns

    [columns]
    "Wall ref" = "wall_id"
    "Height (mm)" = { column = "height_m", unit = "mm" }
    "Lean at top" = { column = "lean_deg", unit = "mm_over_height" }

    [values.drainage]          # the owner's codes -> canonical values
    "B" = "blocked"

Headers equal to a canonical name (any case) need no entry.
"""

from __future__ import annotations

import difflib
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from screening import schema
from screening.config import read_toml
from screening.errors import RegisterError
from screening.io.readers import RawRegister

# factor to the canonical unit, by the kind of quantity
LENGTH = {"m": 1.0, "mm": 1e-3, "cm": 1e-2, "ft": 0.3048, "in": 0.0254}
UNIT_WEIGHT = {"kn_m3": 1.0, "kn/m3": 1.0, "pcf": 0.157087, "lb/ft3": 0.157087}
PRESSURE = {"kpa": 1.0, "psf": 0.0478803, "mpa": 1000.0}
ANGLE = {"deg": 1.0, "degrees": 1.0}

_KIND = {
    **{c: LENGTH for c in schema.NUMERIC if c.endswith("_m")},
    "easting": LENGTH,
    "northing": LENGTH,
    **{c: UNIT_WEIGHT for c in schema.NUMERIC if c.endswith("_kn_m3")},
    **{c: PRESSURE for c in schema.NUMERIC if c.endswith("_kpa")},
    **{c: ANGLE for c in schema.NUMERIC if c.endswith("_deg")},
}


@dataclass(frozen=True)
class ColumnMap:
    """One of the owner's columns and what it means."""

    header: str
    column: str
    unit: str | None = None


@dataclass(frozen=True)
class ColumnMapping:
    """A parsed mapping file."""

    columns: tuple[ColumnMap, ...] = ()
    values: Mapping[str, Mapping[str, str]] = field(default_factory=dict)
    sheet: str | int | None = None
    crs: str | None = None
    source: Path | None = None

    @property
    def headers(self) -> set[str]:
        return {c.header for c in self.columns}


def load_mapping(path: str | Path | None) -> ColumnMapping:
    """Read and check a mapping file (or return the empty mapping)."""
    if path is None:
        return ColumnMapping()
    path = Path(path)
    data = read_toml(path, "mapping file", RegisterError)
    check_mapping_keys(data, path)
    cols: list[ColumnMap] = []
    for header, spec in data.get("columns", {}).items():
        if isinstance(spec, str):
            spec = {"column": spec}
        column = spec.get("column")
        if column not in schema.COLUMNS:
            raise RegisterError(
                f"{path}: [columns] {header!r} maps to {column!r}, which is not a canonical column"
                + _suggest(str(column), schema.COLUMNS)
            )
        unit = spec.get("unit")
        if unit is not None:
            unit = str(unit).lower()
            allowed = _units_for(column)
            if unit not in allowed:
                raise RegisterError(
                    f"{path}: [columns] {header!r}: unit {unit!r} is not known for {column}; "
                    f"expected one of {', '.join(allowed) or '(no units)'}"
                )
        cols.append(ColumnMap(header, column, unit))
    values: dict[str, dict[str, str]] = {}
    for column, table in data.get("values", {}).items():
        if column not in schema.CODED:
            raise RegisterError(
                f"{path}: [values.{column}]: only coded columns take value maps ({', '.join(schema.CODED)})"
            )
        values[column] = {str(k).strip().lower(): str(v) for k, v in table.items()}
    reg = data.get("register", {})
    return ColumnMapping(tuple(cols), values, reg.get("sheet"), reg.get("crs"), path)


SECTIONS: dict[str, tuple[str, ...]] = {"register": ("sheet", "crs"), "columns": (), "values": ()}
"""The mapping file's sections and, where fixed, their keys (empty: the owner's own keys)."""
ENTRY_KEYS = ("column", "unit")


def check_mapping_keys(data: Mapping[str, object], path: Path) -> None:
    """Refuse unknown sections and keys, with a suggestion: a misspelt ``unit`` would be ignored."""
    for section, table in data.items():
        if section not in SECTIONS:
            raise RegisterError(
                f"{path}: unknown section [{section}]{_suggest(section, list(SECTIONS))}; "
                f"the sections are {', '.join(f'[{k}]' for k in SECTIONS)}"
            )
        if not isinstance(table, Mapping):
            raise RegisterError(f"{path}: [{section}] must be a table, got {table!r}")
        keys = SECTIONS[section]
        for key in table if keys else ():
            if key not in keys:
                raise RegisterError(
                    f"{path}: [{section}] unknown key {key!r}{_suggest(key, keys)}; "
                    f"known keys are {', '.join(keys)}"
                )
    for header, spec in dict(data.get("columns", {})).items():  # type: ignore[call-overload]
        if isinstance(spec, str):
            continue
        if not isinstance(spec, Mapping):
            raise RegisterError(
                f"{path}: [columns] {header!r} = {spec!r}: expected a column name or "
                '{ column = "...", unit = "..." }'
            )
        for key in spec:
            if key not in ENTRY_KEYS:
                raise RegisterError(
                    f"{path}: [columns] {header!r}: unknown key {key!r}{_suggest(key, ENTRY_KEYS)}; "
                    f"an entry takes {', '.join(ENTRY_KEYS)}"
                )
    for column, table in dict(data.get("values", {})).items():  # type: ignore[call-overload]
        if not isinstance(table, Mapping):
            raise RegisterError(f"{path}: [values.{column}] must be a table of code = value")


def _units_for(column: str) -> tuple[str, ...]:
    units = tuple(_KIND.get(column, {}))
    if column == "lean_deg":
        units += ("mm_over_height", "ratio")
    if column in ("backfill_slope_deg",):
        units += ("percent",)
    return units


def _suggest(name: str, options: tuple[str, ...] | list[str]) -> str:
    close = difflib.get_close_matches(name.lower(), [o.lower() for o in options], n=1, cutoff=0.6)
    # a shapefile cuts field names to 10 characters: a cut name is a prefix of the full one
    low = name.lower()
    cut = [
        o.lower()
        for o in options
        if (len(low) == 10 and len(o) > 10 and o.lower().startswith(low))
        or (len(o) == 10 and len(low) > 10 and low.startswith(o.lower()))
    ]
    close = cut[:1] if len(cut) == 1 else close
    if not close:
        return ""
    original = next(o for o in options if o.lower() == close[0])
    return f" (did you mean {original!r}?)"


def to_canonical(
    raw: RawRegister, mapping: ColumnMapping
) -> tuple[pd.DataFrame, dict[str, str], pd.DataFrame]:
    """Rename, convert units and decode values.

    Returns the canonical frame, the user's header for each canonical column, and
    the cells as the user wrote them (canonical names), for messages.

    Raises
    ------
    RegisterError
        When a required column is missing (with the headers found and suggestions).
    """
    frame = raw.frame
    by_header = {c.header.strip().lower(): c for c in mapping.columns}
    out = pd.DataFrame({"row": frame["row"].to_numpy()})
    labels: dict[str, str] = {}
    units: dict[str, str | None] = {}
    unmapped: list[str] = []
    for header in frame.columns:
        if header == "row":
            continue
        key = str(header).strip().lower()
        spec = by_header.get(key)
        column = spec.column if spec else (key if key in schema.COLUMNS else None)
        if column is None:
            unmapped.append(str(header))
            continue
        if column in out:
            raise RegisterError(f"{raw.source}: columns {labels[column]!r} and {header!r} both give {column}")
        out[column] = frame[header].to_numpy()
        labels[column] = str(header)
        units[column] = spec.unit if spec else None

    missing = [c for c in schema.REQUIRED if c not in out]
    if missing:
        found = [str(h) for h in frame.columns if h != "row"]
        hints = "".join(f"\n  {m}: not found" + _suggest(m, found) for m in missing)
        raise RegisterError(
            f"{raw.source}: required column(s) missing: {', '.join(missing)}{hints}\n"
            f"  headers found: {', '.join(found)}\n"
            f"  give a mapping file (--mapping) that names the column for each"
        )
    shown = out.copy()
    if unmapped:
        raw.notes.append("columns not used: " + ", ".join(unmapped))
        free = [c for c in schema.COLUMNS if c not in out]
        for header in unmapped:
            hint = _suggest(header, free)
            if hint:
                raw.header_warnings.append(
                    (header, f"column not used: not a canonical name nor in the mapping file{hint}")
                )

    for column, table in mapping.values.items():
        if column in out:
            keys = out[column].astype(object).map(lambda v: str(v).strip().lower(), na_action="ignore")
            out[column] = keys.map(table).where(keys.isin(list(table)), out[column])

    # lengths and the like first, so a lean in mm over the height sees the height in metres
    ordered = sorted(units.items(), key=lambda item: item[1] in ("mm_over_height",))
    for column, unit in ordered:
        if unit is None or column not in out:
            continue
        values = _numeric_or_raw(out[column])
        if unit == "mm_over_height":
            height = pd.to_numeric(out.get("height_m"), errors="coerce").astype(float)
            converted = np.degrees(np.arctan2(values / 1000.0, height))
        elif unit == "ratio":
            converted = np.degrees(np.arctan(values))
        elif unit == "percent":
            converted = np.degrees(np.arctan(values / 100.0))
        else:
            converted = values * _KIND[column][unit]
        # keep what could not be read as a number, so the validator names it
        is_num = pd.to_numeric(out[column], errors="coerce").notna()
        out[column] = np.where(is_num, converted, out[column].astype(object))
    return out, labels, shown


def _numeric_or_raw(series: pd.Series) -> pd.Series:
    return pd.to_numeric(series, errors="coerce").astype(float)
