"""The demo: the whole job on the sample, every output present and consistent."""

from __future__ import annotations

import json
import re
from pathlib import Path

import openpyxl
import pandas as pd
from typer.testing import CliRunner

from screening.cli import app
from screening.outputs import sheet_filename
from screening.outputs.geopackage import read_geopackage

runner = CliRunner()


def test_demo_writes_every_output_consistently(tmp_path: Path) -> None:
    out = tmp_path / "maps"
    result = runner.invoke(app, ["demo", "--out", str(out)])
    assert result.exit_code == 0, result.output
    for name in (
        "map.html",
        "report.xlsx",
        "walls.gpkg",
        "walls.csv",
        "results.csv",
        "problems.csv",
        "assumptions.csv",
        "assumption_sources.csv",
        "changes.csv",
        "history.gpkg",
        "run.json",
    ):
        assert (out / name).exists(), name
    assert "Open first" in result.output and "map.html" in result.output

    walls = pd.read_csv(out / "walls.csv")
    # the walls on the map are the walls in the workbook (those with a location)
    html = (out / "map.html").read_text()
    config = re.search(r"window\.wallscreenConfig = (\{.*?\});\n", html, re.S)
    data = json.loads(config.group(1))["data"]
    on_map = set(data["id"])
    book = openpyxl.load_workbook(out / "report.xlsx")
    ranked = list(book["Ranked walls"].iter_rows(min_row=2, values_only=True))
    in_book = {r[1] for r in ranked}
    headers = [c.value for c in book["Ranked walls"][1]]
    located_col = headers.index("On the map")
    assert on_map == {r[1] for r in ranked if r[located_col]}
    assert in_book == set(walls.wall_id)
    assert len(in_book - on_map) == 1  # the one wall without a location
    gpkg, _ = read_geopackage(out / "walls.gpkg")  # lines, points and the unlocated walls
    assert set(gpkg.wall_id) == in_book

    # the flagged walls have sheets, and only they
    results = pd.read_csv(out / "results.csv")
    flagged = set(results.loc[~results.in_middle_third | (results.bearing_utilisation > 1), "wall_id"])
    sheets = {p.name for p in (out / "sheets").glob("*.html")}
    assert sheets == {sheet_filename(w) for w in flagged}

    # the comparison of the two surveys
    changes = pd.read_csv(out / "changes.csv").set_index("wall_id")
    assert changes.at["HV-121", "status"] == "added" and changes.at["HV-099", "status"] == "removed"
    assert "Changed since the last run" in html
    # the validation report: the deliberate mistakes
    problems = pd.read_csv(out / "problems.csv")
    assert {"HV-017", "HV-044", "HV-063", "HV-081", "HV-095"} <= set(
        problems.loc[problems.severity == "error", "wall_id"]
    )
