"""Calculation sheets: one self-contained HTML page per wall, set out as by hand.

The sheet is generated from the engine's own output for that wall (``run_cases``
with ``details=True``), so every number on it is a number the screening used.
Figures are written as SVG (:mod:`screening.outputs.svgplot`) and embedded as data; the page
loads no external resource and prints to PDF from any browser.

The page is ``sheet.html.j2`` (package data, autoescaped); :func:`sheet_context` builds
its content as plain data in steps that follow the sheet's sections (inputs, section and
K_a, the figure, each case with its crack plane, the run), and holds no markup.
"""

from __future__ import annotations

import functools
import math
import multiprocessing as mp
import os
from collections.abc import Callable, Iterable, Mapping
from dataclasses import dataclass
from importlib import resources
from pathlib import Path
from types import SimpleNamespace
from typing import Any, cast

import jinja2
import markupsafe
import numpy as np
import pandas as pd

from screening import __version__
from screening.assumed import Assumptions
from screening.config import CASES, Config
from screening.core import critical
from screening.core.engine import DERIVED_INPUTS, ENGINE_INPUTS, decode, run_cases
from screening.io.writers import write_text_atomic
from screening.outputs import sheet_filename
from screening.outputs.svgplot import Figure, Panel
from screening.outputs.workbook import CAUTION
from screening.prepare import Prepared
from screening.priority import LEAN_CAUTION, near_toe, near_toe_words
from screening.schema import UNITS

TEMPLATE = "sheet.html.j2"  # package data of screening.outputs
CASE_TITLES = {
    "drained": "Drained (no water behind the wall)",
    "blocked": "Drains blocked (water to the top of the retained ground)",
    "surveyed": "As surveyed",
}
CHECK_WORDS = {
    "middle_third": "middle third",
    "bearing": "bearing pressure",
    "sliding": "sliding",
    "overturning": "overturning",
    "crack_middle_third": "middle third on the crack plane",
    "crack_sliding": "sliding on the crack plane",
    "crack_overturning": "overturning about the crack plane",
    "vertical_load": "net vertical load (the wall floats)",
}


def flagged_walls(results: pd.DataFrame) -> list[str]:
    """Walls outside the middle third or over the allowable bearing pressure in any case."""
    bad = (~results["in_middle_third"].astype(bool)) | (results["bearing_utilisation"] > 1)
    return list(dict.fromkeys(results.loc[bad, "wall_id"].astype(str)))


def _fmt(value: Any, digits: int = 2) -> str:
    if value is None:
        return "–"
    v = float(value)
    if math.isnan(v):
        return "–"
    if math.isinf(v):
        return "∞" if v > 0 else "−∞"
    return f"{v:.{digits}f}"


def _tag(key: str, value: Any, digits: int = 2, unit: str = "") -> dict[str, str]:
    """A computed value as the sheet shows it, tagged with its key (the tests read it back)."""
    return {"key": key, "text": _fmt(value, digits), "unit": unit}


def _tagged(prefix: str, items: Iterable[tuple[str, Any, int, str]]) -> dict[str, dict[str, str]]:
    """``(name, value, digits, unit)`` rows as tagged values keyed by name, tagged ``prefix + name``."""
    return {name: _tag(prefix + name, value, digits, unit) for name, value, digits, unit in items}


# ---------------------------------------------------------------- the figure


@dataclass(frozen=True)
class _Outline:
    """One wall's section for drawing: x from the toe, z up from the underside of the base [m]."""

    h: float
    b: float
    t: float
    f: float
    r: float
    lean: float  # [rad], + outwards
    crack: float  # height of a known crack, NaN without one

    @classmethod
    def of(cls, wall: pd.Series) -> _Outline:
        h, b, t, f = (float(wall[k]) for k in ("height_m", "base_width_m", "top_width_m", "front_batter_m"))
        r = float(wall["retained_height_m"])
        return cls(h, b, t, f, r, math.radians(float(wall["lean_deg"])), float(wall["crack_height_m"]))

    @property
    def back(self) -> float:
        return self.b - self.f - self.t

    def rot(self, x: float, z: float) -> tuple[float, float]:
        """A point of the upright section, leaned about the toe."""
        c, s = math.cos(self.lean), math.sin(self.lean)
        return x * c - z * s, x * s + z * c


PT = 120 / 72
"""Pixels per point: the figures keep the line widths and text sizes they had as 120-dpi PNGs."""


def _draw_wall(ax: Panel, w: _Outline, hw: float) -> None:
    """The leaned section, the soil it carries, the ground, the water level and a known crack."""
    b, h, r, back, rot = w.b, w.h, w.r, w.back, w.rot
    body = [rot(0, 0), rot(b, 0), rot(b - back, h), rot(w.f, h)]
    ax.polygon(body, "#C9C2B8", "#333333", 1.2 * PT, label="wall")
    if back > 0 and r > 0:
        wedge = [rot(b, 0), rot(b, r), rot(b - back * r / h, r)]
        ax.polygon(wedge, "#E6D9B8", "#8A7A50", 0.8 * PT, label="soil carried")
    ax.line([b, b + 0.8 * b + 1], [r, r], "#8A7A50", 1.0 * PT)
    ax.line([b, b], [0, r], "#8A7A50", 0.8 * PT, "dotted")
    if hw > 0:
        ax.line([b, b + 0.8 * b + 1], [hw, hw], "#1F5FBF", 1.4 * PT, "dashed", label="water level")
    if not math.isnan(w.crack):
        bc = b - (w.f + back) * w.crack / h
        fc = w.f * w.crack / h
        ends = list(zip(rot(fc, w.crack), rot(fc + bc, w.crack), strict=True))
        ax.line(ends[0], ends[1], "#B2182B", 2.0 * PT, label="known crack")


