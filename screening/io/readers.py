"""Read a wall register from a spreadsheet, CSV or GIS file, read-only.

What comes back is a :class:`RawRegister`: the cells as read (not yet typed),
the row number the user sees for each, and the user's own header for each
canonical column, so that every message can point at the user's file.
"""

from __future__ import annotations

import csv
import datetime as dt
import io
import re
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from screening import schema
from screening.errors import RegisterError
from screening.io.xlsxcheck import SheetLimits, check_sheet_size, error_cells

SPREADSHEETS = (".xlsx", ".xlsm", ".xls", ".ods")
GIS = (".gpkg", ".geojson", ".json", ".shp")
SUFFIXES = (".csv", ".txt", *SPREADSHEETS, *GIS)


@dataclass
class RawRegister:
    """Cells as read, before casting.

    Attributes
    ----------
    frame : pandas.DataFrame
        The user's columns, plus ``row`` (the row number the user sees).
    source : pathlib.Path
    sheet : str or None
        The sheet read, for spreadsheets.
    header_row : int
        The row (1-based) that held the headers.
    crs : str or None
        The layer's CRS, for GIS files.
    notes : list of str
        What the reader noticed (encoding, delimiter, ...), for the report.
    """

    frame: pd.DataFrame
    source: Path
    sheet: str | None = None
    header_row: int = 1
    crs: str | None = None
    notes: list[str] = field(default_factory=list)
    header_warnings: list[tuple[str, str]] = field(default_factory=list)
    """(header, message) for columns that look like a misspelt canonical name."""


def read_register(
    path: str | Path,
    *,
    sheet: str | int | None = None,
    known_headers: set[str] | None = None,
    limits: SheetLimits | None = None,
    crs: str | None = None,
) -> RawRegister:
    """Read a register file; the file is opened read-only and never written.

    Parameters
    ----------
    path : str or Path
        ``.csv``/``.txt``, ``.xlsx``/``.xlsm``/``.xls``/``.ods`` or
        ``.gpkg``/``.geojson``/``.shp``.
    sheet : str or int, optional
        Sheet name or 0-based index for spreadsheets (default: the first sheet).
    known_headers : set of str, optional
        Headers to look for when finding the header row (canonical names and
        the mapping file's headers).
    limits : SheetLimits, optional
        How large a spreadsheet's sheet may be (settings ``max_cells``, ``max_sheet_mb``).
    """
    path = Path(path)
    if not path.exists():
        raise RegisterError(f"{path}: no such file")
    if not path.is_file():
        raise RegisterError(f"{path}: not a file")
    suffix = path.suffix.lower()
    known = {h.strip().lower() for h in (known_headers or set())} | set(schema.COLUMNS)
    if suffix in (".csv", ".txt"):
        return _read_csv(path, known)
    if suffix in SPREADSHEETS:
        return _read_spreadsheet(path, sheet, known, limits or SheetLimits())
    if suffix in GIS:
        return _read_gis(path, crs, None if sheet is None else str(sheet))
    raise RegisterError(
        f"{path}: unsupported file type {suffix or '(none)'}; expected one of {', '.join(SUFFIXES)}"
    )


def read_result_csv(path: str | Path) -> pd.DataFrame:
    """A CSV the tool wrote (walls.csv, results.csv, problems.csv), ids as text.

    Text that the writer protected against formula injection (``'=...``) is read as it was.
    Only an empty cell is missing: a wall called ``NA``, ``None``, ``null``, ``N/A`` or ``nan`` keeps
    its id (pandas would read each as a missing value and the walls would collapse into one).
    """
    frame = pd.read_csv(path, dtype={"wall_id": str}, keep_default_na=False, na_values=[""])
    for col in frame.columns:  # the ' that screening.io.writers.csv_safe_text put before formulas
        if frame[col].dtype == object or pd.api.types.is_string_dtype(frame[col]):
            frame[col] = frame[col].str.replace(r"^'(?='*[=+\-@\t\r])", "", regex=True)
    return frame


def _find_header(grid: pd.DataFrame, known: set[str], path: Path) -> int:
    """Index of the row that looks most like the header (within the first 20 rows)."""
    best, best_hits = 0, -1
    for i in range(min(20, len(grid))):
        cells = {str(v).strip().lower() for v in grid.iloc[i].tolist() if _is_text(v)}
        hits = len(cells & known)
        if hits > best_hits:
            best, best_hits = i, hits
    if best_hits <= 0:
        raise RegisterError(
            f"{path}: no header row found in the first 20 rows: none of the headers is a "
            f"canonical column (e.g. wall_id, height_m) or named in the mapping file"
        )
    return best


def _is_text(v: object) -> bool:
    return isinstance(v, str) and bool(v.strip())


