"""A plain per-wall Python implementation of method.md, written independently of the engine.

It uses the math module only, decomposes the section into a rectangle and two
triangles (not the closed forms the engine uses), walks the cases, the bed joints
and the steps of the critical-height search one at a time, and picks the governing
check with plain comparisons. The benchmark times it against the vectorised engine;
the tests use it as a cross-check of every result column. Settings are read from a
``Config``; nothing else of the project is used.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any

from screening.config import CASES, Config

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


def _section(
    w: Mapping[str, float], hw: float, uplift: bool, friction: float, passive: float = 0.0
) -> dict[str, float]:
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
        "fos_sliding": (max(vertical, 0.0) * math.tan(math.radians(friction)) + passive) / horizontal
        if horizontal > 0
        else math.inf,
        # a restoring moment of 0 or less (lean beyond the toe): nothing restores, factor 0
        "fos_overturning": 0.0 if m_r <= 0 else (m_r / m_o if m_o > 0 else math.inf),
        "middle_third_utilisation": abs(e) / (b / 6),
    }


def _above(w: Mapping[str, float], z: float) -> dict[str, float]:
    """The wall above the horizontal plane at height z, as a wall of its own."""
    h, f = w["height_m"], w["front_batter_m"]
    back = w["base_width_m"] - f - w["top_width_m"]
    above = dict(w)
    above.update(
        height_m=h - z,
        base_width_m=w["top_width_m"] + (f + back) * (h - z) / h,
        front_batter_m=f * (h - z) / h,
        retained_height_m=max(w["retained_height_m"] - z, 0.0),
    )
    return above


def _ratio(required: float, fos: float) -> float:
    if fos == 0:
        return math.inf
    return required / fos


def _plane(w: Mapping[str, float], z: float, hw: float, fs: float, fo: float) -> dict[str, float]:
    """A crack or bed joint at z: the part above, no uplift, joint friction, no bearing."""
    s = _section(_above(w, z), max(hw - z, 0.0), False, w["joint_friction_deg"])
    s["sliding_utilisation"] = _ratio(fs, s["fos_sliding"])
    s["overturning_utilisation"] = _ratio(fo, s["fos_overturning"])
    return s


def _joints(w: Mapping[str, float], hw: float, fs: float, fo: float, planes: int) -> dict[str, float]:
    """The governing bed joint: the largest of its three utilisations, the lower plane on a tie."""
    found: list[tuple[float, float, dict[str, float]]] = []
    for k in range(1, planes):
        z = w["height_m"] * k / planes
        s = _plane(w, z, hw, fs, fo)
        found.append(
            (max(s["middle_third_utilisation"], s["sliding_utilisation"], s["overturning_utilisation"]), z, s)
        )
    best = max(u for u, _, _ in found)
    for u, z, s in found:
        if u == best or (math.isfinite(best) and u >= best - 1e-9 * abs(best)):
            return {
                "joint_height_m": z,
                "joint_middle_third_utilisation": s["middle_third_utilisation"],
                "joint_sliding_utilisation": s["sliding_utilisation"],
                "joint_overturning_utilisation": s["overturning_utilisation"],
            }
    raise AssertionError("no governing plane")


def _annex_d(w: Mapping[str, float], v: float, h: float, e: float, depth: float) -> float:
    """EN 1997-1 Annex D drained resistance of a strip on B' = B − 2|e| [kN/m]."""
    phi = math.radians(w["foundation_friction_deg"])
    c, g = w["foundation_cohesion_kpa"], w["foundation_unit_weight_kn_m3"]
    width = w["base_width_m"] - 2 * abs(e)
    if not width > 0:
        return 0.0
    nq = math.exp(math.pi * math.tan(phi)) * math.tan(math.pi / 4 + phi / 2) ** 2
    nc = (nq - 1) / math.tan(phi)
    ng = 2 * (nq - 1) * math.tan(phi)
    m = max(1 - h / (v + width * c / math.tan(phi)), 0.0)
    iq, ig = m**2, m**3
    ic = max(iq - (1 - iq) / (nc * math.tan(phi)), 0.0)
    return width * (c * nc * ic + g * depth * nq * iq + 0.5 * g * width * ng * ig)


