"""Registers from a PostgreSQL/PostGIS table or view, and results written back (psycopg 3).

Credentials come from the DSN or the standard ``PG*`` environment variables (libpq reads
them); the password is never printed: every message shows :func:`masked` instead. Table and
schema names are validated and always quoted (``psycopg.sql.Identifier``); register text only
ever travels as data (query parameters and COPY), never as SQL.

Results go to four tables in one schema (default ``wallscreen``), all in one transaction, so a
run that fails or is killed half-way leaves the previous results in place:

- ``walls``: the latest run, one row per wall, with its geometry (EPSG:4326),
- ``results``: the latest run, one row per wall and case,
- ``runs`` and ``wall_history``: the run history, shared by everyone who writes to the schema.
"""

from __future__ import annotations

import hashlib
import os
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import shapely

from screening.errors import RegisterError, ScreeningError

SCHEMES = ("postgresql://", "postgres://")
DEFAULT_SCHEMA = "wallscreen"


def is_dsn(text: str | Path) -> bool:
    """True for a PostgreSQL connection URI (``postgresql://…``)."""
    return isinstance(text, str) and text.lower().startswith(SCHEMES)


def masked(dsn: str) -> str:
    """The DSN as it may be shown: user, host, port and database, never the password."""
    from psycopg.conninfo import conninfo_to_dict

    try:
        parts = conninfo_to_dict(dsn)
    except Exception:  # an unparsable DSN: show the scheme only
        return "postgresql://…"
    user = f"{parts['user']}@" if parts.get("user") else ""
    port = f":{parts['port']}" if parts.get("port") else ""
    return f"postgresql://{user}{parts.get('host', '')}{port}/{parts.get('dbname', '')}"


def _secret(dsn: str) -> str | None:
    from psycopg.conninfo import conninfo_to_dict

    try:
        secret = conninfo_to_dict(dsn).get("password")
    except Exception:
        secret = None
    return str(secret) if secret else os.environ.get("PGPASSWORD") or None


def _scrub(message: str, dsn: str) -> str:
    secret = _secret(dsn)
    return message.replace(secret, "***") if secret else message


def connect(dsn: str) -> Any:
    """A psycopg connection; a failure is a :class:`RegisterError` naming the masked DSN."""
    try:
        import psycopg
    except ImportError as exc:
        raise ScreeningError(
            "reading or writing PostgreSQL needs psycopg: pip install 'wallscreen[postgis]'"
        ) from exc
    try:
        return psycopg.connect(dsn, connect_timeout=15, application_name="wallscreen")
    except psycopg.Error as exc:
        raise RegisterError(f"{masked(dsn)}: could not connect ({_scrub(str(exc).strip(), dsn)})") from None


def identifier(name: str, what: str) -> str:
    """A table or schema name checked for PostgreSQL: 1 to 63 bytes, no control characters."""
    if not isinstance(name, str) or not name:
        raise ScreeningError(f"{what}: a name is needed")
    if len(name.encode("utf-8")) > 63:
        raise ScreeningError(f"{what} {name!r}: longer than PostgreSQL's 63 bytes")
    if any(ord(c) < 32 or ord(c) == 127 for c in name):
        raise ScreeningError(f"{what} {name!r}: control characters are not allowed in a name")
    return name


def split_table(text: str) -> tuple[str | None, str]:
    """``schema.table`` or ``table`` (names are taken as written: case and spaces kept)."""
    schema, dot, table = text.partition(".")
    if not dot:
        return None, identifier(text, "--table")
    return identifier(schema, "schema of --table"), identifier(table, "--table")


def _relation(con: Any, schema: str | None, table: str) -> tuple[str, str]:
    """The (schema, table) of an existing table or view, searching the search_path if no schema."""
    row = con.execute(
        "SELECT n.nspname, c.relname FROM pg_class c JOIN pg_namespace n ON n.oid = c.relnamespace "
        "WHERE c.relname = %s AND c.relkind IN ('r', 'v', 'm', 'f', 'p') "
        "AND (n.nspname = %s OR (%s::text IS NULL AND n.nspname = ANY(current_schemas(false)))) "
        "ORDER BY array_position(current_schemas(false), n.nspname) LIMIT 1",
        (table, schema, schema),
    ).fetchone()
    if row is None:
        where = f"schema {schema!r}" if schema else "the search path"
        raise RegisterError(f"no table or view {table!r} in {where}")
    return row[0], row[1]


