"""The water height and the lean at which a wall stops passing (method.md §9).

Both are found for every wall at once: a function of (steps, walls) is evaluated on 64 equal
steps of each wall's own interval, the first step that crosses is found per wall, and that
step is refined by bisection, every wall in the same pass. No loop over walls.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping

import numpy as np
from numpy.typing import NDArray

from screening.config import Config
from screening.core import engine

FloatArray = NDArray[np.float64]
BoolArray = NDArray[np.bool_]

STEPS = 64
"""Equal steps of the first scan (method.md §9)."""
WATER_TOLERANCE_M = 0.001
LEAN_TOLERANCE_DEG = 0.01
MAX_LEAN_DEG = 45.0
GRID_CELLS = 1 << 21
"""Walls × steps × bed-joint planes evaluated at once; bounds the working memory."""


def first_crossing(
    fails: Callable[[FloatArray, NDArray[np.intp]], BoolArray],
    lower: FloatArray,
    upper: FloatArray,
    tolerance: float,
    *,
    steps: int = STEPS,
    block: int = 8,
) -> FloatArray:
    """The lowest x in [lower, upper] at which ``fails`` first holds, per wall, to ``tolerance``.

    ``fails(x, rows)`` takes values of shape (k, len(rows)) for the walls ``rows`` and says
    where each fails. The callers have made sure that ``fails`` does not hold at ``lower``
    and holds at ``upper``. The interval is cut into ``steps`` equal steps; the first step
    whose upper end fails is bisected until it is no wider than ``tolerance``, and its upper
    end (a value that fails) is returned.

    The steps are scanned ``block`` at a time, and a wall leaves the scan once a step has
    failed, so walls that fail early cost less; the result is the same as scanning all steps.

    References
    ----------
    Bisection on a bracketing interval (e.g. Press et al., *Numerical Recipes*, §9.1).
    """
    n = len(lower)
    step = (upper - lower) / steps
    first = np.full(n, steps)  # the upper end fails by the caller's bracket
    todo = np.arange(n)
    for start in range(1, steps, block):
        if not todo.size:
            break
        j = np.arange(start, min(start + block, steps))[:, None]
        hit = fails(lower[todo] + step[todo] * j, todo)
        found = hit.any(axis=0)
        first[todo[found]] = start + np.argmax(hit[:, found], axis=0)
        todo = todo[~found]
    everyone = np.arange(n)
    hi = np.where(first == steps, upper, lower + step * first)
    lo = lower + step * (first - 1)
    width = float(np.max(hi - lo, initial=0.0))
    iterations = int(np.ceil(np.log2(width / tolerance))) if width > tolerance else 0
    for _ in range(iterations):
        mid = 0.5 * (lo + hi)
        bad = fails(mid[None, :], everyone)[0]
        hi = np.where(bad, mid, hi)
        lo = np.where(bad, lo, mid)
    return hi


def _rows_in_blocks(rows: NDArray[np.intp], cells_per_wall: int) -> list[NDArray[np.intp]]:
    size = max(GRID_CELLS // max(cells_per_wall, 1), 1)
    return [rows[k : k + size] for k in range(0, len(rows), size)]


def critical_water_height(inputs: Mapping[str, FloatArray], config: Config) -> FloatArray:
    """Lowest water height h_w in [0, H_r] at which the wall's utilisation first exceeds 1 [m].

    Every check of the surveyed case counts (base, crack, bed joints, uplift, bearing,
    passive, the surveyed case's criteria). 0 where the wall already exceeds 1 with no
    water; NaN where it holds with water to the top of the retained ground.

    Where the utilisation is not monotonic in h_w (rare: a resultant near the heel that
    water first moves back towards the middle) the ends decide: a wall that holds with
    water to the top is blank, as method.md §9 says, even if an intermediate height fails.

    References
    ----------
    method.md §9 (64 steps, then bisection to 1 mm).
    """
    p = {k: np.asarray(inputs[k], dtype=float) for k in engine.ENGINE_INPUTS}
    crit = {k: v[-1:] for k, v in engine.case_criteria(config).items()}  # the surveyed case's
    top = p["retained_height_m"]

    def utilisation(hw: FloatArray, rows: NDArray[np.intp]) -> FloatArray:
        sub = {k: v[rows] for k, v in p.items()}
        return np.asarray(engine.screen_grid(sub, hw, config, crit)["utilisation"])

    everyone = np.arange(len(top))
    ends = utilisation(np.stack([np.zeros_like(top), top]), everyone)
    dry_fails, full_fails = ends[0] > 1, ends[1] > 1
    out = np.where(dry_fails, 0.0, np.nan)
    between = np.flatnonzero(~dry_fails & full_fails)
    planes = max(config.joint_planes - 1, 1)
    for block in _rows_in_blocks(between, 8 * planes):

        def fails(hw: FloatArray, r: NDArray[np.intp], block: NDArray[np.intp] = block) -> BoolArray:
            return utilisation(hw, block[r]) > 1

        out[block] = first_crossing(fails, np.zeros(len(block)), top[block], WATER_TOLERANCE_M)
    return out


def critical_lean(inputs: Mapping[str, FloatArray], config: Config) -> FloatArray:
    """Outward lean, at or above the measured one, at which the resultant reaches the toe [°].

    The surveyed case, at the base only (x_R ≤ 0: the wall overturns; crack and joint
    planes are not used). The measured lean where x_R ≤ 0 already; NaN where not reached
    by 45° (or where the wall floats).

    References
    ----------
    method.md §1 (lean as a rotation about the toe) and §9 (64 steps, bisection to 0.01°).
    """
    p = {k: np.asarray(inputs[k], dtype=float) for k in engine.ENGINE_INPUTS}
    hw = np.asarray(p["surveyed_water_height_m"], dtype=float)[None, :]
    lean = p["lean_deg"]

    def at_toe(lean_deg: FloatArray, rows: NDArray[np.intp]) -> BoolArray:
        sub = {k: v[rows] for k, v in p.items()} | {"lean_deg": lean_deg}
        s = engine.section_checks(
            sub, hw[:, rows], uplift=config.uplift, friction_deg=sub["base_friction_deg"], config=config
        )
        return np.asarray(s["resultant_from_toe_m"] <= 0)

    everyone = np.arange(len(lean))
    ends = at_toe(np.stack([lean, np.full_like(lean, MAX_LEAN_DEG)]), everyone)
    out = np.where(ends[0], lean, np.nan)
    between = np.flatnonzero(~ends[0] & ends[1])
    if between.size:
        out[between] = first_crossing(
            lambda x, r: at_toe(x, between[r]),
            lean[between],
            np.full(len(between), MAX_LEAN_DEG),
            LEAN_TOLERANCE_DEG,
        )
    return out


def years_to_critical_lean(
    critical_lean_deg: FloatArray, lean_deg: FloatArray, lean_rate_deg_per_year: FloatArray
) -> FloatArray:
    """(critical lean − lean) / lean rate where the rate is positive [years]; 0 where already there.

    A projection, not a prediction: unweathered drystone can collapse with little warning
    movement (Powrie et al., Géotechnique 52(6), 2002).
    """
    crit = np.asarray(critical_lean_deg, dtype=float)
    lean = np.asarray(lean_deg, dtype=float)
    rate = np.asarray(lean_rate_deg_per_year, dtype=float)
    with np.errstate(invalid="ignore", divide="ignore"):
        years = np.where(rate > 0, (crit - lean) / rate, np.nan)
    # a wall already at its critical lean is 0 years from it whatever the rate
    return np.where(crit <= lean, 0.0, years)
