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

from screening.config import CASES, Config
from screening.core import earth_pressure, section, stability

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
"""Columns the engine reads, canonical names, blanks filled (``crack_height_m`` NaN where no
crack is recorded; ``surveyed_water_height_m`` is the water of the surveyed case, from
``water_height_m`` or ``drainage``). :mod:`screening.schema` checks that each is a canonical
numeric column."""


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
    base = p["base_width_m"]
    w = _weights(p, water_height_m)
    b = _back_loads(p, water_height_m, uplift=uplift, gamma_w=config.gamma_w_kn_m3)
    sin_d, cos_d = np.sin(b["delta"]), np.cos(b["delta"])

    horizontal = b["thrust"] * cos_d + b["water"]
    vertical = w["weight"] + w["wedge"] + b["thrust"] * sin_d - b["uplift"]
    restoring = w["weight"] * w["arm_w"] + w["wedge"] * w["arm_s"] + b["thrust"] * sin_d * base
    overturning = b["thrust_moment"] * cos_d + b["water_moment"] + b["uplift"] * b["up_arm"]
    x_r, ecc = stability.resultant_position(restoring, overturning, vertical, base)
    extra = _section_details(w, b, water_height_m) if details else {}
    return extra | {
        "ka": b["ka"],
        "weight_kn_m": w["weight"],
        "wedge_kn_m": w["wedge"],
        "vertical_kn_m": vertical,
        "horizontal_kn_m": horizontal,
        "uplift_kn_m": b["uplift"],
        "restoring_moment_knm_m": restoring,
        "overturning_moment_knm_m": overturning,
        "resultant_from_toe_m": x_r,
        "eccentricity_m": ecc,
        "fos_sliding": stability.sliding_fos(vertical, horizontal, friction_deg),
        "fos_overturning": stability.factor_of_safety(restoring, overturning),
        "middle_third_utilisation": stability.middle_third_utilisation(ecc, base),
    }


def _weights(p: Mapping[str, FloatArray], hw: FloatArray) -> dict[str, FloatArray]:
    """Wall and wedge weights with their lever arms about the toe after lean (method.md §1)."""
    height, base, top, front = (p["height_m"], p["base_width_m"], p["top_width_m"], p["front_batter_m"])
    back = section.back_batter(base, top, front)
    area, x_w, z_w = section.wall_section(height, base, top, front)
    wedge, x_s, z_s = section.back_wedge(
        height,
        base,
        back,
        p["retained_height_m"],
        hw,
        p["soil_unit_weight_kn_m3"],
        p["soil_saturated_unit_weight_kn_m3"],
    )
    arm_w = section.lever_after_lean(x_w, z_w, p["lean_deg"])
    arm_s = np.where(wedge > 0, section.lever_after_lean(x_s, z_s, p["lean_deg"]), 0.0)
    weight = p["wall_unit_weight_kn_m3"] * area
    return {
        "area": area, "x_w": x_w, "z_w": z_w, "arm_w": arm_w, "weight": weight,
        "wedge": wedge, "x_s": x_s, "z_s": z_s, "arm_s": arm_s, "back": back,
    }  # fmt: skip


def _back_loads(
    p: Mapping[str, FloatArray], hw: FloatArray, *, uplift: bool, gamma_w: float
) -> dict[str, FloatArray]:
    """Earth and water pressure on the virtual back and uplift under the base (method.md §2)."""
    ka = earth_pressure.coulomb_ka(p["soil_friction_deg"], p["wall_friction_deg"], p["backfill_slope_deg"])
    thrust, thrust_moment = earth_pressure.effective_thrust(
        ka,
        p["retained_height_m"],
        hw,
        p["soil_unit_weight_kn_m3"],
        p["soil_saturated_unit_weight_kn_m3"],
        p["surcharge_kpa"],
        gamma_w,
    )
    water, water_moment = earth_pressure.water_thrust(hw, gamma_w)
    if uplift:
        up, up_arm = earth_pressure.base_uplift(hw, p["base_width_m"], gamma_w)
    else:
        up, up_arm = np.zeros_like(hw), np.zeros_like(hw)
    return {
        "ka": ka, "thrust": thrust, "thrust_moment": thrust_moment,
        "delta": np.radians(p["wall_friction_deg"]), "water": water, "water_moment": water_moment,
        "uplift": up, "up_arm": up_arm,
    }  # fmt: skip


