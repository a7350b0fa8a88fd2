"""Run history in a GeoPackage, the comparison of two runs, and lean rates.

The history is an OGC GeoPackage (SQLite) that any GIS opens: a table ``runs``
(one row per run: time, input file and SHA-256, tool version, settings) and a
layer ``wall_history`` (one row per wall per run: the inputs used, the results
and the wall's geometry). The file is created once with pyogrio; runs are then
added with Python's sqlite3 inside one ``BEGIN IMMEDIATE`` transaction, so
concurrent runs queue on SQLite's lock instead of corrupting the file.
"""

from __future__ import annotations

import json
import os
import sqlite3
import struct
import tempfile
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import shapely

from screening.errors import ScreeningError
from screening.priority import BAND_LABELS
from screening.schema import ENGINE_INPUTS

RUNS = "runs"
WALLS = "wall_history"
SRS_ID = 4326

RUN_COLUMNS: dict[str, str] = {
    "run_id": "TEXT",
    "run_time": "TEXT",
    "input_file": "TEXT",
    "input_sha256": "TEXT",
    "settings_sha256": "TEXT",
    "tool_version": "TEXT",
    "settings": "TEXT",
    "n_walls": "INTEGER",
    "n_rejected": "INTEGER",
    "rejected_walls": "TEXT",
}

# the inputs compared between runs, then the results kept per wall
INPUT_COLUMNS: Sequence[str] = (
    "survey_date",
    *ENGINE_INPUTS,
    "material",
    "foundation",
    "drainage",
    "condition_rating",
    "consequence",
)
KEPT_RESULTS: Sequence[str] = (
    "name",
    "worst_case",
    "governing_check",
    "utilisation",
    "utilisation_drained",
    "utilisation_blocked",
    "utilisation_surveyed",
    "state",
    "outside_middle_third",
    "over_allowable_bearing",
    "lean_rate_deg_per_year",
    "priority_score",
    "priority_band",
    "rank",
)
TEXT = {
    "survey_date",
    "material",
    "foundation",
    "drainage",
    "consequence",
    "name",
    "worst_case",
    "governing_check",
    "state",
    "priority_band",
}
INTEGER = {"rank", "outside_middle_third", "over_allowable_bearing"}


def _sql_type(col: str) -> str:
    return "TEXT" if col in TEXT else "INTEGER" if col in INTEGER else "REAL"


def _create(path: Path) -> None:
    """Create an empty history GeoPackage (atomically: no half-made file is ever visible)."""
    import geopandas as gpd
    import pyogrio

    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".gpkg", dir=path.parent)
    os.close(fd)
    os.unlink(tmp)
    try:
        runs = pd.DataFrame(
            {c: pd.Series(dtype="string" if t == "TEXT" else "int64") for c, t in RUN_COLUMNS.items()}
        )
        pyogrio.write_dataframe(runs, tmp, layer=RUNS, driver="GPKG")
        cols = {"run_id": pd.Series(dtype="string"), "wall_id": pd.Series(dtype="string")}
        for c in (*INPUT_COLUMNS, *KEPT_RESULTS):
            t = _sql_type(c)
            cols[c] = pd.Series(dtype="string" if t == "TEXT" else "int64" if t == "INTEGER" else "float64")
        layer = gpd.GeoDataFrame(cols, geometry=gpd.GeoSeries([], crs=f"EPSG:{SRS_ID}"))
        layer.to_file(
            tmp,
            layer=WALLS,
            driver="GPKG",
            engine="pyogrio",
            geometry_type="Unknown",
            layer_options={"SPATIAL_INDEX": "NO"},
        )
        try:
            os.link(tmp, path)  # fails if another process created it meanwhile: theirs stands
        except FileExistsError:
            pass
    finally:
        if os.path.exists(tmp):
            os.unlink(tmp)


def _stored_columns(con: sqlite3.Connection) -> set[str]:
    return {row[1] for row in con.execute(f"PRAGMA table_info({WALLS})")}


def _refuse_not_a_history(path: Path) -> None:
    """A history is a GeoPackage (an SQLite file) with our tables: say so if it is anything else."""
    try:
        with open(path, "rb") as fh:
            head = fh.read(16)
    except FileNotFoundError:
        return  # created on first use
    except OSError as exc:
        raise ScreeningError(f"{path}: the history file cannot be read ({exc.strerror or exc})") from exc
    if head and head != b"SQLite format 3\x00":
        raise ScreeningError(
            f"{path}: not a wallscreen history (not a GeoPackage/SQLite file); give another --history "
            "or move the file away"
        )


