"""The screening engine: method.md composed over every wall and every case in one pass.

Input is a mapping of canonical column names to float arrays with every blank
already filled (see :mod:`screening.prepare`); output is a mapping of the
``results.csv`` columns to arrays of length ``3 × n_walls`` (case-major: all
walls drained, then blocked, then surveyed). No loop over walls.
"""

from __future__ import annotations

from collections.abc import Mapping

import numpy as np
from numpy.typing import ArrayLike, NDArray

from screening.config import CASES, Config
from screening.core import bearing, earth_pressure, section, stability

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
    "foundation_friction_deg",
    "foundation_cohesion_kpa",
    "foundation_unit_weight_kn_m3",
    "embedment_m",
    "surveyed_water_height_m",
    "joint_check",
)
"""Columns the engine reads, canonical names, blanks filled (``crack_height_m`` NaN where no
crack is recorded, ``foundation_friction_deg`` NaN where bearing uses the presumed allowable
pressure). Two are derived by :mod:`screening.prepare` (:data:`DERIVED_INPUTS`); the others
are canonical numeric columns (:mod:`screening.schema` checks it)."""

DERIVED_INPUTS = ("surveyed_water_height_m", "joint_check")
"""Inputs that are not register columns: the water of the surveyed case (from
``water_height_m`` or ``drainage``) and 1 where the material in use has its bed joints checked
(``Config.joint_check_materials``), else 0."""


BASE_CHECKS = ("middle_third", "resultant", "bearing", "sliding", "overturning")
CRACK_CHECKS = ("crack_middle_third", "crack_sliding", "crack_overturning")
JOINT_CHECKS = ("joint_middle_third", "joint_sliding", "joint_overturning")
CHECKS = BASE_CHECKS + CRACK_CHECKS + JOINT_CHECKS
"""Names of the checks, as written in ``governing_check``, in the order that breaks ties
(method.md §8: middle third or resultant, bearing, sliding, overturning, crack, joint).
``resultant`` takes the place of ``middle_third`` when criteria per case are set (§12)."""

BEARING_METHODS = ("presumed", "annex_d")
"""Names behind the codes of ``bearing_method``: a presumed allowable pressure (method.md §3)
or the EN 1997-1 Annex D resistance (§10)."""

JOINT_COLUMNS = (
    "joint_height_m",
    "joint_middle_third_utilisation",
    "joint_sliding_utilisation",
    "joint_overturning_utilisation",
)


def section_checks(
    p: Mapping[str, FloatArray],
    water_height_m: FloatArray,
    *,
    uplift: bool,
    friction_deg: FloatArray,
    config: Config,
    details: bool = False,
    passive_kn_m: FloatArray | float = 0.0,
) -> dict[str, FloatArray]:
    """Forces, moments, resultant and factors of safety of one section.

    ``p`` holds the section's geometry and loads (canonical names); used for the
    wall on its base and, with the crack geometry, for the part above a crack or a
    bed joint. Arrays broadcast: per-wall inputs of shape (n,) against water heights of
    shape (cases, n), or (planes, 1, n) section geometry against (planes, cases, n) water.
    ``passive_kn_m`` is added to the sliding resistance (method.md §11; base only).

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
        "fos_sliding": stability.sliding_fos(vertical, horizontal, friction_deg, passive_kn_m),
        "fos_overturning": stability.overturning_fos(restoring, overturning),
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
    """Geometry of the part of the wall above a horizontal plane at z_c (method.md §5, §8).

    Height H − z_c, base B − (f + b)·z_c/H, top t, front batter f·(H − z_c)/H,
    retained height max(H_r − z_c, 0). Other loads and properties are unchanged.
    ``crack_height_m`` may carry an extra leading axis (one row per bed joint).
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


def joint_heights(height_m: ArrayLike, planes: int) -> FloatArray:
    """Heights z_k = k·H/N of the bed joints checked, k = 1 … N−1 (method.md §8), shape (N−1, n)."""
    k = np.arange(1, max(planes, 1), dtype=float)[:, None]
    return k * np.asarray(height_m, dtype=float)[None, :] / planes


def case_water_heights(p: Mapping[str, FloatArray]) -> FloatArray:
    """Water height behind the wall in each case (method.md §4), shape (cases, walls)."""
    retained = np.asarray(p["retained_height_m"], dtype=float)
    return np.stack(
        [np.zeros_like(retained), retained, np.asarray(p["surveyed_water_height_m"], dtype=float)]
    )


