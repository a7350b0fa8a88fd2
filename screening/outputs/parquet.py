"""Parquet beside the CSVs, for pandas, DuckDB and Spark users.

``walls.parquet`` is GeoParquet (geopandas writes the ``geo`` metadata: WKB geometry in WGS84,
blank for walls with no location); ``results.parquet`` is plain Parquet of ``results.csv``.
Values are kept as the CSVs keep them: an infinite utilisation stays infinite (IEEE doubles).
"""

from __future__ import annotations

from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd

from screening.io.writers import atomic_path
from screening.outputs.geopackage import gis_columns


def _plain(frame: pd.DataFrame) -> pd.DataFrame:
    out = frame.copy()
    for col in out.columns:
        if out[col].dtype == object or isinstance(out[col].dtype, pd.CategoricalDtype):
            out[col] = out[col].astype("string")
    return out


def write_walls_parquet(walls: pd.DataFrame, geometry: np.ndarray, target: str | Path) -> Path:
    """The walls with their results and geometry as GeoParquet, atomically."""
    frame = _plain(gis_columns(walls))
    gdf = gpd.GeoDataFrame(frame, geometry=gpd.GeoSeries(list(geometry), crs="EPSG:4326"))
    with atomic_path(target) as tmp:
        gdf.to_parquet(tmp, index=False)
    return Path(target)


def write_results_parquet(results: pd.DataFrame, target: str | Path) -> Path:
    """The results per wall and case as Parquet, atomically."""
    with atomic_path(target) as tmp:
        _plain(results).to_parquet(tmp, index=False)
    return Path(target)
