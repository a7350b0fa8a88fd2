"""walls.gpkg as a GIS opens it (a real QGIS, marker ``qgis``) and the Parquet outputs.

QGIS runs in Debian's own interpreter (``/usr/bin/python3`` with ``python3-qgis``), in a
subprocess with ``QT_QPA_PLATFORM=offscreen``: tests/qgis_check.py reports what QGIS sees.
"""

from __future__ import annotations

import json
import os
import sqlite3
import subprocess
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import pyarrow.parquet as pq
import pytest

from screening.demo import sample_paths
from screening.job import screen_file, write_outputs
from screening.outputs.geopackage import LINES, POINTS, UNLOCATED, UTILISATION_CAP, read_geopackage
from screening.priority import BAND_LABELS, BANDS

QGIS_PYTHON = "/usr/bin/python3"
CHECK = Path(__file__).with_name("qgis_check.py")


def qgis_available() -> bool:
    if not Path(QGIS_PYTHON).exists():
        return False
    probe = subprocess.run([QGIS_PYTHON, "-c", "import qgis.core"], capture_output=True, check=False)
    return probe.returncode == 0


def run_qgis_check(gpkg: Path, png: Path, size: int = 600) -> dict:
    env = dict(os.environ, QT_QPA_PLATFORM="offscreen", XDG_RUNTIME_DIR=str(png.parent))
    done = subprocess.run(
        [QGIS_PYTHON, str(CHECK), str(gpkg), str(png), str(size)],
        capture_output=True,
        text=True,
        env=env,
        timeout=300,
        check=False,
    )
    assert done.returncode == 0, done.stderr[-3000:]
    return json.loads(done.stdout.strip().splitlines()[-1])


@pytest.fixture(scope="module")
def sample_run(tmp_path_factory) -> tuple[Path, pd.DataFrame]:
    """The 2026 sample survey, every output written (no history)."""
    out = tmp_path_factory.mktemp("gis")
    register, mapping = sample_paths(2026)
    job = screen_file(register, mapping=mapping)
    write_outputs(job, out)
    return out, job.walls


def test_each_geometry_has_a_layer_with_a_declared_type(sample_run) -> None:
    out, walls = sample_run
    con = sqlite3.connect(out / "walls.gpkg")
    try:
        declared = dict(con.execute("SELECT table_name, geometry_type_name FROM gpkg_geometry_columns"))
        kinds = dict(con.execute("SELECT table_name, data_type FROM gpkg_contents"))
    finally:
        con.close()
    # GeoPackage 1.2 §2.1.5 and §2.4: features tables declare their geometry type; a table
    # without geometry is an "attributes" table
    assert declared == {LINES: "LINESTRING", POINTS: "POINT"}
    assert kinds[UNLOCATED] == "attributes" and kinds["layer_styles"] == "attributes"
    lines = gpd.read_file(out / "walls.gpkg", layer=LINES)
    points = gpd.read_file(out / "walls.gpkg", layer=POINTS)
    unlocated = gpd.read_file(out / "walls.gpkg", layer=UNLOCATED)
    assert set(lines.geom_type) == {"LineString"} and set(points.geom_type) == {"Point"}
    assert lines.crs.to_epsg() == 4326 and points.crs.to_epsg() == 4326
    # every wall in exactly one table, as many as walls.csv holds
    ids = [*lines.wall_id, *points.wall_id, *unlocated.wall_id]
    assert sorted(ids) == sorted(walls["wall_id"]) and len(ids) == len(set(ids))
    assert set(unlocated.wall_id) == set(walls.loc[~walls["located"], "wall_id"])


def test_classified_fields_are_numeric_and_never_blank(sample_run) -> None:
    out, walls = sample_run
    gis, _ = read_geopackage(out / "walls.gpkg")
    assert gis["margin_class"].dtype.kind == "i" and gis["utilisation_capped"].dtype.kind == "f"
    assert gis["margin_class"].notna().all() and gis["utilisation_capped"].notna().all()
    # the walls whose resultant leaves the base: utilisation infinite in walls.csv, blank in the
    # GeoPackage, but margin class 4 and capped utilisation 10 there
    outside = walls.loc[walls["state"] == "resultant_outside_base", "wall_id"]
    assert len(outside) > 0
    g = gis.set_index("wall_id")
    assert (g.loc[outside, "margin_class"] == 4).all()
    assert (g.loc[outside, "utilisation_capped"] == UTILISATION_CAP).all()
    assert g.loc[outside, "utilisation"].isna().all()
    w = walls.set_index("wall_id")
    finite = w.index[np.isfinite(w["utilisation"])]
    np.testing.assert_allclose(
        g.loc[finite, "utilisation_capped"], np.minimum(w.loc[finite, "utilisation"], UTILISATION_CAP)
    )