def case_criteria(config: Config, cases: tuple[str, ...] = CASES) -> dict[str, FloatArray]:
    """Required factors and resultant limit per case (method.md §3, §12), each of shape (cases, 1).

    ``resultant_limit`` is NaN where no criteria per case are set (the middle third governs).
    """
    crit = config.case_criteria()
    rows = [crit[c] for c in cases]
    return {
        "fos_sliding_required": np.array([[c.fos_sliding_required] for c in rows], dtype=float),
        "fos_overturning_required": np.array([[c.fos_overturning_required] for c in rows], dtype=float),
        "resultant_limit": np.array(
            [[c.resultant_limit if config.criteria_set else np.nan] for c in rows], dtype=float
        ),
    }


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


def _scatter(shape: tuple[int, ...], rows: NDArray[np.intp], values: ArrayLike) -> FloatArray:
    """A (cases, walls) array, NaN except at the columns ``rows``."""
    full = np.full(shape, np.nan)
    full[:, rows] = np.broadcast_to(values, (shape[0], len(rows)))
    return full


def _foundation_depth(p: Mapping[str, FloatArray], config: Config) -> FloatArray:
    """D = max(embedment − toe excavation, 0) (method.md §10, §11)."""
    return np.maximum(p["embedment_m"] - config.toe_excavation_m, 0.0)


def _passive(p: Mapping[str, FloatArray], config: Config) -> FloatArray:
    """Passive resistance relied on in front of the toe, per wall (method.md §11); 0 when off."""
    if config.passive_mobilisation <= 0:
        return np.zeros_like(p["height_m"])
    phi = np.where(
        np.isfinite(p["foundation_friction_deg"]), p["foundation_friction_deg"], p["soil_friction_deg"]
    )
    return bearing.passive_resistance(
        config.passive_mobilisation,
        bearing.rankine_kp(phi),
        p["foundation_unit_weight_kn_m3"],
        _foundation_depth(p, config),
    )


def _bearing(
    p: Mapping[str, FloatArray], grid: Mapping[str, FloatArray], config: Config, *, details: bool
) -> dict[str, FloatArray]:
    """Bearing utilisation: presumed allowable pressure, or Annex D where φ'_f is given (§3, §10)."""
    shape = grid["vertical_kn_m"].shape
    with np.errstate(invalid="ignore"):
        presumed = (
            np.maximum(grid["toe_pressure_kpa"], grid["heel_pressure_kpa"]) / p["allowable_bearing_kpa"]
        )
    out = {
        "bearing_method": np.zeros(shape[-1], dtype=np.int8),
        "bearing_resistance_kn_m": np.full(shape, np.nan),
        "bearing_utilisation": np.broadcast_to(presumed, shape),
    }
    rows = np.flatnonzero(np.isfinite(p["foundation_friction_deg"]))
    if not rows.size:
        return out
    sub = {k: p[k][rows] for k in p}
    v = np.broadcast_to(grid["vertical_kn_m"], shape)[:, rows]
    d = bearing.annex_d_resistance(
        v,
        np.broadcast_to(grid["horizontal_kn_m"], shape)[:, rows],
        np.broadcast_to(grid["eccentricity_m"], shape)[:, rows],
        sub["base_width_m"],
        sub["foundation_friction_deg"],
        sub["foundation_cohesion_kpa"],
        sub["foundation_unit_weight_kn_m3"],
        _foundation_depth(sub, config),
    )
    out["bearing_method"][rows] = BEARING_METHODS.index("annex_d")
    out["bearing_resistance_kn_m"][:, rows] = d["resistance_kn_m"]
    util = np.array(out["bearing_utilisation"])
    util[:, rows] = bearing.bearing_utilisation(v, d["resistance_kn_m"], config.fos_bearing_required)
    out["bearing_utilisation"] = util
    if details:
        out |= {f"d_bearing_{k}": _scatter(shape, rows, x) for k, x in d.items() if k != "resistance_kn_m"}
    return out