def _columns(con: Any, schema: str, table: str) -> list[tuple[str, str]]:
    return con.execute(
        "SELECT a.attname, t.typname FROM pg_attribute a JOIN pg_type t ON t.oid = a.atttypid "
        "WHERE a.attrelid = (SELECT c.oid FROM pg_class c JOIN pg_namespace n ON n.oid = c.relnamespace "
        "WHERE n.nspname = %s AND c.relname = %s) AND a.attnum > 0 AND NOT a.attisdropped ORDER BY a.attnum",
        (schema, table),
    ).fetchall()


def read_table(dsn: str, table: str) -> tuple[Any, str, str]:
    """Read a register table or view as text cells, read-only.

    Returns the :class:`~screening.io.readers.RawRegister`, a name for the source (no
    credentials) and the SHA-256 of its content (so that the same content is recognised).
    The rows are ordered by every column's text, so the same content reads the same way.
    """
    import psycopg

    from screening.io.readers import RawRegister

    want_schema, want_table = split_table(table)
    try:
        rows, cols, geoms, schema, name = _fetch(dsn, want_schema, want_table)
    except psycopg.Error as exc:
        raise RegisterError(
            f"{masked(dsn)}: could not read {table!r} ({_scrub(str(exc).strip(), dsn)})"
        ) from None
    frame = pd.DataFrame(rows, columns=[c for c, _ in cols], dtype=object).fillna("")
    if len(geoms) == 1 and geoms[0] != "geometry":
        frame = frame.rename(columns={geoms[0]: "geometry"})
    digest = hashlib.sha256(frame.to_csv(index=False).encode("utf-8")).hexdigest()
    frame["row"] = np.arange(len(frame)) + 1
    label = f"{schema}.{name}"
    crs = "EPSG:4326" if geoms else None
    notes = [f"read table {label} from {masked(dsn)}: {len(frame)} rows, ordered by every column"]
    return RawRegister(frame, Path(label), crs=crs, notes=notes), f"{label} ({masked(dsn)})", digest


def _fetch(dsn: str, want_schema: str | None, want_table: str) -> tuple[list, list, list, str, str]:
    """Every row as text (geometry as WKT in WGS84), the columns and the geometry columns."""
    from psycopg import sql

    with connect(dsn) as con:
        con.read_only = True
        schema, name = _relation(con, want_schema, want_table)
        cols = _columns(con, schema, name)
        geoms = [c for c, t in cols if t in ("geometry", "geography")]
        select = []
        for c, t in cols:
            ident = sql.Identifier(c)
            if t == "geography":
                select.append(sql.SQL("ST_AsText({})").format(ident))
            elif t == "geometry":  # in WGS84 when its SRID is known, as the GIS reader does
                select.append(
                    sql.SQL(
                        "ST_AsText(CASE WHEN ST_SRID({0}) > 0 THEN ST_Transform({0}, 4326) ELSE {0} END)"
                    ).format(ident)
                )
            else:
                select.append(sql.SQL("{}::text").format(ident))
        order = sql.SQL(", ").join(sql.SQL(str(i + 1)) for i in range(len(cols)))  # output positions
        query = sql.SQL("SELECT {} FROM {} ORDER BY {}").format(
            sql.SQL(", ").join(select), sql.Identifier(schema, name), order
        )
        rows = con.execute(query).fetchall()
    return rows, cols, geoms, schema, name


# ------------------------------------------------------------------ writing


def _pg_type(series: pd.Series) -> str:
    kind = series.dtype.kind
    if kind == "b":
        return "boolean"
    if kind in "iu":
        return "bigint"
    if kind == "f":
        return "double precision"
    if kind == "M":
        return "timestamp"
    return "text"


def _value(v: Any) -> Any:
    if v is None or v is pd.NA or v is pd.NaT:
        return None
    if isinstance(v, (np.floating, float)):
        return None if np.isnan(v) else float(v)  # infinity is kept: PostgreSQL stores it
    if isinstance(v, np.bool_):
        return bool(v)
    if isinstance(v, np.integer):
        return int(v)
    if isinstance(v, pd.Timestamp):
        return v.to_pydatetime()
    return v


def _ewkb(geometry: np.ndarray) -> list[str | None]:
    return [
        None if g is None else shapely.to_wkb(shapely.set_srid(g, 4326), hex=True, include_srid=True)
        for g in geometry
    ]


