"""The workbook (read back with openpyxl) and the GeoPackage (read back with geopandas)."""

from __future__ import annotations

from pathlib import Path

import geopandas as gpd
import openpyxl
import pandas as pd
import pytest
from typer.testing import CliRunner

from screening.cli import app
from tests.conftest import worked_wall

runner = CliRunner()


@pytest.fixture(scope="module")
def run_dir(tmp_path_factory) -> Path:
    tmp = tmp_path_factory.mktemp("outputs")
    rows = [
        worked_wall(
            "A-1",
            2.0,
            name='=HYPERLINK("http://x.invalid","click")',
            lat=53.7,
            lon=-1.9,
            drainage="blocked",
            condition_rating=4,
            consequence="railway",
        ),
        worked_wall("+B", 1.5, name="-2+3", lat=53.71, lon=-1.91, drainage="working"),
        worked_wall("@C", 2.5, name="@SUM(A1)", drainage="partial"),  # no location
        worked_wall("BAD", 2.0, top_width_m=3.0),
    ]
    reg = tmp / "reg.csv"
    pd.DataFrame(rows).to_csv(reg, index=False)
    result = runner.invoke(app, ["run", str(reg), "--out", str(tmp / "out")])
    assert result.exit_code == 1, result.output
    return tmp / "out"


def test_workbook_sheets_and_layout(run_dir: Path) -> None:
    book = openpyxl.load_workbook(run_dir / "report.xlsx")
    assert book.sheetnames == [
        "Look first",
        "Ranked walls",
        "What to measure next",
        "Results by case",
        "Rejected rows",
        "Assumed defaults",
        "Assumed per wall",
        "Settings",
        "Method and cautions",
    ]
    ranked = book["Ranked walls"]
    assert ranked.freeze_panes == "C2"
    assert ranked.auto_filter.ref is not None and ranked.auto_filter.ref.startswith("A1")
    headers = [c.value for c in ranked[1]]
    assert "Utilisation (worst) [-]" in headers and "Height [m]" in headers
    # rank 1 first, with the band in words
    assert ranked["A2"].value == 1 and ranked["B2"].value == "A-1"
    band_col = headers.index("Priority band") + 1
    assert ranked.cell(2, band_col).value in (
        "Inspect first",
        "Inspect soon",
        "Routine inspection",
        "Low concern",
    )
    util_col = headers.index("Utilisation drained [-]") + 1
    assert ranked.cell(2, util_col).number_format.endswith(";0.00")  # 999 and over shown "≥ 999"
    # conditional colouring on the utilisation and band columns
    assert len(ranked.conditional_formatting) >= 2


def test_register_text_is_inert(run_dir: Path) -> None:
    book = openpyxl.load_workbook(run_dir / "report.xlsx")
    ranked = book["Ranked walls"]
    texts = {}
    for row in ranked.iter_rows(min_row=2):
        texts[row[1].value] = row[2]
    for wall in ("A-1", "+B", "@C"):
        assert texts[wall].data_type == "s"  # a string cell, never a formula
    assert texts["A-1"].value.startswith("=HYPERLINK")
    assert texts["+B"].value == "-2+3"
    for sheet in book.worksheets:
        for row in sheet.iter_rows():
            for cell in row:
                assert cell.data_type != "f", (sheet.title, cell.coordinate)


def test_rejected_rows_defaults_and_settings(run_dir: Path) -> None:
    book = openpyxl.load_workbook(run_dir / "report.xlsx")
    rejected = list(book["Rejected rows"].iter_rows(min_row=4, values_only=True))
    assert any(r[1] == "BAD" and r[0] == 5 and r[4] == "error" for r in rejected)
    defaults = list(book["Assumed defaults"].iter_rows(min_row=2, values_only=True))
    assert not any(r[0] == "surcharge_kpa" for r in defaults)  # every test wall records q
    assert any(r[0] == "surveyed water_height_m" and r[3] >= 1 for r in defaults)
    per_wall = {r[0]: r[2] for r in book["Assumed per wall"].iter_rows(min_row=2, values_only=True)}
    assert "surveyed water_height_m = 1.5" in per_wall["@C"]  # partial drainage: half of H_r = 3 m
    settings = {r[0]: r[1] for r in book["Settings"].iter_rows(values_only=True) if r[0]}
    assert settings["input file"] == "reg.csv" and len(settings["input SHA-256"]) == 64
    assert settings["fos_sliding_required"] == 1.5
    method = " ".join(str(c) for r in book["Method and cautions"].iter_rows(values_only=True) for c in r if c)
    assert "qualified engineer" in method


