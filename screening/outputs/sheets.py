"""Calculation sheets: one self-contained HTML page per wall, set out as by hand.

The sheet is generated from the engine's own output for that wall (``run_cases``
with ``details=True``), so every number on it is a number the screening used.
Figures are drawn with matplotlib and embedded as PNG data; the page loads no
external resource and prints to PDF from any browser.
"""

from __future__ import annotations

import base64
import html
import io
import math
import multiprocessing as mp
import os
from collections.abc import Iterable
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
from matplotlib.figure import Figure
from matplotlib.patches import Polygon

from screening import __version__
from screening.config import CASES, Config
from screening.core.engine import ENGINE_INPUTS, decode, run_cases
from screening.io.writers import write_text_atomic
from screening.outputs import sheet_filename
from screening.outputs.workbook import CAUTION
from screening.schema import UNITS

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


class _Sheet:
    """Collects the HTML of one sheet; every computed value is tagged with its key."""

    def __init__(self) -> None:
        self.parts: list[str] = []

    def v(self, key: str, value: Any, digits: int = 2, unit: str = "") -> str:
        text = _fmt(value, digits)
        u = f"&nbsp;{unit}" if unit else ""
        return f'<span class="v" data-key="{html.escape(key)}">{text}</span>{u}'

    def add(self, text: str) -> None:
        self.parts.append(text)

    def step(self, label: str, formula: str, substituted: str, result: str) -> None:
        self.add(
            f"<tr><th>{label}</th><td class='f'>{formula}</td><td class='s'>{substituted}</td>"
            f"<td class='r'>{result}</td></tr>"
        )


