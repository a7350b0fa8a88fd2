"""Earth and water pressure on the virtual back of a gravity wall.

Pure numpy: arrays in, arrays out, one value per wall. Heights are measured up
from the underside of the base; moments are about the base level (z = 0).
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

FloatArray = NDArray[np.float64]


def coulomb_ka(
    soil_friction_deg: ArrayLike,
    wall_friction_deg: ArrayLike = 0.0,
    backfill_slope_deg: ArrayLike = 0.0,
) -> FloatArray:
    r"""Coulomb's active earth pressure coefficient for a vertical back.

    .. math::
        K_a = \frac{\cos^2\phi'}{\cos\delta\left[1 + \sqrt{\dfrac{\sin(\phi'+\delta)
        \sin(\phi'-\beta)}{\cos\delta\cos\beta}}\right]^2}

    With δ = β = 0 this is Rankine's (1 − sin φ')/(1 + sin φ').

    Parameters
    ----------
    soil_friction_deg : array_like
        Effective angle of shearing resistance φ' of the retained soil [°].
    wall_friction_deg : array_like
        Friction δ on the virtual back [°]; the thrust is inclined at δ below
        the horizontal.
    backfill_slope_deg : array_like
        Slope β of the retained surface [°].

    Returns
    -------
    numpy.ndarray
        K_a [-]; NaN where β ≥ φ' (no active wedge exists).

    References
    ----------
    C. A. Coulomb (1776); I. Smith, *Smith's Elements of Soil Mechanics*,
    §6 (Coulomb's theory, vertical back).
    """
    phi = np.radians(np.asarray(soil_friction_deg, dtype=float))
    delta = np.radians(np.asarray(wall_friction_deg, dtype=float))
    beta = np.radians(np.asarray(backfill_slope_deg, dtype=float))
    with np.errstate(invalid="ignore"):
        root = np.sqrt(np.sin(phi + delta) * np.sin(phi - beta) / (np.cos(delta) * np.cos(beta)))
        ka = np.cos(phi) ** 2 / (np.cos(delta) * (1.0 + root) ** 2)
    return np.where(beta < phi, ka, np.nan)


def effective_thrust(
    ka: ArrayLike,
    retained_height_m: ArrayLike,
    water_height_m: ArrayLike,
    soil_unit_weight_kn_m3: ArrayLike,
    soil_saturated_unit_weight_kn_m3: ArrayLike,
    surcharge_kpa: ArrayLike,
    gamma_w_kn_m3: float,
) -> tuple[FloatArray, FloatArray]:
    r"""Resultant of the effective active pressure K_a(σ'_v + q) and its moment.

    The vertical effective stress is γ(H_r − z) above the water level h_w and
    γ(H_r − h_w) + (γ_sat − γ_w)(h_w − z) below it; the integrals are in closed form:

    .. math::
        P'_a = K_a\left[\tfrac12\gamma(H_r-h_w)^2 + \gamma(H_r-h_w)h_w
               + \tfrac12\gamma' h_w^2 + qH_r\right]

    and its moment about the base
    K_a[γ(H_r³/6 − H_r h_w²/2 + h_w³/3) + γ(H_r − h_w)h_w²/2 + γ'h_w³/6 + qH_r²/2].

    Parameters
    ----------
    ka : array_like
        Active coefficient [-].
    retained_height_m, water_height_m : array_like
        H_r and h_w above the underside of the base [m], 0 ≤ h_w ≤ H_r.
    soil_unit_weight_kn_m3, soil_saturated_unit_weight_kn_m3 : array_like
        γ above and γ_sat below the water [kN/m³].
    surcharge_kpa : array_like
        Uniform surcharge q on the retained surface [kPa].
    gamma_w_kn_m3 : float
        Unit weight of water [kN/m³].

    Returns
    -------
    thrust_kn_m, moment_knm_m : numpy.ndarray
        P'_a along the thrust direction [kN/m] and ∫p·z dz about the base [kN·m/m]
        (multiply by cos δ for the horizontal part's moment).

    References
    ----------
    Effective stress principle (Terzaghi) with Coulomb/Rankine active pressure;
    e.g. R. F. Craig, *Soil Mechanics*, chapter on lateral earth pressure.
    """
    r = np.asarray(retained_height_m, dtype=float)
    h = np.asarray(water_height_m, dtype=float)
    g = np.asarray(soil_unit_weight_kn_m3, dtype=float)
    g_sub = np.asarray(soil_saturated_unit_weight_kn_m3, dtype=float) - gamma_w_kn_m3
    q = np.asarray(surcharge_kpa, dtype=float)
    ka = np.asarray(ka, dtype=float)
    # the same closed forms, grouped so that terms of the wall alone (r, g, q) are computed
    # once per wall and only the water terms per case: force = ½γr² + ½(γ' − γ)h² + qr and
    # moment = γr³/6 + (γ' − γ)h³/6 + qr²/2
    dg = g_sub - g
    h2 = h * h
    force = (0.5 * g * r + q) * r + 0.5 * dg * h2
    moment = (g / 6.0 * r + 0.5 * q) * r * r + dg / 6.0 * (h2 * h)
    return ka * force, ka * moment


def water_thrust(water_height_m: ArrayLike, gamma_w_kn_m3: float) -> tuple[FloatArray, FloatArray]:
    r"""Hydrostatic thrust γ_w h_w²/2 on the back and its moment γ_w h_w³/6 about the base.

    Parameters
    ----------
    water_height_m : array_like
        Water height h_w above the underside of the base [m].
    gamma_w_kn_m3 : float
        Unit weight of water [kN/m³].

    Returns
    -------
    force_kn_m, moment_knm_m : numpy.ndarray

    References
    ----------
    Hydrostatics; K_a is never applied to water (e.g. Craig, *Soil Mechanics*).
    """
    h = np.asarray(water_height_m, dtype=float)
    h2 = h * h  # h**3 would go through pow(), several times slower on large arrays
    return 0.5 * gamma_w_kn_m3 * h2, gamma_w_kn_m3 / 6.0 * (h2 * h)


def base_uplift(
    water_height_m: ArrayLike, base_width_m: ArrayLike, gamma_w_kn_m3: float
) -> tuple[FloatArray, FloatArray]:
    r"""Uplift under the base, linear from γ_w h_w at the heel to 0 at the toe.

    Returns U = ½ γ_w h_w B [kN/m] and its lever arm 2B/3 from the toe [m].

    References
    ----------
    Common practice for a base with no drainage under it (linear seepage from
    heel to toe); e.g. Bond & Harris, *Decoding Eurocode 7*, retaining walls.
    """
    h = np.asarray(water_height_m, dtype=float)
    b = np.asarray(base_width_m, dtype=float)
    return 0.5 * gamma_w_kn_m3 * h * b, 2.0 * b / 3.0