def _frame_from_grid(grid: pd.DataFrame, header: int, path: Path) -> pd.DataFrame:
    names = [str(v).strip() if _is_text(v) else "" for v in grid.iloc[header].tolist()]
    body = grid.iloc[header + 1 :].reset_index(drop=True)
    keep = [i for i, n in enumerate(names) if n]
    seen: dict[str, int] = {}
    for i in keep:
        if names[i] in seen:
            raise RegisterError(
                f"{path}: the header {names[i]!r} appears twice (columns {seen[names[i]] + 1} and {i + 1})"
            )
        seen[names[i]] = i
    frame = body.iloc[:, keep].copy()
    frame.columns = [names[i] for i in keep]
    frame["row"] = np.arange(len(frame)) + header + 2
    # rows where every cell is empty are layout, not walls (a row of blanks and spaces
    # is looked at more closely: the quick test first)
    cells = frame.drop(columns="row").to_numpy(dtype=object)
    empty = (cells == "") | pd.isna(cells)
    candidate = ~empty.all(axis=1)
    candidate[_space_rows(cells, empty, candidate)] = False
    return frame[candidate].reset_index(drop=True)


def _space_rows(cells: np.ndarray, empty: np.ndarray, rows: np.ndarray) -> np.ndarray:
    """The positions of the ``rows`` whose every cell is empty or white space only, looked at
    column by column and only on the rows still in question (a wall's row drops out at its
    first cell with content, usually its id)."""
    left = np.flatnonzero(rows)
    for c in range(cells.shape[1]):
        if not left.size:
            break
        column = pd.Series(cells[left, c], dtype=object)
        blank = empty[left, c].copy()
        if pd.api.types.infer_dtype(column, skipna=True) in ("string", "mixed", "mixed-integer"):
            blank |= column.str.strip().eq("").to_numpy(dtype=bool, na_value=False)
        left = left[blank]
    return left


def _decode_unicode_text(data: bytes) -> tuple[str, str] | None:
    """UTF-16 text (Excel's "Unicode text", with its byte order mark), or None."""
    if data[:2] in (b"\xff\xfe", b"\xfe\xff"):
        try:
            return data.decode("utf-16"), "utf-16"
        except UnicodeDecodeError:
            return None
    return None


def _decode_mostly_utf8(data: bytes) -> tuple[str, str] | None:
    """UTF-8 text with a few bytes of another encoding (a cell pasted from an older file): the
    UTF-8 is kept and only the stray bytes are read as cp1252; None if the text holds no UTF-8."""
    parts, i, stray, good = [], 0, 0, False
    while True:
        try:
            chunk = data[i:].decode("utf-8")
        except UnicodeDecodeError as exc:
            chunk = data[i : i + exc.start].decode("utf-8")
            parts += [chunk, data[i + exc.start : i + exc.end].decode("cp1252", errors="replace")]
            good |= any(ord(c) > 127 for c in chunk)
            stray += 1
            i += exc.end
            continue
        parts.append(chunk)
        good |= any(ord(c) > 127 for c in chunk)
        break
    if not good:
        return None
    return "".join(parts), f"utf-8 with {stray} stray byte(s) read as cp1252"


def _decode(data: bytes) -> tuple[str, str]:
    found = _decode_unicode_text(data)
    if found is not None:
        return found
    try:
        return data.decode("utf-8-sig"), "utf-8-sig"
    except UnicodeDecodeError:
        pass
    found = _decode_mostly_utf8(data)
    if found is not None:
        return found
    for encoding in ("cp1252", "latin-1"):
        try:
            return data.decode(encoding), encoding
        except UnicodeDecodeError:
            continue
    raise AssertionError("latin-1 decodes every byte")  # pragma: no cover


def _read_csv(path: Path, known: set[str]) -> RawRegister:
    data = path.read_bytes()
    if not data.strip():
        raise RegisterError(f"{path}: the file is empty")
    if (b"\x00" in data[:4096] and _decode_unicode_text(data) is None) or data[:4] == b"PK\x03\x04":
        raise RegisterError(f"{path}: not a text file (is it a spreadsheet with the wrong name?)")
    text, encoding = _decode(data)
    sample = text[:65536]
    try:
        delimiter = csv.Sniffer().sniff(sample, delimiters=",;\t|").delimiter
    except csv.Error:
        delimiter = ","
    # decimal commas go with a semicolon (or tab) delimiter
    decimal = "," if delimiter in ";\t|" and _looks_decimal_comma(sample, delimiter) else "."
    grid = _parse_csv(text, delimiter, path)
    header = _find_header(grid, known, path)
    frame = _frame_from_grid(grid, header, path)
    # only columns holding a comma can need it: decimal commas, or thousands separators
    if decimal == ",":
        pattern, fix = r"\s*-?[\d.]*,\d+\s*|\s*-?\d[\d.]*\s*|\s*", _decimal_comma
    else:
        pattern, fix = r"\s*-?\d{1,3}(,\d{3})+(\.\d+)?\s*|\s*-?\d*\.?\d*\s*", _thousands
    for col in frame.columns:
        if col == "row":
            continue
        s = frame[col]
        if s.str.contains(",", regex=False).any() and s.str.fullmatch(pattern).all():
            frame[col] = fix(s)
    notes = [f"read as CSV: encoding {encoding}, delimiter {delimiter!r}, decimal {decimal!r}"]
    return RawRegister(frame, path, header_row=header + 1, notes=notes)