def _figure(wall: pd.Series, d: dict[str, np.ndarray], j: dict[str, int], cfg: Config) -> str:
    """Section, pressures, resultant and base pressure for each case, side by side (PNG data URI)."""
    h, b, t, f = (float(wall[k]) for k in ("height_m", "base_width_m", "top_width_m", "front_batter_m"))
    r = float(wall["retained_height_m"])
    lean = math.radians(float(wall["lean_deg"]))
    crack = float(wall["crack_height_m"])
    fig = Figure(figsize=(13.5, 5.0))  # no pyplot: no global state, no GUI backend
    axes = fig.subplots(1, 3, sharey=True)
    pmax = max(float(np.nanmax([d["_p_base"][i] + d["_w_base"][i] for i in j.values()])), 1.0)
    scale = 0.45 * max(b, h * 0.5) / pmax  # metres of drawing per kPa
    for ax, case in zip(axes, CASES, strict=True):
        i = j[case]
        hw = float(d["water_height_m"][i])
        c, s = math.cos(lean), math.sin(lean)

        def rot(x: float, z: float, c: float = c, s: float = s) -> tuple[float, float]:
            return x * c - z * s, x * s + z * c

        body = [rot(0, 0), rot(b, 0), rot(b - (b - f - t), h), rot(f, h)]
        ax.add_patch(Polygon(body, closed=True, fc="#C9C2B8", ec="#333333", lw=1.2, label="wall"))
        back = b - f - t
        if back > 0 and r > 0:
            wedge = [rot(b, 0), rot(b, r), rot(b - back * r / h, r)]
            ax.add_patch(
                Polygon(wedge, closed=True, fc="#E6D9B8", ec="#8A7A50", lw=0.8, label="soil carried")
            )
        ax.plot([b, b + 0.8 * b + 1], [r, r], color="#8A7A50", lw=1.0)
        ax.plot([b, b], [0, r], color="#8A7A50", lw=0.8, ls=":")
        if hw > 0:
            ax.plot([b, b + 0.8 * b + 1], [hw, hw], color="#1F5FBF", lw=1.4, ls="--", label="water level")
        if not math.isnan(crack):
            bc = b - (f + back) * crack / h
            fc = f * crack / h
            ax.plot(
                *zip(rot(fc, crack), rot(fc + bc, crack), strict=True),
                color="#B2182B",
                lw=2.0,
                label="known crack",
            )
        # effective earth pressure and water pressure on the virtual back (x = B)
        ka, q, g, gs = (float(d[k][i]) for k in ("ka", "_q", "_g", "_gs"))
        zs = np.array([r, hw, 0.0]) if hw > 0 else np.array([r, 0.0])
        sv = np.where(zs >= hw, g * (r - zs), g * (r - hw) + (gs - cfg.gamma_w_kn_m3) * (hw - zs))
        pe = ka * (sv + q)
        ax.fill_betweenx(zs, b, b + pe * scale, color="#8A7A50", alpha=0.35, lw=0, label="earth pressure")
        if hw > 0:
            zw = np.array([hw, 0.0])
            pw = cfg.gamma_w_kn_m3 * (hw - zw)
            ax.fill_betweenx(
                zw,
                b + pe[-2:] * scale,
                b + (pe[-2:] + pw) * scale,
                color="#1F5FBF",
                alpha=0.35,
                lw=0,
                label="water pressure",
            )
        # middle third and resultant
        for xm in (b / 3, 2 * b / 3):
            ax.plot([xm, xm], [-0.04 * h, 0.04 * h], color="#000000", lw=1.0)
        x_r = float(d["resultant_from_toe_m"][i])
        if np.isfinite(x_r):
            ax.annotate(
                "",
                xy=(x_r, 0),
                xytext=(x_r + 0.15 * h, 0.45 * h),
                arrowprops={"arrowstyle": "-|>", "color": "#000000", "lw": 1.8},
            )
            ax.text(x_r + 0.15 * h, 0.47 * h, "R", color="#000000", ha="left")
        # base pressure below the base
        toe, heel = float(d["toe_pressure_kpa"][i]), float(d["heel_pressure_kpa"][i])
        bscale = 0.25 * h / max(np.nanmax([v for v in (toe, heel) if np.isfinite(v)] + [1.0]), 1.0)
        if np.isfinite(toe) and np.isfinite(heel):
            state = str(d["state"][i])
            if state == "within_middle_third":
                xs, qs = [0, b], [toe, heel]
            elif toe > 0:
                xs, qs = [0, min(3 * x_r, b)], [toe, 0]
            else:
                xs, qs = [max(b - 3 * (b - x_r), 0), b], [0, heel]
            ax.fill_between(
                xs,
                [0, 0],
                [-v * bscale for v in qs],
                color="#7B3294",
                alpha=0.35,
                lw=0,
                label="base pressure",
            )
            ax.text(0, -toe * bscale - 0.05 * h, f"{toe:.0f} kPa", fontsize=8, ha="left", va="top")
        else:
            ax.text(0, -0.12 * h, "resultant outside the base", fontsize=9, color="#B2182B")
        u = float(d["utilisation"][i])
        ax.set_title(f"{case}: h_w = {hw:.2f} m, utilisation {_fmt(u)}", fontsize=10)
        ax.set_aspect("equal")
        ax.set_xlim(-0.3 * h - 0.3, b + 0.8 * b + 1.2)
        ax.set_ylim(-0.45 * h, 1.08 * h)
        ax.axhline(0, color="#555555", lw=0.6)
        ax.set_xlabel("x from the toe [m]")
    axes[0].set_ylabel("z from the underside of the base [m]")
    handles, labels = [], []
    for ax in axes:
        for hnd, lab in zip(*ax.get_legend_handles_labels(), strict=True):
            if lab not in labels:
                handles.append(hnd)
                labels.append(lab)
    fig.legend(handles, labels, loc="lower center", ncol=len(labels), fontsize=8, frameon=False)
    fig.subplots_adjust(left=0.05, right=0.99, top=0.93, bottom=0.2, wspace=0.06)
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=80)
    return "data:image/png;base64," + base64.b64encode(buf.getvalue()).decode("ascii")