def _connect(path: Path) -> sqlite3.Connection:
    _refuse_not_a_history(Path(path))
    con = sqlite3.connect(path, timeout=60.0, isolation_level=None)
    con.execute("PRAGMA busy_timeout = 60000")
    return con


@dataclass(frozen=True)
class Recorded:
    """What recording a run did."""

    run_id: str
    stored: bool
    same_as: str | None = None
    """The earlier run with the same input file content and settings, when not stored again."""


def _refuse_duplicate_run_id(con: sqlite3.Connection, path: Path, run_id: str) -> None:
    """Run ids are unique: a second run under one id would mix two runs in every comparison."""
    if con.execute(f"SELECT 1 FROM {RUNS} WHERE run_id = ? LIMIT 1", (run_id,)).fetchone():
        con.execute("ROLLBACK")
        raise ScreeningError(f"{path}: a run {run_id} is already recorded; run ids must be unique")


def record_run(
    path: str | Path,
    *,
    run: dict[str, Any],
    walls: pd.DataFrame,
    geometry: np.ndarray,
) -> Recorded:
    """Add a run and its walls to the history, in one transaction.

    ``run`` has the keys of :data:`RUN_COLUMNS` (``run_id`` included). A run whose
    input SHA-256 and settings equal an earlier run's is recognised and not stored again.
    """
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    if not path.exists():
        _create(path)
    cols = ["run_id", "wall_id", *INPUT_COLUMNS, *KEPT_RESULTS]
    frame = walls.reindex(columns=[c for c in cols if c != "run_id"]).copy()
    frame.insert(0, "run_id", run["run_id"])
    if "survey_date" in frame:
        frame["survey_date"] = pd.to_datetime(frame["survey_date"], errors="coerce").dt.strftime("%Y-%m-%d")
    rows = list(zip(*(_plain_column(frame[c]) for c in frame.columns), _gpkg_blobs(geometry), strict=True))
    con = _connect(path)
    try:
        con.execute("BEGIN IMMEDIATE")
        same = con.execute(
            f"SELECT run_id FROM {RUNS} WHERE input_sha256 = ? AND settings_sha256 = ? ORDER BY fid LIMIT 1",
            (run["input_sha256"], run["settings_sha256"]),
        ).fetchone()
        if same:
            con.execute("ROLLBACK")
            return Recorded(run["run_id"], stored=False, same_as=same[0])
        _refuse_duplicate_run_id(con, path, str(run["run_id"]))
        for c in cols:  # columns added since the file was created (a history of an earlier version)
            if c not in _stored_columns(con):
                con.execute(f'ALTER TABLE {WALLS} ADD COLUMN "{c}" {_sql_type(c)}')
        names = ", ".join(f'"{c}"' for c in RUN_COLUMNS)
        con.execute(
            f"INSERT INTO {RUNS} ({names}) VALUES ({', '.join('?' * len(RUN_COLUMNS))})",
            [_plain(run.get(c)) for c in RUN_COLUMNS],
        )
        names = ", ".join(f'"{c}"' for c in cols) + ', "geom"'
        con.executemany(f"INSERT INTO {WALLS} ({names}) VALUES ({', '.join('?' * (len(cols) + 1))})", rows)
        con.execute("COMMIT")
    except sqlite3.Error as exc:
        if con.in_transaction:
            con.execute("ROLLBACK")
        raise ScreeningError(f"{path}: could not record the run in the history ({exc})") from exc
    finally:
        con.close()
    return Recorded(run["run_id"], stored=True)


def _plain_column(values: pd.Series) -> list[Any]:
    """A column as the values SQLite stores, converted column-wise as :func:`_plain` does one
    value: None for a blank, 0/1 for a flag, Python ints and floats (infinity kept)."""
    if pd.api.types.is_bool_dtype(values.dtype) and not values.isna().any():
        return values.to_numpy(dtype=int).tolist()
    if isinstance(values.dtype, np.dtype) and values.dtype.kind in "iu":
        return values.to_numpy().tolist()
    if isinstance(values.dtype, np.dtype) and values.dtype.kind == "f":
        v = values.to_numpy(dtype=float)
        out = v.astype(object)
        out[np.isnan(v)] = None
        return out.tolist()
    return [_plain(v) for v in values.to_numpy(dtype=object)]