def _parse_csv(text: str, delimiter: str, path: Path) -> pd.DataFrame:
    """Every cell as text; a ragged row or an unclosed quote is one clear error naming the line."""
    try:
        return pd.read_csv(
            io.StringIO(text),
            sep=delimiter,
            header=None,
            dtype=str,
            keep_default_na=False,
            skip_blank_lines=False,
        )
    except pd.errors.ParserError as exc:
        message = str(exc)
        ragged = re.search(r"Expected (\d+) fields in line (\d+), saw (\d+)", message)
        if ragged:
            want, line, saw = ragged.groups()
            raise RegisterError(
                f"{path}: line {line} has {saw} cells where the lines above have {want} "
                f"(a {delimiter!r} inside a cell that is not in quotes?); quote the cell or remove "
                "the extra cells"
            ) from exc
        unclosed = re.search(r"EOF inside string starting at row (\d+)", message)
        if unclosed:
            raise RegisterError(
                f"{path}: a quote opened on line {int(unclosed.group(1)) + 1} is never closed; "
                'close it (") or remove it'
            ) from exc
        raise RegisterError(f"{path}: not a readable CSV file ({message.strip()})") from exc


def _decimal_comma(s: pd.Series) -> pd.Series:
    return s.str.replace(".", "", regex=False).str.replace(",", ".", regex=False)


def _thousands(s: pd.Series) -> pd.Series:
    return s.str.replace(",", "", regex=False)


def _looks_decimal_comma(sample: str, delimiter: str) -> bool:
    cells = [c for line in sample.splitlines()[:50] for c in line.split(delimiter)]
    commas = sum(1 for c in cells if _is_number(c.strip().replace(",", ".", 1)) and "," in c)
    return commas > 0


def _is_number(text: str) -> bool:
    try:
        float(text)
    except ValueError:
        return False
    return True


def _read_spreadsheet(
    path: Path, sheet: str | int | None, known: set[str], limits: SheetLimits
) -> RawRegister:
    with open(path, "rb") as fh:
        head = fh.read(8)
    if head.startswith(b"\xd0\xcf\x11\xe0") and path.suffix.lower() != ".xls":
        raise RegisterError(
            f"{path}: the workbook is encrypted (password-protected) or an old .xls saved "
            f"under a new name; remove the password or save it again as .xlsx"
        )
    import python_calamine

    check_sheet_size(path, sheet, limits)  # before any cell is read: bombs are refused here
    try:
        book = python_calamine.CalamineWorkbook.from_path(str(path))
    except Exception as exc:  # calamine raises its own types for every broken file
        raise RegisterError(f"{path}: not a readable spreadsheet ({exc})") from exc
    names = list(book.sheet_names)
    if sheet is None:
        chosen = names[0]
    elif isinstance(sheet, int) or (isinstance(sheet, str) and sheet.isdigit()):
        index = int(sheet)
        if not 0 <= index < len(names):
            raise RegisterError(f"{path}: no sheet number {index}; the sheets are {names}")
        chosen = names[index]
    elif sheet in names:
        chosen = sheet
    else:
        raise RegisterError(f"{path}: no sheet named {sheet!r}; the sheets are {names}")
    try:
        # python-calamine directly: cells as written ("n/a" stays "n/a", the validator names
        # it), about 2x faster than going through pandas.read_excel (benchmarks/)
        data = book.get_sheet_by_name(chosen)
        rows, (top, left) = data.to_python(), data.start or (0, 0)
    except Exception as exc:  # a damaged sheet inside a readable workbook
        raise RegisterError(f"{path}: sheet {chosen!r} could not be read ({exc})") from exc
    finally:
        book.close()
    if not rows:
        raise RegisterError(f"{path}: sheet {chosen!r} is empty")
    grid = cells_as_shown(pd.DataFrame(rows, dtype=object))
    if path.suffix.lower() in (".xlsx", ".xlsm"):
        _put_error_cells(grid, error_cells(path, str(chosen)), top, left)
    header = _find_header(grid, known, path)
    frame = _frame_from_grid(grid, header, path)
    frame["row"] += top  # the grid starts at the first used row of the sheet
    return RawRegister(
        frame, path, sheet=str(chosen), header_row=header + 1 + top, notes=[f"read sheet {chosen!r}"]
    )


