"""PostGIS in and out against a real PostgreSQL server with PostGIS (marker ``postgis``).

The server is Debian's (``postgresql``, ``postgresql-15-postgis-3``, installed by ``.ci/run``),
started in a temporary folder by tests/postgis_server.py. No mocks.
"""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from typer.testing import CliRunner

from screening.cli import app
from screening.demo import sample_paths
from screening.io import load_register
from tests import postgis_server as pg

pytestmark = pytest.mark.postgis
runner = CliRunner()
psycopg = pytest.importorskip("psycopg")
from psycopg import sql  # noqa: E402


@pytest.fixture(scope="module")
def dsn() -> str:
    if pg.bindir() is None or not pg.postgis_installed():
        pytest.skip("no PostgreSQL with PostGIS here (Debian's postgresql-15-postgis-3; .ci/run installs it)")
    with pg.postgis_server() as url:
        yield url


def put_register(dsn: str, schema: str, table: str, frame: pd.DataFrame) -> None:
    """A register table as an owner keeps one: numbers as double precision, the rest as text."""
    with psycopg.connect(dsn) as con, con.cursor() as cur:
        cur.execute(sql.SQL("CREATE SCHEMA IF NOT EXISTS {}").format(sql.Identifier(schema)))
        numeric = {
            c: pd.to_numeric(frame[c], errors="coerce").notna().sum() == frame[c].notna().sum() for c in frame
        }
        cols = sql.SQL(", ").join(
            sql.SQL("{} {}").format(sql.Identifier(c), sql.SQL("double precision" if numeric[c] else "text"))
            for c in frame.columns
        )
        target = sql.Identifier(schema, table)
        cur.execute(sql.SQL("DROP TABLE IF EXISTS {}").format(target))
        cur.execute(sql.SQL("CREATE TABLE {} ({})").format(target, cols))
        names = sql.SQL(", ").join(map(sql.Identifier, frame.columns))
        with cur.copy(sql.SQL("COPY {} ({}) FROM STDIN").format(target, names)) as copy:
            for row in frame.itertuples(index=False):
                copy.write_row([None if v is None or v == "" or (isinstance(v, float) and np.isnan(v)) else
                                (float(v) if numeric[c] else str(v)) for c, v in zip(frame.columns, row, strict=True)])  # fmt: skip


def owner_cells(year: int) -> pd.DataFrame:
    register, mapping = sample_paths(year)
    raw = load_register(register, mapping=mapping).raw.frame.drop(columns="row")
    return raw.astype(object).where(raw.notna(), None)


def query(dsn: str, text: sql.Composable | str, params: tuple = ()) -> list[tuple]:
    with psycopg.connect(dsn) as con:
        return con.execute(text, params).fetchall()


def cli(*args: str) -> object:
    result = runner.invoke(app, list(args))
    assert pg.PASSWORD not in result.output  # never printed, whatever happened
    return result


def test_round_trip_matches_the_file_and_lands_in_the_database(dsn: str, tmp_path: Path) -> None:
    register, mapping = sample_paths(2025)
    put_register(dsn, "assets", "Wall Register", owner_cells(2025))
    from_file = cli(
        "run", str(register), "--mapping", str(mapping), "--out", str(tmp_path / "f"), "--no-history"
    )
    assert from_file.exit_code in (0, 1), from_file.output
    res = cli("run", dsn, "--table", "assets.Wall Register", "--mapping", str(mapping),
              "--out", str(tmp_path / "d"), "--no-history", "--to-db", dsn)  # fmt: skip
    assert res.exit_code == from_file.exit_code, res.output
    assert "database" in res.output and "wall_owner@127.0.0.1" in res.output
    a = pd.read_csv(tmp_path / "f" / "walls.csv", dtype={"wall_id": str})
    b = pd.read_csv(tmp_path / "d" / "walls.csv", dtype={"wall_id": str})
    pd.testing.assert_frame_equal(a, b)  # the same walls, figures and ranking from the table
    walls = query(
        dsn, "SELECT wall_id, rank, margin_class, ST_SRID(geom), ST_GeometryType(geom) FROM wallscreen.walls"
    )
    assert sorted(r[0] for r in walls) == sorted(a["wall_id"])
    assert {r[3] for r in walls if r[3] is not None} == {4326}
    assert sum(r[4] is not None for r in walls) == int(a["located"].sum())
    (n_results,) = query(dsn, "SELECT count(*) FROM wallscreen.results")[0]
    assert n_results == 3 * len(a)
    # infinity kept where the resultant leaves the base, as in walls.csv
    (n_inf,) = query(dsn, "SELECT count(*) FROM wallscreen.walls WHERE utilisation = 'Infinity'")[0]
    assert n_inf == int(np.isinf(a["utilisation"]).sum()) > 0


def test_two_runs_share_one_history(dsn: str, tmp_path: Path) -> None:
    for year in (2025, 2026):
        register, mapping = sample_paths(year)
        res = cli("run", str(register), "--mapping", str(mapping), "--out", str(tmp_path / str(year)),
                  "--to-db", dsn, "--db-schema", "team")  # fmt: skip
        assert res.exit_code in (0, 1), res.output
    runs = query(dsn, "SELECT run_id, input_file FROM team.runs ORDER BY recorded_at")
    assert [r[1] for r in runs] == ["register_2025.xlsx", "register_2026.xlsx"]
    per_run = dict(query(dsn, "SELECT run_id, count(*) FROM team.wall_history GROUP BY run_id"))
    for year, (run_id, _) in zip((2025, 2026), runs, strict=True):
        assert per_run[run_id] == len(pd.read_csv(tmp_path / str(year) / "walls.csv"))
    # the latest tables hold the latest run only
    assert {r[0] for r in query(dsn, "SELECT DISTINCT run_id FROM team.walls")} == {runs[-1][0]}
    # the same input and settings again: recognised, not recorded twice
    register, mapping = sample_paths(2026)
    res = cli("run", str(register), "--mapping", str(mapping), "--out", str(tmp_path / "again"),
              "--to-db", dsn, "--db-schema", "team")  # fmt: skip
    assert "not recorded twice" in res.output
    assert len(query(dsn, "SELECT run_id FROM team.runs")) == 2