def _draw_back_pressures(
    ax: Panel, w: _Outline, d: dict[str, np.ndarray], i: int, scale: float, gamma_w: float
) -> None:
    """Effective earth pressure and water pressure on the virtual back (x = B)."""
    b, r = w.b, w.r
    hw = float(d["water_height_m"][i])
    ka, q, g, gs = (float(d[k][i]) for k in ("ka", "_q", "_g", "_gs"))
    zs = np.array([r, hw, 0.0]) if hw > 0 else np.array([r, 0.0])
    sv = np.where(zs >= hw, g * (r - zs), g * (r - hw) + (gs - gamma_w) * (hw - zs))
    pe = ka * (sv + q)
    ax.fill_betweenx(list(zs), [b] * len(zs), list(b + pe * scale), "#8A7A50", 0.35, label="earth pressure")
    if hw > 0:
        pw = gamma_w * (hw - np.array([hw, 0.0]))
        ax.fill_betweenx(
            [hw, 0.0],
            list(b + pe[-2:] * scale),
            list(b + (pe[-2:] + pw) * scale),
            "#1F5FBF",
            0.35,
            label="water pressure",
        )


def _draw_resultant(ax: Panel, w: _Outline, x_r: float) -> None:
    """The middle-third marks on the base and the resultant's arrow to where it meets the base."""
    b, h = w.b, w.h
    for xm in (b / 3, 2 * b / 3):
        ax.line([xm, xm], [-0.04 * h, 0.04 * h], "#000000", 1.0 * PT)
    if np.isfinite(x_r):
        ax.arrow((x_r + 0.15 * h, 0.45 * h), (x_r, 0.0), "#000000", 1.8 * PT)
        ax.text(x_r + 0.15 * h, 0.47 * h, "R", size=10 * PT)


def _draw_base_pressure(ax: Panel, w: _Outline, d: dict[str, np.ndarray], i: int, x_r: float) -> None:
    """The contact pressure under the base: trapezoid, no-tension triangle, or none at all."""
    b, h = w.b, w.h
    toe, heel = float(d["toe_pressure_kpa"][i]), float(d["heel_pressure_kpa"][i])
    bscale = 0.25 * h / max(np.nanmax([v for v in (toe, heel) if np.isfinite(v)] + [1.0]), 1.0)
    if not (np.isfinite(toe) and np.isfinite(heel)):
        ax.text(0, -0.12 * h, "resultant outside the base", size=9 * PT, color="#B2182B")
        return
    if str(d["state"][i]) == "within_middle_third":
        xs, qs = [0, b], [toe, heel]
    elif toe > 0:
        xs, qs = [0, min(3 * x_r, b)], [toe, 0]
    else:
        xs, qs = [max(b - 3 * (b - x_r), 0), b], [0, heel]
    below = [-v * bscale for v in qs]
    ax.fill_between(xs, [0, 0], below, "#7B3294", 0.35, label="base pressure")
    label = (
        str(d["_near_toe_text"][i]) if "_near_toe_text" in d and d["_near_toe_text"][i] else f"{toe:.0f} kPa"
    )
    ax.text(0, -toe * bscale - 0.05 * h, label, size=8 * PT, hang=True)


def _draw_old_wall_marks(ax: Panel, w: _Outline, d: dict[str, np.ndarray], i: int) -> None:
    """The governing bed joint of this case (method.md §8) across the leaned section, and the
    critical water height (§9) behind the wall."""
    z = float(d["joint_height_m"][i]) if "joint_height_m" in d else math.nan
    if np.isfinite(z) and 0 < z < w.h:
        bc = w.b - (w.f + w.back) * z / w.h
        fc = w.f * z / w.h
        ends = list(zip(w.rot(fc, z), w.rot(fc + bc, z), strict=True))
        ax.line(ends[0], ends[1], "#E08214", 2.0 * PT, "dashdot", label="governing bed joint")
    hc = float(d["_critical_water_m"][i]) if "_critical_water_m" in d else math.nan
    if np.isfinite(hc) and hc > 0:
        ax.line(
            [w.b, w.b + 0.8 * w.b + 1], [hc, hc], "#1F5FBF", 1.0 * PT, "dotted", label="critical water level"
        )


def _figure_alt(d: dict[str, np.ndarray], j: dict[str, int]) -> str:
    """The figure in words: what is drawn, including the marks of :func:`_draw_old_wall_marks`."""
    words = ["wall section, pressures and base pressure in each case"]
    for case in CASES:
        z = float(d["joint_height_m"][j[case]]) if "joint_height_m" in d else math.nan
        if np.isfinite(z):
            words.append(f"{case}: governing bed joint at {z:.2f} m")
    hc = float(d["_critical_water_m"][j["drained"]]) if "_critical_water_m" in d else math.nan
    if np.isfinite(hc) and hc > 0:
        words.append(f"critical water level at {hc:.2f} m")
    return "; ".join(words)


FIGURE_WIDTH = 1080.0
"""The section figure's width [px]: 9 in at 120 dpi, so that printed across A4 (186 mm) its
8-point labels stay at 6.5 points or more."""