def test_rerender_reads_the_layers_back(sample_run) -> None:
    from screening.job import rerender_map

    out, walls = sample_run
    gis, geometry = read_geopackage(out / "walls.gpkg")
    assert list(gis["wall_id"]) == list(walls["wall_id"])  # rank order, as walls.csv
    assert sum(g is None for g in geometry) == int((~walls["located"]).sum())
    assert rerender_map(out).stat().st_size > 0


def test_parquet_reads_back_with_pyarrow_and_geopandas(sample_run) -> None:
    out, _walls = sample_run
    table = pq.read_table(out / "walls.parquet")
    geo = json.loads(table.schema.metadata[b"geo"])  # GeoParquet 1.x file metadata
    assert geo["primary_column"] == "geometry"
    assert geo["columns"]["geometry"]["encoding"] == "WKB"
    assert set(geo["columns"]["geometry"]["geometry_types"]) == {"LineString", "Point"}
    gdf = gpd.read_parquet(out / "walls.parquet")
    assert gdf.crs.to_epsg() == 4326
    csv = pd.read_csv(out / "walls.csv", dtype={"wall_id": str})
    assert list(gdf["wall_id"]) == list(csv["wall_id"])
    assert int(gdf.geometry.isna().sum()) == int((~csv["located"]).sum())
    # infinities stay infinite, as in the CSV
    # (the CSV holds 6 significant figures, the Parquet file the full double)
    np.testing.assert_allclose(
        gdf["utilisation"].to_numpy(), csv["utilisation"].to_numpy(dtype=float), rtol=1e-5
    )
    results = pq.read_table(out / "results.parquet").to_pandas()
    rcsv = pd.read_csv(out / "results.csv", dtype={"wall_id": str})
    assert list(results.columns) == list(rcsv.columns) and len(results) == len(rcsv) == 3 * len(csv)
    np.testing.assert_allclose(
        results["utilisation"], rcsv["utilisation"], rtol=0, atol=5e-4
    )  # results.csv holds utilisations to 0.001 (README, "Outputs")
    assert (results["state"].astype(str) == rcsv["state"]).all()


@pytest.mark.qgis
def test_qgis_opens_the_geopackage_styled_by_band(sample_run, tmp_path: Path) -> None:
    if not qgis_available():
        pytest.skip(f"{QGIS_PYTHON} cannot import qgis (Debian's python3-qgis; .ci/run installs it)")
    out, walls = sample_run
    png = tmp_path / "qgis.png"
    seen = run_qgis_check(out / "walls.gpkg", png)
    lines, points, unlocated = seen[LINES], seen[POINTS], seen[UNLOCATED]
    assert lines["valid"] and points["valid"] and unlocated["valid"]
    assert (lines["geometry"], points["geometry"]) == ("LineString", "Point")
    assert not unlocated["spatial"]
    # every wall counted once
    assert lines["features"] + points["features"] + unlocated["features"] == len(walls)
    assert sorted(lines["wall_ids"] + points["wall_ids"]) == sorted(walls.loc[walls["located"], "wall_id"])
    for layer in (lines, points):
        # the embedded default style, applied by QGIS on opening: one category per band
        assert layer["renderer"] == "categorizedSymbol" and layer["field"] == "priority_band"
        assert [c["value"] for c in layer["categories"]] == list(BANDS)
        assert [c["label"] for c in layer["categories"]] == [BAND_LABELS[b] for b in BANDS]
        assert layer["null_fields"] == {"margin_class": 0, "utilisation_capped": 0, "priority_band": 0}
        assert layer["saved_styles"] == ["priority band", "margin"]
        margin = layer["styles"]["margin"]
        assert margin["qml"]["ok"] and margin["qml"]["field"] == "margin_class"
        assert margin["qml"]["values"] == ["0", "1", "2", "3", "4"]
        for style in layer["styles"].values():  # QGIS reads the SLD of each too
            assert style["sld"]["ok"] and style["sld"]["renderer"] == "RuleRenderer"
        assert len(layer["styles"]["priority band"]["sld"]["filters"]) == len(BANDS)
    # the render is not blank: it holds the band colours, not only the white background
    from PIL import Image

    image = np.asarray(Image.open(png).convert("RGB")).reshape(-1, 3)
    coloured = (image != 255).any(axis=1)
    assert coloured.mean() > 0.005
    colours = {tuple(int(v) for v in c) for c in image[coloured]}
    wanted = {tuple(int(c["colour"][i : i + 2], 16) for i in (1, 3, 5)) for c in lines["categories"]}
    assert len(wanted & colours) >= 3
