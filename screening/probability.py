"""The probabilities of method.md §13 as columns of the results and of the walls table.

:func:`add_uncertainty` runs :func:`screening.core.uncertainty.evaluate` on one chunk of a
prepared register and puts its figures into the long results (``p_failure``,
``p_failure_prior``, ``p_outside_middle_third``, ``driver``, ``measure_next``) and a per-wall
frame (``p_stands``, ``data_inconsistent``, the standing driver); :func:`summarise_uncertainty`
adds the per-case figures and the input to measure to the walls table. Column-wise throughout.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from screening.config import CASES, DIMENSION_SOURCES, Config
from screening.core import uncertainty
from screening.prepare import Prepared

INPUT_WORDS = {
    "soil_friction_deg": "soil friction",
    "soil_unit_weight_kn_m3": "soil unit weight",
    "wall_unit_weight_kn_m3": "wall unit weight",
    "base_friction_deg": "base friction",
    "joint_friction_deg": "joint friction",
    "ultimate_bearing_kpa": "bearing capacity of the ground",
    "dimensions": "base width",
    "water_height_m": "water level behind the wall",
}
"""The drivers of method.md §13 in words, as ``measure_next`` and the reason line say them."""

_RECORDED_FLAG = {
    "soil_friction_deg": "soil_friction_recorded",
    "soil_unit_weight_kn_m3": "soil_unit_weight_recorded",
    "wall_unit_weight_kn_m3": "wall_unit_weight_recorded",
    "base_friction_deg": "base_friction_recorded",
    "joint_friction_deg": "joint_friction_recorded",
    "ultimate_bearing_kpa": "bearing_recorded",
}


def uncertainty_inputs(chunk: Prepared, results: pd.DataFrame) -> dict[str, np.ndarray]:
    """The per-wall inputs of :func:`screening.core.uncertainty.evaluate` for one chunk."""
    w = chunk.walls
    m = len(w)
    out = dict(chunk.inputs)
    for flag in (*_RECORDED_FLAG.values(), "water_measured", "dimensions_code"):
        out[flag] = w[flag].to_numpy(dtype=float)
    out["drystone"] = (w["material"] == "drystone").to_numpy(dtype=float)
    drainage = w["drainage"].fillna("unknown")
    out["drainage_code"] = drainage.map({k: i for i, k in enumerate(uncertainty.DRAINAGE_CODES)}).to_numpy(
        float
    )
    # the results are wall by wall: row 3·i + case
    joint = results["joint_height_m"].to_numpy(dtype=float).reshape(m, len(CASES))
    for k, case in enumerate(CASES):
        out[f"joint_height_{case}_m"] = joint[:, k]
    return out


def _words(driver: np.ndarray, w: pd.DataFrame, inconsistent: np.ndarray) -> np.ndarray:
    """``measure_next`` per wall for one case: the driver in words where it was a default, where
    the dimensions are estimated or the water height drawn; for a wall whose figures cannot be
    right, the likeliest wrong input whatever its source (it is to be checked)."""
    names = np.asarray([*uncertainty.DRIVERS, ""], dtype=object)[np.where(driver < 0, -1, driver)]
    words = pd.Series(names).map(INPUT_WORDS).fillna("").to_numpy(dtype=object)
    estimated = w["dimensions_code"].to_numpy(float) == DIMENSION_SOURCES.index("estimated")
    recorded_text = np.where(w["drainage"].isna(), " (drainage not recorded)", "")
    drainage = w["drainage"].fillna("").to_numpy(dtype=object)
    water_text = np.where(drainage == "partial", " (drains partly working)", recorded_text)
    water_text = np.where(drainage == "unknown", " (drainage unknown)", water_text)
    suffix = np.full(len(w), "", dtype=object)
    shown = np.zeros(len(w), dtype=bool)
    for name, flag in _RECORDED_FLAG.items():
        hit = names == name
        default = w[flag].to_numpy(float) == 0
        suffix = np.where(hit, np.where(default, " (assumed)", " (recorded)"), suffix)
        shown |= hit & default
    dims = names == "dimensions"
    suffix = np.where(dims, np.where(estimated, " (estimated)", " (recorded)"), suffix)
    shown |= dims & estimated
    water = names == "water_height_m"
    suffix = np.where(water, water_text, suffix)
    shown |= water
    shown = (shown | inconsistent) & (words != "")
    return np.where(shown, words + suffix, "").astype(object)


def add_uncertainty(
    chunk: Prepared, results: pd.DataFrame, config: Config
) -> tuple[pd.DataFrame, pd.DataFrame]:
    """The §13 columns of one chunk: the long results with them, and a per-wall frame."""
    draws = uncertainty.make_draws(config.samples, config.seed)
    got = uncertainty.evaluate(uncertainty_inputs(chunk, results), draws, config)
    m = len(chunk.walls)
    wall_major = {k: np.asarray(v).T.reshape(-1) for k, v in got.items() if np.ndim(v) == 2}
    inconsistent = got["data_inconsistent"]
    results = results.copy()
    for col in ("p_failure", "p_failure_prior", "p_outside_middle_third"):
        results[col] = wall_major[col]
    names = np.asarray([*uncertainty.DRIVERS, ""], dtype=object)
    results["driver"] = names[np.where(wall_major["driver"] < 0, -1, wall_major["driver"])]
    measure = np.stack([_words(d, chunk.walls, inconsistent) for d in got["driver"]], axis=1)
    results["measure_next"] = measure.reshape(-1)
    standing = got["standing_driver"]
    per_wall = pd.DataFrame(
        {
            "p_stands": got["p_stands"],
            "data_inconsistent": inconsistent,
            "standing_driver": names[np.where(standing < 0, -1, standing)],
            "_measure_standing": _words(standing, chunk.walls, np.ones(m, dtype=bool)),
        }
    )
    return results, per_wall


def summarise_uncertainty(summary: pd.DataFrame, results: pd.DataFrame) -> pd.DataFrame:
    """Per-case p_failure on the walls table, p_failure of the worst case, what to measure next.

    The wall's ``measure_next`` is that of whichever of the surveyed and blocked cases has the
    larger p_failure (the two the priority weighs; the surveyed case on a tie), else the other's;
    for a wall whose figures cannot be right, the likeliest wrong input.
    """
    out = summary.copy()
    wide = results.pivot(index="_wall", columns="case", values="p_failure").reindex(out.index)
    for case in CASES:
        out[f"p_failure_{case}"] = wide[case].to_numpy(dtype=float)
    worst = out["worst_case"].astype(str).to_numpy()
    table = np.stack([out[f"p_failure_{c}"].to_numpy() for c in CASES], axis=1)
    out["p_failure"] = table[np.arange(len(out)), [CASES.index(c) for c in worst]]
    measure = results.pivot(index="_wall", columns="case", values="measure_next").reindex(out.index)
    surveyed, blocked = measure["surveyed"].fillna(""), measure["blocked"].fillna("")
    first_blocked = out["p_failure_blocked"].fillna(0) > out["p_failure_surveyed"].fillna(0)
    pick = np.where(first_blocked, blocked, surveyed)
    other = np.where(first_blocked, surveyed, blocked)
    pick = np.where(pick == "", other, pick)
    out["measure_next"] = np.where(out["data_inconsistent"], out["_measure_standing"], pick)
    return out.drop(columns="_measure_standing")