def _figure(wall: pd.Series, d: dict[str, np.ndarray], j: dict[str, int], cfg: Config) -> str:
    """Section, pressures, resultant and base pressure for each case, side by side (SVG data URI).

    The three panels share one window and one scale (equal in x and z), so the cases compare
    at a glance; the panel height follows the wall's proportions."""
    w = _Outline.of(wall)
    pmax = max(float(np.nanmax([d["_p_base"][i] + d["_w_base"][i] for i in j.values()])), 1.0)
    scale = 0.45 * max(w.b, w.h * 0.5) / pmax  # metres of drawing per kPa
    xlim = (-0.3 * w.h - 0.3, w.b + 0.8 * w.b + 1.2)
    ylim = (-0.45 * w.h, 1.08 * w.h)
    left, gap, top, size = 80.0, 14.0, 28.0, 8 * PT
    width = (FIGURE_WIDTH - left - 10.0 - 2 * gap) / 3
    px_per_m = min(width / (xlim[1] - xlim[0]), 330.0 / (ylim[1] - ylim[0]))
    width, height = (xlim[1] - xlim[0]) * px_per_m, (ylim[1] - ylim[0]) * px_per_m
    fig = Figure(FIGURE_WIDTH, 0.0)
    for k, case in enumerate(CASES):
        i = j[case]
        hw = float(d["water_height_m"][i])
        x_r = float(d["resultant_from_toe_m"][i])
        ax = fig.panel(left + k * (width + gap), top, width, height, xlim, ylim)
        _draw_wall(ax, w, hw)
        _draw_back_pressures(ax, w, d, i, scale, cfg.gamma_w_kn_m3)
        _draw_resultant(ax, w, x_r)
        _draw_base_pressure(ax, w, d, i, x_r)
        _draw_old_wall_marks(ax, w, d, i)
        ax.hline(0.0, "#555555", 0.6 * PT)
        ax.frame(
            xlabel="x from the toe [m]",
            ylabel="z from the underside of the base [m]" if k == 0 else "",
            title=f"{case}: h_w = {hw:.2f} m, utilisation {_fmt(float(d['utilisation'][i]))}",
            yticks=8,
            ytick_labels=k == 0,
            size=size,
        )
    legend_top = top + height + 12 + 3.4 * size
    rows = fig.legend(FIGURE_WIDTH / 2, legend_top, size)
    fig.height = legend_top + rows + 4
    return fig.data_uri(_figure_alt(d, j))


# ---------------------------------------------------------------- the page's content


def _input_rows(wall: pd.Series, assumptions: Assumptions | pd.DataFrame) -> list[dict[str, Any]]:
    """Section 1: every input of the engine, as recorded or as assumed (and why)."""
    if isinstance(assumptions, Assumptions):
        assumptions = assumptions.for_wall(wall["wall_id"])
    assumed = assumptions.set_index("column") if len(assumptions) else pd.DataFrame()

    def origin(key: str) -> str:
        return "assumed: " + str(assumed.loc[key, "source"]) if key in assumed.index else "as recorded"

    rows: list[dict[str, Any]] = []
    for key in ENGINE_INPUTS:
        if key in DERIVED_INPUTS:  # not register columns: the surveyed water is set out below
            continue
        value = wall[key]
        how = origin(key)
        if key == "crack_height_m" and (value is None or pd.isna(value)):
            how = "no crack recorded"
        value_tag = _tag("input." + key, value, 3)
        rows.append({"item": key, "value": value_tag, "text": "", "unit": UNITS.get(key, ""), "origin": how})
    for key in ("material", "foundation", "drainage", "consequence"):
        if key in wall and isinstance(wall[key], str):
            rows.append({"item": key, "value": None, "text": wall[key], "unit": "", "origin": origin(key)})
    if "surveyed water_height_m" in assumed.index:
        rows.append(
            {
                "item": "surveyed water height",
                "value": _tag("input.surveyed_water_height_m", wall["surveyed_water_height_m"], 3),
                "text": "",
                "unit": "m",
                "origin": str(assumed.loc["surveyed water_height_m", "source"]),
            }
        )
    return rows


def _section_steps(wall: pd.Series, d: dict[str, np.ndarray], i0: int) -> dict[str, Any]:
    """Section 2: the section's geometry and the active pressure coefficient (common to the cases)."""
    h, b, t, f = (float(wall[k]) for k in ("height_m", "base_width_m", "top_width_m", "front_batter_m"))
    phi, delta, beta = (
        float(wall[k]) for k in ("soil_friction_deg", "wall_friction_deg", "backfill_slope_deg")
    )
    numbers = {
        "back_batter": f"{b:.3f} − {f:.3f} − {t:.3f}",
        "area": f"{h:.3f} × ({b:.3f} + {t:.3f}) / 2",
        "lean": f"ω = {float(wall['lean_deg']):.2f}°",
        "ka": f"φ' = {phi:.1f}°, δ = {delta:.1f}°, β = {beta:.1f}°",
    }
    values = [
        ("back_batter_m", d["d_back_batter_m"][i0], 3, "m"),
        ("area_m2", d["d_area_m2"][i0], 3, "m²"),
        ("wall_x_m", d["d_wall_x_m"][i0], 3, ""),
        ("wall_z_m", d["d_wall_z_m"][i0], 3, ""),
        ("wall_arm_m", d["d_wall_arm_m"][i0], 3, "m"),
        ("ka", d["ka"][i0], 4, ""),
    ]
    return {"numbers": numbers, "tags": _tagged("common.", values)}


_Steps = tuple[dict[str, str], list[tuple[str, Any, int, str]]]


def _case_loads(wall: pd.Series, d: dict[str, np.ndarray], i: int, case: str, gw: float) -> _Steps:
    """The pressures, thrusts and weights of one case."""
    b = float(wall["base_width_m"])
    q, r = float(wall["surcharge_kpa"]), float(wall["retained_height_m"])
    g, gs = float(wall["soil_unit_weight_kn_m3"]), float(wall["soil_saturated_unit_weight_kn_m3"])
    hw, ka = float(d["water_height_m"][i]), float(d["ka"][i])
    numbers = {
        "water_height": CASE_TITLES[case].split(" (")[0].lower(),
        "p_top": f"{ka:.4f} × {q:.1f}",
        "p_water_level": f"{ka:.4f} × [{g:.1f} × ({r:.3f} − {hw:.3f}) + {q:.1f}]",
        "p_base": f"{ka:.4f} × [{g:.1f} × {r - hw:.3f} + ({gs:.1f} − {gw:.2f}) × {hw:.3f} + {q:.1f}]",
        "w_base": f"{gw:.2f} × {hw:.3f}",
        "water_thrust": f"0.5 × {gw:.2f} × {hw:.3f}²",
        "uplift": f"0.5 × {gw:.2f} × {hw:.3f} × {b:.3f}",
        "wall_weight": f"{float(wall['wall_unit_weight_kn_m3']):.1f} × {float(d['d_area_m2'][i]):.3f}",
    }
    values = [
        ("water_height_m", hw, 3, "m"),
        ("p_top_kpa", ka * q, 2, "kPa"),
        ("p_water_level_kpa", ka * (g * (r - hw) + q), 2, "kPa"),
        ("p_base_kpa", d["_p_base"][i], 2, "kPa"),
        ("w_base_kpa", d["_w_base"][i], 2, "kPa"),
        ("thrust_kn_m", d["d_thrust_kn_m"][i], 2, "kN/m"),
        ("thrust_height_m", d["d_thrust_height_m"][i], 3, "m"),
        ("water_kn_m", d["d_water_kn_m"][i], 2, "kN/m"),
        ("uplift_kn_m", d["uplift_kn_m"][i], 2, "kN/m"),
        ("uplift_arm_m", d["d_uplift_arm_m"][i], 3, "m"),
        ("weight_kn_m", d["weight_kn_m"][i], 2, "kN/m"),
        ("wall_arm_m", d["d_wall_arm_m"][i], 3, "m"),
        ("wedge_kn_m", d["wedge_kn_m"][i], 2, "kN/m"),
        ("wedge_arm_m", d["d_wedge_arm_m"][i], 3, "m"),
    ]
    return numbers, values