def _as_shown(value: object) -> object:
    """A typed cell as the user sees it: dates as ISO dates, TRUE/FALSE as words."""
    if isinstance(value, bool):
        return "TRUE" if value else "FALSE"
    if isinstance(value, dt.datetime):
        return value.date().isoformat() if value.time() == dt.time() else value.isoformat(sep=" ")
    if isinstance(value, (dt.date, dt.time)):
        return value.isoformat()
    if isinstance(value, dt.timedelta):
        return str(value)
    return value


def cells_as_shown(grid: pd.DataFrame) -> pd.DataFrame:
    """Dates, times and booleans as text the user would recognise (numbers stay numbers: the
    preparation writes a whole number 17.0 as "17" where text is expected)."""
    for col in grid.columns:
        kind = pd.api.types.infer_dtype(grid[col], skipna=True)
        if kind not in ("floating", "integer", "string", "empty", "mixed-integer-float"):
            # a column of text and numbers is "mixed": only its dates, times and booleans change
            values = grid[col]
            shown = values.map(type).isin(_SHOWN_TYPES).to_numpy()
            if shown.any():
                grid[col] = values.where(~shown, values[shown].map(_as_shown))
    return grid


_SHOWN_TYPES = (bool, np.bool_, dt.datetime, dt.date, dt.time, dt.timedelta, pd.Timestamp, pd.Timedelta)
"""The cell types :func:`_as_shown` turns into text (as their exact type: calamine returns these
and no subclass of them)."""


def _put_error_cells(grid: pd.DataFrame, cells: list[tuple[int, int, str]], top: int, left: int) -> None:
    """Put the error values (#DIV/0!) back where the reader left blanks, so they are reported."""
    for row, col, text in cells:
        r, c = row - top, col - left
        if 0 <= r < grid.shape[0] and 0 <= c < grid.shape[1]:
            grid.iat[r, c] = text


def _gis_layer(path: Path, layer: str | None) -> str | None:
    """The layer to read: the one named, else the only one; several and none named is an error,
    as is a shapefile without its .dbf (the attribute table)."""
    import pyogrio

    if path.suffix.lower() == ".shp":
        siblings = {p.name.lower() for p in path.parent.iterdir()}
        if f"{path.stem.lower()}.dbf" not in siblings:
            raise RegisterError(
                f"{path}: the shapefile's attribute table {path.stem}.dbf is missing beside it "
                "(a shapefile is several files: copy the .dbf, .shx and .prj too)"
            )
        return None
    try:
        names = [str(n) for n in pyogrio.list_layers(path)[:, 0]]
    except Exception as exc:  # pyogrio raises DataSourceError and friends
        raise RegisterError(f"{path}: not a readable GIS layer ({exc})") from exc
    if layer is not None:
        if layer not in names:
            raise RegisterError(f"{path}: no layer {layer!r}; its layers are {', '.join(names)}")
        return layer
    if len(names) > 1:
        raise RegisterError(
            f"{path}: holds {len(names)} layers ({', '.join(names)}); name the walls with --layer NAME"
        )
    return None


def _read_gis(path: Path, given_crs: str | None = None, layer: str | None = None) -> RawRegister:
    import geopandas as gpd

    chosen = _gis_layer(path, layer)
    try:
        gdf = gpd.read_file(path, engine="pyogrio", layer=chosen)
    except Exception as exc:  # pyogrio raises DataSourceError and friends
        raise RegisterError(f"{path}: not a readable GIS layer ({exc})") from exc
    if gdf.crs is None:
        if not given_crs:
            raise RegisterError(
                f"{path}: the layer has no CRS, so its coordinates could be metres or degrees; "
                "pass --crs EPSG:xxxx (or [register] crs in the mapping file)"
            )
        try:
            gdf = gdf.set_crs(given_crs)
        except Exception as exc:  # pyproj's CRSError
            raise RegisterError(f"unknown CRS {given_crs!r}: {exc}") from exc
    crs = gdf.crs.to_string() if gdf.crs is not None else None
    if crs is not None and gdf.crs is not None and not gdf.crs.equals("EPSG:4326"):
        gdf = gdf.to_crs("EPSG:4326")
    frame = pd.DataFrame(gdf.drop(columns=gdf.geometry.name))
    geom = gdf.geometry
    frame["geometry"] = np.where(geom.isna() | geom.is_empty, None, geom.to_wkt())
    frame["row"] = np.arange(len(frame)) + 1
    return RawRegister(frame, path, crs=crs, notes=[f"read GIS layer, CRS {crs}"])
