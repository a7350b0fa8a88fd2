"""One register, three forms (canonical CSV, the owner's .xlsx in mm with a mapping file, a
GeoPackage), identical results; the blank template reads back."""

from __future__ import annotations

from pathlib import Path

import geopandas as gpd
import openpyxl
import pandas as pd
from typer.testing import CliRunner

from screening.cli import app
from screening.io import load_register
from screening.io.locate import locate
from screening.prepare import prepare

runner = CliRunner()
SAMPLE = Path(__file__).resolve().parents[1] / "sample_inventory"


def test_csv_owner_xlsx_and_geopackage_give_identical_results(tmp_path: Path) -> None:
    owner = SAMPLE / "register_2025.xlsx"
    mapping = SAMPLE / "mapping.toml"
    loaded = load_register(owner, mapping=mapping)
    canonical = loaded.frame.drop(columns=["row"])
    canonical.to_csv(tmp_path / "canonical.csv", index=False)
    # the GeoPackage: the same rows with their location as geometry (WGS84)
    typed = prepare(loaded.frame).walls  # every 2025 row is valid, in the same order
    assert len(typed) == len(canonical)
    geometry, _ = locate(typed, "EPSG:27700")
    gdf = gpd.GeoDataFrame(
        canonical.drop(columns=["geometry", "easting", "northing", "lat", "lon"], errors="ignore"),
        geometry=gpd.GeoSeries(list(geometry), crs="EPSG:4326"),
    )
    gdf.to_file(tmp_path / "register.gpkg", layer="walls", driver="GPKG", engine="pyogrio")
    # canonical headers need no mapping; the file only names the CRS of easting/northing
    (tmp_path / "crs.toml").write_text('[register]\ncrs = "EPSG:27700"\n')
    outs = {}
    for name, args in {
        "xlsx": [str(owner), "-m", str(mapping)],
        "csv": [str(tmp_path / "canonical.csv"), "-m", str(tmp_path / "crs.toml")],
        "gpkg": [str(tmp_path / "register.gpkg")],
    }.items():
        result = runner.invoke(app, ["run", *args, "-o", str(tmp_path / name), "--no-history"])
        assert result.exit_code == 0, (name, result.output)
        outs[name] = pd.read_csv(tmp_path / name / "results.csv")
    pd.testing.assert_frame_equal(outs["xlsx"], outs["csv"])
    pd.testing.assert_frame_equal(outs["xlsx"], outs["gpkg"])
    walls = {n: pd.read_csv(tmp_path / n / "walls.csv") for n in outs}
    for n in ("csv", "gpkg"):
        pd.testing.assert_frame_equal(
            walls["xlsx"].drop(columns=["located"]), walls[n].drop(columns=["located"])
        )
    # the same types reach the GeoPackage output whatever the source
    a = gpd.read_file(tmp_path / "xlsx" / "walls.gpkg", layer="walls_points")
    b = gpd.read_file(tmp_path / "gpkg" / "walls.gpkg", layer="walls_points")
    assert dict(a.dtypes.astype(str)) == dict(b.dtypes.astype(str))


def test_template_has_headers_notes_lists_and_a_guide(tmp_path: Path) -> None:
    target = tmp_path / "register.xlsx"
    result = runner.invoke(app, ["template", str(target)])
    assert result.exit_code == 0, result.output
    book = openpyxl.load_workbook(target)
    assert {"Walls", "Guide"} <= set(book.sheetnames)
    walls = book["Walls"]
    headers = [c.value for c in walls[1]]
    assert headers[:4] == ["wall_id", "name", "lat", "lon"] and "surcharge_kpa" in headers
    assert "kPa" in walls.cell(1, headers.index("surcharge_kpa") + 1).comment.text
    lists = [dv for dv in walls.data_validations.dataValidation if dv.type == "list"]
    assert len(lists) == 5  # material, foundation, drainage, consequence, dimensions_source
    guide = {r[0]: r for r in book["Guide"].iter_rows(min_row=2, values_only=True) if r[0]}
    assert guide["height_m"][2] == "yes" and "working" in guide["drainage"][1]
    # filled in by an owner, it screens with no mapping file
    walls.append(["T-1", "test", 53.7, -1.9, None, None, None, 3.0, 2.0, 0.8])
    book.save(tmp_path / "filled.xlsx")
    result = runner.invoke(
        app, ["run", str(tmp_path / "filled.xlsx"), "-o", str(tmp_path / "o"), "--no-history"]
    )
    assert result.exit_code == 0, result.output
    assert list(pd.read_csv(tmp_path / "o" / "walls.csv").wall_id) == ["T-1"]


def test_rows_of_blanks_and_white_space_are_layout_not_walls() -> None:
    # common practice, no source: a spreadsheet row holding only spaces or tabs is an empty row;
    # one with a number anywhere in it (even after blank cells) is a wall's row
    import numpy as np

    from screening.io.readers import _space_rows

    cells = np.array(
        [
            ["W1", 3.0, None],
            ["  ", None, "\t"],  # spaces and a tab: layout
            ["", np.nan, " "],  # layout
            [" ", None, 2.5],  # a number in the last column: a row to read
            [None, None, None],  # empty (dropped before: not among the rows asked about)
        ],
        dtype=object,
    )
    empty = (cells == "") | pd.isna(cells)
    rows = ~empty.all(axis=1)
    assert _space_rows(cells, empty, rows).tolist() == [1, 2]
