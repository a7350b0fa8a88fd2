"""The screening engine: method.md composed over every wall and every case in one pass.

Input is a mapping of canonical column names to float arrays with every blank
already filled (see :mod:`screening.prepare`); output is a mapping of the
``results.csv`` columns to arrays of length ``3 × n_walls`` (case-major: all
walls drained, then blocked, then surveyed). No loop over walls.
"""

from __future__ import annotations

from collections.abc import Mapping

import numpy as np
from numpy.typing import NDArray

from screening import earth_pressure, section, stability
from screening.config import CASES, Config

FloatArray = NDArray[np.float64]

ENGINE_INPUTS = (
    "height_m",
    "base_width_m",
    "top_width_m",
    "front_batter_m",
    "retained_height_m",
    "lean_deg",
    "crack_height_m",
    "wall_unit_weight_kn_m3",
    "soil_unit_weight_kn_m3",
    "soil_saturated_unit_weight_kn_m3",
    "soil_friction_deg",
    "wall_friction_deg",
    "backfill_slope_deg",
    "surcharge_kpa",
    "base_friction_deg",
    "joint_friction_deg",
    "allowable_bearing_kpa",
    "surveyed_water_height_m",
)
"""Columns the engine reads (``crack_height_m`` NaN where no crack is recorded)."""

BASE_CHECKS = ("middle_third", "bearing", "sliding", "overturning")
CRACK_CHECKS = ("crack_middle_third", "crack_sliding", "crack_overturning")
CHECKS = BASE_CHECKS + CRACK_CHECKS
"""Names of the checks, as written in ``governing_check``."""


def section_checks(
    p: Mapping[str, FloatArray],
    water_height_m: FloatArray,
    *,
    uplift: bool,
    friction_deg: FloatArray,
    config: Config,
    details: bool = False,
) -> dict[str, FloatArray]:
    """Forces, moments, resultant and factors of safety of one section.

    ``p`` holds the section's geometry and loads (canonical names); used for the
    wall on its base and, with the crack geometry, for the part above a crack.

    References
    ----------
    method.md §1–3: weight and wedge with lean about the toe, Coulomb thrust on
    the virtual back through the heel, water pressure and linear uplift.
    """
    gw = config.gamma_w_kn_m3
    height, base, top, front = (p["height_m"], p["base_width_m"], p["top_width_m"], p["front_batter_m"])
    retained = p["retained_height_m"]
    hw = water_height_m
    back = section.back_batter(base, top, front)

    area, x_w, z_w = section.wall_section(height, base, top, front)
    weight = p["wall_unit_weight_kn_m3"] * area
    wedge, x_s, z_s = section.back_wedge(
        height,
        base,
        back,
        retained,
        hw,
        p["soil_unit_weight_kn_m3"],
        p["soil_saturated_unit_weight_kn_m3"],
    )
    arm_w = section.lever_after_lean(x_w, z_w, p["lean_deg"])
    arm_s = np.where(wedge > 0, section.lever_after_lean(x_s, z_s, p["lean_deg"]), 0.0)

    ka = earth_pressure.coulomb_ka(p["soil_friction_deg"], p["wall_friction_deg"], p["backfill_slope_deg"])
    thrust, thrust_moment = earth_pressure.effective_thrust(
        ka,
        retained,
        hw,
        p["soil_unit_weight_kn_m3"],
        p["soil_saturated_unit_weight_kn_m3"],
        p["surcharge_kpa"],
        gw,
    )
    delta = np.radians(p["wall_friction_deg"])
    water, water_moment = earth_pressure.water_thrust(hw, gw)
    if uplift:
        up, up_arm = earth_pressure.base_uplift(hw, base, gw)
    else:
        up, up_arm = np.zeros_like(hw), np.zeros_like(hw)

    horizontal = thrust * np.cos(delta) + water
    vertical = weight + wedge + thrust * np.sin(delta) - up
    restoring = weight * arm_w + wedge * arm_s + thrust * np.sin(delta) * base
    overturning = thrust_moment * np.cos(delta) + water_moment + up * up_arm
    x_r, ecc = stability.resultant_position(restoring, overturning, vertical, base)
    extra = {}
    if details:
        with np.errstate(invalid="ignore", divide="ignore"):
            extra = {
                "d_area_m2": area,
                "d_wall_x_m": x_w,
                "d_wall_z_m": z_w,
                "d_wall_arm_m": arm_w,
                "d_wedge_x_m": x_s,
                "d_wedge_z_m": z_s,
                "d_wedge_arm_m": arm_s,
                "d_back_batter_m": back,
                "d_thrust_kn_m": thrust,
                "d_thrust_height_m": np.where(thrust > 0, thrust_moment / thrust, np.nan),
                "d_thrust_moment_knm_m": thrust_moment * np.cos(delta),
                "d_water_kn_m": water,
                "d_water_moment_knm_m": water_moment,
                "d_uplift_arm_m": up_arm,
                "d_water_height_m": hw,
            }
    return extra | {
        "ka": ka,
        "weight_kn_m": weight,
        "wedge_kn_m": wedge,
        "vertical_kn_m": vertical,
        "horizontal_kn_m": horizontal,
        "uplift_kn_m": up,
        "restoring_moment_knm_m": restoring,
        "overturning_moment_knm_m": overturning,
        "resultant_from_toe_m": x_r,
        "eccentricity_m": ecc,
        "fos_sliding": stability.sliding_fos(vertical, horizontal, friction_deg),
        "fos_overturning": stability.factor_of_safety(restoring, overturning),
        "middle_third_utilisation": stability.middle_third_utilisation(ecc, base),
    }