def _crack_checks(
    p: Mapping[str, FloatArray],
    hw: FloatArray,
    config: Config,
    crit: Mapping[str, FloatArray],
    *,
    details: bool,
) -> dict[str, FloatArray]:
    """The part above a known crack (method.md §5), for cracked walls only; NaN elsewhere.

    No uplift in the crack, joint friction. Returns ``crack_…`` arrays shaped like ``hw``.
    """
    shape = hw.shape
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
    out = {name: _scatter(shape, rows, crack[key]) for key, name in wanted.items()}
    out["crack_overturning_utilisation"] = stability.fos_utilisation(
        out["crack_fos_overturning"], crit["fos_overturning_required"]
    )
    out["crack_sliding_utilisation"] = stability.fos_utilisation(
        out["crack_fos_sliding"], crit["fos_sliding_required"]
    )
    return out


def _joint_checks(
    p: Mapping[str, FloatArray],
    hw: FloatArray,
    config: Config,
    crit: Mapping[str, FloatArray],
    *,
    details: bool,
) -> dict[str, FloatArray]:
    """Every bed joint of the masonry walls (method.md §8): the governing plane per wall and case.

    The planes are an extra leading axis (planes, cases, walls) over the walls whose
    ``joint_check`` is 1; each plane is checked exactly as a crack at that height. The
    governing plane has the largest of its three utilisations; ties within 1e-9 relative
    go to the lower plane. NaN for walls not checked.
    """
    shape = hw.shape
    out = {name: np.full(shape, np.nan) for name in JOINT_COLUMNS}
    rows = np.flatnonzero(p["joint_check"] > 0) if config.joint_planes >= 2 else np.zeros(0, dtype=np.intp)
    if not rows.size:
        return out
    sub = {k: v[rows] for k, v in p.items()}
    z = joint_heights(sub["height_m"], config.joint_planes)[:, None, :]  # (planes, 1, walls)
    plane_p = crack_section(sub | {"crack_height_m": z})
    res = section_checks(
        plane_p,
        np.maximum(hw[:, rows] - z, 0.0),
        uplift=False,
        friction_deg=sub["joint_friction_deg"],
        config=config,
        details=details,
    )
    utils = {
        "joint_middle_third_utilisation": res["middle_third_utilisation"],
        "joint_sliding_utilisation": stability.fos_utilisation(
            res["fos_sliding"], crit["fos_sliding_required"]
        ),
        "joint_overturning_utilisation": stability.fos_utilisation(
            res["fos_overturning"], crit["fos_overturning_required"]
        ),
    }
    a, b, c = utils.values()
    worst = np.fmax(np.fmax(a, b), c)
    worst = np.where(np.isnan(worst), -np.inf, worst)
    best = worst.max(axis=0)
    tol = np.where(np.isfinite(best), 1e-9 * np.abs(best), 0.0)
    plane = np.argmax(worst >= best - tol, axis=0)[None]  # the lowest plane within the tie band

    def pick(values: ArrayLike) -> FloatArray:
        return np.take_along_axis(np.broadcast_to(values, worst.shape), plane, axis=0)[0]

    out["joint_height_m"][:, rows] = pick(z)
    for name, u in utils.items():
        out[name][:, rows] = pick(u)
    if details:
        # the governing plane's intermediate values, as for the crack (keys joint_d_…)
        extra = res | {"base_width_m": plane_p["base_width_m"], "height_m": plane_p["height_m"]}
        for key, values in extra.items():
            name = f"joint_{key}" if key.startswith("d_") else f"joint_d_{key}"
            out[name] = _scatter(shape, rows, pick(values))
    return out