def _criteria(config: Config) -> dict[str, tuple[float, float, float]]:
    out = {}
    for case in CASES:
        c = config.criteria.get(case)
        get = lambda key, default, c=c: default if c is None or getattr(c, key) is None else getattr(c, key)  # noqa: E731
        out[case] = (
            get("fos_sliding_required", config.fos_sliding_required),
            get("fos_overturning_required", config.fos_overturning_required),
            get("resultant_limit", 1 / 3),
        )
    return out


def _base(
    w: Mapping[str, float], hw: float, config: Config, fs: float, fo: float, limit: float
) -> dict[str, Any]:
    """The wall on its base at water height hw: every base check."""
    depth = max(w.get("embedment_m", 0.0) - config.toe_excavation_m, 0.0)
    phi_f = w.get("foundation_friction_deg", math.nan)
    passive = 0.0
    if config.passive_mobilisation > 0 and depth > 0:
        s = math.sin(math.radians(phi_f if phi_f == phi_f else w["soil_friction_deg"]))
        passive = (
            config.passive_mobilisation
            * 0.5
            * (1 + s)
            / (1 - s)
            * w["foundation_unit_weight_kn_m3"]
            * depth**2
        )
    res: dict[str, Any] = _section(w, hw, config.uplift, w["base_friction_deg"], passive)
    v, x_r, b = res["vertical_kn_m"], res["resultant_from_toe_m"], w["base_width_m"]
    e = res["eccentricity_m"]
    if not v > 0:
        toe = heel = math.nan
        state = "floating"
    elif x_r <= 0 or x_r >= b:
        toe, heel = (math.inf, 0.0) if x_r <= 0 else (0.0, math.inf)
        state = "resultant_outside_base"
    elif abs(e) <= b / 6 * (1 + 1e-12):
        toe, heel = v / b * (1 + 6 * e / b), v / b * (1 - 6 * e / b)
        state = "within_middle_third"
    else:
        toe, heel = (2 * v / (3 * x_r), 0.0) if e > 0 else (0.0, 2 * v / (3 * (b - x_r)))
        state = "outside_middle_third"
    res.update(water_height_m=hw, toe_pressure_kpa=toe, heel_pressure_kpa=heel, state=state)
    res["passive_resistance_kn_m"] = passive
    if phi_f == phi_f:  # Annex D where the foundation's friction angle is given
        r = _annex_d(w, v, res["horizontal_kn_m"], e, depth) if v > 0 else math.nan
        res["bearing_method"], res["bearing_resistance_kn_m"] = "annex_d", r
        res["bearing_utilisation"] = math.inf if r == 0 else v * config.fos_bearing_required / r
    else:
        res["bearing_method"], res["bearing_resistance_kn_m"] = "presumed", math.nan
        res["bearing_utilisation"] = max(toe, heel) / w["allowable_bearing_kpa"]
    res["sliding_utilisation"] = _ratio(fs, res["fos_sliding"])
    res["overturning_utilisation"] = _ratio(fo, res["fos_overturning"])
    res["resultant_utilisation"] = abs(e) / (limit * b / 2) if config.criteria else math.nan
    return res


def _governing(res: dict[str, Any], config: Config) -> None:
    """The largest utilisation and its check, the first in the method's order on a tie."""
    order = ["resultant" if config.criteria else "middle_third", "bearing", "sliding", "overturning"]
    order += ["crack_middle_third", "crack_sliding", "crack_overturning"]
    order += ["joint_middle_third", "joint_sliding", "joint_overturning"]
    best, name = -math.inf, order[0]
    for check in order:
        u = res.get(f"{check}_utilisation", math.nan)
        if u > best:
            best, name = u, check
    if res["state"] == "floating":
        best, name = math.inf, "vertical_load"
    elif res["state"] == "resultant_outside_base":
        best, name = math.inf, "overturning"
    res["utilisation"], res["governing_check"], res["margin"] = best, name, 1 - best