def crack_section(p: Mapping[str, FloatArray]) -> dict[str, FloatArray]:
    """Geometry of the part of the wall above a horizontal crack at z_c (method.md §5).

    Height H − z_c, base B − (f + b)·z_c/H, top t, front batter f·(H − z_c)/H,
    retained height max(H_r − z_c, 0). Other loads and properties are unchanged.
    """
    h = p["height_m"]
    zc = p["crack_height_m"]
    f = p["front_batter_m"]
    b = section.back_batter(p["base_width_m"], p["top_width_m"], f)
    out = dict(p)
    out["height_m"] = h - zc
    out["base_width_m"] = p["base_width_m"] - (f + b) * zc / h
    out["front_batter_m"] = f * (h - zc) / h
    out["retained_height_m"] = np.maximum(p["retained_height_m"] - zc, 0.0)
    return out


def case_water_heights(p: Mapping[str, FloatArray]) -> dict[str, FloatArray]:
    """Water height behind the wall in each case (method.md §4)."""
    retained = p["retained_height_m"]
    return {
        "drained": np.zeros_like(retained),
        "blocked": retained.copy(),
        "surveyed": np.asarray(p["surveyed_water_height_m"], dtype=float),
    }


def run_cases(
    inputs: Mapping[str, NDArray[np.float64]], config: Config, *, details: bool = False
) -> dict[str, NDArray]:
    """Screen every wall in every case in one vectorised pass.

    Parameters
    ----------
    inputs : mapping of str to array
        The :data:`ENGINE_INPUTS` columns, all of length n, blanks filled.
    config : Config
        Required factors of safety and the uplift switch.
    details : bool
        Also return the intermediate values (keys ``d_…``, and ``crack_d_…`` for the
        crack plane) that a calculation sheet sets out.

    Returns
    -------
    dict of str to numpy.ndarray
        Columns of ``results.csv`` (and ``case``), length 3n, case-major.
    """
    n = len(inputs["height_m"])
    p = {k: np.tile(np.asarray(inputs[k], dtype=float), len(CASES)) for k in ENGINE_INPUTS}
    waters = case_water_heights({k: np.asarray(inputs[k], dtype=float) for k in ENGINE_INPUTS})
    hw = np.concatenate([waters[c] for c in CASES])

    out: dict[str, NDArray] = section_checks(
        p, hw, uplift=config.uplift, friction_deg=p["base_friction_deg"], config=config, details=details
    )
    toe, heel, state = stability.base_pressure(
        out["vertical_kn_m"], out["resultant_from_toe_m"], p["base_width_m"]
    )
    out["toe_pressure_kpa"] = toe
    out["heel_pressure_kpa"] = heel
    with np.errstate(invalid="ignore"):
        out["bearing_utilisation"] = np.maximum(toe, heel) / p["allowable_bearing_kpa"]
    out["sliding_utilisation"] = stability.fos_utilisation(out["fos_sliding"], config.fos_sliding_required)
    out["overturning_utilisation"] = stability.fos_utilisation(
        out["fos_overturning"], config.fos_overturning_required
    )

    # the part above a known crack: no uplift in the crack, joint friction
    cracked = np.isfinite(p["crack_height_m"])
    crack_p = crack_section(p)
    crack = section_checks(
        crack_p,
        np.maximum(hw - p["crack_height_m"], 0.0),
        uplift=False,
        friction_deg=p["joint_friction_deg"],
        config=config,
        details=details,
    )
    nan = np.full(3 * n, np.nan)
    out["crack_eccentricity_m"] = np.where(cracked, crack["eccentricity_m"], nan)
    out["crack_middle_third_utilisation"] = np.where(cracked, crack["middle_third_utilisation"], nan)
    out["crack_fos_overturning"] = np.where(cracked, crack["fos_overturning"], nan)
    out["crack_fos_sliding"] = np.where(cracked, crack["fos_sliding"], nan)
    out["crack_overturning_utilisation"] = stability.fos_utilisation(
        out["crack_fos_overturning"], config.fos_overturning_required
    )
    if details:
        for key in (
            "vertical_kn_m",
            "horizontal_kn_m",
            "restoring_moment_knm_m",
            "overturning_moment_knm_m",
            "resultant_from_toe_m",
            "weight_kn_m",
            "wedge_kn_m",
            "ka",
        ):
            crack[f"d_{key}"] = crack[key]
        out |= {f"crack_{k}": np.where(cracked, v, np.nan) for k, v in crack.items() if k.startswith("d_")}
        out["crack_d_base_width_m"] = np.where(cracked, crack_p["base_width_m"], np.nan)
        out["crack_d_height_m"] = np.where(cracked, crack_p["height_m"], np.nan)
    out["crack_sliding_utilisation"] = stability.fos_utilisation(
        out["crack_fos_sliding"], config.fos_sliding_required
    )

    # governing check: the largest utilisation; a floating case governs by definition
    utils = np.stack([out[f"{c}_utilisation"] for c in CHECKS], axis=1)
    floating = state == stability.FLOATING
    filled = np.where(np.isnan(utils), -np.inf, utils)
    idx = np.argmax(filled, axis=1)
    utilisation = np.take_along_axis(filled, idx[:, None], axis=1)[:, 0]
    # a resultant outside the base means M_O > M_R: the wall overturns, whatever the
    # (infinite) edge pressure says
    outside = state == stability.OUTSIDE_BASE
    governing = np.where(outside, "overturning", np.asarray(CHECKS)[idx])
    out["utilisation"] = np.where(floating | outside, np.inf, utilisation)
    out["governing_check"] = np.where(floating, "vertical_load", governing)
    out["margin"] = 1.0 - out["utilisation"]
    out["state"] = state
    out["in_middle_third"] = state == stability.WITHIN_MIDDLE_THIRD
    out["water_height_m"] = hw
    out["case"] = np.repeat(np.asarray(CASES), n)
    out["wall_index"] = np.tile(np.arange(n), len(CASES))
    return out
