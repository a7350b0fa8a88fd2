"""The GeoPackage of walls: geometry plus screening results, ready for any GIS."""

from __future__ import annotations

from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd

from screening.io.writers import atomic_path

LAYER = "walls"


def walls_frame(walls: pd.DataFrame, geometry: np.ndarray) -> gpd.GeoDataFrame:
    """The walls summary as a GeoDataFrame in WGS84 (walls with no location have no geometry)."""
    frame = walls.copy()
    for col in frame.columns:
        if frame[col].dtype == object:
            frame[col] = frame[col].astype("string")
    # infinities are not portable in GIS tables: blank them, the state column says why
    numeric = frame.select_dtypes("number").columns
    frame[numeric] = frame[numeric].replace([np.inf, -np.inf], np.nan)
    return gpd.GeoDataFrame(frame, geometry=gpd.GeoSeries(list(geometry), crs="EPSG:4326"))


def write_geopackage(walls: pd.DataFrame, geometry: np.ndarray, target: str | Path) -> Path:
    """Write one layer ``walls`` to a new GeoPackage, atomically."""
    gdf = walls_frame(walls, geometry)
    with atomic_path(target) as tmp:
        tmp.unlink()  # the GeoPackage driver creates its own file
        gdf.to_file(tmp, layer=LAYER, driver="GPKG", engine="pyogrio")
    return Path(target)