def _replace_table(
    cur: Any, schema: str, table: str, frame: pd.DataFrame, geometry: np.ndarray | None
) -> None:
    """Drop and re-create one table of the latest run, then COPY the rows in."""
    from psycopg import sql

    target = sql.Identifier(schema, table)
    cols: list[sql.Composable] = [
        sql.SQL("{} {}").format(sql.Identifier(c), sql.SQL(_pg_type(frame[c]))) for c in frame.columns
    ]
    if geometry is not None:
        cols.append(sql.SQL("geom geometry(Geometry, 4326)"))
    cur.execute(sql.SQL("DROP TABLE IF EXISTS {}").format(target))
    cur.execute(sql.SQL("CREATE TABLE {} ({})").format(target, sql.SQL(", ").join(cols)))
    names = [*frame.columns, *(["geom"] if geometry is not None else [])]
    _copy(cur, target, names, frame, geometry)


def _copy(cur: Any, target: Any, names: list[str], frame: pd.DataFrame, geometry: np.ndarray | None) -> None:
    from psycopg import sql

    statement = sql.SQL("COPY {} ({}) FROM STDIN").format(
        target, sql.SQL(", ").join(map(sql.Identifier, names))
    )
    geoms = _ewkb(geometry) if geometry is not None else None
    with cur.copy(statement) as copy:
        for i, row in enumerate(frame.itertuples(index=False, name=None)):
            values = [_value(v) for v in row]
            copy.write_row([*values, geoms[i]] if geoms is not None else values)


def _ensure_history(cur: Any, schema: str, run_columns: dict[str, str], history: pd.DataFrame) -> None:
    from psycopg import sql

    runs = sql.Identifier(schema, "runs")
    cols = [sql.SQL("{} {}").format(sql.Identifier(c), sql.SQL(t)) for c, t in run_columns.items()]
    cur.execute(
        sql.SQL("CREATE TABLE IF NOT EXISTS {} ({}, recorded_at timestamptz DEFAULT now())").format(
            runs, sql.SQL(", ").join(cols)
        )
    )
    walls = sql.Identifier(schema, "wall_history")
    cur.execute(sql.SQL("CREATE TABLE IF NOT EXISTS {} (geom geometry(Geometry, 4326))").format(walls))
    for c in history.columns:  # columns added since the table was made
        cur.execute(
            sql.SQL("ALTER TABLE {} ADD COLUMN IF NOT EXISTS {} {}").format(
                walls, sql.Identifier(c), sql.SQL(_pg_type(history[c]))
            )
        )


def write_run(
    dsn: str,
    schema: str,
    *,
    run: dict[str, Any],
    run_columns: dict[str, str],
    walls: pd.DataFrame,
    results: pd.DataFrame,
    geometry: np.ndarray,
    history: pd.DataFrame,
) -> bool:
    """Write a run's walls, results and history rows in one transaction.

    ``history`` holds the rows of ``wall_history`` (``run_id`` first), in the order of
    ``geometry``. Returns False when a run with the same input and settings was already in
    the history (the latest tables are still replaced; the history is not written twice).
    """
    import psycopg
    from psycopg import sql

    identifier(schema, "--db-schema")
    try:
        with connect(dsn) as con, con.transaction(), con.cursor() as cur:
            cur.execute(sql.SQL("CREATE SCHEMA IF NOT EXISTS {}").format(sql.Identifier(schema)))
            cur.execute("CREATE EXTENSION IF NOT EXISTS postgis")
            _ensure_history(cur, schema, run_columns, history)
            _replace_table(cur, schema, "walls", walls, geometry)
            _replace_table(cur, schema, "results", results, None)
            cur.execute(
                sql.SQL(
                    "SELECT run_id FROM {} WHERE input_sha256 = %s AND settings_sha256 = %s LIMIT 1"
                ).format(sql.Identifier(schema, "runs")),
                (run["input_sha256"], run["settings_sha256"]),
            )
            if cur.fetchone() is not None:
                return False
            names = list(run_columns)
            cur.execute(
                sql.SQL("INSERT INTO {} ({}) VALUES ({})").format(
                    sql.Identifier(schema, "runs"),
                    sql.SQL(", ").join(map(sql.Identifier, names)),
                    sql.SQL(", ").join(sql.Placeholder() * len(names)),
                ),
                [_value(run.get(c)) for c in names],
            )
            _copy(cur, sql.Identifier(schema, "wall_history"), [*history.columns, "geom"], history, geometry)
    except psycopg.Error as exc:
        raise ScreeningError(
            f"{masked(dsn)}: the results were not written, the previous ones stand "
            f"({_scrub(str(exc).strip(), dsn)})"
        ) from None
    return True