def screen_grid(
    p: Mapping[str, FloatArray],
    hw: FloatArray,
    config: Config,
    crit: Mapping[str, FloatArray],
    *,
    details: bool = False,
) -> dict[str, NDArray]:
    """Every check of every wall at the water heights ``hw`` (shape (m, walls)).

    ``crit`` holds the required factors and resultant limit per row of ``hw`` (shape
    (m, 1), :func:`case_criteria`). Returns arrays that broadcast to ``hw.shape``.
    """
    shape = hw.shape
    passive = _passive(p, config)
    grid: dict[str, NDArray] = section_checks(
        p,
        hw,
        uplift=config.uplift,
        friction_deg=p["base_friction_deg"],
        config=config,
        details=details,
        passive_kn_m=passive,
    )
    grid["passive_resistance_kn_m"] = passive
    toe, heel, state = stability.base_pressure(
        grid["vertical_kn_m"], grid["resultant_from_toe_m"], p["base_width_m"]
    )
    grid["toe_pressure_kpa"] = toe
    grid["heel_pressure_kpa"] = heel
    grid.update(_bearing(p, grid, config, details=details))
    grid["sliding_utilisation"] = stability.fos_utilisation(grid["fos_sliding"], crit["fos_sliding_required"])
    grid["overturning_utilisation"] = stability.fos_utilisation(
        grid["fos_overturning"], crit["fos_overturning_required"]
    )
    with np.errstate(invalid="ignore", divide="ignore"):
        grid["resultant_utilisation"] = np.abs(grid["eccentricity_m"]) / (
            crit["resultant_limit"] * p["base_width_m"] / 2.0
        )
    grid.update(_crack_checks(p, hw, config, crit, details=details))
    grid.update(_joint_checks(p, hw, config, crit, details=details))

    # governing check: the largest utilisation. A resultant outside the base means M_O > M_R:
    # the wall overturns, whatever the (infinite) edge pressure says; a floating case governs
    # by definition. With criteria per case, `resultant` takes the place of `middle_third`.
    competing = {c: grid[f"{c}_utilisation"] for c in CHECKS}
    if config.criteria_set:
        competing["middle_third"] = np.full(shape, np.nan)
    utilisation, index = _governing([np.broadcast_to(u, shape) for u in competing.values()])
    state = np.broadcast_to(state, shape)
    floating = state == STATE_CODES[stability.FLOATING]
    outside = state == STATE_CODES[stability.OUTSIDE_BASE]
    index[outside] = CHECKS.index("overturning")
    index[floating] = len(CHECKS)
    grid["utilisation"] = np.where(floating | outside, np.inf, utilisation)
    grid["governing_check"] = index
    grid["margin"] = 1.0 - grid["utilisation"]
    grid["state"] = state
    grid["in_middle_third"] = state == STATE_CODES[stability.WITHIN_MIDDLE_THIRD]
    return grid


def run_cases(
    inputs: Mapping[str, NDArray[np.float64]], config: Config, *, details: bool = False
) -> dict[str, NDArray]:
    """Screen every wall in every case in one vectorised pass.

    The cases are the rows of a (cases × walls) grid: per-wall inputs broadcast against
    the water height of each case, so nothing is copied per case. The part above a
    crack is computed for cracked walls only, the bed joints for masonry walls only.

    Parameters
    ----------
    inputs : mapping of str to array
        The :data:`ENGINE_INPUTS` columns, all of length n, blanks filled.
    config : Config
        Required factors of safety (per case where criteria are set), the uplift switch,
        the bed-joint planes, bearing and passive settings.
    details : bool
        Also return the intermediate values (keys ``d_…``, ``crack_d_…`` for the crack
        plane and ``joint_d_…`` for the governing bed joint) that a calculation sheet sets out.

    Returns
    -------
    dict of str to numpy.ndarray
        Columns of ``results.csv``, length 3n, case-major; ``state``, ``governing_check``,
        ``bearing_method`` and ``case`` as small integer codes (see :data:`GOVERNING`,
        :data:`BEARING_METHODS`, :func:`decode`).
    """
    p = {k: np.asarray(inputs[k], dtype=float) for k in ENGINE_INPUTS}
    n = len(p["height_m"])
    shape = (len(CASES), n)
    hw = case_water_heights(p)
    grid = screen_grid(p, hw, config, case_criteria(config), details=details)
    out = {k: np.broadcast_to(v, shape).reshape(-1) for k, v in grid.items()}
    out["water_height_m"] = hw.reshape(-1)
    out["case"] = np.repeat(np.arange(len(CASES), dtype=np.int8), n)
    out["wall_index"] = np.tile(np.arange(n), len(CASES))
    return out


def decode(out: Mapping[str, NDArray]) -> dict[str, NDArray]:
    """The engine's output with ``state``, ``governing_check``, ``bearing_method`` and ``case`` as words."""
    words = dict(out)
    words["state"] = np.asarray(stability.STATES)[out["state"]]
    words["governing_check"] = np.asarray(GOVERNING)[out["governing_check"]]
    words["bearing_method"] = np.asarray(BEARING_METHODS)[out["bearing_method"]]
    words["case"] = np.asarray(CASES)[out["case"]]
    return words
