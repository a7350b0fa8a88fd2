"""The GeoPackage of walls: geometry plus screening results, ready for any GIS.

Three tables, so that each spatial layer declares its geometry type (a GIS then treats it as
lines or as points, not as "unknown"):

- ``walls_lines``: walls located by a line (LineString; MultiLineString if any wall has one),
- ``walls_points``: walls located by a point,
- ``walls_unlocated``: walls with no location, as a plain attribute table (screened, listed).

Every wall is in exactly one of them. A ``layer_styles`` table carries two saved styles per
spatial layer, as QML and SLD: by priority band (the default a GIS such as QGIS applies on
opening) and by margin class. ``margin_class`` (integer 0..4) and ``utilisation_capped``
(utilisation capped at :data:`UTILISATION_CAP`) are never blank, so a style classifying on them
never drops the walls whose resultant leaves the base (whose utilisation is infinite).
"""

from __future__ import annotations

import datetime as dt
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import pyogrio
import shapely

from screening.io.writers import atomic_path
from screening.outputs.layer_style import band_style, margin_style, qml, sld
from screening.outputs.webmap import margin_class

LINES = "walls_lines"
POINTS = "walls_points"
UNLOCATED = "walls_unlocated"
LAYERS = (LINES, POINTS, UNLOCATED)
STYLES_TABLE = "layer_styles"
GEOMETRY_COLUMN = "geom"
UTILISATION_CAP = 10.0
"""``utilisation_capped`` = min(utilisation, 10); infinite (resultant outside the base) -> 10."""


def gis_columns(walls: pd.DataFrame) -> pd.DataFrame:
    """The walls with ``margin_class`` and ``utilisation_capped`` beside the state, never blank."""
    frame = walls.copy()
    u = frame["utilisation"].to_numpy(dtype=float)
    capped = np.where(np.isfinite(u), np.minimum(u, UTILISATION_CAP), UTILISATION_CAP)
    at = frame.columns.get_loc("state") + 1 if "state" in frame else len(frame.columns)
    frame.insert(at, "utilisation_capped", capped)
    frame.insert(at, "margin_class", margin_class(u, frame["state"]).astype("int32"))
    return frame


def walls_frame(walls: pd.DataFrame, geometry: np.ndarray) -> gpd.GeoDataFrame:
    """The walls summary as a GeoDataFrame in WGS84 (walls with no location have no geometry)."""
    frame = gis_columns(walls)
    for col in frame.columns:
        if frame[col].dtype == object:
            frame[col] = frame[col].astype("string")
    # infinities are not portable in GIS tables: blank them, the state column says why
    numeric = frame.select_dtypes("number").columns
    frame[numeric] = frame[numeric].replace([np.inf, -np.inf], np.nan)
    return gpd.GeoDataFrame(frame, geometry=gpd.GeoSeries(list(geometry), crs="EPSG:4326"))


def _styles() -> pd.DataFrame:
    """The ``layer_styles`` rows: two styles for each spatial layer, the band style the default."""
    rows = []
    now = pd.Timestamp(dt.datetime.now(dt.UTC).replace(microsecond=0))
    for layer, geometry in ((LINES, "line"), (POINTS, "point")):
        for style, default in ((band_style(), True), (margin_style(), False)):
            rows.append(
                {
                    "f_table_catalog": "",
                    "f_table_schema": "",
                    "f_table_name": layer,
                    "f_geometry_column": GEOMETRY_COLUMN,
                    "styleName": style.name,
                    "styleQML": qml(style, geometry),
                    "styleSLD": sld(style, layer, geometry),
                    "useAsDefault": default,
                    "description": style.description,
                    "owner": "wallscreen",
                    "ui": "",
                    "update_time": now,
                }
            )
    return pd.DataFrame(rows)


def write_geopackage(walls: pd.DataFrame, geometry: np.ndarray, target: str | Path) -> Path:
    """Write the layers :data:`LAYERS` and their saved styles to a new GeoPackage, atomically."""
    gdf = walls_frame(walls, geometry)
    kind = np.array([-1 if g is None else shapely.get_type_id(g) for g in geometry], dtype=int)
    lines, points = gdf[np.isin(kind, [1, 5])], gdf[kind == 0]
    lines_type = "MultiLineString" if (kind == 5).any() else "LineString"
    with atomic_path(target) as tmp:
        tmp.unlink()  # the GeoPackage driver creates its own file
        options = {"layer_options": {"GEOMETRY_NAME": GEOMETRY_COLUMN}}
        # GeoPackage 1.2: the version every current GIS reads without a warning
        lines.to_file(
            tmp, layer=LINES, driver="GPKG", engine="pyogrio", geometry_type=lines_type,
            promote_to_multi=lines_type == "MultiLineString", dataset_options={"VERSION": "1.2"}, **options,
        )  # fmt: skip
        points.to_file(tmp, layer=POINTS, driver="GPKG", engine="pyogrio", geometry_type="Point", **options)
        plain = pd.DataFrame(gdf[kind == -1].drop(columns="geometry"))
        pyogrio.write_dataframe(plain, tmp, layer=UNLOCATED, driver="GPKG")
        pyogrio.write_dataframe(_styles(), tmp, layer=STYLES_TABLE, driver="GPKG")
    return Path(target)


def read_geopackage(path: str | Path) -> tuple[pd.DataFrame, np.ndarray]:
    """Every wall of a ``walls.gpkg`` (all three tables), in rank order, and its geometry."""
    frames, geoms = [], []
    listed = {name for name, _ in pyogrio.list_layers(path)}
    # a walls.gpkg of an earlier version holds one layer "walls" of every geometry type
    for layer in LAYERS if listed & set(LAYERS) else ("walls",):
        if layer not in listed:
            continue
        if layer == UNLOCATED:
            frame = pyogrio.read_dataframe(path, layer=layer, read_geometry=False)
            geoms.append(np.full(len(frame), None, dtype=object))
        else:
            gdf = gpd.read_file(path, layer=layer, engine="pyogrio")
            frame = pd.DataFrame(gdf.drop(columns=gdf.geometry.name))
            geoms.append(np.array(list(gdf.geometry), dtype=object))
        frames.append(frame)
    walls = pd.concat(frames, ignore_index=True)
    geometry = np.concatenate(geoms)
    order = np.argsort(walls["rank"].to_numpy(), kind="stable")
    return walls.iloc[order].reset_index(drop=True), geometry[order]
