"""Resultant on the base, base pressure and the stability checks of a gravity wall.

Pure numpy, one value per wall. Sign convention: eccentricity e = B/2 − x_R is
positive towards the toe.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

FloatArray = NDArray[np.float64]

WITHIN_MIDDLE_THIRD = "within_middle_third"
OUTSIDE_MIDDLE_THIRD = "outside_middle_third"
OUTSIDE_BASE = "resultant_outside_base"
FLOATING = "floating"
STATES = (WITHIN_MIDDLE_THIRD, OUTSIDE_MIDDLE_THIRD, OUTSIDE_BASE, FLOATING)
"""Words for the state of the base in one case, from best to worst."""


def resultant_position(
    restoring_moment_knm_m: ArrayLike,
    overturning_moment_knm_m: ArrayLike,
    vertical_kn_m: ArrayLike,
    base_width_m: ArrayLike,
) -> tuple[FloatArray, FloatArray]:
    r"""Where the resultant cuts the base: x_R = (M_R − M_O)/V and e = B/2 − x_R [m].

    NaN where V ≤ 0 (a floating wall has no resultant on its base).

    References
    ----------
    Statics of a rigid block; every foundation text (e.g. Das, *Principles of
    Foundation Engineering*, gravity retaining walls).
    """
    v = np.asarray(vertical_kn_m, dtype=float)
    with np.errstate(invalid="ignore", divide="ignore"):
        x_r = np.where(
            v > 0,
            (np.asarray(restoring_moment_knm_m) - np.asarray(overturning_moment_knm_m)) / v,
            np.nan,
        )
    return x_r, np.asarray(base_width_m, dtype=float) / 2.0 - x_r


def base_pressure(
    vertical_kn_m: ArrayLike, resultant_from_toe_m: ArrayLike, base_width_m: ArrayLike
) -> tuple[FloatArray, FloatArray, NDArray[np.int8]]:
    r"""Toe and heel bearing pressure under a rigid base with no tension.

    - |e| ≤ B/6: trapezoid, q = V/B·(1 ± 6e/B);
    - B/6 < |e| < B/2: triangle over 3x' from the nearer edge, q_max = 2V/(3x');
    - x_R ≤ 0 or x_R ≥ B: the resultant is outside the base and the wall
      overturns; the pressure at that edge is reported as ``inf``;
    - V ≤ 0: the wall floats; both pressures NaN.

    Parameters
    ----------
    vertical_kn_m : array_like
        Net vertical load V [kN/m].
    resultant_from_toe_m : array_like
        x_R [m].
    base_width_m : array_like
        B [m].

    Returns
    -------
    toe_kpa, heel_kpa : numpy.ndarray
        Pressure at the toe and at the heel [kPa].
    state : numpy.ndarray of int8
        Index into :data:`STATES`.

    References
    ----------
    Middle-third rule and no-tension base pressure 2V/(3x): common practice,
    every foundation text (e.g. Das, *Principles of Foundation Engineering*).
    """
    v = np.asarray(vertical_kn_m, dtype=float)
    x_r = np.asarray(resultant_from_toe_m, dtype=float)
    b = np.asarray(base_width_m, dtype=float)
    v, x_r, b = np.broadcast_arrays(v, x_r, b)
    e = b / 2.0 - x_r
    floating = ~(v > 0)
    outside_base = ~floating & ((x_r <= 0) | (x_r >= b))
    middle = ~floating & ~outside_base & (np.abs(e) <= b / 6.0 * (1 + 1e-12))
    with np.errstate(invalid="ignore", divide="ignore"):
        toe_trap = v / b * (1 + 6 * e / b)
        heel_trap = v / b * (1 - 6 * e / b)
        toe_tri = np.where(e > 0, 2 * v / (3 * x_r), 0.0)
        heel_tri = np.where(e < 0, 2 * v / (3 * (b - x_r)), 0.0)
    toe = np.where(middle, toe_trap, toe_tri)
    heel = np.where(middle, heel_trap, heel_tri)
    toe = np.where(outside_base, np.where(x_r <= 0, np.inf, 0.0), toe)
    heel = np.where(outside_base, np.where(x_r >= b, np.inf, 0.0), heel)
    toe = np.where(floating, np.nan, toe)
    heel = np.where(floating, np.nan, heel)
    code = {name: k for k, name in enumerate(STATES)}
    state = np.full(v.shape, code[OUTSIDE_MIDDLE_THIRD], dtype=np.int8)
    state[middle] = code[WITHIN_MIDDLE_THIRD]
    state[outside_base] = code[OUTSIDE_BASE]
    state[floating] = code[FLOATING]
    return toe, heel, state


def factor_of_safety(resisting: ArrayLike, disturbing: ArrayLike) -> FloatArray:
    """Resisting over disturbing, ``inf`` where nothing disturbs, NaN where undefined."""
    num = np.asarray(resisting, dtype=float)
    den = np.asarray(disturbing, dtype=float)
    with np.errstate(invalid="ignore", divide="ignore"):
        fos = num / den
    return np.where(den > 0, fos, np.where(num > 0, np.inf, np.nan))


def overturning_fos(restoring_moment_knm_m: ArrayLike, overturning_moment_knm_m: ArrayLike) -> FloatArray:
    """Factor of safety against overturning M_R / M_O, never below 0.

    Where a lean carries the weight beyond the toe the restoring moment is 0 or
    negative: nothing restores, the factor is 0 (its utilisation infinite) and the
    resultant lies outside the base (a state, see :func:`base_pressure`). A negative
    factor would read as a pass once turned into a utilisation.

    References
    ----------
    Common practice (e.g. Das, *Principles of Foundation Engineering*).
    """
    m_r = np.asarray(restoring_moment_knm_m, dtype=float)
    return np.where(m_r <= 0, 0.0, factor_of_safety(m_r, overturning_moment_knm_m))


def sliding_fos(
    vertical_kn_m: ArrayLike,
    horizontal_kn_m: ArrayLike,
    base_friction_deg: ArrayLike,
    passive_kn_m: ArrayLike = 0.0,
) -> FloatArray:
    r"""Factor of safety against sliding (V·tan δ_b + P_p) / ΣH, no adhesion.

    ``passive_kn_m`` P_p is the passive resistance in front relied on (0: ignored).

    References
    ----------
    Common practice (e.g. Das, *Principles of Foundation Engineering*); base
    friction values after NAVFAC DM 7.02 (1986) Table 1.
    """
    v = np.clip(np.asarray(vertical_kn_m, dtype=float), 0.0, None)
    return factor_of_safety(v * np.tan(np.radians(base_friction_deg)) + passive_kn_m, horizontal_kn_m)


def middle_third_utilisation(eccentricity_m: ArrayLike, base_width_m: ArrayLike) -> FloatArray:
    """|e| / (B/6): 1 when the resultant reaches the edge of the middle third."""
    return np.abs(np.asarray(eccentricity_m, dtype=float)) / (np.asarray(base_width_m, dtype=float) / 6.0)


def fos_utilisation(fos: ArrayLike, required: ArrayLike) -> FloatArray:
    """Required over provided factor of safety: 0 for an infinite factor, inf for zero."""
    f = np.asarray(fos, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        u = required / f
    return np.where(f == 0, np.inf, u)