def _case_equilibrium(wall: pd.Series, d: dict[str, np.ndarray], i: int) -> _Steps:
    """The resultant loads and moments, the resultant's position, the base pressure, the factors."""
    b, hw = float(wall["base_width_m"]), float(d["water_height_m"][i])
    dl = math.radians(float(wall["wall_friction_deg"]))
    pa, uw, up = float(d["d_thrust_kn_m"][i]), float(d["d_water_kn_m"][i]), float(d["uplift_kn_m"][i])
    wt, ws = float(d["weight_kn_m"][i]), float(d["wedge_kn_m"][i])
    aw, as_ = float(d["d_wall_arm_m"][i]), float(d["d_wedge_arm_m"][i])
    zt = float(d["d_thrust_height_m"][i]) if pa > 0 else 0.0
    mr, mo = float(d["restoring_moment_knm_m"][i]), float(d["overturning_moment_knm_m"][i])
    v, sum_h = float(d["vertical_kn_m"][i]), float(d["horizontal_kn_m"][i])
    numbers = {
        "horizontal": f"{pa:.2f} × {math.cos(dl):.4f} + {uw:.2f}",
        "vertical": f"{wt:.2f} + {ws:.2f} + {pa:.2f} × {math.sin(dl):.4f} − {up:.2f}",
        "restoring": f"{wt:.2f} × {aw:.3f} + {ws:.2f} × {as_:.3f} + {pa * math.sin(dl):.2f} × {b:.3f}",
        "overturning_moment": f"{pa * math.cos(dl):.2f} × {zt:.3f} + {uw:.2f} × {hw / 3:.3f} + "
        f"{up:.2f} × {2 * b / 3:.3f}",
        "resultant": f"({mr:.2f} − {mo:.2f}) / {v:.2f}",
        "eccentricity": f"B/6 = {b / 6:.3f} m",
        "base_pressure": f"allowable {float(wall['allowable_bearing_kpa']):.0f} kPa",
        "sliding": f"{v:.2f} × tan {float(wall['base_friction_deg']):.1f}° / {sum_h:.2f}",
        "overturning": f"{mr:.2f} / {mo:.2f}",
    }
    values = [
        ("horizontal_kn_m", d["horizontal_kn_m"][i], 2, "kN/m"),
        ("vertical_kn_m", d["vertical_kn_m"][i], 2, "kN/m"),
        ("restoring_moment_knm_m", d["restoring_moment_knm_m"][i], 2, "kNm/m"),
        ("overturning_moment_knm_m", d["overturning_moment_knm_m"][i], 2, "kNm/m"),
        ("resultant_from_toe_m", d["resultant_from_toe_m"][i], 3, "m"),
        ("eccentricity_m", d["eccentricity_m"][i], 3, "m"),
        ("toe_pressure_kpa", d["toe_pressure_kpa"][i], 1, "kPa"),
        ("heel_pressure_kpa", d["heel_pressure_kpa"][i], 1, "kPa"),
        ("fos_sliding", d["fos_sliding"][i], 2, ""),
        ("fos_overturning", d["fos_overturning"][i], 2, ""),
    ]
    return numbers, values


_UTILISATIONS = (
    "middle_third_utilisation",
    "bearing_utilisation",
    "sliding_utilisation",
    "overturning_utilisation",
    "utilisation",
)
_CRACK_VALUES = (  # tagged name, engine column, digits, unit
    ("crack_base_width_m", "crack_d_base_width_m", 3, "m"),
    ("crack_height_above_m", "crack_d_height_m", 3, "m"),
    ("crack_vertical_kn_m", "crack_d_vertical_kn_m", 2, "kN/m"),
    ("crack_horizontal_kn_m", "crack_d_horizontal_kn_m", 2, "kN/m"),
    ("crack_eccentricity_m", "crack_eccentricity_m", 3, "m"),
    ("crack_middle_third_utilisation", "crack_middle_third_utilisation", 2, ""),
    ("crack_fos_sliding", "crack_fos_sliding", 2, ""),
    ("crack_sliding_utilisation", "crack_sliding_utilisation", 2, ""),
    ("crack_fos_overturning", "crack_fos_overturning", 2, ""),
    ("crack_overturning_utilisation", "crack_overturning_utilisation", 2, ""),
)


def _crack_plane(wall: pd.Series, d: dict[str, np.ndarray], i: int, prefix: str) -> dict[str, Any] | None:
    """The part above a known crack, checked on its own (None without a crack)."""
    if not np.isfinite(d["crack_eccentricity_m"][i]):
        return None
    return {
        "height": f"{float(wall['crack_height_m']):.2f}",
        "joint_friction": f"{float(wall['joint_friction_deg']):.0f}",
        "tags": _tagged(prefix, ((name, d[col][i], n, unit) for name, col, n, unit in _CRACK_VALUES)),
    }


