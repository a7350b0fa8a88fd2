"""Resistance of the ground under and in front of the base.

Drained bearing resistance of a strip on its effective width (EN 1997-1 Annex D) and the
Rankine passive resistance of the ground in front of the toe. Pure numpy, one value per
wall (any broadcastable shape).
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

FloatArray = NDArray[np.float64]


def annex_d_factors(friction_deg: ArrayLike) -> tuple[FloatArray, FloatArray, FloatArray]:
    r"""Bearing resistance factors N_q, N_c, N_γ of EN 1997-1 Annex D (D.4).

    .. math::
        N_q = e^{\pi\tan\phi'}\tan^2(45° + \phi'/2),\quad
        N_c = (N_q - 1)\cot\phi',\quad N_\gamma = 2(N_q - 1)\tan\phi'

    Parameters
    ----------
    friction_deg : array_like
        Angle of shearing resistance φ' of the soil under the base [°], above 0.

    Returns
    -------
    n_q, n_c, n_gamma : numpy.ndarray
        [-]; NaN where φ' ≤ 0 (N_c has no drained value there).

    References
    ----------
    EN 1997-1:2004 Annex D.4 (N_q after Prandtl and Reissner, N_γ for a rough base).
    """
    phi = np.radians(np.asarray(friction_deg, dtype=float))
    with np.errstate(invalid="ignore", divide="ignore"):
        tan = np.tan(phi)
        n_q = np.exp(np.pi * tan) * np.tan(np.pi / 4 + phi / 2) ** 2
        n_c = (n_q - 1.0) / tan
        n_g = 2.0 * (n_q - 1.0) * tan
    bad = ~(phi > 0)
    return np.where(bad, np.nan, n_q), np.where(bad, np.nan, n_c), np.where(bad, np.nan, n_g)


def annex_d_resistance(
    vertical_kn_m: ArrayLike,
    horizontal_kn_m: ArrayLike,
    eccentricity_m: ArrayLike,
    base_width_m: ArrayLike,
    friction_deg: ArrayLike,
    cohesion_kpa: ArrayLike,
    unit_weight_kn_m3: ArrayLike,
    depth_m: ArrayLike,
) -> dict[str, FloatArray]:
    r"""Drained bearing resistance R [kN/m] of a strip footing on its effective width.

    B' = B − 2|e|, q' = γ·D, inclination factors with m = 2 (a strip):
    i_q = (1 − H/(V + B'c' cot φ'))², i_γ = (1 − H/(V + B'c' cot φ'))³,
    i_c = i_q − (1 − i_q)/(N_c tan φ'); a negative bracket or i_c counts as 0. Shape and
    base-inclination factors are 1 (strip, horizontal base and ground).

    .. math::
        R = B'\left(c'N_c i_c + q'N_q i_q + \tfrac12\gamma B' N_\gamma i_\gamma\right)

    Parameters
    ----------
    vertical_kn_m, horizontal_kn_m : array_like
        V (net of uplift) and the horizontal load H on the base [kN/m].
    eccentricity_m, base_width_m : array_like
        e and B [m].
    friction_deg, cohesion_kpa, unit_weight_kn_m3 : array_like
        φ' [°], c' [kPa] and γ [kN/m³] of the soil under the base.
    depth_m : array_like
        D, depth of the underside of the base below the ground in front [m].

    Returns
    -------
    dict of str to numpy.ndarray
        ``resistance_kn_m`` (0 where B' ≤ 0), ``effective_width_m``, ``overburden_kpa``,
        ``n_q``, ``n_c``, ``n_gamma``, ``i_q``, ``i_c``, ``i_gamma`` and ``q_ult_kpa``.

    References
    ----------
    EN 1997-1:2004 Annex D.4 (drained conditions), with m = m_B = 2 for a strip
    (B'/L' → 0).
    """
    v = np.asarray(vertical_kn_m, dtype=float)
    h = np.asarray(horizontal_kn_m, dtype=float)
    c = np.asarray(cohesion_kpa, dtype=float)
    g = np.asarray(unit_weight_kn_m3, dtype=float)
    phi = np.radians(np.asarray(friction_deg, dtype=float))
    width = np.asarray(base_width_m, dtype=float) - 2.0 * np.abs(np.asarray(eccentricity_m, dtype=float))
    n_q, n_c, n_g = annex_d_factors(friction_deg)
    q_over = g * np.asarray(depth_m, dtype=float)
    positive = np.clip(width, 0.0, None)
    with np.errstate(invalid="ignore", divide="ignore"):
        bracket = np.clip(1.0 - h / (v + positive * c / np.tan(phi)), 0.0, None)
        i_q = bracket**2
        i_g = i_q * bracket
        i_c = np.clip(i_q - (1.0 - i_q) / (n_c * np.tan(phi)), 0.0, None)
        q_ult = c * n_c * i_c + q_over * n_q * i_q + 0.5 * g * positive * n_g * i_g
    resistance = np.where(width > 0, q_ult * positive, np.where(np.isnan(width), np.nan, 0.0))
    return {
        "resistance_kn_m": resistance,
        "effective_width_m": width,
        "overburden_kpa": q_over,
        "n_q": n_q,
        "n_c": n_c,
        "n_gamma": n_g,
        "i_q": i_q,
        "i_c": i_c,
        "i_gamma": i_g,
        "q_ult_kpa": q_ult,
    }


def bearing_utilisation(
    vertical_kn_m: ArrayLike, resistance_kn_m: ArrayLike, fos_required: float
) -> FloatArray:
    """V·F_b / R: 1 when the global factor on the ultimate resistance is just F_b; inf where R = 0."""
    v = np.asarray(vertical_kn_m, dtype=float)
    r = np.asarray(resistance_kn_m, dtype=float)
    with np.errstate(invalid="ignore", divide="ignore"):
        u = v * fos_required / r
    return np.where(r == 0, np.inf, u)


def rankine_kp(friction_deg: ArrayLike) -> FloatArray:
    r"""Rankine's passive coefficient K_p = (1 + sin φ')/(1 − sin φ') for level ground, a smooth back.

    References
    ----------
    Rankine's theory; any soil mechanics textbook (e.g. R. F. Craig, *Soil Mechanics*).
    """
    s = np.sin(np.radians(np.asarray(friction_deg, dtype=float)))
    return (1.0 + s) / (1.0 - s)


def passive_resistance(
    mobilisation: float, kp: ArrayLike, unit_weight_kn_m3: ArrayLike, depth_m: ArrayLike
) -> FloatArray:
    r"""Passive resistance in front of the toe P_p = m·½·K_p·γ·D² [kN/m] (0 where D ≤ 0).

    ``mobilisation`` m is the share of the full passive resistance relied on (the
    movement needed to mobilise all of it is several times that for the active state).

    References
    ----------
    Rankine's theory (e.g. Craig, *Soil Mechanics*); partial mobilisation and allowance
    for unplanned excavation in front: BS 8002 (common practice).
    """
    d = np.clip(np.asarray(depth_m, dtype=float), 0.0, None)
    return (
        mobilisation * 0.5 * np.asarray(kp, dtype=float) * np.asarray(unit_weight_kn_m3, dtype=float) * d * d
    )