def _gpkg_blobs(geometry: np.ndarray) -> list[bytes | None]:
    """GeoPackage geometry blobs: 'GP', version 0, flags (little endian, no envelope), SRS id,
    then the WKB (made for every geometry in one call); None where there is no geometry."""
    geoms = np.asarray(geometry, dtype=object)
    present = np.array([g is not None for g in geoms], dtype=bool)
    out: list[bytes | None] = [None] * len(geoms)
    if present.any():
        head = b"GP" + bytes([0, 0b00000001]) + struct.pack("<i", SRS_ID)
        wkb = shapely.to_wkb(geoms[present], byte_order=1)
        for i, blob in zip(np.flatnonzero(present), wkb, strict=True):
            out[i] = head + blob
    return out


def _plain(v: Any) -> Any:
    if v is None or v is pd.NA or v is pd.NaT:
        return None
    if isinstance(v, (np.bool_, bool)):
        return int(v)
    if isinstance(v, np.integer):
        return int(v)
    if isinstance(v, (np.floating, float)):
        return None if np.isnan(v) else float(v)  # infinity is kept: SQLite stores it
    return v


def list_runs(path: str | Path) -> pd.DataFrame:
    """Every run in the history, oldest first."""
    path = Path(path)
    if not path.exists():
        return pd.DataFrame(columns=list(RUN_COLUMNS))
    con = _connect(path)
    try:
        return pd.read_sql_query(f"SELECT {', '.join(RUN_COLUMNS)} FROM {RUNS} ORDER BY fid", con)
    finally:
        con.close()


def run_walls(path: str | Path, run_id: str) -> pd.DataFrame:
    """The walls of one run (without geometry)."""
    cols = ["wall_id", *INPUT_COLUMNS, *KEPT_RESULTS]
    con = _connect(Path(path))
    try:
        # a history written by an earlier version lacks the columns added since: they are left
        # out, so the comparison does not report them as changed (SQLite would read an unknown
        # "quoted" name as a text literal, so ask first)
        present = [c for c in cols if c in _stored_columns(con)]
        frame = pd.read_sql_query(
            f"SELECT {', '.join(chr(34) + c + chr(34) for c in present)} FROM {WALLS} WHERE run_id = ?",
            con,
            params=(run_id,),
        )
    finally:
        con.close()
    for c in ("outside_middle_third", "over_allowable_bearing"):
        frame[c] = frame[c].astype("boolean")
    return frame


def lean_points(path: str | Path | None) -> pd.DataFrame:
    """(wall_id, survey_date, lean_deg, height_m) of every run in the history."""
    if path is None or not Path(path).exists():
        return pd.DataFrame(columns=["wall_id", "survey_date", "lean_deg", "height_m"])
    con = _connect(Path(path))
    try:
        return pd.read_sql_query(
            f"SELECT wall_id, survey_date, lean_deg, height_m FROM {WALLS} WHERE survey_date IS NOT NULL", con
        )
    finally:
        con.close()


def lean_rates(points: pd.DataFrame) -> pd.DataFrame:
    """Least-squares rate of change of lean per wall from surveys at two or more dates.

    Parameters
    ----------
    points : pandas.DataFrame
        ``wall_id``, ``survey_date``, ``lean_deg``, ``height_m``; duplicate (wall, date)
        pairs are averaged.

    Returns
    -------
    pandas.DataFrame
        Indexed by ``wall_id``: ``lean_rate_deg_per_year``, ``lean_rate_mm_per_year`` (at the top
        of the wall, small angles), ``lean_surveys`` (number of dates) and ``lean_span_years``.
    """
    p = points.dropna(subset=["wall_id", "survey_date", "lean_deg"]).copy()
    p["t"] = (pd.to_datetime(p["survey_date"]) - pd.Timestamp("2000-01-01")).dt.days / 365.25
    p = p.groupby(["wall_id", "t"], as_index=False).agg(
        lean_deg=("lean_deg", "mean"), height_m=("height_m", "last")
    )
    g = p.groupby("wall_id")
    n = g["t"].transform("size")
    p = p[n >= 2].copy()
    g = p.groupby("wall_id")
    p["dt"] = p["t"] - g["t"].transform("mean")
    p["dl"] = p["lean_deg"] - g["lean_deg"].transform("mean")
    p["sxy"] = p["dt"] * p["dl"]
    p["sxx"] = p["dt"] ** 2
    agg = p.groupby("wall_id").agg(
        sxy=("sxy", "sum"),
        sxx=("sxx", "sum"),
        n=("t", "size"),
        span=("t", lambda t: t.max() - t.min()),
        height=("height_m", "last"),
    )
    rate = agg["sxy"] / agg["sxx"].where(agg["sxx"] > 0)
    return pd.DataFrame(
        {
            "lean_rate_deg_per_year": rate,
            "lean_rate_mm_per_year": np.radians(rate) * agg["height"] * 1000.0,
            "lean_surveys": agg["n"].astype(int),
            "lean_span_years": agg["span"],
        }
    )