_JOINT_VALUES = (  # tagged name, engine column, digits, unit
    ("joint_height_m", "joint_height_m", 2, "m"),
    ("joint_base_width_m", "joint_d_base_width_m", 3, "m"),
    ("joint_height_above_m", "joint_d_height_m", 3, "m"),
    ("joint_vertical_kn_m", "joint_d_vertical_kn_m", 2, "kN/m"),
    ("joint_horizontal_kn_m", "joint_d_horizontal_kn_m", 2, "kN/m"),
    ("joint_eccentricity_m", "joint_d_eccentricity_m", 3, "m"),
    ("joint_fos_sliding", "joint_d_fos_sliding", 2, ""),
    ("joint_fos_overturning", "joint_d_fos_overturning", 2, ""),
    ("joint_middle_third_utilisation", "joint_middle_third_utilisation", 2, ""),
    ("joint_sliding_utilisation", "joint_sliding_utilisation", 2, ""),
    ("joint_overturning_utilisation", "joint_overturning_utilisation", 2, ""),
)


def _joint_plane(wall: pd.Series, d: dict[str, np.ndarray], i: int, prefix: str) -> dict[str, Any] | None:
    """The governing bed joint of this case (method.md §8), checked as a crack plane (None if
    the wall's bed joints are not checked)."""
    if "joint_height_m" not in d or not np.isfinite(d["joint_height_m"][i]):
        return None
    return {
        "joint_friction": f"{float(wall['joint_friction_deg']):.0f}",
        "tags": _tagged(
            prefix,
            ((name, d[col][i] if col in d else math.nan, n, unit) for name, col, n, unit in _JOINT_VALUES),
        ),
    }


_ANNEX_D_VALUES = (  # tagged name, engine column, digits, unit
    ("effective_width_m", "d_bearing_effective_width_m", 3, "m"),
    ("overburden_kpa", "d_bearing_overburden_kpa", 2, "kPa"),
    ("n_q", "d_bearing_n_q", 2, ""),
    ("n_c", "d_bearing_n_c", 2, ""),
    ("n_gamma", "d_bearing_n_gamma", 2, ""),
    ("i_q", "d_bearing_i_q", 4, ""),
    ("i_c", "d_bearing_i_c", 4, ""),
    ("i_gamma", "d_bearing_i_gamma", 4, ""),
    ("q_ult_kpa", "d_bearing_q_ult_kpa", 1, "kPa"),
    ("resistance_kn_m", "bearing_resistance_kn_m", 1, "kN/m"),
)


def _annex_d_steps(
    wall: pd.Series, d: dict[str, np.ndarray], i: int, prefix: str, cfg: Config
) -> dict[str, Any] | None:
    """The bearing resistance of EN 1997-1 Annex D with its factors (method.md §10); None where
    the presumed allowable pressure is used."""
    if str(d["bearing_method"][i]) != "annex_d":
        return None
    phi = float(wall["foundation_friction_deg"])
    numbers = {
        "inputs": f"φ'_f = {phi:.1f}°, c' = {float(wall['foundation_cohesion_kpa']):.1f} kPa, "
        f"γ_f = {float(wall['foundation_unit_weight_kn_m3']):.1f} kN/m³, D = max({float(wall['embedment_m']):.2f}"
        f" − {cfg.toe_excavation_m:.2f}, 0) m",
        "loads": f"V = {float(d['vertical_kn_m'][i]):.2f}, H_b = {float(d['horizontal_kn_m'][i]):.2f} kN/m, "
        f"e = {float(d['eccentricity_m'][i]):.3f} m",
        "factor": f"{cfg.fos_bearing_required:g}",
    }
    tags = _tagged(
        prefix + "bearing_",
        ((name, d[col][i] if col in d else math.nan, n, unit) for name, col, n, unit in _ANNEX_D_VALUES),
    )
    return {"numbers": numbers, "tags": tags}


def _case_required(case: str, cfg: Config) -> dict[str, str]:
    """The required factors of this case: per case where criteria are set (method.md §12)."""
    c = cfg.case_criteria()[case]
    return {
        "sliding": f"{c.fos_sliding_required:g}",
        "overturning": f"{c.fos_overturning_required:g}",
        "resultant_limit": f"{c.resultant_limit:.3g}",
    }


def _critical_steps(wall: pd.Series, d: dict[str, np.ndarray], j: dict[str, int]) -> dict[str, Any] | None:
    """Critical water height, critical lean and the years to it (method.md §9), with the caution."""
    if "_critical_water_m" not in d:  # arrays of the engine alone: the figures are not known
        return None
    i = j["drained"]
    hc, lean, years = (float(d[k][i]) for k in ("_critical_water_m", "_critical_lean_deg", "_years_to_lean"))
    top = float(wall["retained_height_m"])
    if np.isnan(hc):
        water = "holds with water to the top of the retained ground"
    elif hc == 0:
        water = "fails with no water behind it (the drained case fails)"
    else:
        water = f"fails once water rises above {hc:.3f} m of {top:.3f} m"
    return {
        "water": water,
        "tags": _tagged(
            "critical.",
            [
                ("critical_water_height_m", hc, 3, "m"),
                ("critical_water_fraction", hc / top if top > 0 and np.isfinite(hc) else math.nan, 3, ""),
                ("critical_lean_deg", lean, 2, "°"),
                ("years_to_critical_lean", years, 1, "years"),
            ],
        ),
        "has_years": bool(np.isfinite(years)),
        "caution": LEAN_CAUTION,
    }