KILLER = """
import os, signal, sys
from screening.io import postgis
real = postgis._copy
def copy_then_die(cur, target, names, frame, geometry):
    real(cur, target, names, frame, geometry)
    if "results" in str(target.as_string(cur)):
        os.kill(os.getpid(), signal.SIGKILL)  # killed mid-write: walls copied, results written
postgis._copy = copy_then_die
from screening.cli import app
sys.argv = ["wallscreen", *sys.argv[1:]]
app()
"""


def test_a_run_killed_mid_write_leaves_the_previous_results(dsn: str, tmp_path: Path) -> None:
    register, mapping = sample_paths(2025)
    res = cli("run", str(register), "--mapping", str(mapping), "--out", str(tmp_path / "a"),
              "--to-db", dsn, "--db-schema", "killed")  # fmt: skip
    assert res.exit_code in (0, 1), res.output
    before = query(dsn, "SELECT run_id, wall_id, utilisation FROM killed.walls ORDER BY wall_id")
    runs_before = query(dsn, "SELECT run_id FROM killed.runs")
    register, mapping = sample_paths(2026)
    done = subprocess.run(
        [sys.executable, "-c", KILLER, "run", str(register), "--mapping", str(mapping),
         "--out", str(tmp_path / "b"), "--to-db", dsn, "--db-schema", "killed"],
        capture_output=True, text=True, timeout=600, check=False, env=dict(os.environ),
    )  # fmt: skip
    assert done.returncode == -9, done.stderr[-2000:]
    assert (tmp_path / "b" / "walls.csv").exists()  # it got as far as the database
    after = query(dsn, "SELECT run_id, wall_id, utilisation FROM killed.walls ORDER BY wall_id")
    assert after == before and len(after) > 0
    assert query(dsn, "SELECT run_id FROM killed.runs") == runs_before


HOSTILE_TABLE = 'walls"; DROP TABLE wallscreen.runs; --'
HOSTILE_SCHEMA = "out'); DELETE FROM x; --"


def test_hostile_table_names_and_register_text(dsn: str, tmp_path: Path) -> None:
    cells = owner_cells(2025)
    name_col = "Location"  # the sample mapping: "Location" = "name"
    cells.loc[0, name_col] = "'); DROP TABLE wallscreen.walls; --"
    cells.loc[1, name_col] = 'x"; DELETE FROM wallscreen.runs; -- \\ \t tab'
    put_register(dsn, "public", HOSTILE_TABLE, cells)
    _, mapping = sample_paths(2025)
    before = query(dsn, "SELECT count(*) FROM pg_tables")
    res = cli("run", dsn, "--table", f"public.{HOSTILE_TABLE}", "--mapping", str(mapping), "--out", str(tmp_path / "h"),
              "--no-history", "--to-db", dsn, "--db-schema", HOSTILE_SCHEMA)  # fmt: skip
    assert res.exit_code in (0, 1), res.output
    # nothing ran as SQL: every table is still there, and the text came back as written
    assert query(dsn, "SELECT count(*) FROM pg_tables") >= before
    names = {
        r[0]
        for r in query(dsn, sql.SQL("SELECT name FROM {}").format(sql.Identifier(HOSTILE_SCHEMA, "walls")))
    }
    assert {cells.loc[0, name_col], cells.loc[1, name_col]} <= names
    # names that cannot be PostgreSQL identifiers are refused with a clear message
    bad = cli("run", dsn, "--table", "walls\x00x", "--out", str(tmp_path / "x"))
    assert bad.exit_code == 2 and "control characters" in bad.output
    long = cli("run", dsn, "--table", "w" * 64, "--out", str(tmp_path / "x"))
    assert long.exit_code == 2 and "63 bytes" in long.output
    missing = cli("run", dsn, "--table", "no_such_walls", "--out", str(tmp_path / "x"))
    assert missing.exit_code == 2 and "no table or view 'no_such_walls'" in missing.output


def test_credentials_are_never_printed(dsn: str, tmp_path: Path) -> None:
    wrong = dsn.replace("@127.0.0.1:", "@127.0.0.1:1").rsplit("/", 1)[0] + "/registers"
    res = cli("run", wrong, "--table", "walls", "--out", str(tmp_path / "x"))
    assert res.exit_code == 2 and "could not connect" in res.output
    assert "wall_owner@127.0.0.1" in res.output  # the masked DSN names where it tried
    # the password from the environment, not the DSN
    env_dsn = dsn.replace(f":{pg.PASSWORD}@", "@")
    register, mapping = sample_paths(2025)
    old = os.environ.get("PGPASSWORD")
    os.environ["PGPASSWORD"] = pg.PASSWORD
    try:
        ok = cli("run", str(register), "--mapping", str(mapping), "--out", str(tmp_path / "e"),
                 "--no-history", "--to-db", env_dsn, "--db-schema", "from_env")  # fmt: skip
    finally:
        if old is None:
            os.environ.pop("PGPASSWORD")
        else:
            os.environ["PGPASSWORD"] = old
    assert ok.exit_code in (0, 1), ok.output
    assert query(dsn, "SELECT count(*) FROM from_env.walls")[0][0] > 0