def sheet_html(
    wall: pd.Series,
    d: dict[str, np.ndarray],
    j: dict[str, int],
    assumptions: pd.DataFrame,
    cfg: Config,
    provenance: list[tuple[str, Any]],
    with_figure: bool = True,
) -> str:
    """The HTML of one wall's sheet. ``d`` holds the engine's arrays; ``j`` the row of each case."""
    sh = _Sheet()
    wid = html.escape(str(wall["wall_id"]))
    name = html.escape(str(wall.get("name") or ""))
    gw = cfg.gamma_w_kn_m3
    sh.add(f"<h1>Calculation sheet: wall {wid}</h1><p class='name'>{name}</p>")
    sh.add(f"<p class='caution'>{html.escape(CAUTION)}</p>")

    # inputs as recorded and assumed
    assumed = assumptions.set_index("column") if len(assumptions) else pd.DataFrame()
    sh.add(
        "<h2>1. Inputs</h2><table class='inputs'><tr><th>item</th><th>value</th><th>unit</th>"
        "<th>origin</th></tr>"
    )
    for key in ENGINE_INPUTS:
        if key == "surveyed_water_height_m":
            continue
        value = wall[key]
        origin = "as recorded"
        if key in assumed.index:
            origin = "assumed: " + html.escape(str(assumed.loc[key, "source"]))
        if key == "crack_height_m" and (value is None or pd.isna(value)):
            origin = "no crack recorded"
        sh.add(
            f"<tr><td>{key}</td><td>{sh.v('input.' + key, value, 3)}</td>"
            f"<td>{html.escape(UNITS.get(key, ''))}</td><td>{origin}</td></tr>"
        )
    for key in ("material", "foundation", "drainage", "consequence"):
        if key in wall and isinstance(wall[key], str):
            origin = (
                "assumed: " + html.escape(str(assumed.loc[key, "source"]))
                if key in assumed.index
                else ("as recorded")
            )
            sh.add(f"<tr><td>{key}</td><td>{html.escape(str(wall[key]))}</td><td></td><td>{origin}</td></tr>")
    if "surveyed water_height_m" in assumed.index:
        sh.add(
            f"<tr><td>surveyed water height</td><td>{sh.v('input.surveyed_water_height_m', wall['surveyed_water_height_m'], 3)}"
            f"</td><td>m</td><td>{html.escape(str(assumed.loc['surveyed water_height_m', 'source']))}</td></tr>"
        )
    sh.add("</table>")

    # common: geometry and Ka
    i0 = j["drained"]
    h, b, t, f = (float(wall[k]) for k in ("height_m", "base_width_m", "top_width_m", "front_batter_m"))
    sh.add("<h2>2. Section and active pressure coefficient</h2><table class='steps'>")
    sh.step(
        "back batter",
        "b = B − f − t",
        f"{b:.3f} − {f:.3f} − {t:.3f}",
        sh.v("common.back_batter_m", d["d_back_batter_m"][i0], 3, "m"),
    )
    sh.step(
        "section area",
        "A = H(B + t)/2",
        f"{h:.3f} × ({b:.3f} + {t:.3f}) / 2",
        sh.v("common.area_m2", d["d_area_m2"][i0], 3, "m²"),
    )
    sh.step(
        "centroid",
        "(x<sub>c</sub>, z<sub>c</sub>) of the quadrilateral",
        "shoelace formula",
        f"({sh.v('common.wall_x_m', d['d_wall_x_m'][i0], 3)}, {sh.v('common.wall_z_m', d['d_wall_z_m'][i0], 3)}) m",
    )
    sh.step(
        "lean",
        "lever arm x cos ω − z sin ω",
        f"ω = {float(wall['lean_deg']):.2f}°",
        sh.v("common.wall_arm_m", d["d_wall_arm_m"][i0], 3, "m"),
    )
    phi, delta, beta = (
        float(wall[k]) for k in ("soil_friction_deg", "wall_friction_deg", "backfill_slope_deg")
    )
    sh.step(
        "K<sub>a</sub> (Coulomb, vertical back)",
        "cos²φ' / (cos δ [1 + √(sin(φ'+δ) sin(φ'−β) / (cos δ cos β))]²)",
        f"φ' = {phi:.1f}°, δ = {delta:.1f}°, β = {beta:.1f}°",
        sh.v("common.ka", d["ka"][i0], 4),
    )
    sh.add("</table>")

    if with_figure:
        sh.add(
            f"<h2>3. The three cases at a glance</h2><img class='fig' alt='wall section, pressures and "
            f"base pressure in each case' src='{_figure(wall, d, j, cfg)}'/>"
        )

    q = float(wall["surcharge_kpa"])
    g, gs = float(wall["soil_unit_weight_kn_m3"]), float(wall["soil_saturated_unit_weight_kn_m3"])
    r = float(wall["retained_height_m"])
    for n, case in enumerate(CASES, start=4):
        i = j[case]
        k = case + "."
        hw = float(d["water_height_m"][i])
        ka = float(d["ka"][i])
        sh.add(f"<h2>{n}. {CASE_TITLES[case]}</h2><table class='steps'>")
        sh.add("<tr><th></th><th>formula</th><th>numbers</th><th>result</th></tr>")
        sh.step(
            "water height",
            "h<sub>w</sub>",
            CASE_TITLES[case].split(" (")[0].lower(),
            sh.v(k + "water_height_m", hw, 3, "m"),
        )
        sh.step(
            "pressure at the top",
            "K<sub>a</sub> q",
            f"{ka:.4f} × {q:.1f}",
            sh.v(k + "p_top_kpa", ka * q, 2, "kPa"),
        )
        if hw > 0:
            sh.step(
                "pressure at the water level",
                "K<sub>a</sub>[γ(H<sub>r</sub> − h<sub>w</sub>) + q]",
                f"{ka:.4f} × [{g:.1f} × ({r:.3f} − {hw:.3f}) + {q:.1f}]",
                sh.v(k + "p_water_level_kpa", ka * (g * (r - hw) + q), 2, "kPa"),
            )
        sh.step(
            "effective pressure at the base",
            "K<sub>a</sub>[γ(H<sub>r</sub> − h<sub>w</sub>) + (γ<sub>sat</sub> − γ<sub>w</sub>)h<sub>w</sub> + q]",
            f"{ka:.4f} × [{g:.1f} × {r - hw:.3f} + ({gs:.1f} − {gw:.2f}) × {hw:.3f} + {q:.1f}]",
            sh.v(k + "p_base_kpa", d["_p_base"][i], 2, "kPa"),
        )
        sh.step(
            "water pressure at the base",
            "γ<sub>w</sub> h<sub>w</sub>",
            f"{gw:.2f} × {hw:.3f}",
            sh.v(k + "w_base_kpa", d["_w_base"][i], 2, "kPa"),
        )
        sh.step(
            "earth thrust",
            "P'<sub>a</sub> = ∫K<sub>a</sub>(σ'<sub>v</sub> + q) dz",
            "area of the diagram",
            f"{sh.v(k + 'thrust_kn_m', d['d_thrust_kn_m'][i], 2, 'kN/m')} at z = "
            f"{sh.v(k + 'thrust_height_m', d['d_thrust_height_m'][i], 3, 'm')}",
        )
        sh.step(
            "water thrust",
            "U<sub>w</sub> = ½ γ<sub>w</sub> h<sub>w</sub>²",
            f"0.5 × {gw:.2f} × {hw:.3f}²",
            f"{sh.v(k + 'water_kn_m', d['d_water_kn_m'][i], 2, 'kN/m')} at z = h<sub>w</sub>/3",
        )
        sh.step(
            "uplift",
            "U = ½ γ<sub>w</sub> h<sub>w</sub> B" if cfg.uplift else "U (uplift switched off)",
            f"0.5 × {gw:.2f} × {hw:.3f} × {b:.3f}",
            f"{sh.v(k + 'uplift_kn_m', d['uplift_kn_m'][i], 2, 'kN/m')} at "
            f"{sh.v(k + 'uplift_arm_m', d['d_uplift_arm_m'][i], 3, 'm')} from the toe",
        )
        sh.step(
            "wall weight",
            "W = γ<sub>wall</sub> A",
            f"{float(wall['wall_unit_weight_kn_m3']):.1f} × {float(d['d_area_m2'][i]):.3f}",
            f"{sh.v(k + 'weight_kn_m', d['weight_kn_m'][i], 2, 'kN/m')}, arm "
            f"{sh.v(k + 'wall_arm_m', d['d_wall_arm_m'][i], 3, 'm')}",
        )
        sh.step(
            "soil carried",
            "W<sub>s</sub> (γ above, γ<sub>sat</sub> below the water)",
            "wedge over the back",
            f"{sh.v(k + 'wedge_kn_m', d['wedge_kn_m'][i], 2, 'kN/m')}, arm "
            f"{sh.v(k + 'wedge_arm_m', d['d_wedge_arm_m'][i], 3, 'm')}",
        )
        dl = math.radians(delta)
        pa, uw, up = float(d["d_thrust_kn_m"][i]), float(d["d_water_kn_m"][i]), float(d["uplift_kn_m"][i])
        wt, ws = float(d["weight_kn_m"][i]), float(d["wedge_kn_m"][i])
        aw, as_ = float(d["d_wall_arm_m"][i]), float(d["d_wedge_arm_m"][i])
        sh.step(
            "horizontal load",
            "ΣH = P'<sub>a</sub> cos δ + U<sub>w</sub>",
            f"{pa:.2f} × {math.cos(dl):.4f} + {uw:.2f}",
            sh.v(k + "horizontal_kn_m", d["horizontal_kn_m"][i], 2, "kN/m"),
        )
        sh.step(
            "vertical load",
            "V = W + W<sub>s</sub> + P'<sub>a</sub> sin δ − U",
            f"{wt:.2f} + {ws:.2f} + {pa:.2f} × {math.sin(dl):.4f} − {up:.2f}",
            sh.v(k + "vertical_kn_m", d["vertical_kn_m"][i], 2, "kN/m"),
        )
        sh.step(
            "restoring moment",
            "M<sub>R</sub> = W·x<sub>W</sub> + W<sub>s</sub>·x<sub>s</sub> + P'<sub>a</sub> sin δ·B",
            f"{wt:.2f} × {aw:.3f} + {ws:.2f} × {as_:.3f} + {pa * math.sin(dl):.2f} × {b:.3f}",
            sh.v(k + "restoring_moment_knm_m", d["restoring_moment_knm_m"][i], 2, "kNm/m"),
        )
        zt = float(d["d_thrust_height_m"][i]) if pa > 0 else 0.0
        sh.step(
            "overturning moment",
            "M<sub>O</sub> = Σ(H·z) + U·2B/3",
            f"{pa * math.cos(dl):.2f} × {zt:.3f} + {uw:.2f} × {hw / 3:.3f} + {up:.2f} × {2 * b / 3:.3f}",
            sh.v(k + "overturning_moment_knm_m", d["overturning_moment_knm_m"][i], 2, "kNm/m"),
        )
        sh.step(
            "resultant",
            "x<sub>R</sub> = (M<sub>R</sub> − M<sub>O</sub>)/V",
            f"({float(d['restoring_moment_knm_m'][i]):.2f} − {float(d['overturning_moment_knm_m'][i]):.2f})"
            f" / {float(d['vertical_kn_m'][i]):.2f}",
            sh.v(k + "resultant_from_toe_m", d["resultant_from_toe_m"][i], 3, "m"),
        )
        sh.step(
            "eccentricity",
            "e = B/2 − x<sub>R</sub>; limit B/6",
            f"B/6 = {b / 6:.3f} m",
            sh.v(k + "eccentricity_m", d["eccentricity_m"][i], 3, "m"),
        )
        state = str(d["state"][i])
        how = {
            "within_middle_third": "trapezoid: q = V/B (1 ± 6e/B)",
            "outside_middle_third": "no-tension triangle: q<sub>max</sub> = 2V/(3x')",
            "resultant_outside_base": "resultant outside the base: the wall overturns",
            "floating": "V ≤ 0: the wall floats",
        }[state]
        sh.step(
            "base pressure",
            how,
            f"allowable {float(wall['allowable_bearing_kpa']):.0f} kPa",
            f"toe {sh.v(k + 'toe_pressure_kpa', d['toe_pressure_kpa'][i], 1, 'kPa')}, heel "
            f"{sh.v(k + 'heel_pressure_kpa', d['heel_pressure_kpa'][i], 1, 'kPa')}",
        )
        sh.step(
            "sliding",
            "FoS = V tan δ<sub>b</sub> / ΣH",
            f"{float(d['vertical_kn_m'][i]):.2f} × tan {float(wall['base_friction_deg']):.1f}° / "
            f"{float(d['horizontal_kn_m'][i]):.2f}",
            sh.v(k + "fos_sliding", d["fos_sliding"][i], 2),
        )
        sh.step(
            "overturning",
            "FoS = M<sub>R</sub>/M<sub>O</sub>",
            f"{float(d['restoring_moment_knm_m'][i]):.2f} / {float(d['overturning_moment_knm_m'][i]):.2f}",
            sh.v(k + "fos_overturning", d["fos_overturning"][i], 2),
        )
        sh.add("</table><table class='util'><tr><th>check</th><th>utilisation</th></tr>")
        sh.add(
            f"<tr><td>middle third |e|/(B/6)</td><td>{sh.v(k + 'middle_third_utilisation', d['middle_third_utilisation'][i])}</td></tr>"
        )
        sh.add(
            f"<tr><td>bearing q<sub>max</sub>/q<sub>allow</sub></td><td>{sh.v(k + 'bearing_utilisation', d['bearing_utilisation'][i])}</td></tr>"
        )
        sh.add(
            f"<tr><td>sliding {cfg.fos_sliding_required:g}/FoS</td><td>{sh.v(k + 'sliding_utilisation', d['sliding_utilisation'][i])}</td></tr>"
        )
        sh.add(
            f"<tr><td>overturning {cfg.fos_overturning_required:g}/FoS</td><td>{sh.v(k + 'overturning_utilisation', d['overturning_utilisation'][i])}</td></tr>"
        )
        cracked = np.isfinite(d["crack_eccentricity_m"][i])
        if cracked:
            zc = float(wall["crack_height_m"])
            sh.add(
                f"<tr><td colspan='2' class='sub'>Part above the crack at z<sub>c</sub> = {zc:.2f} m: base "
                f"{sh.v(k + 'crack_base_width_m', d['crack_d_base_width_m'][i], 3, 'm')}, height "
                f"{sh.v(k + 'crack_height_above_m', d['crack_d_height_m'][i], 3, 'm')}, V = "
                f"{sh.v(k + 'crack_vertical_kn_m', d['crack_d_vertical_kn_m'][i], 2, 'kN/m')}, ΣH = "
                f"{sh.v(k + 'crack_horizontal_kn_m', d['crack_d_horizontal_kn_m'][i], 2, 'kN/m')}, "
                f"e<sub>c</sub> = {sh.v(k + 'crack_eccentricity_m', d['crack_eccentricity_m'][i], 3, 'm')}; "
                "no uplift in the crack, joint friction "
                f"{float(wall['joint_friction_deg']):.0f}°</td></tr>"
            )
            sh.add(
                f"<tr><td>crack: middle third</td><td>{sh.v(k + 'crack_middle_third_utilisation', d['crack_middle_third_utilisation'][i])}</td></tr>"
            )
            sh.add(
                f"<tr><td>crack: sliding (FoS {sh.v(k + 'crack_fos_sliding', d['crack_fos_sliding'][i])})</td>"
                f"<td>{sh.v(k + 'crack_sliding_utilisation', d['crack_sliding_utilisation'][i])}</td></tr>"
            )
            sh.add(
                f"<tr><td>crack: overturning (FoS {sh.v(k + 'crack_fos_overturning', d['crack_fos_overturning'][i])})</td>"
                f"<td>{sh.v(k + 'crack_overturning_utilisation', d['crack_overturning_utilisation'][i])}</td></tr>"
            )
        gov = str(d["governing_check"][i])
        sh.add(
            f"<tr class='gov'><td>governing: {CHECK_WORDS.get(gov, gov)}</td><td>"
            f"{sh.v(k + 'utilisation', d['utilisation'][i])}</td></tr></table>"
        )
        sh.add(f"<p class='verdict'>{_verdict(case, d, i)}</p>")

    sh.add("<h2>Run</h2><table class='inputs'>")
    for key, value in provenance:
        sh.add(f"<tr><td>{html.escape(str(key))}</td><td>{html.escape(str(value))}</td></tr>")
    sh.add(
        f"<tr><td>required factors</td><td>sliding {cfg.fos_sliding_required:g}, overturning "
        f"{cfg.fos_overturning_required:g}; uplift {'on' if cfg.uplift else 'off'}</td></tr></table>"
    )
    sh.add(f"<p class='caution'>{html.escape(CAUTION)}</p><p class='foot'>wallscreen {__version__}</p>")
    return _PAGE.replace("__TITLE__", f"Wall {wid}").replace("__BODY__", "\n".join(sh.parts))


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