def test_geopackage_reopens_in_geopandas(run_dir: Path) -> None:
    gdf = gpd.read_file(run_dir / "walls.gpkg", layer="walls_points")
    assert gdf.crs.to_epsg() == 4326
    assert set(gdf.wall_id) == {"A-1", "+B"}
    unlocated = gpd.read_file(run_dir / "walls.gpkg", layer="walls_unlocated")
    assert list(unlocated.wall_id) == ["@C"]
    located = gdf.set_index("wall_id")
    assert abs(located.loc["A-1", "geometry"].y - 53.7) < 1e-9
    walls = pd.read_csv(run_dir / "walls.csv")
    merged = walls.merge(pd.DataFrame(gdf.drop(columns="geometry")), on="wall_id", suffixes=("", "_g"))
    assert (merged["rank"] == merged["rank_g"]).all()
    assert (merged["priority_band"] == merged["priority_band_g"]).all()


def test_outputs_are_replaced_atomically(run_dir: Path, monkeypatch) -> None:
    # a writer that fails half-way leaves the previous good file in place, and no temporary file
    from screening.io import writers

    target = run_dir / "walls.csv"
    before = target.read_bytes()

    def broken(tmp: Path) -> None:
        tmp.write_text("half a fi")
        raise RuntimeError("disk full")

    with pytest.raises(RuntimeError):
        writers.write_atomic(target, broken)
    assert target.read_bytes() == before
    assert not [p for p in run_dir.iterdir() if p.name.endswith((".part.csv", ".part"))]


def test_sheets_longer_than_excel_allows_are_cut_with_a_note(tmp_path: Path, monkeypatch) -> None:
    # a worksheet holds 1,048,576 rows (Excel's limit); a smaller limit stands in for it here
    import screening.outputs.workbook as report
    from screening import evaluate

    monkeypatch.setattr(report, "EXCEL_MAX_ROWS", 5)
    run = evaluate(pd.DataFrame([worked_wall(f"W{i}", 2.0) for i in range(8)]))
    report.write_workbook(
        tmp_path / "r.xlsx",
        walls=run.walls,
        results=run.results,
        problems=run.problems,
        assumptions=run.prepared.assumptions,
        settings={},
        provenance=[("tool", "test")],
    )
    book = openpyxl.load_workbook(tmp_path / "r.xlsx")
    assert book["Ranked walls"].max_row == 5
    notes = [r[1] for r in book["Settings"].iter_rows(values_only=True) if r[0] == "note"]
    assert any("'Ranked walls' shows the first 4 of 8 rows" in n for n in notes)


def _cells(path: Path) -> dict[str, list[tuple[object, ...]]]:
    book = openpyxl.load_workbook(path, read_only=True)
    return {ws.title: [tuple(row) for row in ws.iter_rows(values_only=True)] for ws in book.worksheets}


def test_the_workbook_written_in_a_worker_process_is_the_same(tmp_path: Path, monkeypatch) -> None:
    # large registers have the workbook written in a spawned worker beside the other outputs:
    # the same sheets and cells as when it is written in the run's own process
    from screening import job as job_module
    from tests.reference.make_reference import sample_job

    job = sample_job()
    job_module.write_outputs(job, tmp_path / "here")
    monkeypatch.setattr(job_module, "WORKBOOK_PROCESS_FROM", 0)
    job.history = None  # the history was recorded by the first write
    job_module.write_outputs(job, tmp_path / "worker")
    here, worker = _cells(tmp_path / "here" / "report.xlsx"), _cells(tmp_path / "worker" / "report.xlsx")
    assert list(worker) == list(here)
    for name in here:
        assert worker[name] == here[name], name
    assert not list((tmp_path / "worker").glob("*.part*"))
