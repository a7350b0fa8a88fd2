"""Run history, comparison of two surveys, lean rate, and concurrent writers."""

from __future__ import annotations

import math
import multiprocessing as mp
import sqlite3
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import pyogrio
import pytest
import shapely
from typer.testing import CliRunner

from screening.cli import app
from screening.history import lean_rates, list_runs, record_run

runner = CliRunner()
ROOT = Path(__file__).resolve().parents[1]
SAMPLE = ROOT / "sample_inventory"
REJECTED_2026 = {"HV-017", "HV-044", "HV-081", "HV-095"}


@pytest.fixture(scope="module")
def two_surveys(tmp_path_factory) -> Path:
    out = tmp_path_factory.mktemp("surveys") / "out"
    for year in (2025, 2026):
        result = runner.invoke(
            app,
            [
                "run",
                str(SAMPLE / f"register_{year}.xlsx"),
                "-m",
                str(SAMPLE / "mapping.toml"),
                "-o",
                str(out),
            ],
        )
        assert result.exit_code in (0, 1), result.output
    return out


def _raw(year: int) -> pd.DataFrame:
    # the owner's file read directly (header on the second row), independent of the tool's reader
    frame = pd.read_excel(SAMPLE / f"register_{year}.xlsx", header=1, engine="calamine")
    return frame.drop_duplicates("Asset Ref").set_index("Asset Ref")


def test_exactly_the_survey_changes_are_reported(two_surveys: Path) -> None:
    changes = pd.read_csv(two_surveys / "changes.csv").set_index("wall_id")
    status = changes["status"]
    assert set(status[status == "added"].index) == {"HV-121"}
    assert set(status[status == "removed"].index) == {"HV-099"}
    assert set(status[status == "rejected"].index) == REJECTED_2026
    # inputs that differ between the two files, for walls screened in both
    a, b = _raw(2025), _raw(2026)
    kept = a.index.intersection(b.index).difference(list(REJECTED_2026))
    code = {"W": "working", "P": "partial", "B": "blocked", "U": "unknown", "weepholes blocked": "blocked"}
    expected = {
        "drainage": {w for w in kept if code[a.at[w, "Drainage"]] != code[b.at[w, "Drainage"]]},
        "lean_deg": {w for w in kept if a.at[w, "Lean at top (mm)"] != b.at[w, "Lean at top (mm)"]},
        "crack_height_m": {
            w
            for w in kept
            if not (pd.isna(a.at[w, "Crack height (mm)"]) and pd.isna(b.at[w, "Crack height (mm)"]))
            and a.at[w, "Crack height (mm)"] != b.at[w, "Crack height (mm)"]
        },
    }
    # HV-102's implausible new lean is one of the sample's deliberate mistakes (warned, kept)
    assert expected["lean_deg"] == {"HV-012", "HV-057", "HV-102"}
    assert expected["crack_height_m"] == {"HV-075"}
    inputs = changes["inputs_changed"].fillna("")
    for col, walls in expected.items():
        reported = {w for w in inputs.index if f"{col}:" in inputs[w]}
        assert reported == walls, col
    # nothing else is reported as an input change
    others = {w for w in inputs.index if inputs[w]} - set().union(*expected.values())
    assert others == set()
    assert set(status[status == "changed"].index) >= set().union(*expected.values())


def test_lean_rate_from_the_survey_dates(two_surveys: Path) -> None:
    # walls.csv holds 6 significant figures (README, "Outputs")
    walls = pd.read_csv(two_surveys / "walls.csv").set_index("wall_id")
    a, b = _raw(2025), _raw(2026)
    years = (pd.Timestamp("2026-06-18") - pd.Timestamp("2025-06-12")).days / 365.25
    for wall in ("HV-012", "HV-057"):
        h = b.at[wall, "Height (mm)"] / 1000
        lean = [math.degrees(math.atan(x.at[wall, "Lean at top (mm)"] / 1000 / h)) for x in (a, b)]
        rate = (lean[1] - lean[0]) / years
        assert walls.at[wall, "lean_rate_deg_per_year"] == pytest.approx(rate, rel=1e-5)
        assert walls.at[wall, "lean_rate_mm_per_year"] == pytest.approx(
            math.radians(rate) * h * 1000, rel=1e-5
        )
        assert bool(walls.at[wall, "lean_growing"])
        assert "lean growing" in walls.at[wall, "reason"]
    assert walls.at["HV-001", "lean_rate_deg_per_year"] == 0.0