# ------------------------------------------------------------------ comparison
COMPARED_RESULTS = (
    "utilisation",
    "governing_check",
    "outside_middle_third",
    "over_allowable_bearing",
    "priority_band",
    "rank",
)


def _change_text(col: str, value: object, as_number: bool) -> str:
    """A value of a changed input as the user wrote it (numbers to the input's precision)."""
    if pd.isna(value):  # type: ignore[call-overload]
        return "blank"
    return _input_text(col, float(value)) if as_number else str(value)  # type: ignore[arg-type]


def compare(before: pd.DataFrame, after: pd.DataFrame, rejected: Sequence[str] = ()) -> pd.DataFrame:
    """Per wall: added, removed or changed; which inputs changed (from → to); how results moved.

    Both frames are per-wall tables with ``wall_id`` and the columns of
    :data:`INPUT_COLUMNS` and :data:`COMPARED_RESULTS` (as in ``walls.csv``). Walls of
    ``before`` whose rows were rejected in the later run are reported as ``rejected``,
    not as removed.
    """
    a = before.drop_duplicates("wall_id").set_index("wall_id")
    b = after.drop_duplicates("wall_id").set_index("wall_id")
    ids = a.index.union(b.index, sort=False)
    out = pd.DataFrame(index=pd.Index(ids, name="wall_id"))
    out["status"] = np.where(~ids.isin(a.index), "added", np.where(~ids.isin(b.index), "removed", "kept"))
    both = ids[ids.isin(a.index) & ids.isin(b.index)]
    changes = pd.Series("", index=ids, dtype=object)
    for col in INPUT_COLUMNS:
        if col not in a or col not in b:
            continue
        x, y = a.loc[both, col], b.loc[both, col]
        if col == "survey_date":
            continue
        xn, yn = pd.to_numeric(x, errors="coerce"), pd.to_numeric(y, errors="coerce")
        # a number column blank throughout still compares as numbers (SQLite gives it back as text)
        numeric = pd.api.types.is_numeric_dtype(x) or pd.api.types.is_numeric_dtype(y)
        if numeric or xn.notna().any() or yn.notna().any():
            differ = ~np.isclose(xn.astype(float), yn.astype(float), rtol=0, atol=1e-6, equal_nan=True)
        else:
            differ = (x.fillna("").astype(str) != y.fillna("").astype(str)).to_numpy()
        hit = both[differ]
        as_number = bool(numeric or xn.notna().any() or yn.notna().any())
        text = []
        for w in hit:
            before, after = (_change_text(col, t.at[w, col], as_number) for t in (a, b))
            text.append(f"{col}: {before} → {after}")
        changes.loc[hit] = [f"{c}; {t}" if c else t for c, t in zip(changes.loc[hit], text, strict=True)]
    out["inputs_changed"] = changes
    for col in COMPARED_RESULTS:
        out[f"{col}_before"] = a[col].reindex(ids).to_numpy() if col in a else np.nan
        out[f"{col}_after"] = b[col].reindex(ids).to_numpy() if col in b else np.nan
    moved = pd.Series(False, index=ids)
    for col in COMPARED_RESULTS:
        x, y = out[f"{col}_before"], out[f"{col}_after"]
        if col == "utilisation":
            xn, yn = x.astype(float), y.astype(float)
            moved |= ~np.isclose(xn, yn, rtol=1e-9, atol=1e-9, equal_nan=True)
        elif col != "rank":
            moved |= x.astype(str) != y.astype(str)
    out["results_moved"] = moved & (out["status"] == "kept")
    out.loc[(out["status"] == "kept") & ((out["inputs_changed"] != "") | out["results_moved"]), "status"] = (
        "changed"
    )
    out.loc[out["status"] == "kept", "status"] = "unchanged"
    for when in ("before", "after"):  # the words the user sees elsewhere, not the internal codes
        band = out[f"priority_band_{when}"]
        out[f"priority_band_{when}"] = band.map(lambda b: BAND_LABELS.get(str(b), b) if pd.notna(b) else b)
    out.loc[(out["status"] == "removed") & out.index.isin(list(rejected)), "status"] = "rejected"
    order = {"added": 0, "removed": 1, "rejected": 2, "changed": 3, "unchanged": 4}
    out = out.reset_index()
    return out.sort_values(
        ["status", "wall_id"], key=lambda s: s.map(order) if s.name == "status" else s, kind="stable"
    ).reset_index(drop=True)


