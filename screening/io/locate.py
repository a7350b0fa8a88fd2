"""Where each wall is: WKT geometry, lat/lon, or easting/northing in a named CRS.

Everything is returned in WGS84 (EPSG:4326). Walls without a usable location
are screened as usual and reported as not mapped.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import shapely
from pyproj import Transformer
from pyproj.exceptions import CRSError

from screening.errors import RegisterError


def locate(walls: pd.DataFrame, crs: str | None = None) -> tuple[np.ndarray, pd.DataFrame]:
    """Geometry of every wall (shapely objects or None) and warnings for unusable ones.

    Parameters
    ----------
    walls : pandas.DataFrame
        Canonical columns ``geometry`` (WKT), ``lat``/``lon``, ``easting``/``northing``
        and ``row``, ``wall_id``.
    crs : str, optional
        CRS of ``easting``/``northing`` (e.g. ``"EPSG:27700"``).

    Returns
    -------
    geometry : numpy.ndarray of shapely geometries (None where not located)
    problems : pandas.DataFrame of warnings (row, wall_id, column, value, severity, message)
    """
    n = len(walls)
    geom = np.full(n, None, dtype=object)
    problems = []
    wkt = walls["geometry"] if "geometry" in walls else pd.Series(None, index=walls.index)
    has_wkt = wkt.notna().to_numpy()
    if has_wkt.any():
        parsed = shapely.from_wkt(wkt[has_wkt].astype(str).to_numpy(), on_invalid="ignore")
        # Point, LineString or MultiLineString (GEOS type ids 0, 1, 5); unparsable WKT gives None (-1)
        ok = np.isin(shapely.get_type_id(parsed), [0, 1, 5]) & ~shapely.is_empty(parsed)
        ok &= on_the_globe(parsed)  # POINT (nan nan) and metres given as degrees are not places
        idx = np.flatnonzero(has_wkt)
        geom[idx[ok]] = parsed[ok]
        bad = np.zeros(n, dtype=bool)
        bad[idx[~ok]] = True
        problems.append(
            _warn(
                walls,
                bad,
                "geometry",
                wkt,
                "expected WKT of a Point or LineString in WGS84, longitude -180 to 180 and "
                "latitude -90 to 90 (finite); wall not mapped",
            )
        )
    need = np.array([g is None for g in geom], dtype=bool)
    lat = (
        pd.to_numeric(walls.get("lat"), errors="coerce").to_numpy(dtype=float)
        if "lat" in walls
        else np.full(n, np.nan)
    )
    lon = (
        pd.to_numeric(walls.get("lon"), errors="coerce").to_numpy(dtype=float)
        if "lon" in walls
        else np.full(n, np.nan)
    )
    use = need & np.isfinite(lat) & np.isfinite(lon)
    geom[use] = shapely.points(lon[use], lat[use])
    need &= ~use
    east = walls["easting"].to_numpy(dtype=float) if "easting" in walls else np.full(n, np.nan)
    north = walls["northing"].to_numpy(dtype=float) if "northing" in walls else np.full(n, np.nan)
    use = need & np.isfinite(east) & np.isfinite(north)
    problems += _locate_grid(walls, east, north, use, crs, geom)
    problems = [p for p in problems if len(p)]
    return geom, (
        pd.concat(problems, ignore_index=True) if problems else _warn(walls, np.zeros(n, bool), "", None, "")
    )


def _locate_grid(
    walls: pd.DataFrame,
    east: np.ndarray,
    north: np.ndarray,
    use: np.ndarray,
    crs: str | None,
    geom: np.ndarray,
) -> list[pd.DataFrame]:
    """Easting/northing of the rows in ``use`` into ``geom`` (WGS84); warnings for the rest."""
    n = len(walls)
    problems: list[pd.DataFrame] = []
    if use.any() and not crs:
        # only these rows need a CRS: they are screened, listed, not mapped; lat/lon rows go on
        problems.append(
            _warn(
                walls,
                use,
                "easting",
                walls["easting"],
                "easting/northing given but no CRS: pass --crs EPSG:xxxx (or [register] crs in the "
                "mapping file); wall not mapped",
            )
        )
    elif use.any():
        sel = np.flatnonzero(use)
        x, y = _reproject(east[sel], north[sel], str(crs))
        inside = _in_area_of_use(x, y, str(crs))
        outside = np.zeros(n, dtype=bool)
        outside[sel[~inside]] = True
        problems.append(
            _warn(
                walls,
                outside,
                "easting",
                walls["easting"].astype(str) + " / " + walls["northing"].astype(str),
                f"easting/northing outside the area of use of {crs} (extra digits? another CRS?); "
                "wall not mapped",
            )
        )
        geom[sel[inside]] = shapely.points(x[inside], y[inside])
    return problems


def on_the_globe(geoms: np.ndarray) -> np.ndarray:
    """True where every coordinate is a finite longitude/latitude (WGS84 bounds)."""
    b = shapely.bounds(geoms)
    with np.errstate(invalid="ignore"):
        return (
            np.isfinite(b).all(axis=1)
            & (b[:, 0] >= -180)
            & (b[:, 2] <= 180)
            & (b[:, 1] >= -90)
            & (b[:, 3] <= 90)
        )


def _reproject(x: np.ndarray, y: np.ndarray, crs: str) -> tuple[np.ndarray, np.ndarray]:
    try:
        tf = Transformer.from_crs(crs, "EPSG:4326", always_xy=True)
    except CRSError as exc:
        raise RegisterError(f"unknown CRS {crs!r}: {exc}") from exc
    lon, lat = tf.transform(x, y)
    return np.asarray(lon, dtype=float), np.asarray(lat, dtype=float)


def _in_area_of_use(lon: np.ndarray, lat: np.ndarray, crs: str, margin_deg: float = 0.5) -> np.ndarray:
    """True where a reprojected point is finite and within the CRS's area of use (pyproj), with a
    small margin; a CRS without an area of use is checked against the globe only."""
    from pyproj import CRS

    area = CRS.from_user_input(crs).area_of_use
    with np.errstate(invalid="ignore"):
        ok = np.isfinite(lon) & np.isfinite(lat) & (np.abs(lon) <= 180) & (np.abs(lat) <= 90)
        if area is not None:
            ok &= (lon >= area.west - margin_deg) & (lon <= area.east + margin_deg)
            ok &= (lat >= area.south - margin_deg) & (lat <= area.north + margin_deg)
    return ok


def _warn(
    walls: pd.DataFrame, mask: np.ndarray, column: str, values: pd.Series | None, message: str
) -> pd.DataFrame:
    hit = walls[mask]
    return pd.DataFrame(
        {
            "row": hit["row"].to_numpy(),
            "wall_id": hit["wall_id"].to_numpy(),
            "column": column,
            "value": values[mask].astype(str).to_numpy() if values is not None else "",
            "severity": "warning",
            "message": message,
        }
    )
