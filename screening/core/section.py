"""Geometry of a gravity wall section and the soil wedge it carries.

x runs from the toe (0) to the heel (B); z up from the underside of the base.
The section is the quadrilateral (0,0)-(B,0)-(B-b,H)-(f,H) with b = B - f - t.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

FloatArray = NDArray[np.float64]


def back_batter(base_width_m: ArrayLike, top_width_m: ArrayLike, front_batter_m: ArrayLike) -> FloatArray:
    """Horizontal set-back of the back face over the height, b = B − f − t [m]."""
    return (
        np.asarray(base_width_m, dtype=float)
        - np.asarray(front_batter_m, dtype=float)
        - np.asarray(top_width_m, dtype=float)
    )


def polygon_properties(xs: ArrayLike, zs: ArrayLike) -> tuple[FloatArray, FloatArray, FloatArray]:
    """Area and centroid of many simple polygons at once (shoelace formula).

    Parameters
    ----------
    xs, zs : array_like, shape (n_walls, n_vertices)
        Vertex coordinates in order (either sense) [m].

    Returns
    -------
    area_m2, x_centroid_m, z_centroid_m : numpy.ndarray, shape (n_walls,)
        Area is positive whatever the vertex order; NaN centroid for zero area.

    References
    ----------
    Shoelace (surveyor's) formula for the area and first moments of a polygon.
    """
    x = np.asarray(xs, dtype=float)
    z = np.asarray(zs, dtype=float)
    x1 = np.roll(x, -1, axis=-1)
    z1 = np.roll(z, -1, axis=-1)
    cross = x * z1 - x1 * z
    signed = 0.5 * cross.sum(axis=-1)
    with np.errstate(invalid="ignore", divide="ignore"):
        xc = ((x + x1) * cross).sum(axis=-1) / (6.0 * signed)
        zc = ((z + z1) * cross).sum(axis=-1) / (6.0 * signed)
    return np.abs(signed), xc, zc


def wall_section(
    height_m: ArrayLike,
    base_width_m: ArrayLike,
    top_width_m: ArrayLike,
    front_batter_m: ArrayLike,
) -> tuple[FloatArray, FloatArray, FloatArray]:
    """Area [m²] and centroid (x from the toe, z from the base) [m] of the wall section.

    The quadrilateral (0,0)-(B,0)-(B−b,H)-(f,H) of method.md §1, a trapezoid with horizontal
    top and base, in closed form (the shoelace formula of :func:`polygon_properties` gives the
    same; this is several times faster on the bed-joint planes):
    A = H(B + t)/2, x_c = (B² − Bb + (b² − f²)/3)/(B + t), z_c = H(B + 2t)/(3(B + t)).
    """
    h = np.asarray(height_m, dtype=float)
    b_w = np.asarray(base_width_m, dtype=float)
    t = np.asarray(top_width_m, dtype=float)
    f = np.asarray(front_batter_m, dtype=float)
    back = b_w - f - t
    width = b_w + t
    with np.errstate(invalid="ignore", divide="ignore"):
        x_c = (b_w * (b_w - back) + (back * back - f * f) / 3.0) / width
        z_c = h * (b_w + 2.0 * t) / (3.0 * width)
    return np.abs(0.5 * h * width), x_c, z_c


def back_wedge(
    height_m: ArrayLike,
    base_width_m: ArrayLike,
    back_batter_m: ArrayLike,
    retained_height_m: ArrayLike,
    water_height_m: ArrayLike,
    soil_unit_weight_kn_m3: ArrayLike,
    soil_saturated_unit_weight_kn_m3: ArrayLike,
) -> tuple[FloatArray, FloatArray, FloatArray]:
    """Weight of the soil between a battered back face and the vertical through the heel.

    The wedge is the triangle (B,0)-(B,H_r)-(B − b·H_r/H, H_r); soil below the
    water level h_w weighs γ_sat, above it γ. Zero where b ≤ 0 or H_r = 0.

    Returns
    -------
    weight_kn_m, x_m, z_m : numpy.ndarray
        Weight [kN/m] and the position of its centroid [m] (NaN where weight is 0).

    References
    ----------
    Virtual-back method for gravity walls: soil above a sloping back face is
    carried by the wall (common practice, e.g. Craig, *Soil Mechanics*).
    """
    h = np.asarray(height_m, dtype=float)
    b_w = np.asarray(base_width_m, dtype=float)
    b = np.clip(np.asarray(back_batter_m, dtype=float), 0.0, None)
    r = np.asarray(retained_height_m, dtype=float)
    hw = np.minimum(np.asarray(water_height_m, dtype=float), r)
    g = np.asarray(soil_unit_weight_kn_m3, dtype=float)
    g_sat = np.asarray(soil_saturated_unit_weight_kn_m3, dtype=float)
    slope = b / h  # horizontal width of the wedge per metre of height

    def triangle(top: FloatArray) -> tuple[FloatArray, FloatArray, FloatArray]:
        # triangle from the heel at z = 0 up to height `top`
        area = 0.5 * slope * (top * top)
        return area, b_w - slope * top / 3.0, 2.0 * top / 3.0

    a_full, x_full, z_full = triangle(r)
    a_wet, x_wet, z_wet = triangle(hw)
    weight = g * (a_full - a_wet) + g_sat * a_wet
    with np.errstate(invalid="ignore", divide="ignore"):
        x = (g * (a_full * x_full - a_wet * x_wet) + g_sat * a_wet * x_wet) / weight
        z = (g * (a_full * z_full - a_wet * z_wet) + g_sat * a_wet * z_wet) / weight
    return weight, x, z


def lever_after_lean(x_m: ArrayLike, z_m: ArrayLike, lean_deg: ArrayLike) -> FloatArray:
    """Lever arm about the toe of a weight at (x, z) after the section leans by ω.

    The body rotates about the toe; positive ω moves the top outwards, so the
    arm becomes x·cos ω − z·sin ω (method.md §1, a first-order treatment).
    """
    w = np.radians(np.asarray(lean_deg, dtype=float))
    return np.asarray(x_m, dtype=float) * np.cos(w) - np.asarray(z_m, dtype=float) * np.sin(w)