def _section_details(
    w: Mapping[str, FloatArray], b: Mapping[str, FloatArray], hw: FloatArray
) -> dict[str, FloatArray]:
    """The intermediate values of one section that a calculation sheet sets out (keys ``d_…``)."""
    with np.errstate(invalid="ignore", divide="ignore"):
        return {
            "d_area_m2": w["area"],
            "d_wall_x_m": w["x_w"],
            "d_wall_z_m": w["z_w"],
            "d_wall_arm_m": w["arm_w"],
            "d_wedge_x_m": w["x_s"],
            "d_wedge_z_m": w["z_s"],
            "d_wedge_arm_m": w["arm_s"],
            "d_back_batter_m": w["back"],
            "d_thrust_kn_m": b["thrust"],
            "d_thrust_height_m": np.where(b["thrust"] > 0, b["thrust_moment"] / b["thrust"], np.nan),
            "d_thrust_moment_knm_m": b["thrust_moment"] * np.cos(b["delta"]),
            "d_water_kn_m": b["water"],
            "d_water_moment_knm_m": b["water_moment"],
            "d_uplift_arm_m": b["up_arm"],
            "d_water_height_m": hw,
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


def case_water_heights(p: Mapping[str, FloatArray]) -> FloatArray:
    """Water height behind the wall in each case (method.md §4), shape (cases, walls)."""
    retained = np.asarray(p["retained_height_m"], dtype=float)
    return np.stack(
        [np.zeros_like(retained), retained, np.asarray(p["surveyed_water_height_m"], dtype=float)]
    )


STATE_CODES = {name: k for k, name in enumerate(stability.STATES)}
GOVERNING = (*CHECKS, "vertical_load")
"""Names behind the integer codes of ``state``, ``governing_check`` and ``case``:
``stability.STATES[code]``, ``GOVERNING[code]`` and ``CASES[code]``."""


def _governing(utils: list[FloatArray]) -> tuple[FloatArray, NDArray[np.int8]]:
    """Largest utilisation and the index of its check (NaN counts as absent; first wins ties)."""
    best = np.full(utils[0].shape, -np.inf)
    index = np.zeros(utils[0].shape, dtype=np.int8)
    for k, u in enumerate(utils):
        better = u > best
        best = np.where(better, u, best)
        index[better] = k
    return best, index


def _crack_checks(
    p: Mapping[str, FloatArray], hw: FloatArray, config: Config, *, details: bool
) -> dict[str, FloatArray]:
    """The part above a known crack (method.md §5), for cracked walls only; NaN elsewhere.

    No uplift in the crack, joint friction. Returns ``crack_…`` columns of length 3n.
    """
    shape = hw.shape
    out: dict[str, FloatArray] = {}
    rows = np.flatnonzero(np.isfinite(p["crack_height_m"]))
    crack_p = crack_section({k: v[rows] for k, v in p.items()})
    crack = section_checks(
        crack_p,
        np.maximum(hw[:, rows] - crack_p["crack_height_m"], 0.0),
        uplift=False,
        friction_deg=crack_p["joint_friction_deg"],
        config=config,
        details=details,
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
        crack["d_base_width_m"] = crack_p["base_width_m"]
        crack["d_height_m"] = crack_p["height_m"]
    wanted = {
        "eccentricity_m": "crack_eccentricity_m",
        "middle_third_utilisation": "crack_middle_third_utilisation",
        "fos_overturning": "crack_fos_overturning",
        "fos_sliding": "crack_fos_sliding",
    } | ({k: f"crack_{k}" for k in crack if k.startswith("d_")} if details else {})
    for key, name in wanted.items():
        full = np.full(shape, np.nan)
        full[:, rows] = np.broadcast_to(crack[key], (len(CASES), len(rows)))
        out[name] = full.reshape(-1)
    out["crack_overturning_utilisation"] = stability.fos_utilisation(
        out["crack_fos_overturning"], config.fos_overturning_required
    )
    out["crack_sliding_utilisation"] = stability.fos_utilisation(
        out["crack_fos_sliding"], config.fos_sliding_required
    )

    return out


def run_cases(
    inputs: Mapping[str, NDArray[np.float64]], config: Config, *, details: bool = False
) -> dict[str, NDArray]:
    """Screen every wall in every case in one vectorised pass.

    The cases are the rows of a (cases × walls) grid: per-wall inputs broadcast against
    the water height of each case, so nothing is copied per case. The part above a
    crack is computed for cracked walls only.

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
        Columns of ``results.csv``, length 3n, case-major; ``state``, ``governing_check``
        and ``case`` as small integer codes (see :data:`GOVERNING`, :func:`decode`).
    """
    p = {k: np.asarray(inputs[k], dtype=float) for k in ENGINE_INPUTS}
    n = len(p["height_m"])
    shape = (len(CASES), n)
    hw = case_water_heights(p)

    grid: dict[str, NDArray] = section_checks(
        p, hw, uplift=config.uplift, friction_deg=p["base_friction_deg"], config=config, details=details
    )
    toe, heel, state = stability.base_pressure(
        grid["vertical_kn_m"], grid["resultant_from_toe_m"], p["base_width_m"]
    )
    grid["toe_pressure_kpa"] = toe
    grid["heel_pressure_kpa"] = heel
    with np.errstate(invalid="ignore"):
        grid["bearing_utilisation"] = np.maximum(toe, heel) / p["allowable_bearing_kpa"]
    grid["sliding_utilisation"] = stability.fos_utilisation(grid["fos_sliding"], config.fos_sliding_required)
    grid["overturning_utilisation"] = stability.fos_utilisation(
        grid["fos_overturning"], config.fos_overturning_required
    )
    out = {k: np.broadcast_to(v, shape).reshape(-1) for k, v in grid.items()}
    out["water_height_m"] = hw.reshape(-1)

    out.update(_crack_checks(p, hw, config, details=details))

    # governing check: the largest utilisation. A resultant outside the base means M_O > M_R:
    # the wall overturns, whatever the (infinite) edge pressure says; a floating case governs
    # by definition.
    utilisation, index = _governing([out[f"{c}_utilisation"] for c in CHECKS])
    state = np.broadcast_to(state, shape).reshape(-1)
    floating = state == STATE_CODES[stability.FLOATING]
    outside = state == STATE_CODES[stability.OUTSIDE_BASE]
    index[outside] = CHECKS.index("overturning")
    index[floating] = len(CHECKS)
    out["utilisation"] = np.where(floating | outside, np.inf, utilisation)
    out["governing_check"] = index
    out["margin"] = 1.0 - out["utilisation"]
    out["state"] = state
    out["in_middle_third"] = state == STATE_CODES[stability.WITHIN_MIDDLE_THIRD]
    out["case"] = np.repeat(np.arange(len(CASES), dtype=np.int8), n)
    out["wall_index"] = np.tile(np.arange(n), len(CASES))
    return out


def decode(out: Mapping[str, NDArray]) -> dict[str, NDArray]:
    """The engine's output with ``state``, ``governing_check`` and ``case`` as words."""
    words = dict(out)
    words["state"] = np.asarray(stability.STATES)[out["state"]]
    words["governing_check"] = np.asarray(GOVERNING)[out["governing_check"]]
    words["case"] = np.asarray(CASES)[out["case"]]
    return words