def check_wall(w: Mapping[str, float], hw: float, config: Config, case: str = "surveyed") -> dict[str, Any]:
    """Every check of one wall at water height hw, with the criteria of ``case``."""
    fs, fo, limit = _criteria(config)[case]
    res = _base(w, hw, config, fs, fo, limit)
    zc = w.get("crack_height_m", math.nan)
    if zc == zc:  # a crack is recorded
        crack = _plane(w, zc, hw, fs, fo)
        res["crack_eccentricity_m"] = crack["eccentricity_m"]
        res["crack_middle_third_utilisation"] = crack["middle_third_utilisation"]
        res["crack_fos_overturning"] = crack["fos_overturning"]
        res["crack_fos_sliding"] = crack["fos_sliding"]
        res["crack_sliding_utilisation"] = crack["sliding_utilisation"]
        res["crack_overturning_utilisation"] = crack["overturning_utilisation"]
    if w.get("joint_check", 0.0) > 0 and config.joint_planes >= 2:
        res.update(_joints(w, hw, fs, fo, config.joint_planes))
    else:
        res.update(dict.fromkeys(("joint_height_m", "joint_middle_third_utilisation"), math.nan))
        res.update(dict.fromkeys(("joint_sliding_utilisation", "joint_overturning_utilisation"), math.nan))
    _governing(res, config)
    return res


def screen_wall(w: Mapping[str, float], config: Config | None = None) -> list[dict]:
    """Results of one wall in the drained, blocked and surveyed cases."""
    config = config or Config()
    waters = {"drained": 0.0, "blocked": w["retained_height_m"], "surveyed": w["surveyed_water_height_m"]}
    out = []
    for case, hw in waters.items():
        res = check_wall(w, hw, config, case)
        res["case"] = case
        out.append(res)
    return out


def _search(fails: Any, lower: float, upper: float, tolerance: float) -> float:
    """The first of 64 equal steps whose end fails, bisected to ``tolerance``; its upper end."""
    step = (upper - lower) / 64
    j = next((j for j in range(1, 64) if fails(lower + step * j)), 64)
    lo, hi = lower + step * (j - 1), (upper if j == 64 else lower + step * j)
    while hi - lo > tolerance:
        mid = (lo + hi) / 2
        lo, hi = (lo, mid) if fails(mid) else (mid, hi)
    return hi


def critical_figures(w: Mapping[str, float], config: Config | None = None) -> dict[str, float]:
    """Critical water height (and its fraction of H_r) and critical lean of one wall (method.md §9)."""
    config = config or Config()
    r = w["retained_height_m"]

    def fails(hw: float) -> bool:
        return check_wall(w, hw, config)["utilisation"] > 1

    if fails(0.0):
        water = 0.0
    elif not fails(r):
        water = math.nan
    else:
        water = _search(fails, 0.0, r, 0.001)

    def at_toe(lean: float) -> bool:
        s = _section(
            {**w, "lean_deg": lean}, w["surveyed_water_height_m"], config.uplift, w["base_friction_deg"]
        )
        return s["resultant_from_toe_m"] <= 0

    lean = w["lean_deg"]
    if at_toe(lean):
        crit = lean
    elif not at_toe(45.0):
        crit = math.nan
    else:
        crit = _search(at_toe, lean, 45.0, 0.01)
    fraction = 0.0 if water == 0 else (water / r if r > 0 else math.nan)
    return {"critical_water_height_m": water, "critical_water_fraction": fraction, "critical_lean_deg": crit}