def _case_steps(
    n: int, case: str, wall: pd.Series, d: dict[str, np.ndarray], i: int, cfg: Config
) -> dict[str, Any]:
    """Sections 4 onwards: one case worked through, its checks and the verdict in words."""
    load_numbers, load_values = _case_loads(wall, d, i, case, cfg.gamma_w_kn_m3)
    eq_numbers, eq_values = _case_equilibrium(wall, d, i)
    checks = [(name, d[name][i], 2, "") for name in _UTILISATIONS]
    gov = str(d["governing_check"][i])
    tags = _tagged(case + ".", [*load_values, *eq_values, *checks])
    if "_near_toe_text" in d and d["_near_toe_text"][i]:  # the toe pressure is absurd there: in words
        tags["toe_pressure_kpa"] = {
            "key": case + ".toe_pressure_kpa",
            "text": str(d["_near_toe_text"][i]),
            "unit": "",
        }
    return {
        "n": n,
        "title": CASE_TITLES[case],
        "has_water": float(d["water_height_m"][i]) > 0,
        "state": str(d["state"][i]),
        "numbers": load_numbers | eq_numbers,
        "tags": tags,
        "crack": _crack_plane(wall, d, i, case + "."),
        "joint": _joint_plane(wall, d, i, case + "."),
        "annex_d": _annex_d_steps(wall, d, i, case + ".", cfg),
        "criteria": _case_required(case, cfg),
        "resultant": _tag(case + ".resultant_utilisation", d["resultant_utilisation"][i], 2)
        if cfg.criteria_set
        else None,
        "governing": CHECK_WORDS.get(gov, gov),
        "verdict": _verdict(case, d, i),
    }


def _required(cfg: Config) -> dict[str, str]:
    """The required factors of safety and the uplift switch, as the sheet states them."""
    sliding, overturning = f"{cfg.fos_sliding_required:g}", f"{cfg.fos_overturning_required:g}"
    uplift = "on" if cfg.uplift else "off"
    return {
        "sliding": sliding,
        "overturning": overturning,
        "summary": f"sliding {sliding}, overturning {overturning}; uplift {uplift}",
    }


DRAWS_CAPTION = (
    "The draws of method.md §13: each input drawn from a spread set by how well it is known. Grey: "
    "every draw; colour: the draws in which the wall could stand today. The probability read from "
    "them is conditional on the model and on the spreads (settings); it is a screening aid to rank "
    "walls, not a substitute for inspection by a qualified engineer."
)


def _draws_of(sub: pd.DataFrame, inputs: dict[str, np.ndarray], d: dict[str, np.ndarray], cfg: Config) -> Any:
    """The §13 draws of these walls (:func:`uncertainty.wall_draws`), or None with samples = 0."""
    if cfg.samples <= 0:
        return None
    from screening.core import uncertainty
    from screening.probability import uncertainty_inputs

    n = len(sub)
    joint = np.asarray(d["joint_height_m"], dtype=float).reshape(len(CASES), n).T.reshape(-1)
    chunk = cast(Prepared, SimpleNamespace(walls=sub, inputs=inputs))
    p = uncertainty_inputs(chunk, pd.DataFrame({"joint_height_m": joint}))
    return uncertainty.wall_draws(p, uncertainty.make_draws(cfg.samples, cfg.seed), cfg)


DRAWN_AXIS = {
    "soil_friction_deg": "soil friction φ′ drawn (°)",
    "soil_unit_weight_kn_m3": "soil unit weight γ drawn (kN/m³)",
    "wall_unit_weight_kn_m3": "wall unit weight γ_w drawn (kN/m³)",
    "base_friction_deg": "base friction δ_b drawn (°)",
    "joint_friction_deg": "bed-joint friction drawn (°)",
    "ultimate_bearing_kpa": "ultimate bearing pressure drawn (kPa)",
    "dimensions": "dimensions drawn ÷ recorded",
    "water_height_m": "water height behind the wall drawn (m)",
}
"""The scatter's axis for each driver of method.md §13, in words with its unit."""


def figure_case_and_driver(results: pd.DataFrame) -> dict[str, tuple[str, str]]:
    """Per wall: the case its draws figure shows and the input it scatters against.

    The case is the one with the highest ``p_failure`` (ties to the higher utilisation, then the
    order of the cases), and the driver that case's ``driver`` in the results: the figure shows
    what the reason line and results.csv say, never an input of its own choosing.
    """
    if results.empty or "p_failure" not in results:
        return {}
    r = results[["wall_id", "case", "p_failure", "utilisation", "driver"]].copy()
    r["_p"] = pd.to_numeric(r["p_failure"], errors="coerce").fillna(-1.0)
    r["_u"] = np.nan_to_num(
        pd.to_numeric(r["utilisation"], errors="coerce").to_numpy(float), nan=-1.0, posinf=1e300
    )
    r["_c"] = r["case"].astype(str).map({c: -k for k, c in enumerate(CASES)})
    top = r.sort_values(["_p", "_u", "_c"], ascending=False, kind="stable").drop_duplicates("wall_id")
    drivers = top["driver"].astype(object).where(top["driver"].notna(), "").astype(str)
    pairs = zip(top["case"].astype(str), drivers, strict=True)
    return dict(zip(top["wall_id"].astype(str), pairs, strict=True))


def draws_alt(case: str, driver: str) -> str:
    """The draws figure in words (its alternative text): the case and the input it scatters against."""
    against = f"its scatter against the {DRAWN_AXIS[driver]}" if driver in DRAWN_AXIS else "no driver"
    return f"histogram of the ultimate utilisation, {case}, over the draws, and {against}"


def _padded(lo: float, hi: float, pad: float = 0.05) -> tuple[float, float]:
    """A data range with ``pad`` of its span on each side (half a unit around a single value)."""
    if not (math.isfinite(lo) and math.isfinite(hi)):
        return (0.0, 1.0)
    span = hi - lo if hi > lo else max(abs(lo), 1.0)
    return (lo - pad * span, hi + pad * span)