def describe_change(row: pd.Series) -> str:
    """One line for the map and the terminal."""
    if row["status"] == "added":
        return "new in this run"
    if row["status"] == "removed":
        return "no longer in the register"
    if row["status"] == "rejected":
        return carried_words(row)
    parts = []
    if row["inputs_changed"]:
        parts.append(row["inputs_changed"])
    if row.get("priority_band_before") != row.get("priority_band_after"):
        parts.append(f"band {row['priority_band_before']} → {row['priority_band_after']}")
    ub, ua = row.get("utilisation_before"), row.get("utilisation_after")
    if ub is not None and ua is not None and not (pd.isna(ub) and pd.isna(ua)) and ub != ua:
        parts.append(f"utilisation {_u(ub)} → {_u(ua)}")
    return "; ".join(parts)


def rejection_reasons(problems: pd.DataFrame) -> pd.Series:
    """Per wall id, why its row was rejected, with the cells as the user wrote them:
    ``not re-screened: Height (mm) 4 (expected a height of at least 0.3 m …)``."""
    errors = problems[problems["severity"] == "error"]
    errors = errors[errors["wall_id"].notna() & (errors["wall_id"].astype(str) != "")]
    value = errors["value"].fillna("").astype(str)
    cell = (
        errors["column"].astype(str)
        + np.where(value != "", " " + value, "")
        + " ("
        + errors["message"].astype(str)
        + ")"
    )
    joined = cell.groupby(errors["wall_id"].astype(str), sort=False).agg("; ".join)
    return "not re-screened: " + joined


def carried_words(row: pd.Series) -> str:
    """A wall of the last run whose row was rejected this time: why, and its band and rank then."""
    because = row.get("not_rescreened_because")
    text = because if isinstance(because, str) and because else "not re-screened: its row was rejected"
    band, rank = row.get("priority_band_before"), row.get("rank_before")
    if isinstance(band, str) and band:
        was = f"was {band}" + (f", rank {int(rank)}" if rank is not None and pd.notna(rank) else "")
        text = f"{text}; {was} in the last run"
    return text


def carry_rejected(changes: pd.DataFrame, problems: pd.DataFrame) -> pd.DataFrame:
    """``changes`` with ``not_rescreened_because`` filled for the walls whose row was rejected."""
    reasons = rejection_reasons(problems)
    out = changes.copy()
    rejected = out["status"] == "rejected"
    out["not_rescreened_because"] = ""
    out.loc[rejected, "not_rescreened_because"] = (
        out.loc[rejected, "wall_id"].astype(str).map(reasons).fillna("not re-screened: its row was rejected")
    )
    return out


def carried_walls(changes: pd.DataFrame | None) -> pd.DataFrame:
    """The walls of the last run not re-screened this time, ranked as they were then, with words."""
    if changes is None or not len(changes):
        return pd.DataFrame(columns=["wall_id", "priority_band_before", "rank_before", "carried"])
    rows = changes[changes["status"] == "rejected"].copy()
    rows = rows.sort_values("rank_before", kind="stable", na_position="last")
    rows["carried"] = [carried_words(r) for _, r in rows.iterrows()]
    return rows[["wall_id", "priority_band_before", "rank_before", "carried"]].reset_index(drop=True)


_DECIMALS = {"condition_rating": 0}
"""Decimals an input change is shown with: the precision a register records it to."""


def _input_text(column: str, value: float) -> str:
    """An input value as a register records it: lean to 0.1°, lengths to the millimetre."""
    if column in _DECIMALS:
        decimals = _DECIMALS[column]
    elif column.endswith("_deg"):
        decimals = 1
    elif column.endswith("_m"):
        decimals = 3
    else:  # kPa, kN/m³
        decimals = 1
    text = f"{value:.{decimals}f}"
    return text.rstrip("0").rstrip(".") if "." in text else text


def _u(v: Any) -> str:
    if v is None or pd.isna(v):
        return "∞"
    return f"{float(v):.2f}"


def settings_digest(settings: dict[str, Any]) -> str:
    import hashlib

    return hashlib.sha256(json.dumps(settings, sort_keys=True, default=str).encode()).hexdigest()
