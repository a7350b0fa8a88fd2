"""A plain per-wall Python implementation of method.md, written independently of the engine.

It uses the math module only, decomposes the section into a rectangle and two
triangles (not the shoelace formula the engine uses) and walks the cases one
wall at a time. The benchmark times it against the vectorised engine; the tests
use it as a cross-check of every result column.
"""

from __future__ import annotations

import math
from collections.abc import Mapping

GW = 9.81


def _ka(phi: float, delta: float, beta: float) -> float:
    p, d, b = math.radians(phi), math.radians(delta), math.radians(beta)
    if b >= p:
        return math.nan
    root = math.sqrt(math.sin(p + d) * math.sin(p - b) / (math.cos(d) * math.cos(b)))
    return math.cos(p) ** 2 / (math.cos(d) * (1 + root) ** 2)


def _pieces(h: float, b: float, t: float, f: float) -> list[tuple[float, float, float]]:
    """(area, x, z) of the front triangle, the rectangle under the top and the back triangle."""
    back = b - f - t
    out = [(t * h, f + t / 2, h / 2)]
    if f > 0:
        out.append((f * h / 2, 2 * f / 3, h / 3))
    if back > 0:
        out.append((back * h / 2, f + t + back / 3, h / 3))
    return out


def _section(w: Mapping[str, float], hw: float, uplift: bool, friction: float) -> dict[str, float]:
    h, b, t, f = w["height_m"], w["base_width_m"], w["top_width_m"], w["front_batter_m"]
    r = w["retained_height_m"]
    g, gs = w["soil_unit_weight_kn_m3"], w["soil_saturated_unit_weight_kn_m3"]
    lean = math.radians(w["lean_deg"])
    c, s = math.cos(lean), math.sin(lean)
    weight = moment_w = 0.0
    for a, x, z in _pieces(h, b, t, f):
        weight += w["wall_unit_weight_kn_m3"] * a
        moment_w += w["wall_unit_weight_kn_m3"] * a * (x * c - z * s)
    # soil wedge over a battered back, split at the water level
    back = b - f - t
    wedge = moment_s = 0.0
    if back > 0 and r > 0:
        k = back / h
        hwet = min(hw, r)
        a_wet = k * hwet**2 / 2
        a_all = k * r**2 / 2
        x_wet, z_wet = b - k * hwet / 3, 2 * hwet / 3
        x_all, z_all = b - k * r / 3, 2 * r / 3
        wedge = g * (a_all - a_wet) + gs * a_wet
        moment_s = g * (a_all * (x_all * c - z_all * s) - a_wet * (x_wet * c - z_wet * s)) + gs * a_wet * (
            x_wet * c - z_wet * s
        )
    ka = _ka(w["soil_friction_deg"], w["wall_friction_deg"], w["backfill_slope_deg"])
    q = w["surcharge_kpa"]
    # the hand method: the pressure diagram as triangles and rectangles, each force at its centroid
    dry = r - hw
    blocks = [
        (ka * g * dry * dry / 2, hw + dry / 3),  # triangle above the water
        (ka * g * dry * hw, hw / 2),  # rectangle below the water from the soil above it
        (ka * (gs - GW) * hw * hw / 2, hw / 3),  # triangle of submerged soil
        (ka * q * r, r / 2),  # surcharge
    ]
    thrust = sum(force for force, _ in blocks)
    thrust_m = sum(force * z for force, z in blocks)
    d = math.radians(w["wall_friction_deg"])
    water, water_m = GW * hw * hw / 2, GW * hw**3 / 6
    up = GW * hw * b / 2 if uplift else 0.0
    horizontal = thrust * math.cos(d) + water
    vertical = weight + wedge + thrust * math.sin(d) - up
    m_r = moment_w + moment_s + thrust * math.sin(d) * b
    m_o = thrust_m * math.cos(d) + water_m + up * 2 * b / 3
    x_r = (m_r - m_o) / vertical if vertical > 0 else math.nan
    e = b / 2 - x_r
    return {
        "weight_kn_m": weight,
        "vertical_kn_m": vertical,
        "horizontal_kn_m": horizontal,
        "uplift_kn_m": up,
        "restoring_moment_knm_m": m_r,
        "overturning_moment_knm_m": m_o,
        "resultant_from_toe_m": x_r,
        "eccentricity_m": e,
        "fos_sliding": vertical * math.tan(math.radians(friction)) / horizontal
        if horizontal > 0
        else math.inf,
        "fos_overturning": m_r / m_o if m_o > 0 else math.inf,
        "middle_third_utilisation": abs(e) / (b / 6),
    }


def screen_wall(w: Mapping[str, float], fos_sliding: float = 1.5, fos_overturning: float = 2.0) -> list[dict]:
    """Results of one wall in the drained, blocked and surveyed cases."""
    out = []
    waters = {"drained": 0.0, "blocked": w["retained_height_m"], "surveyed": w["surveyed_water_height_m"]}
    for case, hw in waters.items():
        res = _section(w, hw, True, w["base_friction_deg"])
        v, x_r, b = res["vertical_kn_m"], res["resultant_from_toe_m"], w["base_width_m"]
        e = res["eccentricity_m"]
        if not v > 0:
            toe = heel = math.nan
        elif x_r <= 0:
            toe, heel = math.inf, 0.0
        elif x_r >= b:
            toe, heel = 0.0, math.inf
        elif abs(e) <= b / 6 * (1 + 1e-12):
            toe, heel = v / b * (1 + 6 * e / b), v / b * (1 - 6 * e / b)
        elif e > 0:
            toe, heel = 2 * v / (3 * x_r), 0.0
        else:
            toe, heel = 0.0, 2 * v / (3 * (b - x_r))
        res.update(case=case, water_height_m=hw, toe_pressure_kpa=toe, heel_pressure_kpa=heel)
        res["bearing_utilisation"] = max(toe, heel) / w["allowable_bearing_kpa"]
        res["sliding_utilisation"] = fos_sliding / res["fos_sliding"]
        res["overturning_utilisation"] = fos_overturning / res["fos_overturning"]
        zc = w.get("crack_height_m", math.nan)
        if zc == zc:  # a crack is recorded
            h = w["height_m"]
            f, back = w["front_batter_m"], w["base_width_m"] - w["front_batter_m"] - w["top_width_m"]
            above = dict(w)
            above.update(
                height_m=h - zc,
                base_width_m=w["base_width_m"] - (f + back) * zc / h,
                front_batter_m=f * (h - zc) / h,
                retained_height_m=max(w["retained_height_m"] - zc, 0.0),
            )
            crack = _section(above, max(hw - zc, 0.0), False, w["joint_friction_deg"])
            res["crack_eccentricity_m"] = crack["eccentricity_m"]
            res["crack_middle_third_utilisation"] = crack["middle_third_utilisation"]
            res["crack_fos_overturning"] = crack["fos_overturning"]
            res["crack_fos_sliding"] = crack["fos_sliding"]
        out.append(res)
    return out