def _draws_figure(draws: dict[str, np.ndarray], pos: int, case: str, driver: str) -> str:
    """Ultimate utilisation of one case over the draws, all and standing, and its scatter
    against ``driver`` (the results' driver of that case; none drawn where it is blank)."""
    u = np.asarray(draws["utilisation"][CASES.index(case), pos], dtype=float)
    stands = np.asarray(draws["stands"][pos], dtype=bool)
    finite = u[np.isfinite(u)]
    top = float(min(5.0, max(2.0, np.percentile(finite, 99) * 1.1))) if finite.size else 5.0
    shown = np.clip(np.nan_to_num(u, posinf=top), 0.0, top)  # +inf (outside the base) drawn at the top
    size = 7 * PT
    fig = Figure(840.0, 312.0)
    bins = np.linspace(0.0, top, 41)
    every, standing = np.histogram(shown, bins)[0], np.histogram(shown[stands], bins)[0]
    ulim = _padded(0.0, top, 0.02)
    ax = fig.panel(62.0, 10.0, 330.0, 238.0, ulim, (0.0, max(float(every.max(initial=0)), 1.0) * 1.05))
    steps_x = np.repeat(bins, 2)
    for counts, color, opacity, label in (
        (every, "#BBBBBB", 1.0, "every draw"),
        (standing, "#332288", 0.8, "wall stands today"),
    ):
        steps_y = np.concatenate([[0.0], np.repeat(counts.astype(float), 2), [0.0]])
        ax.polygon(list(zip(steps_x, steps_y, strict=True)), color, opacity=opacity, label=label)
    ax.vline(1.0, "#882255", 1.5 * PT, label="limit (1)")
    ax.frame(f"ultimate utilisation, {case} ({top:.1f} = {top:.1f} or more)", "draws", yticks=4, size=size)
    third = len(every) // 3  # the legend in the upper corner over the lower bars
    fig.legend_column(ax, right=bool(every[-third:].max() <= every[:third].max()), size=size)
    if f"value_{driver}" in draws:
        x = np.asarray(draws[f"value_{driver}"][pos], dtype=float)
        ok = x[np.isfinite(x)]
        xlim = _padded(float(ok.min()), float(ok.max())) if ok.size else (0.0, 1.0)
        bx = fig.panel(472.0, 10.0, 358.0, 238.0, xlim, _padded(0.0, top))
        bx.dots(x[~stands], shown[~stands], "#BBBBBB", 3.5)
        bx.dots(x[stands], shown[stands], "#332288", 3.5)
        xlabel = DRAWN_AXIS.get(driver, driver)
    else:
        bx = fig.panel(472.0, 10.0, 358.0, 238.0, (0.0, 1.0), _padded(0.0, top))
        bx.axes_text(0.5, 0.5, "no input drives this case", size)
        xlabel = ""
    bx.hline(1.0, "#882255", 1.5 * PT)
    bx.frame(xlabel, f"ultimate utilisation, {case}", yticks=4, size=size)
    return fig.data_uri(draws_alt(case, driver))


def sheet_context(
    wall: pd.Series,
    d: dict[str, np.ndarray],
    j: dict[str, int],
    assumptions: Assumptions | pd.DataFrame,
    cfg: Config,
    provenance: list[tuple[str, Any]],
    with_figure: bool = True,
) -> dict[str, Any]:
    """Everything one wall's sheet shows, as plain data for ``sheet.html.j2``.

    Numbers come formatted as the sheet shows them; a tagged value is a dict of ``key``,
    ``text`` and ``unit``. Nothing here is markup: the template escapes every string.
    """
    return {
        "wall_id": str(wall["wall_id"]),
        "name": "" if pd.isna(wall.get("name")) else str(wall["name"]),
        "caution": CAUTION,
        "inputs": _input_rows(wall, assumptions),
        "section": _section_steps(wall, d, j["drained"]),
        "figure": _figure(wall, d, j, cfg) if with_figure else "",
        "figure_alt": _figure_alt(d, j),
        "critical": _critical_steps(wall, d, j),
        "cases": [_case_steps(n, case, wall, d, j[case], cfg) for n, case in enumerate(CASES, start=4)],
        "uplift": cfg.uplift,
        "required": _required(cfg),
        "provenance": [(str(key), str(value)) for key, value in provenance],
        "version": __version__,
        "paper": cfg.paper,
    }


def _template_source(name: str) -> str:
    return resources.files("screening.outputs").joinpath(name).read_text(encoding="utf-8")


@functools.cache
def _template() -> jinja2.Template:
    """The sheet's template, read from the package (works from a wheel or a zip as well)."""
    env = jinja2.Environment(
        loader=jinja2.FunctionLoader(_template_source),
        autoescape=True,  # register text (ids, names, sources) is never trusted as markup
        undefined=jinja2.StrictUndefined,
        trim_blocks=True,
        lstrip_blocks=True,
        keep_trailing_newline=True,
    )
    env.filters["css_string"] = css_string
    return env.get_template(TEMPLATE)


def css_string(text: Any) -> markupsafe.Markup:
    """``text`` as a quoted CSS string for the page's own style sheet (the running head): every
    character but ASCII letters, digits and a few plain marks is a CSS escape, so register text
    can neither end the string nor the <style> element (CSS Syntax Level 3, §4.3.7)."""
    plain = set("abcdefghijklmnopqrstuvwxyzABCDEFGHIJKLMNOPQRSTUVWXYZ0123456789 -_.,")
    body = "".join(c if c in plain else f"\\{ord(c):06x}" for c in str(text))
    return markupsafe.Markup(f'"{body}"')


def sheet_html(
    wall: pd.Series,
    d: dict[str, np.ndarray],
    j: dict[str, int],
    assumptions: Assumptions | pd.DataFrame,
    cfg: Config,
    provenance: list[tuple[str, Any]],
    with_figure: bool = True,
) -> str:
    """The HTML of one wall's sheet. ``d`` holds the engine's arrays; ``j`` the row of each case."""
    return _template().render(sheet_context(wall, d, j, assumptions, cfg, provenance, with_figure))


def _verdict(case: str, d: dict[str, np.ndarray], i: int) -> str:
    state = str(d["state"][i])
    u = float(d["utilisation"][i])
    gov = CHECK_WORDS.get(str(d["governing_check"][i]), "")
    where = {
        "drained": "With the drains working",
        "blocked": "With the drains blocked",
        "surveyed": "As surveyed",
    }[case]
    if state == "resultant_outside_base":
        return f"{where}, the resultant falls outside the base: the wall would overturn on this model."
    if state == "floating":
        return f"{where}, uplift exceeds the weight: check the dimensions and unit weights."
    base = (
        "the resultant stays within the middle third"
        if state == "within_middle_third"
        else ("the resultant leaves the middle third and a gap opens under the heel")
    )
    if u <= 1:
        return f"{where}, {base}, and every check passes (utilisation {_fmt(u)})."
    return f"{where}, {base}; the {gov} check governs with a utilisation of {_fmt(u)} (over 1: fails)."