_PAGE = """<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8"><title>__TITLE__</title>
<style>
body { font: 14px/1.45 system-ui, sans-serif; margin: 24px auto; max-width: 1120px; color: #222; }
h1 { font-size: 22px; margin-bottom: 0; } h2 { font-size: 17px; margin-top: 28px;
  border-bottom: 1px solid #bbb; }
table { border-collapse: collapse; margin: 6px 0; } td, th { padding: 3px 8px; vertical-align: top;
  border-bottom: 1px solid #e3e3e3; text-align: left; }
table.steps th { width: 190px; font-weight: 600; } td.f { font-family: Georgia, serif; }
td.s { color: #555; } td.r { white-space: nowrap; font-weight: 600; }
table.util td:last-child { text-align: right; font-weight: 600; } tr.gov td { border-top: 2px solid #333; }
td.sub { color: #444; font-style: italic; }
.caution { color: #6b1d1d; font-style: italic; } .verdict { font-weight: 600; }
img.fig { width: 100%; border: 1px solid #ddd; } .foot { color: #777; font-size: 12px; }
@media print { body { margin: 0; max-width: none; } h2 { break-after: avoid; } table { break-inside: avoid; } }
</style></head><body>
__BODY__
</body></html>
"""


def write_sheets(
    walls: pd.DataFrame,
    assumptions: pd.DataFrame,
    wall_ids: Iterable[str],
    out_dir: str | Path,
    config: Config,
    provenance: list[tuple[str, Any]],
    with_figure: bool = True,
) -> dict[str, str]:
    """Write one sheet per wall into ``out_dir/sheets``; return wall id -> relative path.

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
    folder = Path(out_dir) / "sheets"
    folder.mkdir(parents=True, exist_ok=True)
    global _JOB
    _JOB = (sub, d, assumptions, config, provenance, with_figure, folder)
    try:
        if n >= 8 and "fork" in mp.get_all_start_methods() and (os.cpu_count() or 1) > 1:
            # drawing the figures dominates: share the work among the cores (forked
            # workers inherit the job, nothing is pickled but the wall positions)
            with mp.get_context("fork").Pool(min(os.cpu_count() or 1, 4)) as pool:
                pairs = pool.map(_write_one, range(n), chunksize=4)
        else:
            pairs = [_write_one(pos) for pos in range(n)]
    finally:
        _JOB = None
    return dict(pairs)


_JOB: Any = None


def _write_one(pos: int) -> tuple[str, str]:
    sub, d, assumptions, config, provenance, with_figure, folder = _JOB
    n = len(sub)
    wall = sub.iloc[pos]
    j = {case: pos + c * n for c, case in enumerate(CASES)}
    wid = str(wall["wall_id"])
    own = assumptions[assumptions["wall_id"].astype(str) == wid]
    page = sheet_html(wall, d, j, own, config, provenance, with_figure)
    name = sheet_filename(wid)
    write_text_atomic(folder / name, page)
    return wid, f"sheets/{name}"