def test_lean_rate_least_squares_against_numpy_polyfit() -> None:
    # three surveys: the slope of a least-squares line (numpy.polyfit as the reference)
    dates = pd.to_datetime(["2020-03-01", "2021-02-15", "2023-07-30"])
    lean = np.array([1.0, 1.3, 2.1])
    pts = pd.DataFrame({"wall_id": "W", "survey_date": dates, "lean_deg": lean, "height_m": 4.0})
    t = (dates - pd.Timestamp("2000-01-01")).days / 365.25
    assert lean_rates(pts).at["W", "lean_rate_deg_per_year"] == pytest.approx(np.polyfit(t, lean, 1)[0])


def test_history_reopens_in_geopandas_and_rerun_is_recognised(two_surveys: Path) -> None:
    hist = two_surveys / "history.gpkg"
    layer = gpd.read_file(hist, layer="wall_history")
    runs = pyogrio.read_dataframe(hist, layer="runs")
    assert len(runs) == 2 and list(runs.input_file) == ["register_2025.xlsx", "register_2026.xlsx"]
    assert layer.crs.to_epsg() == 4326
    assert set(layer.run_id) == set(runs.run_id)
    assert layer.geometry.notna().sum() > 200
    result = runner.invoke(
        app,
        [
            "run",
            str(SAMPLE / "register_2026.xlsx"),
            "-m",
            str(SAMPLE / "mapping.toml"),
            "-o",
            str(two_surveys),
        ],
    )
    assert "already screened with the same settings" in result.output
    assert len(list_runs(hist)) == 2


def test_compare_command_from_history_and_folders(two_surveys: Path, tmp_path: Path) -> None:
    result = runner.invoke(
        app, ["compare", "--history", str(two_surveys / "history.gpkg"), "-o", str(tmp_path / "c.csv")]
    )
    assert result.exit_code == 0, result.output
    assert "added 1" in result.output and "removed 1" in result.output and "rejected 4" in result.output
    other = tmp_path / "first"
    runner.invoke(
        app,
        [
            "run",
            str(SAMPLE / "register_2025.xlsx"),
            "-m",
            str(SAMPLE / "mapping.toml"),
            "-o",
            str(other),
            "--no-history",
        ],
    )
    result = runner.invoke(app, ["compare", str(other), str(two_surveys), "-o", str(tmp_path / "d.csv")])
    assert result.exit_code == 0, result.output
    folders = pd.read_csv(tmp_path / "d.csv").set_index("wall_id")
    assert folders.at["HV-121", "status"] == "added"
    assert "lean_deg" in folders.at["HV-012", "inputs_changed"]


def test_changes_on_the_map_and_in_the_workbook(two_surveys: Path) -> None:
    import openpyxl

    html = (two_surveys / "map.html").read_text()
    assert "Changed since the last run" in html
    book = openpyxl.load_workbook(two_surveys / "report.xlsx")
    rows = list(book["Changes since last run"].iter_rows(min_row=2, values_only=True))
    assert ("HV-121", "added") in {(r[0], r[1]) for r in rows}


def _writer(args: tuple[str, int, int]) -> str:
    path, k, n = args
    walls = pd.DataFrame(
        {
            "wall_id": [f"W{k}-{i}" for i in range(n)],
            "utilisation": np.arange(n) / n,
            "priority_band": "routine",
            "rank": np.arange(1, n + 1),
        }
    )
    geom = shapely.points(np.full(n, -1.9 + k / 100), np.linspace(53.7, 53.71, n))
    run = {
        "run_id": f"run{k}",
        "run_time": "2026-01-01T00:00:00",
        "input_file": f"f{k}.csv",
        "input_sha256": f"sha{k}",
        "settings_sha256": "s",
        "tool_version": "test",
        "settings": "{}",
        "n_walls": n,
        "n_rejected": 0,
    }
    return record_run(path, run=run, walls=walls, geometry=geom).run_id


def test_concurrent_runs_never_corrupt_the_history(tmp_path: Path) -> None:
    # several processes record runs into one new history at the same moment; SQLite's
    # write lock (BEGIN IMMEDIATE) serialises them
    path = str(tmp_path / "history.gpkg")
    n = 2000
    with mp.get_context("spawn").Pool(4) as pool:
        ids = pool.map(_writer, [(path, k, n) for k in range(8)])
    assert sorted(ids) == [f"run{k}" for k in range(8)]
    con = sqlite3.connect(path)
    assert con.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
    counts = dict(con.execute("SELECT run_id, count(*) FROM wall_history GROUP BY run_id").fetchall())
    con.close()
    assert counts == {f"run{k}": n for k in range(8)}
    layer = gpd.read_file(path, layer="wall_history")
    assert len(layer) == 8 * n and layer.geometry.notna().all()