def write_sheets(
    walls: pd.DataFrame,
    assumptions: Assumptions | pd.DataFrame,
    wall_ids: Iterable[str],
    out_dir: str | Path,
    config: Config,
    provenance: list[tuple[str, Any]],
    with_figure: bool = True,
    progress: Callable[[str], None] | None = None,
    figures: Mapping[str, tuple[str, str]] | None = None,
) -> dict[str, str]:
    """Write one sheet per wall into ``out_dir/sheets``; return wall id -> relative path.

    ``progress`` hears "calculation sheet k of n" as each sheet is written. ``figures`` gives
    per wall the case and driver of its draws figure (:func:`figure_case_and_driver` of the
    run's results); a wall not in it shows its case of highest utilisation, with no scatter.

    ``walls`` are the prepared (accepted, defaults filled) walls; the engine is run again
    on just these walls with ``details=True``, which gives the very numbers of the bulk run
    (the engine is element-wise).
    """
    ids = [str(w) for w in wall_ids]
    sub = walls[walls["wall_id"].astype(str).isin(ids)].reset_index(drop=True)
    if sub.empty:
        return {}
    inputs = {k: sub[k].to_numpy(dtype=float) for k in ENGINE_INPUTS}
    d = decode(run_cases(inputs, config, details=True))
    n = len(sub)
    tiled = np.tile(np.arange(n), len(CASES))
    g = sub["soil_unit_weight_kn_m3"].to_numpy(float)[tiled]
    gs = sub["soil_saturated_unit_weight_kn_m3"].to_numpy(float)[tiled]
    q = sub["surcharge_kpa"].to_numpy(float)[tiled]
    r = sub["retained_height_m"].to_numpy(float)[tiled]
    hw = d["water_height_m"]
    d["_g"], d["_gs"], d["_q"] = g, gs, q
    d["_p_base"] = d["ka"] * (g * (r - hw) + (gs - config.gamma_w_kn_m3) * hw + q)
    d["_w_base"] = config.gamma_w_kn_m3 * hw
    d["_near_toe_text"] = _near_toe_text(d, config)
    d.update(_critical_rows(sub, inputs, config, tiled))
    draws = _draws_of(sub, inputs, d, config) if with_figure else None
    folder = Path(out_dir) / "sheets"
    folder.mkdir(parents=True, exist_ok=True)
    _template()  # compiled once, before any worker is forked
    global _JOB
    _JOB = (sub, d, assumptions, config, provenance, with_figure, folder, draws, figures or {})
    try:
        if n >= 8 and "fork" in mp.get_all_start_methods() and (os.cpu_count() or 1) > 1:
            # drawing the figures dominates: share the work among the cores (forked
            # workers inherit the job, nothing is pickled but the wall positions)
            with mp.get_context("fork").Pool(min(os.cpu_count() or 1, 4)) as pool:
                pairs = _counted(pool.imap(_write_one, range(n), chunksize=4), n, progress)
        else:
            pairs = _counted(map(_write_one, range(n)), n, progress)
    finally:
        _JOB = None
    return dict(pairs)


_JOB: Any = None


def _counted(
    pairs: Iterable[tuple[str, str]], n: int, progress: Callable[[str], None] | None
) -> list[tuple[str, str]]:
    """The sheets' (wall id, path) pairs as they finish, saying "calculation sheet k of n"."""
    done = []
    for k, pair in enumerate(pairs, start=1):
        done.append(pair)
        if progress is not None:
            progress(f"calculation sheet {k} of {n}")
    return done


def _critical_rows(
    sub: pd.DataFrame, inputs: dict[str, np.ndarray], config: Config, tiled: np.ndarray
) -> dict[str, np.ndarray]:
    """The §9 figures of these walls (the same functions as the bulk run), one per engine row."""
    water = critical.critical_water_height(inputs, config)
    lean = critical.critical_lean(inputs, config)
    rate = (
        sub["lean_rate_deg_per_year"].to_numpy(float)
        if "lean_rate_deg_per_year" in sub
        else np.full(len(sub), np.nan)
    )
    years = critical.years_to_critical_lean(lean, sub["lean_deg"].to_numpy(float), rate)
    return {
        "_critical_water_m": water[tiled],
        "_critical_lean_deg": lean[tiled],
        "_years_to_lean": years[tiled],
    }


def _near_toe_text(d: dict[str, np.ndarray], config: Config) -> np.ndarray:
    """Per row: "resultant within 20 mm of the toe" where it is (shown instead of the toe pressure)."""
    limit = config.resultant_near_toe_m
    at_toe = near_toe(d["resultant_from_toe_m"], limit) if limit > 0 else np.zeros(len(d["case"]), bool)
    return np.where(at_toe, near_toe_words(limit), "").astype(object)


def _write_one(pos: int) -> tuple[str, str]:
    sub, d, assumptions, config, provenance, with_figure, folder, draws, figures = _JOB
    n = len(sub)
    wall = sub.iloc[pos]
    j = {case: pos + c * n for c, case in enumerate(CASES)}
    wid = str(wall["wall_id"])
    own = assumptions.for_wall(wid) if isinstance(assumptions, Assumptions) else assumptions
    context = sheet_context(wall, d, j, own, config, provenance, with_figure)
    if draws is not None:
        case, driver = figures.get(wid) or (
            max(CASES, key=lambda c: float(np.nan_to_num(d["utilisation"][j[c]], posinf=1e300))),
            "",
        )
        context |= {
            "draws_figure": _draws_figure(draws, pos, case, driver),
            "draws_caption": DRAWS_CAPTION,
            "draws_alt": draws_alt(case, driver),
        }
    page = _template().render(context)
    name = sheet_filename(wid)
    write_text_atomic(folder / name, page)
    return wid, f"sheets/{name}"
